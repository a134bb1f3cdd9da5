//! `fringegauge simulate pinhole|particles`: the inputs of a pinhole's rings or a particle
//! field's halo from the arguments, and the run.

use super::{SimKind, SimulateArgs, common, length, or};
use crate::Error;
use crate::simulate::{self, ParticleSetup, PinholeSetup, RulerTruth, SizeDistribution};
use clap::{Args, ValueEnum};

/// Shape of the particle size distribution.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Distribution {
    /// Normal by number (truncated below a third of the mean).
    Normal,
    /// Lognormal with the same number mean and standard deviation.
    Lognormal,
}

/// The particle flags of `fringegauge simulate`.
#[derive(Debug, Clone, Args)]
pub struct RingArgs {
    /// Mean particle diameter, by number (particles)
    #[arg(long = "mean-diameter", value_name = "LENGTH", default_value = "8um")]
    pub mean_diameter: String,

    /// Standard deviation of the particle diameters relative to the mean, e.g. 10% or 0.1
    /// (particles)
    #[arg(long, value_name = "FRACTION", default_value = "10%")]
    pub spread: String,

    /// Number of particles in the lit disc (particles)
    #[arg(long, value_name = "N", default_value_t = 400)]
    pub count: usize,

    /// Particle size distribution (particles)
    #[arg(long, value_enum, default_value_t = Distribution::Normal)]
    pub distribution: Distribution,

    /// Samples along each side of the particles' far-field transform, a power of two; the
    /// transform spans three beam diameters (particles)
    #[arg(long = "transform-samples", value_name = "N", default_value_t = 2048)]
    pub transform_samples: usize,
}

/// "10%" or "0.1" as a fraction.
fn fraction(text: &str, flag: &str) -> Result<f64, Error> {
    let t = text.trim();
    let value = match t.strip_suffix('%') {
        Some(p) => p.trim().parse::<f64>().map(|v| v / 100.0),
        None => t.parse::<f64>(),
    };
    match value {
        Ok(v) if v.is_finite() && v >= 0.0 => Ok(v),
        _ => Err(Error::Usage(format!(
            "{flag} takes a fraction such as 10% or 0.1, got `{text}`"
        ))),
    }
}

/// A pinhole's bench from the arguments.
pub fn configure_pinhole(a: &SimulateArgs) -> Result<PinholeSetup, Error> {
    let base = PinholeSetup::default();
    Ok(PinholeSetup {
        diameter_m: length(or(&a.diameter, "0.2mm"), "--diameter")?,
        wavelength_m: length(or(&a.wavelength, "650nm"), "--wavelength")?,
        distance_m: match &a.distance {
            Some(t) => length(t, "--distance")?,
            None => base.distance_m,
        },
        beam_diameter_m: match &a.beam {
            Some(t) => length(t, "--beam")?,
            None => base.beam_diameter_m,
        },
    })
}

/// A particle field's bench from the arguments.
pub fn configure_particles(a: &SimulateArgs) -> Result<ParticleSetup, Error> {
    let base = ParticleSetup::default();
    let r = &a.rings;
    Ok(ParticleSetup {
        mean_diameter_m: length(&r.mean_diameter, "--mean-diameter")?,
        spread: fraction(&r.spread, "--spread")?,
        count: r.count,
        distribution: match r.distribution {
            Distribution::Normal => SizeDistribution::Normal,
            Distribution::Lognormal => SizeDistribution::Lognormal,
        },
        wavelength_m: length(or(&a.wavelength, "650nm"), "--wavelength")?,
        distance_m: match &a.distance {
            Some(t) => length(t, "--distance")?,
            None => base.distance_m,
        },
        beam_diameter_m: match &a.beam {
            Some(t) => length(t, "--beam")?,
            None => base.beam_diameter_m,
        },
        samples: r.transform_samples,
    })
}

/// The ruler and the notes of a written photo, for the summary.
pub type Written = (Option<RulerTruth>, Vec<String>);

/// Renders and writes a pinhole or particle photo; `None` for the other kinds.
pub fn render(a: &SimulateArgs) -> Result<Option<Written>, Error> {
    let (scene, camera, effects) = match a.kind {
        SimKind::Pinhole | SimKind::Particles => common(a)?,
        _ => return Ok(None),
    };
    if a.kind == SimKind::Pinhole {
        let setup = configure_pinhole(a)?;
        let photo = simulate::render_pinhole(&setup, &scene, &camera, &effects, a.seed)?;
        photo.write(&a.out, a.quality, a.force)?;
        Ok(Some((photo.truth.ruler, photo.truth.notes)))
    } else {
        let setup = configure_particles(a)?;
        let photo = simulate::render_particles(&setup, &scene, &camera, &effects, a.seed)?;
        photo.write(&a.out, a.quality, a.force)?;
        Ok(Some((photo.truth.ruler, photo.truth.notes)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::Framing;
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
    fn pinhole_flags_reach_the_setup() {
        let a = parse(&[
            "pinhole",
            "--out",
            "p.jpg",
            "--diameter",
            "0.15mm",
            "--distance",
            "3m",
            "--wavelength",
            "532nm",
            "--bloom",
            "1",
            "--graph-paper",
        ]);
        let s = configure_pinhole(&a).unwrap();
        assert_eq!(s.diameter_m, 0.15e-3);
        assert_eq!(s.distance_m, 3.0);
        assert!((s.wavelength_m - 532e-9).abs() < 1e-18);
        let (scene, camera, effects) = common(&a).unwrap();
        assert!(scene.graph_paper.is_some());
        assert_eq!(effects.bloom, 1.0);
        assert!(matches!(camera.framing, Framing::Auto { max_order: 6, .. }));
        // Defaults.
        let s = configure_pinhole(&parse(&["pinhole", "--out", "p.jpg"])).unwrap();
        assert_eq!(s, PinholeSetup::default());
    }

    #[test]
    fn particle_flags_reach_the_setup() {
        let a = parse(&[
            "particles",
            "--out",
            "q.png",
            "--mean-diameter",
            "10um",
            "--spread",
            "15%",
            "--count",
            "250",
            "--distribution",
            "lognormal",
            "--transform-samples",
            "1024",
        ]);
        let s = configure_particles(&a).unwrap();
        assert_eq!(s.mean_diameter_m, 10e-6);
        assert!((s.spread - 0.15).abs() < 1e-12);
        assert_eq!(s.count, 250);
        assert_eq!(s.distribution, SizeDistribution::Lognormal);
        assert_eq!(s.samples, 1024);
        let s = configure_particles(&parse(&["particles", "--out", "q.png", "--spread", "0.2"]))
            .unwrap();
        assert!((s.spread - 0.2).abs() < 1e-12);
        assert_eq!(s.distance_m, ParticleSetup::default().distance_m);
        let bad = parse(&["particles", "--out", "q.png", "--spread", "ten"]);
        assert!(configure_particles(&bad).is_err());
    }
}
