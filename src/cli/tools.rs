//! `demo` and `archive`: the built-in demonstration and archive housekeeping.

use super::args::{OutputArgs, PhotoArgs, ScaleArgs};
use super::grating::{self, GratingArgs};
use crate::record::archive;
use crate::simulate::{self, CameraSpec, Effects, Framing, GratingSetup, Scene};
use crate::{Error, ExitCode};
use clap::{Args, Subcommand};
use std::path::PathBuf;

/// Arguments of `fringegauge demo`.
#[derive(Debug, Clone, Args)]
pub struct DemoArgs {
    /// Folder for the demo's files [default: a new temporary folder]
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// Arguments of `fringegauge archive`.
#[derive(Debug, Clone, Args)]
pub struct ArchiveArgs {
    /// What to do with the archive.
    #[command(subcommand)]
    pub action: ArchiveAction,
}

/// Archive actions.
#[derive(Debug, Clone, Subcommand)]
pub enum ArchiveAction {
    /// List the measurements in an archive folder
    List {
        /// The archive folder
        dir: PathBuf,
    },
    /// Re-hash every archived photo against its record
    Verify {
        /// The archive folder
        dir: PathBuf,
    },
}

/// Runs `fringegauge archive`.
pub fn archive(a: &ArchiveArgs) -> Result<ExitCode, Error> {
    match &a.action {
        ArchiveAction::List { dir } => {
            let entries = archive::list(dir)?;
            if entries.is_empty() {
                println!("{} holds no measurements", dir.display());
            }
            for e in entries {
                let results: Vec<String> = e
                    .results
                    .iter()
                    .map(|r| {
                        format!(
                            "{} {}",
                            r.name,
                            crate::quantity::format_si(r.value, r.u, &r.unit)
                        )
                    })
                    .collect();
                println!(
                    "{:<20} {:<9} {}  {}  {}",
                    e.sample,
                    e.kind,
                    e.created,
                    e.folder,
                    results.join("; ")
                );
            }
            Ok(ExitCode::Measured)
        }
        ArchiveAction::Verify { dir } => {
            let report = archive::verify(dir)?;
            print!("{report}");
            Ok(if report.is_clean() {
                ExitCode::Measured
            } else {
                ExitCode::NotMeasured
            })
        }
    }
}

/// The demo bench, an invented scene: a technician at a small optics workshop checks an
/// unlabelled transmission grating with a red diode pointer, a screen half a metre away
/// and a ruler taped under the spots, photographed with a phone held a little off square.
fn demo_scene() -> (GratingSetup, Scene, CameraSpec, Effects) {
    let setup = GratingSetup {
        wavelength_m: 650e-9,
        pitch_m: 1e-3 / 600.0,
        distance_m: 0.5,
        ..GratingSetup::default()
    };
    let camera = CameraSpec {
        width_px: 2400,
        height_px: 1800,
        yaw_rad: 2f64.to_radians(),
        framing: Framing::Auto {
            max_order: 1,
            margin: 0.08,
        },
        ..CameraSpec::default()
    };
    (setup, Scene::default(), camera, Effects::default())
}

/// Runs `fringegauge demo`.
pub fn demo(a: &DemoArgs) -> Result<ExitCode, Error> {
    let dir = match &a.out {
        Some(d) => {
            std::fs::create_dir_all(d).map_err(|source| Error::Io {
                context: format!("cannot create {}", d.display()),
                source,
            })?;
            d.clone()
        }
        None => tempfile::Builder::new()
            .prefix("fringegauge-demo-")
            .tempdir()
            .map_err(|source| Error::Io {
                context: "cannot make a temporary folder".into(),
                source,
            })?
            .keep(),
    };
    let photo_path = dir.join("grating.jpg");
    let (setup, scene, camera, effects) = demo_scene();
    eprintln!("simulating a 600 lines/mm grating lit by a 650 nm pointer, screen at 0.5 m ...");
    let sim = simulate::render_grating(&setup, &scene, &camera, &effects, 11)?;
    sim.write(&photo_path, 92, false)?;
    let ruler = sim
        .truth
        .ruler
        .and_then(|r| Some((r.start_px?, r.end_px?)))
        .ok_or_else(|| Error::Usage("the demo photo has no ruler in the frame".into()))?;
    // Ends as a person would click them on the tick line, a little inside the stretch.
    let (s, e) = ruler;
    let rough = format!(
        "{:.0},{:.0},{:.0},{:.0}",
        s[0] + 0.05 * (e[0] - s[0]),
        s[1] + 0.05 * (e[1] - s[1]),
        e[0] - 0.05 * (e[0] - s[0]),
        e[1] - 0.05 * (e[1] - s[1])
    );
    let args = GratingArgs {
        photo: PhotoArgs {
            photo: photo_path.clone(),
            channel: None,
            setup: None,
            from_setup: None,
        },
        wavelength: Some("650nm±3nm".into()),
        pitch: None,
        distance: Some("0.500m±1mm".into()),
        reflect: false,
        incidence: None,
        scale: ScaleArgs {
            ruler: Some(rough.clone()),
            tick: None,
            ruler_class: None,
            points: None,
            length: None,
            grid: None,
            mm_per_px: None,
        },
        output: OutputArgs {
            json: false,
            archive: Some(dir.join("archive")),
            sample: Some("demo-grating".into()),
            overlay: Some(dir.join("overlay.png")),
            report: Some(dir.join("report.html")),
            timings: false,
            force: true,
            monte_carlo: None,
        },
    };
    eprintln!(
        "measuring: fringegauge grating {} --wavelength 650nm±3nm --distance 0.500m±1mm --ruler {rough}",
        photo_path.display()
    );
    let code = grating::run(&args)?;
    println!();
    println!(
        "true pitch of the simulated grating: {:.6} µm (600 lines/mm)",
        setup.pitch_m * 1e6
    );
    println!("files in {}:", dir.display());
    for name in [
        "grating.jpg",
        "grating.jpg.truth.json",
        "overlay.png",
        "report.html",
        "archive/",
    ] {
        println!("  {name}");
    }
    Ok(code)
}
