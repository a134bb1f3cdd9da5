//! Fringes of two slits, a slit and a wire against outside physics, and whole photos of them.

use super::*;
use crate::simulate::fringes::{self, FringeLight};

fn light(setup: &ApertureSetup) -> FringeLight {
    fringes::compute(setup).unwrap()
}

fn minimum(l: &FringeLight, k: i32) -> f64 {
    l.minima.iter().find(|m| m.index == k).unwrap().x_mm
}

#[test]
fn single_slit_minima_land_where_a_sin_theta_is_m_lambda() {
    // Outside check: dark fringes of a slit at a·sin θ = mλ (Hecht, Optics, §10.2.1), with a
    // perpendicular screen X = L tan θ. A Gaussian beam 15 times the slit width tapers the
    // slit's light by 0.4 % at its edges; allow 0.5 % of the fringe spacing.
    for (a, lambda, l) in [(0.1e-3, 650e-9, 2.5), (0.04e-3, 532e-9, 1.5)] {
        let setup = ApertureSetup {
            aperture: Aperture::Slit { width_m: a },
            wavelength_m: lambda,
            distance_m: l,
            beam_diameter_m: 1.5e-3,
        };
        let got = light(&setup);
        let spacing = l * 1e3 * lambda / a;
        for m in (-10..=10).filter(|&m| m != 0) {
            let theta = (m as f64 * lambda / a).asin();
            let expected = l * 1e3 * theta.tan();
            let x = minimum(&got, m);
            assert!(
                (x - expected).abs() < 5e-3 * spacing,
                "a {a} m = {m}: {x} mm vs {expected} mm"
            );
        }
        assert!(got.period.is_none());
    }
}

#[test]
fn two_slit_fringe_spacing_near_the_centre_is_lambda_l_over_d() {
    // Young's fringes (Hecht, Optics, §9.3): dark fringes at d·sin θ = (k − ½)λ, spacing
    // λL/d near the centre. The beam lights each slit a little more on its inner edge, which
    // pulls the slits' effective centres together by 0.07 % here; allow 0.5 %.
    let setup = ApertureSetup::two_slit();
    let got = light(&setup);
    let (d, lambda, l) = (0.25e-3, 532e-9, 2500.0);
    let spacing = lambda * l / d;
    let (period, k) = got.period.unwrap();
    assert_eq!(k, 3);
    assert!(
        (period - spacing).abs() < 5e-3 * spacing,
        "{period} vs {spacing}"
    );
    for k in 1..=3 {
        let expected = l * ((k as f64 - 0.5) * lambda / d).asin().tan();
        for (index, sign) in [(k, 1.0), (-k, -1.0)] {
            let x = minimum(&got, index);
            assert!(
                (x - sign * expected).abs() < 5e-3 * spacing,
                "dark fringe {index}: {x} vs {}",
                sign * expected
            );
        }
    }
    // The single-slit envelope's first zero, at a·sin θ = λ (Hecht §10.2.1), is among the
    // minima: a = 0.05 mm puts it at 26.6 mm.
    let envelope = l * (lambda / 0.05e-3).asin().tan();
    assert!(
        got.minima
            .iter()
            .any(|m| (m.x_mm - envelope).abs() < 0.01 * spacing),
        "no minimum near {envelope} mm"
    );
}

#[test]
fn wire_minima_are_those_of_a_slit_of_equal_width() {
    // Babinet's principle (Born & Wolf, Principles of Optics, §8.3.2): away from the
    // undiffracted beam a wire's far field is that of a slit of the same width.
    let wire = ApertureSetup::wire();
    let slit = ApertureSetup {
        aperture: Aperture::Slit { width_m: 0.127e-3 },
        beam_diameter_m: 1.5e-3,
        ..wire
    };
    let (w, s) = (light(&wire), light(&slit));
    let spacing = 2500.0 * 650e-9 / 0.127e-3;
    assert_eq!(w.minima.len(), 20);
    for m in (-10..=10).filter(|&m| m != 0) {
        let (a, b) = (minimum(&w, m), minimum(&s, m));
        assert!(
            (a - b).abs() < 5e-3 * spacing,
            "m = {m}: wire {a} vs slit {b}"
        );
    }
    // The undiffracted beam is far brighter than any fringe, so the exposure is set on the
    // first side fringe.
    assert_eq!(w.reference.index.abs(), 1);
    assert_eq!(w.spots.len(), 2);
    assert!(w.spots[1].peak_per_mm2 > 100.0 * w.reference.per_mm);
}

#[test]
fn slits_twice_their_width_apart_lose_every_second_bright_fringe() {
    // Missing orders (Hecht, Optics, §10.2.2): with d = 2a the envelope's zeros at
    // a·sin θ = nλ fall on the bright fringes d·sin θ = mλ with m = 2n, so the 2nd, 4th, …
    // vanish while the odd ones stay: in the small-angle product cos²·sinc² the 3rd is
    // sinc²(3π/2)/sinc²(π/2) = 1/9 of the 1st.
    let (d, a, lambda, l) = (0.2e-3, 0.1e-3, 650e-9, 2.0);
    let setup = ApertureSetup {
        aperture: Aperture::TwoSlit {
            separation_m: d,
            width_m: a,
        },
        wavelength_m: lambda,
        distance_m: l,
        beam_diameter_m: 1.5e-3,
    };
    let got = light(&setup);
    let train = &got.spots[0];
    let at = |m: f64| {
        let x = l * 1e3 * (m * lambda / d).asin().tan();
        train.irradiance(x, 0.0)
    };
    let first = at(1.0);
    assert!(at(2.0) < 1e-3 * first, "{} vs {first}", at(2.0));
    assert!(at(4.0) < 1e-3 * first, "{} vs {first}", at(4.0));
    let third = at(3.0) / first;
    assert!((third - 1.0 / 9.0).abs() < 0.01, "{third}");
    assert!(at(5.0) > 0.02 * first);
}

fn small_fringe_camera() -> CameraSpec {
    CameraSpec {
        width_px: 1200,
        height_px: 800,
        focal_px: 1100.0,
        yaw_rad: 6f64.to_radians(),
        framing: Framing::Auto {
            max_order: 6,
            margin: 0.06,
        },
        ..CameraSpec::default()
    }
}

#[test]
fn dark_fringes_in_the_photo_are_where_the_truth_says() {
    // On a clean photo (laser on minus laser off), the truth's dark fringes are local minima
    // of the brightness along the pattern axis and its bright fringes local maxima.
    let setup = ApertureSetup::slit();
    let fx = Effects {
        overexposure: 0.8,
        ..Effects::clean()
    };
    let cam = small_fringe_camera();
    // Dim room light, so that paper plus fringe stays below saturation.
    let scene = Scene {
        room_light: RoomLight {
            level: 0.1,
            ..RoomLight::default()
        },
        ..Scene::default()
    };
    let on = fringe_photo::render(&setup, &scene, &cam, &fx, 3, true).unwrap();
    let off = fringe_photo::render(&setup, &scene, &cam, &fx, 3, false).unwrap();
    let (a, b) = (luminance(&on.image), luminance(&off.image));
    let w = on.image.width() as usize;
    let diff: Vec<f64> = a.iter().zip(&b).map(|(p, q)| p - q).collect();
    let t = &on.truth;
    let seen: Vec<_> = t.fringes.minima.iter().filter(|m| m.in_frame).collect();
    assert!(seen.len() >= 8, "{} minima in frame", seen.len());
    // Pixels per mm along X at the centre, to step a few tenths of a fringe aside.
    let h = &t.homography;
    let px_per_mm = {
        let p0 = apply(h, [0.0, 0.0]);
        let p1 = apply(h, [1.0, 0.0]);
        (p1[0] - p0[0]).hypot(p1[1] - p0[1])
    };
    let spacing_mm = 2500.0 * 650e-9 / 0.1e-3;
    for m in seen.iter().filter(|m| m.index.abs() <= 2) {
        let x = m.screen_mm[0];
        let dark = bilinear(&diff, w, m.px.unwrap());
        let side = x.signum() * 0.35 * spacing_mm;
        for s in [-side, side] {
            let p = apply(h, [x + s, 0.0]);
            let lit = bilinear(&diff, w, p);
            assert!(
                lit > 1.5 * dark + 0.002,
                "fringe {}: {dark} at the minimum vs {lit} at {s} mm aside",
                m.index
            );
        }
    }
    assert!(px_per_mm > 3.0);
    // The exposure puts the central fringe's peak (red, 650 nm) at 0.8 of saturation on
    // white paper, vignetting and the paper's grain aside.
    let red = |img: &image::RgbImage, p: [f64; 2]| {
        decode(img.get_pixel(p[0].round() as u32, p[1].round() as u32).0[0])
    };
    let centre = t.fringes.maxima.iter().find(|m| m.index == 0).unwrap();
    let c = centre.px.unwrap();
    let peak = (-3..=3)
        .flat_map(|dy| (-3..=3).map(move |dx| [c[0] + dx as f64, c[1] + dy as f64]))
        .map(|p| red(&on.image, p) - red(&off.image, p))
        .fold(0.0, f64::max);
    assert!((peak - 0.8).abs() < 0.1, "central peak {peak}");
    assert_eq!(t.kind, "slit");
    assert_eq!(t.inputs.width_m, Some(0.1e-3));
    assert!(t.fringes.mean_period_mm.is_none());
}

#[test]
fn real_photo_clutter_is_deterministic_and_noted() {
    let setup = ApertureSetup::two_slit();
    let scene = Scene {
        graph_paper: Some(GraphPaper::default()),
        clutter: Clutter {
            pencil: true,
            shadow: true,
            ..Clutter::default()
        },
        ..Scene::default()
    };
    let fx = Effects {
        overexposure: 6.0,
        bloom: 1.0,
        flare: 1.5,
        ..Effects::default()
    };
    let cam = CameraSpec {
        width_px: 480,
        height_px: 320,
        focal_px: 450.0,
        ..small_fringe_camera()
    };
    let a = render_aperture(&setup, &scene, &cam, &fx, 5).unwrap();
    let b = render_aperture(&setup, &scene, &cam, &fx, 5).unwrap();
    assert_eq!(a.image, b.image);
    assert_eq!(a.truth, b.truth);
    let notes = a.truth.notes.join("\n");
    for word in ["pencil", "flare", "shadowed"] {
        assert!(notes.contains(word), "no {word} note in {notes}");
    }
    assert!(a.truth.fringes.mean_period_mm.is_some());
    assert!(a.truth.fringes.mean_period_px.unwrap() > 2.0);
    // Without the shadow, the room light is brighter on average.
    let plain = Scene {
        clutter: Clutter {
            pencil: true,
            ..Clutter::default()
        },
        ..scene
    };
    let c = render_aperture(&setup, &plain, &cam, &fx, 5).unwrap();
    let mean = |img: &image::RgbImage| luminance(img).iter().sum::<f64>();
    assert!(mean(&c.image) > 1.2 * mean(&a.image));
}

#[test]
fn bad_aperture_inputs_are_errors() {
    let setup = ApertureSetup {
        aperture: Aperture::Wire { diameter_m: 0.0 },
        ..ApertureSetup::wire()
    };
    let err = render_aperture(
        &setup,
        &Scene::default(),
        &small_fringe_camera(),
        &Effects::clean(),
        0,
    );
    assert!(matches!(
        err,
        Err(SimError::BadInput {
            name: "diameter_m",
            ..
        })
    ));
}

#[test]
fn wire_photo_saturates_the_beam_and_keeps_the_fringes_in_frame() {
    let cam = CameraSpec {
        width_px: 480,
        height_px: 320,
        focal_px: 450.0,
        ..small_fringe_camera()
    };
    let fx = Effects {
        bloom: 0.5,
        ..Effects::default()
    };
    let photo = render_aperture(&ApertureSetup::wire(), &Scene::default(), &cam, &fx, 9).unwrap();
    let t = &photo.truth;
    assert_eq!(t.kind, "wire");
    assert_eq!(t.inputs.diameter_m, Some(0.127e-3));
    assert!(t.inputs.width_m.is_none() && t.inputs.separation_m.is_none());
    for k in [-5, -1, 1, 5] {
        assert!(
            t.fringes.minima.iter().any(|m| m.index == k && m.in_frame),
            "dark fringe {k} not in frame"
        );
    }
    let centre = t.fringes.maxima.iter().find(|m| m.index == 0).unwrap();
    let p = centre.px.unwrap();
    let px = photo
        .image
        .get_pixel(p[0].round() as u32, p[1].round() as u32);
    assert_eq!(px.0[0], 255, "{px:?}");
    // The exposure is set on the first side fringe, far dimmer than the beam: the first
    // secondary maximum of a slit's sinc² lies at π·a·sin θ/λ = 1.4303π, the first root of
    // tan u = u (Hecht, Optics, §10.2.1; value from memory).
    let expected = 2500.0 * (1.4303 * 650e-9 / 0.127e-3f64).asin().tan();
    let got = t.fringes.exposure_reference_mm[0].abs();
    assert!((got - expected).abs() < 0.05, "{got} vs {expected}");
}
