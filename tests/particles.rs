//! End to end on simulated particle halos: `fringegauge simulate particles` places random
//! opaque discs of a known size distribution in the beam and takes their far field by a
//! 2-D FFT (speckle and all, no J1 formula); `fringegauge particles` must recover the
//! number-mean diameter within 2 % and the spread within 20 % (the targets of the
//! particle-sizing work), each also within its stated expanded uncertainty.
//!
//! The sizes are common practice values: about 8 µm for a red blood cell, about 30 µm for
//! a pollen grain.

mod common;
use common::{Bench, Run, ruler_flag, simulate};
use serde_json::Value;

fn measure(b: &Bench, name: &str, truth: &Value, scale: &[&str]) -> Run {
    let wavelength = format!(
        "{}nm±0.5nm",
        truth["inputs"]["wavelength_m"].as_f64().unwrap() * 1e9
    );
    let distance = format!("{}m±1mm", truth["inputs"]["distance_m"].as_f64().unwrap());
    let mut args = vec![
        "particles",
        name,
        "--wavelength",
        &wavelength,
        "--distance",
        &distance,
        "--json",
    ];
    args.extend_from_slice(scale);
    b.run(&args)
}

/// Checks the mean and spread against the drawn particles' own mean and SD (the truth
/// file's, of the diameters actually placed).
fn check(run: &Run, truth: &Value) {
    assert_eq!(run.code, 0, "{}", run.stderr);
    let t_mean = truth["particles"]["mean_diameter_m"].as_f64().unwrap();
    let t_sd = truth["particles"]["sd_diameter_m"].as_f64().unwrap();
    let (mean, u_mean) = run.result("mean_diameter");
    let (sd, u_sd) = run.result("size_spread");
    assert!(
        (mean - t_mean).abs() <= 0.02 * t_mean
            && (mean - t_mean).abs() <= 2.0 * u_mean + 0.005 * t_mean,
        "mean {mean} ± {u_mean} vs {t_mean}"
    );
    assert!(
        (sd - t_sd).abs() <= 0.2 * t_sd,
        "spread {sd} ± {u_sd} vs {t_sd}"
    );
    // The free distribution is in the record, normalised, and its mean is near. It is a
    // cross-check, not the result: small particles add little light (D⁴), so the
    // smoothing moves some number into the small bins and its number mean runs a few per
    // cent low on wide distributions.
    let record = run.record();
    let d = &record["distribution"];
    let total: f64 = d["bins"]
        .as_array()
        .unwrap()
        .iter()
        .map(|b| b["number_fraction"].as_f64().unwrap())
        .sum();
    assert!((total - 1.0).abs() < 1e-9, "{total}");
    let free_mean = d["mean_m"].as_f64().unwrap();
    assert!(
        (free_mean - t_mean).abs() < 0.08 * t_mean,
        "free mean {free_mean}"
    );
}

#[test]
fn red_cell_sized_particles_with_a_tilted_camera() {
    // The simulator's default view is 6° off square, with the halo's centre overexposed.
    let b = Bench::new();
    let truth = simulate(&b, "particles", "cells.jpg", &[]);
    let ruler = ruler_flag(&truth);
    let run = measure(&b, "cells.jpg", &truth, &["--ruler", &ruler]);
    check(&run, &truth);
    let rec = run.record();
    assert_eq!(rec["setup"]["kind"], "particles");
    assert!(
        rec["features"]
            .as_array()
            .unwrap()
            .iter()
            .any(|f| f["label"].as_str().unwrap().starts_with("halo minimum")),
        "a 10 % spread leaves the first dark ring visible"
    );
}

#[test]
fn the_same_particles_seen_square_on_and_from_20_degrees_agree() {
    // A strongly yawed view foreshortens the screen along the ruler; the map must undo
    // it across the ruler too, or the halo's circles become ellipses and the size shrinks
    // by about (1 − cos 20°)/2 = 3 %.
    let b = Bench::new();
    let square = simulate(&b, "particles", "square.jpg", &["--camera-yaw", "0deg"]);
    let yawed = simulate(&b, "particles", "yawed.jpg", &["--camera-yaw", "20deg"]);
    let r0 = measure(
        &b,
        "square.jpg",
        &square,
        &["--ruler", &ruler_flag(&square)],
    );
    let r1 = measure(&b, "yawed.jpg", &yawed, &["--ruler", &ruler_flag(&yawed)]);
    check(&r0, &square);
    check(&r1, &yawed);
    let ((m0, u0), (m1, u1)) = (r0.result("mean_diameter"), r1.result("mean_diameter"));
    assert!(
        (m0 - m1).abs() <= 2.0 * u0.hypot(u1),
        "square {m0} ± {u0}, yawed {m1} ± {u1}"
    );
}

#[test]
fn pollen_sized_lognormal_particles() {
    let b = Bench::new();
    let truth = simulate(
        &b,
        "particles",
        "pollen.jpg",
        &[
            "--mean-diameter",
            "30um",
            "--beam",
            "2mm",
            "--distribution",
            "lognormal",
            "--spread",
            "15%",
        ],
    );
    let run = measure(&b, "pollen.jpg", &truth, &["--ruler", &ruler_flag(&truth)]);
    check(&run, &truth);
}

#[test]
fn particles_on_graph_paper_with_bloom() {
    // The paper's 1 mm lines give the scale; bloom spreads the overexposed centre.
    let b = Bench::new();
    let truth = simulate(
        &b,
        "particles",
        "paper.jpg",
        &["--graph-paper", "--bloom", "1"],
    );
    let run = measure(&b, "paper.jpg", &truth, &["--grid", "1mm"]);
    check(&run, &truth);
}

#[test]
fn a_halo_with_its_centre_off_the_frame_is_refused_with_advice() {
    // The right part of a simulated photo, cut so that the halo's centre lies left of it.
    let b = Bench::new();
    let truth = simulate(&b, "particles", "whole.png", &[]);
    let img = image::open(b.path("whole.png")).unwrap().to_rgb8();
    let cx = truth["centre_px"][0].as_f64().unwrap() as u32;
    let cut = image::imageops::crop_imm(&img, cx + 150, 0, img.width() - cx - 150, img.height())
        .to_image();
    cut.save(b.path("cut.png")).unwrap();
    let r = b.run(&[
        "particles",
        "cut.png",
        "--wavelength",
        "650nm",
        "--distance",
        "0.5m",
        "--mm-per-px",
        "0.16",
    ]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(r.stderr.contains("frame"), "{}", r.stderr);
}

#[test]
fn an_all_saturated_photo_is_a_measurement_failure() {
    let b = Bench::new();
    let img = image::RgbImage::from_pixel(400, 300, image::Rgb([255, 255, 255]));
    img.save(b.path("white.png")).unwrap();
    let r = b.run(&[
        "particles",
        "white.png",
        "--wavelength",
        "650nm",
        "--distance",
        "0.5m",
        "--mm-per-px",
        "0.1",
    ]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(r.stderr.contains("saturated"), "{}", r.stderr);
}

#[test]
fn a_blank_screen_has_no_halo() {
    let b = Bench::new();
    let img = image::RgbImage::from_pixel(320, 240, image::Rgb([90, 90, 90]));
    img.save(b.path("blank.png")).unwrap();
    let r = b.run(&[
        "particles",
        "blank.png",
        "--wavelength",
        "650nm",
        "--distance",
        "0.5m",
        "--mm-per-px",
        "0.1",
    ]);
    assert_eq!(r.code, 1, "{}", r.stderr);
}
