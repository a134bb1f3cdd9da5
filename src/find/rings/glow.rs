//! The light under an electron-diffraction tube's rings: how far the undiffracted beam's
//! saturated spot reaches, where the lit phosphor ends (the tube's round outline, a sharp
//! fall to the dark room), and a smooth model of the glow's radial falloff between them.
//!
//! The glow (electrons scattered diffusely by the film and light spread in the glass) falls
//! steeply and smoothly, roughly as a power of the radius with a knee. It is modelled as
//! ln I(r) = Σₖ cₖ·Tₖ(t), with Tₖ the Chebyshev polynomials and t the affine image of ln r on
//! [−1, 1], so that a power law is a straight line and the knee a gentle bend. The degree
//! (2 to 12, and at most one per quarter unit of ln r, so that it cannot follow a ring) is
//! chosen by the Bayesian information criterion (Schwarz 1978) on the bins in use, counted
//! as independent points only once per correlation length of the residuals.
//! Rings are a few per cent above the glow and need not be local maxima of the raw profile,
//! so the fit is made robust by iteratively reweighted least squares with Tukey's biweight
//! (Beaton & Tukey 1974, c = 4.685) on the residual smoothed over 2 px, where a ring's
//! breadth adds up and the noise's does not; its standard deviation is read from the
//! residuals below the fit only, which ring light cannot inflate, so the weighting cannot
//! feed on itself and drag the glow down. The ring-free bins are then those within 2.5 of
//! those standard deviations above the fit (4 below), with 3 px cleared on either side of
//! any that are not (a ring's tails still lift the light there).

use super::radial::RadialProfile;
use crate::find::FindError;
use crate::fit::hac::tapered_autocorrelation;
use nalgebra::{DMatrix, DVector};

/// The tube's outline seen in the radial profile.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TubeEdge {
    /// Where the profile crosses halfway between its levels inside and outside, mm.
    pub radius_mm: f64,
    /// Median level just inside the edge.
    pub inside: f64,
    /// Median level just outside it.
    pub outside: f64,
}

/// An edge is a fall, within a few pixels, to within this share of the step from the
/// frame's darkest level to the level just inside: the glow never falls like that, and
/// the step down from the spot into the glow ends far above the dark.
const EDGE_RESIDUE: f64 = 0.25;
/// The lit side of an edge must be this many times brighter than the dark level.
const EDGE_CONTRAST: f64 = 3.0;

/// The first fall from the lit phosphor to the dark frame beyond `from_mm` (module docs),
/// or None where the profile shows none (the tube fills the frame, or the frame cuts the
/// pattern first). `px_mm` is the size of a photo pixel on the screen.
pub fn tube_edge(profile: &RadialProfile, from_mm: f64, px_mm: f64) -> Option<TubeEdge> {
    let n = profile.r_mm.len();
    if n < 8 {
        return None;
    }
    let bin = profile.r_mm.get(1).map_or(1.0, |r1| r1 - profile.r_mm[0]);
    let per_px = (px_mm / bin).max(0.1);
    let k = ((4.0 * per_px).round() as usize).max(2);
    let gap = ((1.5 * per_px).round() as usize).max(1);
    let first = profile.r_mm.iter().position(|&r| r >= from_mm)?;
    let mut lit: Vec<f64> = (first..n)
        .map(|i| profile.value[i])
        .filter(|v| v.is_finite())
        .collect();
    if lit.len() < 2 * (k + gap) {
        return None;
    }
    lit.sort_unstable_by(f64::total_cmp);
    let dark = lit[lit.len() / 20].max(0.0);
    let window = |a: usize, b: usize| -> Option<f64> {
        let mut v: Vec<f64> = profile.value[a..b].to_vec();
        if v.iter().any(|x| !x.is_finite()) {
            return None;
        }
        v.sort_unstable_by(f64::total_cmp);
        Some(v[v.len() / 2])
    };
    for i in (first + k + gap)..n.saturating_sub(k + gap) {
        let (Some(inside), Some(outside)) =
            (window(i - gap - k, i - gap), window(i + gap, i + gap + k))
        else {
            continue;
        };
        let lit_enough = inside - dark > (EDGE_CONTRAST - 1.0) * dark.max(1e-9);
        if lit_enough && outside - dark < EDGE_RESIDUE * (inside - dark) {
            let half = 0.5 * (inside + outside);
            let mut edge = profile.r_mm[i];
            for j in (i - gap)..(i + gap + k).min(n - 1) {
                let (a, b) = (profile.value[j], profile.value[j + 1]);
                if a >= half && b < half {
                    edge = profile.r_mm[j] + (a - half) / (a - b) * bin;
                    break;
                }
            }
            return Some(TubeEdge {
                radius_mm: edge,
                inside,
                outside,
            });
        }
    }
    None
}

/// A log-log slope steeper than this is still the spot's flank: a diffuse glow falls
/// like r⁻³ at most (an inverse-square spread over an oblique screen), the spot's blurred
/// edge far faster.
const SPOT_SLOPE: f64 = -5.0;

/// How far the undiffracted beam's spot reaches, mm: past the saturated bins (none
/// clipped for ten pixels) and past its flank, until the profile's logarithmic slope
/// d ln I / d ln r rises above −5 and stays there for three pixels. At least eight pixels.
pub fn spot_reach_mm(profile: &RadialProfile, px_mm: f64) -> f64 {
    let n = profile.r_mm.len();
    let bin = profile.r_mm.get(1).map_or(1.0, |r1| r1 - profile.r_mm[0]);
    let per_px = (px_mm / bin).max(0.1);
    let clear = ((10.0 * per_px).ceil() as usize).max(2);
    let bad = |i: usize| profile.clipped[i] || !(profile.value[i] > 0.0);
    let mut core_end = 0;
    let mut run = 0;
    for i in 0..n {
        if bad(i) {
            run = 0;
            core_end = i + 1;
        } else {
            run += 1;
            if run >= clear {
                break;
            }
        }
    }
    let half = ((3.0 * per_px).round() as usize).max(1);
    let hold = half * 2;
    let mut calm = 0;
    let mut reach = profile.r_mm.get(core_end).copied().unwrap_or(0.0);
    for i in (core_end + half)..n.saturating_sub(half) {
        let (a, b) = (i - half, i + half);
        if bad(a) || bad(b) {
            calm = 0;
            continue;
        }
        let slope =
            (profile.value[b] / profile.value[a]).ln() / (profile.r_mm[b] / profile.r_mm[a]).ln();
        if slope > SPOT_SLOPE {
            calm += 1;
            if calm >= hold {
                reach = profile.r_mm[i + 1 - hold];
                break;
            }
        } else {
            calm = 0;
        }
    }
    reach.max(8.0 * px_mm)
}

/// The fitted glow.
#[derive(Debug, Clone)]
pub struct Glow {
    /// The range fitted, mm.
    pub range_mm: (f64, f64),
    /// Chebyshev coefficients of ln I in t.
    pub coefficients: Vec<f64>,
    /// Which profile bins the final fit kept (false: outside the range, unusable, or
    /// excluded as ring light).
    pub kept: Vec<bool>,
    /// Robust standard deviation of the kept bins' residuals in units of their own
    /// standard errors (1 when the sectors' scatter describes the noise fully).
    pub scatter: f64,
    /// Passes of fit and exclusion made.
    pub passes: usize,
}

/// Relative standard error floor, as a share of the median: a bin whose sectors happen to
/// agree closely must not pin the fit.
const SE_FLOOR: f64 = 0.3;
const ABOVE: f64 = 2.5;
const BELOW: f64 = 4.0;
const MAX_DEGREE: usize = 12;
/// The finest variation of the glow the polynomial may follow, in ln r per degree.
const GLOW_RESOLUTION: f64 = 0.25;
/// Tukey's biweight tuning constant, in standard deviations (95 % efficiency for normal
/// noise; Beaton & Tukey 1974).
const BIWEIGHT_C: f64 = 4.685;

impl Glow {
    fn t(&self, r_mm: f64) -> f64 {
        to_t(r_mm, self.range_mm)
    }

    /// Degree of the polynomial chosen.
    pub fn degree(&self) -> usize {
        self.coefficients.len() - 1
    }

    /// The glow at `r_mm` (meaningful inside [`range_mm`](Self::range_mm)).
    pub fn at(&self, r_mm: f64) -> f64 {
        chebyshev(&self.coefficients, self.t(r_mm)).exp()
    }

    /// d ln I / dr at `r_mm`, 1/mm.
    pub fn log_slope(&self, r_mm: f64) -> f64 {
        let (lo, hi) = self.range_mm;
        let dt_dr = 2.0 / (r_mm * (hi.max(1e-9).ln() - lo.max(1e-9).ln()));
        chebyshev(&derivative_coefficients(&self.coefficients), self.t(r_mm)) * dt_dr
    }

    /// Fits the glow over [lo_mm, hi_mm] (module docs); `px_mm` is a photo pixel's size on
    /// the screen. Fails when fewer than 30 usable bins lie in the range.
    pub fn fit(
        profile: &RadialProfile,
        lo_mm: f64,
        hi_mm: f64,
        px_mm: f64,
    ) -> Result<Glow, FindError> {
        let range = (lo_mm, hi_mm);
        let idx: Vec<usize> = (0..profile.r_mm.len())
            .filter(|&i| {
                let (r, v) = (profile.r_mm[i], profile.value[i]);
                r >= lo_mm
                    && r <= hi_mm
                    && r > 0.0
                    && v > 0.0
                    && v.is_finite()
                    && profile.std_error[i].is_finite()
                    && !profile.clipped[i]
            })
            .collect();
        if idx.len() < 30 || !(hi_mm > lo_mm) {
            return Err(FindError::Unmeasurable(format!(
                "only {} usable radii between the spot ({lo_mm:.2} mm) and the tube's edge or \
                 the frame ({hi_mm:.2} mm): too little glow to find rings on",
                idx.len()
            )));
        }
        let t: Vec<f64> = idx.iter().map(|&i| to_t(profile.r_mm[i], range)).collect();
        let y: Vec<f64> = idx.iter().map(|&i| profile.value[i].ln()).collect();
        let mut rel: Vec<f64> = idx
            .iter()
            .map(|&i| profile.std_error[i] / profile.value[i])
            .collect();
        let mut sorted = rel.clone();
        sorted.sort_unstable_by(f64::total_cmp);
        let floor = (SE_FLOOR * sorted[sorted.len() / 2]).max(1e-9);
        for s in &mut rel {
            *s = s.max(floor);
        }
        let m = idx.len();
        let bin = profile.r_mm.get(1).map_or(1.0, |r1| r1 - profile.r_mm[0]);
        let per_px = (px_mm / bin).max(0.1);
        let mut weight = vec![1.0; m];
        let mut coefficients = Vec::new();
        let mut passes = 0;
        let mut tau = 1.0;
        // The glow varies over a good share of the radius, a ring over a few per cent of
        // it: the degree is held to one per quarter unit of ln r, so that the polynomial
        // cannot bend into a ring.
        let span = (hi_mm / lo_mm.max(1e-9)).ln();
        let cap = ((span / GLOW_RESOLUTION).floor() as usize).clamp(2, MAX_DEGREE);
        let mut zs = vec![0.0; m];
        let mut sigma_s = 1.0;
        for _ in 0..30 {
            passes += 1;
            coefficients = best_degree(&t, &y, &rel, &weight, tau, cap)?;
            let z: Vec<f64> = (0..m)
                .map(|j| (y[j] - chebyshev(&coefficients, t[j])) / rel[j])
                .collect();
            let trusted: Vec<bool> = weight.iter().map(|w| *w > 0.5).collect();
            let acf = tapered_autocorrelation(&z, &trusted);
            tau = (1.0 + 2.0 * acf.iter().skip(1).sum::<f64>()).max(1.0);
            // Rings are judged on the residual smoothed over 2 px, where their breadth adds
            // up and the noise's does not; its noise is read below the fit, where no ring
            // reaches, and not below half the bins' own standard errors (a nearly
            // noise-free profile must not take a trace of misfit for ring light).
            zs = smooth(&z, 2.0 * per_px);
            sigma_s = lower_sigma(
                zs.iter()
                    .zip(&trusted)
                    .filter(|(_, k)| **k)
                    .map(|(z, _)| *z),
            )
            .max(0.5 / (2.0 * per_px).sqrt().max(1.0));
            let next: Vec<f64> = zs
                .iter()
                .map(|&z| biweight(z / (BIWEIGHT_C * sigma_s)))
                .collect();
            let change = next
                .iter()
                .zip(&weight)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0, f64::max);
            weight = next;
            if change < 1e-3 {
                break;
            }
        }
        // Kept: the ring-free bins, clear by 3 px of where the light stands out.
        let flagged: Vec<bool> = zs
            .iter()
            .map(|&z| z > ABOVE * sigma_s || z < -BELOW * sigma_s)
            .collect();
        let keep = widen(&flagged, ((3.0 * per_px).round() as usize).max(2));
        let z: Vec<f64> = (0..m)
            .map(|j| (y[j] - chebyshev(&coefficients, t[j])) / rel[j])
            .collect();
        let scatter =
            lower_sigma(z.iter().zip(&keep).filter(|(_, k)| **k).map(|(z, _)| *z)).max(1e-12);
        let mut kept = vec![false; profile.r_mm.len()];
        for (j, &i) in idx.iter().enumerate() {
            kept[i] = keep[j];
        }
        Ok(Glow {
            range_mm: range,
            coefficients,
            kept,
            scatter,
            passes,
        })
    }
}

fn to_t(r_mm: f64, (lo, hi): (f64, f64)) -> f64 {
    let (a, b) = (lo.max(1e-9).ln(), hi.max(1e-9).ln());
    2.0 * (r_mm.max(1e-9).ln() - a) / (b - a) - 1.0
}

/// Σ cₖ Tₖ(t) by Clenshaw's recurrence.
fn chebyshev(c: &[f64], t: f64) -> f64 {
    let (mut b1, mut b2) = (0.0, 0.0);
    for &ck in c.iter().skip(1).rev() {
        let b0 = 2.0 * t * b1 - b2 + ck;
        b2 = b1;
        b1 = b0;
    }
    t * b1 - b2 + c.first().copied().unwrap_or(0.0)
}

/// The Chebyshev coefficients of the derivative of Σ cₖ Tₖ, by the recurrence
/// c′ₖ₋₁ = c′ₖ₊₁ + 2k·cₖ, with c′₀ halved (Press et al., Numerical Recipes, §5.9).
fn derivative_coefficients(c: &[f64]) -> Vec<f64> {
    let n = c.len();
    if n < 2 {
        return vec![0.0];
    }
    let mut d = vec![0.0; n + 1];
    for k in (1..n).rev() {
        d[k - 1] = d[k + 1] + 2.0 * k as f64 * c[k];
    }
    d[0] *= 0.5;
    d.truncate(n - 1);
    d
}

/// Weighted least-squares Chebyshev fit of each degree 2..=`max_degree` (robustness
/// weights `weight` on top of the standard errors), the one
/// with the least BIC = n′·ln(χ²/n) + (degree + 1)·ln n′, n′ = n/τ the number of
/// independent points when neighbours are correlated (τ the integrated autocorrelation):
/// with n itself, BIC would take correlated noise for structure.
fn best_degree(
    t: &[f64],
    y: &[f64],
    s: &[f64],
    weight: &[f64],
    tau: f64,
    max_degree: usize,
) -> Result<Vec<f64>, FindError> {
    let rows: Vec<usize> = (0..t.len()).filter(|&j| weight[j] > 0.0).collect();
    let sw: Vec<f64> = (0..t.len())
        .map(|j| s[j] / weight[j].max(1e-12).sqrt())
        .collect();
    let s = &sw;
    let n = rows.len();
    let mut best: Option<(f64, Vec<f64>)> = None;
    for degree in 2..=max_degree.min(n.saturating_sub(2) / 4).max(2) {
        let k = degree + 1;
        let mut a = DMatrix::zeros(n, k);
        let mut b = DVector::zeros(n);
        for (row, &j) in rows.iter().enumerate() {
            let (mut tm1, mut tk) = (1.0, t[j]);
            a[(row, 0)] = 1.0 / s[j];
            if k > 1 {
                a[(row, 1)] = t[j] / s[j];
            }
            for col in 2..k {
                let next = 2.0 * t[j] * tk - tm1;
                tm1 = tk;
                tk = next;
                a[(row, col)] = tk / s[j];
            }
            b[row] = y[j] / s[j];
        }
        let Ok(c) = a.clone().svd(true, true).solve(&b, 1e-12) else {
            continue;
        };
        let chi2 = (&a * &c - &b).norm_squared();
        let n_eff = (n as f64 / tau).max(k as f64 + 1.0);
        let bic = n_eff * (chi2 / n as f64).max(1e-300).ln() + k as f64 * n_eff.ln();
        if best.as_ref().is_none_or(|(b, _)| bic < *b) {
            best = Some((bic, c.as_slice().to_vec()));
        }
    }
    best.map(|(_, c)| c).ok_or_else(|| {
        FindError::Unmeasurable("the glow under the rings could not be fitted".into())
    })
}

/// Tukey's biweight (1 − u²)² for |u| < 1, else 0.
fn biweight(u: f64) -> f64 {
    if u.abs() < 1.0 {
        (1.0 - u * u).powi(2)
    } else {
        0.0
    }
}

/// The standard deviation of zero-mean noise read from its negative side alone,
/// √(mean z² over z < 0): what ring light, always positive, cannot inflate.
fn lower_sigma(values: impl Iterator<Item = f64>) -> f64 {
    let (mut sum, mut n) = (0.0, 0usize);
    for z in values.filter(|z| *z < 0.0) {
        sum += z * z;
        n += 1;
    }
    if n == 0 { 0.0 } else { (sum / n as f64).sqrt() }
}

/// Gaussian smoothing with σ = `sigma` samples, renormalised at the ends.
fn smooth(z: &[f64], sigma: f64) -> Vec<f64> {
    let half = (3.0 * sigma).ceil() as usize;
    let kernel: Vec<f64> = (0..=2 * half)
        .map(|j| (-0.5 * ((j as f64 - half as f64) / sigma.max(1e-9)).powi(2)).exp())
        .collect();
    (0..z.len())
        .map(|i| {
            let (mut acc, mut w) = (0.0, 0.0);
            for (j, k) in kernel.iter().enumerate() {
                if let Some(v) = (i + j).checked_sub(half).and_then(|q| z.get(q)) {
                    acc += k * v;
                    w += k;
                }
            }
            acc / w
        })
        .collect()
}

/// The kept mask from the flagged bins, each flagged stretch widened by `grow` on both
/// sides.
fn widen(flagged: &[bool], grow: usize) -> Vec<bool> {
    let m = flagged.len();
    let mut keep = vec![true; m];
    for (j, _) in flagged.iter().enumerate().filter(|(_, f)| **f) {
        keep[j.saturating_sub(grow)..(j + grow + 1).min(m)].fill(false);
    }
    keep
}

#[cfg(test)]
mod tests {
    use super::*;

    fn profile_of(r_mm: &[f64], f: impl Fn(f64) -> f64, rel_se: f64) -> RadialProfile {
        let value: Vec<f64> = r_mm.iter().map(|&r| f(r)).collect();
        RadialProfile {
            r_mm: r_mm.to_vec(),
            std_error: value.iter().map(|v| v * rel_se).collect(),
            sectors: vec![36; r_mm.len()],
            clipped: vec![false; r_mm.len()],
            value,
        }
    }

    fn radii(bin: f64, n: usize) -> Vec<f64> {
        (0..n).map(|i| (i as f64 + 0.5) * bin).collect()
    }

    #[test]
    fn chebyshev_recurrence_matches_the_closed_forms() {
        // T2 = 2t² − 1, T3 = 4t³ − 3t (Abramowitz & Stegun 22.3.15).
        for t in [-0.9, -0.2, 0.3, 0.77] {
            let got = chebyshev(&[0.5, -1.0, 2.0, 0.25], t);
            let want = 0.5 - t + 2.0 * (2.0 * t * t - 1.0) + 0.25 * (4.0 * t * t * t - 3.0 * t);
            assert!((got - want).abs() < 1e-14, "{t}: {got} vs {want}");
        }
    }

    #[test]
    fn the_derivative_series_differentiates() {
        // d/dt of T3 = 4t³ − 3t is 12t² − 3; of T2 = 2t² − 1 is 4t.
        let c = [0.3, 0.0, 1.5, -0.5];
        let d = derivative_coefficients(&c);
        for t in [-0.7, 0.1, 0.9] {
            let want = 1.5 * 4.0 * t - 0.5 * (12.0 * t * t - 3.0);
            assert!((chebyshev(&d, t) - want).abs() < 1e-13, "{t}");
        }
    }

    #[test]
    fn a_power_law_glow_is_reproduced() {
        // r⁻³ is a straight line in ln r: any degree holds it to rounding.
        let r = radii(0.07, 800);
        let p = profile_of(&r, |r| 40.0 * r.powi(-3), 1e-3);
        let g = Glow::fit(&p, 4.0, 50.0, 0.14).unwrap();
        for x in [4.5, 10.0, 33.3, 49.0] {
            assert!((g.at(x) / (40.0 * x.powi(-3)) - 1.0).abs() < 1e-9, "{x}");
            assert!((g.log_slope(x) + 3.0 / x).abs() < 1e-6, "{x}");
        }
    }

    #[test]
    fn rings_are_excluded_and_do_not_lift_the_glow() {
        // A knee-shaped glow with three rings 4 % high: the glow under them must stay
        // within a few tenths of a per cent of the true one.
        let glow = |r: f64| 0.6 * (1.0 + (r / 9.0).powi(2)).powf(-1.5) + 0.03;
        let rings = [(10.0, 0.35), (16.7, 0.35), (19.6, 0.4)];
        let f = |r: f64| {
            glow(r)
                * (1.0
                    + rings
                        .iter()
                        .map(|(c, s)| 0.04 * (-0.5 * ((r - c) / s).powi(2)).exp())
                        .sum::<f64>())
        };
        let r = radii(0.07, 800);
        let p = profile_of(&r, f, 2e-3);
        let g = Glow::fit(&p, 4.0, 48.0, 0.14).unwrap();
        for (c, _) in rings {
            let e = g.at(c) / glow(c) - 1.0;
            assert!(e.abs() < 4e-3, "under the ring at {c} mm: {e}");
            let i = r.iter().position(|&x| x >= c).unwrap();
            assert!(!g.kept[i], "the ring at {c} mm was kept");
        }
    }

    #[test]
    fn the_tube_edge_is_found_and_the_spot_flank_is_not_an_edge() {
        // A saturated spot to 3 mm with a steep flank, glow to a sharp edge at 50 mm,
        // then dark: the edge must come out at 50 mm, within a bin.
        let bin = 0.07;
        let r = radii(bin, 1000);
        let f = |r: f64| {
            if r > 50.0 {
                0.003
            } else {
                0.6 * (1.0 + (r / 9.0).powi(2)).powf(-1.5) + 0.04 + 20.0 * (-r / 0.8).exp()
            }
        };
        let mut p = profile_of(&r, f, 1e-3);
        for i in 0..r.len() {
            if r[i] < 3.0 {
                p.clipped[i] = true;
                p.value[i] = 1.0;
            }
        }
        let reach = spot_reach_mm(&p, 0.14);
        assert!(reach > 3.0 && reach < 8.0, "{reach}");
        let e = tube_edge(&p, reach, 0.14).unwrap();
        assert!((e.radius_mm - 50.0).abs() < bin, "{e:?}");
    }
}
