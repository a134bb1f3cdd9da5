//! The mean diameter and spread of an ensemble of particles from the radial profile of
//! their halo.
//!
//! The profile (screen mm from the halo's centre) is fitted with [`EnsembleModel`], a
//! normal or lognormal number distribution of diameters whose Airy patterns add, beyond the
//! overexposed centre and the undiffracted beam, with the exact mapping s = r/√(r² + L²).
//! Both shapes are fitted unless one is asked for, and the one with the smaller residual is
//! kept. A distribution free of any assumed shape follows by NNLS ([`free_distribution`]).
//! With a narrow distribution the halo shows dark rings; a wide one fills them in, and the
//! mean then rests on the halo's envelope alone, which the report says.

mod free;
mod model;

pub use free::{FreeDistribution, HaloSamples, SizeBin, free_distribution};
pub use model::{EnsembleModel, SizeModel, param};

use super::OpticsError;
use super::airy::{RingRadius, dark_ring_x, profile_minima};
use super::pinhole::RadialData;
use super::profile::{
    self, Measurands, ProfileFit, Refit, Samples, evaluate, fit_profile_fixed_centre, linear_two,
    median_step, positive, sine_of_angle, widen,
};
use crate::scale::ScreenMap;
use crate::uncertainty::{BudgetLine, Estimate, Input, McEstimate, Validation};
use rayon::prelude::*;
use std::f64::consts::PI;

/// The physics inputs.
#[derive(Debug, Clone)]
pub struct ParticleInputs {
    /// Laser wavelength, m.
    pub wavelength: Input,
    /// Particles-to-screen distance along the beam, m.
    pub distance: Input,
    /// The distribution's shape; None fits both and keeps the better.
    pub shape: Option<SizeModel>,
}

/// The measured ensemble.
#[derive(Debug, Clone)]
pub struct ParticleSolution {
    /// Number-mean diameter, m.
    pub mean_diameter: Estimate,
    /// Standard deviation of the diameters, m.
    pub size_spread: Estimate,
    /// The distribution shape kept.
    pub shape: SizeModel,
    /// The other shape's residual cost relative to the kept one's (> 1), where both were
    /// fitted.
    pub other_shape: Option<(SizeModel, f64)>,
    /// The profile fit (parameter 0, the centre, held at 0).
    pub fit: ProfileFit,
    /// Which samples the fit used.
    pub fitted: Vec<bool>,
    /// The fitted model at every sample.
    pub model_values: Vec<f64>,
    /// The distribution free of an assumed shape.
    pub free: Option<FreeDistribution>,
    /// Dark rings of the halo found in the profile without a model (radius, mm).
    pub minima: Vec<RingRadius>,
    /// Radius of the saturated centre, mm (0 if none).
    pub core_radius_mm: f64,
    /// Monte Carlo of the mean diameter, on request.
    pub monte_carlo: Option<(McEstimate, Validation)>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// The spread the fit starts from, relative to the mean (a zero spread is a stationary
/// point of the model in t, from which the fit could not move).
const START_SPREAD: f64 = 0.12;

/// Measures the ensemble.
pub fn solve(
    data: RadialData,
    map: &ScreenMap,
    inputs: &ParticleInputs,
    monte_carlo: Option<(usize, u64)>,
) -> Result<ParticleSolution, OpticsError> {
    let l = positive(&inputs.distance, "distance")? * 1e3;
    let lambda = positive(&inputs.wavelength, "wavelength")?;
    let profile = data.profile;
    let n = profile.x_mm.len();
    let bin = median_step(&profile.x_mm);
    let core = profile
        .x_mm
        .iter()
        .zip(&profile.clipped)
        .filter(|(_, c)| **c)
        .map(|(r, _)| *r)
        .fold(0.0, f64::max);
    let exact = |i: usize| profile.exact(i) && profile.value[i].is_finite();
    let beyond = (0..n)
        .filter(|&i| exact(i) && profile.x_mm[i] > core)
        .count();
    if beyond < 40 {
        return Err(OpticsError::Unsolvable(format!(
            "only {beyond} unsaturated profile samples beyond the bright centre: no halo to \
             measure (is the whole pattern overexposed?)"
        )));
    }
    let r_last = (0..n)
        .rev()
        .find(|&i| exact(i))
        .map_or(0.0, |i| profile.x_mm[i]);
    let mut warnings = Vec::new();

    // A start from single-size Airy patterns, first dark ring anywhere from just outside
    // the core to three times the frame's reach (a halo whose ring lies beyond the frame
    // still has an envelope to fit).
    let r_scan = (1.1 * core).max(0.02 * r_last) + 2.0 * bin;
    let scan_samples = profile.samples(|i| exact(i) && profile.x_mm[i] >= r_scan);
    let q0 = scan(&scan_samples, l, r_scan, 3.0 * r_last).ok_or_else(|| {
        OpticsError::Unsolvable(
            "no halo stands above the background: the profile does not fall off like a \
             particle ensemble's"
                .into(),
        )
    })?;
    // Leave out the undiffracted beam's spot: inside a quarter of the first dark ring's
    // radius the halo is near its peak and carries little of the size.
    let r_dark1 = radius_at(dark_ring_x(1) / (PI * q0), l);
    let r_spot = 0.25 * r_dark1;
    let r_in = (1.1 * core + bin).max(r_spot);
    // The overexposed part of the halo stays in as lower bounds (the halo is at least that
    // bright there), which keeps the background terms from trading places with the halo
    // when its rings are filled in: from 0.3 to 0.7 of the core, clear of the beam's spot
    // and of the core's edge, which blur and bloom push outwards.
    let censored_from = r_spot.max(0.3 * core);
    let fitted: Vec<bool> = (0..n)
        .map(|i| {
            let r = profile.x_mm[i];
            profile.used[i]
                && profile.value[i].is_finite()
                && (r >= r_in || (profile.clipped[i] && r >= censored_from && r <= 0.7 * core))
        })
        .collect();
    let samples = coarse(&profile.samples(|i| fitted[i]));
    if samples.len() < 40 {
        return Err(OpticsError::Unsolvable(format!(
            "only {} profile samples outside the bright centre",
            samples.len()
        )));
    }

    let shapes: Vec<SizeModel> = match inputs.shape {
        Some(s) => vec![s],
        None => vec![SizeModel::Normal, SizeModel::Lognormal],
    };
    let mut fits: Vec<(SizeModel, ProfileFit)> = shapes
        .par_iter()
        .filter_map(|&shape| {
            let model = EnsembleModel::new(shape);
            let p0 = start_params(&model, &samples, l, q0);
            fit_profile_fixed_centre(&model, &samples, l, 1.0, &p0, "ensemble halo")
                .ok()
                .filter(|f| {
                    f.params[param::AMPLITUDE] > 0.0 && f.params[param::MEAN_OVER_LAMBDA] > 0.0
                })
                .map(|f| (shape, f))
        })
        .collect();
    fits.sort_by(|a, b| a.1.cost.total_cmp(&b.1.cost));
    let other_shape = (fits.len() > 1).then(|| (fits[1].0, fits[1].1.cost / fits[0].1.cost));
    let other_params = fits.get(1).map(|f| f.1.params.clone());
    let Some((shape, mut fit)) = fits.into_iter().next() else {
        return Err(OpticsError::Unsolvable(
            "the ensemble halo could not be fitted: the profile does not look like a \
             particle halo (check the centre and the exposure on the plot)"
                .into(),
        ));
    };
    let model = EnsembleModel::new(shape);
    let mut params = fit.params.clone();
    params[param::SD_OVER_LAMBDA] = params[param::SD_OVER_LAMBDA].abs();
    let q = params[param::MEAN_OVER_LAMBDA];
    // The halo must stand out of the noise: its rise over the fitted range at least five
    // standard errors of a bin and twice the fit's residual (a flat or noisy profile fits
    // some tiny halo of any size).
    let rise = {
        let h: Vec<f64> = samples
            .x
            .iter()
            .map(|&r| {
                model
                    .halo(q, params[param::SD_OVER_LAMBDA], sine_of_angle(r, 0.0, l))
                    .0
            })
            .collect();
        let (lo, hi) = h
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &v| (a.min(v), b.max(v)));
        params[param::AMPLITUDE] * (hi - lo)
    };
    let mut se: Vec<f64> = data
        .std_error
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    se.sort_by(f64::total_cmp);
    let se_median = se.get(se.len() / 2).copied().unwrap_or(0.0);
    if !(rise > 5.0 * se_median && rise > 2.0 * fit.rms_residual) {
        return Err(OpticsError::Unsolvable(
            "no halo stands above the background's noise: the profile does not fall off like \
             a particle ensemble's (is the beam on, and the centre in the frame?)"
                .into(),
        ));
    }

    // Halves of the sectors: their disagreement is a floor on the fit's uncertainty.
    if let Some(halves) = data.halves {
        let half: Vec<Vec<f64>> = halves
            .par_iter()
            .filter_map(|h| {
                let s = coarse(&h.samples(|i| fitted.get(i).copied().unwrap_or(false)));
                fit_profile_fixed_centre(&model, &s, l, 1.0, &params, "half ensemble halo")
                    .ok()
                    .map(|f| f.params)
            })
            .collect();
        if let [a, b] = &half[..] {
            let mut floor = vec![0.0; params.len()];
            for j in [param::MEAN_OVER_LAMBDA, param::SD_OVER_LAMBDA] {
                floor[j] = 0.5 * (a[j].abs() - b[j].abs()).abs();
            }
            widen(&mut fit.covariance, &floor);
        }
    }

    let again = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        fit_profile_fixed_centre(&model, &samples, l_mm, factor, &params, "ensemble halo")
            .map(|f| f.params)
            .map_err(|e| OpticsError::Unsolvable(e.to_string()))
    };
    let compute = |lambda: f64, _d: f64, r: &[f64]| vec![lambda * r[0].abs(), lambda * r[1].abs()];
    let (est, monte_carlo) = profile::propagate(
        &Refit {
            params: &params,
            covariance: &fit.covariance,
            again: &again,
        },
        &inputs.wavelength,
        &inputs.distance,
        map,
        &Measurands {
            ratios: &[
                (param::MEAN_OVER_LAMBDA, "mean D/λ"),
                (param::SD_OVER_LAMBDA, "SD of D/λ"),
            ],
            compute: &compute,
        },
        monte_carlo,
    )?;
    let mut est = est.into_iter();
    let (Some(mut mean_diameter), Some(mut size_spread)) = (est.next(), est.next()) else {
        return Err(OpticsError::Unsolvable(
            "propagation returned no estimate".into(),
        ));
    };
    // When the shape was not given and the other shape fits about as well, the shape is
    // not known from the photo: the other fit's mean and spread bound what the kept one's
    // could be, as a rectangular distribution of that half-width (GUM 4.3.7). "About as
    // well": its residual sum of squares within three standard deviations of a χ² ratio
    // of ν = points/(lags + 1) effective degrees of freedom, 1 ± √(2/ν) each.
    if let (Some((other, ratio)), Some(op)) = (other_shape, &other_params) {
        let nu = fit.points as f64 / (fit.lags + 1) as f64;
        if ratio < 1.0 + 3.0 * (2.0 * nu.recip()).sqrt() {
            let name = format!("model: {} or {} sizes", shape.name(), other.name());
            for (e, j) in [
                (&mut mean_diameter, param::MEAN_OVER_LAMBDA),
                (&mut size_spread, param::SD_OVER_LAMBDA),
            ] {
                let c = lambda * (op[j].abs() - params[j]).abs() / 3f64.sqrt();
                e.u = e.u.hypot(c);
                e.budget.push(BudgetLine {
                    input: name.clone(),
                    sensitivity: None,
                    contribution: c,
                });
            }
        }
    }

    let minima: Vec<RingRadius> = profile_minima(profile, data.std_error, r_in, 3)
        .into_iter()
        .map(|(r, _)| RingRadius {
            r_mm: r,
            u_mm: 0.5 * bin,
            sine: sine_of_angle(r, 0.0, l),
        })
        .collect();
    let free = free_of_shape(profile, data.std_error, &fitted, &params, &model, l, lambda);
    let free = match free {
        Ok(f) => Some(f),
        Err(e) => {
            warnings.push(format!("no free size distribution: {e}"));
            None
        }
    };

    // Warnings a practitioner needs.
    if minima.is_empty() {
        warnings.push(
            "no dark ring stands out of the halo: the mean rests on the halo's envelope \
             alone, and the mean and the spread are strongly correlated (a wide distribution, \
             or the first ring beyond the frame)"
                .into(),
        );
    }
    // Fraunhofer diffraction by the particles' outlines needs D ≫ λ; under about ten
    // wavelengths scattering by the particles' bulk (Mie theory) changes the halo
    // (van de Hulst, *Light Scattering by Small Particles*, ch. 8; "about 10" is common
    // practice in laser diffraction sizing).
    if q < 10.0 {
        warnings.push(format!(
            "the mean diameter is only {q:.1} wavelengths: the Fraunhofer model of the halo \
             is poor below about 10 (the particles' bulk scatters too); treat the size as \
             indicative"
        ));
    }
    let fresnel = (0.5 * mean_diameter.value).powi(2) / (lambda * inputs.distance.value);
    if fresnel > 0.1 {
        warnings.push(format!(
            "Fresnel number {fresnel:.2} (> 0.1): the screen is not in the far field of these \
             particles; move it further away"
        ));
    }
    if size_spread.u > 0.5 * size_spread.value {
        warnings.push(format!(
            "the spread is poorly determined (u = {:.0} % of it): the halo barely tells it \
             from a single size",
            100.0 * size_spread.u / size_spread.value.max(f64::MIN_POSITIVE)
        ));
    }
    if let Some(f) = &free {
        let diff = (f.mean_m - mean_diameter.value).abs();
        if diff > 3.0 * mean_diameter.u {
            warnings.push(format!(
                "the free size distribution's mean ({:.2} µm) and the {} fit's ({:.2} µm) \
                 differ by {:.1} standard uncertainties: the distribution may not be {}",
                f.mean_m * 1e6,
                shape.name(),
                mean_diameter.value * 1e6,
                diff / mean_diameter.u.max(f64::MIN_POSITIVE),
                shape.name()
            ));
        }
    }
    warnings.extend(profile::monte_carlo_warning(&monte_carlo));
    let model_values = evaluate(&model, &params, &profile.x_mm, l);
    let fit = ProfileFit { params, ..fit };
    Ok(ParticleSolution {
        mean_diameter,
        size_spread,
        shape,
        other_shape,
        fit,
        fitted,
        model_values,
        free,
        minima,
        core_radius_mm: core,
        monte_carlo,
        warnings,
    })
}

/// Samples the halo fit works on, at most: the profile's bins are half a pixel, far finer
/// than the halo's rings (the fit refuses rings closer than six bins anyway), so groups of
/// neighbours are averaged, which leaves the fit's information nearly whole and makes each
/// evaluation of the ensemble (a quadrature per sample) affordable.
const MAX_FIT_SAMPLES: usize = 360;

/// The samples averaged in consecutive groups so that at most [`MAX_FIT_SAMPLES`] remain;
/// a group with a clipped sample is itself a lower bound.
fn coarse(s: &Samples) -> Samples {
    let per = s.len().div_ceil(MAX_FIT_SAMPLES).max(1);
    if per == 1 {
        return s.clone();
    }
    let mut out = Samples::default();
    for k in (0..s.len()).step_by(per) {
        let idx = k..(k + per).min(s.len());
        let m = idx.len() as f64;
        out.x.push(idx.clone().map(|i| s.x[i]).sum::<f64>() / m);
        out.y.push(idx.clone().map(|i| s.y[i]).sum::<f64>() / m);
        out.lower_bound.push(idx.clone().any(|i| s.lower_bound[i]));
    }
    out
}

/// The screen radius, mm, at which sin θ = s, at distance `l` mm.
fn radius_at(s: f64, l: f64) -> f64 {
    let s = s.clamp(0.0, 0.999);
    l * s / (1.0 - s * s).sqrt()
}

/// The free distribution from the unsaturated fitted samples, background removed.
fn free_of_shape(
    profile: &profile::FringeProfile,
    std_error: &[f64],
    fitted: &[bool],
    p: &[f64],
    model: &EnsembleModel,
    l: f64,
    lambda: f64,
) -> Result<FreeDistribution, OpticsError> {
    let (mut sine, mut halo, mut se, mut par) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
    for (i, &r) in profile.x_mm.iter().enumerate() {
        if !(fitted[i] && profile.exact(i)) {
            continue;
        }
        let (s, u) = (sine_of_angle(r, 0.0, l), r / l);
        let background = p[param::BACKGROUND] + (p[param::SLOPE] + p[param::CURVATURE] * u) * u;
        sine.push(s);
        halo.push(profile.value[i] - background);
        se.push(std_error.get(i).copied().unwrap_or(0.0));
        par.push(
            p[param::AMPLITUDE]
                * model
                    .halo(p[param::MEAN_OVER_LAMBDA], p[param::SD_OVER_LAMBDA], s)
                    .0,
        );
    }
    free_distribution(
        &HaloSamples {
            sine: &sine,
            halo: &halo,
            std_error: &se,
            parametric: &par,
        },
        lambda,
        model.shape,
        p[param::MEAN_OVER_LAMBDA],
        p[param::SD_OVER_LAMBDA],
    )
}

/// The mean D/λ to start from, by a log scan over ensembles of three spreads (a single
/// size would show deep rings that a real halo's spread and the camera's blur fill in,
/// and lose to a smooth envelope of the wrong size), the first dark ring anywhere from
/// `r_lo` to `r_hi`, with amplitude, background and slope solved linearly at each step
/// on some 120 samples and a coarse quadrature. None when no step gives a positive
/// amplitude.
fn scan(samples: &Samples, l: f64, r_lo: f64, r_hi: f64) -> Option<f64> {
    let (x, y) = samples.exact();
    let every = x.len().div_ceil(120).max(1);
    let (x, y): (Vec<f64>, Vec<f64>) = x
        .iter()
        .zip(&y)
        .step_by(every)
        .map(|(a, b)| (*a, *b))
        .unzip();
    let s_of = |r: f64| r / r.hypot(l);
    let (q_lo, q_hi) = (
        dark_ring_x(1) / (PI * s_of(r_hi)),
        dark_ring_x(1) / (PI * s_of(r_lo)),
    );
    let steps = 150;
    let mut best: Option<(f64, f64)> = None;
    for shape in [SizeModel::Normal] {
        let model = EnsembleModel::with_nodes(shape, SCAN_NODES);
        for spread in [0.05, 0.15, 0.3] {
            for k in 0..=steps {
                let q = q_lo * (q_hi / q_lo).powf(k as f64 / steps as f64);
                let halo: Vec<f64> = x
                    .iter()
                    .map(|&r| model.halo(q, spread * q, s_of(r)).0)
                    .collect();
                let slope: Vec<f64> = x.iter().map(|&r| r / l).collect();
                let Some((c, cost)) = linear_fit(&[&halo, &slope], &y) else {
                    continue;
                };
                if c[0] > 0.0 && best.is_none_or(|(b, _)| cost < b) {
                    best = Some((cost, q));
                }
            }
        }
    }
    best.map(|b| b.1)
}

/// Quadrature nodes of the start scan.
const SCAN_NODES: usize = 12;

/// Least squares of y on the given columns and a constant: the coefficients (columns
/// first, the constant last) and the residual sum of squares; None if singular.
fn linear_fit(columns: &[&[f64]], y: &[f64]) -> Option<(Vec<f64>, f64)> {
    let (n, k) = (y.len(), columns.len() + 1);
    let a = nalgebra::DMatrix::from_fn(n, k, |i, j| if j < k - 1 { columns[j][i] } else { 1.0 });
    let b = nalgebra::DVector::from_column_slice(y);
    let c = (a.transpose() * &a).lu().solve(&(a.transpose() * &b))?;
    let cost = (&a * &c - &b).norm_squared();
    Some((c.iter().copied().collect(), cost))
}

/// Amplitude and background solved linearly for the ensemble at mean q and the start
/// spread.
fn start_params(model: &EnsembleModel, samples: &Samples, l: f64, q: f64) -> Vec<f64> {
    let (x, y) = samples.exact();
    let t = START_SPREAD * q;
    let shape: Vec<f64> = x
        .iter()
        .map(|&r| model.halo(q, t, sine_of_angle(r, 0.0, l)).0)
        .collect();
    let (a, b) = linear_two(&shape, &y).unwrap_or((1.0, 0.0));
    vec![0.0, a.max(1e-9), b, 0.0, 0.0, q, t]
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::bessel::j1;
    use crate::optics::profile::FringeProfile;
    use crate::scale::ScaleMethod;

    /// A radial profile of a normal ensemble made from J1 directly, sampled finely in D,
    /// with a background and a clipped centre, in bins of 0.1 mm.
    fn ensemble(d_m: f64, sd_m: f64, lambda: f64, l_mm: f64, clip: f64) -> FringeProfile {
        let (q, t) = (d_m / lambda, sd_m / lambda);
        let r: Vec<f64> = (0..1500).map(|i| (i as f64 + 0.5) * 0.1).collect();
        let value: Vec<f64> = r
            .iter()
            .map(|&r| {
                let s = r / r.hypot(l_mm);
                let (mut num, mut den) = (0.0, 0.0);
                for k in 0..2000 {
                    let z = -5.0 + 10.0 * (k as f64 + 0.5) / 2000.0;
                    let e = q + t * z;
                    let w = (-0.5 * z * z).exp();
                    let x = PI * e * s;
                    let g = if x < 1e-9 {
                        1.0
                    } else {
                        (2.0 * j1(x) / x).powi(2)
                    };
                    num += w * e.powi(4) * g;
                    den += w * e.powi(4);
                }
                (0.01 + 0.002 * r / l_mm + num / den).min(clip)
            })
            .collect();
        let n = r.len();
        FringeProfile {
            clipped: value.iter().map(|&v| v >= clip).collect(),
            x_mm: r,
            value,
            used: vec![true; n],
        }
    }

    fn inputs(shape: Option<SizeModel>) -> ParticleInputs {
        ParticleInputs {
            wavelength: Input::normal("wavelength", 650e-9, 0.5e-9),
            distance: Input::normal("distance", 0.5, 1e-3),
            shape,
        }
    }

    #[test]
    fn mean_and_spread_of_a_clean_normal_halo() {
        // 8 µm ± 10 % (about a red blood cell: common practice) at 0.5 m in red light:
        // first dark ring at L·tan(asin(1.2197 λ/D)) = 49.8 mm (REFERENCES.md, 1.2197 λ/D).
        let (d, sd) = (8e-6, 0.8e-6);
        let profile = ensemble(d, sd, 650e-9, 500.0, 0.3);
        let se = vec![1e-5; profile.x_mm.len()];
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1)
            .unwrap()
            .with_component("test scale", 1e-4);
        let data = RadialData {
            profile: &profile,
            std_error: &se,
            halves: None,
        };
        let sol = solve(data, &map, &inputs(Some(SizeModel::Normal)), None).unwrap();
        let mean = sol.mean_diameter.value;
        assert!((mean - d).abs() < 2e-3 * d, "mean {mean}");
        let spread = sol.size_spread.value;
        assert!((spread - sd).abs() < 0.05 * sd, "spread {spread}");
        let free = sol.free.clone().unwrap();
        assert!(
            (free.mean_m - d).abs() < 0.03 * d,
            "free mean {}",
            free.mean_m
        );
        assert!(!sol.minima.is_empty());
        // λ's 0.5 nm is 0.077 % of the mean: the budget must carry at least that.
        assert!(sol.mean_diameter.u >= 0.5e-9 / 650e-9 * d * 0.99);
    }

    #[test]
    fn both_shapes_are_tried_and_the_better_kept() {
        let (d, sd) = (8e-6, 1.6e-6);
        let profile = ensemble(d, sd, 650e-9, 500.0, 10.0);
        let se = vec![1e-5; profile.x_mm.len()];
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1).unwrap();
        let data = RadialData {
            profile: &profile,
            std_error: &se,
            halves: None,
        };
        let sol = solve(data, &map, &inputs(None), None).unwrap();
        assert_eq!(sol.shape, SizeModel::Normal);
        let (other, ratio) = sol.other_shape.unwrap();
        assert_eq!(other, SizeModel::Lognormal);
        assert!(ratio > 1.0);
    }

    #[test]
    fn a_flat_profile_is_refused() {
        let n = 800;
        let profile = FringeProfile {
            x_mm: (0..n).map(|i| i as f64 * 0.1).collect(),
            value: vec![0.2; n],
            used: vec![true; n],
            clipped: vec![false; n],
        };
        let se = vec![1e-3; n];
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1).unwrap();
        let data = RadialData {
            profile: &profile,
            std_error: &se,
            halves: None,
        };
        assert!(solve(data, &map, &inputs(None), None).is_err());
    }
}
