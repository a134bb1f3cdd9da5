use super::*;

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
