use super::*;

/// J0 and J1 from mpmath 1.3.0 at 50 digits (fixtures/bessel/generate.py).
const MPMATH: &str = include_str!("../../../fixtures/bessel/j0_j1_mpmath.csv");

fn fixture() -> Vec<(f64, f64, f64)> {
    MPMATH
        .lines()
        .skip(1)
        .map(|line| {
            let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
            (v[0], v[1], v[2])
        })
        .collect()
}

/// Relative error, or where the true value is below 1e-4 the absolute error scaled so that
/// 1e-14 absolute counts as 1e-10 (near a zero only the absolute error is meaningful).
fn error(got: f64, want: f64) -> f64 {
    if want.abs() < 1e-4 {
        (got - want).abs() * 1e4
    } else {
        ((got - want) / want).abs()
    }
}

#[test]
fn matches_mpmath_over_0_to_400() {
    let rows = fixture();
    assert!(rows.len() > 200);
    let mut worst_abs = 0.0f64;
    for &(x, want0, want1) in &rows {
        for (got, want) in [(j0(x), want0), (j1(x), want1)] {
            let abs = (got - want).abs();
            worst_abs = worst_abs.max(abs);
            if want.abs() < 1e-4 {
                assert!(abs < 1e-14, "x = {x}: {got} vs {want}");
            } else {
                let rel = abs / want.abs();
                assert!(rel < 1e-10, "x = {x}: {got} vs {want} (rel {rel:e})");
            }
        }
        // Symmetry: J0 even, J1 odd.
        assert_eq!(j0(-x), j0(x));
        assert_eq!(j1(-x), -j1(x));
    }
    // The design target is a few ulps absolute (measured: 2.9e-16 worst); this keeps a
    // regression from hiding under the looser relative bound.
    assert!(worst_abs < 1e-15, "worst absolute error {worst_abs:e}");
}

/// Abramowitz & Stegun, table 9.1 (values from memory, 10 decimals).
#[test]
fn matches_abramowitz_stegun_table_9_1() {
    let table = [
        (1.0, 0.7651976866, 0.4400505857),
        (2.0, 0.2238907791, 0.5767248078),
        (5.0, -0.1775967713, -0.3275791376),
        (10.0, -0.2459357645, 0.0434727462),
    ];
    for (x, want0, want1) in table {
        assert!((j0(x) - want0).abs() < 1e-10, "J0({x}) = {}", j0(x));
        assert!((j1(x) - want1).abs() < 1e-10, "J1({x}) = {}", j1(x));
    }
}

fn bisect(f: fn(f64) -> f64, mut lo: f64, mut hi: f64) -> f64 {
    assert!(f(lo) * f(hi) < 0.0);
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(mid) * f(lo) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Zeros j_{1,s} of J1 and j_{0,s} of J0: Abramowitz & Stegun, table 9.5 (10 decimals).
#[test]
fn zeros_match_abramowitz_stegun_table_9_5() {
    for want in [3.8317059702, 7.0155866698, 10.1734681351] {
        let z = bisect(j1, want - 0.5, want + 0.5);
        assert!((z - want).abs() < 1e-9, "{z} vs {want}");
    }
    for want in [2.4048255577, 5.5200781103] {
        let z = bisect(j0, want - 0.5, want + 0.5);
        assert!((z - want).abs() < 1e-9, "{z} vs {want}");
    }
}

#[test]
fn jinc_is_two_j1_over_x_and_even() {
    assert_eq!(jinc(0.0), 1.0);
    assert_eq!(jinc_derivative(0.0), 0.0);
    for &(x, _, want1) in fixture().iter().filter(|r| r.0 > 0.0) {
        let want = 2.0 * want1 / x;
        let got = jinc(x);
        assert!(error(got, want) < 1e-10, "x = {x}: {got} vs {want}");
        assert_eq!(jinc(-x), got);
        assert_eq!(jinc_derivative(-x), -jinc_derivative(x));
    }
}

/// Fourth-order central difference: error O(h⁴) plus rounding ε/h.
fn central_difference(f: impl Fn(f64) -> f64, x: f64, h: f64) -> f64 {
    (8.0 * (f(x + h) - f(x - h)) - (f(x + 2.0 * h) - f(x - 2.0 * h))) / (12.0 * h)
}

#[test]
fn derivatives_match_central_differences() {
    let h = 1e-3;
    let mut x = -60.0;
    while x < 400.0 {
        let d = central_difference(jinc, x, h);
        assert!(
            (jinc_derivative(x) - d).abs() < 1e-10,
            "x = {x}: {} vs {d}",
            jinc_derivative(x)
        );
        let di = central_difference(|t| airy_intensity_and_derivative(t).0, x, h);
        let (i, got) = airy_intensity_and_derivative(x);
        assert!((i - jinc(x).powi(2)).abs() < 1e-16);
        assert!((got - di).abs() < 1e-10, "x = {x}: {got} vs {di}");
        // J0' = −J1 (A&S 9.1.28) ties the two functions together across all regions.
        let dj0 = central_difference(j0, x, h);
        assert!((dj0 + j1(x)).abs() < 1e-10, "x = {x}");
        x += 0.737;
    }
}

#[test]
fn jinc_derivative_is_smooth_where_the_series_hands_over() {
    // Near 0 the series gives −x/4 (leading term of −2·J2(x)/x).
    let tiny = 1e-8;
    assert!((jinc_derivative(tiny) + tiny / 4.0).abs() < 1e-22);
    // Across each switch the step must be what the slope predicts, to rounding.
    let delta = 1e-9;
    for x in [SERIES_MAX, HANKEL_MIN] {
        let step = jinc_derivative(x + delta) - jinc_derivative(x - delta);
        let slope = central_difference(jinc_derivative, x, 1e-3);
        assert!(
            (step - 2.0 * delta * slope).abs() < 1e-15,
            "x = {x}: {step:e}"
        );
        for f in [j0, j1] {
            let step = f(x + delta) - f(x - delta);
            let slope = central_difference(f, x, 1e-3);
            assert!(
                (step - 2.0 * delta * slope).abs() < 1e-15,
                "x = {x}: {step:e}"
            );
        }
    }
}

#[test]
fn miller_start_order_is_converged() {
    let mut x = SERIES_MAX;
    while x < HANKEL_MIN {
        let start = miller_start(x);
        let (a0, a1, a2) = miller_from(x, start);
        let (b0, b1, b2) = miller_from(x, start + 30);
        for (a, b) in [(a0, b0), (a1, b1), (a2, b2)] {
            // Only rounding differs: a few ulps of the normalisation.
            assert!((a - b).abs() < 4e-16, "x = {x}: {a} vs {b}");
        }
        x += 0.25;
    }
}

#[test]
fn non_finite_input() {
    assert!(j0(f64::NAN).is_nan());
    assert!(jinc(f64::NAN).is_nan());
    assert_eq!(j1(f64::INFINITY), 0.0);
    assert_eq!(jinc(f64::NEG_INFINITY), 0.0);
}
