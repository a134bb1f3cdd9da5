use super::*;

struct Rosenbrock;
impl LeastSquares for Rosenbrock {
    fn residual_count(&self) -> usize {
        2
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        r[0] = 10.0 * (p[1] - p[0] * p[0]);
        r[1] = 1.0 - p[0];
        true
    }
}

#[test]
fn rosenbrock_valley_converges_to_zero_residual() {
    // Moré, Garbow & Hillstrom (1981) test problem 1, start (−1.2, 1), minimum (1, 1).
    let fit = minimize(
        &Rosenbrock,
        &[-1.2, 1.0],
        &LmOptions::default(),
        "Rosenbrock",
    )
    .unwrap();
    assert!((fit.params[0] - 1.0).abs() < 1e-10 && (fit.params[1] - 1.0).abs() < 1e-10);
}

struct Undetermined;
impl LeastSquares for Undetermined {
    fn residual_count(&self) -> usize {
        3
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        // Only p0 + p1 is determined by the data.
        for (i, v) in r.iter_mut().enumerate() {
            *v = p[0] + p[1] - i as f64;
        }
        true
    }
}

#[test]
fn rank_deficient_model_reports_no_covariance() {
    let fit = minimize(&Undetermined, &[0.0, 0.0], &LmOptions::default(), "sum").unwrap();
    assert!((fit.params[0] + fit.params[1] - 1.0).abs() < 1e-9);
    assert!(fit.covariance().is_none());
}

#[test]
fn too_few_residuals_is_an_error() {
    assert!(matches!(
        minimize(&Rosenbrock, &[0.0, 0.0, 0.0], &LmOptions::default(), "x"),
        Err(FitError::TooFewPoints { .. })
    ));
}

/// y = a·exp(−k·x) + c on exact data from a = 3, k = 0.7, c = 0.5, with a little
/// deterministic scatter so that s² > 0.
struct Decay;
const DECAY_N: usize = 12;
impl LeastSquares for Decay {
    fn residual_count(&self) -> usize {
        DECAY_N
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        for (i, v) in r.iter_mut().enumerate() {
            let x = i as f64 * 0.5;
            let scatter = 0.01 * ((i * 7 % 5) as f64 - 2.0);
            *v = p[0] * (-p[1] * x).exp() + p[2] - (3.0 * (-0.7 * x).exp() + 0.5 + scatter);
        }
        true
    }
}

#[test]
fn inactive_bounds_reproduce_the_unbounded_fit_and_its_covariance() {
    let opts = LmOptions::default();
    let free = minimize(&Decay, &[1.0, 0.2, 0.0], &opts, "decay").unwrap();
    let bounds = Bounds::free(3)
        .between(0, 0.0, 10.0)
        .lower(1, 0.01)
        .upper(2, 5.0);
    let bounded = minimize_bounded(&Decay, &[1.0, 0.2, 0.0], &bounds, &opts, "decay").unwrap();
    let (cf, cb) = (free.covariance().unwrap(), bounded.covariance().unwrap());
    for i in 0..3 {
        assert!((free.params[i] - bounded.params[i]).abs() < 1e-9 * free.params[i].abs().max(1.0));
        for j in 0..3 {
            let scale = (cf[(i, i)] * cf[(j, j)]).sqrt();
            assert!(
                (cf[(i, j)] - cb[(i, j)]).abs() < 1e-6 * scale,
                "{cf} vs {cb}"
            );
        }
    }
}

#[test]
fn an_active_bound_holds_the_parameter_and_withholds_the_covariance() {
    // The data want k = 0.7; k ≤ 0.5 or k in [0, 0.5] must stop on the bound, and
    // k ≥ 0.9 on the other side.
    for (limit, edge) in [
        (Limit::Upper(0.5), 0.5),
        (Limit::Both(0.0, 0.5), 0.5),
        (Limit::Lower(0.9), 0.9),
    ] {
        let bounds = Bounds::free(3).with(1, limit);
        let start = [1.0, if edge > 0.7 { 1.5 } else { 0.2 }, 0.0];
        let fit =
            minimize_bounded(&Decay, &start, &bounds, &LmOptions::default(), "decay").unwrap();
        assert!(limit.contains(fit.params[1]), "{limit:?}: {:?}", fit.params);
        assert!(
            (fit.params[1] - edge).abs() < 1e-6,
            "{limit:?}: {:?}",
            fit.params
        );
        assert_eq!(fit.at_bound, [1], "{limit:?}");
        assert!(fit.covariance().is_none());
    }
}

#[test]
fn a_start_outside_its_bounds_or_a_broken_bound_is_an_error() {
    let opts = LmOptions::default();
    let outside = minimize_bounded(
        &Decay,
        &[1.0, 0.2, 0.0],
        &Bounds::free(3).lower(1, 0.3),
        &opts,
        "decay",
    );
    let Err(FitError::Bounds { reason, .. }) = outside else {
        panic!("{outside:?}");
    };
    assert!(reason.contains("parameter 1"), "{reason}");
    for bounds in [
        Bounds::free(3).between(0, 2.0, 1.0),
        Bounds::free(3).lower(2, f64::NAN),
        Bounds::free(2),
    ] {
        assert!(matches!(
            minimize_bounded(&Decay, &[1.0, 0.2, 0.0], &bounds, &opts, "decay"),
            Err(FitError::Bounds { .. })
        ));
    }
}

#[test]
fn running_out_of_iterations_says_so() {
    let opts = LmOptions {
        max_iterations: 2,
        ..LmOptions::default()
    };
    let err = minimize(&Rosenbrock, &[-1.2, 1.0], &opts, "Rosenbrock").unwrap_err();
    let FitError::NotConverged { reason, .. } = &err else {
        panic!("{err:?}");
    };
    assert!(reason.contains("2 iterations"), "{err}");
}

/// Rosenbrock with the sign of its Jacobian flipped: every predicted descent climbs.
struct WrongJacobian;
impl LeastSquares for WrongJacobian {
    fn residual_count(&self) -> usize {
        2
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        Rosenbrock.residuals(p, r)
    }
    fn jacobian(&self, p: &[f64], _r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        jac[(0, 0)] = 20.0 * p[0];
        jac[(0, 1)] = -10.0;
        jac[(1, 0)] = 1.0;
        jac[(1, 1)] = 0.0;
        true
    }
}

#[test]
fn a_fit_that_cannot_lower_the_cost_is_an_error_not_a_convergence() {
    let err = minimize(
        &WrongJacobian,
        &[-1.2, 1.0],
        &LmOptions::default(),
        "Rosenbrock",
    )
    .unwrap_err();
    let FitError::NotConverged { reason, .. } = &err else {
        panic!("{err:?}");
    };
    assert!(reason.contains("no step reduces"), "{err}");
}
