//! Whole scenes: determinism, the zero-order-only case, reflection, errors, a 12 MP photo.

use super::*;
use crate::simulate::*;

#[test]
fn same_seed_same_photo_other_seed_other_photo() {
    let scene = Scene {
        graph_paper: Some(GraphPaper::default()),
        clutter: Clutter::all(),
        ..Scene::default()
    };
    let cam = CameraSpec {
        width_px: 320,
        height_px: 240,
        focal_px: 320.0,
        ..small_camera(5.0, 2.0)
    };
    let fx = Effects::default();
    let a = render_grating(&green_600(), &scene, &cam, &fx, 42).unwrap();
    let b = render_grating(&green_600(), &scene, &cam, &fx, 42).unwrap();
    let c = render_grating(&green_600(), &scene, &cam, &fx, 43).unwrap();
    assert_eq!(a.image, b.image);
    assert_eq!(a.truth, b.truth);
    assert_ne!(a.image, c.image);
    // The saturated zero order clips in green (532 nm is mostly green).
    let z = a
        .truth
        .orders
        .iter()
        .find(|o| o.order == 0)
        .unwrap()
        .px
        .unwrap();
    let g = a.image.get_pixel(z[0].round() as u32, z[1].round() as u32);
    assert_eq!(g.0[1], 255, "{g:?}");
}

#[test]
fn blu_ray_pitch_renders_only_the_zero_order() {
    let setup = GratingSetup {
        pitch_m: 0.32e-6,
        beam_diameter_m: 0.6e-3,
        ..GratingSetup::default()
    };
    let cam = CameraSpec {
        width_px: 320,
        height_px: 240,
        focal_px: 320.0,
        ..CameraSpec::default()
    };
    let photo = render_grating(&setup, &Scene::default(), &cam, &Effects::clean(), 1).unwrap();
    assert!(photo.truth.only_zero_order);
    assert_eq!(photo.truth.orders.len(), 1);
    assert!(photo.truth.orders[0].in_frame);
    assert!(
        photo
            .truth
            .notes
            .iter()
            .any(|n| n.contains("only the zero order"))
    );
}

#[test]
fn reflection_at_normal_incidence_sends_the_zero_order_into_the_hole() {
    let setup = GratingSetup {
        reflect: true,
        distance_m: 0.15,
        ..GratingSetup::default()
    };
    let cam = CameraSpec {
        width_px: 400,
        height_px: 300,
        focal_px: 400.0,
        ..CameraSpec::default()
    };
    let photo = render_grating(&setup, &Scene::default(), &cam, &Effects::clean(), 2).unwrap();
    let t = &photo.truth;
    let zero = t.orders.iter().find(|o| o.order == 0).unwrap();
    assert!(zero.in_hole);
    assert!(zero.screen_mm[0].abs() < 1e-6);
    assert_eq!(t.screen.hole_mm, Some([0.0, 0.0]));
    // First orders: reflection grating, screen parallel: X = L tan θ1 with sin θ1 = λ/d
    // (grating equation, any optics text), REFERENCES.md: 23.97° for a CD at 650 nm.
    let first = t.orders.iter().find(|o| o.order == 1).unwrap();
    let angle = (first.screen_mm[0] / 150.0).atan().to_degrees();
    assert!((angle - 23.97).abs() < 0.005, "{angle}");
    // Exposure was set on a first order, so it is bright in red.
    let p = first.px.unwrap();
    let v = photo
        .image
        .get_pixel(p[0].round() as u32, p[1].round() as u32);
    assert!(v.0[0] > 200 && v.0[2] < 200, "{v:?}");
}

#[test]
fn impossible_scenes_are_typed_errors() {
    // A 20 mm beam on a Blu-ray pitch in violet light needs more far-field samples than allowed.
    let setup = GratingSetup {
        wavelength_m: 405e-9,
        pitch_m: 0.32e-6,
        beam_diameter_m: 20e-3,
        ..GratingSetup::default()
    };
    let err = render_grating(
        &setup,
        &Scene::default(),
        &CameraSpec::default(),
        &Effects::clean(),
        0,
    );
    assert!(matches!(err, Err(SimError::TooFine(_))), "{:?}", err.err());
    // A sheet far from where the camera looks.
    let scene = Scene {
        surface: Surface::Sheet {
            width_mm: 210.0,
            height_mm: 297.0,
            centre_mm: [3000.0, 0.0],
            rotation_rad: 0.0,
        },
        ..Scene::default()
    };
    let cam = CameraSpec {
        width_px: 160,
        height_px: 120,
        focal_px: 160.0,
        framing: Framing::Fixed {
            aim_mm: [0.0, 0.0],
            distance_mm: 300.0,
        },
        ..small_camera(0.0, 0.0)
    };
    let err = render_grating(&green_600(), &scene, &cam, &Effects::clean(), 0);
    assert!(
        matches!(err, Err(SimError::CameraSeesNoScreen(_))),
        "{:?}",
        err.err()
    );
    // Out-of-range inputs name themselves.
    let bad = Effects {
        overexposure: f64::NAN,
        ..Effects::clean()
    };
    let err = render_grating(&green_600(), &Scene::default(), &cam, &bad, 0);
    assert!(
        matches!(
            err,
            Err(SimError::BadInput {
                name: "overexposure",
                ..
            })
        ),
        "{:?}",
        err.err()
    );
}

/// Run once by hand to time a 12 MP photo:
/// `cargo test --lib simulate::tests::scenes::twelve -- --ignored --nocapture`.
#[test]
#[ignore]
fn twelve_megapixel_render_time() {
    let scene = Scene {
        graph_paper: Some(GraphPaper::default()),
        clutter: Clutter::all(),
        ..Scene::default()
    };
    let start = std::time::Instant::now();
    let photo = render_grating(
        &GratingSetup::default(),
        &scene,
        &CameraSpec::twelve_megapixel(),
        &Effects::default(),
        1,
    )
    .unwrap();
    let rendered = start.elapsed();
    let dir = tempfile::tempdir().unwrap();
    photo.write(&dir.path().join("big.jpg"), 92, false).unwrap();
    eprintln!(
        "12 MP: render {:.2} s, render + JPEG {:.2} s",
        rendered.as_secs_f64(),
        start.elapsed().as_secs_f64()
    );
    assert_eq!(photo.image.width(), 4000);
}
