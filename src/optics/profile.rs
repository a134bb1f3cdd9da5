//! Whole intensity profiles of fringes, fitted with the exact mapping from screen position
//! to angle. A sample x mm along the pattern, with the pattern's centre at x0 on a screen
//! L from the aperture and perpendicular to the beam, is seen at tan θ = (x − x0)/L, so
//! sin θ = (x − x0)/√((x − x0)² + L²): no small-angle form anywhere.
//!
//! The fit is Levenberg–Marquardt ([`crate::fit::lm`]); its covariance is the Newey–West
//! sandwich ([`crate::fit::hac`]), because speckle and blur correlate the profile's noise
//! over several samples. The budget re-fits the profile for every change of the distance
//! and the scale (the only inputs the angles depend on), so their sensitivities are the
//! model's own, not a linearisation of it.

use super::OpticsError;
use crate::fit::FitError;
use crate::fit::hac::{correlation_lags, sandwich_covariance};
use crate::fit::lm::{LeastSquares, LmOptions, minimize};
use crate::scale::ScreenMap;
use crate::uncertainty::{self, Correlation, Estimate, Input, McEstimate, Validation};
use nalgebra::DMatrix;

/// A fringe profile along the pattern, in screen millimetres.
#[derive(Debug, Clone, Default)]
pub struct FringeProfile {
    /// Screen position of each sample along the pattern, mm (any origin, increasing).
    pub x_mm: Vec<f64>,
    /// Linear intensity of each sample (any unit).
    pub value: Vec<f64>,
    /// Whether a sample may be fitted at all (false where it is not a measurement).
    pub used: Vec<bool>,
    /// Whether a sample read a clipped pixel, so that its value is only a lower bound.
    pub clipped: Vec<bool>,
}

impl FringeProfile {
    /// The samples to fit, those for which `keep(i)` holds among the used ones.
    pub fn samples(&self, keep: impl Fn(usize) -> bool) -> Samples {
        let mut s = Samples::default();
        for i in (0..self.x_mm.len()).filter(|&i| self.used[i] && keep(i)) {
            s.x.push(self.x_mm[i]);
            s.y.push(self.value[i]);
            s.lower_bound.push(self.clipped[i]);
        }
        s
    }

    /// Whether sample `i` is a full measurement (used and not clipped).
    pub fn exact(&self, i: usize) -> bool {
        self.used[i] && !self.clipped[i]
    }
}

/// Samples for a fit. A clipped sample is censored: it only says the intensity there is at
/// least its value, so it costs nothing while the model stays above it and pulls the model
/// up when it falls below. Leaving clipped samples out instead would bias the fit: the
/// samples that escape clipping near a bright fringe are the ones speckle made darker.
#[derive(Debug, Clone, Default)]
pub struct Samples {
    /// Screen positions, mm.
    pub x: Vec<f64>,
    /// Values.
    pub y: Vec<f64>,
    /// Whether each value is a lower bound only.
    pub lower_bound: Vec<bool>,
}

impl Samples {
    /// The uncensored samples only, as (x, y).
    pub fn exact(&self) -> (Vec<f64>, Vec<f64>) {
        (0..self.x.len())
            .filter(|&i| !self.lower_bound[i])
            .map(|i| (self.x[i], self.y[i]))
            .unzip()
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.x.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.x.is_empty()
    }
}

/// sin θ of a screen position `x_mm` for the pattern centre `x0_mm` at `distance_mm`.
pub fn sine_of_angle(x_mm: f64, x0_mm: f64, distance_mm: f64) -> f64 {
    let y = x_mm - x0_mm;
    y / y.hypot(distance_mm)
}

/// An intensity model over sin θ. Parameter 0 is always the pattern centre x0 in mm.
pub trait IntensityModel: Sync {
    /// Names of the parameters, in order, for the record.
    fn names(&self) -> &'static [&'static str];
    /// Intensity at sin θ = `s`; `u` = (x − x0)/L carries a background slope.
    fn intensity(&self, p: &[f64], s: f64, u: f64) -> f64;
    /// A typical size of each parameter, for finite-difference steps where a parameter
    /// is near zero.
    fn typical(&self, p: &[f64]) -> Vec<f64>;

    /// The partial derivatives of the intensity with respect to parameters 1.. (written
    /// into `grad[1..]`), returning those with respect to s and u; None (the default)
    /// falls back on finite differences.
    fn gradient(&self, _p: &[f64], _s: f64, _u: f64, _grad: &mut [f64]) -> Option<(f64, f64)> {
        None
    }
}

struct Problem<'a, M: IntensityModel> {
    model: &'a M,
    samples: &'a Samples,
    distance_mm: f64,
    scale: f64,
}

impl<M: IntensityModel> LeastSquares for Problem<'_, M> {
    fn residual_count(&self) -> usize {
        self.samples.len()
    }

    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        let l = self.distance_mm;
        let s = self.samples;
        for (i, ri) in r.iter_mut().enumerate() {
            let dx = s.x[i] * self.scale - p[0];
            let d = self.model.intensity(p, dx / dx.hypot(l), dx / l) - s.y[i];
            *ri = if s.lower_bound[i] { d.min(0.0) } else { d };
        }
        true
    }

    fn jacobian(&self, p: &[f64], r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        if self.analytic_jacobian(p, r, jac) {
            return true;
        }
        let typical = self.model.typical(p);
        let mut pp = p.to_vec();
        let mut rr = vec![0.0; r.len()];
        for j in 0..p.len() {
            let h = f64::EPSILON.sqrt() * (p[j].abs() + typical[j]);
            pp[j] = p[j] + h;
            self.residuals(&pp, &mut rr);
            for i in 0..r.len() {
                jac[(i, j)] = (rr[i] - r[i]) / h;
            }
            pp[j] = p[j];
        }
        true
    }
}

impl<M: IntensityModel> Problem<'_, M> {
    /// The model's own derivatives, x0 by the chain rule through s = dx/√(dx² + L²) and
    /// u = dx/L (dx = x − x0): ∂s/∂x0 = −L²/(dx² + L²)^(3/2), ∂u/∂x0 = −1/L. A censored
    /// sample above its bound has a zero row, as its residual.
    fn analytic_jacobian(&self, p: &[f64], r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        let l = self.distance_mm;
        let smp = self.samples;
        let mut grad = vec![0.0; p.len()];
        for i in 0..smp.len() {
            let dx = smp.x[i] * self.scale - p[0];
            let h2 = dx * dx + l * l;
            let s = dx / h2.sqrt();
            let u = dx / l;
            let Some((di_ds, di_du)) = self.model.gradient(p, s, u, &mut grad) else {
                return false;
            };
            grad[0] = di_ds * (-l * l / (h2 * h2.sqrt())) - di_du / l;
            let censored = smp.lower_bound[i] && r[i] == 0.0;
            for (j, g) in grad.iter().enumerate() {
                jac[(i, j)] = if censored { 0.0 } else { *g };
            }
        }
        true
    }
}

/// The same problem with the centre x0 held fixed (parameters 1.. free).
struct FixedCentre<'a, M: IntensityModel> {
    inner: Problem<'a, M>,
    x0: f64,
}

impl<M: IntensityModel> FixedCentre<'_, M> {
    fn full(&self, q: &[f64]) -> Vec<f64> {
        std::iter::once(self.x0).chain(q.iter().copied()).collect()
    }
}

impl<M: IntensityModel> LeastSquares for FixedCentre<'_, M> {
    fn residual_count(&self) -> usize {
        self.inner.residual_count()
    }

    fn residuals(&self, q: &[f64], r: &mut [f64]) -> bool {
        self.inner.residuals(&self.full(q), r)
    }

    fn jacobian(&self, q: &[f64], r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        let full = self.full(q);
        let mut whole = DMatrix::zeros(r.len(), full.len());
        self.inner.jacobian(&full, r, &mut whole);
        jac.copy_from(&whole.columns(1, q.len()));
        true
    }
}

/// Half the difference between the parameters fitted to the two sides of the pattern
/// separately (the centre held at `params[0]`), per parameter (0 for the centre). The two
/// sides see independent speckle and stray light, so their disagreement measures the
/// slowly varying disturbances the residual correlation cannot show (a split-sample check,
/// as in the jackknife). None when a side cannot be fitted.
pub fn side_spread<M: IntensityModel>(
    model: &M,
    samples: &Samples,
    distance_mm: f64,
    params: &[f64],
) -> Option<Vec<f64>> {
    let side = |left: bool| -> Option<Vec<f64>> {
        let mut half = Samples::default();
        for i in 0..samples.len() {
            if (samples.x[i] < params[0]) == left {
                half.x.push(samples.x[i]);
                half.y.push(samples.y[i]);
                half.lower_bound.push(samples.lower_bound[i]);
            }
        }
        let problem = FixedCentre {
            inner: Problem {
                model,
                samples: &half,
                distance_mm,
                scale: 1.0,
            },
            x0: params[0],
        };
        minimize(&problem, &params[1..], &options(), "half profile")
            .ok()
            .map(|r| r.params)
    };
    let (l, r) = (side(true)?, side(false)?);
    Some(
        std::iter::once(0.0)
            .chain(l.iter().zip(&r).map(|(a, b)| 0.5 * (a - b).abs()))
            .collect(),
    )
}

/// Enlarges the standard uncertainty of each parameter to at least `floor[i]`, keeping the
/// correlations.
pub fn widen(covariance: &mut DMatrix<f64>, floor: &[f64]) {
    let n = covariance.nrows();
    let f: Vec<f64> = (0..n)
        .map(|i| {
            let u = covariance[(i, i)].max(0.0).sqrt();
            if u > 0.0 {
                (floor[i] / u).max(1.0)
            } else {
                1.0
            }
        })
        .collect();
    for i in 0..n {
        for j in 0..n {
            covariance[(i, j)] *= f[i] * f[j];
        }
    }
}

/// A fitted profile.
#[derive(Debug, Clone)]
pub struct ProfileFit {
    /// Fitted parameters (x0 in mm first).
    pub params: Vec<f64>,
    /// Their covariance (Newey–West).
    pub covariance: DMatrix<f64>,
    /// RMS residual, intensity units.
    pub rms_residual: f64,
    /// Samples fitted.
    pub points: usize,
    /// Lags of residual correlation the covariance allowed for.
    pub lags: usize,
    /// Sum of squared residuals.
    pub cost: f64,
}

impl ProfileFit {
    /// Standard uncertainty of parameter `i`.
    pub fn u(&self, i: usize) -> f64 {
        self.covariance[(i, i)].max(0.0).sqrt()
    }
}

/// Options for profile fits: looser than the StRD defaults, which chase the last digits.
fn options() -> LmOptions {
    LmOptions {
        ftol: 1e-12,
        xtol: 1e-12,
        gtol: 1e-12,
        max_iterations: 300,
    }
}

/// Fits `model` to the samples from `start`, at `distance_mm`, with the positions
/// multiplied by `scale` (1 for the nominal map).
pub fn fit_profile<M: IntensityModel>(
    model: &M,
    samples: &Samples,
    distance_mm: f64,
    scale: f64,
    start: &[f64],
    name: &'static str,
) -> Result<ProfileFit, FitError> {
    let problem = Problem {
        model,
        samples,
        distance_mm,
        scale,
    };
    let report = minimize(&problem, start, &options(), name)?;
    let mut jac = DMatrix::zeros(samples.len(), start.len());
    problem.jacobian(&report.params, &report.residuals, &mut jac);
    let lags = correlation_lags(&report.residuals);
    let covariance = sandwich_covariance(&jac, &report.residuals, lags)
        .ok_or(FitError::Singular { model: name })?;
    Ok(ProfileFit {
        params: report.params,
        covariance,
        rms_residual: (report.cost / samples.len() as f64).sqrt(),
        points: samples.len(),
        lags,
        cost: report.cost,
    })
}

/// [`fit_profile`] with the centre held at `start[0]`: a radial profile's samples are
/// radii, so its centre is their origin, not a parameter. The covariance keeps the full
/// parameter layout, with a zero row and column for the centre.
pub fn fit_profile_fixed_centre<M: IntensityModel>(
    model: &M,
    samples: &Samples,
    distance_mm: f64,
    scale: f64,
    start: &[f64],
    name: &'static str,
) -> Result<ProfileFit, FitError> {
    let problem = FixedCentre {
        inner: Problem {
            model,
            samples,
            distance_mm,
            scale,
        },
        x0: start[0],
    };
    let report = minimize(&problem, &start[1..], &options(), name)?;
    let k = start.len() - 1;
    let mut jac = DMatrix::zeros(samples.len(), k);
    problem.jacobian(&report.params, &report.residuals, &mut jac);
    let lags = correlation_lags(&report.residuals);
    let inner = sandwich_covariance(&jac, &report.residuals, lags)
        .ok_or(FitError::Singular { model: name })?;
    let mut covariance = DMatrix::zeros(k + 1, k + 1);
    covariance.view_mut((1, 1), (k, k)).copy_from(&inner);
    Ok(ProfileFit {
        params: problem.full(&report.params),
        covariance,
        rms_residual: (report.cost / samples.len() as f64).sqrt(),
        points: samples.len(),
        lags,
        cost: report.cost,
    })
}

/// Cost of `model` at `p` over the samples, without fitting.
pub fn cost_at<M: IntensityModel>(
    model: &M,
    x: &[f64],
    y: &[f64],
    distance_mm: f64,
    p: &[f64],
) -> f64 {
    let l = distance_mm;
    x.iter()
        .zip(y)
        .map(|(&x, &y)| {
            let dx = x - p[0];
            (model.intensity(p, dx / dx.hypot(l), dx / l) - y).powi(2)
        })
        .sum()
}

/// The input's value, or an error naming it unless it is positive and finite.
pub fn positive(i: &Input, name: &str) -> Result<f64, OpticsError> {
    if i.value > 0.0 && i.value.is_finite() {
        Ok(i.value)
    } else {
        Err(OpticsError::BadInput(format!(
            "{name} must be > 0, got {}",
            i.value
        )))
    }
}

/// The warning for a Monte Carlo check that disagrees with the linear budget, if it does.
pub fn monte_carlo_warning(mc: &Option<(McEstimate, Validation)>) -> Option<String> {
    mc.as_ref().filter(|(_, v)| !v.agrees).map(|_| {
        "the Monte Carlo interval differs from the linear budget's: prefer the Monte Carlo \
         interval"
            .to_string()
    })
}

/// sinc x = sin x / x, 1 at 0.
pub fn sinc(x: f64) -> f64 {
    if x.abs() < 1e-4 {
        1.0 - x * x / 6.0
    } else {
        x.sin() / x
    }
}

/// sinc²β and its derivative 2·sinc β·(cos β − sinc β)/β (0 at β = 0).
pub fn sinc2_and_derivative(beta: f64) -> (f64, f64) {
    let sc = sinc(beta);
    let d = if beta.abs() < 1e-4 {
        -beta / 3.0
    } else {
        (beta.cos() - sc) / beta
    };
    (sc * sc, 2.0 * sc * d)
}

/// The model at positions `x_mm`.
pub fn evaluate<M: IntensityModel>(
    model: &M,
    p: &[f64],
    x_mm: &[f64],
    distance_mm: f64,
) -> Vec<f64> {
    x_mm.iter()
        .map(|&x| {
            model.intensity(
                p,
                sine_of_angle(x, p[0], distance_mm),
                (x - p[0]) / distance_mm,
            )
        })
        .collect()
}

/// Median spacing of the samples, mm.
pub fn median_step(x: &[f64]) -> f64 {
    let mut d: Vec<f64> = x.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    if d.is_empty() {
        return 1.0;
    }
    let mid = d.len() / 2;
    *d.select_nth_unstable_by(mid, f64::total_cmp).1
}

/// Least squares y ≈ a·f + b.
pub fn linear_two(f: &[f64], y: &[f64]) -> Option<(f64, f64)> {
    let n = f.len() as f64;
    let (sf, sy) = (f.iter().sum::<f64>(), y.iter().sum::<f64>());
    let sff: f64 = f.iter().map(|v| v * v).sum();
    let sfy: f64 = f.iter().zip(y).map(|(a, b)| a * b).sum();
    let det = n * sff - sf * sf;
    if !(det.abs() > 1e-300) {
        return None;
    }
    let a = (n * sfy - sf * sy) / det;
    Some((a, (sy - a * sf) / n))
}

/// Measurands (SI) from (wavelength m, distance m, the fitted ratios).
pub type MeasurandFn<'a> = &'a (dyn Fn(f64, f64, &[f64]) -> Vec<f64> + Sync);

/// Estimates with budgets, and the Monte Carlo check of the first when asked for.
pub type Propagated = (Vec<Estimate>, Option<(McEstimate, Validation)>);

/// The measurands of a fit: which fitted parameters are ratios to the wavelength (e.g.
/// d/λ), and the measurands made from them.
pub struct Measurands<'a> {
    /// Indices of the fitted parameters that enter the measurands, with budget names.
    pub ratios: &'a [(usize, &'a str)],
    /// Measurands (SI) from (wavelength m, distance m, the ratios).
    pub compute: MeasurandFn<'a>,
}

/// A nominal fit and how to repeat it for another distance (mm) and scale factor.
pub struct Refit<'a> {
    /// Parameters of the nominal fit.
    pub params: &'a [f64],
    /// Their covariance.
    pub covariance: &'a DMatrix<f64>,
    /// The fit repeated at (distance mm, scale factor), returning its parameters.
    pub again: &'a (dyn Fn(f64, f64) -> Result<Vec<f64>, OpticsError> + Sync),
}

/// GUM propagation of a fit to its measurands: inputs are the wavelength, the distance,
/// each scale component and the fitted ratios (with their covariance); the fit is repeated
/// for changes of the distance and the scale, so those sensitivities are the model's own.
/// With `monte_carlo` the first measurand is also propagated by JCGM 101 (each trial a
/// re-fit) and the linear result validated against it.
pub fn propagate(
    refit: &Refit,
    wavelength: &Input,
    distance: &Input,
    map: &ScreenMap,
    measurands: &Measurands,
    monte_carlo: Option<(usize, u64)>,
) -> Result<Propagated, OpticsError> {
    let u = |i: usize| refit.covariance[(i, i)].max(0.0).sqrt();
    let mut inputs = vec![wavelength.clone(), distance.clone()];
    let scale_start = inputs.len();
    for c in &map.components {
        inputs.push(Input::normal(format!("scale: {}", c.name), 1.0, c.u_rel));
    }
    let fit_start = inputs.len();
    for &(i, label) in measurands.ratios {
        inputs.push(Input::normal(format!("fit: {label}"), 0.0, u(i)));
    }
    let mut correlations = Vec::new();
    for (a, &(i, _)) in measurands.ratios.iter().enumerate() {
        for (b, &(j, _)) in measurands.ratios.iter().enumerate().skip(a + 1) {
            let r = refit.covariance[(i, j)] / (u(i) * u(j));
            if r.is_finite() && r.abs() > 1e-9 {
                correlations.push(Correlation {
                    i: fit_start + a,
                    j: fit_start + b,
                    r: r.clamp(-0.999_999, 0.999_999),
                });
            }
        }
    }
    let nominal_distance = distance.value;
    let model_fn = |v: &[f64]| -> Result<Vec<f64>, OpticsError> {
        let factor: f64 = v[scale_start..fit_start].iter().product();
        let params = if v[1] == nominal_distance && factor == 1.0 {
            refit.params.to_vec()
        } else {
            (refit.again)(v[1] * 1e3, factor)?
        };
        let ratios: Vec<f64> = measurands
            .ratios
            .iter()
            .enumerate()
            .map(|(k, &(i, _))| params[i] + v[fit_start + k])
            .collect();
        Ok((measurands.compute)(v[0], v[1], &ratios))
    };
    // The first-order budget needs the ratios' slope in L/k only: a sample at x on a map
    // scaled by k, with the centre at k·x0, is seen at the angle of x at distance L/k, so
    // distance and scale act through ρ = L/k alone. Two re-fits at ρ(1 ± ε) give that slope
    // (central difference, error O(ε²)) for every distance and scale input at once;
    // Monte Carlo below re-fits every trial.
    let rho0 = nominal_distance * 1e3;
    let eps = 1e-4;
    let at = |rho: f64| -> Result<Vec<f64>, OpticsError> {
        let p = (refit.again)(rho, 1.0)?;
        Ok(measurands.ratios.iter().map(|&(i, _)| p[i]).collect())
    };
    let (plus, minus) = rayon::join(|| at(rho0 * (1.0 + eps)), || at(rho0 * (1.0 - eps)));
    let (plus, minus) = (plus?, minus?);
    let slope: Vec<f64> = plus
        .iter()
        .zip(&minus)
        .map(|(a, b)| (a - b) / (2.0 * eps * rho0))
        .collect();
    let linear_fn = |v: &[f64]| -> Result<Vec<f64>, OpticsError> {
        let factor: f64 = v[scale_start..fit_start].iter().product();
        let rho = v[1] * 1e3 / factor;
        let ratios: Vec<f64> = measurands
            .ratios
            .iter()
            .enumerate()
            .map(|(k, &(i, _))| refit.params[i] + slope[k] * (rho - rho0) + v[fit_start + k])
            .collect();
        Ok((measurands.compute)(v[0], v[1], &ratios))
    };
    let propagation = uncertainty::propagate(&inputs, &correlations, linear_fn)?;
    let estimates = propagation.outputs;
    let mc = match monte_carlo {
        Some((trials, seed)) => {
            let mc = uncertainty::monte_carlo(&inputs, &correlations, model_fn, trials, seed)?;
            let first = mc.outputs.first().copied().ok_or_else(|| {
                OpticsError::Unsolvable("Monte Carlo returned no estimate".into())
            })?;
            let v = uncertainty::validate(&estimates[0], uncertainty::K_95_NORMAL, &first);
            Some((first, v))
        }
        None => None,
    };
    Ok((estimates, mc))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The models' analytic Jacobians against central differences of their own residuals
    /// (an internal consistency check: the derivative of a smooth function).
    #[test]
    fn analytic_jacobians_match_finite_differences() {
        use crate::optics::{slit::SlitModel, two_slit::TwoSlitModel};
        fn check<M: IntensityModel>(model: &M, p: &[f64]) {
            let x: Vec<f64> = (0..200).map(|i| -40.0 + 0.4 * i as f64).collect();
            let samples = Samples {
                y: x.iter().map(|v| 0.3 + 0.01 * v.sin()).collect(),
                lower_bound: vec![false; x.len()],
                x,
            };
            let problem = Problem {
                model,
                samples: &samples,
                distance_mm: 2500.0,
                scale: 1.0,
            };
            let mut r = vec![0.0; samples.len()];
            problem.residuals(p, &mut r);
            let mut jac = DMatrix::zeros(samples.len(), p.len());
            assert!(problem.analytic_jacobian(p, &r, &mut jac));
            for j in 0..p.len() {
                let h = 1e-6 * (p[j].abs() + model.typical(p)[j]);
                let (mut a, mut b) = (p.to_vec(), p.to_vec());
                a[j] += h;
                b[j] -= h;
                let (mut ra, mut rb) = (r.clone(), r.clone());
                problem.residuals(&a, &mut ra);
                problem.residuals(&b, &mut rb);
                for i in 0..r.len() {
                    let fd = (ra[i] - rb[i]) / (2.0 * h);
                    let scale = jac.column(j).amax().max(1e-12);
                    assert!(
                        (jac[(i, j)] - fd).abs() < 1e-5 * scale,
                        "param {j} sample {i}"
                    );
                }
            }
        }
        check(
            &TwoSlitModel,
            &[1.3, 0.8, 0.05, 0.02, 0.9, 470.0, 94.0, 0.2, -0.5],
        );
        check(&SlitModel, &[-0.7, 4.0, 0.02, 0.01, 153.8, 0.3]);
    }

    #[test]
    fn exact_angle_mapping_matches_atan() {
        // sin(atan(y/L)) by the library's trigonometry, an outside check of the algebra.
        for (x, x0, l) in [
            (120.0f64, 20.0, 1000.0),
            (-800.0, 5.0, 300.0),
            (3.0, 3.0, 50.0),
        ] {
            let want = ((x - x0) / l).atan().sin();
            assert!((sine_of_angle(x, x0, l) - want).abs() < 1e-15);
        }
    }
}
