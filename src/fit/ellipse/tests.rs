use super::*;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

fn sample(e: &Ellipse, from: f64, to: f64, n: usize) -> Vec<[f64; 2]> {
    (0..n)
        .map(|i| e.point_at(from + (to - from) * i as f64 / n as f64))
        .collect()
}

/// Angle difference modulo π (an axis has no sign).
fn axis_difference(a: f64, b: f64) -> f64 {
    let d = (a - b).rem_euclid(PI);
    d.min(PI - d)
}

fn assert_close(got: &Ellipse, want: &Ellipse, tol: f64) {
    let size = want
        .semi_major
        .max(want.centre[0].abs())
        .max(want.centre[1].abs());
    for (g, w) in [
        (got.centre[0], want.centre[0]),
        (got.centre[1], want.centre[1]),
        (got.semi_major, want.semi_major),
        (got.semi_minor, want.semi_minor),
    ] {
        assert!((g - w).abs() < tol * size, "{got:?} vs {want:?}");
    }
    assert!(
        axis_difference(got.angle_rad, want.angle_rad) < tol * size / want.semi_minor,
        "{got:?} vs {want:?}"
    );
    assert!(got.angle_rad > -FRAC_PI_2 && got.angle_rad <= FRAC_PI_2);
}

#[test]
fn exact_ellipses_are_recovered() {
    let cases = [
        ([0.0, 0.0], 2.0, 1.0, 0.0, 0.0, 6.0, 10),
        ([10.0, -4.0], 5.0, 3.0, 0.7, 0.0, 6.0, 50),
        ([-300.0, 250.0], 40.0, 12.0, -1.2, 0.5, 3.5, 30),
        ([1e3, 2e3], 100.0, 99.0, 0.3, 0.0, 6.2, 200),
        ([0.5, 0.5], 0.01, 0.002, FRAC_PI_2, 0.0, 6.0, 5),
        ([0.0, 0.0], 3.0, 1.0, -0.4, -0.8, 1.8, 12),
    ];
    for (centre, a, b, angle_rad, from, to, n) in cases {
        let want = Ellipse {
            centre,
            semi_major: a,
            semi_minor: b,
            angle_rad,
        };
        let got = fit_ellipse_direct(&sample(&want, from, to, n)).unwrap();
        assert_close(&got, &want, 1e-9);
    }
}

#[test]
fn noisy_ellipse_is_recovered_within_its_scatter() {
    let want = Ellipse {
        centre: [3.0, -2.0],
        semi_major: 5.0,
        semi_minor: 3.0,
        angle_rad: 0.4,
    };
    let mut rng = StdRng::seed_from_u64(1998);
    let noise = Normal::new(0.0, 0.01).unwrap();
    let pts: Vec<[f64; 2]> = sample(&want, 0.0, std::f64::consts::TAU, 400)
        .into_iter()
        .map(|[x, y]| [x + noise.sample(&mut rng), y + noise.sample(&mut rng)])
        .collect();
    let got = fit_ellipse_direct(&pts).unwrap();
    // σ/√N ≈ 5e-4 per coordinate; a few times that bounds every parameter (common
    // practice), and the bias of the algebraic fit is O(σ²/b) ≈ 3e-5.
    assert_close(&got, &want, 5e-4);
    assert!((got.ellipticity() - 0.4).abs() < 1e-3);
}

#[test]
fn a_circle_has_equal_axes() {
    let circle = Ellipse {
        centre: [7.0, 8.0],
        semi_major: 4.0,
        semi_minor: 4.0,
        angle_rad: 0.0,
    };
    let got = fit_ellipse_direct(&sample(&circle, 0.0, 6.0, 40)).unwrap();
    assert!((got.semi_major - 4.0).abs() < 1e-9 && (got.semi_minor - 4.0).abs() < 1e-9);
    assert!(got.ellipticity() < 1e-9 && got.eccentricity() < 1e-4);
    assert!((got.centre[0] - 7.0).abs() < 1e-9 && (got.centre[1] - 8.0).abs() < 1e-9);
}

#[test]
fn shape_measures_and_points() {
    let e = Ellipse {
        centre: [1.0, 2.0],
        semi_major: 5.0,
        semi_minor: 3.0,
        angle_rad: FRAC_PI_2,
    };
    // 3-4-5 triangle: e = 4/5.
    assert!((e.eccentricity() - 0.8).abs() < 1e-15);
    assert!((e.ellipticity() - 0.4).abs() < 1e-15);
    // The major axis is vertical: t = 0 is straight up, t = π/2 to the left.
    let [x, y] = e.point_at(0.0);
    assert!((x - 1.0).abs() < 1e-12 && (y - 7.0).abs() < 1e-12);
    let [x, y] = e.point_at(FRAC_PI_2);
    assert!((x + 2.0).abs() < 1e-12 && (y - 2.0).abs() < 1e-12);
}

#[test]
fn degenerate_input_gives_errors() {
    let few = [[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [-1.0, 0.0]];
    assert!(matches!(
        fit_ellipse_direct(&few),
        Err(FitError::TooFewPoints {
            got: 4,
            need: 5,
            ..
        })
    ));
    let line: Vec<[f64; 2]> = (0..10).map(|i| [i as f64, 2.0 * i as f64 + 1.0]).collect();
    assert!(matches!(
        fit_ellipse_direct(&line),
        Err(FitError::Singular { .. })
    ));
    assert!(matches!(
        fit_ellipse_direct(&[[3.0, 3.0]; 8]),
        Err(FitError::Singular { .. })
    ));
    let mut nan = line.clone();
    nan[3][0] = f64::NAN;
    assert!(matches!(
        fit_ellipse_direct(&nan),
        Err(FitError::NonFinite { .. })
    ));
    // Two crossing lines are a degenerate conic, yet the fit is ellipse-specific
    // (Fitzgibbon et al.): it still returns an ellipse, and since the points are unchanged
    // by a quarter turn about the origin, so is that ellipse: a centred circle.
    let cross: Vec<[f64; 2]> = (-5..=5)
        .flat_map(|i| [[i as f64, i as f64], [i as f64, -i as f64]])
        .collect();
    let got = fit_ellipse_direct(&cross).unwrap();
    assert!(got.centre[0].abs() < 1e-12 && got.centre[1].abs() < 1e-12);
    assert!(got.ellipticity() < 1e-12, "{got:?}");
}
