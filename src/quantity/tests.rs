use super::*;
use proptest::prelude::*;
use std::f64::consts::PI;

fn len(text: &str) -> Quantity {
    parse(text, Dimension::Length).unwrap_or_else(|e| panic!("{text}: {e}"))
}

fn err(text: &str, dim: Dimension) -> QuantityError {
    match parse(text, dim) {
        Ok(q) => panic!("{text} parsed as {q:?}"),
        Err(e) => e,
    }
}

// ---- every unit -------------------------------------------------------------------------

#[test]
fn every_length_unit_converts_exactly() {
    // Exact decimal conversions: the parsed value equals the correctly rounded SI literal.
    assert_eq!(len("2m").value, 2.0);
    assert_eq!(len("2.5cm").value, 0.025);
    assert_eq!(len("650mm").value, 0.65);
    assert_eq!(len("1.6um").value, 1.6e-6);
    assert_eq!(len("1.6\u{b5}m").value, 1.6e-6);
    assert_eq!(len("1.6\u{3bc}m").value, 1.6e-6);
    assert_eq!(len("650nm").value, 650e-9);
    assert_eq!(len("17.302pm").value, 17.302e-12);
}

#[test]
fn every_angle_and_voltage_unit() {
    let a = |t: &str| parse(t, Dimension::Angle).unwrap().value;
    assert!((a("30deg") - PI / 6.0).abs() < 1e-15);
    assert_eq!(a("30deg"), a("30°"));
    assert_eq!(a("0.5rad"), 0.5);
    assert_eq!(a("12mrad"), 0.012);
    let v = |t: &str| parse(t, Dimension::Voltage).unwrap().value;
    assert_eq!(v("4.999V"), 4.999);
    assert_eq!(v("5kV"), 5000.0);
    let n = parse("1.000275", Dimension::Dimensionless).unwrap();
    assert_eq!((n.value, n.u), (1.000275, None));
}

#[test]
fn unit_factor_knows_every_unit() {
    assert_eq!(unit_factor("nm"), Some((1e-9, Dimension::Length)));
    assert_eq!(unit_factor("µm"), unit_factor("um"));
    assert_eq!(unit_factor("μm"), unit_factor("um"));
    assert_eq!(unit_factor("cm"), Some((0.01, Dimension::Length)));
    assert_eq!(unit_factor("deg"), Some((PI / 180.0, Dimension::Angle)));
    assert_eq!(unit_factor("°"), unit_factor("deg"));
    assert_eq!(unit_factor("mrad"), Some((1e-3, Dimension::Angle)));
    assert_eq!(unit_factor("kV"), Some((1e3, Dimension::Voltage)));
    assert_eq!(unit_factor(""), Some((1.0, Dimension::Dimensionless)));
    assert_eq!(unit_factor("Mm"), None);
    assert_eq!(unit_factor("inch"), None);
}

// ---- syntax forms -----------------------------------------------------------------------

#[test]
fn every_spelling_of_plus_minus_gives_the_same_value() {
    let want = Quantity {
        value: 650e-9,
        u: Some(3e-9),
        dim: Dimension::Length,
    };
    for t in [
        "650nm±3nm",
        "650nm+-3nm",
        "650nm+/-3nm",
        "650nm ± 3nm",
        " 650 nm ± 3 nm ",
        "650nm±3",
        "650±3nm",
        "650 +- 3 nm",
        "(650 ± 3) nm",
        "(650+/-3)nm",
    ] {
        assert_eq!(len(t), want, "{t}");
    }
}

#[test]
fn value_and_uncertainty_may_have_different_units() {
    let q = len("1.250m±2mm");
    assert_eq!((q.value, q.u), (1.25, Some(0.002)));
    let v = parse("5kV±20V", Dimension::Voltage).unwrap();
    assert_eq!((v.value, v.u), (5000.0, Some(20.0)));
    let a = parse("12.5deg±3mrad", Dimension::Angle).unwrap();
    assert_eq!(a.u, Some(0.003));
}

#[test]
fn numbers_in_every_written_form() {
    assert_eq!(len("1.5e-3m").value, 1.5e-3);
    assert_eq!(len("1.5E-3m").value, 1.5e-3);
    assert_eq!(len("15e+2nm").value, 1.5e-6);
    assert_eq!(len(".5mm").value, 5e-4);
    assert_eq!(len("5.mm").value, 5e-3);
    assert_eq!(len("+5mm").value, 5e-3);
    assert_eq!(len("-2.5mm").value, -2.5e-3);
    assert_eq!(len("650nm").u, None);
    assert_eq!(len("650nm±0").u, Some(0.0));
    assert_eq!(len("650nm±-0").u.map(f64::is_sign_positive), Some(true));
    let d = parse("1.5±0.1", Dimension::Dimensionless).unwrap();
    assert_eq!((d.value, d.u), (1.5, Some(0.1)));
}

// ---- malformed input --------------------------------------------------------------------

#[test]
fn empty_text_says_what_is_expected() {
    for t in ["", "   "] {
        let e = err(t, Dimension::Length);
        assert!(matches!(e, QuantityError::Empty { .. }), "{e:?}");
        assert!(e.to_string().contains("650nm±3nm"), "{e}");
    }
}

#[test]
fn not_a_number() {
    let e = err("abc", Dimension::Length);
    assert!(matches!(e, QuantityError::BadNumber { ref part, .. } if part == "abc"));
    let msg = e.to_string();
    assert!(
        msg.contains("`abc`") && msg.contains("e.g. 650nm±3nm"),
        "{msg}"
    );
    let e = err("1.5.3mm", Dimension::Length);
    assert!(matches!(e, QuantityError::BadNumber { .. }), "{e:?}");
    let e = err("1,5mm", Dimension::Length);
    assert!(e.to_string().contains("decimal point"), "{e}");
    assert!(matches!(
        err("nm650", Dimension::Length),
        QuantityError::BadNumber { .. }
    ));
}

#[test]
fn unknown_unit_lists_the_accepted_ones() {
    let e = err("650xm", Dimension::Length);
    assert!(matches!(e, QuantityError::UnknownUnit { ref unit, hint: None, .. } if unit == "xm"));
    let msg = e.to_string();
    assert!(
        msg.contains("`650xm`") && msg.contains("m, cm, mm, um (or µm), nm, pm"),
        "{msg}"
    );
    let e = err("5KV", Dimension::Voltage);
    assert!(e.to_string().contains("did you mean `kV`"), "{e}");
    let e = err("1.5xyz", Dimension::Dimensionless);
    assert!(e.to_string().contains("no unit"), "{e}");
}

#[test]
fn a_missing_unit_is_an_error_that_names_the_units() {
    let e = err("650", Dimension::Length);
    assert!(matches!(e, QuantityError::MissingUnit { .. }));
    assert!(e.to_string().contains("needs one of m, cm, mm"), "{e}");
    let e = err("650±3", Dimension::Length);
    assert!(matches!(e, QuantityError::MissingUnit { .. }));
    let e = err("12.5", Dimension::Angle);
    assert!(e.to_string().contains("deg (or °), rad, mrad"), "{e}");
}

#[test]
fn a_unit_of_another_dimension_is_refused() {
    let e = err("5V", Dimension::Length);
    assert!(matches!(
        e,
        QuantityError::WrongDimension {
            found: Dimension::Voltage,
            expected: Expected::Value(Dimension::Length),
            ..
        }
    ));
    assert!(
        e.to_string().contains("voltage, but a length is expected"),
        "{e}"
    );
    assert!(matches!(
        err("650nm±3deg", Dimension::Length),
        QuantityError::WrongDimension { .. }
    ));
    assert!(matches!(
        err("1.5mm", Dimension::Dimensionless),
        QuantityError::WrongDimension { .. }
    ));
}

#[test]
fn missing_parts_around_plus_minus() {
    let e = err("650nm±", Dimension::Length);
    assert!(matches!(e, QuantityError::MissingUncertainty { .. }));
    assert!(e.to_string().contains("nothing after the ±"), "{e}");
    let e = err("±3nm", Dimension::Length);
    assert!(matches!(e, QuantityError::MissingValue { .. }));
    assert!(e.to_string().contains("no value before the ±"), "{e}");
    let e = err("650±3±2nm", Dimension::Length);
    assert!(e.to_string().contains("more than one ±"), "{e}");
}

#[test]
fn nan_and_infinity_are_refused() {
    for t in [
        "NaN nm",
        "nan",
        "inf m",
        "-infinity mm",
        "1e999m",
        "650nm±1e999nm",
    ] {
        let e = err(t, Dimension::Length);
        assert!(matches!(e, QuantityError::NotFinite { .. }), "{t}: {e:?}");
        assert!(e.to_string().contains("not a finite number"), "{e}");
    }
    // Finite in kV but infinite in V.
    let e = err("1e306kV", Dimension::Voltage);
    assert!(matches!(e, QuantityError::NotFinite { .. }), "{e:?}");
}

#[test]
fn a_negative_uncertainty_is_refused() {
    for t in ["650nm±-3nm", "650nm+--3nm"] {
        let e = err(t, Dimension::Length);
        assert!(
            matches!(e, QuantityError::NegativeUncertainty { .. }),
            "{t}: {e:?}"
        );
        assert!(e.to_string().contains("≥ 0"), "{e}");
    }
}

#[test]
fn parentheses_must_be_whole_and_carry_the_unit_once() {
    assert!(matches!(
        err("(650±3nm", Dimension::Length),
        QuantityError::Malformed(_)
    ));
    assert!(matches!(
        err("(650±3nm) nm", Dimension::Length),
        QuantityError::Malformed(_)
    ));
    assert!(matches!(
        err("650(3) nm", Dimension::Length),
        QuantityError::Malformed(_)
    ));
}

#[test]
fn require_positive_names_the_quantity_and_shows_the_value() {
    let q = len("-1.2m");
    let e = require_positive(q, "distance").unwrap_err();
    assert_eq!(e.to_string(), "distance must be > 0, got -1.2 m");
    let e = require_positive(len("-3nm"), "wavelength").unwrap_err();
    assert_eq!(e.to_string(), "wavelength must be > 0, got -3 nm");
    let zero = require_positive(len("0mm"), "distance").unwrap_err();
    assert_eq!(zero.to_string(), "distance must be > 0, got 0 m");
    let nan = Quantity {
        value: f64::NAN,
        u: None,
        dim: Dimension::Length,
    };
    assert!(require_positive(nan, "distance").is_err());
    assert_eq!(require_positive(len("1mm"), "distance"), Ok(len("1mm")));
}

// ---- pitch ------------------------------------------------------------------------------

fn pitch(text: &str) -> Quantity {
    parse_pitch(text).unwrap_or_else(|e| panic!("{text}: {e}"))
}

#[test]
fn pitch_as_a_length() {
    // CD track pitch 1.6 ± 0.1 µm (IEC 60908 / ECMA-130).
    let q = pitch("1.6um±0.1um");
    assert_eq!((q.value, q.u), (1.6e-6, Some(1e-7)));
    assert_eq!(pitch("0.74µm").value, 0.74e-6);
}

#[test]
fn pitch_as_a_fraction_of_a_length() {
    let q = pitch("1/600mm");
    assert!((q.value - 1e-3 / 600.0).abs() < 1e-20);
    assert_eq!(q.u, None);
    let q = pitch("1/600mm±0.002um");
    assert_eq!(q.u, Some(2e-9));
    let q = pitch("1/600mm±0.000002");
    assert!((q.u.unwrap() - 2e-9).abs() < 1e-24);
}

#[test]
fn pitch_as_a_line_density() {
    let d = 1.0 / 600e3;
    for t in [
        "600/mm",
        "600 /mm",
        "600 lines/mm",
        "600l/mm",
        "6000/cm",
        "0.6/um",
    ] {
        let q = pitch(t);
        assert!((q.value - d).abs() < 1e-12 * d, "{t}: {}", q.value);
        assert_eq!(q.u, None);
    }
    // u(d) = u(n)/n² (first-order propagation through d = 1/n, JCGM 100:2008 eq. 10).
    let u = 2e3 / (600e3 * 600e3);
    for t in [
        "600/mm±2/mm",
        "600/mm ± 2/mm",
        "600±2/mm",
        "600/mm±2",
        "600/mm+-20/cm",
    ] {
        let q = pitch(t);
        assert!((q.value - d).abs() < 1e-12 * d, "{t}");
        let got = q.u.unwrap_or(f64::NAN);
        assert!((got - u).abs() < 1e-12 * u, "{t}: {got}");
    }
}

#[test]
fn bad_pitches_are_refused_with_a_pitch_example() {
    let e = parse_pitch("0/mm").unwrap_err();
    assert_eq!(e.to_string(), "line density must be > 0, got 0/mm");
    assert!(matches!(
        parse_pitch("-1.6um"),
        Err(QuantityError::NotPositive { .. })
    ));
    assert!(matches!(
        parse_pitch("1/0mm"),
        Err(QuantityError::NotPositive { .. })
    ));
    let e = parse_pitch("600/deg").unwrap_err();
    assert!(matches!(
        e,
        QuantityError::WrongDimension {
            expected: Expected::Pitch,
            ..
        }
    ));
    assert!(e.to_string().contains("600/mm±2/mm"), "{e}");
    assert!(matches!(
        parse_pitch("600/"),
        Err(QuantityError::MissingUnit { .. })
    ));
    assert!(matches!(
        parse_pitch("600/xm"),
        Err(QuantityError::UnknownUnit { .. })
    ));
    let e = parse_pitch("600/mm±2mm").unwrap_err();
    assert!(e.to_string().contains("a line density too"), "{e}");
    assert!(matches!(
        parse_pitch("600 x/mm"),
        Err(QuantityError::Malformed(_))
    ));
    assert!(matches!(
        parse_pitch("600/mm±-2/mm"),
        Err(QuantityError::NegativeUncertainty { .. })
    ));
    assert!(matches!(
        parse_pitch("1.6"),
        Err(QuantityError::MissingUnit { .. })
    ));
    assert!(matches!(parse_pitch(""), Err(QuantityError::Empty { .. })));
    assert!(matches!(
        parse_pitch("1mm/600"),
        Err(QuantityError::Malformed(_))
    ));
}

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
