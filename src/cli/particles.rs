//! `fringegauge particles`: the mean diameter, spread and size distribution of particles
//! (spores, cells, powder on a slide) from the halo they make around the beam.

use super::args::{LASER_CAUTION, OutputArgs, PhotoArgs, ScaleArgs};
use super::fringes::{FringeInputArgs, fit_entry, mc_note, monte_carlo, start};
use super::output::{self, Clock};
use super::rings::{RingPlot, base_record, finish_rings, measure_rings, ring_feature};
use crate::optics::particles::{self, EnsembleModel, ParticleInputs, SizeModel};
use crate::optics::pinhole::RadialData;
use crate::quantity;
use crate::record::plot::ProfilePlot;
use crate::record::{Distribution, DistributionBin, ResultEntry};
use crate::uncertainty;
use crate::{Error, ExitCode};
use clap::{Args, ValueEnum};

/// Which size-distribution shape to fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ShapeArg {
    /// Fit both and keep the one with the smaller residual
    Auto,
    /// Normal in diameter
    Normal,
    /// Lognormal in diameter (common for powders and aerosols)
    Lognormal,
}

/// Arguments of `fringegauge particles`.
#[derive(Debug, Clone, Args)]
#[command(after_long_help = LASER_CAUTION)]
pub struct ParticlesArgs {
    /// The photo and how to read it.
    #[command(flatten)]
    pub photo: PhotoArgs,
    /// Wavelength, distance (particles to screen), plot (the profile and, under it, the
    /// size distribution).
    #[command(flatten)]
    pub physics: FringeInputArgs,
    /// Shape of the number distribution of diameters fitted to the halo
    #[arg(long, value_enum, default_value = "auto")]
    pub distribution: ShapeArg,
    /// The scale.
    #[command(flatten)]
    pub scale: ScaleArgs,
    /// What to write.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Runs `fringegauge particles`.
pub fn run(args: &ParticlesArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    let (mut book, wavelength, distance) = start(&args.physics, &args.output, &args.photo)?;
    let m = measure_rings(
        &args.photo,
        &args.scale,
        &mut book,
        Some(wavelength.value),
        &mut clock,
    )?;
    let inputs = ParticleInputs {
        wavelength,
        distance,
        shape: match args.distribution {
            ShapeArg::Auto => None,
            ShapeArg::Normal => Some(SizeModel::Normal),
            ShapeArg::Lognormal => Some(SizeModel::Lognormal),
        },
    };
    let data = RadialData {
        profile: &m.profile,
        std_error: &m.radial.std_error,
        halves: Some([&m.halves[0], &m.halves[1]]),
    };
    let sol = particles::solve(data, &m.map, &inputs, monte_carlo(&args.output))?;
    clock.lap("fit");

    let mut record = base_record("particles", &m, &book);
    record.fit = Some(fit_entry(
        &format!(
            "ensemble of Airy patterns: I = B + B′·u + B″·u² + A·∫ n(D)·D⁴·[2·J1(x)/x]² dD / \
             ∫ n(D)·D⁴ dD, x = π D s/λ, n {}, u = r/L, s = r/√(r² + L²)",
            sol.shape.name()
        ),
        &EnsembleModel::new(sol.shape),
        &sol.fit,
    ));
    let k = uncertainty::K_95;
    record.results.push(
        ResultEntry::new(
            "mean_diameter",
            sol.mean_diameter.value,
            sol.mean_diameter.u,
            "m",
            k,
        )
        .with_budget(budget(&sol.mean_diameter)),
    );
    record.results.push(
        ResultEntry::new(
            "size_spread",
            sol.size_spread.value,
            sol.size_spread.u,
            "m",
            k,
        )
        .with_label("standard deviation of the diameters")
        .with_budget(budget(&sol.size_spread)),
    );
    for (i, ring) in sol.minima.iter().enumerate() {
        record.features.push(ring_feature(
            &m,
            &format!("halo minimum {}", i + 1),
            ring.r_mm,
            ring.u_mm,
        ));
    }
    record.assumptions.push(format!(
        "particles opaque or clear discs scattered at random (their intensities add), number \
         distribution of diameters {}; relative spread {:.1} %",
        sol.shape.name(),
        100.0 * sol.size_spread.value / sol.mean_diameter.value
    ));
    if let Some((other, ratio)) = sol.other_shape {
        record.assumptions.push(format!(
            "{} kept over {}: its residual sum of squares is {:.3}× smaller",
            sol.shape.name(),
            other.name(),
            ratio
        ));
    }
    record.assumptions.push(format!(
        "saturated centre out to {:.3} mm and the undiffracted beam left out of the fit; \
         residual correlation allowed over {} bins",
        sol.core_radius_mm, sol.fit.lags
    ));
    if let Some(f) = &sol.free {
        record.assumptions.push(format!(
            "free size distribution: {} bins by NNLS (Lawson & Hanson) over {} profile rows, \
             second-difference smoothing λ = {:.3e} by the {}; row noise raised {:.2}× to the \
             parametric fit's misfit (χ² {:.1})",
            f.bins.len(),
            f.rows,
            f.lambda,
            f.method,
            f.noise_factor,
            f.chi2
        ));
        record.distribution = Some(Distribution {
            method: format!("non-negative least squares, {}", f.method),
            shape: sol.shape.name().into(),
            mean_m: f.mean_m,
            sd_m: f.sd_m,
            bins: f
                .bins
                .iter()
                .map(|b| DistributionBin {
                    diameter_m: b.diameter_m,
                    lower_m: b.lower_m,
                    upper_m: b.upper_m,
                    number_fraction: b.number_fraction,
                    volume_fraction: b.volume_fraction,
                    parametric_fraction: b.parametric_fraction,
                })
                .collect(),
        });
    }
    record.warnings.extend(sol.warnings.iter().cloned());
    mc_note(&mut record, &sol.monte_carlo);

    let caption = format!(
        "mean D {} (k = 2)",
        quantity::format_si(sol.mean_diameter.value, 2.0 * sol.mean_diameter.u, "m")
    );
    let markers: Vec<(f64, String)> = sol
        .minima
        .iter()
        .enumerate()
        .map(|(i, r)| (r.r_mm, format!("{}", i + 1)))
        .collect();
    let sizes = sol.free.as_ref().map(|f| SizePlotData {
        x: f.bins.iter().map(|b| b.diameter_m * 1e6).collect(),
        free: f.bins.iter().map(|b| 100.0 * b.number_fraction).collect(),
        fitted: f
            .bins
            .iter()
            .map(|b| 100.0 * b.parametric_fraction)
            .collect(),
        used: vec![true; f.bins.len()],
    });
    let below = sizes.as_ref().map(|s| ProfilePlot {
        title: format!(
            "size distribution by number: free (NNLS, dots) and fitted {} (line)",
            sol.shape.name()
        ),
        x_label: "diameter (µm)".into(),
        y_label: "share of the particles per bin (%)".into(),
        x: &s.x,
        measured: &s.free,
        used: &s.used,
        model: &s.fitted,
        markers: vec![(sol.mean_diameter.value * 1e6, "mean".into())],
    });
    finish_rings(
        &mut record,
        &m,
        RingPlot {
            model: &sol.model_values,
            fitted: &sol.fitted,
            markers,
            title: "particles: radial profile of the halo (log scale)".into(),
            caption,
            below,
        },
        &args.physics,
        &args.output,
        &mut clock,
    )
}

/// The budget without the lines of the other measurand's fitted ratio, which carry
/// nothing (the mean does not depend on the fitted spread's deviation, nor the spread on
/// the mean's).
fn budget(e: &uncertainty::Estimate) -> Vec<crate::record::BudgetLine> {
    output::budget_lines(e)
        .into_iter()
        .filter(|b| !(b.contribution == 0.0 && b.sensitivity == Some(0.0)))
        .collect()
}

/// The size plot's series, owned here so that the plot can borrow them.
struct SizePlotData {
    x: Vec<f64>,
    free: Vec<f64>,
    fitted: Vec<f64>,
    used: Vec<bool>,
}
