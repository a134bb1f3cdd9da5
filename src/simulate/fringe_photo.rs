//! The pipeline behind [`super::render_aperture`]: the aperture's far field and fringes on
//! the screen, then the same camera, exposure, pixel loop and effects as a grating's photo.

use super::aperture::ApertureSetup;
use super::camera::{CameraSpec, Framing};
use super::effects::{self, Effects};
use super::fringe_truth::{self, ApertureTruth, ApertureTruthParts};
use super::fringes;
use super::photo::{Bench, Reference, render_bench};
use super::scene::Scene;
use super::{SimError, SimPhoto};

/// Renders a photo of an aperture's fringes with the laser on or off (off: the same scene
/// and camera, for background subtraction in tests), through noise and sRGB encoding.
pub(crate) fn render(
    setup: &ApertureSetup,
    scene: &Scene,
    camera_spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<SimPhoto<ApertureTruth>, SimError> {
    let (rgb, truth) = render_linear(setup, scene, camera_spec, effects, seed, laser_on)?;
    let (w, h) = (camera_spec.width_px, camera_spec.height_px);
    let bytes = effects::to_srgb8(&rgb, w as usize, effects, seed);
    drop(rgb);
    let image = image::RgbImage::from_raw(w, h, bytes).ok_or_else(|| {
        SimError::CameraSeesNoScreen("internal: image buffer size mismatch".into())
    })?;
    Ok(SimPhoto { image, truth })
}

/// Renders in linear light; returns the interleaved RGB and the truth.
pub(crate) fn render_linear(
    setup: &ApertureSetup,
    scene: &Scene,
    camera_spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<(Vec<f32>, ApertureTruth), SimError> {
    setup.validate()?;
    scene.validate()?;
    camera_spec.validate()?;
    effects.validate()?;
    let light = fringes::compute(setup)?;
    let train = &light.spots[0];
    // Auto framing keeps the dark fringes up to the asked count on each side.
    let keep = match camera_spec.framing {
        Framing::Auto { max_order, .. } => max_order.max(1) as i32,
        Framing::Fixed { .. } => 1,
    };
    let edge = |sign: i32| {
        light
            .minima
            .iter()
            .filter(|m| m.index.signum() == sign && m.index.abs() <= keep)
            .map(|m| m.x_mm)
            .max_by(|a, b| (sign as f64 * a).total_cmp(&(sign as f64 * b)))
            .unwrap_or(0.0)
    };
    let (left, right) = (edge(-1), edge(1));
    let band = 3.0 * train.sigma_y_mm;
    let frame_points = vec![[left, -band], [left, band], [right, -band], [right, band]];
    let reach_mm = left.abs().max(right.abs());
    let r = light.reference;
    let bench = Bench {
        spots: &light.spots,
        wavelength_m: setup.wavelength_m,
        hole: None,
        zero_x: 0.0,
        frame_points,
        reference: Some(Reference {
            centre_mm: [r.x_mm, 0.0],
            peak_per_mm2: r.per_mm / ((2.0 * std::f64::consts::PI).sqrt() * train.sigma_y_mm),
            // A bright fringe is about a quarter of its spacing wide.
            sigma_mm: [fringe_width_mm(&light), train.sigma_y_mm],
        }),
        reach_mm,
    };
    let rendered = render_bench(&bench, scene, camera_spec, effects, seed, laser_on)?;
    let truth = fringe_truth::build(ApertureTruthParts {
        setup,
        scene,
        effects,
        seed,
        rendered: &rendered,
        light: &light,
    });
    Ok((rendered.rgb, truth))
}

/// A quarter of the spacing of the two dark fringes around the exposure reference.
fn fringe_width_mm(light: &fringes::FringeLight) -> f64 {
    let x = light.reference.x_mm;
    let below = light
        .minima
        .iter()
        .filter(|m| m.x_mm < x)
        .map(|m| m.x_mm)
        .fold(f64::NEG_INFINITY, f64::max);
    let above = light
        .minima
        .iter()
        .filter(|m| m.x_mm > x)
        .map(|m| m.x_mm)
        .fold(f64::INFINITY, f64::min);
    let span = above - below;
    if span.is_finite() { 0.25 * span } else { 1.0 }
}
