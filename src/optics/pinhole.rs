//! A pinhole's diameter from the radial profile of its Airy pattern.
//!
//! The profile (screen mm from the ring centre) is fitted with [`AiryModel`] beyond the
//! overexposed centre, with the exact mapping s = r/√(r² + L²). Before the fit, the dark
//! rings are found in the profile without any model and assigned to the zeros of J1 by
//! their radius ratios ([`identify_dark_rings`]), which says which ring is the first one
//! visible and gives the fit its start; the report says when the first dark rings are lost
//! in the centre's glare. The dark- and bright-ring radii, located where the fit puts
//! them and refined on the data, give a cross-check of D/λ that must agree with the
//! profile's.

use super::OpticsError;
use super::airy::{
    AiryModel, Identification, RingRadius, bright_ring_x, dark_ring_x, identify_dark_rings, param,
    profile_minima,
};
use super::profile::{
    self, FringeProfile, Measurands, ProfileFit, Refit, Samples, evaluate,
    fit_profile_fixed_centre, linear_two, median_step, positive, sine_of_angle, widen,
};
use crate::fit::bessel::airy_intensity_and_derivative;
use crate::scale::ScreenMap;
use crate::uncertainty::{Estimate, Input, McEstimate, Validation};
use nalgebra::{DMatrix, DVector};
use std::f64::consts::PI;

/// The physics inputs.
#[derive(Debug, Clone)]
pub struct PinholeInputs {
    /// Laser wavelength, m.
    pub wavelength: Input,
    /// Pinhole-to-screen distance along the beam, m.
    pub distance: Input,
}

/// The radial profile and what goes with it.
#[derive(Debug, Clone, Copy)]
pub struct RadialData<'a> {
    /// Samples: x_mm are radii from the ring centre, mm.
    pub profile: &'a FringeProfile,
    /// Standard error of each sample (the spread between sectors).
    pub std_error: &'a [f64],
    /// The same profile from two complementary halves of the sectors, for the floor on
    /// the fit's uncertainty that their disagreement sets.
    pub halves: Option<[&'a FringeProfile; 2]>,
}

/// A ring located in the profile, with its order.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ring {
    /// 1 = the first dark (or bright) ring beyond the central disc.
    pub order: usize,
    /// Dark (a zero of J1) or bright.
    pub dark: bool,
    /// Where it is.
    pub radius: RingRadius,
}

/// The measured pinhole.
#[derive(Debug, Clone)]
pub struct PinholeSolution {
    /// Diameter D, m, from the profile fit.
    pub diameter: Estimate,
    /// D from the ring radii alone, m, where at least two rings were located.
    pub cross_check: Option<Estimate>,
    /// The profile fit (parameter 0, the centre, held at 0).
    pub fit: ProfileFit,
    /// Which samples the fit used.
    pub fitted: Vec<bool>,
    /// The fitted model at every sample.
    pub model_values: Vec<f64>,
    /// Rings located where the fit puts them, refined on the data.
    pub rings: Vec<Ring>,
    /// The ratio identification of the model-free dark rings.
    pub identification: Option<Identification>,
    /// Radius of the saturated centre, mm (0 if none).
    pub core_radius_mm: f64,
    /// Monte Carlo of the diameter, on request.
    pub monte_carlo: Option<(McEstimate, Validation)>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// The dark rings the ratio test may skip: the first visible one may be up to this order.
const MAX_FIRST_ORDER: usize = 6;

/// Measures the diameter.
pub fn solve(
    data: RadialData,
    map: &ScreenMap,
    inputs: &PinholeInputs,
    monte_carlo: Option<(usize, u64)>,
) -> Result<PinholeSolution, OpticsError> {
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
    let beyond = (0..n)
        .filter(|&i| profile.exact(i) && profile.x_mm[i] > core)
        .count();
    if beyond < 30 {
        return Err(OpticsError::Unsolvable(format!(
            "only {beyond} unsaturated profile samples beyond the bright centre: no rings to \
             measure (is the whole pattern overexposed?)"
        )));
    }
    let mut warnings = Vec::new();

    // Model-free dark rings, their ratio identification, and the start it gives.
    let minima = consecutive_run(
        profile_minima(profile, data.std_error, core * 1.05 + 2.0 * bin, 3)
            .into_iter()
            .map(|(r, _)| RingRadius {
                r_mm: r,
                u_mm: 0.5 * bin,
                sine: sine_of_angle(r, 0.0, l),
            })
            .collect(),
    );
    let identification = identify_dark_rings(&minima, MAX_FIRST_ORDER);
    let r_last = (0..n)
        .rev()
        .find(|&i| profile.exact(i))
        .map_or(0.0, |i| profile.x_mm[i]);
    let r_in = match minima.first() {
        Some(first) => (1.1 * core).max(core + 0.4 * (first.r_mm - core)),
        None => 1.2 * core,
    };
    let fitted: Vec<bool> = (0..n)
        .map(|i| profile.used[i] && profile.value[i].is_finite() && profile.x_mm[i] >= r_in)
        .collect();
    let samples = profile.samples(|i| fitted[i]);
    let q_start = match &identification {
        Some(id) => id.d_over_lambda,
        None => {
            warnings.push(format!(
                "{} dark ring(s) stand out of the profile: too few to tell by their ratios which \
                 ring is which; the diameter rests on the whole-profile fit alone",
                minima.len()
            ));
            scan(&samples, l, core.max(3.0 * bin), r_last)
        }
    };
    let model = AiryModel;
    let p0 = start_params(&samples, l, q_start);
    let fit =
        fit_profile_fixed_centre(&model, &samples, l, 1.0, &p0, "Airy profile").map_err(|e| {
            OpticsError::Unsolvable(format!("the Airy profile could not be fitted: {e}"))
        })?;
    let mut fit = fit;
    let mut params = fit.params.clone();
    params[param::D_OVER_LAMBDA] = params[param::D_OVER_LAMBDA].abs();
    if !(params[param::AMPLITUDE] > 0.0) {
        return Err(OpticsError::Unsolvable(
            "the fitted Airy pattern has no bright centre: the profile does not look like a \
             pinhole's"
                .into(),
        ));
    }
    let q = params[param::D_OVER_LAMBDA];
    let spacing_mm = l / q; // about one ring spacing in r near the axis
    if spacing_mm / bin < 6.0 {
        return Err(OpticsError::Unsolvable(format!(
            "rings closer than 3 px ({:.1} px); move the screen further or come closer",
            spacing_mm / bin * 0.5
        )));
    }
    let rings = locate_rings(profile, &params, l, core, r_last);
    let dark: Vec<Ring> = rings.iter().copied().filter(|r| r.dark).collect();
    if let Some(id) = &identification {
        let fitted_first = minima
            .first()
            .map(|m| order_of(q * PI * m.sine, dark_ring_x));
        if fitted_first.is_some_and(|f| f != id.first_order) {
            warnings.push(format!(
                "the radius ratios say the first visible dark ring is ring {}, but the profile \
                 fit puts it at ring {}: check the plot; the rings may be distorted by glare",
                id.first_order,
                fitted_first.unwrap_or(0)
            ));
        }
        if id.first_order > 1 {
            warnings.push(format!(
                "the first visible dark ring is ring {} (told by the radius ratios of {} rings): \
                 ring(s) 1–{} lie inside the overexposed centre",
                id.first_order,
                minima.len(),
                id.first_order - 1
            ));
        }
    }
    // Halves of the sectors: their disagreement is a floor on the fit's uncertainty.
    if let Some(halves) = data.halves {
        let half_q: Vec<f64> = halves
            .iter()
            .filter_map(|h| {
                let s = h.samples(|i| fitted.get(i).copied().unwrap_or(false));
                fit_profile_fixed_centre(&model, &s, l, 1.0, &params, "half Airy profile")
                    .ok()
                    .map(|f| f.params[param::D_OVER_LAMBDA].abs())
            })
            .collect();
        if let [a, b] = half_q[..] {
            let mut floor = vec![0.0; params.len()];
            floor[param::D_OVER_LAMBDA] = 0.5 * (a - b).abs();
            widen(&mut fit.covariance, &floor);
        }
    }

    let again = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        fit_profile_fixed_centre(&model, &samples, l_mm, factor, &params, "Airy profile")
            .map(|f| f.params)
            .map_err(|e| OpticsError::Unsolvable(e.to_string()))
    };
    let compute = |lambda: f64, _d: f64, r: &[f64]| vec![lambda * r[0].abs()];
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
            ratios: &[(param::D_OVER_LAMBDA, "D/λ (profile)")],
            compute: &compute,
        },
        monte_carlo,
    )?;
    let diameter = est
        .into_iter()
        .next()
        .ok_or_else(|| OpticsError::Unsolvable("propagation returned no estimate".into()))?;
    let cross_check = ring_cross_check(&rings, &inputs.wavelength, &inputs.distance, map)?;
    if let Some(c) = &cross_check {
        let u_fit = |e: &Estimate| {
            e.budget
                .iter()
                .filter(|b| b.input.starts_with("fit:"))
                .map(|b| b.contribution.powi(2))
                .sum::<f64>()
                .sqrt()
        };
        let (diff, u) = (
            (diameter.value - c.value).abs(),
            u_fit(&diameter).hypot(u_fit(c)),
        );
        if diff > 2.0 * u {
            warnings.push(format!(
                "the Airy profile fit and the ring radii disagree by {:.2} % ({:.1}× their \
                 combined fit uncertainty): glare, a non-uniform beam or a pinhole that is not \
                 round may distort the profile",
                100.0 * diff / diameter.value,
                diff / u.max(f64::MIN_POSITIVE)
            ));
        }
    }
    if dark.len() < 2 {
        warnings.push(format!(
            "only {} dark ring(s) could be located beyond the bright centre",
            dark.len()
        ));
    }
    // Fraunhofer needs a Fresnel number (D/2)²/(λL) well below 1 (Goodman, *Introduction
    // to Fourier Optics*, §4.3; 0.1 as the limit is common practice).
    let d = diameter.value;
    let fresnel = (0.5 * d).powi(2) / (lambda * inputs.distance.value);
    if fresnel > 0.1 {
        warnings.push(format!(
            "Fresnel number {fresnel:.2} (> 0.1): the screen is not in the far field of this \
             pinhole, and the Airy model does not hold; move the screen further away"
        ));
    }
    warnings.extend(profile::monte_carlo_warning(&monte_carlo));
    let model_values = evaluate(&model, &params, &profile.x_mm, l);
    let fit = ProfileFit { params, ..fit };
    Ok(PinholeSolution {
        diameter,
        cross_check,
        fit,
        fitted,
        model_values,
        rings,
        identification,
        core_radius_mm: core,
        monte_carlo,
        warnings,
    })
}

/// The order m whose zero `zero(m)` is nearest to x.
fn order_of(x: f64, zero: fn(usize) -> f64) -> usize {
    (1..200)
        .min_by(|&a, &b| (zero(a) - x).abs().total_cmp(&(zero(b) - x).abs()))
        .unwrap_or(1)
}

/// The first run of minima whose spacings agree: a stray minimum (noise, a grid line)
/// makes a spacing far below the run's median and ends it. Ring spacings in sin θ are
/// nearly equal (π apart in x asymptotically; 3.18 and 3.16 for the first ones).
fn consecutive_run(minima: Vec<RingRadius>) -> Vec<RingRadius> {
    if minima.len() < 3 {
        return minima;
    }
    let gaps: Vec<f64> = minima.windows(2).map(|w| w[1].sine - w[0].sine).collect();
    let mut sorted = gaps.clone();
    sorted.sort_by(f64::total_cmp);
    let med = sorted[sorted.len() / 2];
    let mut run = vec![minima[0]];
    for (k, g) in gaps.iter().enumerate() {
        if (0.7 * med..=1.4 * med).contains(g) {
            run.push(minima[k + 1]);
        } else if run.len() >= 2 {
            break;
        } else {
            run = vec![minima[k + 1]];
        }
    }
    run
}

/// D/λ by a log scan with amplitude and background solved linearly at each step: first
/// dark ring anywhere from `r_lo` to `r_hi`.
fn scan(samples: &Samples, l: f64, r_lo: f64, r_hi: f64) -> f64 {
    let (x, y) = samples.exact();
    let s_of = |r: f64| r / r.hypot(l);
    let (q_lo, q_hi) = (
        dark_ring_x(1) / (PI * s_of(r_hi)),
        dark_ring_x(1) / (PI * s_of(r_lo)),
    );
    let steps = 240;
    let mut best = (f64::INFINITY, q_lo);
    for k in 0..=steps {
        let q = q_lo * (q_hi / q_lo).powf(k as f64 / steps as f64);
        let shape: Vec<f64> = x
            .iter()
            .map(|&r| airy_intensity_and_derivative(PI * q * s_of(r)).0)
            .collect();
        let Some((a, b)) = linear_two(&shape, &y) else {
            continue;
        };
        let cost: f64 = shape
            .iter()
            .zip(&y)
            .map(|(f, v)| (a * f + b - v).powi(2))
            .sum();
        if a > 0.0 && cost < best.0 {
            best = (cost, q);
        }
    }
    best.1
}

fn start_params(samples: &Samples, l: f64, q: f64) -> Vec<f64> {
    let (x, y) = samples.exact();
    let shape: Vec<f64> = x
        .iter()
        .map(|&r| airy_intensity_and_derivative(PI * q * sine_of_angle(r, 0.0, l)).0)
        .collect();
    let (a, b) = linear_two(&shape, &y).unwrap_or((1.0, 0.0));
    vec![0.0, a.max(1e-9), b, 0.0, 0.0, q]
}

/// Dark and bright rings where the fit puts them, each refined on the data by a parabola
/// over ±¼ of the local spacing, after the fitted background is taken off and the x⁻³
/// fall of the rings' envelope undone (the Airy pattern's asymptotic form, Born & Wolf
/// §8.5.2), which makes each ring symmetric about its extremum.
fn locate_rings(profile: &FringeProfile, p: &[f64], l: f64, core: f64, r_max: f64) -> Vec<Ring> {
    let q = p[param::D_OVER_LAMBDA];
    let flat = |r: f64, v: f64| {
        let u = r / l;
        let x = PI * q * sine_of_angle(r, 0.0, l);
        (v - p[param::BACKGROUND] - (p[param::SLOPE] + p[param::CURVATURE] * u) * u) * x.powi(3)
    };
    let r_of = |x: f64| {
        let s = x / (PI * q);
        (s < 1.0).then(|| l * s / (1.0 - s * s).sqrt())
    };
    let mut out = Vec::new();
    for dark in [true, false] {
        let zero: fn(usize) -> f64 = if dark { dark_ring_x } else { bright_ring_x };
        for m in 1..400 {
            let Some(r) = r_of(zero(m)) else { break };
            if r > r_max {
                break;
            }
            let half = 0.25
                * (r_of(zero(m) + 0.5 * PI).unwrap_or(r) - r_of(zero(m) - 0.5 * PI).unwrap_or(r));
            if r - 2.0 * half <= core {
                continue;
            }
            if let Some((rv, u)) = refine_extremum(profile, r, half, dark, &flat) {
                out.push(Ring {
                    order: m,
                    dark,
                    radius: RingRadius {
                        r_mm: rv,
                        u_mm: u,
                        sine: sine_of_angle(rv, 0.0, l),
                    },
                });
            }
        }
    }
    out
}

/// The vertex of a least-squares parabola through the samples within `half` of `r`, with
/// its standard uncertainty; None where the samples are clipped, too few, the parabola
/// opens the wrong way, the vertex leaves the window or the extremum is not deeper than
/// the noise.
fn refine_extremum(
    profile: &FringeProfile,
    r: f64,
    half: f64,
    minimum: bool,
    flat: &dyn Fn(f64, f64) -> f64,
) -> Option<(f64, f64)> {
    let idx: Vec<usize> = (0..profile.x_mm.len())
        .filter(|&i| (profile.x_mm[i] - r).abs() <= half)
        .collect();
    if idx.len() < 5
        || idx
            .iter()
            .any(|&i| !profile.exact(i) || !profile.value[i].is_finite())
    {
        return None;
    }
    let sign = if minimum { 1.0 } else { -1.0 };
    let t: Vec<f64> = idx.iter().map(|&i| profile.x_mm[i] - r).collect();
    let y: Vec<f64> = idx
        .iter()
        .map(|&i| sign * flat(profile.x_mm[i], profile.value[i]))
        .collect();
    let a = DMatrix::from_fn(t.len(), 3, |i, c| t[i].powi(c as i32));
    let b = DVector::from_column_slice(&y);
    let inv = (a.transpose() * &a).try_inverse()?;
    let c = &inv * a.transpose() * &b;
    if !(c[2] > 0.0) {
        return None;
    }
    let vertex = -c[1] / (2.0 * c[2]);
    if vertex.abs() > 0.6 * half {
        return None;
    }
    let resid = &a * &c - &b;
    let s2 = resid.norm_squared() / (t.len() - 3).max(1) as f64;
    if !(c[2] * half * half > 3.0 * s2.sqrt()) {
        return None;
    }
    let cov = inv * s2;
    let (g1, g2) = (-1.0 / (2.0 * c[2]), c[1] / (2.0 * c[2] * c[2]));
    let var = g1 * g1 * cov[(1, 1)] + g2 * g2 * cov[(2, 2)] + 2.0 * g1 * g2 * cov[(1, 2)];
    // Neighbouring bins share blur and speckle: √3 on the independent-noise value, as for
    // the slit's minima (common practice for a correlation over about three samples).
    Some((r + vertex, var.max(0.0).sqrt() * 3f64.sqrt()))
}

/// D from the located rings alone: π (D/λ) s_m = x_m for every ring, by weighted least
/// squares, re-solved for every distance and scale in the budget.
fn ring_cross_check(
    rings: &[Ring],
    wavelength: &Input,
    distance: &Input,
    map: &ScreenMap,
) -> Result<Option<Estimate>, OpticsError> {
    if rings.iter().filter(|r| r.dark).count() < 2 {
        return Ok(None);
    }
    let solve_q = |l_mm: f64, factor: f64| -> (f64, f64) {
        let (mut sxx, mut sxz) = (0.0, 0.0);
        for ring in rings {
            let z = if ring.dark {
                dark_ring_x(ring.order)
            } else {
                bright_ring_x(ring.order)
            };
            let r = ring.radius.r_mm * factor;
            let s = sine_of_angle(r, 0.0, l_mm);
            // ds/dr = L²/(r² + L²)^(3/2)
            let us = ring.radius.u_mm * factor * l_mm * l_mm / (r * r + l_mm * l_mm).powf(1.5);
            let w = 1.0 / (us * us).max(1e-300);
            sxx += w * (PI * s).powi(2);
            sxz += w * PI * s * z;
        }
        (sxz / sxx, (1.0 / sxx).sqrt())
    };
    let l0 = distance.value * 1e3;
    let (q, u_q) = solve_q(l0, 1.0);
    let params = vec![0.0, q];
    let covariance = DMatrix::from_diagonal(&DVector::from_vec(vec![0.0, u_q * u_q]));
    let again = |l_mm: f64, factor: f64| -> Result<Vec<f64>, OpticsError> {
        Ok(vec![0.0, solve_q(l_mm, factor).0])
    };
    let compute = |lambda: f64, _d: f64, r: &[f64]| vec![lambda * r[0].abs()];
    let (est, _) = profile::propagate(
        &Refit {
            params: &params,
            covariance: &covariance,
            again: &again,
        },
        wavelength,
        distance,
        map,
        &Measurands {
            ratios: &[(1, "D/λ (ring radii)")],
            compute: &compute,
        },
        None,
    )?;
    Ok(est.into_iter().next())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::bessel::j1;
    use crate::scale::ScaleMethod;

    /// A radial profile of [2J1(x)/x]² with a clipped centre and a background, in bins of
    /// 0.05 mm. The textbook form (Born & Wolf §8.5.2) is what the solver fits, so this
    /// checks the solver's bookkeeping, not the physics: the simulator checks that.
    fn textbook(d_m: f64, lambda: f64, l_mm: f64, clip: f64) -> (FringeProfile, Vec<f64>) {
        let q = d_m / lambda;
        let r: Vec<f64> = (0..1200).map(|i| (i as f64 + 0.5) * 0.05).collect();
        let value: Vec<f64> = r
            .iter()
            .map(|&r| {
                let x = PI * q * r / r.hypot(l_mm);
                let i = if x < 1e-9 {
                    1.0
                } else {
                    (2.0 * j1(x) / x).powi(2)
                };
                (0.002 + i).min(clip)
            })
            .collect();
        let clipped = value.iter().map(|&v| v >= clip).collect();
        let n = r.len();
        (
            FringeProfile {
                x_mm: r,
                value,
                used: vec![true; n],
                clipped,
            },
            vec![1e-5; n],
        )
    }

    fn inputs(lambda: f64, l_m: f64) -> PinholeInputs {
        PinholeInputs {
            wavelength: Input::normal("wavelength", lambda, 0.5e-9),
            distance: Input::normal("distance", l_m, 2e-3),
        }
    }

    #[test]
    fn diameter_of_a_clean_airy_profile_with_its_first_ring_in_the_glare() {
        // D = 0.2 mm, λ = 650 nm, L = 1.5 m: first dark ring at L·tan(asin(1.2197 λ/D)) =
        // 5.95 mm (REFERENCES.md, 1.2197 λ/D); a clip at 0.01 of the peak hides it.
        let (lambda, d, l) = (650e-9, 0.2e-3, 1.5);
        let (profile, se) = textbook(d, lambda, l * 1e3, 0.01);
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1)
            .unwrap()
            .with_component("test scale", 1e-4);
        let data = RadialData {
            profile: &profile,
            std_error: &se,
            halves: None,
        };
        let sol = solve(data, &map, &inputs(lambda, l), None).unwrap();
        assert!(
            (sol.diameter.value - d).abs() < 1e-4 * d,
            "{}",
            sol.diameter.value
        );
        let id = sol.identification.clone().unwrap();
        assert_eq!(id.first_order, 2, "{id:?}");
        assert!(
            sol.warnings.iter().any(|w| w.contains("ring 2")),
            "{:?}",
            sol.warnings
        );
        let check = sol.cross_check.unwrap();
        assert!((check.value - d).abs() < 2e-3 * d, "{}", check.value);
        // λ's 0.5 nm is 0.077 % of D: the budget must carry at least that.
        assert!(sol.diameter.u >= 0.5e-9 / lambda * d * 0.99);
    }

    #[test]
    fn a_fully_saturated_profile_is_refused() {
        let (lambda, d, l) = (650e-9, 0.2e-3, 1.5);
        let (profile, se) = textbook(d, lambda, l * 1e3, 1e-9);
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1).unwrap();
        let data = RadialData {
            profile: &profile,
            std_error: &se,
            halves: None,
        };
        assert!(matches!(
            solve(data, &map, &inputs(lambda, l), None),
            Err(OpticsError::Unsolvable(_))
        ));
    }
}
