use super::published::{end_gauge, end_gauge_inputs};
use super::*;

// ---- steps and failures -------------------------------------------------------------------

#[test]
fn an_input_with_zero_u_still_gets_a_sensitivity() {
    let inputs = [Input::normal("k", 3.0, 0.0), Input::normal("x", 2.0, 0.1)];
    let p = propagate(&inputs, &[], |v: &[f64]| -> Model {
        Ok(vec![v[0] * v[1] * v[1]])
    })
    .unwrap();
    let line = &p.outputs[0].budget[0];
    assert!(close(line.sensitivity.unwrap(), 4.0, 1e-6));
    assert_eq!(line.contribution, 0.0);
    assert!(close(p.outputs[0].u, 12.0 * 0.1, 1e-9));
    assert!(derivative_step(&Input::normal("z", 0.0, 0.0)) > 0.0);
}

#[test]
fn a_model_undefined_on_one_side_gets_a_one_sided_difference() {
    // y = x³, defined only for x ≤ 1; at x = 1 − h/2 the forward point fails.
    let model = |v: &[f64]| -> Model {
        if v[0] > 1.0 {
            Err(UncertaintyError::NoOutputs)
        } else {
            Ok(vec![v[0].powi(3)])
        }
    };
    let x = 1.0 - 0.5e-4;
    let p = propagate(&[Input::normal("x", x, 1e-3)], &[], model).unwrap();
    // The second-order backward difference errs by 2h² here (h = 1e-4).
    assert!(
        close(p.jacobian[(0, 0)], 3.0 * x * x, 1e-7),
        "{}",
        p.jacobian[(0, 0)]
    );
    // NaN on the other side is handled the same way.
    let nan_model = |v: &[f64]| -> Model { Ok(vec![(1.0 - v[0]).sqrt()]) };
    let x = 1.0 - 0.5e-4;
    let p = propagate(&[Input::normal("x", x, 1e-5)], &[], nan_model).unwrap();
    let want = -0.5 / (1.0 - x).sqrt();
    assert!(
        close(p.jacobian[(0, 0)], want, 1e-3 * want.abs()),
        "{}",
        p.jacobian[(0, 0)]
    );
}

#[test]
fn model_errors_and_bad_outputs_are_reported() {
    let fails_off_centre = |v: &[f64]| -> Model {
        if v[0] == 1.0 {
            Ok(vec![1.0])
        } else {
            Err(UncertaintyError::ModelFailsAtEstimate)
        }
    };
    let one = [Input::normal("x", 1.0, 0.1)];
    assert_eq!(
        propagate(&one, &[], fails_off_centre).unwrap_err(),
        UncertaintyError::ModelFailsAtEstimate
    );
    let nan_off_centre =
        |v: &[f64]| -> Model { Ok(vec![if v[0] == 1.0 { 1.0 } else { f64::NAN }]) };
    assert!(matches!(
        propagate(&one, &[], nan_off_centre),
        Err(UncertaintyError::NoSensitivity { .. })
    ));
    let shape = |v: &[f64]| -> Model {
        Ok(if v[0] == 1.0 {
            vec![1.0]
        } else {
            vec![1.0, 2.0]
        })
    };
    assert!(matches!(
        propagate(&one, &[], shape),
        Err(UncertaintyError::OutputCount {
            expected: 1,
            got: 2
        })
    ));
    let empty = |_: &[f64]| -> Model { Ok(vec![]) };
    assert_eq!(
        propagate(&one, &[], empty).unwrap_err(),
        UncertaintyError::NoOutputs
    );
    let inf = |_: &[f64]| -> Model { Ok(vec![f64::INFINITY]) };
    assert!(matches!(
        propagate(&one, &[], inf),
        Err(UncertaintyError::NonFiniteOutput { output: 0, .. })
    ));
}

#[test]
fn bad_inputs_and_correlations_are_refused() {
    let two = [Input::normal("a", 1.0, 0.1), Input::normal("b", 2.0, 0.1)];
    for bad in [
        Input::normal("x", f64::NAN, 0.1),
        Input::normal("x", 1.0, -0.1),
        Input::normal("x", 1.0, f64::INFINITY),
    ] {
        let e = propagate(std::slice::from_ref(&bad), &[], additive).unwrap_err();
        assert!(matches!(e, UncertaintyError::BadInput { .. }), "{e:?}");
        assert!(e.to_string().starts_with("input `x`"), "{e}");
        assert!(monte_carlo(&[bad], &[], additive, 100, 1).is_err());
    }
    for (c, why) in [
        (Correlation { i: 0, j: 2, r: 0.5 }, "only 2 inputs"),
        (Correlation { i: 1, j: 1, r: 0.5 }, "itself"),
        (Correlation { i: 0, j: 1, r: 1.5 }, "between −1 and 1"),
        (
            Correlation {
                i: 0,
                j: 1,
                r: f64::NAN,
            },
            "between −1 and 1",
        ),
    ] {
        let e = propagate(&two, &[c], additive).unwrap_err();
        assert!(e.to_string().contains(why), "{e}");
    }
    let twice = [
        Correlation { i: 0, j: 1, r: 0.5 },
        Correlation { i: 1, j: 0, r: 0.4 },
    ];
    assert!(
        propagate(&two, &twice, additive)
            .unwrap_err()
            .to_string()
            .contains("twice")
    );
}

#[test]
fn inconsistent_correlations_are_refused_by_both_methods() {
    // r12 = r13 = 0.9 but r23 = −0.9 cannot hold together.
    let three: Vec<Input> = (0..3)
        .map(|i| Input::normal(format!("x{i}"), 0.0, 1.0))
        .collect();
    let corr = [
        Correlation { i: 0, j: 1, r: 0.9 },
        Correlation { i: 0, j: 2, r: 0.9 },
        Correlation {
            i: 1,
            j: 2,
            r: -0.9,
        },
    ];
    assert!(matches!(
        propagate(&three, &corr, additive),
        Err(UncertaintyError::NotPositiveDefinite { .. })
    ));
    assert!(matches!(
        monte_carlo(&three, &corr, additive, 1000, 1),
        Err(UncertaintyError::NotPositiveDefinite { .. })
    ));
    // Full correlation is semidefinite: first order accepts it, Monte Carlo cannot sample it.
    let full = [Correlation { i: 0, j: 1, r: 1.0 }];
    let p = propagate(&three[..2], &full, additive).unwrap();
    assert!(close(p.outputs[0].u, 2.0, 1e-12));
    assert!(monte_carlo(&three[..2], &full, additive, 1000, 1).is_err());
    // Correlated rectangular inputs are not sampled.
    let rect = [
        Input::rectangular("r", 0.0, 1.0),
        Input::normal("n", 0.0, 1.0),
    ];
    let e = monte_carlo(
        &rect,
        &[Correlation { i: 0, j: 1, r: 0.3 }],
        additive,
        1000,
        1,
    )
    .unwrap_err();
    assert_eq!(
        e,
        UncertaintyError::CorrelatedNonNormal { name: "r".into() }
    );
}

// ---- Monte Carlo mechanics ----------------------------------------------------------------

#[test]
fn monte_carlo_is_reproducible_whatever_the_thread_count() {
    let inputs = end_gauge_inputs();
    let run = |threads: usize, seed: u64| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| monte_carlo(&inputs, &[], end_gauge, 20_000, seed).unwrap())
    };
    let one = run(1, 42);
    assert_eq!(one, run(2, 42));
    assert_eq!(one, run(3, 42));
    assert_ne!(one, run(2, 43));
}

#[test]
fn correlated_normal_inputs_are_sampled_with_their_correlation() {
    let inputs = [Input::normal("a", 1.0, 1.0), Input::normal("b", 2.0, 2.0)];
    let corr = [Correlation {
        i: 0,
        j: 1,
        r: -0.5,
    }];
    let diff = |v: &[f64]| -> Model { Ok(vec![v[0] + v[1], v[0] * 0.0 + v[1]]) };
    let p = propagate(&inputs, &corr, diff).unwrap();
    // u² = 1 + 4 − 2·0.5·1·2 = 3 (JCGM 100:2008 eq. 16).
    assert!(close(p.outputs[0].u, 3f64.sqrt(), 1e-12));
    let mc = monte_carlo(&inputs, &corr, diff, 100_000, 5).unwrap();
    assert!(
        close(mc.outputs[0].u, 3f64.sqrt(), 0.02 * 3f64.sqrt()),
        "{:?}",
        mc.outputs[0]
    );
    assert!(close(mc.outputs[1].u, 2.0, 0.04));
    assert!(close(mc.outputs[0].mean, 3.0, 0.02));
}

#[test]
fn failures_are_counted_and_too_many_are_an_error() {
    let x = [Input::normal("x", 0.0, 1.0)];
    // P(X > 2.75) ≈ 0.3 %: counted and left out.
    let rare =
        |v: &[f64]| -> Result<Vec<f64>, ()> { if v[0] > 2.75 { Err(()) } else { Ok(vec![v[0]]) } };
    let mc = monte_carlo(&x, &[], rare, 50_000, 3).unwrap();
    assert!(mc.failed > 50 && mc.failed < 250, "{}", mc.failed);
    assert!(mc.outputs[0].high < 2.75);
    // P(X > 2) ≈ 2.3 %: refused.
    let often =
        |v: &[f64]| -> Result<Vec<f64>, ()> { Ok(vec![if v[0] > 2.0 { f64::NAN } else { v[0] }]) };
    let e = monte_carlo(&x, &[], often, 50_000, 3).unwrap_err();
    assert!(
        matches!(e, UncertaintyError::TooManyFailures { trials: 50_000, .. }),
        "{e:?}"
    );
    assert!(e.to_string().contains("more than 1 %"));
    let at_estimate = |_: &[f64]| -> Result<Vec<f64>, ()> { Err(()) };
    assert_eq!(
        monte_carlo(&x, &[], at_estimate, 100, 1).unwrap_err(),
        UncertaintyError::ModelFailsAtEstimate
    );
    assert!(matches!(
        monte_carlo(&x, &[], rare, 10, 1),
        Err(UncertaintyError::TooFewTrials {
            min: 20,
            recommended: 200_000,
            ..
        })
    ));
}

#[test]
fn a_model_without_inputs_is_exact() {
    let constant = |_: &[f64]| -> Model { Ok(vec![1.5]) };
    let p = propagate(&[], &[], constant).unwrap();
    assert_eq!((p.outputs[0].value, p.outputs[0].u), (1.5, 0.0));
    assert!(p.outputs[0].budget.is_empty());
    let mc = monte_carlo(&[], &[], constant, 100, 1).unwrap();
    assert_eq!(
        (mc.outputs[0].mean, mc.outputs[0].low, mc.outputs[0].high),
        (1.5, 1.5, 1.5)
    );
    assert_eq!(mc.outputs[0].u, 0.0);
}

#[test]
fn recommended_trials_follow_jcgm_101_7_2_2() {
    // JCGM 101:2008 §7.2.2: M ≥ 10⁴/(1 − p), 2·10⁵ for p = 0.95.
    assert_eq!(recommended_trials(0.95), DEFAULT_TRIALS);
    assert_eq!(recommended_trials(0.99), 1_000_000);
}

// ---- validation ---------------------------------------------------------------------------

#[test]
fn numerical_tolerance_follows_jcgm_101_7_9_2() {
    // JCGM 101:2008 §7.9.2 example (from memory): u = 0.000 35 g, two digits, δ = 0.000 005 g.
    assert!(close(numerical_tolerance(0.00035, 2), 0.000005, 1e-18));
    assert!(close(numerical_tolerance(2.0, 2), 0.05, 1e-15));
    assert!(close(numerical_tolerance(33.9e-9, 2), 0.5e-9, 1e-20));
    assert!(close(numerical_tolerance(0.00996, 2), 0.0005, 1e-15));
    assert_eq!(numerical_tolerance(0.0, 2), 0.0);
    assert!(numerical_tolerance(f64::NAN, 2).is_nan());
}

#[test]
fn validate_compares_both_ends_within_the_tolerance() {
    let linear = Estimate {
        value: 10.0,
        u: 1.0,
        budget: vec![],
    };
    let mc = |low: f64, high: f64| McEstimate {
        mean: 10.0,
        u: 1.0,
        low,
        high,
    };
    let k = K_95_NORMAL;
    let v = validate(&linear, k, &mc(10.0 - k, 10.0 + k));
    assert!(v.agrees && v.d_low < 1e-12 && v.d_high < 1e-12);
    assert!(close(v.tolerance, 0.05, 1e-15));
    assert!(validate(&linear, k, &mc(10.0 - k - 0.04, 10.0 + k)).agrees);
    assert!(!validate(&linear, k, &mc(10.0 - k, 10.0 + k + 0.06)).agrees);
    assert!(!validate(&linear, k, &mc(10.0 - k - 0.06, 10.0 + k)).agrees);
    // k = 2 is a 95.45 % interval: compared with a 95 % one it is 0.04·u too wide at each
    // end, beyond δ = 0.05 once u has more than one leading digit.
    let linear = Estimate {
        value: 0.0,
        u: 3.2,
        budget: vec![],
    };
    let normal = McEstimate {
        mean: 0.0,
        u: 3.2,
        low: -k * 3.2,
        high: k * 3.2,
    };
    assert!(validate(&linear, K_95_NORMAL, &normal).agrees);
    assert!(!validate(&linear, K_95, &normal).agrees);
}
