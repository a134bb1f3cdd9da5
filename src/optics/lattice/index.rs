//! Indexing rings by the ratios of their spacings, which a wrong camera length, voltage or
//! scale does not change: every ring's d is a·f(hkl) with one lattice scale a (for a
//! hexagonal lattice with c, at the given c/a).
//!
//! Each hypothesis puts the largest-d ring on one of the first reflections; the implied
//! scale places all reflections, every ring goes to the nearest one in ln d, and the scale is
//! refitted by weighted least squares in ln d until the assignment stops changing. A
//! hypothesis is judged by χ² of the ln d residuals (ν = rings − 1) and by the reflections
//! it predicts inside the observed range that no ring shows ("missing", de Wolff's
//! N_calc − N_obs, J. Appl. Cryst. 1:108, 1968): doubling a cubic lattice fits the same
//! rings as well but predicts rings that are not there. Hypotheses that fit (p ≥ 0.01) come
//! first, then the fewest missing, then the smallest χ².

use super::chi2::chi2_survival;
use super::{Family, Lattice, Reflection, reflections};
use crate::optics::OpticsError;

/// A spacing to index. Its uncertainty is what moves it relative to the other rings (its
/// own radius, not the voltage, distance or scale that move all rings together).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MeasuredSpacing {
    /// Spacing, m.
    pub d_m: f64,
    /// Standard uncertainty relative to the other rings, m.
    pub u_m: f64,
}

/// One way of indexing the rings.
#[derive(Debug, Clone, PartialEq)]
pub struct Assignment {
    /// The reflection of each ring, in input order.
    pub reflections: Vec<Reflection>,
    /// The lattice constant a this assignment implies, from the ratio fit, m (only as good
    /// as the spacings' common scale).
    pub scale_m: f64,
    /// χ² of the ln d residuals against the rings' uncertainties.
    pub chi2: f64,
    /// Degrees of freedom, rings − 1.
    pub dof: usize,
    /// P(χ²_ν ≥ χ²).
    pub p_value: f64,
    /// Allowed reflections up to the outermost assigned one that no ring shows.
    pub missing: usize,
    /// (d − d_fit)/d_fit of each ring, in input order.
    pub residuals_rel: Vec<f64>,
}

impl Assignment {
    /// Whether the assignment fits the rings' uncertainties (p ≥ [`FIT_P_MIN`]).
    pub fn fits(&self) -> bool {
        self.p_value >= FIT_P_MIN
    }

    /// χ²/ν.
    pub fn reduced_chi2(&self) -> f64 {
        self.chi2 / self.dof as f64
    }

    fn rank(&self) -> (bool, usize, f64) {
        (!self.fits(), self.missing, self.chi2)
    }
}

/// The outcome of [`index_rings`].
#[derive(Debug, Clone, PartialEq)]
pub struct Indexing {
    /// The family indexed against.
    pub family: Family,
    /// c/a used for hexagonal hk.l reflections; `None`: hk.0 only (or cubic).
    pub c_over_a: Option<f64>,
    /// The best assignment.
    pub best: Assignment,
    /// The next best distinct assignment, to show how clear the choice is.
    pub runner_up: Option<Assignment>,
    /// True when even the best assignment does not fit the uncertainties (p < 0.01).
    pub poor_fit: bool,
    /// Things the user should know.
    pub warnings: Vec<String>,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

/// The least p-value of an assignment that fits its uncertainties.
pub const FIT_P_MIN: f64 = 0.01;
/// How many of the first reflections the largest-d ring is tried on (inner rings can hide
/// in the undiffracted beam's glare).
const ANCHORS: usize = 8;
/// The largest (a/d)² considered, to keep the search bounded.
const Q_LIMIT: f64 = 1000.0;

/// Indexes rings against a lattice family by their spacing ratios (module docs). Needs at
/// least two rings, each with a positive spacing and uncertainty. The lattice's constants,
/// if any, are not used except c/a for hexagonal hk.l.
pub fn index_rings(d: &[MeasuredSpacing], lattice: &Lattice) -> Result<Indexing, OpticsError> {
    if d.len() < 2 {
        return Err(OpticsError::Unsolvable(format!(
            "indexing by ratios needs at least two rings, got {}: one ring alone fits any \
             reflection",
            d.len()
        )));
    }
    for (i, s) in d.iter().enumerate() {
        if !(s.d_m > 0.0 && s.d_m.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "ring {}: spacing must be > 0, got {}",
                i + 1,
                s.d_m
            )));
        }
        if !(s.u_m > 0.0 && s.u_m.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "ring {}: the spacing needs a positive uncertainty to be weighed, got {}",
                i + 1,
                s.u_m
            )));
        }
    }
    let family = lattice.family;
    let c_over_a = lattice.c_over_a();
    if let Some(r) = c_over_a.filter(|r| !(0.2..=10.0).contains(r)) {
        return Err(OpticsError::BadInput(format!(
            "c/a = {r:.3} is outside 0.2–10: check the hexagonal constants"
        )));
    }
    let mut assumptions = Vec::new();
    if family == Family::Hex && c_over_a.is_none() {
        assumptions.push(
            "hexagonal lattice without c: indexed with hk.0 reflections only, as for a film \
             with no order along c (turbostratic carbon); give c to index hk.l rings"
                .to_string(),
        );
    }
    let d_max = d.iter().map(|s| s.d_m).fold(0.0, f64::max);
    let d_min = d.iter().map(|s| s.d_m).fold(f64::INFINITY, f64::min);
    let anchors: Vec<Reflection> = reflections(family, c_over_a, 200.0)
        .into_iter()
        .take(ANCHORS)
        .collect();
    // Room past the smallest ring for its own uncertainty.
    let margin = d
        .iter()
        .map(|s| s.u_m / s.d_m)
        .fold(0.0, f64::max)
        .mul_add(10.0, 1.05)
        .powi(2);
    let q_needed =
        |anchor: &Reflection| anchor.q(family, c_over_a) * (d_max / d_min).powi(2) * margin;
    let q_max = anchors
        .iter()
        .map(q_needed)
        .filter(|&q| q <= Q_LIMIT)
        .fold(0.0, f64::max);
    if q_max == 0.0 {
        return Err(OpticsError::Unsolvable(format!(
            "the rings' spacings span a ratio of {:.1}, beyond the reflections indexing \
             considers ((a/d)² ≤ {Q_LIMIT}); leave out the outermost rings",
            d_max / d_min
        )));
    }
    let table = reflections(family, c_over_a, q_max);
    let ln_q: Vec<f64> = table.iter().map(|r| r.q(family, c_over_a).ln()).collect();
    let ln_d: Vec<f64> = d.iter().map(|s| s.d_m.ln()).collect();
    let w: Vec<f64> = d.iter().map(|s| (s.d_m / s.u_m).powi(2)).collect();

    let mut found: Vec<(Vec<usize>, Assignment)> = Vec::new();
    for anchor in anchors.iter().filter(|a| q_needed(a) <= Q_LIMIT) {
        let mut ln_s = d_max.ln() + 0.5 * anchor.q(family, c_over_a).ln();
        let mut assigned: Vec<usize> = Vec::new();
        for _ in 0..20 {
            let next: Vec<usize> = ln_d.iter().map(|&x| nearest(&ln_q, x - ln_s)).collect();
            let sw: f64 = w.iter().sum();
            ln_s = (0..d.len())
                .map(|i| w[i] * (ln_d[i] + 0.5 * ln_q[next[i]]))
                .sum::<f64>()
                / sw;
            if next == assigned {
                break;
            }
            assigned = next;
        }
        if found.iter().any(|(a, _)| *a == assigned) {
            continue;
        }
        let residuals: Vec<f64> = (0..d.len())
            .map(|i| ln_d[i] + 0.5 * ln_q[assigned[i]] - ln_s)
            .collect();
        let chi2: f64 = residuals.iter().zip(&w).map(|(r, w)| w * r * r).sum();
        let dof = d.len() - 1;
        let outermost = *assigned.iter().max().unwrap_or(&0);
        let missing = (0..=outermost).filter(|j| !assigned.contains(j)).count();
        let assignment = Assignment {
            reflections: assigned.iter().map(|&j| table[j].clone()).collect(),
            scale_m: ln_s.exp(),
            chi2,
            dof,
            p_value: chi2_survival(chi2, dof),
            missing,
            residuals_rel: residuals.iter().map(|r| r.exp() - 1.0).collect(),
        };
        found.push((assigned, assignment));
    }
    found.sort_by(|a, b| {
        let (ra, rb) = (a.1.rank(), b.1.rank());
        ra.0.cmp(&rb.0)
            .then(ra.1.cmp(&rb.1))
            .then(ra.2.total_cmp(&rb.2))
    });
    let mut ranked = found.into_iter().map(|(_, a)| a);
    let best = ranked.next().ok_or_else(|| {
        OpticsError::Unsolvable("no reflection could be assigned to the rings".into())
    })?;
    let runner_up = ranked.next();
    let mut warnings = Vec::new();
    let poor_fit = !best.fits();
    if poor_fit {
        warnings.push(format!(
            "no indexing as {family} fits the rings within their uncertainties (best χ²/ν = \
             {:.2}, p = {:.2e}): a ring may be mismeasured or not belong to the film, or the \
             family is wrong",
            best.reduced_chi2(),
            best.p_value
        ));
    }
    if let Some(r) = &runner_up {
        if r.fits() && r.missing == best.missing && !poor_fit {
            warnings.push(format!(
                "the indexing is ambiguous: another assignment ({}) fits as well (χ²/ν = {:.2} \
                 against {:.2}); measure more rings",
                labels(r),
                r.reduced_chi2(),
                best.reduced_chi2()
            ));
        }
    }
    let mut seen: Vec<&str> = Vec::new();
    for r in &best.reflections {
        if seen.contains(&r.label.as_str()) {
            warnings.push(format!(
                "two rings were indexed as {}: one of them may be a double detection",
                r.label
            ));
        }
        seen.push(&r.label);
    }
    Ok(Indexing {
        family,
        c_over_a,
        best,
        runner_up,
        poor_fit,
        warnings,
        assumptions,
    })
}

/// The labels of an assignment, comma separated.
fn labels(a: &Assignment) -> String {
    a.reflections
        .iter()
        .map(|r| r.label.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}

/// The reflection whose −½ ln q is nearest to `x` (= ln(d/a)).
fn nearest(ln_q: &[f64], x: f64) -> usize {
    let mut best = (0, f64::INFINITY);
    for (j, &lq) in ln_q.iter().enumerate() {
        let e = (x + 0.5 * lq).abs();
        if e < best.1 {
            best = (j, e);
        }
    }
    best.0
}
