//! End to end on simulated electron-diffraction tube photos: `fringegauge simulate
//! electron` renders the rings from the film's structure factor and Bragg geometry (its own
//! code, shared with nothing in the solvers), and `fringegauge electron` must recover the
//! spacings, indices and lattice constants within its stated uncertainty. Photos are the
//! simulator's default 1600 × 1200 px at 4.5 kV with a flat screen 131 mm from the film.
//!
//! Reference values:
//! - graphite, hexagonal (graphite-2H, P6₃/mmc), a = 0.2461 nm, the value crystallographic
//!   tables give for the carbon films of diffraction tubes (Trucano & Chen, Nature 258:136,
//!   1975, measured 0.2464 nm; REFERENCES.md): d(10.0) = a√3/2 = 0.2131 nm and
//!   d(11.0) = a/2 = 0.1230 nm, the tube's two bright rings;
//! - gold, fcc, a = 0.40782 nm (a common tabulated value, REFERENCES.md): rings in the
//!   ratio √3 : √4 : √8 : √11 : √12 (111, 200, 220, 311, 222: the fcc sequence).

mod common;
use common::{Bench, Run, ruler_flag, simulate};
use serde_json::Value;

const GRAPHITE_A_NM: f64 = 0.2461;
const GOLD_A_NM: f64 = 0.40782;

fn measure(b: &Bench, photo: &str, truth: &Value, extra: &[&str]) -> Run {
    let ruler = ruler_flag(truth);
    let mut args = vec!["electron", photo, "--ruler", &ruler, "--json"];
    args.extend_from_slice(extra);
    b.run(&args)
}

/// The tube as the simulator sets it up, given with the uncertainties a bench would state.
const TUBE: [&str; 4] = ["--voltage", "4.5kV±20V", "--distance", "131mm±1mm"];

fn results<'a>(rec: &'a Value, name: &str) -> Vec<&'a Value> {
    rec["results"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|r| r["name"] == name)
        .collect()
}

fn value_u(r: &Value) -> (f64, f64) {
    (r["value"].as_f64().unwrap(), r["u"].as_f64().unwrap())
}

fn warnings(rec: &Value) -> Vec<String> {
    rec["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect()
}

/// The record validates against the schema the binary prints.
fn assert_valid_record(b: &Bench, rec: &Value) {
    let schema: Value = serde_json::from_str(&b.run(&["schema"]).stdout).unwrap();
    let validator = jsonschema::draft202012::new(&schema).unwrap();
    let errors: Vec<String> = validator.iter_errors(rec).map(|e| e.to_string()).collect();
    assert!(errors.is_empty(), "{errors:?}");
}

#[test]
fn graphite_spacings_and_constant_from_a_simulated_tube() {
    let b = Bench::new();
    let truth = simulate(
        &b,
        "electron",
        "carbon.png",
        &["--lattice", "hex:a=0.2461nm"],
    );
    let mut extra = TUBE.to_vec();
    extra.extend([
        "--lattice",
        "hex",
        "--overlay",
        "ov.png",
        "--plot",
        "plot.png",
    ]);
    let r = measure(&b, "carbon.png", &truth, &extra);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    assert_valid_record(&b, &rec);
    let d = results(&rec, "d_spacing");
    assert!(d.len() >= 2, "{}", r.stdout);
    let a = GRAPHITE_A_NM * 1e-9;
    for (ring, (index, expected)) in d
        .iter()
        .zip([("10.0", a * 0.75f64.sqrt()), ("11.0", a / 2.0)])
    {
        assert_eq!(ring["index"], index, "{ring}");
        let (v, u) = value_u(ring);
        // Within the expanded uncertainty (k = 2), DESIGN §6.
        assert!(
            (v - expected).abs() <= 2.0 * u,
            "{index}: {v} ± {u} vs {expected}"
        );
        assert!(u / v < 0.02, "{index}: u {u} of {v}");
    }
    let (av, au) = value_u(results(&rec, "lattice_a")[0]);
    assert!((av - a).abs() <= 2.0 * au, "a {av} ± {au}");
    // Rings carry both their radius and their ellipse in the photo.
    let ring = rec["features"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["label"] == "ring 1 (10.0)")
        .unwrap();
    assert!(ring["radius_mm"].as_f64().unwrap() > 0.0 && ring["ellipse"]["a"].as_f64().is_some());
    assert!(b.path("ov.png").exists() && b.path("plot.png").exists());
}

#[test]
fn gold_rings_index_as_fcc() {
    // Crystallites of 8 nm give rings narrow enough (0.5 mm) that 311 and 222, 0.9 mm
    // apart on this tube, are two rings (with the default 3 nm they merge).
    let b = Bench::new();
    let truth = simulate(
        &b,
        "electron",
        "gold.png",
        &["--lattice", "fcc:a=0.40782nm", "--grain", "8nm"],
    );
    let mut extra = TUBE.to_vec();
    extra.extend(["--lattice", "fcc:a=0.40782nm"]);
    let r = measure(&b, "gold.png", &truth, &extra);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    assert_valid_record(&b, &rec);
    let d = results(&rec, "d_spacing");
    let index: Vec<&str> = d
        .iter()
        .take(5)
        .map(|r| r["index"].as_str().unwrap_or("-"))
        .collect();
    assert_eq!(index, ["111", "200", "220", "311", "222"], "{}", r.stdout);
    // Their spacings go as 1/√(h²+k²+l²): (d₁₁₁/d)² = 1, 4/3, 8/3, 11/3, 4.
    let d0 = value_u(d[0]).0;
    for (ring, m) in d.iter().take(5).zip([3.0, 4.0, 8.0, 11.0, 12.0]) {
        let (v, u) = value_u(ring);
        let ratio = (d0 / v).powi(2);
        let rel_u = 2.0 * (u / v).hypot(value_u(d[0]).1 / d0); // generous: shared inputs cancel
        assert!(
            (ratio / (m / 3.0) - 1.0).abs() <= 2.0 * rel_u,
            "{m}: {ratio}"
        );
    }
    let (av, au) = value_u(results(&rec, "lattice_a")[0]);
    let a = GOLD_A_NM * 1e-9;
    assert!((av - a).abs() <= 2.0 * au, "a {av} ± {au}");
}

#[test]
fn camera_length_round_trip_through_a_setup_file() {
    let b = Bench::new();
    let gold = simulate(
        &b,
        "electron",
        "gold.png",
        &["--lattice", "fcc:a=0.40782nm", "--grain", "8nm"],
    );
    let calibrate = [
        "--voltage",
        "4.5kV±20V",
        "--calibrate-with",
        "fcc:a=0.40782nm",
        "--save-setup",
        "bench.toml",
    ];
    let r = measure(&b, "gold.png", &gold, &calibrate);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let (l, u) = r.result("camera_length");
    let truth_l = gold["inputs"]["screen"]["distance_m"].as_f64().unwrap();
    assert!((l - truth_l).abs() <= 2.0 * u, "L {l} ± {u} vs {truth_l}");
    assert!(u / l < 0.01, "{u}");
    let text = std::fs::read_to_string(b.path("bench.toml")).unwrap();
    assert!(
        text.contains("kind = \"electron\"") && text.contains("distance = "),
        "{text}"
    );
    // The file is not replaced without --force.
    let again = measure(&b, "gold.png", &gold, &calibrate);
    assert_eq!(again.code, 2, "{}", again.stderr);
    assert!(again.stderr.contains("--force"));

    // A carbon film in the same tube, measured with the saved bench.
    let carbon = simulate(
        &b,
        "electron",
        "carbon.png",
        &["--lattice", "hex:a=0.2461nm", "--seed", "5"],
    );
    let r = measure(
        &b,
        "carbon.png",
        &carbon,
        &["--setup", "bench.toml", "--lattice", "hex"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    assert_eq!(rec["setup"]["inputs"]["distance"]["source"], "setup-file");
    let (av, au) = r.result("lattice_a");
    let a = GRAPHITE_A_NM * 1e-9;
    assert!((av - a).abs() <= 2.0 * au, "a {av} ± {au}");
}

#[test]
fn faint_rings_on_a_steep_glow_with_a_haloed_centre() {
    // Rings 4 % over the glow before the bloom of a centre saturated 20×, which lifts the
    // glow under them to leave about 2 %.
    let b = Bench::new();
    let truth = simulate(
        &b,
        "electron",
        "faint.png",
        &[
            "--lattice",
            "hex:a=0.2461nm",
            "--ring-contrast",
            "0.04",
            "--overexposure",
            "20",
            "--bloom",
            "1",
        ],
    );
    let mut extra = TUBE.to_vec();
    extra.extend(["--lattice", "hex"]);
    let r = measure(&b, "faint.png", &truth, &extra);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    let d = results(&rec, "d_spacing");
    assert_eq!(d[0]["index"], "10.0");
    assert_eq!(d[1]["index"], "11.0");
    let (av, au) = r.result("lattice_a");
    let a = GRAPHITE_A_NM * 1e-9;
    assert!((av - a).abs() <= 2.0 * au, "a {av} ± {au}");
    let heights: Vec<f64> = rec["fit"]["parameters"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["name"].as_str().unwrap().ends_with("height over glow"))
        .map(|p| p["value"].as_f64().unwrap())
        .collect();
    assert!(heights.iter().take(2).all(|h| *h < 0.03), "{heights:?}");
}

#[test]
fn one_ring_gives_its_spacing_and_refuses_to_index() {
    // At 340 mm only graphite's 10.0 ring reaches the 50 mm screen; 11.0 lies beyond it.
    let b = Bench::new();
    let truth = simulate(
        &b,
        "electron",
        "one.png",
        &["--lattice", "hex:a=0.2461nm", "--distance", "340mm"],
    );
    let r = measure(
        &b,
        "one.png",
        &truth,
        &[
            "--voltage",
            "4.5kV±20V",
            "--distance",
            "340mm±1mm",
            "--lattice",
            "hex",
        ],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    let d = results(&rec, "d_spacing");
    assert_eq!(d.len(), 1, "{}", r.stdout);
    assert!(d[0].get("index").is_none());
    let (v, u) = value_u(d[0]);
    let expected = GRAPHITE_A_NM * 1e-9 * 0.75f64.sqrt();
    assert!((v - expected).abs() <= 2.0 * u, "{v} ± {u}");
    assert!(
        warnings(&rec)
            .iter()
            .any(|w| w.contains("indexing as hex refused") && w.contains("two rings")),
        "{:?}",
        warnings(&rec)
    );
    assert!(results(&rec, "lattice_a").is_empty());
}

#[test]
fn rings_off_the_frame_are_warned_about_and_a_centre_off_it_is_refused() {
    let b = Bench::new();
    let truth = simulate(
        &b,
        "electron",
        "carbon.png",
        &["--lattice", "hex:a=0.2461nm"],
    );
    let img = image::open(b.path("carbon.png")).unwrap();
    let cx = truth["centre_px"][0].as_f64().unwrap() as u32;
    // Keep 120 px left of the centre: the 10.0 ring (about 82 px) stays whole, 11.0
    // (about 143 px) runs off the left edge. The ruler stays in the frame.
    let left = cx - 120;
    img.crop_imm(left, 0, img.width() - left, img.height())
        .save(b.path("cut.png"))
        .unwrap();
    let shift = |i: usize, v: f64| {
        if i.is_multiple_of(2) {
            v - left as f64
        } else {
            v
        }
    };
    let r = &truth["ruler"];
    let ends = [
        r["start_px"][0].as_f64().unwrap(),
        r["start_px"][1].as_f64().unwrap(),
        r["end_px"][0].as_f64().unwrap(),
        r["end_px"][1].as_f64().unwrap(),
    ];
    // The ruler's ends pulled inward as a person would click them, kept inside the crop.
    let pick = |f: f64, i: usize| ends[i] + f * (ends[i + 2] - ends[i]);
    let ruler: Vec<String> = [pick(0.05, 0), pick(0.05, 1), pick(0.95, 0), pick(0.95, 1)]
        .iter()
        .enumerate()
        .map(|(i, v)| format!("{:.0}", shift(i, *v).max(5.0)))
        .collect();
    let ruler = ruler.join(",");
    let mut args = vec!["electron", "cut.png", "--ruler", &ruler, "--json"];
    args.extend(TUBE);
    args.extend(["--lattice", "hex"]);
    let run = b.run(&args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let rec = run.record();
    let w = warnings(&rec);
    assert!(w.iter().any(|w| w.contains("runs off the frame")), "{w:?}");
    let d = results(&rec, "d_spacing");
    let (v, u) = value_u(d[0]);
    let expected = GRAPHITE_A_NM * 1e-9 * 0.75f64.sqrt();
    assert!((v - expected).abs() <= 2.0 * u, "{v} ± {u}");

    // With the centre itself cut away there is nothing to measure about (exit 1).
    img.crop_imm(cx + 40, 0, img.width() - cx - 40, img.height())
        .save(b.path("gone.png"))
        .unwrap();
    let mut args = vec!["electron", "gone.png", "--mm-per-px", "0.1366"];
    args.extend(TUBE);
    let run = b.run(&args);
    assert_eq!(run.code, 1, "{}", run.stderr);
}

#[test]
fn a_tube_with_its_beam_off_is_not_measured() {
    let b = Bench::new();
    let truth = simulate(&b, "electron", "off.png", &["--beam-off"]);
    let r = measure(&b, "off.png", &truth, &TUBE);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(r.stderr.contains("beam"), "{}", r.stderr);
    assert!(r.stdout.is_empty());
}

#[test]
fn bad_usage_is_refused_before_the_photo_is_read() {
    let b = Bench::new();
    // No voltage; a flat screen without a distance; a sphere without its radius; a film
    // to calibrate against without its constant; a setup file without a calibration.
    for (args, needle) in [
        (
            vec!["--distance", "131mm", "--mm-per-px", "0.1"],
            "--voltage",
        ),
        (
            vec!["--voltage", "4.5kV", "--mm-per-px", "0.1"],
            "--distance",
        ),
        (
            vec![
                "--voltage",
                "4.5kV",
                "--screen",
                "sphere",
                "--mm-per-px",
                "0.1",
            ],
            "sphere:RADIUS",
        ),
        (
            vec![
                "--voltage",
                "4.5kV",
                "--calibrate-with",
                "fcc",
                "--mm-per-px",
                "0.1",
            ],
            "constant",
        ),
        (
            vec![
                "--voltage",
                "4.5kV",
                "--distance",
                "1m",
                "--save-setup",
                "x.toml",
                "--mm-per-px",
                "0.1",
            ],
            "calibrate-with",
        ),
        (
            vec!["--voltage=-4kV", "--distance", "1m", "--mm-per-px", "0.1"],
            "voltage",
        ),
    ] {
        let mut a = vec!["electron", "missing.png"];
        a.extend(args.iter());
        let r = b.run(&a);
        assert_eq!(r.code, 2, "{a:?}: {}", r.stderr);
        assert!(r.stderr.contains(needle), "{a:?}: {}", r.stderr);
    }
}

#[test]
fn help_carries_the_kilovolt_caution() {
    let b = Bench::new();
    let r = b.run(&["electron", "--help"]);
    assert_eq!(r.code, 0);
    for needle in [
        "kilovolts",
        "interlocked",
        "beam current",
        "does not certify",
    ] {
        assert!(r.stdout.contains(needle), "{needle}: {}", r.stdout);
    }
}

/// An image already in reciprocal space, drawn here: gold's rings at r = 1/(d·k) px about
/// (400.3, 399.6) with k = 0.04 nm⁻¹ per px, each a Gaussian in radius (σ 2 px) spread over
/// its circumference, peaking 5 % over a glow falling as (1 + (r/60)²)^(−3/2), a saturated
/// spot, and ±1 % pixel noise (a fixed hash), stored as 16-bit sRGB.
fn reciprocal_gold(path: &std::path::Path) {
    let k = 0.04; // nm⁻¹ per px
    let radii: Vec<f64> = [3.0f64, 4.0, 8.0, 11.0, 12.0]
        .iter()
        .map(|m| 1.0 / (GOLD_A_NM / m.sqrt() * k))
        .collect();
    let (cx, cy) = (400.3, 399.6);
    let img = image::ImageBuffer::from_fn(800, 800, |x, y| {
        let r = (x as f64 - cx).hypot(y as f64 - cy);
        let glow = |r: f64| 0.5 * (1.0 + (r / 60.0).powi(2)).powf(-1.5) + 0.05;
        let rings: f64 = radii
            .iter()
            .map(|&rk| 0.05 * glow(rk) * rk / r.max(1.0) * (-0.5 * ((r - rk) / 2.0).powi(2)).exp())
            .sum();
        let mut h = (u64::from(y) * 1_000_003 + u64::from(x)).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        h ^= h >> 29;
        let noise = 0.01 * ((h % 2001) as f64 / 1000.0 - 1.0);
        let spot = 20.0 * (-0.5 * (r / 4.0).powi(2)).exp();
        let linear = (glow(r) * (1.0 + noise) + rings + spot).min(1.0);
        let srgb = if linear <= 0.003_130_8 {
            12.92 * linear
        } else {
            1.055 * linear.powf(1.0 / 2.4) - 0.055
        };
        image::Luma([(srgb * 65535.0).round() as u16])
    });
    img.save(path).unwrap();
}

#[test]
fn a_reciprocal_scaled_image_gives_spacings_without_voltage_or_scale() {
    let b = Bench::new();
    reciprocal_gold(&b.path("recip.png"));
    let r = b.run(&[
        "electron",
        "recip.png",
        "--reciprocal-per-px",
        "0.04±0.0002/nm",
        "--lattice",
        "fcc",
        "--json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let rec = r.record();
    assert_valid_record(&b, &rec);
    assert_eq!(rec["scale"]["method"], "reciprocal-per-px");
    let d = results(&rec, "d_spacing");
    let index: Vec<&str> = d
        .iter()
        .map(|r| r["index"].as_str().unwrap_or("-"))
        .collect();
    assert_eq!(index, ["111", "200", "220", "311", "222"]);
    let (av, au) = r.result("lattice_a");
    let a = GOLD_A_NM * 1e-9;
    // The scale's 0.5 % dominates; the drawn radii are exact.
    assert!((av - a).abs() <= 2.0 * au && au < 0.01 * a, "a {av} ± {au}");
}
