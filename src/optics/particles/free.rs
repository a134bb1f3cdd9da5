//! A size distribution free of any assumed shape: the halo (the profile less the fitted
//! background) as a non-negative combination of single-size Airy patterns, one per
//! diameter bin, by Lawson–Hanson NNLS with second-difference smoothing whose strength is
//! chosen by the discrepancy principle ([`choose_lambda`]).
//!
//! The discrepancy principle needs the noise of each row. The rows are groups of profile
//! bins whose spread between sectors is measured, but neighbouring bins share blur and
//! speckle grains, so that spread understates the noise of a group; and any model misfit
//! (an imperfect background, glare) acts as noise too. The spread is therefore raised,
//! where needed, to the level at which the parametric fit meets χ² = m: the free
//! distribution is then the smoothest one that fits at least as well as the parametric one,
//! which is the question worth asking of it (is the distribution's shape other than
//! assumed?).

use super::super::OpticsError;
use super::model::SizeModel;
use crate::fit::bessel::airy_intensity_and_derivative;
use crate::fit::nnls::choose_lambda;
use nalgebra::{DMatrix, DVector};
use std::f64::consts::PI;

/// One diameter bin of the free distribution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SizeBin {
    /// The bin's nominal (geometric-centre) diameter, m.
    pub diameter_m: f64,
    /// Its edges, m.
    pub lower_m: f64,
    /// Upper edge, m.
    pub upper_m: f64,
    /// Share of the particles by number.
    pub number_fraction: f64,
    /// Share by volume (number × D³).
    pub volume_fraction: f64,
    /// The fitted parametric distribution's share by number in the same bin.
    pub parametric_fraction: f64,
}

/// The free distribution and how its smoothing was chosen.
#[derive(Debug, Clone, PartialEq)]
pub struct FreeDistribution {
    /// Bins in increasing diameter.
    pub bins: Vec<SizeBin>,
    /// Number-mean diameter of the bins, m.
    pub mean_m: f64,
    /// Their standard deviation, m.
    pub sd_m: f64,
    /// The smoothing strength chosen.
    pub lambda: f64,
    /// The rule that chose it.
    pub method: &'static str,
    /// χ² of the chosen solution against the rows' noise.
    pub chi2: f64,
    /// Rows fitted.
    pub rows: usize,
    /// Factor by which the measured spread of the rows was raised (≥ 1).
    pub noise_factor: f64,
}

/// The halo samples the free distribution is fitted to: sin θ, the halo (profile less
/// background) and its standard error; and the parametric fit's halo at the same samples.
pub struct HaloSamples<'a> {
    /// sin θ of each sample.
    pub sine: &'a [f64],
    /// The measured halo (background removed).
    pub halo: &'a [f64],
    /// Standard error of each sample.
    pub std_error: &'a [f64],
    /// The parametric fit's halo at each sample.
    pub parametric: &'a [f64],
}

/// Bins across the distribution.
const BINS: usize = 36;
/// Rows the profile is grouped into, at most: enough to resolve the halo's rings (a few
/// rows per ring), few enough for the repeated NNLS solves of the λ search.
const MAX_ROWS: usize = 240;

/// Solves the free distribution around the parametric fit's mean `q` and SD `t` (over λ).
pub fn free_distribution(
    data: &HaloSamples,
    lambda_m: f64,
    shape: SizeModel,
    q: f64,
    t: f64,
) -> Result<FreeDistribution, OpticsError> {
    let n = data.sine.len();
    if n < 2 * BINS {
        return Err(OpticsError::Unsolvable(format!(
            "only {n} profile samples for a free size distribution of {BINS} bins"
        )));
    }
    // Group consecutive samples into rows: means of the values, the standard error of a
    // mean of the group's standard errors (as if independent; see the module note).
    let per = n.div_ceil(MAX_ROWS);
    let rows = n.div_ceil(per);
    let mut s = Vec::with_capacity(rows);
    let mut y = Vec::with_capacity(rows);
    let mut sig = Vec::with_capacity(rows);
    let mut par = Vec::with_capacity(rows);
    for k in 0..rows {
        let idx = k * per..((k + 1) * per).min(n);
        let m = idx.len() as f64;
        s.push(idx.clone().map(|i| data.sine[i]).sum::<f64>() / m);
        y.push(idx.clone().map(|i| data.halo[i]).sum::<f64>() / m);
        par.push(idx.clone().map(|i| data.parametric[i]).sum::<f64>() / m);
        let v: f64 = idx.map(|i| data.std_error[i].powi(2)).sum::<f64>() / (m * m);
        sig.push(v.sqrt());
    }
    let floor = sig
        .iter()
        .copied()
        .filter(|v| *v > 0.0)
        .fold(f64::INFINITY, f64::min);
    let floor = if floor.is_finite() { floor } else { 1e-12 };
    for v in &mut sig {
        *v = v.max(floor);
    }
    let chi2_param: f64 = (0..rows).map(|k| ((y[k] - par[k]) / sig[k]).powi(2)).sum();
    let noise_factor = (chi2_param / rows as f64).sqrt().max(1.0);
    let sigma = DVector::from_iterator(rows, sig.iter().map(|v| v * noise_factor));

    // Diameter bins, geometric, over ±4 SD of the fit and never narrower than 0.6–1.5 of
    // the mean.
    let t = t.abs();
    let lo = (q - 4.0 * t).max(0.3 * q).min(0.6 * q);
    let hi = (q + 4.0 * t).max(1.5 * q);
    let ratio = (hi / lo).powf(1.0 / BINS as f64);
    let edges: Vec<f64> = (0..=BINS).map(|k| lo * ratio.powi(k as i32)).collect();
    let centres: Vec<f64> = edges.windows(2).map(|w| (w[0] * w[1]).sqrt()).collect();
    // Column k: the halo of particles of the bin's centre size, scaled so the columns are
    // of similar size (x_k is then a number up to that scale).
    let a = DMatrix::from_fn(rows, BINS, |i, k| {
        let e = centres[k];
        (e / q).powi(4) * airy_intensity_and_derivative(PI * e * s[i]).0
    });
    let b = DVector::from_column_slice(&y);
    let reg = choose_lambda(&a, &b, &sigma).map_err(|e| {
        OpticsError::Unsolvable(format!(
            "the free size distribution could not be solved: {e}"
        ))
    })?;
    let x = &reg.solution.x;
    let total: f64 = x.iter().sum();
    if !(total > 0.0) {
        return Err(OpticsError::Unsolvable(
            "the free size distribution came out empty: the halo is not above its background"
                .into(),
        ));
    }
    let volume: f64 = x.iter().zip(&centres).map(|(n, e)| n * e.powi(3)).sum();
    let mean = x.iter().zip(&centres).map(|(n, e)| n * e).sum::<f64>() / total;
    let var = x
        .iter()
        .zip(&centres)
        .map(|(n, e)| n * (e - mean).powi(2))
        .sum::<f64>()
        / total;
    let bins = (0..BINS)
        .map(|k| SizeBin {
            diameter_m: centres[k] * lambda_m,
            lower_m: edges[k] * lambda_m,
            upper_m: edges[k + 1] * lambda_m,
            number_fraction: x[k] / total,
            volume_fraction: x[k] * centres[k].powi(3) / volume,
            parametric_fraction: shape.mass_between(q, t, edges[k], edges[k + 1]),
        })
        .collect();
    Ok(FreeDistribution {
        bins,
        mean_m: mean * lambda_m,
        sd_m: var.sqrt() * lambda_m,
        lambda: reg.lambda,
        method: reg.method,
        chi2: reg.chi2,
        rows,
        noise_factor,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::bessel::j1;

    /// A halo made directly from J1 for a normal distribution, sampled finely in D (the
    /// definition of the ensemble, independent of both the quadrature and the bins).
    fn halo(q: f64, t: f64, s: &[f64]) -> Vec<f64> {
        s.iter()
            .map(|&s| {
                let (mut num, mut den) = (0.0, 0.0);
                for k in 0..4000 {
                    let z = -5.0 + 10.0 * (k as f64 + 0.5) / 4000.0;
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
                num / den
            })
            .collect()
    }

    #[test]
    fn recovers_a_normal_distribution_from_its_halo() {
        // 12 % spread around D/λ = 15; the halo out to the fifth dark ring.
        let (q, t) = (15.0, 1.8);
        let s: Vec<f64> = (0..600).map(|i| 0.004 + i as f64 * 0.0006).collect();
        let h = halo(q, t, &s);
        let se = vec![2e-5; s.len()];
        let data = HaloSamples {
            sine: &s,
            halo: &h,
            std_error: &se,
            parametric: &h,
        };
        let lambda = 650e-9;
        let f = free_distribution(&data, lambda, SizeModel::Normal, q, t).unwrap();
        assert!(
            (f.mean_m / lambda - q).abs() < 0.02 * q,
            "mean {}",
            f.mean_m / lambda
        );
        assert!(
            (f.sd_m / lambda - t).abs() < 0.2 * t,
            "sd {}",
            f.sd_m / lambda
        );
        let sum: f64 = f.bins.iter().map(|b| b.number_fraction).sum();
        assert!((sum - 1.0).abs() < 1e-12);
        let param: f64 = f.bins.iter().map(|b| b.parametric_fraction).sum();
        assert!(param > 0.99, "{param}");
    }

    #[test]
    fn too_few_samples_are_refused() {
        let s = vec![0.01; 10];
        let data = HaloSamples {
            sine: &s,
            halo: &s,
            std_error: &s,
            parametric: &s,
        };
        assert!(free_distribution(&data, 650e-9, SizeModel::Normal, 10.0, 1.0).is_err());
    }
}
