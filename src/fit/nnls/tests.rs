use super::*;
use rand::rngs::StdRng;
use rand::{RngExt, SeedableRng};
use rand_distr::{Distribution, Normal};

fn random_problem(m: usize, n: usize, seed: u64) -> (DMatrix<f64>, DVector<f64>) {
    let mut rng = StdRng::seed_from_u64(seed);
    let a = DMatrix::from_fn(m, n, |_, _| 2.0 * rng.random::<f64>() - 1.0);
    let b = DVector::from_fn(m, |_, _| 2.0 * rng.random::<f64>() - 1.0);
    (a, b)
}

/// The Kuhn–Tucker conditions that define the NNLS solution (Lawson & Hanson 1974,
/// theorem 23.4): x ≥ 0, w = Aᵀ(b − Ax) ≤ 0 where x = 0 and w = 0 where x > 0.
fn assert_kkt(a: &DMatrix<f64>, b: &DVector<f64>, x: &DVector<f64>) -> (usize, usize) {
    let w = a.tr_mul(&(b - a * x));
    let scale = a.norm() * b.norm();
    let (mut zero, mut positive) = (0, 0);
    for j in 0..x.len() {
        assert!(x[j] >= 0.0, "x[{j}] = {}", x[j]);
        if x[j] == 0.0 {
            zero += 1;
            assert!(w[j] <= 1e-12 * scale, "w[{j}] = {} on the zero set", w[j]);
        } else {
            positive += 1;
            assert!(
                w[j].abs() <= 1e-12 * scale,
                "w[{j}] = {} on the positive set",
                w[j]
            );
        }
    }
    (zero, positive)
}

#[test]
fn solutions_satisfy_the_kuhn_tucker_conditions() {
    for seed in 0..20 {
        let (a, b) = random_problem(30, 12, seed);
        let fit = nnls(&a, &b).unwrap();
        let (zero, positive) = assert_kkt(&a, &b, &fit.x);
        // Random signs leave both sets non-empty, so both conditions are exercised.
        assert!(
            zero > 0 && positive > 0,
            "seed {seed}: {zero} zero, {positive} positive"
        );
        assert!((fit.residual_norm - (&a * &fit.x - &b).norm()).abs() < 1e-12);
        assert!(fit.iterations >= positive);
    }
    // Underdetermined too: more unknowns than rows.
    let (a, b) = random_problem(6, 15, 99);
    let fit = nnls(&a, &b).unwrap();
    assert_kkt(&a, &b, &fit.x);
}

/// Exhaustive search over the 2ⁿ candidate positive sets: the minimum residual among
/// feasible unconstrained sub-solutions is the NNLS optimum.
fn brute_force(a: &DMatrix<f64>, b: &DVector<f64>) -> (DVector<f64>, f64) {
    let n = a.ncols();
    let mut best = (DVector::zeros(n), b.norm());
    for mask in 1u32..(1 << n) {
        let set: Vec<usize> = (0..n).filter(|&j| mask >> j & 1 == 1).collect();
        let sub = a.select_columns(&set);
        let z = sub.svd(true, true).solve(b, 1e-14).unwrap();
        if z.iter().all(|&v| v >= 0.0) {
            let mut x = DVector::zeros(n);
            for (k, &j) in set.iter().enumerate() {
                x[j] = z[k];
            }
            let r = (a * &x - b).norm();
            if r < best.1 {
                best = (x, r);
            }
        }
    }
    best
}

#[test]
fn negative_unconstrained_solutions_are_clipped_optimally() {
    for seed in 100..110 {
        let (a, b) = random_problem(12, 6, seed);
        let unconstrained = a.clone().svd(true, true).solve(&b, 1e-14).unwrap();
        assert!(unconstrained.iter().any(|&v| v < 0.0), "seed {seed}");
        let fit = nnls(&a, &b).unwrap();
        let (x, r) = brute_force(&a, &b);
        assert!((fit.residual_norm - r).abs() < 1e-12, "seed {seed}");
        assert!((&fit.x - x).amax() < 1e-10, "seed {seed}");
    }
}

#[test]
fn agrees_with_least_squares_when_that_is_already_positive() {
    let (a, _) = random_problem(40, 8, 7);
    let truth = DVector::from_fn(8, |i, _| 1.0 + i as f64);
    let mut rng = StdRng::seed_from_u64(8);
    let b = &a * &truth + DVector::from_fn(40, |_, _| 0.01 * (rng.random::<f64>() - 0.5));
    let unconstrained = a.clone().svd(true, true).solve(&b, 1e-14).unwrap();
    assert!(unconstrained.iter().all(|&v| v > 0.0));
    let fit = nnls(&a, &b).unwrap();
    assert!((&fit.x - &unconstrained).amax() < 1e-12);
    assert_eq!(fit.iterations, 8);
}

#[test]
fn difference_operators_have_the_right_null_spaces() {
    let (a, b) = random_problem(20, 10, 3);
    // A huge penalty on x itself drives x to 0; on first differences to a constant; on
    // second differences to a straight line.
    let x0 = nnls_regularized(&a, &b, 1e8, 0).unwrap().x;
    assert!(x0.amax() < 1e-6);
    let b_up = &a * DVector::from_fn(10, |i, _| 1.0 + 0.5 * i as f64);
    let x1 = nnls_regularized(&a, &b_up, 1e6, 1).unwrap().x;
    assert!((1..10).all(|i| (x1[i] - x1[0]).abs() < 1e-4), "{x1}");
    let x2 = nnls_regularized(&a, &b_up, 1e6, 2).unwrap().x;
    assert!(
        (0..10).all(|i| (x2[i] - (1.0 + 0.5 * i as f64)).abs() < 1e-6),
        "{x2}"
    );
    // λ = 0 is plain NNLS.
    assert_eq!(
        nnls_regularized(&a, &b, 0.0, 2).unwrap(),
        nnls(&a, &b).unwrap()
    );
}

/// A smooth non-negative size distribution seen through a Gaussian blur with noise: the
/// discrepancy-principle λ must recover it better than plain NNLS, which fits the noise
/// with spiky solutions.
#[test]
fn regularisation_recovers_a_smooth_distribution_better_than_plain_nnls() {
    let (m, n) = (80, 40);
    let truth = DVector::from_fn(n, |j, _| {
        let t = j as f64 / (n - 1) as f64;
        (-((t - 0.45) / 0.12).powi(2)).exp()
    });
    let a = DMatrix::from_fn(m, n, |i, j| {
        let (u, t) = (i as f64 / (m - 1) as f64, j as f64 / (n - 1) as f64);
        (-((u - t) / 0.08).powi(2)).exp()
    });
    let clean = &a * &truth;
    let noise_level = 0.01 * clean.amax();
    let sigma = DVector::from_element(m, noise_level);
    let normal = Normal::new(0.0, noise_level).unwrap();
    let mut rng = StdRng::seed_from_u64(1974);
    let b = &clean + DVector::from_fn(m, |_, _| normal.sample(&mut rng));

    let plain = nnls(&a, &b).unwrap();
    let chosen = choose_lambda(&a, &b, &sigma).unwrap();
    assert!(chosen.discrepancy_met && chosen.lambda > 0.0);
    assert!(chosen.method.contains("discrepancy"));
    // χ² sits at the target m from below (bisection to 0.1 % in λ).
    assert!(
        chosen.chi2 <= m as f64 && chosen.chi2 > 0.95 * m as f64,
        "{}",
        chosen.chi2
    );
    let check = nnls_regularized(
        &DMatrix::from_fn(m, n, |i, j| a[(i, j)] / sigma[i]),
        &b.component_div(&sigma),
        chosen.lambda,
        CHOOSE_LAMBDA_ORDER,
    )
    .unwrap();
    assert!((check.residual_norm.powi(2) - chosen.chi2).abs() < 1e-9 * chosen.chi2);
    let err_plain = (&plain.x - &truth).norm();
    let err_reg = (&chosen.solution.x - &truth).norm();
    assert!(
        err_reg < 0.5 * err_plain,
        "regularised {err_reg} vs plain {err_plain}"
    );
    assert!(err_reg < 0.2 * truth.norm(), "{err_reg}");
    assert!(chosen.solution.x.iter().all(|&v| v >= 0.0));
}

#[test]
fn spreads_too_small_for_the_data_are_reported() {
    let (a, b) = random_problem(20, 5, 11);
    let sigma = DVector::from_element(20, 1e-6);
    let got = choose_lambda(&a, &b, &sigma).unwrap();
    assert!(!got.discrepancy_met);
    assert_eq!(got.lambda, 0.0);
    assert!(got.chi2 > 20.0);
}

#[test]
fn bad_input_gives_errors() {
    let (a, b) = random_problem(10, 4, 5);
    let short = DVector::zeros(9);
    assert!(matches!(nnls(&a, &short), Err(FitError::Bounds { .. })));
    assert!(matches!(
        nnls(&DMatrix::zeros(0, 0), &DVector::zeros(0)),
        Err(FitError::Bounds { .. })
    ));
    let mut nan = a.clone();
    nan[(2, 1)] = f64::NAN;
    assert!(matches!(nnls(&nan, &b), Err(FitError::NonFinite { .. })));
    assert!(matches!(
        nnls_regularized(&a, &b, -1.0, 1),
        Err(FitError::Bounds { .. })
    ));
    assert!(matches!(
        nnls_regularized(&a, &b, f64::NAN, 1),
        Err(FitError::Bounds { .. })
    ));
    assert!(matches!(
        nnls_regularized(&a, &b, 1.0, 3),
        Err(FitError::Bounds { .. })
    ));
    let mut sigma = DVector::from_element(10, 1.0);
    sigma[4] = 0.0;
    assert!(matches!(
        choose_lambda(&a, &b, &sigma),
        Err(FitError::Bounds { .. })
    ));
    assert!(matches!(
        choose_lambda(&a, &b, &DVector::from_element(3, 1.0)),
        Err(FitError::Bounds { .. })
    ));
}

#[test]
fn iteration_cap_gives_not_converged() {
    let (a, b) = random_problem(30, 12, 0);
    assert!(nnls(&a, &b).unwrap().iterations > 1);
    assert!(matches!(
        active_set(&a, &b, 1, "test"),
        Err(FitError::NotConverged { .. })
    ));
}

#[test]
fn zero_right_hand_side_gives_zero() {
    let (a, _) = random_problem(10, 4, 2);
    let fit = nnls(&a, &DVector::zeros(10)).unwrap();
    assert_eq!(fit.x, DVector::zeros(4));
    assert_eq!(fit.iterations, 0);
}
