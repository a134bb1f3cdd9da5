use super::*;
use crate::optics::lattice::{Family, Lattice, index_rings, refine_constant, reflections};

const NM: f64 = 1e-9;
const PM: f64 = 1e-12;

fn scale() -> Vec<ScaleComponent> {
    vec![ScaleComponent {
        name: "ruler".into(),
        u_rel: 1e-3,
        across: None,
    }]
}

fn voltage(v: f64) -> Input {
    Input::normal("voltage", v, 0.005 * v)
}

/// Ring radii, mm, of spacings `d` on a screen: the forward geometry written out here on its
/// own (Bragg 2d·sin θ = λ, then r = L·tan 2θ or R·sin 2θ), so that a slip in the solver's
/// inverse does not agree with itself.
fn radii_mm(
    d: &[f64],
    lambda: f64,
    kind: ScreenKind,
    length_m: f64,
    noise_mm: &[f64],
) -> Vec<RingRadius> {
    d.iter()
        .enumerate()
        .map(|(i, &d)| {
            let two_theta = 2.0 * (lambda / (2.0 * d)).asin();
            let r = match kind {
                ScreenKind::Flat => length_m * two_theta.tan(),
                ScreenKind::Sphere => length_m * two_theta.sin(),
            };
            RingRadius {
                label: format!("ring {}", i + 1),
                radius_mm: r * 1e3 + noise_mm.get(i).copied().unwrap_or(0.0),
                u_mm: 0.02,
            }
        })
        .collect()
}

fn gold_d() -> Vec<f64> {
    // Gold, fcc, a = 0.40782 nm (REFERENCES.md): 111, 200, 220, 311, 222.
    [3.0f64, 4.0, 8.0, 11.0, 12.0]
        .iter()
        .map(|n| 0.40782 * NM / n.sqrt())
        .collect()
}

fn graphite_d(a: f64) -> Vec<f64> {
    // 10.0 = a√3/2, 11.0 = a/2, 20.0 = a√3/4, 21.0 = a/√28·2.
    [1.0f64, 3.0, 4.0, 7.0]
        .iter()
        .map(|m| a / (4.0 / 3.0 * m).sqrt())
        .collect()
}

#[test]
fn wavelengths_match_the_computed_and_tabulated_values() {
    // Computed with CODATA 2018 (REFERENCES.md): 5 kV 17.302 pm, 10 kV 12.205 pm, 100 kV
    // 3.7014 pm, 200 kV 2.5079 pm, 300 kV 1.9687 pm; each to its last digit.
    for (kv, pm, half_digit) in [
        (5.0, 17.302, 5e-4),
        (10.0, 12.205, 5e-4),
        (100.0, 3.7014, 5e-5),
        (200.0, 2.5079, 5e-5),
        (300.0, 1.9687, 5e-5),
    ] {
        let got = wavelength_m(kv * 1e3).unwrap() / PM;
        assert!((got - pm).abs() <= half_digit, "{kv} kV: {got} pm");
    }
    // Tabulated 0.00370, 0.00251, 0.00197 nm at 100, 200, 300 kV (from memory: Williams &
    // Carter, Transmission Electron Microscopy, table 1.1).
    for (kv, nm) in [(100.0, 0.00370), (200.0, 0.00251), (300.0, 0.00197)] {
        let got = wavelength_m(kv * 1e3).unwrap() / NM;
        assert!((got - nm).abs() <= 5e-6, "{kv} kV: {got} nm");
    }
}

#[test]
fn the_nonrelativistic_shortcut_is_too_long_by_about_0_049_percent_per_kv() {
    // λ[nm] ≈ √(1.504/V) without relativity, too long by about 0.049 % per kV (0.24 % at
    // 5 kV): common practice.
    for kv in [1.0, 5.0, 10.0, 30.0] {
        let v = kv * 1e3;
        let nr = nonrelativistic_wavelength_m(v).unwrap();
        let shortcut = (1.504 / v).sqrt() * NM;
        assert!((shortcut / nr - 1.0).abs() < 1e-4, "{kv} kV");
        let excess_per_kv = (nr / wavelength_m(v).unwrap() - 1.0) / kv;
        assert!(
            (excess_per_kv - 4.9e-4).abs() < 0.1e-4,
            "{kv} kV: {excess_per_kv}"
        );
    }
    let at5 = nonrelativistic_wavelength_m(5e3).unwrap() / wavelength_m(5e3).unwrap() - 1.0;
    assert!((at5 - 2.4e-3).abs() < 0.1e-3, "{at5}");
}

#[test]
fn bad_voltages_and_geometry_are_errors() {
    assert!(wavelength_m(-4500.0).is_err());
    assert!(wavelength_m(0.0).is_err());
    assert!(wavelength_m(f64::NAN).is_err());
    assert!(nonrelativistic_wavelength_m(-1.0).is_err());
    let flat = Screen::Flat { distance_m: 0.131 };
    assert!(flat.radius_m(FRAC_PI_2).is_err());
    assert!(flat.radius_m(-0.1).is_err());
    assert!(flat.deflection_rad(-1e-3).is_err());
    let sphere = Screen::Sphere { radius_m: 0.065 };
    let e = sphere.deflection_rad(0.070).unwrap_err().to_string();
    assert!(e.contains("spherical screen"), "{e}");
    assert!(sphere.deflection_rad(0.065).is_err());
    assert!(
        Screen::Flat { distance_m: -1.0 }
            .deflection_rad(0.01)
            .is_err()
    );
    assert!(bragg_deflection_rad(0.3 * NM, 0.1 * NM).is_err());
    let rings = radii_mm(
        &gold_d(),
        wavelength_m(4500.0).unwrap(),
        ScreenKind::Flat,
        0.131,
        &[],
    );
    assert!(solve_rings(&rings, &voltage(-4500.0), flat, 1e-3, &scale()).is_err());
    let beyond = [RingRadius {
        label: "ring 1".into(),
        radius_mm: 80.0,
        u_mm: 0.1,
    }];
    let e = solve_rings(&beyond, &voltage(4500.0), sphere, 1e-3, &scale()).unwrap_err();
    assert!(e.to_string().contains("ring 1"), "{e}");
    assert!(solve_rings(&[], &voltage(4500.0), flat, 1e-3, &scale()).is_err());
}

#[test]
fn screens_invert_their_own_geometry() {
    for screen in [
        Screen::Flat { distance_m: 0.131 },
        Screen::Sphere { radius_m: 0.065 },
    ] {
        for two_theta in [1e-3, 0.05, 0.3, 1.2, 1.5] {
            let r = screen.radius_m(two_theta).unwrap();
            let back = screen.deflection_rad(r).unwrap();
            assert!((back - two_theta).abs() < 1e-12, "{screen:?} {two_theta}");
        }
    }
    // Bragg: 2d sin θ = λ.
    let d = bragg_spacing_m(20.0 * PM, 0.1).unwrap();
    assert!((2.0 * d * 0.05f64.sin() - 20.0 * PM).abs() < 1e-25);
}

#[test]
fn ring_spacings_with_a_shared_budget_on_a_flat_screen() {
    let lambda = wavelength_m(4500.0).unwrap();
    let d = gold_d();
    let rings = radii_mm(&d, lambda, ScreenKind::Flat, 0.131, &[]);
    let screen = Screen::Flat { distance_m: 0.131 };
    let sol = solve_rings(&rings, &voltage(4500.0), screen, 1e-3, &scale()).unwrap();
    assert!((sol.wavelength.value / lambda - 1.0).abs() < 1e-15);
    assert_eq!(sol.wavelength.budget.len(), 1);
    for (ring, &truth) in sol.rings.iter().zip(&d) {
        assert!((ring.d.value / truth - 1.0).abs() < 1e-9, "{ring:?}");
        let names: Vec<&str> = ring.d.budget.iter().map(|l| l.input.as_str()).collect();
        assert_eq!(
            names,
            [
                "voltage",
                "distance",
                "scale: ruler",
                &format!("{} radius", ring.label)
            ]
        );
        // d ≈ λL/r: relative sensitivities −½ (voltage), +1 (distance), −1 (scale).
        let rel = |k: usize| ring.d.budget[k].sensitivity.unwrap() / ring.d.value;
        assert!((rel(0) * 4500.0 + 0.5).abs() < 0.01, "{}", rel(0));
        assert!((rel(1) * 0.131 - 1.0).abs() < 0.05, "{}", rel(1));
        assert!((rel(2) + 1.0).abs() < 0.05, "{}", rel(2));
        // Inputs are independent: the budget adds in quadrature to u.
        let rss: f64 = ring.d.budget.iter().map(|l| l.contribution.powi(2)).sum();
        assert!((rss.sqrt() / ring.d.u - 1.0).abs() < 1e-9);
        // The small-angle camera constant is off by about −(3/2)θ² (series of
        // 2 sin θ / tan 2θ).
        let theta = 0.5 * ring.deflection_rad;
        let series = -1.5 * theta * theta;
        assert!(
            (ring.small_angle_error / series - 1.0).abs() < 0.02,
            "{ring:?}"
        );
    }
    // Voltage, distance and scale are shared: the rings are strongly correlated.
    let cov = sol.joint.covariance();
    let r01 = cov[(0, 4)] / (cov[(0, 0)] * cov[(4, 4)]).sqrt();
    assert!(r01 > 0.8, "{r01}");
    // Indexing sees only each ring's own radius.
    let own = sol.joint.for_indexing();
    assert!((own[0].u_m / sol.rings[0].d.budget[3].contribution - 1.0).abs() < 1e-12);
}

#[test]
fn gold_calibrates_the_camera_length_and_graphite_then_gives_a() {
    // A gold film at 4.5 kV and 131 mm calibrates L; the same camera then measures a
    // carbon film, whose a = 0.2461 nm must come back within its uncertainty.
    let (kv, l_true, a_true) = (4500.0, 0.131, 0.2461 * NM);
    let lambda = wavelength_m(kv).unwrap();
    let gold: Lattice = "fcc:a=0.40782nm".parse().unwrap();
    let gold_rings = radii_mm(&gold_d(), lambda, ScreenKind::Flat, l_true, &[]);
    let (ix, cal) = index_and_calibrate(
        &gold_rings,
        &gold,
        &voltage(kv),
        ScreenKind::Flat,
        None,
        &scale(),
    )
    .unwrap();
    let names: Vec<&str> = ix
        .best
        .reflections
        .iter()
        .map(|r| r.label.as_str())
        .collect();
    assert_eq!(names, ["111", "200", "220", "311", "222"]);
    assert!(
        (cal.length.value / l_true - 1.0).abs() < 1e-9,
        "{}",
        cal.length.value
    );
    assert!(cal.residuals_mm.iter().all(|r| r.abs() < 1e-9));
    // Its budget: the voltage enters as about ½ (λL is what the rings fix; relativity and
    // tan 2θ add about 2 % here), the scale as 1.
    let line = |name: &str| cal.length.budget.iter().find(|l| l.input == name).unwrap();
    let voltage_rel = line("voltage").contribution / (0.5 * 0.005 * l_true) - 1.0;
    assert!(
        voltage_rel > 0.0 && voltage_rel < 0.03,
        "{:?}",
        cal.length.budget
    );
    assert!((line("scale: ruler").contribution / (1e-3 * l_true) - 1.0).abs() < 0.01);
    assert!(cal.assumptions.iter().any(|s| s.contains("taken as exact")));
    let lambda_l = cal.camera_constant.value;
    assert!((lambda_l / (lambda * l_true) - 1.0).abs() < 1e-9);

    for noise in [[0.0; 4], [0.015, -0.02, 0.01, -0.005]] {
        let rings = radii_mm(
            &graphite_d(a_true),
            lambda,
            ScreenKind::Flat,
            l_true,
            &noise,
        );
        let sol = solve_rings(&rings, &voltage(kv), cal.screen(), cal.length.u, &scale()).unwrap();
        let carbon = Lattice::family(Family::Hex);
        let ix = index_rings(&sol.joint.for_indexing(), &carbon).unwrap();
        let names: Vec<&str> = ix
            .best
            .reflections
            .iter()
            .map(|r| r.label.as_str())
            .collect();
        assert_eq!(names, ["10.0", "11.0", "20.0", "21.0"]);
        let refined = refine_constant(&sol.joint, &ix, &carbon).unwrap();
        let a = &refined.a;
        assert!(
            (a.value - a_true).abs() <= 2.0 * a.u,
            "{} ± {}",
            a.value,
            a.u
        );
        if noise[0] == 0.0 {
            assert!((a.value / a_true - 1.0).abs() < 1e-8, "{}", a.value);
        }
        // No constants were given, so there is nothing to compare with.
        assert!(refined.comparison.is_empty());
        assert!(a.budget.iter().any(|l| l.input == "distance"));
    }
}

#[test]
fn spherical_screen_round_trip() {
    // A bulb of radius 65 mm at 5 kV with a carbon film; r = R·sin 2θ.
    let (kv, r_true, a_true) = (5000.0, 0.065, 0.2461 * NM);
    let lambda = wavelength_m(kv).unwrap();
    let d = graphite_d(a_true);
    let rings = radii_mm(&d, lambda, ScreenKind::Sphere, r_true, &[]);
    let screen = Screen::Sphere { radius_m: r_true };
    let sol = solve_rings(&rings, &voltage(kv), screen, 0.5e-3, &scale()).unwrap();
    for (ring, &truth) in sol.rings.iter().zip(&d) {
        assert!((ring.d.value / truth - 1.0).abs() < 1e-9, "{ring:?}");
        assert_eq!(ring.d.budget[1].input, "sphere radius");
    }
    // Calibrating the bulb against the same film's known a recovers R.
    let carbon: Lattice = "hex:a=0.2461nm±0.0003nm".parse().unwrap();
    let hk0 = reflections(Family::Hex, None, 10.0);
    let cal = calibrate_camera(
        &rings,
        &hk0[..4],
        &carbon,
        &voltage(kv),
        ScreenKind::Sphere,
        &scale(),
    )
    .unwrap();
    assert!((cal.length.value / r_true - 1.0).abs() < 1e-9);
    assert!(
        cal.length
            .budget
            .iter()
            .any(|l| l.input == "reference a" && l.contribution > 0.0)
    );
    assert!(!cal.assumptions.iter().any(|s| s.contains("taken as exact")));
    let (ix, auto) = index_and_calibrate(
        &rings,
        &carbon,
        &voltage(kv),
        ScreenKind::Sphere,
        Some(0.1),
        &scale(),
    )
    .unwrap();
    assert_eq!(ix.best.reflections[1].label, "11.0");
    assert!((auto.length.value / r_true - 1.0).abs() < 1e-9);
    // A flat-screen reading of the same rings would be wrong by the geometry alone.
    let flat = solve_rings(
        &rings,
        &voltage(kv),
        Screen::Flat { distance_m: r_true },
        0.5e-3,
        &scale(),
    )
    .unwrap();
    assert!(flat.rings[3].d.value / d[3] - 1.0 > 0.005);
}

#[test]
fn calibration_refuses_what_it_cannot_use() {
    let lambda = wavelength_m(4500.0).unwrap();
    let rings = radii_mm(&gold_d(), lambda, ScreenKind::Flat, 0.131, &[]);
    let fcc = reflections(Family::Fcc, None, 12.0);
    let no_a = Lattice::family(Family::Fcc);
    let e = calibrate_camera(
        &rings,
        &fcc,
        &no_a,
        &voltage(4500.0),
        ScreenKind::Flat,
        &scale(),
    )
    .unwrap_err();
    assert!(e.to_string().contains("a=0.40782nm"), "{e}");
    let gold: Lattice = "fcc:a=0.40782nm".parse().unwrap();
    assert!(
        calibrate_camera(
            &rings,
            &fcc[..3],
            &gold,
            &voltage(4500.0),
            ScreenKind::Flat,
            &scale()
        )
        .is_err()
    );
    let one = &rings[..1];
    assert!(
        index_and_calibrate(
            one,
            &gold,
            &voltage(4500.0),
            ScreenKind::Flat,
            None,
            &scale()
        )
        .is_err()
    );
    let one_ring = calibrate_camera(
        one,
        &fcc[..1],
        &gold,
        &voltage(4500.0),
        ScreenKind::Flat,
        &scale(),
    )
    .unwrap();
    assert!(one_ring.warnings.iter().any(|w| w.contains("one ring")));
}
