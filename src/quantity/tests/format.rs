use super::*;
use proptest::prelude::*;
use std::f64::consts::PI;

// ---- display (GUM 7.2.6) ----------------------------------------------------------------

#[test]
fn format_si_rounds_u_to_two_digits_and_the_value_to_match() {
    assert_eq!(format_si(1.66667e-6, 2.1e-9, "m"), "1.6667 ± 0.0021 µm");
    // JCGM 100:2008 §7.2.2 example: m_S = 100.021 47 g with u_c = 0.35 mg.
    assert_eq!(format_si(100.02147, 0.00035, ""), "100.02147 ± 0.00035");
    // JCGM 100:2008 §7.2.6: u = 28.05 kHz is shown as 28 kHz.
    assert_eq!(format_si(250e3, 28.05e3, "Hz"), "250 ± 28 kHz");
    // Rounding up into the next decade keeps two significant digits: 0.00996 → 0.010.
    assert_eq!(format_si(1.0, 0.00996, ""), "1.000 ± 0.010");
    assert_eq!(format_si(12344.0, 234.0, ""), "12340 ± 230");
    assert_eq!(format_si(2.5e-3, 1e-4, "V"), "0.00250 ± 0.00010 V");
    assert_eq!(format_si(1.25e4, 30.0, "m"), "12500 ± 30 m");
    assert_eq!(format_si(1.25, 0.002, "m"), "1.2500 ± 0.0020 m");
    assert_eq!(format_si(0.015, 0.0002, "m"), "15.00 ± 0.20 mm");
    assert_eq!(format_si(5000.0, 20.0, "V"), "5.000 ± 0.020 kV");
    assert_eq!(format_si(0.41, 0.0012, "rad"), "0.4100 ± 0.0012 rad");
    assert_eq!(format_si(1e-6, 1e-8, "m"), "1.000 ± 0.010 µm");
}

#[test]
fn format_si_edge_cases() {
    assert_eq!(format_si(632.9908e-9, 0.0, "m"), "632.991 ± 0 nm");
    assert_eq!(format_si(0.0, 5.8e-7, "m"), "0 ± 580 nm");
    assert_eq!(format_si(-1e-5, 0.01, ""), "0.000 ± 0.010");
    assert_eq!(format_si(-650e-9, 3e-9, "m"), "-650.0 ± 3.0 nm");
    assert_eq!(
        format_si(650e-9, f64::NAN, "m"),
        "650 nm (uncertainty not available)"
    );
    assert_eq!(
        format_si(650e-9, -1e-9, "m"),
        "650 nm (uncertainty not available)"
    );
    assert_eq!(
        format_si(650e-9, f64::INFINITY, "m"),
        "650 nm (uncertainty not available)"
    );
    assert_eq!(format_si(f64::NAN, 1e-9, "m"), "NaN m");
    assert_eq!(format_si(0.0, 0.0, "m"), "0 ± 0 m");
}

#[test]
fn format_in_uses_the_unit_asked_for() {
    assert_eq!(format_in(650e-9, 3e-9, "nm"), "650.0 ± 3.0 nm");
    assert_eq!(format_in(1.25, 0.002, "mm"), "1250.0 ± 2.0 mm");
    assert_eq!(
        format_in(PI / 6.0, 0.1 * PI / 180.0, "deg"),
        "30.00 ± 0.10 deg"
    );
    assert_eq!(format_in(5000.0, 20.0, "kV"), "5.000 ± 0.020 kV");
    assert_eq!(format_in(1.6e-6, 1e-7, "um"), "1.60 ± 0.10 µm");
    assert_eq!(format_in(1.5, 0.1, ""), "1.50 ± 0.10");
    assert!(format_in(1.0, 0.1, "furlong").contains("unknown unit `furlong`"));
}

#[test]
fn round_significant_gives_the_last_digit() {
    // JCGM 101:2008 §7.9.2 example (from memory): u = 0.000 35 g is c × 10^ℓ, c = 35, ℓ = −5.
    assert_eq!(round_significant(0.000354, 2), Some((0.00035, -5)));
    assert_eq!(round_significant(0.00996, 2), Some((0.010, -3)));
    assert_eq!(round_significant(32.0, 2), Some((32.0, 0)));
    assert_eq!(round_significant(0.0, 2), None);
    assert_eq!(round_significant(f64::NAN, 2), None);
}

proptest! {
    // What format_si shows reads back through parse to within its own rounding.
    #[test]
    fn format_si_reads_back(mantissa in 1.0f64..1000.0, exp in -12i32..=3, rel in -6.0f64..0.0,
                            negative in any::<bool>()) {
        let v = if negative { -mantissa } else { mantissa } * 10f64.powi(exp);
        let u = v.abs() * 10f64.powf(rel);
        let shown = format_si(v, u, "m");
        let q = parse(&shown, Dimension::Length).map_err(|e| TestCaseError::fail(e.to_string()))?;
        let (u_rounded, last) = round_significant(u, 2).unwrap();
        let half = 0.5 * 10f64.powi(last) * (1.0 + 1e-9) + 1e-12 * v.abs();
        prop_assert!((q.value - v).abs() <= half, "{shown}: {} vs {v}", q.value);
        let qu = q.u.unwrap();
        prop_assert!((qu - u_rounded).abs() <= 1e-9 * u, "{shown}: {qu} vs {u_rounded}");
        prop_assert!((qu - u).abs() <= half, "{shown}");
    }

    // Same through format_in for each unit a caller may ask for.
    #[test]
    fn format_in_reads_back(value in 0.001f64..1e4, rel in -5.0f64..0.0,
                            unit in prop::sample::select(vec!["m", "mm", "um", "nm", "pm",
                                "deg", "rad", "mrad", "V", "kV"])) {
        let (factor, dim) = unit_factor(unit).unwrap();
        let v = value * factor;
        let u = v * 10f64.powf(rel);
        let shown = format_in(v, u, unit);
        let q = parse(&shown, dim).map_err(|e| TestCaseError::fail(e.to_string()))?;
        // The last shown digit is a power of ten in the unit shown, not in SI.
        let (_, last) = round_significant(u / factor, 2).unwrap();
        let half = (0.5 * 10f64.powi(last) * (1.0 + 1e-9) + 1e-12 * value) * factor;
        prop_assert!((q.value - v).abs() <= half, "{shown}: {} vs {v}", q.value);
        prop_assert!((q.u.unwrap() - u).abs() <= half, "{shown}");
    }

    // Any text at all gives a value or an error, never a panic.
    #[test]
    fn parse_never_panics(text in "\\PC{0,16}") {
        let _ = parse(&text, Dimension::Length);
        let _ = parse(&text, Dimension::Dimensionless);
        let _ = parse_pitch(&text);
    }

    // Texts built from the pieces of the syntax, which reach the odd corners more often.
    #[test]
    fn parse_never_panics_on_near_misses(text in "[0-9.eE+\\-/ ±()a-zµ°]{0,12}") {
        let _ = parse(&text, Dimension::Angle);
        let _ = parse_pitch(&text);
    }
}
