//! End to end on simulated ring photos: `fringegauge simulate pinhole` renders the far
//! field numerically (projection-slice transform of the disc, no J1 formula), and
//! `fringegauge pinhole` must recover the diameter within its stated expanded uncertainty
//! (U = 2u) after the effective widening of the rings by the Gaussian beam.

mod common;
use common::{Bench, ruler_flag, simulate};
use serde_json::Value;

fn measure(b: &Bench, name: &str, truth: &Value) -> (i32, Value, String) {
    let wavelength = format!(
        "{}nm±0.5nm",
        truth["inputs"]["wavelength_m"].as_f64().unwrap() * 1e9
    );
    let distance = format!("{}m±1mm", truth["inputs"]["distance_m"].as_f64().unwrap());
    let ruler = ruler_flag(truth);
    let r = b.run(&[
        "pinhole",
        name,
        "--wavelength",
        &wavelength,
        "--distance",
        &distance,
        "--ruler",
        &ruler,
        "--json",
    ]);
    let record = serde_json::from_str(&r.stdout).unwrap_or(Value::Null);
    (r.code, record, r.stderr)
}

#[test]
fn pinhole_diameter_and_centre_from_a_simulated_photo() {
    let b = Bench::new();
    let truth = simulate(&b, "pinhole", "pin.png", &[]);
    let (code, record, err) = measure(&b, "pin.png", &truth);
    assert_eq!(code, 0, "{err}");
    let d = &record["results"][0];
    assert_eq!(d["name"], "diameter");
    let (v, u) = (d["value"].as_f64().unwrap(), d["u"].as_f64().unwrap());
    let truth_d = truth["inputs"]["diameter_m"].as_f64().unwrap();
    // The simulator's Gaussian beam dims the hole's rim and widens the first dark ring by
    // about 0.24 % (its own note): the check allows 2u about the nominal diameter plus that.
    assert!(
        (v - truth_d).abs() <= 2.0 * u + 0.0025 * truth_d,
        "D {v} ± {u} vs {truth_d}"
    );
    // DESIGN §6 asks ≤ 0.05 px bias on clean rings; this photo has speckle, glare and a
    // ruler across the rings, so the check is its own stated uncertainty (3u) + 0.1 px.
    let c = &record["features"][0];
    assert_eq!(c["label"], "centre");
    for i in 0..2 {
        let (px, pu) = (c["px"][i].as_f64().unwrap(), c["px_u"][i].as_f64().unwrap());
        let t = truth["centre_px"][i].as_f64().unwrap();
        assert!(
            (px - t).abs() <= 3.0 * pu + 0.1,
            "centre {i}: {px} ± {pu} vs {t}"
        );
    }
}

#[test]
fn a_photo_without_rings_is_a_measurement_failure() {
    // A blank screen: the photo reads, but there is no pattern (exit 1).
    let b = Bench::new();
    let img = image::RgbImage::from_pixel(320, 240, image::Rgb([90, 90, 90]));
    img.save(b.path("blank.png")).unwrap();
    let r = b.run(&[
        "pinhole",
        "blank.png",
        "--wavelength",
        "650nm",
        "--distance",
        "2m",
        "--mm-per-px",
        "0.1",
    ]);
    assert_eq!(r.code, 1, "{}", r.stderr);
}

#[test]
fn a_pinhole_seen_square_on_and_from_20_degrees_gives_the_same_diameter() {
    // A yawed view foreshortens the screen along the ruler only; the map squares the
    // scale across it from the camera's geometry, so the rings stay circles in mm.
    let b = Bench::new();
    let square = simulate(&b, "pinhole", "square.png", &["--camera-yaw", "0deg"]);
    let yawed = simulate(&b, "pinhole", "yawed.png", &["--camera-yaw", "20deg"]);
    let (c0, r0, e0) = measure(&b, "square.png", &square);
    let (c1, r1, e1) = measure(&b, "yawed.png", &yawed);
    assert_eq!(c0, 0, "{e0}");
    assert_eq!(c1, 0, "{e1}");
    let d = |r: &Value| {
        let x = &r["results"][0];
        (x["value"].as_f64().unwrap(), x["u"].as_f64().unwrap())
    };
    let ((d0, u0), (d1, u1)) = (d(&r0), d(&r1));
    assert!(
        (d0 - d1).abs() <= 2.0 * u0.hypot(u1),
        "square {d0} ± {u0}, yawed {d1} ± {u1}"
    );
    // Both near the truth: within 2u plus the simulator's 0.24 % beam widening.
    let t = square["inputs"]["diameter_m"].as_f64().unwrap();
    assert!(
        (d1 - t).abs() <= 2.0 * u1 + 0.0025 * t,
        "{d1} ± {u1} vs {t}"
    );
}

#[test]
fn pinholes_across_the_range_from_50_to_500_micrometres() {
    // The ends of the range a laser-drilled pinhole check covers; the camera frames four
    // to six dark rings, as a person would to keep the ruler's millimetres resolved.
    for (d, l, rings) in [("50um", "1m", "4"), ("0.5mm", "2.5m", "6")] {
        let b = Bench::new();
        let truth = simulate(
            &b,
            "pinhole",
            "pin.jpg",
            &["--diameter", d, "--distance", l, "--frame-orders", rings],
        );
        let (code, record, err) = measure(&b, "pin.jpg", &truth);
        assert_eq!(code, 0, "{d}: {err}");
        let r = &record["results"][0];
        let (v, u) = (r["value"].as_f64().unwrap(), r["u"].as_f64().unwrap());
        let t = truth["inputs"]["diameter_m"].as_f64().unwrap();
        assert!(
            (v - t).abs() <= 2.0 * u + 0.0025 * t,
            "{d}: {v} ± {u} vs {t}"
        );
    }
}
