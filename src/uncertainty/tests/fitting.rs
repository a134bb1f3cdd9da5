use super::*;

// ---- models that fit internally -----------------------------------------------------------

#[test]
fn grouped_inputs_collapse_into_one_line_at_the_first_member() {
    // Least-squares slope through 20 points (x_k = k exact, y_k measured with σ); its standard
    // uncertainty is σ/√Sxx (textbook straight-line fit). A `scale` input sits between the
    // two halves of the group.
    let sigma = 0.05;
    let xs: Vec<f64> = (0..20).map(f64::from).collect();
    let mut inputs: Vec<Input> = (0..10)
        .map(|k| {
            Input::normal(format!("y{k}"), 2.0 + 0.5 * xs[k], sigma).in_group("spot positions")
        })
        .collect();
    inputs.push(Input::normal("scale", 1.0, 0.01));
    inputs.extend((10..20).map(|k| {
        Input::normal(format!("y{k}"), 2.0 + 0.5 * xs[k], sigma).in_group("spot positions")
    }));
    let model = |v: &[f64]| -> Model {
        let ys: Vec<f64> = v[..10].iter().chain(&v[11..]).copied().collect();
        let mx = xs.iter().sum::<f64>() / 20.0;
        let my = ys.iter().sum::<f64>() / 20.0;
        let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - mx) * (y - my)).sum();
        let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
        Ok(vec![v[10] * sxy / sxx])
    };
    let p = propagate(&inputs, &[], model).unwrap();
    let est = &p.outputs[0];
    let sxx: f64 = xs.iter().map(|x| (x - 9.5f64).powi(2)).sum();
    let u_slope = sigma / sxx.sqrt();
    assert_eq!(est.budget.len(), 2);
    assert_eq!(est.budget[0].input, "spot positions");
    assert_eq!(est.budget[0].sensitivity, None);
    assert!(close(est.budget[0].contribution, u_slope, 1e-9 * u_slope));
    assert_eq!(est.budget[1].input, "scale");
    assert!(close(est.budget[1].sensitivity.unwrap(), 0.5, 1e-9));
    let want = (u_slope.powi(2) + (0.5f64 * 0.01).powi(2)).sqrt();
    assert!(close(est.u, want, 1e-9 * want));
}

#[test]
fn a_group_counts_the_correlations_inside_it() {
    let inputs = [
        Input::normal("a", 0.0, 1.0).in_group("pair"),
        Input::normal("b", 0.0, 1.0).in_group("pair"),
    ];
    let corr = [Correlation { i: 0, j: 1, r: 0.5 }];
    let p = propagate(&inputs, &corr, additive).unwrap();
    // u² = 1 + 1 + 2·0.5 (JCGM 100:2008 eq. 16).
    assert!(close(p.outputs[0].u, 3f64.sqrt(), 1e-12));
    assert!(close(
        p.outputs[0].budget[0].contribution,
        3f64.sqrt(),
        1e-12
    ));
}

/// Geometric circle fit by Gauss–Newton iterations to convergence: a least-squares fit inside
/// the model. Inputs x0, y0, x1, y1, ...; outputs centre (a, b) and radius R.
fn circle_fit(v: &[f64]) -> Model {
    use nalgebra::{Matrix3, Vector3};
    let pts: Vec<(f64, f64)> = v.chunks(2).map(|c| (c[0], c[1])).collect();
    let n = pts.len() as f64;
    let (mut a, mut b) = (
        pts.iter().map(|p| p.0).sum::<f64>() / n,
        pts.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let mut r = pts.iter().map(|p| (p.0 - a).hypot(p.1 - b)).sum::<f64>() / n;
    for _ in 0..100 {
        let (mut jtj, mut jtr) = (Matrix3::zeros(), Vector3::zeros());
        for &(x, y) in &pts {
            let d = (x - a).hypot(y - b);
            let row = Vector3::new(-(x - a) / d, -(y - b) / d, -1.0);
            jtj += row * row.transpose();
            jtr += row * (d - r);
        }
        let step = jtj.lu().solve(&(-jtr)).ok_or(UncertaintyError::NoOutputs)?;
        a += step[0];
        b += step[1];
        r += step[2];
        if step.norm() < 1e-14 * r {
            break;
        }
    }
    Ok(vec![a, b, r])
}

#[test]
fn an_iterative_fit_inside_the_model_differentiates_cleanly() {
    // N points evenly spaced on a full circle, each coordinate with σ: to first order
    // σ_R = σ/√N and each centre coordinate σ·√(2/N) (Al-Sharadqah & Chernov, Electron. J.
    // Statist. 3:886, 2009, values in REFERENCES.md).
    let (n, sigma, radius) = (12, 0.05, 10.0);
    let inputs: Vec<Input> = (0..n)
        .flat_map(|k| {
            let t = 2.0 * std::f64::consts::PI * k as f64 / n as f64 + 0.3;
            [
                Input::normal(format!("x{k}"), 3.0 + radius * t.cos(), sigma)
                    .in_group("ring points"),
                Input::normal(format!("y{k}"), -2.0 + radius * t.sin(), sigma)
                    .in_group("ring points"),
            ]
        })
        .collect();
    let p = propagate(&inputs, &[], circle_fit).unwrap();
    let nf = n as f64;
    assert!(close(p.outputs[2].value, radius, 1e-10));
    assert!(
        close(p.outputs[2].u, sigma / nf.sqrt(), 1e-6 * sigma),
        "{}",
        p.outputs[2].u
    );
    for centre in &p.outputs[..2] {
        assert!(
            close(centre.u, sigma * (2.0 / nf).sqrt(), 1e-6 * sigma),
            "{}",
            centre.u
        );
        assert_eq!(centre.budget.len(), 1);
    }
}
