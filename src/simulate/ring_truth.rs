//! The truth of a synthetic photo of rings (a pinhole) or of a particle halo, written beside
//! it as `PHOTO.truth.json` like the other kinds': the inputs in SI units, the screen and
//! camera, the pattern's centre, and for a pinhole the dark and bright rings found
//! numerically on the computed far field; for particles the diameters as drawn.

use super::SimError;
use super::direction_map::{DirectionMap, radius_at};
use super::effects::Effects;
use super::particles::{ParticleSetup, Particles, SizeDistribution};
use super::particles::{TRUNCATE_BELOW, lognormal_params};
use super::photo::Rendered;
use super::pinhole::{PinholeSetup, RadialFarField, Ring};
use super::scene::Scene;
use super::truth::{self, CameraTruth, GridTruth, RulerTruth, ScreenFrame, SheetTruth};
use serde::{Deserialize, Serialize};

/// Truth of one rendered photo of a pinhole's rings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PinholeTruth {
    /// Experiment kind, "pinhole".
    pub kind: String,
    /// Seed of every random choice in the photo.
    pub seed: u64,
    /// The bench, SI units.
    pub inputs: PinholeSetup,
    /// The screen coordinate frame.
    pub screen: ScreenFrame,
    /// The camera as placed.
    pub camera: CameraTruth,
    /// Screen mm → image px, row-major, last entry 1.
    pub homography: [[f64; 3]; 3],
    /// Centre of the pattern (the beam's axis), screen mm.
    pub centre_mm: [f64; 2],
    /// That centre through the homography, px (`None` if behind the camera).
    pub centre_px: Option<[f64; 2]>,
    /// Whether `centre_px` lies on the sensor.
    pub centre_in_frame: bool,
    /// The rings, found on the computed far field.
    pub rings: RingsTruth,
    /// The ruler, if present.
    pub ruler: Option<RulerTruth>,
    /// Graph paper, if present.
    pub grid: Option<GridTruth>,
    /// Paper sheet, if present.
    pub sheet: Option<SheetTruth>,
    /// The scene as given.
    pub scene: Scene,
    /// The effects as given.
    pub effects: Effects,
    /// Plain-language remarks (saturated rings, distractors, limits of the model).
    pub notes: Vec<String>,
}

/// A pinhole's rings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RingsTruth {
    /// Dark rings (local minima of the far-field intensity), from the centre out.
    pub dark: Vec<RingPoint>,
    /// Bright rings (local maxima) outside the central disc, from the centre out.
    pub bright: Vec<RingPoint>,
    /// The centre's irradiance in units of saturation (see [`RingPoint::level`]).
    pub centre_level: f64,
    /// What the exposure was set on: "first bright ring".
    pub exposure_reference: String,
    /// Samples in the transform of the disc's projection.
    pub transform_samples: usize,
    /// Sample step across the pinhole, m.
    pub sample_step_m: f64,
    /// sin θ beyond which the computed far field (and the screen) holds no light.
    pub sin_theta_limit: f64,
}

/// One ring.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RingPoint {
    /// 1 for the first dark (or first bright) ring from the centre.
    pub index: u32,
    /// Direction of the ring from the pinhole, refined between samples.
    pub sin_theta: f64,
    /// Radius on the screen, mm (where the rays at `sin_theta` land).
    pub radius_mm: f64,
    /// The ring's points on the screen axes (+X, +Y, −X, −Y) through the homography.
    pub points_px: [Option<[f64; 2]>; 4],
    /// Mean distance of those points from the centre's image, px.
    pub radius_px: Option<f64>,
    /// Whether all four points lie on the sensor.
    pub in_frame: bool,
    /// Far-field intensity relative to the centre's.
    pub relative_intensity: f64,
    /// Irradiance relative to the exposure reference's, times the overexposure: about its
    /// level in the image relative to saturation, before blur, speckle, bloom and noise.
    pub level: f64,
}

/// Truth of one rendered photo of a particle field's halo.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParticlesTruth {
    /// Experiment kind, "particles".
    pub kind: String,
    /// Seed of every random choice in the photo (the particles included).
    pub seed: u64,
    /// The bench, SI units.
    pub inputs: ParticleSetup,
    /// The screen coordinate frame.
    pub screen: ScreenFrame,
    /// The camera as placed.
    pub camera: CameraTruth,
    /// Screen mm → image px, row-major, last entry 1.
    pub homography: [[f64; 3]; 3],
    /// Centre of the pattern (the undiffracted beam), screen mm.
    pub centre_mm: [f64; 2],
    /// That centre through the homography, px.
    pub centre_px: Option<[f64; 2]>,
    /// Whether `centre_px` lies on the sensor.
    pub centre_in_frame: bool,
    /// The particles as drawn.
    pub particles: ParticleSample,
    /// The distribution they were drawn from.
    pub distribution: DistributionTruth,
    /// The far field.
    pub halo: HaloTruth,
    /// The ruler, if present.
    pub ruler: Option<RulerTruth>,
    /// Graph paper, if present.
    pub grid: Option<GridTruth>,
    /// Paper sheet, if present.
    pub sheet: Option<SheetTruth>,
    /// The scene as given.
    pub scene: Scene,
    /// The effects as given.
    pub effects: Effects,
    /// Plain-language remarks.
    pub notes: Vec<String>,
}

/// The drawn particles (opaque discs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParticleSample {
    /// How many.
    pub count: usize,
    /// Every diameter, m, in drawing order.
    pub diameters_m: Vec<f64>,
    /// Their centres in the particle plane (x, y), m, from the beam axis.
    pub centres_m: Vec<[f64; 2]>,
    /// Number-weighted mean diameter, m.
    pub mean_diameter_m: f64,
    /// Number-weighted sample standard deviation (n − 1), m.
    pub sd_diameter_m: f64,
    /// How many overlap another (no clear place found).
    pub overlapping: usize,
}

/// The size distribution drawn from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DistributionTruth {
    /// "normal" or "lognormal".
    pub kind: SizeDistribution,
    /// Number mean asked for, m.
    pub mean_m: f64,
    /// Standard deviation asked for, m.
    pub sd_m: f64,
    /// Lognormal: mean of ln(d / 1 m).
    pub log_mu: Option<f64>,
    /// Lognormal: standard deviation of ln d.
    pub log_sigma: Option<f64>,
    /// Draws below this diameter were redrawn, m.
    pub truncated_below_m: f64,
}

/// The particles' far field.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HaloTruth {
    /// Fraction of the beam's power the particles block; the diffracted halo carries as much.
    pub blocked_fraction: f64,
    /// sin θ of the annulus the exposure was set on (half of λ / mean diameter).
    pub exposure_reference_sin_theta: f64,
    /// Its radius on the screen, mm.
    pub exposure_reference_mm: f64,
    /// Samples along each side of the transform.
    pub transform_samples: usize,
    /// Sample step in the particle plane, m.
    pub sample_step_m: f64,
    /// sin θ beyond which the computed far field (and the screen) holds no light.
    pub sin_theta_limit: f64,
    /// Gaussian σ of the undiffracted beam's spot on the screen, mm.
    pub beam_spot_sigma_mm: f64,
}

/// What both truths say about the view.
struct View {
    common: truth::ViewTruth,
    centre_px: Option<[f64; 2]>,
    centre_in_frame: bool,
}

fn view(scene: &Scene, r: &Rendered) -> View {
    let cam = &r.camera;
    let centre_px = cam.project([0.0, 0.0]);
    View {
        common: truth::view_truth(scene, cam, &r.screen, 0.0),
        centre_px,
        centre_in_frame: centre_px.is_some_and(|q| cam.in_frame(q)),
    }
}

fn frame() -> ScreenFrame {
    ScreenFrame {
        origin: "the undiffracted beam's axis (the pattern's centre)".into(),
        axes: "X horizontal, Y downwards as the camera sees the lit face; millimetres".into(),
        hole_mm: None,
        hole_radius_mm: None,
    }
}

pub(crate) struct PinholeParts<'a> {
    pub setup: &'a PinholeSetup,
    pub scene: &'a Scene,
    pub effects: &'a Effects,
    pub seed: u64,
    pub rendered: &'a Rendered,
    pub far_field: &'a RadialFarField,
    pub map: &'a DirectionMap,
    pub dark: &'a [Ring],
    pub bright: &'a [Ring],
    /// Screen irradiance the exposure was set on, per mm².
    pub reference_per_mm2: f64,
}

/// Assembles the truth of a rendered pinhole photo.
pub(crate) fn pinhole(p: PinholeParts) -> Result<PinholeTruth, SimError> {
    let v = view(p.scene, p.rendered);
    let cam = &p.rendered.camera;
    let l_mm = p.setup.distance_m * 1e3;
    let level =
        |r_mm: f64| p.effects.overexposure * p.map.irradiance(r_mm, 0.0) / p.reference_per_mm2;
    let point = |ring: &Ring| -> Result<RingPoint, SimError> {
        let radius_mm = radius_at(ring.rho, l_mm).ok_or_else(|| {
            SimError::NoOrderReachesScreen(format!("ring {} misses the screen", ring.index))
        })?;
        let points_px = [[1.0, 0.0], [0.0, 1.0], [-1.0, 0.0], [0.0, -1.0]]
            .map(|d: [f64; 2]| cam.project([d[0] * radius_mm, d[1] * radius_mm]));
        let radius_px = v.centre_px.and_then(|c| {
            let pts: Option<Vec<[f64; 2]>> = points_px.iter().copied().collect();
            pts.map(|pts| {
                pts.iter()
                    .map(|q| (q[0] - c[0]).hypot(q[1] - c[1]))
                    .sum::<f64>()
                    / 4.0
            })
        });
        Ok(RingPoint {
            index: ring.index,
            sin_theta: ring.rho,
            radius_mm,
            points_px,
            radius_px,
            in_frame: points_px.iter().all(|q| q.is_some_and(|q| cam.in_frame(q))),
            relative_intensity: ring.relative,
            level: level(radius_mm),
        })
    };
    let dark: Vec<RingPoint> = p.dark.iter().map(point).collect::<Result<_, _>>()?;
    let bright: Vec<RingPoint> = p.bright.iter().map(point).collect::<Result<_, _>>()?;
    let centre_level = level(0.0);
    let mut notes = vec![
        format!(
            "rings: scalar thin-element model; the disc's projection under the Gaussian beam, \
             integrated chord by chord, in a {}-sample transform (projection-slice theorem), \
             landed by ray-plane intersection on a screen perpendicular to the beam",
            p.far_field.samples
        ),
        "dark and bright rings are the minima and maxima of the computed far-field intensity \
         in sin θ, before the obliquity of the screen, speckle, blur and noise"
            .to_string(),
        format!(
            "exposure set on the first bright ring; the centre is {centre_level:.0} times \
             saturation"
        ),
    ];
    for r in dark.iter().filter(|r| !r.in_frame) {
        notes.push(format!("dark ring {} is not wholly in the frame", r.index));
    }
    let swamped: Vec<String> = bright
        .iter()
        .filter(|r| r.level > 1.0)
        .map(|r| r.index.to_string())
        .collect();
    if !swamped.is_empty() {
        notes.push(format!(
            "bright rings [{}] are above saturation: the dark rings between them and the \
             centre may be lost in the glare",
            swamped.join(", ")
        ));
    }
    notes.extend(truth::clutter_notes(&p.rendered.clutter));
    notes.extend(truth::effect_notes(p.rendered));
    Ok(PinholeTruth {
        kind: "pinhole".into(),
        seed: p.seed,
        inputs: *p.setup,
        screen: frame(),
        camera: v.common.camera,
        homography: v.common.homography,
        centre_mm: [0.0, 0.0],
        centre_px: v.centre_px,
        centre_in_frame: v.centre_in_frame,
        rings: RingsTruth {
            dark,
            bright,
            centre_level,
            exposure_reference: "first bright ring".into(),
            transform_samples: p.far_field.samples,
            sample_step_m: p.far_field.step_m,
            sin_theta_limit: p.far_field.rho_max,
        },
        ruler: v.common.ruler,
        grid: v.common.grid,
        sheet: v.common.sheet,
        scene: *p.scene,
        effects: *p.effects,
        notes,
    })
}

pub(crate) struct ParticleParts<'a> {
    pub setup: &'a ParticleSetup,
    pub scene: &'a Scene,
    pub effects: &'a Effects,
    pub seed: u64,
    pub rendered: &'a Rendered,
    pub particles: Particles,
    /// Blocked power fraction, sample step (m) and sin θ limit of the far field.
    pub blocked: f64,
    pub step_m: f64,
    pub rho_max: f64,
    pub reference_rho: f64,
    pub beam_sigma_mm: f64,
}

/// Assembles the truth of a rendered particle photo.
pub(crate) fn particles(p: ParticleParts) -> ParticlesTruth {
    let v = view(p.scene, p.rendered);
    let s = p.setup;
    let (mean, sd) = p.particles.mean_sd();
    let lognormal = s.distribution == SizeDistribution::Lognormal;
    let (mu, sigma) = lognormal_params(s.mean_diameter_m, s.spread);
    let l_mm = s.distance_m * 1e3;
    let mut notes = vec![
        format!(
            "halo: scalar thin-element model; opaque discs (Babinet: off the axis the same \
             halo as holes) under the Gaussian beam, a {n}×{n} transform, landed by \
             ray-plane intersection on a screen perpendicular to the beam; the speckle of the \
             halo is the particles' own",
            n = s.samples
        ),
        "the undiffracted beam lands as a Gaussian spot; its interference with the halo, \
         confined to that spot, is left out"
            .into(),
        format!(
            "exposure set on the halo's mean at sin θ = {:.4} (half of λ / mean diameter)",
            p.reference_rho
        ),
    ];
    if p.particles.overlapping > 0 {
        notes.push(format!(
            "{} particles found no clear place and overlap others",
            p.particles.overlapping
        ));
    }
    notes.extend(truth::clutter_notes(&p.rendered.clutter));
    notes.extend(truth::effect_notes(p.rendered));
    let count = p.particles.diameters_m.len();
    ParticlesTruth {
        kind: "particles".into(),
        seed: p.seed,
        inputs: *s,
        screen: frame(),
        camera: v.common.camera,
        homography: v.common.homography,
        centre_mm: [0.0, 0.0],
        centre_px: v.centre_px,
        centre_in_frame: v.centre_in_frame,
        particles: ParticleSample {
            count,
            diameters_m: p.particles.diameters_m,
            centres_m: p.particles.centres_m,
            mean_diameter_m: mean,
            sd_diameter_m: sd,
            overlapping: p.particles.overlapping,
        },
        distribution: DistributionTruth {
            kind: s.distribution,
            mean_m: s.mean_diameter_m,
            sd_m: s.spread * s.mean_diameter_m,
            log_mu: lognormal.then_some(mu),
            log_sigma: lognormal.then_some(sigma),
            truncated_below_m: TRUNCATE_BELOW * s.mean_diameter_m,
        },
        halo: HaloTruth {
            blocked_fraction: p.blocked,
            exposure_reference_sin_theta: p.reference_rho,
            exposure_reference_mm: radius_at(p.reference_rho, l_mm).unwrap_or(f64::NAN),
            transform_samples: s.samples,
            sample_step_m: p.step_m,
            sin_theta_limit: p.rho_max,
            beam_spot_sigma_mm: p.beam_sigma_mm,
        },
        ruler: v.common.ruler,
        grid: v.common.grid,
        sheet: v.common.sheet,
        scene: *p.scene,
        effects: *p.effects,
        notes,
    }
}
