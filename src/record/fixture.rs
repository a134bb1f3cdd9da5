//! Records for the tests of this stage. The grating record is invented but self-consistent:
//! a 600 lines/mm grating lit at 650 nm, screen 0.12 m away, orders −1, 0, +1, with the
//! budget computed from d = λ·√(y² + L²)/y (the exact grating equation at normal incidence).

use super::{BudgetLine, Ellipse, Feature, Fit, FitParameter, Input, Record, ResultEntry};
use super::{ScaleInfo, Timings};
use crate::photo::{ExifInfo, PhotoInfo};

/// Photo facts of an invented 4000×3000 JPEG.
pub(crate) fn photo_info() -> PhotoInfo {
    PhotoInfo {
        path: "bench/grating-600.jpg".into(),
        sha256: "3f7a9c0e5b1d2468ace13579bdf02468ace13579bdf02468ace13579bdf02468".into(),
        width: 4000,
        height: 3000,
        orientation: 1,
        exif: ExifInfo {
            make: Some("Examplecam".into()),
            model: Some("EC-1".into()),
            datetime: Some("2025:03:14 10:20:30".into()),
            focal_length_mm: Some(24.0),
            focal_length_35mm: Some(26.0),
            exposure_s: Some(0.01),
            f_number: Some(4.0),
            iso: Some(200),
        },
    }
}

/// A full grating-like record with every optional field present.
pub(crate) fn grating_record() -> Record {
    let lambda: f64 = 650e-9;
    let u_lambda = 3e-9;
    let distance: f64 = 0.12;
    let u_distance = 2e-3;
    let mm_per_px = 0.05;
    let u_mm_per_px = 0.0001;
    let pitch_true = 1e-3 / 600.0;
    let sin1 = lambda / pitch_true;
    let y1_m = distance * sin1 / (1.0 - sin1 * sin1).sqrt();
    let y1_px = y1_m * 1e3 / mm_per_px;
    let centre = [2000.0, 1500.0];

    let scale = ScaleInfo::new("ruler", mm_per_px, u_mm_per_px)
        .with_homography([
            [mm_per_px, 0.0, -centre[0] * mm_per_px],
            [0.0, mm_per_px, -centre[1] * mm_per_px],
            [0.0, 0.0, 1.0],
        ])
        .with_residual_px(0.12);
    let mut r = Record::new("grating", photo_info(), scale);
    r.created = "2025-03-14T10:21:00Z".into();
    r.set_input("wavelength", Input::given(lambda, u_lambda, "m"))
        .set_input("distance", Input::from_setup(distance, u_distance, "m"))
        .set_input("incidence", Input::assumed(0.0, 0.0087, "rad"));
    for (m, label) in [(-1.0, "m=-1"), (0.0, "m=0"), (1.0, "m=+1")] {
        let x = centre[0] + m * y1_px;
        r.push_feature(Feature::point(
            label,
            [x, centre[1] + 0.3 * m],
            [0.04, 0.05],
            [m * y1_m * 1e3, 0.015 * m],
        ));
    }
    r.push_feature(
        Feature::point("halo", centre, [0.5, 0.5], [0.0, 0.0])
            .with_radius(300.0, 15.0)
            .with_ellipse(Ellipse {
                cx: centre[0],
                cy: centre[1],
                a: 301.0,
                b: 299.0,
                angle: 0.2,
            }),
    );

    let y = y1_m;
    let hyp = (y * y + distance * distance).sqrt();
    let pitch = lambda * hyp / y;
    let c_lambda = hyp / y;
    let c_distance = lambda * distance / (y * hyp);
    let c_y = -lambda * distance * distance / (y * y * hyp);
    let u_y = y * u_mm_per_px / mm_per_px;
    let budget = vec![
        BudgetLine::new("distance", Some(c_distance), c_distance * u_distance),
        BudgetLine::new("wavelength", Some(c_lambda), c_lambda * u_lambda),
        BudgetLine::new("scale", Some(c_y), c_y * u_y),
    ];
    let u = budget
        .iter()
        .map(|b| b.contribution * b.contribution)
        .sum::<f64>()
        .sqrt();
    r.push_result(ResultEntry::new("pitch", pitch, u, "m", 2.0).with_budget(budget));
    r.fit = Some(Fit {
        model: "sin θm = m·λ/d".into(),
        parameters: vec![
            FitParameter {
                name: "slope".into(),
                value: sin1,
                u: 2e-4,
            },
            FitParameter {
                name: "offset".into(),
                value: 1e-5,
                u: 1e-4,
            },
        ],
        covariance: vec![vec![4e-8, -1e-9], vec![-1e-9, 1e-8]],
        rms_residual: 3e-5,
        points: 3,
    });
    r.warn("order m=+2 is off the frame");
    r.assume("incidence 0 ± 0.5° (not given)");
    r.timings_ms = Timings(vec![
        ("decode".into(), 210.0),
        ("scale".into(), 4.5),
        ("find".into(), 38.0),
        ("optics".into(), 0.4),
    ]);
    r
}

/// A record with only the required fields and one result.
pub(crate) fn minimal_record() -> Record {
    let mut photo = photo_info();
    photo.exif = ExifInfo::default();
    let mut r = Record::new("slit", photo, ScaleInfo::new("mm-per-px", 0.1, 0.001));
    r.push_result(ResultEntry::new("width", 1.0e-4, 2.0e-6, "m", 2.0));
    r
}

/// Asserts that two records are equal up to the last bits of their numbers: serde_json's
/// default float parser is best-effort and may be one unit in the last place off.
pub(crate) fn assert_same(a: &Record, b: &Record) {
    fn same(a: &serde_json::Value, b: &serde_json::Value, at: &str) {
        use serde_json::Value::{Array, Number, Object};
        match (a, b) {
            (Number(x), Number(y)) => {
                let (x, y) = (
                    x.as_f64().unwrap_or(f64::NAN),
                    y.as_f64().unwrap_or(f64::NAN),
                );
                assert!(
                    (x - y).abs() <= 4.0 * f64::EPSILON * x.abs().max(y.abs()),
                    "{at}: {x} vs {y}"
                );
            }
            (Array(x), Array(y)) => {
                assert_eq!(x.len(), y.len(), "{at}");
                for (i, (p, q)) in x.iter().zip(y).enumerate() {
                    same(p, q, &format!("{at}/{i}"));
                }
            }
            (Object(x), Object(y)) => {
                let keys = |m: &serde_json::Map<String, serde_json::Value>| {
                    m.keys().cloned().collect::<Vec<_>>()
                };
                assert_eq!(keys(x), keys(y), "{at}");
                for (k, p) in x {
                    same(p, &y[k], &format!("{at}/{k}"));
                }
            }
            _ => assert_eq!(a, b, "{at}"),
        }
    }
    let value = |r: &Record| serde_json::to_value(r).unwrap_or_default();
    same(&value(a), &value(b), "");
    assert_eq!(
        a.timings_ms.iter().map(|t| t.0).collect::<Vec<_>>(),
        b.timings_ms.iter().map(|t| t.0).collect::<Vec<_>>(),
        "timing order"
    );
}
