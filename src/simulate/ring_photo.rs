//! The pipelines behind [`super::render_pinhole`] and [`super::render_particles`]: the
//! computed far field becomes one light source over the whole screen (a [`DirectionMap`]),
//! then the same camera, exposure, pixel loop and effects as every other photo.
//!
//! Exposure: a pinhole's is set on its first bright ring, so the central disc is many times
//! saturated (as in a photo taken to show the rings); a particle field's on the halo's mean
//! at half of λ / mean diameter, so the undiffracted beam is a hugely saturated spot.

use super::camera::{CameraSpec, Framing};
use super::direction_map::{DirectionMap, jacobian, radius_at};
use super::effects::{self, Effects};
use super::particles::{self, ParticleSetup};
use super::photo::{Bench, Reference, render_bench};
use super::pinhole::{self, PinholeSetup};
use super::ring_truth::{self, ParticleParts, ParticlesTruth, PinholeParts, PinholeTruth};
use super::scene::Scene;
use super::spots::OrderSpot;
use super::{SimError, SimPhoto};
use std::sync::Arc;

/// The 8-bit photo from linear light, through noise and sRGB encoding.
fn encode<T>(
    rgb: Vec<f32>,
    truth: T,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<T>, SimError> {
    let (w, h) = (camera.width_px, camera.height_px);
    let bytes = effects::to_srgb8(&rgb, w as usize, effects, seed);
    drop(rgb);
    let image = image::RgbImage::from_raw(w, h, bytes).ok_or_else(|| {
        SimError::CameraSeesNoScreen("internal: image buffer size mismatch".into())
    })?;
    Ok(SimPhoto { image, truth })
}

/// A light source that is the whole far field (the tabulated profile is unused).
fn map_spot(map: Arc<DirectionMap>, relative_power: f64) -> OrderSpot {
    OrderSpot {
        order: 0,
        relative_power,
        centroid_mm: [0.0, 0.0],
        sigma_y_mm: 0.0,
        x0_mm: 0.0,
        step_mm: 1.0,
        profile: Vec::new(),
        peak_per_mm2: map.irradiance(0.0, 0.0),
        sigma_x_mm: 0.0,
        map: Some(map),
    }
}

/// The four points at `r` on the screen axes, for framing.
fn cross(r: f64) -> Vec<[f64; 2]> {
    vec![[-r, 0.0], [r, 0.0], [0.0, -r], [0.0, r]]
}

fn landing(rho: f64, distance_mm: f64) -> Result<f64, SimError> {
    radius_at(rho, distance_mm).ok_or_else(|| {
        SimError::NoOrderReachesScreen(format!("light at sin θ = {rho:.3} misses the screen"))
    })
}

/// How many rings (pinhole) or multiples of λ/D (particles) automatic framing keeps.
fn kept(camera: &CameraSpec) -> u32 {
    match camera.framing {
        Framing::Auto { max_order, .. } => max_order.max(1),
        Framing::Fixed { .. } => 1,
    }
}

/// Renders a pinhole photo with the laser on or off (off: the same scene and camera).
pub(crate) fn render_pinhole(
    setup: &PinholeSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<SimPhoto<PinholeTruth>, SimError> {
    let (rgb, truth) = pinhole_linear(setup, scene, camera, effects, seed, laser_on)?;
    encode(rgb, truth, camera, effects, seed)
}

/// A pinhole photo in linear light, and its truth.
pub(crate) fn pinhole_linear(
    setup: &PinholeSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<(Vec<f32>, PinholeTruth), SimError> {
    setup.validate()?;
    scene.validate()?;
    camera.validate()?;
    effects.validate()?;
    let ff = pinhole::far_field(setup)?;
    let (dark, bright) = ff.rings();
    if dark.len() < 2 || bright.is_empty() {
        return Err(SimError::NoOrderReachesScreen(
            "fewer than two dark rings are resolved; use a larger pinhole".into(),
        ));
    }
    let l_mm = setup.distance_m * 1e3;
    let map = Arc::new(ff.to_map(l_mm));
    let keep = (kept(camera) as usize).min(dark.len());
    let edge = landing(dark[keep - 1].rho, l_mm)?;
    let first_bright = landing(bright[0].rho, l_mm)?;
    let reference_per_mm2 = map.irradiance(first_bright, 0.0);
    // A bright ring is about a quarter of the dark-ring spacing wide, and long around.
    let width = 0.25 * (landing(dark[1].rho, l_mm)? - landing(dark[0].rho, l_mm)?);
    let spots = [map_spot(map.clone(), ff.power_held())];
    let bench = Bench {
        spots: &spots,
        wavelength_m: setup.wavelength_m,
        hole: None,
        zero_x: 0.0,
        frame_points: cross(edge),
        reference: Some(Reference {
            centre_mm: [0.0, 0.0],
            peak_per_mm2: reference_per_mm2,
            sigma_mm: [width, first_bright],
        }),
        reach_mm: edge,
    };
    let rendered = render_bench(&bench, scene, camera, effects, seed, laser_on)?;
    let truth = ring_truth::pinhole(PinholeParts {
        setup,
        scene,
        effects,
        seed,
        rendered: &rendered,
        far_field: &ff,
        map: &map,
        dark: &dark,
        bright: &bright,
        reference_per_mm2,
    })?;
    Ok((rendered.rgb, truth))
}

/// Renders a particle photo with the laser on or off (off: the same scene and camera).
pub(crate) fn render_particles(
    setup: &ParticleSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<SimPhoto<ParticlesTruth>, SimError> {
    let (rgb, truth) = particles_linear(setup, scene, camera, effects, seed, laser_on)?;
    encode(rgb, truth, camera, effects, seed)
}

/// A particle photo in linear light, and its truth.
pub(crate) fn particles_linear(
    setup: &ParticleSetup,
    scene: &Scene,
    camera: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<(Vec<f32>, ParticlesTruth), SimError> {
    setup.validate()?;
    scene.validate()?;
    camera.validate()?;
    effects.validate()?;
    let drawn = particles::draw(setup, seed);
    let ff = particles::far_field(setup, &drawn)?;
    let l_mm = setup.distance_m * 1e3;
    let scale = setup.wavelength_m / setup.mean_diameter_m;
    let reference_rho = (0.5 * scale).min(0.5 * ff.rho_max);
    let r_ref = landing(reference_rho, l_mm)?;
    let reference_per_mm2 =
        ff.azimuthal_mean(reference_rho, 0.1 * reference_rho) * jacobian(r_ref, 0.0, l_mm);
    if !(reference_per_mm2 > 0.0) {
        return Err(SimError::NoOrderReachesScreen(
            "the particles' halo is dark".into(),
        ));
    }
    let edge = landing((kept(camera) as f64 * scale).min(0.9 * ff.rho_max), l_mm)?;
    let (blocked, step_m, rho_max) = (ff.blocked, ff.step_m, ff.rho_max);
    let halo = map_spot(Arc::new(ff.into_map(l_mm)), blocked);
    let (beam, beam_sigma_mm) = beam_spot(setup, 1.0 - blocked);
    let spots = [halo, beam];
    let bench = Bench {
        spots: &spots,
        wavelength_m: setup.wavelength_m,
        hole: None,
        zero_x: 0.0,
        frame_points: cross(edge),
        reference: Some(Reference {
            centre_mm: [0.0, 0.0],
            peak_per_mm2: reference_per_mm2,
            sigma_mm: [r_ref, r_ref],
        }),
        reach_mm: edge,
    };
    let rendered = render_bench(&bench, scene, camera, effects, seed, laser_on)?;
    let truth = ring_truth::particles(ParticleParts {
        setup,
        scene,
        effects,
        seed,
        rendered: &rendered,
        particles: drawn,
        blocked,
        step_m,
        rho_max,
        reference_rho,
        beam_sigma_mm,
    });
    Ok((rendered.rgb, truth))
}

/// The undiffracted beam on the screen: a round Gaussian spot of the collimated beam's
/// width after its own divergence, σ = w(L)/2 with w(L) = √(w² + (λL/(πw))²) (Siegman,
/// *Lasers*, §17.1), tabulated along X for the renderer.
fn beam_spot(setup: &ParticleSetup, power: f64) -> (OrderSpot, f64) {
    let w_mm = 0.5 * setup.beam_diameter_m * 1e3;
    let l_mm = setup.distance_m * 1e3;
    let lambda_mm = setup.wavelength_m * 1e3;
    let sigma = 0.5 * w_mm.hypot(lambda_mm * l_mm / (std::f64::consts::PI * w_mm));
    let step = sigma / 16.0;
    let count = 16 * 14 + 1;
    let x0 = -7.0 * sigma;
    let norm = (2.0 * std::f64::consts::PI).sqrt() * sigma;
    let profile = (0..count)
        .map(|i| {
            let x = x0 + i as f64 * step;
            power * (-0.5 * (x / sigma).powi(2)).exp() / norm
        })
        .collect();
    let spot = OrderSpot {
        // Its own speckle, apart from the halo's.
        order: 1,
        relative_power: power,
        centroid_mm: [0.0, 0.0],
        sigma_y_mm: sigma,
        x0_mm: x0,
        step_mm: step,
        profile,
        peak_per_mm2: power / (norm * norm),
        sigma_x_mm: sigma,
        map: None,
    };
    (spot, sigma)
}
