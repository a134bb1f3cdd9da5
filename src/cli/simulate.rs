//! `fringegauge simulate KIND --out PHOTO`: a synthetic photo with its truth beside it
//! (`PHOTO.truth.json`), for trying the tool, for tests and for choosing a bench layout.
//! Kinds: a grating's spots, the fringes of two slits, a slit or a wire, a pinhole's rings
//! or a particle field's halo (see [`rings`]).

mod rings;

use crate::quantity::{self, Dimension};
use crate::simulate::{
    self, Aperture, ApertureSetup, CameraSpec, Clutter, Effects, Framing, GraphPaper, GratingSetup,
    Scene,
};
use crate::{Error, ExitCode};
use clap::{Args, ValueEnum};
use std::path::PathBuf;

mod electron;

/// What to simulate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum SimKind {
    /// Spots of a transmission or reflection grating.
    Grating,
    /// Young's fringes of two slits.
    TwoSlit,
    /// Fringes of a single slit.
    Slit,
    /// Fringes of a wire or fibre in a wide beam.
    Wire,
    /// Rings of a circular pinhole (exposed on the first bright ring).
    Pinhole,
    /// The halo of a random field of opaque particles (exposed on the halo).
    Particles,
    /// Rings of a polycrystalline film in an electron-diffraction tube.
    Electron,
}

impl SimKind {
    fn is_grating(self) -> bool {
        self == SimKind::Grating
    }
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

    /// Laser wavelength [default: 532nm for two-slit, else 650nm]
    #[arg(long, value_name = "LENGTH")]
    pub wavelength: Option<String>,

    /// Grating pitch, e.g. 1/600mm, 600/mm or 1.6um
    #[arg(long, value_name = "PITCH", default_value = "1/600mm")]
    pub pitch: String,

    /// Slit centre-to-centre separation (two-slit)
    #[arg(long, value_name = "LENGTH", default_value = "0.25mm")]
    pub separation: String,

    /// Slit width [default: 0.05mm for two-slit, 0.1mm for slit]
    #[arg(long = "slit-width", value_name = "LENGTH")]
    pub slit_width: Option<String>,

    /// Wire, fibre or pinhole diameter [default: 0.127mm for wire, 0.2mm for pinhole]
    #[arg(long, value_name = "LENGTH")]
    pub diameter: Option<String>,

    /// Diffracting object to screen, along the beam [default: 1.25m for grating, 0.5m for
    /// particles, else 2.5m]
    #[arg(long, value_name = "LENGTH")]
    pub distance: Option<String>,

    /// Angle of incidence on the grating
    #[arg(long, value_name = "ANGLE", default_value = "0deg")]
    pub incidence: String,

    /// A reflection grating (screen parallel to it, beam through a hole)
    #[arg(long)]
    pub reflect: bool,

    /// Laser beam diameter (1/e²) [default: 3mm for wire, 0.6mm for particles,
    /// else 1.5mm]
    #[arg(long, value_name = "LENGTH")]
    pub beam: Option<String>,

    /// Camera turn about the screen's vertical axis [default: 0deg for grating, else 6deg]
    #[arg(long = "camera-yaw", value_name = "ANGLE")]
    pub camera_yaw: Option<String>,

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

    /// Highest order (grating), dark fringe on each side (two-slit, slit, wire), dark ring
    /// (pinhole) or multiple of wavelength / mean diameter in sin θ (particles) the camera is
    /// aimed to keep in the frame [default: 2 for grating, 10 for two-slit, 5 for slit and
    /// wire, 6 for pinhole, 2 for particles]
    #[arg(long = "frame-orders")]
    pub frame_orders: Option<u32>,

    /// Graph paper (1 mm) as the screen
    #[arg(long = "graph-paper")]
    pub graph_paper: bool,

    /// Leave the ruler out
    #[arg(long = "no-ruler")]
    pub no_ruler: bool,

    /// Length of the ruler's scale, centred under the pattern
    #[arg(long = "ruler-length", value_name = "LENGTH", default_value = "200mm")]
    pub ruler_length: String,

    /// Add a table with objects, a window reflection, a glint and stray light
    #[arg(long)]
    pub clutter: bool,

    /// Pencil strokes on the screen across and along the pattern
    #[arg(long)]
    pub pencil: bool,

    /// A shadow of the room light over about half of the frame
    #[arg(long)]
    pub shadow: bool,

    /// Blooming around saturated light, strength 0-4 (1: strong)
    #[arg(long, value_name = "STRENGTH", default_value_t = 0.0)]
    pub bloom: f64,

    /// A lens-flare streak through the brightest light, peak in units of saturation
    #[arg(long, value_name = "PEAK", default_value_t = 0.0)]
    pub flare: f64,

    /// Peak of the reference light (zero order; central fringe, or a wire's first side
    /// fringe; a pinhole's first bright ring; the particles' halo at half wavelength / mean
    /// diameter) relative to saturation [default: 3, or 0.5 with --clean]
    #[arg(long, value_name = "FACTOR")]
    pub overexposure: Option<f64>,

    /// No blur, speckle, noise or saturation
    #[arg(long)]
    pub clean: bool,

    /// JPEG quality (1-100)
    #[arg(long, default_value_t = 92, value_parser = clap::value_parser!(u8).range(1..=100))]
    pub quality: u8,

    /// Particle field (particles)
    #[command(flatten)]
    pub rings: rings::RingArgs,

    /// Random seed
    #[arg(long, default_value_t = 1)]
    pub seed: u64,

    /// The electron kind's own flags.
    #[command(flatten)]
    pub electron: electron::ElectronArgs,

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

fn or<'a>(given: &'a Option<String>, default: &'a str) -> &'a str {
    given.as_deref().unwrap_or(default)
}

/// The grating's inputs from the arguments.
pub fn configure(a: &SimulateArgs) -> Result<(GratingSetup, Scene, CameraSpec, Effects), Error> {
    let setup = GratingSetup {
        wavelength_m: length(or(&a.wavelength, "650nm"), "--wavelength")?,
        pitch_m: quantity::require_positive(quantity::parse_pitch(&a.pitch)?, "--pitch")?.value,
        distance_m: length(or(&a.distance, "1.25m"), "--distance")?,
        incidence_rad: angle(&a.incidence)?,
        reflect: a.reflect,
        beam_diameter_m: length(or(&a.beam, "1.5mm"), "--beam")?,
        ..GratingSetup::default()
    };
    let (scene, camera, effects) = common(a)?;
    Ok((setup, scene, camera, effects))
}

/// The inputs of a two-slit, slit or wire photo from the arguments (`None` for a grating).
pub fn configure_aperture(
    a: &SimulateArgs,
) -> Result<Option<(ApertureSetup, Scene, CameraSpec, Effects)>, Error> {
    let base = match a.kind {
        SimKind::Grating | SimKind::Pinhole | SimKind::Particles => return Ok(None),
        SimKind::Electron => return Ok(None),
        SimKind::TwoSlit => ApertureSetup::two_slit(),
        SimKind::Slit => ApertureSetup::slit(),
        SimKind::Wire => ApertureSetup::wire(),
    };
    let aperture = match a.kind {
        SimKind::TwoSlit => Aperture::TwoSlit {
            separation_m: length(&a.separation, "--separation")?,
            width_m: length(or(&a.slit_width, "0.05mm"), "--slit-width")?,
        },
        SimKind::Slit => Aperture::Slit {
            width_m: length(or(&a.slit_width, "0.1mm"), "--slit-width")?,
        },
        _ => Aperture::Wire {
            diameter_m: length(or(&a.diameter, "0.127mm"), "--diameter")?,
        },
    };
    let setup = ApertureSetup {
        aperture,
        wavelength_m: match &a.wavelength {
            Some(t) => length(t, "--wavelength")?,
            None => base.wavelength_m,
        },
        distance_m: match &a.distance {
            Some(t) => length(t, "--distance")?,
            None => base.distance_m,
        },
        beam_diameter_m: match &a.beam {
            Some(t) => length(t, "--beam")?,
            None => base.beam_diameter_m,
        },
    };
    let (scene, camera, effects) = common(a)?;
    Ok(Some((setup, scene, camera, effects)))
}

/// Scene, camera and effects, shared by every kind.
fn common(a: &SimulateArgs) -> Result<(Scene, CameraSpec, Effects), Error> {
    let grating = a.kind.is_grating();
    let mut scene = Scene::default();
    if a.graph_paper {
        scene.graph_paper = Some(GraphPaper::default());
    }
    if a.no_ruler {
        scene.ruler = None;
    } else if let Some(r) = scene.ruler.as_mut() {
        r.length_mm = length(&a.ruler_length, "--ruler-length")? * 1e3;
    }
    if a.clutter {
        scene.clutter = Clutter::all();
    }
    scene.clutter.pencil = a.pencil;
    scene.clutter.shadow = a.shadow;
    let default_frame = match a.kind {
        SimKind::Grating => 2,
        SimKind::TwoSlit => 10,
        SimKind::Slit | SimKind::Wire => 5,
        SimKind::Pinhole => 6,
        SimKind::Particles => 2,
        SimKind::Electron => 0,
    };
    let camera = CameraSpec {
        width_px: a.width,
        height_px: a.height,
        yaw_rad: angle(or(&a.camera_yaw, if grating { "0deg" } else { "6deg" }))?,
        pitch_rad: angle(&a.camera_pitch)?,
        roll_rad: angle(&a.camera_roll)?,
        framing: Framing::Auto {
            max_order: a.frame_orders.unwrap_or(default_frame),
            margin: 0.08,
        },
        ..CameraSpec::default()
    };
    let mut effects = if a.clean {
        Effects::clean()
    } else {
        Effects::default()
    };
    if let Some(o) = a.overexposure {
        effects.overexposure = o;
    }
    effects.bloom = a.bloom;
    effects.flare = a.flare;
    Ok((scene, camera, effects))
}

/// Runs `fringegauge simulate`.
pub fn run(a: &SimulateArgs) -> Result<ExitCode, Error> {
    if a.kind == SimKind::Electron {
        return electron::run(a);
    }
    let (ruler, notes) = if let Some(done) = rings::render(a)? {
        done
    } else if let Some((setup, scene, camera, effects)) = configure_aperture(a)? {
        let photo = simulate::render_aperture(&setup, &scene, &camera, &effects, a.seed)?;
        photo.write(&a.out, a.quality, a.force)?;
        (photo.truth.ruler, photo.truth.notes)
    } else {
        let (setup, scene, camera, effects) = configure(a)?;
        let photo = simulate::render_grating(&setup, &scene, &camera, &effects, a.seed)?;
        photo.write(&a.out, a.quality, a.force)?;
        (photo.truth.ruler, photo.truth.notes)
    };
    eprintln!(
        "wrote {} and {}",
        a.out.display(),
        simulate::truth_path(&a.out).display()
    );
    if let Some(r) = &ruler {
        if let (Some(s), Some(e)) = (r.start_px, r.end_px) {
            eprintln!(
                "ruler stretch: --ruler {:.0},{:.0},{:.0},{:.0}",
                s[0], s[1], e[0], e[1]
            );
        }
    }
    for note in &notes {
        eprintln!("note: {note}");
    }
    Ok(ExitCode::Measured)
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Debug, Parser)]
    struct Cmd {
        #[command(flatten)]
        args: SimulateArgs,
    }

    fn parse(line: &[&str]) -> SimulateArgs {
        let mut full = vec!["simulate"];
        full.extend_from_slice(line);
        Cmd::try_parse_from(full).unwrap().args
    }

    #[test]
    fn two_slit_flags_reach_the_setup() {
        let a = parse(&[
            "two-slit",
            "--out",
            "x.jpg",
            "--separation",
            "0.3mm",
            "--slit-width",
            "60um",
            "--distance",
            "3m",
            "--pencil",
            "--ruler-length",
            "12cm",
            "--bloom",
            "1",
            "--flare",
            "2",
        ]);
        let (setup, scene, camera, effects) = configure_aperture(&a).unwrap().unwrap();
        assert_eq!(
            setup.aperture,
            Aperture::TwoSlit {
                separation_m: 0.3e-3,
                width_m: 60e-6
            }
        );
        assert!((setup.distance_m - 3.0).abs() < 1e-12);
        assert!((setup.wavelength_m - 532e-9).abs() < 1e-18);
        assert!(scene.clutter.pencil && !scene.clutter.shadow);
        assert!((scene.ruler.unwrap().length_mm - 120.0).abs() < 1e-9);
        assert!((camera.yaw_rad - 6f64.to_radians()).abs() < 1e-12);
        assert_eq!(effects.bloom, 1.0);
        assert_eq!(effects.flare, 2.0);
    }

    #[test]
    fn slit_and_wire_defaults_and_grating_is_unchanged() {
        let a = parse(&["slit", "--out", "x.jpg"]);
        let (setup, ..) = configure_aperture(&a).unwrap().unwrap();
        assert_eq!(setup.aperture, Aperture::Slit { width_m: 0.1e-3 });
        let a = parse(&["wire", "--out", "x.jpg", "--diameter", "80um", "--shadow"]);
        let (setup, scene, ..) = configure_aperture(&a).unwrap().unwrap();
        assert_eq!(setup.aperture, Aperture::Wire { diameter_m: 80e-6 });
        assert!((setup.beam_diameter_m - 3e-3).abs() < 1e-15);
        assert!(scene.clutter.shadow);
        let a = parse(&["grating", "--out", "x.jpg"]);
        assert!(configure_aperture(&a).unwrap().is_none());
        let (g, _, camera, _) = configure(&a).unwrap();
        assert!((g.distance_m - 1.25).abs() < 1e-12 && camera.yaw_rad == 0.0);
        assert!(matches!(camera.framing, Framing::Auto { max_order: 2, .. }));
    }

    #[test]
    fn a_bad_length_is_an_error() {
        let a = parse(&["wire", "--out", "x.jpg", "--diameter", "0mm"]);
        assert!(configure_aperture(&a).is_err());
    }
}
