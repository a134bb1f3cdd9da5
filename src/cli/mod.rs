//! Command-line argument types (clap derive) and one handler per subcommand. Handlers
//! sequence the library's stages and write outputs; the algorithms live below.

pub mod args;
pub mod electron;
pub mod fringes;
pub mod grating;
pub mod inputs;
pub mod output;
pub mod particles;
pub mod rings;
pub mod setup;
pub mod simulate;
pub mod tools;

use crate::{Error, ExitCode};
use clap::{Parser, Subcommand};

/// fringegauge: a measured dimension, with its uncertainty, from a photo of a
/// diffraction pattern.
#[derive(Debug, Parser)]
#[command(
    name = "fringegauge",
    version,
    about = "Measure pitch, width or wavelength from a photo of a diffraction pattern, with a GUM uncertainty budget",
    long_about = "fringegauge corrects the camera's view of the screen, calibrates pixels to \
                  millimetres from a scale in the frame, finds the pattern's features to a \
                  fraction of a pixel, solves the exact physics and reports the result with an \
                  uncertainty budget after the GUM (JCGM 100:2008).",
    after_long_help = args::LASER_CAUTION
)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
// Parsed once per process: the size of the largest variant costs nothing.
#[allow(clippy::large_enum_variant)]
pub enum Command {
    /// Pitch of a grating from its orders (or the wavelength, given the pitch)
    #[command(after_long_help = args::LASER_CAUTION)]
    Grating(grating::GratingArgs),
    /// Slit separation and width from the fringes of a double slit
    #[command(name = "two-slit", after_long_help = args::LASER_CAUTION)]
    TwoSlit(fringes::TwoSlitArgs),
    /// Width of a slit, or with --wire a wire's diameter, from its fringes and minima
    #[command(after_long_help = args::LASER_CAUTION)]
    Slit(fringes::SlitArgs),
    /// Diameter of a pinhole from its Airy rings
    #[command(after_long_help = args::LASER_CAUTION)]
    Pinhole(rings::PinholeArgs),
    /// Mean diameter, spread and size distribution of particles from their halo
    #[command(after_long_help = args::LASER_CAUTION)]
    Particles(particles::ParticlesArgs),
    /// Lattice spacings from the rings of an electron-diffraction tube
    #[command(after_long_help = electron::TUBE_CAUTION)]
    Electron(electron::ElectronArgs),
    /// Render a synthetic photo with known truth (PHOTO.truth.json beside it)
    Simulate(simulate::SimulateArgs),
    /// Simulate a grating photo, measure it, and say where the files went
    Demo(tools::DemoArgs),
    /// Print the JSON Schema of the record
    Schema,
    /// List or verify an archive folder
    Archive(tools::ArchiveArgs),
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<ExitCode, Error> {
    match cli.command {
        Command::Grating(a) => grating::run(&a),
        Command::TwoSlit(a) => fringes::run_two_slit(&a),
        Command::Slit(a) => fringes::run_slit(&a),
        Command::Pinhole(a) => rings::run_pinhole(&a),
        Command::Particles(a) => particles::run(&a),
        Command::Electron(a) => electron::run(&a),
        Command::Simulate(a) => simulate::run(&a),
        Command::Demo(a) => tools::demo(&a),
        Command::Schema => {
            println!("{}", crate::record::schema::schema_json());
            Ok(ExitCode::Measured)
        }
        Command::Archive(a) => tools::archive(&a),
    }
}
