//! Gratings: d(sin θm − sin θi) = mλ, solved exactly (no small-angle forms) from the
//! positions of the orders along the pattern line, fitted over all orders on both sides.
//!
//! Geometry (stated in every record's assumptions):
//! - transmission: the screen is perpendicular to the incident beam at `distance` from the
//!   grating, so an order deflected by θm − θi lands L·tan(θm − θi) from the zero order;
//! - reflection (e.g. an optical disc, the beam through a hole in the screen): the screen
//!   is parallel to the grating at `distance`, so an order at θm from the normal lands
//!   L·(tan θm − tan θi) from the specular zero order.
//!
//! The position of the zero order on the screen is a free parameter of the fit, so a
//! saturated, hidden or missing zero order does not bias the result when orders on both
//! sides are visible.

use super::OpticsError;
use crate::fit::line::tls_line;
use crate::fit::lm::{self, LeastSquares, LmOptions};
use crate::scale::ScreenMap;
use crate::uncertainty::{self, Estimate, Input, McEstimate, Validation};
use nalgebra::Vector2;

/// Transmission or reflection grating.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// Light passes through; screen perpendicular to the incident beam.
    Transmission,
    /// Light is reflected; screen parallel to the grating.
    Reflection,
}

/// Displacement along the screen of order `m` from the zero order, in units of the
/// distance L, for a ratio λ/d and incidence θi. None when the order does not propagate
/// (|sin θm| ≥ 1) or grazes the screen.
pub fn order_offset(mode: Mode, m: i32, ratio: f64, incidence_rad: f64) -> Option<f64> {
    let s = incidence_rad.sin() + m as f64 * ratio;
    if !(s.abs() < 1.0) {
        return None;
    }
    let theta = s.asin();
    let offset = match mode {
        Mode::Transmission => {
            let deflection = theta - incidence_rad;
            if deflection.abs() >= std::f64::consts::FRAC_PI_2 * 0.999 {
                return None;
            }
            deflection.tan()
        }
        Mode::Reflection => theta.tan() - incidence_rad.tan(),
    };
    offset.is_finite().then_some(offset)
}

/// One order's position along the pattern line.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrderPoint {
    /// Diffraction order.
    pub order: i32,
    /// Position along the line, mm (arbitrary origin).
    pub along_mm: f64,
    /// Standard uncertainty of that position, mm.
    pub u_mm: f64,
}

/// Result of fitting the order positions.
#[derive(Debug, Clone, PartialEq)]
pub struct OrderFit {
    /// Position of the zero order along the line, mm.
    pub centre_mm: f64,
    /// λ/d.
    pub ratio: f64,
    /// Covariance of (centre_mm, ratio) scaled by the stated position uncertainties
    /// (not by the residual scatter).
    pub covariance: [[f64; 2]; 2],
    /// χ² of the residuals against the stated uncertainties.
    pub chi2: f64,
    /// Degrees of freedom (points − 2).
    pub dof: usize,
    /// Residuals, mm, in the order of the points.
    pub residuals_mm: Vec<f64>,
}

struct OrdersProblem<'a> {
    points: &'a [OrderPoint],
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
}

impl LeastSquares for OrdersProblem<'_> {
    fn residual_count(&self) -> usize {
        self.points.len()
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        for (ri, pt) in r.iter_mut().zip(self.points) {
            let Some(off) = order_offset(self.mode, pt.order, p[1], self.incidence_rad) else {
                return false;
            };
            *ri = (p[0] + self.distance_mm * off - pt.along_mm) / pt.u_mm;
        }
        true
    }
}

/// Fits centre and λ/d to order positions by weighted least squares.
pub fn fit_orders(
    points: &[OrderPoint],
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
    start_ratio: f64,
) -> Result<OrderFit, OpticsError> {
    let distinct: std::collections::BTreeSet<i32> = points.iter().map(|p| p.order).collect();
    if distinct.len() < 2 || !distinct.iter().any(|&m| m != 0) {
        return Err(OpticsError::Unsolvable(
            "need at least two different orders, one of them not the zero order".into(),
        ));
    }
    if points.iter().any(|p| !(p.u_mm > 0.0 && p.u_mm.is_finite())) {
        return Err(OpticsError::Unsolvable(
            "order positions need positive uncertainties".into(),
        ));
    }
    // Start the centre from the zero order, or from the mean offset of the others.
    let centre0 = points
        .iter()
        .find(|p| p.order == 0)
        .map(|p| p.along_mm)
        .unwrap_or_else(|| {
            let s: f64 = points
                .iter()
                .filter_map(|p| {
                    order_offset(mode, p.order, start_ratio, incidence_rad)
                        .map(|o| p.along_mm - distance_mm * o)
                })
                .sum();
            s / points.len() as f64
        });
    let problem = OrdersProblem {
        points,
        mode,
        incidence_rad,
        distance_mm,
    };
    let options = LmOptions {
        ftol: 1e-14,
        xtol: 1e-14,
        gtol: 1e-14,
        max_iterations: 200,
    };
    let report = lm::minimize(
        &problem,
        &[centre0, start_ratio],
        &options,
        "grating orders",
    )
    .map_err(|e| {
        OpticsError::Unsolvable(format!("the order positions could not be fitted: {e}"))
    })?;
    let inv = report.inverse_jtj.clone().ok_or_else(|| {
        OpticsError::Unsolvable("the order positions do not determine the pitch".into())
    })?;
    let residuals_mm = report
        .residuals
        .iter()
        .zip(points)
        .map(|(r, p)| r * p.u_mm)
        .collect();
    Ok(OrderFit {
        centre_mm: report.params[0],
        ratio: report.params[1],
        covariance: [[inv[(0, 0)], inv[(0, 1)]], [inv[(1, 0)], inv[(1, 1)]]],
        chi2: report.cost,
        dof: points.len() - 2,
        residuals_mm,
    })
}

/// Assigns diffraction orders to candidate positions along the line: every pair of the
/// brightest candidates is tried with small order numbers, the hypothesis explaining
/// the most candidates wins, ties going to the largest λ/d (lowest orders, fewest
/// orders missing between visible ones) and then the smallest scatter.
/// Returns the order of each candidate (None if it fits no order) and λ/d.
pub fn index_orders(
    along_mm: &[f64],
    size_mm: &[f64],
    brightness: &[f64],
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
) -> Option<(Vec<Option<i32>>, f64)> {
    let n = along_mm.len();
    if n < 2 {
        return None;
    }
    let mut by_brightness: Vec<usize> = (0..n).collect();
    by_brightness.sort_by(|&a, &b| brightness[b].total_cmp(&brightness[a]));
    by_brightness.truncate(10);
    const MAX_ORDER: i32 = 5;
    // (count, plausible zero, λ/d, squared misfit, orders) of the best hypothesis so far.
    type Hypothesis = (usize, bool, f64, f64, Vec<Option<i32>>);
    let mut best: Option<Hypothesis> = None;
    for (ai, &i) in by_brightness.iter().enumerate() {
        for &j in &by_brightness[ai + 1..] {
            let (lo, hi) = if along_mm[i] < along_mm[j] {
                (i, j)
            } else {
                (j, i)
            };
            for mlo in -MAX_ORDER..MAX_ORDER {
                for mhi in (mlo + 1)..=MAX_ORDER {
                    let Some(ratio) = solve_pair(
                        along_mm[hi] - along_mm[lo],
                        mlo,
                        mhi,
                        mode,
                        incidence_rad,
                        distance_mm,
                    ) else {
                        continue;
                    };
                    let Some(off_lo) = order_offset(mode, mlo, ratio, incidence_rad) else {
                        continue;
                    };
                    let centre = along_mm[lo] - distance_mm * off_lo;
                    let (count, sse, orders) = score(
                        along_mm,
                        size_mm,
                        centre,
                        ratio,
                        mode,
                        incidence_rad,
                        distance_mm,
                    );
                    let zero_ok = plausible_zero(&orders, brightness, mode);
                    let better = match &best {
                        None => true,
                        Some((bc, bz, br, bs, _)) => {
                            count > *bc
                                || (count == *bc && zero_ok && !bz)
                                || (count == *bc && zero_ok == *bz && ratio > br * (1.0 + 1e-3))
                                || (count == *bc
                                    && zero_ok == *bz
                                    && (ratio - br).abs() <= br * 1e-3
                                    && sse < *bs)
                        }
                    };
                    if better {
                        best = Some((count, zero_ok, ratio, sse, orders));
                    }
                }
            }
        }
    }
    best.filter(|b| b.0 >= 2)
        .map(|(_, _, ratio, _, orders)| (orders, ratio))
}

/// Whether an assignment's zero order is plausible: the spot called order 0 outshines
/// every other assigned spot by a fifth (undiffracted light dominates). In reflection no
/// spot may be called order 0 if orders lie on both sides of it: the zero order goes back
/// through the hole in the screen. In transmission the undiffracted beam always reaches
/// the screen, so an assignment that leaves it out while spanning it is not plausible.
/// Calling one of two equal first orders "0" would halve the pitch; skipping the zero
/// between them would double it.
fn plausible_zero(orders: &[Option<i32>], brightness: &[f64], mode: Mode) -> bool {
    let zero = orders.iter().position(|o| *o == Some(0));
    match zero {
        Some(z) => orders
            .iter()
            .enumerate()
            .filter(|(i, o)| o.is_some() && *i != z)
            .all(|(i, _)| brightness[z] >= 1.2 * brightness[i]),
        None => {
            mode == Mode::Reflection
                && orders.iter().any(|o| o.is_some_and(|m| m < 0))
                && orders.iter().any(|o| o.is_some_and(|m| m > 0))
        }
    }
}

/// λ/d that puts orders `mlo` < `mhi` a distance `gap_mm` apart, by bisection (the gap
/// grows monotonically with λ/d).
fn solve_pair(
    gap_mm: f64,
    mlo: i32,
    mhi: i32,
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
) -> Option<f64> {
    let gap = |r: f64| -> Option<f64> {
        Some(
            distance_mm
                * (order_offset(mode, mhi, r, incidence_rad)?
                    - order_offset(mode, mlo, r, incidence_rad)?),
        )
    };
    // The largest ratio for which both orders still propagate.
    let s = incidence_rad.sin();
    let limit = [mlo, mhi]
        .iter()
        .filter(|&&m| m != 0)
        .map(|&m| (1.0 - s * (m as f64).signum()) / m.unsigned_abs() as f64)
        .fold(f64::INFINITY, f64::min);
    let (mut a, mut b) = (0.0, limit * (1.0 - 1e-9));
    // Near the limit an order grazes the screen and has no position: back off until the
    // gap is defined.
    let mut gb = gap(b);
    for _ in 0..200 {
        if gb.is_some() {
            break;
        }
        b *= 0.995;
        gb = gap(b);
    }
    let gb = gb?;
    if !(gap_mm > 0.0 && gap_mm < gb) {
        return None;
    }
    for _ in 0..100 {
        let mid = 0.5 * (a + b);
        if gap(mid)? < gap_mm {
            a = mid;
        } else {
            b = mid;
        }
    }
    Some(0.5 * (a + b))
}

fn score(
    along_mm: &[f64],
    size_mm: &[f64],
    centre: f64,
    ratio: f64,
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
) -> (usize, f64, Vec<Option<i32>>) {
    let mut orders = vec![None; along_mm.len()];
    let mut taken: std::collections::BTreeMap<i32, (usize, f64)> = Default::default();
    let first = order_offset(mode, 1, ratio, incidence_rad)
        .unwrap_or(0.0)
        .abs()
        * distance_mm;
    for m in -40..=40 {
        let Some(off) = order_offset(mode, m, ratio, incidence_rad) else {
            continue;
        };
        let predicted = centre + distance_mm * off;
        for (k, &u) in along_mm.iter().enumerate() {
            let d = (u - predicted).abs();
            let tol = (0.04 * first).max(size_mm[k]);
            if d <= tol && taken.get(&m).is_none_or(|&(_, bd)| d < bd) {
                taken.insert(m, (k, d));
            }
        }
    }
    let mut sse = 0.0;
    for (m, (k, d)) in taken {
        if orders[k].is_none() {
            orders[k] = Some(m);
            sse += d * d;
        }
    }
    let count = orders.iter().filter(|o| o.is_some()).count();
    (count, sse, orders)
}

/// What is known: the wavelength (solve the pitch) or the pitch (solve the wavelength).
#[derive(Debug, Clone)]
pub enum Known {
    /// Wavelength in metres, as a budget input named "wavelength".
    Wavelength(Input),
    /// Pitch in metres, as a budget input named "pitch".
    Pitch(Input),
}

/// A spot with its assigned order, in photo pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OrderSpot {
    /// Diffraction order.
    pub order: i32,
    /// Position, px.
    pub px: Vector2<f64>,
    /// Standard uncertainty per coordinate, px.
    pub px_u: Vector2<f64>,
}

/// Inputs of a grating measurement.
#[derive(Debug, Clone)]
pub struct GratingInputs {
    /// Transmission or reflection.
    pub mode: Mode,
    /// Wavelength or pitch.
    pub known: Known,
    /// Grating-to-screen distance in metres, named "distance".
    pub distance: Input,
    /// Angle of incidence in radians, named "incidence".
    pub incidence: Input,
}

/// A solved grating.
#[derive(Debug, Clone)]
pub struct GratingSolution {
    /// The measurand: "pitch" (m) or "wavelength" (m).
    pub measurand: &'static str,
    /// Its estimate and budget.
    pub estimate: Estimate,
    /// Line density 1/d in lines per metre, with budget.
    pub line_density: Estimate,
    /// The nominal order fit (positions in screen mm).
    pub fit: OrderFit,
    /// Order points the fit used.
    pub points: Vec<OrderPoint>,
    /// Screen position of each spot, mm, in input order.
    pub screen_mm: Vec<Vector2<f64>>,
    /// Factor by which the spot uncertainties were enlarged to match the fit scatter.
    pub birge_ratio: f64,
    /// Relative difference of the small-angle shortcut d = mλL/y from the exact result,
    /// at the outermost order (a check, never used).
    pub small_angle_error: f64,
    /// Monte Carlo check of the measurand (JCGM 101) and its validation of the linear
    /// budget, when asked for.
    pub monte_carlo: Option<(McEstimate, Validation)>,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

fn order_points(along: &[f64], orders: &[i32], u_mm: &[f64]) -> Vec<OrderPoint> {
    along
        .iter()
        .zip(orders)
        .zip(u_mm)
        .map(|((&along_mm, &order), &u_mm)| OrderPoint {
            order,
            along_mm,
            u_mm,
        })
        .collect()
}

/// Along-line positions of the spots in screen mm, the line fitted through them and
/// oriented so that order numbers increase along it.
fn along_positions(mm: &[Vector2<f64>], weights: &[f64], orders: &[i32]) -> Option<Vec<f64>> {
    let line = tls_line(mm, weights).ok()?;
    let along: Vec<f64> = mm.iter().map(|p| line.along(*p)).collect();
    let cov: f64 = along
        .iter()
        .zip(orders)
        .map(|(a, &m)| a * m as f64)
        .sum::<f64>()
        - along.iter().sum::<f64>() * orders.iter().map(|&m| m as f64).sum::<f64>()
            / along.len() as f64;
    let sign = if cov < 0.0 { -1.0 } else { 1.0 };
    Some(along.into_iter().map(|a| a * sign).collect())
}

/// Solves the grating from order spots, with a full GUM budget: distance, the known
/// quantity, incidence, each scale component and the spot positions.
/// With `monte_carlo = Some((trials, seed))` the measurand is also propagated by Monte
/// Carlo and the linear budget validated against it (JCGM 101 §8).
pub fn solve(
    spots: &[OrderSpot],
    map: &ScreenMap,
    inputs: &GratingInputs,
    monte_carlo: Option<(usize, u64)>,
) -> Result<GratingSolution, OpticsError> {
    let (known_value, known_input) = match &inputs.known {
        Known::Wavelength(i) | Known::Pitch(i) => (i.value, i.clone()),
    };
    for (name, v) in [
        ("distance", inputs.distance.value),
        (known_input.name.as_str(), known_value),
    ] {
        if !(v > 0.0 && v.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "{name} must be > 0, got {v}"
            )));
        }
    }
    let orders: Vec<i32> = spots.iter().map(|s| s.order).collect();
    let nominal_mm: Vec<Vector2<f64>> = spots.iter().map(|s| map.to_mm(s.px)).collect();
    // Along-line uncertainty of each spot in mm, from its px uncertainty through the map.
    let u_mm: Vec<f64> = spots
        .iter()
        .map(|s| {
            let j = map.jacobian(s.px);
            let ux = j.column(0) * s.px_u.x;
            let uy = j.column(1) * s.px_u.y;
            (0.5 * (ux.norm_squared() + uy.norm_squared()))
                .sqrt()
                .max(1e-6)
        })
        .collect();
    let weights: Vec<f64> = u_mm.iter().map(|u| 1.0 / (u * u)).collect();
    let mode = inputs.mode;
    // The nominal fit; its λ/d starts every re-fit inside the propagation.
    let along = along_positions(&nominal_mm, &weights, &orders)
        .ok_or_else(|| OpticsError::Unsolvable("the spots do not define a line".into()))?;
    let start_ratio = start_ratio(
        &along,
        &orders,
        mode,
        inputs.incidence.value,
        inputs.distance.value * 1e3,
    );
    let points = order_points(&along, &orders, &u_mm);
    let fit = fit_orders(
        &points,
        mode,
        inputs.incidence.value,
        inputs.distance.value * 1e3,
        start_ratio,
    )?;
    if !(fit.ratio > 0.0) {
        return Err(OpticsError::Unsolvable(
            "the fitted λ/d is not positive".into(),
        ));
    }
    let birge_ratio = if fit.dof > 0 {
        (fit.chi2 / fit.dof as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    let mut warnings = Vec::new();
    if birge_ratio > 3.0 {
        warnings.push(format!(
            "the orders scatter {birge_ratio:.1}× more than their localisation allows: the \
             screen may be tilted, the lens may distort, or a spot is not a diffraction order; \
             the spot uncertainties were enlarged to match"
        ));
    }

    // Budget inputs: known, distance, incidence, scale components, then spot coordinates.
    let mut budget_inputs = vec![
        known_input.clone(),
        inputs.distance.clone(),
        inputs.incidence.clone(),
    ];
    let scale_start = budget_inputs.len();
    for c in &map.components {
        budget_inputs.push(Input::normal(format!("scale: {}", c.name), 1.0, c.u_rel));
    }
    let spot_start = budget_inputs.len();
    for s in spots {
        budget_inputs.push(
            Input::normal(
                format!("order {} x", s.order),
                s.px.x,
                s.px_u.x * birge_ratio,
            )
            .in_group("spot positions"),
        );
        budget_inputs.push(
            Input::normal(
                format!("order {} y", s.order),
                s.px.y,
                s.px_u.y * birge_ratio,
            )
            .in_group("spot positions"),
        );
    }
    let is_pitch = matches!(inputs.known, Known::Wavelength(_));
    let model = |x: &[f64]| -> Result<Vec<f64>, OpticsError> {
        let (known, distance_mm, incidence) = (x[0], x[1] * 1e3, x[2]);
        let factor: f64 = x[scale_start..spot_start].iter().product();
        let mm: Vec<Vector2<f64>> = (0..spots.len())
            .map(|i| {
                map.to_mm(Vector2::new(
                    x[spot_start + 2 * i],
                    x[spot_start + 2 * i + 1],
                )) * factor
            })
            .collect();
        let along = along_positions(&mm, &weights, &orders)
            .ok_or_else(|| OpticsError::Unsolvable("the spots do not define a line".into()))?;
        let pts = order_points(&along, &orders, &u_mm);
        let f = fit_orders(&pts, mode, incidence, distance_mm, fit.ratio)?;
        let measurand = if is_pitch {
            known / f.ratio
        } else {
            known * f.ratio
        };
        let pitch = if is_pitch { measurand } else { known };
        Ok(vec![measurand, 1.0 / pitch])
    };
    let propagation = uncertainty::propagate(&budget_inputs, &[], model)?;
    let mut outputs = propagation.outputs.into_iter();
    let (Some(estimate), Some(line_density)) = (outputs.next(), outputs.next()) else {
        return Err(OpticsError::Unsolvable(
            "propagation returned no estimate".into(),
        ));
    };
    let monte_carlo = match monte_carlo {
        Some((trials, seed)) => {
            let mc = uncertainty::monte_carlo(&budget_inputs, &[], model, trials, seed)?;
            let first = mc.outputs.first().copied().ok_or_else(|| {
                OpticsError::Unsolvable("Monte Carlo returned no estimate".into())
            })?;
            let validation = uncertainty::validate(&estimate, uncertainty::K_95_NORMAL, &first);
            if !validation.agrees {
                warnings.push(format!(
                    "the Monte Carlo interval ({} trials) differs from the linear budget's by more \
                     than the numerical tolerance: the model is not linear enough over the input \
                     uncertainties; prefer the Monte Carlo interval",
                    mc.trials
                ));
            }
            Some((first, validation))
        }
        None => None,
    };

    // The small-angle shortcut at the outermost order, as a check only.
    let outer = points
        .iter()
        .filter(|p| p.order != 0)
        .max_by_key(|p| p.order.abs())
        .copied();
    let small_angle_error = outer
        .map(|p| {
            let y = p.along_mm - fit.centre_mm;
            let exact_ratio = fit.ratio;
            let shortcut_ratio = y / (p.order as f64 * inputs.distance.value * 1e3);
            shortcut_ratio / exact_ratio - 1.0
        })
        .unwrap_or(0.0);
    Ok(GratingSolution {
        measurand: if is_pitch { "pitch" } else { "wavelength" },
        estimate,
        line_density,
        fit,
        points,
        screen_mm: nominal_mm,
        birge_ratio,
        small_angle_error,
        monte_carlo,
        warnings,
    })
}

/// λ/d from the innermost order pair, to start the fit.
fn start_ratio(
    along: &[f64],
    orders: &[i32],
    mode: Mode,
    incidence_rad: f64,
    distance_mm: f64,
) -> f64 {
    let mut best: Option<(i32, f64)> = None;
    for i in 0..along.len() {
        for j in 0..along.len() {
            if orders[j] > orders[i] {
                let span = orders[j] - orders[i];
                if let Some(r) = solve_pair(
                    along[j] - along[i],
                    orders[i],
                    orders[j],
                    mode,
                    incidence_rad,
                    distance_mm,
                ) {
                    if best.is_none_or(|(s, _)| span < s) {
                        best = Some((span, r));
                    }
                }
            }
        }
    }
    best.map_or(0.1, |(_, r)| r)
}
