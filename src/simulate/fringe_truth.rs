//! The truth of a synthetic photo of fringes (two slits, a slit, a wire), written beside it
//! as `PHOTO.truth.json` like a grating's ([`super::Truth`]): the inputs in SI units, the
//! screen and camera, and the dark and bright fringes as measured numerically on the
//! simulated irradiance, in screen millimetres and photo pixels.

use super::aperture::{Aperture, ApertureSetup};
use super::effects::Effects;
use super::fringes::{Extremum, FringeLight};
use super::photo::Rendered;
use super::scene::Scene;
use super::truth::{
    self, CameraTruth, GridTruth, RulerTruth, ScreenFrame, SheetTruth, clutter_notes,
};
use serde::{Deserialize, Serialize};

/// Truth of one rendered photo of fringes.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ApertureTruth {
    /// Experiment kind: "two_slit", "slit" or "wire".
    pub kind: String,
    /// Seed of every random choice in the photo.
    pub seed: u64,
    /// The bench, SI units.
    pub inputs: ApertureInputs,
    /// The screen coordinate frame.
    pub screen: ScreenFrame,
    /// The camera as placed.
    pub camera: CameraTruth,
    /// Screen mm → image px, row-major, last entry 1.
    pub homography: [[f64; 3]; 3],
    /// The fringes, measured on the simulated irradiance.
    pub fringes: FringeTruth,
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
    /// Plain-language remarks (distractors, limits of the model).
    pub notes: Vec<String>,
}

/// Bench inputs in SI units; the aperture's dimensions that do not apply are `None`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ApertureInputs {
    /// "two_slit", "slit" or "wire".
    pub kind: String,
    /// Slit centre-to-centre distance (two slits), m.
    pub separation_m: Option<f64>,
    /// Slit width (two slits, slit), m.
    pub width_m: Option<f64>,
    /// Wire diameter, m.
    pub diameter_m: Option<f64>,
    /// Laser wavelength, m.
    pub wavelength_m: f64,
    /// Aperture to screen along the beam (screen perpendicular to it), m.
    pub distance_m: f64,
    /// Beam 1/e² diameter, m.
    pub beam_diameter_m: f64,
}

impl From<&ApertureSetup> for ApertureInputs {
    fn from(s: &ApertureSetup) -> Self {
        let (separation_m, width_m, diameter_m) = match s.aperture {
            Aperture::TwoSlit {
                separation_m,
                width_m,
            } => (Some(separation_m), Some(width_m), None),
            Aperture::Slit { width_m } => (None, Some(width_m), None),
            Aperture::Wire { diameter_m } => (None, None, Some(diameter_m)),
        };
        ApertureInputs {
            kind: s.aperture.kind_name().into(),
            separation_m,
            width_m,
            diameter_m,
            wavelength_m: s.wavelength_m,
            distance_m: s.distance_m,
            beam_diameter_m: s.beam_diameter_m,
        }
    }
}

/// One dark or bright fringe on the pattern axis (Y = 0).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FringePoint {
    /// Counted from the centre: dark fringes ±1, ±2, … (negative on the −X side); bright
    /// fringes 0 (central), ±1, ….
    pub index: i32,
    /// Screen position, mm.
    pub screen_mm: [f64; 2],
    /// That point through the homography, px (`None` if behind the camera).
    pub px: Option<[f64; 2]>,
    /// Whether `px` lies on the sensor.
    pub in_frame: bool,
    /// Irradiance there relative to the central bright fringe's.
    pub relative_irradiance: f64,
}

/// The fringes as simulated.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FringeTruth {
    /// Dark fringes (local minima of the irradiance along X), up to ten each side, from −X.
    /// For two slits these include the zeros of the single-slit envelope.
    pub minima: Vec<FringePoint>,
    /// Bright fringes (local maxima) near the centre, up to five each side, from −X.
    pub maxima: Vec<FringePoint>,
    /// Two slits: mean spacing of the dark fringes near the centre, mm: the span of the
    /// central ±k dark fringes over 2k − 1.
    pub mean_period_mm: Option<f64>,
    /// The k of `mean_period_mm` (every step within it is within 20 % of the central one).
    pub period_fringes_per_side: Option<usize>,
    /// The same period in pixels along the pattern at its centre.
    pub mean_period_px: Option<f64>,
    /// Where the exposure was set: the central fringe (slits) or the brightest side fringe
    /// (wire), screen mm.
    pub exposure_reference_mm: [f64; 2],
}

pub(crate) struct ApertureTruthParts<'a> {
    pub setup: &'a ApertureSetup,
    pub scene: &'a Scene,
    pub effects: &'a Effects,
    pub seed: u64,
    pub rendered: &'a Rendered,
    pub light: &'a FringeLight,
}

/// Assembles the truth of a rendered photo of fringes.
pub(crate) fn build(p: ApertureTruthParts) -> ApertureTruth {
    let cam = &p.rendered.camera;
    let view = truth::view_truth(p.scene, cam, &p.rendered.screen, 0.0);
    let central = p
        .light
        .maxima
        .iter()
        .find(|m| m.index == 0)
        .map_or(1.0, |m| m.per_mm)
        .max(f64::MIN_POSITIVE);
    let point = |e: &Extremum| {
        let screen_mm = [e.x_mm, 0.0];
        let px = cam.project(screen_mm);
        FringePoint {
            index: e.index,
            screen_mm,
            px,
            in_frame: px.is_some_and(|q| cam.in_frame(q)),
            relative_irradiance: e.per_mm / central,
        }
    };
    let minima: Vec<FringePoint> = p.light.minima.iter().map(point).collect();
    let maxima: Vec<FringePoint> = p.light.maxima.iter().map(point).collect();
    let mean_period_px = p.light.period.and_then(|(period, _)| {
        let a = cam.project([-0.5 * period, 0.0])?;
        let b = cam.project([0.5 * period, 0.0])?;
        Some((b[0] - a[0]).hypot(b[1] - a[1]))
    });
    let kind = p.setup.aperture.kind_name();
    let mut notes = vec![
        format!(
            "fringes: scalar thin-element model, a {}-sample transform of the transmission \
             under the Gaussian beam, landed by ray-plane intersection on a screen \
             perpendicular to the beam",
            p.light.spectrum_samples
        ),
        "minima and maxima are measured on the simulated irradiance along Y = 0 (the fringe \
         train integrated over Y), before speckle, blur and noise"
            .to_string(),
    ];
    if kind == "wire" {
        notes.push(
            "wire: the undiffracted beam lands with its own footprint; its interference with \
             the diffracted wave, confined to the beam's spot, is left out"
                .into(),
        );
    }
    for m in minima.iter().filter(|m| !m.in_frame) {
        notes.push(format!("dark fringe {} lands outside the frame", m.index));
    }
    notes.extend(clutter_notes(&p.rendered.clutter));
    notes.extend(truth::effect_notes(p.rendered));
    ApertureTruth {
        kind: kind.into(),
        seed: p.seed,
        inputs: ApertureInputs::from(p.setup),
        screen: ScreenFrame {
            origin: "the undiffracted beam's axis".into(),
            axes: "X along the pattern axis (across the slits or wire), Y across it along \
                   the slits, downwards as the camera sees the lit face; millimetres"
                .into(),
            hole_mm: None,
            hole_radius_mm: None,
        },
        camera: view.camera,
        homography: view.homography,
        fringes: FringeTruth {
            minima,
            maxima,
            mean_period_mm: p.light.period.map(|(v, _)| v),
            period_fringes_per_side: p.light.period.map(|(_, k)| k),
            mean_period_px,
            exposure_reference_mm: [p.light.reference.x_mm, 0.0],
        },
        ruler: view.ruler,
        grid: view.grid,
        sheet: view.sheet,
        scene: *p.scene,
        effects: *p.effects,
        notes,
    }
}
