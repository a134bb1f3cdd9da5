//! The Levenberg–Marquardt solver against the NIST Statistical Reference Datasets for
//! nonlinear regression (NIST ITL, https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml,
//! public domain): from both certified start points every parameter must match its
//! certified value to 6 significant digits, the residual sum of squares to 1e-9 relative
//! and the standard deviations to 5 significant digits. The data files are in
//! fixtures/strd.

mod nist;

use fringegauge::fit::lm::{self, Bounds, LeastSquares, LmOptions, LmReport};
use nist::Dataset;

/// A one-predictor StRD model y = f(x; b) against a dataset.
struct Curve<'a> {
    data: &'a Dataset,
    f: fn(f64, &[f64]) -> f64,
}

impl LeastSquares for Curve<'_> {
    fn residual_count(&self) -> usize {
        self.data.x.len()
    }
    fn residuals(&self, b: &[f64], r: &mut [f64]) -> bool {
        for ((ri, &x), &y) in r.iter_mut().zip(&self.data.x).zip(&self.data.y) {
            *ri = (self.f)(x, b) - y;
        }
        true
    }
}

/// log10 relative error: the number of agreeing significant digits (NIST's LRE).
fn digits(value: f64, certified: f64) -> f64 {
    let rel = ((value - certified) / certified).abs();
    if rel == 0.0 { 16.0 } else { -rel.log10() }
}

/// Fits from start `k` (0 or 1) and checks the certified values; returns the report.
fn check(name: &str, file: &str, f: fn(f64, &[f64]) -> f64, k: usize) -> LmReport {
    let data = nist::parse(file).unwrap_or_else(|e| panic!("{name}: {e}"));
    let fit = lm::minimize(
        &Curve { data: &data, f },
        &data.starts[k],
        &LmOptions::default(),
        "StRD",
    )
    .unwrap_or_else(|e| panic!("{name} start {}: {e}", k + 1));
    assert_certified(name, k, &data, &fit);
    fit
}

fn assert_certified(name: &str, k: usize, data: &Dataset, fit: &LmReport) {
    let sd = fit
        .std_errors()
        .unwrap_or_else(|| panic!("{name}: no covariance"));
    let p_digits: Vec<f64> = fit
        .params
        .iter()
        .zip(&data.certified)
        .map(|(&a, &b)| digits(a, b))
        .collect();
    let sd_digits: Vec<f64> = sd
        .iter()
        .zip(&data.std_dev)
        .map(|(&a, &b)| digits(a, b))
        .collect();
    let rss_digits = digits(fit.cost, data.rss);
    println!(
        "{name} start {}: {} iterations ({:?}); digits: params {:.1?}, rss {rss_digits:.1}, sd {:.1?}",
        k + 1,
        fit.iterations,
        fit.reason,
        p_digits,
        sd_digits
    );
    assert!(
        p_digits.iter().all(|&d| d >= 6.0),
        "{name} start {}: params {:?}",
        k + 1,
        fit.params
    );
    assert!(
        rss_digits >= 9.0,
        "{name} start {}: rss {}",
        k + 1,
        fit.cost
    );
    assert!(
        sd_digits.iter().all(|&d| d >= 4.0),
        "{name} start {}: sd {sd:?}",
        k + 1
    );
    assert_eq!(fit.residuals.len() - fit.params.len(), data.dof);
}

// Lower difficulty. Misra1a: y = b1·(1 − exp(−b2·x)).
const MISRA1A: &str = include_str!("../../fixtures/strd/Misra1a.dat");
fn misra1a(x: f64, b: &[f64]) -> f64 {
    b[0] * (1.0 - (-b[1] * x).exp())
}

#[test]
fn misra1a_start_1() {
    check("Misra1a", MISRA1A, misra1a, 0);
}

#[test]
fn misra1a_start_2() {
    check("Misra1a", MISRA1A, misra1a, 1);
}

#[test]
fn misra1a_with_inactive_bounds_keeps_the_certified_values_and_deviations() {
    // Bounds of every kind, none active at the solution: the covariance carried back
    // through the transformations must still give NIST's standard deviations.
    let data = nist::parse(MISRA1A).unwrap();
    let curve = Curve {
        data: &data,
        f: misra1a,
    };
    for (k, bounds) in [
        Bounds::free(2).between(0, 0.0, 1000.0).lower(1, 0.0),
        Bounds::free(2).lower(0, 100.0).upper(1, 0.01),
    ]
    .iter()
    .enumerate()
    {
        let fit = lm::minimize_bounded(
            &curve,
            &data.starts[k],
            bounds,
            &LmOptions::default(),
            "Misra1a",
        )
        .unwrap_or_else(|e| panic!("{bounds:?}: {e}"));
        assert_certified("Misra1a bounded", k, &data, &fit);
    }
}

// Average difficulty. Kirby2: y = (b1 + b2·x + b3·x²) / (1 + b4·x + b5·x²).
const KIRBY2: &str = include_str!("../../fixtures/strd/Kirby2.dat");
fn kirby2(x: f64, b: &[f64]) -> f64 {
    (b[0] + x * (b[1] + x * b[2])) / (1.0 + x * (b[3] + x * b[4]))
}

#[test]
fn kirby2_start_1() {
    check("Kirby2", KIRBY2, kirby2, 0);
}

#[test]
fn kirby2_start_2() {
    check("Kirby2", KIRBY2, kirby2, 1);
}

// Average difficulty, and the shape of a fringe profile: two Gaussian peaks on a
// decaying background. Gauss3: y = b1·exp(−b2·x) + b3·exp(−(x−b4)²/b5²) + b6·exp(−(x−b7)²/b8²).
const GAUSS3: &str = include_str!("../../fixtures/strd/Gauss3.dat");
fn gauss3(x: f64, b: &[f64]) -> f64 {
    b[0] * (-b[1] * x).exp()
        + b[2] * (-((x - b[3]) / b[4]).powi(2)).exp()
        + b[5] * (-((x - b[6]) / b[7]).powi(2)).exp()
}

#[test]
fn gauss3_start_1() {
    check("Gauss3", GAUSS3, gauss3, 0);
}

#[test]
fn gauss3_start_2() {
    check("Gauss3", GAUSS3, gauss3, 1);
}

#[test]
fn gauss3_with_physical_bounds_keeps_the_certified_values_and_deviations() {
    // The bounds a profile fit would carry: amplitudes, decay and widths non-negative,
    // centres inside the sampled range (x = 1..250).
    let data = nist::parse(GAUSS3).unwrap();
    let bounds = Bounds::from_arrays(
        &[0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 1.0, 0.0],
        &[
            f64::INFINITY,
            f64::INFINITY,
            f64::INFINITY,
            250.0,
            f64::INFINITY,
            f64::INFINITY,
            250.0,
            f64::INFINITY,
        ],
    );
    for k in 0..2 {
        let curve = Curve {
            data: &data,
            f: gauss3,
        };
        let fit = lm::minimize_bounded(
            &curve,
            &data.starts[k],
            &bounds,
            &LmOptions::default(),
            "Gauss3",
        )
        .unwrap_or_else(|e| panic!("start {}: {e}", k + 1));
        assert_certified("Gauss3 bounded", k, &data, &fit);
    }
}

// Higher difficulty. Thurber: cubic over cubic.
const THURBER: &str = include_str!("../../fixtures/strd/Thurber.dat");
fn thurber(x: f64, b: &[f64]) -> f64 {
    (b[0] + x * (b[1] + x * (b[2] + x * b[3]))) / (1.0 + x * (b[4] + x * (b[5] + x * b[6])))
}

#[test]
fn thurber_start_1() {
    check("Thurber", THURBER, thurber, 0);
}

#[test]
fn thurber_start_2() {
    check("Thurber", THURBER, thurber, 1);
}

// Higher difficulty. MGH09 (Kowalik & Osborne): y = b1·(x² + b2·x) / (x² + b3·x + b4).
const MGH09: &str = include_str!("../../fixtures/strd/MGH09.dat");
fn mgh09(x: f64, b: &[f64]) -> f64 {
    b[0] * (x * x + x * b[1]) / (x * x + x * b[2] + b[3])
}

#[test]
fn mgh09_start_1() {
    check("MGH09", MGH09, mgh09, 0);
}

#[test]
fn mgh09_start_2() {
    check("MGH09", MGH09, mgh09, 1);
}

#[test]
fn the_reader_rejects_a_file_that_disagrees_with_its_header() {
    // One observation short: the header's data range runs past the end of the file.
    let mut lines: Vec<&str> = MISRA1A.lines().collect();
    lines.pop();
    let err = nist::parse(&lines.join("\n")).unwrap_err();
    assert!(err.contains("bad line range for 'Data'"), "{err}");
    // A header that promises one observation more than its data range holds.
    let wrong: String = MISRA1A
        .lines()
        .map(|l| match l.starts_with("Number of Observations:") {
            true => "Number of Observations: 15\n".to_string(),
            false => format!("{l}\n"),
        })
        .collect();
    assert_ne!(wrong, MISRA1A);
    let err = nist::parse(&wrong).unwrap_err();
    assert!(err.contains("header says 15 observations"), "{err}");
}
