use super::*;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

fn on_circle(c: Circle, from_rad: f64, to_rad: f64, n: usize) -> Vec<[f64; 2]> {
    (0..n)
        .map(|i| {
            let t = from_rad + (to_rad - from_rad) * i as f64 / n as f64;
            [
                c.centre[0] + c.radius * t.cos(),
                c.centre[1] + c.radius * t.sin(),
            ]
        })
        .collect()
}

/// Points displaced along the normal by N(0, σ²), the model of Al-Sharadqah & Chernov.
fn noisy(
    c: Circle,
    from_rad: f64,
    to_rad: f64,
    n: usize,
    sigma: f64,
    rng: &mut StdRng,
) -> Vec<[f64; 2]> {
    let normal = Normal::new(0.0, sigma).unwrap();
    (0..n)
        .map(|i| {
            let t = from_rad + (to_rad - from_rad) * i as f64 / n as f64;
            let r = c.radius + normal.sample(rng);
            [c.centre[0] + r * t.cos(), c.centre[1] + r * t.sin()]
        })
        .collect()
}

fn close(a: Circle, b: Circle, tol: f64) -> bool {
    let scale = b.radius.max(b.centre[0].abs()).max(b.centre[1].abs());
    (a.centre[0] - b.centre[0]).abs() < tol * scale
        && (a.centre[1] - b.centre[1]).abs() < tol * scale
        && (a.radius - b.radius).abs() < tol * scale
}

#[test]
fn exact_circles_are_recovered() {
    let cases = [
        (
            Circle {
                centre: [0.0, 0.0],
                radius: 1.0,
            },
            0.0,
            std::f64::consts::TAU,
            12,
        ),
        (
            Circle {
                centre: [1e3, -2e3],
                radius: 5.0,
            },
            0.3,
            2.0,
            7,
        ),
        (
            Circle {
                centre: [-3.5, 12.0],
                radius: 250.0,
            },
            -1.0,
            0.2,
            40,
        ),
        (
            Circle {
                centre: [0.01, 0.02],
                radius: 1e-4,
            },
            0.0,
            3.0,
            3,
        ),
    ];
    for (c, a, b, n) in cases {
        let pts = on_circle(c, a, b, n);
        let t = fit_circle_taubin(&pts).unwrap();
        let h = fit_circle_hyper(&pts).unwrap();
        assert!(close(t, c, 1e-9), "Taubin {t:?} vs {c:?}");
        assert!(close(h, c, 1e-9), "hyper {h:?} vs {c:?}");
        let start = Circle {
            centre: [c.centre[0] + 0.1 * c.radius, c.centre[1]],
            radius: 0.8 * c.radius,
        };
        let g = refine_circle(&pts, start).unwrap();
        assert!(close(g.circle, c, 1e-9), "geometric {g:?} vs {c:?}");
        assert!(g.rms < 1e-9 * c.radius.max(1.0));
        assert_eq!(g.points, n);
    }
}

fn mean_std(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let s = (v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (m, s)
}

/// Full ring, N points: σ_R = σ⊥/√N and σ_centre = σ⊥·√(2/N) (Al-Sharadqah & Chernov
/// 2009, as quoted in REFERENCES.md). Both the scatter over seeded trials and the stated
/// covariance must agree with these.
#[test]
fn noisy_ring_scatter_matches_theory_and_stated_covariance() {
    let truth = Circle {
        centre: [30.0, -20.0],
        radius: 50.0,
    };
    let (n, sigma, trials) = (100usize, 0.2, 400);
    let mut rng = StdRng::seed_from_u64(2009);
    let (mut cx, mut cy, mut r) = (vec![], vec![], vec![]);
    let (mut stated_r, mut stated_c) = (0.0, 0.0);
    for _ in 0..trials {
        let pts = noisy(truth, 0.0, std::f64::consts::TAU, n, sigma, &mut rng);
        let fit = refine_circle(&pts, fit_circle_hyper(&pts).unwrap()).unwrap();
        cx.push(fit.circle.centre[0]);
        cy.push(fit.circle.centre[1]);
        r.push(fit.circle.radius);
        stated_r += fit.covariance[2][2].sqrt() / trials as f64;
        stated_c += fit.covariance[0][0].sqrt() / trials as f64;
    }
    let want_r = sigma / (n as f64).sqrt();
    let want_c = sigma * (2.0 / n as f64).sqrt();
    let (mr, sr) = mean_std(&r);
    let (mx, sx) = mean_std(&cx);
    let (_, sy) = mean_std(&cy);
    // 400 trials estimate a standard deviation to about ±3.5 % (1/√(2·400)).
    for (got, want) in [
        (sr, want_r),
        (sx, want_c),
        (sy, want_c),
        (stated_r, want_r),
        (stated_c, want_c),
    ] {
        assert!((got / want - 1.0).abs() < 0.12, "{got} vs {want}");
    }
    assert!((mr - truth.radius).abs() < 4.0 * want_r / (trials as f64).sqrt() + 1e-3 * sigma);
    assert!((mx - truth.centre[0]).abs() < 4.0 * want_c / (trials as f64).sqrt());
}

/// Kasa's fit (least squares on z + Bx + Cy + D = 0), here only as the biased contrast.
fn kasa(points: &[[f64; 2]]) -> Circle {
    let a = DMatrix::from_fn(points.len(), 3, |i, j| match j {
        0 => points[i][0],
        1 => points[i][1],
        _ => 1.0,
    });
    let b = nalgebra::DVector::from_fn(points.len(), |i, _| {
        -(points[i][0].powi(2) + points[i][1].powi(2))
    });
    let s = a.svd(true, true).solve(&b, 1e-14).unwrap();
    let centre = [-s[0] / 2.0, -s[1] / 2.0];
    Circle {
        centre,
        radius: (centre[0].powi(2) + centre[1].powi(2) - s[2]).sqrt(),
    }
}

/// On a 60° arc Kasa's fit is badly biased low (REFERENCES.md, after Al-Sharadqah &
/// Chernov 2009); the hyper fit's bias must stay small against its own scatter.
#[test]
fn hyper_fit_is_not_biased_on_a_short_arc() {
    let truth = Circle {
        centre: [0.0, 0.0],
        radius: 100.0,
    };
    let (n, sigma, trials) = (60usize, 1.0, 400);
    let mut rng = StdRng::seed_from_u64(60);
    let (mut hyper, mut kasa_r, mut geometric) = (vec![], vec![], vec![]);
    let arc = std::f64::consts::FRAC_PI_3;
    for _ in 0..trials {
        let pts = noisy(truth, -arc / 2.0, arc / 2.0, n, sigma, &mut rng);
        let h = fit_circle_hyper(&pts).unwrap();
        hyper.push(h.radius);
        kasa_r.push(kasa(&pts).radius);
        geometric.push(refine_circle(&pts, h).unwrap().circle.radius);
    }
    let (mh, sh) = mean_std(&hyper);
    let (mk, _) = mean_std(&kasa_r);
    let (mg, sg) = mean_std(&geometric);
    let bias_h = mh - truth.radius;
    let bias_k = mk - truth.radius;
    assert!(
        bias_h.abs() < 0.2 * sh,
        "hyper bias {bias_h} vs scatter {sh}"
    );
    assert!(
        (mg - truth.radius).abs() < 0.2 * sg,
        "geometric bias {} vs {sg}",
        mg - truth.radius
    );
    // The contrast shows the test can tell: Kasa's bias is several times the hyper one.
    assert!(
        bias_k < -0.3 * sh && bias_k.abs() > 3.0 * bias_h.abs(),
        "Kasa bias {bias_k}"
    );
}

#[test]
fn bad_input_gives_errors() {
    let two = [[0.0, 0.0], [1.0, 1.0]];
    let line = [[0.0, 0.0], [1.0, 1.0], [2.0, 2.0], [3.0, 3.0]];
    let same = [[1.0, 2.0]; 5];
    let nan = [[0.0, 0.0], [1.0, f64::NAN], [2.0, 0.0]];
    type Fit = fn(&[[f64; 2]]) -> Result<Circle, FitError>;
    let fits: [Fit; 2] = [fit_circle_taubin, fit_circle_hyper];
    for fit in fits {
        assert!(matches!(
            fit(&two),
            Err(FitError::TooFewPoints {
                got: 2,
                need: 3,
                ..
            })
        ));
        assert!(
            matches!(fit(&line), Err(FitError::Singular { .. })),
            "{:?}",
            fit(&line)
        );
        assert!(matches!(fit(&same), Err(FitError::Singular { .. })));
        assert!(matches!(fit(&nan), Err(FitError::NonFinite { .. })));
        assert!(matches!(fit(&[]), Err(FitError::TooFewPoints { .. })));
    }
    let start = Circle {
        centre: [0.0, 5.0],
        radius: 5.0,
    };
    assert!(matches!(
        refine_circle(&two, start),
        Err(FitError::TooFewPoints { .. })
    ));
    assert!(matches!(
        refine_circle(&nan, start),
        Err(FitError::NonFinite { .. })
    ));
    let bad_start = Circle {
        centre: [f64::NAN, 0.0],
        radius: 1.0,
    };
    let pts = on_circle(start, 0.0, 6.0, 8);
    assert!(matches!(
        refine_circle(&pts, bad_start),
        Err(FitError::NonFinite { .. })
    ));
    // Collinear points have no finite circle: the geometric fit must not claim one.
    assert!(refine_circle(&line, start).is_err());
}

#[test]
fn three_points_give_the_circumcircle_with_no_scatter_estimate() {
    let c = Circle {
        centre: [2.0, -1.0],
        radius: 3.0,
    };
    let pts = on_circle(c, 0.1, 4.0, 3);
    let fit = refine_circle(&pts, fit_circle_taubin(&pts).unwrap()).unwrap();
    assert!(close(fit.circle, c, 1e-10));
    assert!(fit.covariance[2][2].is_nan());
}
