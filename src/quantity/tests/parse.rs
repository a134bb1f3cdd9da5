use super::*;
use std::f64::consts::PI;

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
