//! `fringegauge simulate KIND --out PHOTO`: a synthetic photo with its truth beside it
//! (`PHOTO.truth.json`), for trying the tool, for tests and for choosing a bench layout.

use crate::quantity::{self, Dimension};
use crate::simulate::{
    self, CameraSpec, Clutter, Effects, Framing, GraphPaper, GratingSetup, Scene,
};
use crate::{Error, ExitCode};
use clap::{Args, ValueEnum};
use std::path::PathBuf;

/// What to simulate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SimKind {
    /// Spots of a transmission or reflection grating.
    Grating,
}

/// Arguments of `fringegauge simulate`.
#[derive(Debug, Clone, Args)]
pub struct SimulateArgs {
    /// Kind of pattern
    #[arg(value_enum)]
    pub kind: SimKind,

    /// Photo to write (.jpg or .png); the truth goes to PHOTO.truth.json
    #[arg(long, value_name = "PHOTO")]
    pub out: PathBuf,

    /// Laser wavelength
    #[arg(long, value_name = "LENGTH", default_value = "650nm")]
    pub wavelength: String,

    /// Grating pitch, e.g. 1/600mm, 600/mm or 1.6um
    #[arg(long, value_name = "PITCH", default_value = "1/600mm")]
    pub pitch: String,

    /// Grating-to-screen distance
    #[arg(long, value_name = "LENGTH", default_value = "1.25m")]
    pub distance: String,

    /// Angle of incidence on the grating
    #[arg(long, value_name = "ANGLE", default_value = "0deg")]
    pub incidence: String,

    /// A reflection grating (screen parallel to it, beam through a hole)
    #[arg(long)]
    pub reflect: bool,

    /// Laser beam diameter (1/e²)
    #[arg(long, value_name = "LENGTH", default_value = "1.5mm")]
    pub beam: String,

    /// Camera turn about the screen's vertical axis
    #[arg(long = "camera-yaw", value_name = "ANGLE", default_value = "0deg")]
    pub camera_yaw: String,

    /// Camera tilt about the screen's horizontal axis
    #[arg(long = "camera-pitch", value_name = "ANGLE", default_value = "0deg")]
    pub camera_pitch: String,

    /// Camera roll about its optical axis
    #[arg(long = "camera-roll", value_name = "ANGLE", default_value = "0deg")]
    pub camera_roll: String,

    /// Photo width in pixels
    #[arg(long, default_value_t = 1600)]
    pub width: u32,

    /// Photo height in pixels
    #[arg(long, default_value_t = 1200)]
    pub height: u32,

    /// Highest order the camera is aimed to keep in the frame
    #[arg(long = "frame-orders", default_value_t = 2)]
    pub frame_orders: u32,

    /// Graph paper (1 mm) as the screen
    #[arg(long = "graph-paper")]
    pub graph_paper: bool,

    /// Leave the ruler out
    #[arg(long = "no-ruler")]
    pub no_ruler: bool,

    /// Add a table with objects, a window reflection, a glint and stray light
    #[arg(long)]
    pub clutter: bool,

    /// No blur, speckle, noise or saturation
    #[arg(long)]
    pub clean: bool,

    /// JPEG quality (1-100)
    #[arg(long, default_value_t = 92, value_parser = clap::value_parser!(u8).range(1..=100))]
    pub quality: u8,

    /// Random seed
    #[arg(long, default_value_t = 1)]
    pub seed: u64,

    /// Overwrite existing files
    #[arg(long)]
    pub force: bool,
}

fn length(text: &str, flag: &str) -> Result<f64, Error> {
    Ok(quantity::require_positive(quantity::parse(text, Dimension::Length)?, flag)?.value)
}

fn angle(text: &str) -> Result<f64, Error> {
    Ok(quantity::parse(text, Dimension::Angle)?.value)
}

/// The simulation inputs from the arguments.
pub fn configure(a: &SimulateArgs) -> Result<(GratingSetup, Scene, CameraSpec, Effects), Error> {
    let setup = GratingSetup {
        wavelength_m: length(&a.wavelength, "--wavelength")?,
        pitch_m: quantity::require_positive(quantity::parse_pitch(&a.pitch)?, "--pitch")?.value,
        distance_m: length(&a.distance, "--distance")?,
        incidence_rad: angle(&a.incidence)?,
        reflect: a.reflect,
        beam_diameter_m: length(&a.beam, "--beam")?,
        ..GratingSetup::default()
    };
    let mut scene = Scene::default();
    if a.graph_paper {
        scene.graph_paper = Some(GraphPaper::default());
    }
    if a.no_ruler {
        scene.ruler = None;
    }
    if a.clutter {
        scene.clutter = Clutter::all();
    }
    let camera = CameraSpec {
        width_px: a.width,
        height_px: a.height,
        yaw_rad: angle(&a.camera_yaw)?,
        pitch_rad: angle(&a.camera_pitch)?,
        roll_rad: angle(&a.camera_roll)?,
        framing: Framing::Auto {
            max_order: a.frame_orders,
            margin: 0.08,
        },
        ..CameraSpec::default()
    };
    let effects = if a.clean {
        Effects::clean()
    } else {
        Effects::default()
    };
    Ok((setup, scene, camera, effects))
}

/// Runs `fringegauge simulate`.
pub fn run(a: &SimulateArgs) -> Result<ExitCode, Error> {
    let SimKind::Grating = a.kind;
    let (setup, scene, camera, effects) = configure(a)?;
    let photo = simulate::render_grating(&setup, &scene, &camera, &effects, a.seed)?;
    photo.write(&a.out, a.quality, a.force)?;
    eprintln!(
        "wrote {} and {}",
        a.out.display(),
        simulate::truth_path(&a.out).display()
    );
    if let Some(r) = &photo.truth.ruler {
        if let (Some(s), Some(e)) = (r.start_px, r.end_px) {
            eprintln!(
                "ruler stretch: --ruler {:.0},{:.0},{:.0},{:.0}",
                s[0], s[1], e[0], e[1]
            );
        }
    }
    for note in &photo.truth.notes {
        eprintln!("note: {note}");
    }
    Ok(ExitCode::Measured)
}
