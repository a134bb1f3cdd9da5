//! Rings as peaks on the glow of a phosphor screen. The profile's range runs from the edge
//! of the beam's spot to just inside the tube's outline or the frame ([`super::glow`]); the
//! glow is fitted there with the rings excluded, and the rings are looked for in the
//! contrast c(r) = I(r)/G(r) − 1, where a broad ring a few per cent high on a steeply falling
//! glow stands out whether or not it is a maximum of the raw profile.
//!
//! Candidates are the maxima of the scale-normalised second derivative −σ²·(c ∗ G″σ) over
//! position and scale (Lindeberg 1998, "Feature detection with automatic scale selection",
//! IJCV 30:79), which also finds a ring sitting on the flank of a stronger one. Candidates
//! whose windows overlap are fitted together by Levenberg–Marquardt with the model
//!
//! I(r) = G(r)·(1 + p₀ + p₁·x + p₂·x²) + Σₖ aₖ·G(rₖ)·(rₖ/r)·exp(−(r − rₖ)²/(2sₖ²)),
//!
//! x the position in the window: a local quadratic correction of the glow, and per ring a
//! Gaussian in radius whose power is spread over the ring's circumference (the rₖ/r factor:
//! a Debye–Scherrer cone's power per unit deflection is what is Gaussian; per unit area of
//! screen it falls as 1/r across the ring, which would otherwise pull the peak inwards by
//! s²/r). The covariance is a sandwich with the residuals' autocorrelation
//! ([`crate::fit::hac::known_correlation_covariance`]), since neighbouring bins share
//! pixels, blur and grain.
//!
//! Significance, stated in the record: a ring counts when its height over the glow aₖ is at
//! least [`MIN_SIGNIFICANCE`] (6) standard uncertainties (more than the usual 5: a profile
//! offers many places and widths for a noise bump to look like a ring), its FWHM is at least 1.5 pixels (less is
//! narrower than the camera can draw a ring) and at most 0.3 of its radius (broader is a
//! bend of the glow, not a ring), and its fit did not run to a bound. Rejected candidates
//! are dropped one at a time, weakest first, and their neighbours refitted. Where three
//! rings or more count, one over twice their median width is dropped too: an unresolved
//! pair, whose single radius would mislead the indexing, or a wave of the glow.
//!
//! The uncertainties take the noise's correlation along the radius from a long series,
//! where it is well determined, rather than from each ring's short window: from the
//! sectors' deviations from their mean profile where the radial table is at hand (rings
//! and glow cancel there, [`NoiseSource`]), else from the glow fit's ring-free residuals.
//! Its size is that of the bins' standard errors, or the window's own residual scatter
//! where larger.

use super::glow::{Glow, TubeEdge, spot_reach_mm, tube_edge};
use super::radial::RadialProfile;
use crate::find::FindError;
use crate::fit::hac::{known_correlation_covariance, tapered_autocorrelation};
use crate::fit::lm::{
    Bounds, LeastSquares, LmOptions, LmReport, forward_difference_jacobian, minimize_bounded,
};
use nalgebra::DMatrix;
use rayon::prelude::*;

/// Least height over the glow, in standard uncertainties, of a ring that counts.
pub const MIN_SIGNIFICANCE: f64 = 6.0;
/// Least FWHM of a ring, px.
pub const MIN_FWHM_PX: f64 = 1.5;
/// Largest FWHM of a ring as a share of its radius.
pub const MAX_FWHM_SHARE: f64 = 0.3;
/// Half-width of a ring's window in σ (and 3 px more).
const WINDOW_SIGMAS: f64 = 5.0;
/// Indices of the ring's height, radius and σ in its fit, after the local correction of
/// the glow (1 + p₀ + p₁x + p₂x²); the neighbours' (a, r) follow from [`NEIGHBOURS`].
const A: usize = 3;
const R: usize = 4;
const S: usize = 5;
const NEIGHBOURS: usize = 6;
/// Least relative standard error a bin is weighed with, as a share of the median: a bin
/// whose sectors happen to agree closely must not pin a fit.
const SE_FLOOR: f64 = 0.3;
/// Rings broader than this times the median σ are tried as two ([`split_broad`]).
pub const SPLIT_FACTOR: f64 = 1.3;
/// Rings broader than this times the median are dropped ([`drop_broad`]).
pub const BROAD_FACTOR: f64 = 2.0;
/// Candidates below this normalised response (in noise units) are not fitted.
const CANDIDATE_Z: f64 = 3.0;
/// Candidates whose best scales give the rings' width.
const WIDTH_PROBES: usize = 5;
/// Most candidates fitted.
const MAX_CANDIDATES: usize = 60;
/// Scales of the second-derivative filter, px.
const SCALES_PX: [f64; 8] = [1.0, 1.5, 2.0, 3.0, 4.0, 6.0, 8.0, 12.0];
const FWHM_PER_SIGMA: f64 = 2.354_820_045_030_949;

/// How to search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeakOptions {
    /// Size of a photo pixel on the screen, mm.
    pub px_mm: f64,
    /// The spot reaches at least this far, mm (e.g. the clipped core seen on the block
    /// map); the profile may show it reaching further.
    pub core_mm: f64,
}

/// Where the noise's correlation along the radius comes from.
pub trait NoiseSource {
    /// The tapered autocorrelation by lag in bins over [from_mm, to_mm], or None to have it
    /// estimated from the ring-free residuals of the glow fit.
    fn autocorrelation(
        &self,
        profile: &RadialProfile,
        from_mm: f64,
        to_mm: f64,
    ) -> Option<Vec<f64>>;
}

/// No independent source: the glow fit's residuals tell.
pub struct FromResiduals;

impl NoiseSource for FromResiduals {
    fn autocorrelation(&self, _: &RadialProfile, _: f64, _: f64) -> Option<Vec<f64>> {
        None
    }
}

/// The sectors' deviations from their mean profile tell (rings and glow cancel there).
impl NoiseSource for super::radial::RadialCells {
    fn autocorrelation(
        &self,
        profile: &RadialProfile,
        from_mm: f64,
        to_mm: f64,
    ) -> Option<Vec<f64>> {
        let acf = self.noise_autocorrelation(profile, from_mm, to_mm);
        (!acf.is_empty()).then_some(acf)
    }
}

/// A ring found on the glow.
#[derive(Debug, Clone, PartialEq)]
pub struct RingPeak {
    /// Radius, mm.
    pub radius_mm: f64,
    /// Its standard uncertainty, mm.
    pub u_radius_mm: f64,
    /// Full width at half maximum, mm.
    pub fwhm_mm: f64,
    /// Its standard uncertainty, mm.
    pub u_fwhm_mm: f64,
    /// Height over the glow at the peak, as a fraction of the glow.
    pub contrast: f64,
    /// Its standard uncertainty.
    pub u_contrast: f64,
    /// `contrast / u_contrast`.
    pub significance: f64,
    /// Fewest sectors that covered the profile across the ring (fewer than the table's
    /// sectors: the ring runs partly off the frame).
    pub sectors: u16,
    /// Lags of residual correlation allowed for in its covariance.
    pub lags: usize,
}

/// A candidate that did not count, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct Rejected {
    /// Where it was, mm.
    pub radius_mm: f64,
    /// Why it was dropped.
    pub why: String,
}

/// The outcome of [`find_ring_peaks`].
#[derive(Debug, Clone)]
pub struct RingSearch {
    /// The fitted glow.
    pub glow: Glow,
    /// How far the spot reaches, mm.
    pub spot_mm: f64,
    /// The tube's outline, where seen.
    pub edge: Option<TubeEdge>,
    /// Where the profile stops having values inside the outline (the frame cuts the
    /// pattern there), mm.
    pub frame_cut_mm: Option<f64>,
    /// The radii searched, mm.
    pub range_mm: (f64, f64),
    /// The rings, by radius.
    pub peaks: Vec<RingPeak>,
    /// Candidates that did not count.
    pub rejected: Vec<Rejected>,
    /// Per profile bin: the glow (NaN outside the range).
    pub background: Vec<f64>,
    /// Per profile bin: the glow plus the rings (NaN outside the range).
    pub model: Vec<f64>,
    /// Autocorrelation of the ring-free residuals by lag in bins (tapered), which every
    /// ring's covariance is built with.
    pub noise_acf: Vec<f64>,
    /// Least relative standard error a bin is weighed with.
    se_floor_rel: f64,
    /// The rings' common σ as the filter saw it, mm: sets the clusters and their windows.
    ring_sigma: f64,
    /// The noise's size in units of the bins' standard errors: 1 where the correlation
    /// comes from the sectors (their scatter made the errors), else the glow's scatter.
    noise_scale: f64,
}

impl RingSearch {
    /// The rings' light at `r_mm` as a fraction of the glow there.
    pub fn rings_contrast(&self, r_mm: f64) -> f64 {
        let g = self.glow.at(r_mm);
        self.peaks
            .iter()
            .map(|p| p.contrast * self.glow.at(p.radius_mm) / g * ring_shape(r_mm, p))
            .sum()
    }
}

fn ring_shape(r: f64, p: &RingPeak) -> f64 {
    let s = p.fwhm_mm / FWHM_PER_SIGMA;
    p.radius_mm / r * (-0.5 * ((r - p.radius_mm) / s).powi(2)).exp()
}

/// Finds the rings in a radial profile (module docs). Errors when there is too little
/// glow to search; a profile without rings gives an empty list, not an error.
pub fn find_ring_peaks(
    profile: &RadialProfile,
    opts: &PeakOptions,
    noise: &dyn NoiseSource,
) -> Result<RingSearch, FindError> {
    let n = profile.r_mm.len();
    if n < 16 {
        return Err(FindError::Unmeasurable(
            "the radial profile is too short to hold rings".into(),
        ));
    }
    let bin = profile.r_mm[1] - profile.r_mm[0];
    let px = opts.px_mm;
    let spot_mm = spot_reach_mm(profile, px).max(opts.core_mm);
    let edge = tube_edge(profile, spot_mm, px);
    // Inside the outline, keep clear of its blur and of a centre a pixel or two off.
    let mut hi = edge.map_or(f64::INFINITY, |e| {
        e.radius_mm - 10.0 * px - 0.01 * e.radius_mm
    });
    let first = profile.r_mm.iter().position(|&r| r >= spot_mm).unwrap_or(n);
    let last_lit = (first..n)
        .take_while(|&i| profile.r_mm[i] <= hi && profile.has(i))
        .last();
    let frame_cut_mm = match last_lit {
        Some(i) if i + 1 < n && profile.r_mm[i + 1] <= hi => Some(profile.r_mm[i]),
        _ => None,
    };
    if let Some(cut) = frame_cut_mm {
        hi = hi.min(cut - 3.0 * px);
    }
    if !hi.is_finite() {
        hi = profile.r_mm[n - 1];
    }
    let lo = spot_mm;
    let glow = Glow::fit(profile, lo, hi, px)?;
    let inside: Vec<usize> = (0..n)
        .filter(|&i| {
            let r = profile.r_mm[i];
            r >= lo && r <= hi && profile.has(i) && !profile.clipped[i]
        })
        .collect();
    let g: Vec<f64> = (0..n).map(|i| glow.at(profile.r_mm[i])).collect();
    let contrast: Vec<f64> = (0..n)
        .map(|i| {
            if inside.binary_search(&i).is_ok() {
                profile.value[i] / g[i] - 1.0
            } else {
                f64::NAN
            }
        })
        .collect();
    let mut rel: Vec<f64> = inside
        .iter()
        .map(|&i| profile.std_error[i] / profile.value[i])
        .filter(|s| s.is_finite() && *s > 0.0)
        .collect();
    rel.sort_unstable_by(f64::total_cmp);
    let se_floor_rel = rel
        .get(rel.len() / 2)
        .map_or(1e-9, |m| SE_FLOOR * m)
        .max(1e-12);
    let z: Vec<f64> = (0..n)
        .map(|i| {
            let se = profile.std_error[i].max(se_floor_rel * profile.value[i]);
            (profile.value[i] - g[i]) / se
        })
        .collect();
    let (noise_acf, noise_scale) = match noise.autocorrelation(profile, lo, hi) {
        Some(acf) => (acf, 1.0),
        None => (tapered_autocorrelation(&z, &glow.kept), glow.scatter),
    };
    if noise_acf.is_empty() {
        return Err(FindError::Unmeasurable(
            "too little of the glow is free of rings to judge the noise on".into(),
        ));
    }
    let found = scale_space_maxima(&contrast, &glow.kept, bin, px);
    let mut search = RingSearch {
        glow,
        spot_mm,
        edge,
        frame_cut_mm,
        range_mm: (lo, hi),
        peaks: Vec::new(),
        rejected: Vec::new(),
        background: vec![f64::NAN; n],
        model: vec![f64::NAN; n],
        noise_acf,
        se_floor_rel,
        ring_sigma: f64::NAN,
        noise_scale,
    };
    // Rings of one film share a width (the crystallites' size and the beam's divergence
    // set it): the scales at which the most prominent candidates answer best show it; only
    // answers at scales within a factor of two of their median are taken, and two closer
    // than 1.2 of its σ are one (two equal Gaussians that close show a single maximum).
    let mut strongest = suppress(&found, 0.0);
    strongest.sort_by(|a, b| b.z.total_cmp(&a.z));
    // The clearest answers only: those at least half as strong as the strongest.
    let z_max = strongest.first().map_or(0.0, |c| c.z);
    let clear = strongest
        .iter()
        .filter(|c| c.z >= MIN_SIGNIFICANCE.max(0.5 * z_max))
        .count()
        .max(1);
    let mut widths: Vec<f64> = strongest
        .iter()
        .take(WIDTH_PROBES.min(clear))
        .map(|c| c.s)
        .collect();
    widths.sort_unstable_by(f64::total_cmp);
    if let Some(&s_typ) = widths.get(widths.len() / 2) {
        search.ring_sigma = s_typ;
        let near: Vec<Candidate> = found
            .iter()
            .copied()
            .filter(|c| c.s >= 0.5 * s_typ && c.s <= 2.0 * s_typ)
            .collect();
        // A ring needs glow on both sides of it to be measured against.
        let margin = 1.5 * s_typ + 2.0 * px;
        let (inner, edge): (Vec<Candidate>, Vec<Candidate>) = suppress(&near, 1.2 * s_typ)
            .into_iter()
            .partition(|c| c.r > lo + margin && c.r < hi - margin);
        for c in edge {
            search.rejected.push(Rejected {
                radius_mm: c.r,
                why: "too close to the spot, the tube's edge or the frame to measure against \
                      the glow"
                    .into(),
            });
        }
        let (peaks, rejected) = settle(profile, &search, inner, px);
        search.peaks = peaks;
        search.rejected.extend(rejected);
    }
    search
        .peaks
        .sort_by(|a, b| a.radius_mm.total_cmp(&b.radius_mm));
    drop_twice_told(&mut search);
    split_broad(profile, &mut search, px);
    drop_broad(&mut search);
    for &i in &inside {
        let r = profile.r_mm[i];
        search.background[i] = g[i];
        search.model[i] = g[i] * (1.0 + search.rings_contrast(r));
    }
    Ok(search)
}

/// Fits every candidate in its own window (with the candidates near it as neighbours of
/// fixed width) and drops the failing ones, those of the wrong shape first (they distort
/// their neighbours most), then the faint ones, refitting until all that remain count.
fn settle(
    profile: &RadialProfile,
    search: &RingSearch,
    mut cands: Vec<Candidate>,
    px: f64,
) -> (Vec<RingPeak>, Vec<Rejected>) {
    let mut rejected = Vec::new();
    for _ in 0..12 {
        if cands.is_empty() {
            break;
        }
        let verdicts: Vec<Result<RingPeak, Verdict>> = (0..cands.len())
            .into_par_iter()
            .map(|k| fit_ring(profile, search, &cands, k, px))
            .collect();
        let failing = |shape: bool| -> Vec<usize> {
            verdicts
                .iter()
                .enumerate()
                .filter(|(_, v)| v.as_ref().is_err_and(|e| e.shape == shape))
                .map(|(k, _)| k)
                .collect()
        };
        let mut drop = failing(true);
        if drop.is_empty() {
            // Of faint ones near each other, only the faintest goes in a pass: its light may
            // be what held the others down.
            let faint = failing(false);
            let sig = |k: usize| match &verdicts[k] {
                Ok(p) => p.significance,
                Err(_) => strength_of(&verdicts[k]),
            };
            drop = faint
                .iter()
                .copied()
                .filter(|&k| {
                    !faint.iter().any(|&j| {
                        j != k
                            && (cands[j].r - cands[k].r).abs() < reach(search, &cands[k], px)
                            && sig(j) < sig(k)
                    })
                })
                .collect();
        }
        if drop.is_empty() {
            return (verdicts.into_iter().flatten().collect(), rejected);
        }
        // Better starts for the next pass.
        for (c, v) in cands.iter_mut().zip(&verdicts) {
            if let Ok(p) = v {
                c.r = p.radius_mm;
                c.s = p.fwhm_mm / FWHM_PER_SIGMA;
                c.a = p.contrast;
            }
        }
        for &k in drop.iter().rev() {
            let why = verdicts[k]
                .as_ref()
                .err()
                .map(|e| e.why.clone())
                .unwrap_or_default();
            rejected.push(Rejected {
                radius_mm: cands[k].r,
                why,
            });
            cands.remove(k);
        }
    }
    // Still changing after every pass: keep none rather than a guess.
    for c in cands {
        rejected.push(Rejected {
            radius_mm: c.r,
            why: "its fit did not settle with its neighbours'".into(),
        });
    }
    (Vec::new(), rejected)
}

/// Rings closer than the wider one's σ, each accepted in its own window, are one ring:
/// the less significant goes.
fn drop_twice_told(search: &mut RingSearch) {
    let mut k = 1;
    while k < search.peaks.len() {
        let (a, b) = (&search.peaks[k - 1], &search.peaks[k]);
        let s = a.fwhm_mm.max(b.fwhm_mm) / FWHM_PER_SIGMA;
        if b.radius_mm - a.radius_mm < 1.2 * s {
            let weaker = if a.significance < b.significance {
                k - 1
            } else {
                k
            };
            let other = search.peaks[2 * k - 1 - weaker].radius_mm;
            let gone = search.peaks.remove(weaker);
            search.rejected.push(Rejected {
                radius_mm: gone.radius_mm,
                why: format!("the same ring as the one at {other:.3} mm, told twice"),
            });
        } else {
            k += 1;
        }
    }
}

/// The significance a faint verdict reports (its text leads with it), for ranking.
fn strength_of(v: &Result<RingPeak, Verdict>) -> f64 {
    match v {
        Ok(p) => p.significance,
        Err(e) => e.significance,
    }
}

/// How far a ring's window reaches, mm.
fn reach(search: &RingSearch, c: &Candidate, px: f64) -> f64 {
    let s = if search.ring_sigma.is_finite() {
        c.s.max(search.ring_sigma)
    } else {
        c.s
    };
    WINDOW_SIGMAS * s + 3.0 * px
}

/// With three rings or more, a ring over [`SPLIT_FACTOR`] times the median σ may be two
/// unresolved ones (gold's 311 and 222 lie 1.1 FWHM apart on a tube): it is refitted as
/// two, placed ±√(σ² − σₘ²) about it (the separation that gives two equal Gaussians of
/// the median σₘ its second moment); the split stands when both count.
fn split_broad(profile: &RadialProfile, search: &mut RingSearch, px: f64) {
    if search.peaks.len() < 3 {
        return;
    }
    let median_s = median_fwhm(&search.peaks) / FWHM_PER_SIGMA;
    let as_candidate = |p: &RingPeak| {
        let s = p.fwhm_mm / FWHM_PER_SIGMA;
        Candidate {
            r: p.radius_mm,
            s,
            a: p.contrast,
            z: p.significance,
            s0: s,
        }
    };
    let mut k = 0;
    while k < search.peaks.len() {
        let broad = search.peaks[k].clone();
        let s = broad.fwhm_mm / FWHM_PER_SIGMA;
        if s <= SPLIT_FACTOR * median_s {
            k += 1;
            continue;
        }
        let half_gap = (s * s - median_s * median_s).sqrt();
        let mut cands: Vec<Candidate> = search
            .peaks
            .iter()
            .enumerate()
            .filter(|(j, _)| *j != k)
            .map(|(_, p)| as_candidate(p))
            .collect();
        let first = cands.len();
        for sign in [-1.0, 1.0] {
            cands.push(Candidate {
                r: broad.radius_mm + sign * half_gap,
                s: median_s,
                a: broad.contrast,
                z: broad.significance,
                s0: median_s,
            });
        }
        let halves: Vec<Result<RingPeak, Verdict>> = (first..first + 2)
            .map(|j| fit_ring(profile, search, &cands, j, px))
            .collect();
        if let [Ok(a), Ok(b)] = &halves[..] {
            let (a, b) = (a.clone(), b.clone());
            search.peaks.remove(k);
            search.peaks.insert(k, b);
            search.peaks.insert(k, a);
            k += 2;
        } else {
            k += 1;
        }
    }
}

fn median_fwhm(peaks: &[RingPeak]) -> f64 {
    let mut w: Vec<f64> = peaks.iter().map(|p| p.fwhm_mm).collect();
    w.sort_unstable_by(f64::total_cmp);
    w[w.len() / 2]
}

/// With three rings or more, rings over [`BROAD_FACTOR`] times the median FWHM are not of
/// the pattern: an unresolved pair (whose single radius would mislead the indexing) or a
/// wave of the glow.
fn drop_broad(search: &mut RingSearch) {
    if search.peaks.len() < 3 {
        return;
    }
    let median = median_fwhm(&search.peaks);
    let (keep, broad): (Vec<RingPeak>, Vec<RingPeak>) = search
        .peaks
        .drain(..)
        .partition(|p| p.fwhm_mm <= BROAD_FACTOR * median);
    search.peaks = keep;
    for p in broad {
        search.rejected.push(Rejected {
            radius_mm: p.radius_mm,
            why: format!(
                "{:.2} mm wide at half height, {:.1}× the rings' median: an unresolved pair of \
                 rings or a wave of the glow",
                p.fwhm_mm,
                p.fwhm_mm / median
            ),
        });
    }
}

/// A candidate ring: position (mm), Gaussian σ (mm), height (contrast) and the filter's
/// answer in noise units.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Candidate {
    r: f64,
    s: f64,
    a: f64,
    z: f64,
    /// σ as the filter first saw it.
    s0: f64,
}

/// Maxima over position at each scale of the normalised response, in units of its noise
/// on the bins the glow fit kept (ring-free), strongest first.
fn scale_space_maxima(contrast: &[f64], kept: &[bool], bin: f64, px: f64) -> Vec<Candidate> {
    let n = contrast.len();
    let mut found: Vec<Candidate> = Vec::new();
    for &scale_px in &SCALES_PX {
        let sigma = scale_px * px / bin; // bins
        if sigma < 0.7 {
            continue;
        }
        let half = (4.0 * sigma).ceil() as usize;
        if 2 * half + 1 > n / 2 {
            break;
        }
        // −σ²·G″σ: (1 − u²)·exp(−u²/2)/(σ√(2π)) with u = k/σ, made zero-sum so that a
        // linear trend gives nothing.
        let mut kernel: Vec<f64> = (0..=2 * half)
            .map(|j| {
                let u = (j as f64 - half as f64) / sigma;
                (1.0 - u * u) * (-0.5 * u * u).exp() / (sigma * (2.0 * std::f64::consts::PI).sqrt())
            })
            .collect();
        let mean = kernel.iter().sum::<f64>() / kernel.len() as f64;
        for k in &mut kernel {
            *k -= mean;
        }
        let response: Vec<f64> = (0..n)
            .map(|i| {
                if i < half || i + half >= n || !contrast[i].is_finite() {
                    return f64::NAN;
                }
                // Beyond the searched range the light is taken as the glow's.
                kernel
                    .iter()
                    .enumerate()
                    .map(|(j, k)| {
                        let c = contrast[i + j - half];
                        if c.is_finite() { k * c } else { 0.0 }
                    })
                    .sum()
            })
            .collect();
        let quiet: Vec<f64> = (0..n)
            .filter(|&i| kept[i] && response[i].is_finite())
            .map(|i| response[i])
            .collect();
        if quiet.len() < 20 {
            continue;
        }
        let noise = mad_sigma(&quiet).max(1e-12);
        // A Gaussian ring of σr answers most at σ = √2·σr, with 2/3^1.5 of its height.
        let s_ring = sigma / std::f64::consts::SQRT_2 * bin;
        for i in 1..n - 1 {
            let z = response[i] / noise;
            if z >= CANDIDATE_Z && response[i] >= response[i - 1] && response[i] > response[i + 1] {
                found.push(Candidate {
                    r: (i as f64 + 0.5) * bin,
                    s: s_ring,
                    a: response[i] * 3f64.powf(1.5) / 2.0,
                    z,
                    s0: s_ring,
                });
            }
        }
    }
    found.sort_by(|a, b| b.z.total_cmp(&a.z));
    found
}

/// Non-maximum suppression over position and scale: within `min_sep` mm (or the
/// narrower one's σ, where larger), the stronger answer stands for both. `found` is
/// strongest first; the result is by radius.
fn suppress(found: &[Candidate], min_sep: f64) -> Vec<Candidate> {
    let mut out: Vec<Candidate> = Vec::new();
    for &c in found {
        if out
            .iter()
            .any(|o| (o.r - c.r).abs() < o.s.min(c.s).max(min_sep))
        {
            continue;
        }
        out.push(c);
        if out.len() >= MAX_CANDIDATES {
            break;
        }
    }
    out.sort_by(|a, b| a.r.total_cmp(&b.r));
    out
}

/// One ring's least-squares problem (module docs), residuals weighted by the bins'
/// standard errors. Parameters: p₀, p₁, p₂, the ring's (a, r, σ), then (a, r) of each
/// neighbour in the window, which shares σ (rings this close have one width: it changes
/// with the deflection only through cos θ).
struct RingFit<'a> {
    r: Vec<f64>,
    v: Vec<f64>,
    w: Vec<f64>,
    glow: &'a Glow,
    centre: f64,
    half: f64,
    /// Rings outside the window whose tails reach into it, as last fitted.
    fixed: Vec<Candidate>,
}

/// A ring's light at `r`: height `a` over the glow at its radius `rk`, spread over its
/// circumference.
fn ring_light(glow: &Glow, a: f64, rk: f64, s: f64, r: f64) -> f64 {
    a * glow.at(rk) * rk / r * (-0.5 * ((r - rk) / s).powi(2)).exp()
}

impl RingFit<'_> {
    fn model(&self, p: &[f64], r: f64) -> f64 {
        let x = (r - self.centre) / self.half;
        let mut m = self.glow.at(r) * (1.0 + p[0] + p[1] * x + p[2] * x * x);
        m += ring_light(self.glow, p[A], p[R], p[S], r);
        for q in p[NEIGHBOURS..].chunks(2) {
            m += ring_light(self.glow, q[0], q[1], p[S], r);
        }
        for c in &self.fixed {
            m += ring_light(self.glow, c.a, c.r, c.s, r);
        }
        m
    }
}

impl LeastSquares for RingFit<'_> {
    fn residual_count(&self) -> usize {
        self.r.len()
    }

    fn residuals(&self, p: &[f64], out: &mut [f64]) -> bool {
        for (o, ((&r, &v), &w)) in out.iter_mut().zip(self.r.iter().zip(&self.v).zip(&self.w)) {
            *o = (v - self.model(p, r)) * w;
        }
        out.iter().all(|x| x.is_finite())
    }

    /// Analytic: the glow's polynomial has an exact derivative, and the solver then needs
    /// no difference steps, which nearly noise-free profiles do not forgive.
    fn jacobian(&self, p: &[f64], _r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        let s = p[S];
        // Per ring: G(rk), d(G(rk)·rk)/drk.
        let rings: Vec<(usize, f64, f64)> = std::iter::once((A, p[A], p[R]))
            .chain(
                p[NEIGHBOURS..]
                    .chunks(2)
                    .enumerate()
                    .map(|(j, q)| (NEIGHBOURS + 2 * j, q[0], q[1])),
            )
            .collect();
        let pre: Vec<(f64, f64)> = rings
            .iter()
            .map(|&(_, _, rk)| {
                let g = self.glow.at(rk);
                (g, g * (1.0 + rk * self.glow.log_slope(rk)))
            })
            .collect();
        for i in 0..self.r.len() {
            let r = self.r[i];
            let w = -self.w[i];
            let x = (r - self.centre) / self.half;
            let g = self.glow.at(r);
            jac[(i, 0)] = w * g;
            jac[(i, 1)] = w * g * x;
            jac[(i, 2)] = w * g * x * x;
            let mut ds = 0.0;
            for (&(col, a, rk), &(grk, dgr)) in rings.iter().zip(&pre) {
                let d = r - rk;
                let e = (-0.5 * (d / s).powi(2)).exp();
                jac[(i, col)] = w * grk * rk / r * e;
                jac[(i, col + 1)] = w * a / r * e * (dgr + grk * rk * d / (s * s));
                ds += a * grk * rk / r * e * d * d / (s * s * s);
            }
            jac[(i, S)] = w * ds;
        }
        jac.iter().all(|v| v.is_finite())
    }
}

/// Fits candidate `k` of `cands` over its window (±5σ and 3 px, σ its own or the rings'
/// common one, whichever is wider), with every candidate whose light reaches the window as
/// a neighbour, and judges it. Where that fit does not converge (a spurious neighbour
/// whose height goes to nothing leaves its position free to drift), the ring is fitted
/// again with its neighbours held at their last fit.
///
/// A ring that comes out wider than its window was made for is fitted again in a window
/// for its fitted width (twice at most): the filter's scale is only a first guess.
fn fit_ring(
    profile: &RadialProfile,
    search: &RingSearch,
    cands: &[Candidate],
    k: usize,
    px: f64,
) -> Result<RingPeak, Verdict> {
    let mut cands = cands.to_vec();
    let mut out = Err(Verdict::shape("not fitted"));
    for _ in 0..3 {
        out = match fit_ring_with(profile, search, &cands, k, px, true) {
            Err(v) if v.unconverged => fit_ring_with(profile, search, &cands, k, px, false),
            other => other,
        };
        let fitted = match &out {
            Ok(p) => Some((p.fwhm_mm / FWHM_PER_SIGMA, p.radius_mm, p.contrast)),
            Err(v) => v.fitted,
        };
        match fitted {
            Some((s, r, a)) if s > 1.3 * cands[k].s && s.is_finite() => {
                cands[k].s = s;
                cands[k].r = r;
                cands[k].a = a;
            }
            _ => break,
        }
    }
    out
}

fn fit_ring_with(
    profile: &RadialProfile,
    search: &RingSearch,
    cands: &[Candidate],
    k: usize,
    px: f64,
    free_neighbours: bool,
) -> Result<RingPeak, Verdict> {
    let me = cands[k];
    let half = reach(search, &me, px);
    let (lo, hi) = search.range_mm;
    // Neighbours within its reach are fitted with it, sharing its σ, and the window is
    // widened to reach as far beyond them (a neighbour on the window's edge would be held
    // by half its light); others whose tails reach in are held at their last fit (their
    // own windows measure them).
    let others: Vec<Candidate> = cands
        .iter()
        .enumerate()
        .filter(|&(j, _)| j != k)
        .map(|(_, c)| *c)
        .collect();
    let near = |c: &Candidate| (c.r - me.r).abs() < half;
    let span = others
        .iter()
        .filter(|c| free_neighbours && near(c))
        .fold((me.r, me.r), |(a, b), c| (a.min(c.r), b.max(c.r)));
    let (from, to) = ((span.0 - half).max(lo), (span.1 + half).min(hi));
    let (neighbours, outside): (Vec<Candidate>, Vec<Candidate>) = others
        .into_iter()
        .filter(|c| c.r + 3.0 * c.s > from && c.r - 3.0 * c.s < to)
        .partition(|c| free_neighbours && near(c));
    let idx: Vec<usize> = (0..profile.r_mm.len())
        .filter(|&i| {
            let r = profile.r_mm[i];
            r >= from && r <= to && profile.has(i) && !profile.clipped[i]
        })
        .collect();
    let n_par = NEIGHBOURS + 2 * neighbours.len();
    if idx.len() < 2 * n_par + 8 {
        return Err(Verdict::shape(
            "too close to the spot, the tube's edge or the frame to fit",
        ));
    }
    let problem = RingFit {
        r: idx.iter().map(|&i| profile.r_mm[i]).collect(),
        v: idx.iter().map(|&i| profile.value[i]).collect(),
        w: idx
            .iter()
            .map(|&i| 1.0 / profile.std_error[i].max(search.se_floor_rel * profile.value[i]))
            .collect(),
        glow: &search.glow,
        centre: 0.5 * (from + to),
        half: 0.5 * (to - from),
        fixed: outside,
    };
    // Only the width is bounded (below, at a fraction of a pixel): a bound on a position
    // stalls the solver when a start lies off; a component that wanders off its start is
    // judged afterwards instead.
    let s_min = 0.25 * px;
    let mut start = vec![0.0, 0.0, 0.0, me.a, me.r, me.s.max(1.01 * s_min)];
    let mut lower = vec![f64::NEG_INFINITY; NEIGHBOURS];
    lower[S] = s_min;
    for c in &neighbours {
        start.extend([c.a, c.r]);
        lower.extend([f64::NEG_INFINITY, f64::NEG_INFINITY]);
    }
    let upper = vec![f64::INFINITY; lower.len()];
    let options = LmOptions {
        ftol: 1e-10,
        xtol: 1e-10,
        gtol: 1e-10,
        max_iterations: 200,
    };
    let report = minimize_bounded(
        &problem,
        &start,
        &Bounds::from_arrays(&lower, &upper),
        &options,
        "ring peak",
    )
    .map_err(|e| {
        let mut v = Verdict::shape(format!("its fit failed: {e}"));
        v.unconverged = matches!(e, crate::fit::FitError::NotConverged { .. });
        v
    })?;
    let fitted = (report.params[S], report.params[R], report.params[A]);
    judge(
        profile,
        &problem,
        &report,
        &Window {
            bins: &idx,
            start: me,
            neighbours: &neighbours,
            span: (from, to),
        },
        search,
        px,
    )
    .map_err(|mut v| {
        v.fitted = Some(fitted);
        v
    })
}

/// What a ring's fit was made over.
struct Window<'a> {
    /// Profile bins of the residuals, in order.
    bins: &'a [usize],
    /// The candidate it started from.
    start: Candidate,
    /// The neighbours fitted with it, in parameter order.
    neighbours: &'a [Candidate],
    /// Its span, mm.
    span: (f64, f64),
}

/// Why a fitted ring does not count.
#[derive(Debug, Clone, PartialEq)]
struct Verdict {
    /// Its shape is not a ring's (too broad or narrow, a dip, wandered off, told twice),
    /// rather than too faint for the noise.
    shape: bool,
    /// Its significance, where it was too faint.
    significance: f64,
    /// Its fit ran out of iterations or steps.
    unconverged: bool,
    /// Its fitted (σ, radius, height), where the fit converged.
    fitted: Option<(f64, f64, f64)>,
    why: String,
}

impl Verdict {
    fn shape(why: impl Into<String>) -> Self {
        Verdict {
            shape: true,
            significance: 0.0,
            unconverged: false,
            fitted: None,
            why: why.into(),
        }
    }

    fn faint(significance: f64, why: impl Into<String>) -> Self {
        Verdict {
            shape: false,
            significance,
            unconverged: false,
            fitted: None,
            why: why.into(),
        }
    }
}

/// The ring of a converged fit, counted or rejected with the reason.
fn judge(
    profile: &RadialProfile,
    problem: &RingFit,
    report: &LmReport,
    win: &Window,
    search: &RingSearch,
    px: f64,
) -> Result<RingPeak, Verdict> {
    let (bins, start, neighbours) = (win.bins, win.start, win.neighbours);
    let (from, to) = win.span;
    let p = &report.params;
    let (a, r, s) = (p[A], p[R], p[S]);
    let fwhm = FWHM_PER_SIGMA * s;
    if report.at_bound.contains(&S) {
        return Err(Verdict::shape(
            "its width ran to the limit of the fit: not a ring's shape",
        ));
    }
    if !(a > 0.0) {
        return Err(Verdict::shape("it is a dip, not a peak, once fitted"));
    }
    if !(r > from && r < to) || (r - start.r).abs() > (2.0 * start.s).max(3.0 * px) {
        return Err(Verdict::shape(format!(
            "its fit wandered from {:.3} mm to {r:.3} mm: not a ring of its own",
            start.r
        )));
    }
    // A neighbour that ends on top of it is the same ring: the candidate the filter saw
    // less clearly gives way.
    for (q, c) in p[NEIGHBOURS..].chunks(2).zip(neighbours) {
        if (q[1] - r).abs() < 1.2 * s && c.z > start.z {
            return Err(Verdict::shape(format!(
                "the same ring as the one at {:.3} mm, told twice",
                q[1]
            )));
        }
    }
    if fwhm < MIN_FWHM_PX * px {
        return Err(Verdict::shape(format!(
            "{:.2} px wide at half height: narrower than the camera draws a ring",
            fwhm / px
        )));
    }
    if fwhm > MAX_FWHM_SHARE * r {
        return Err(Verdict::shape(format!(
            "{fwhm:.2} mm wide at half height, {:.0} % of its radius: a bend of the glow, not \
             a ring",
            100.0 * fwhm / r
        )));
    }
    let m = problem.r.len();
    let mut jac = DMatrix::zeros(m, p.len());
    // The noise's size is that of the bins' standard errors (from the sectors' scatter),
    // or this window's own residuals where larger (light the model does not describe);
    // its correlation is the noise's along the radius.
    let own = report.cost / (m.saturating_sub(p.len())).max(1) as f64;
    let sigma2 = own.max(search.noise_scale.powi(2));
    let cov = if forward_difference_jacobian(problem, p, &report.residuals, &mut jac) {
        known_correlation_covariance(&jac, bins, sigma2, &search.noise_acf)
    } else {
        None
    };
    let Some(cov) = cov else {
        return Err(Verdict::shape("its fit gives no covariance"));
    };
    let u = |j: usize| cov[(j, j)].max(0.0).sqrt();
    let (ua, ur, us) = (u(A), u(R), u(S));
    if !(ur.is_finite() && ur > 0.0 && ua > 0.0) {
        return Err(Verdict::shape("its radius has no finite uncertainty"));
    }
    let significance = a / ua;
    if !(significance >= MIN_SIGNIFICANCE) {
        return Err(Verdict::faint(
            significance,
            format!(
                "{:.2} % over the glow is only {significance:.1} standard uncertainties (a \
                 ring needs {MIN_SIGNIFICANCE})",
                100.0 * a
            ),
        ));
    }
    let sectors = (0..profile.r_mm.len())
        .filter(|&i| (profile.r_mm[i] - r).abs() <= 2.0 * s)
        .map(|i| profile.sectors[i])
        .min()
        .unwrap_or(0);
    Ok(RingPeak {
        radius_mm: r,
        u_radius_mm: ur,
        fwhm_mm: fwhm,
        u_fwhm_mm: FWHM_PER_SIGMA * us,
        contrast: a,
        u_contrast: ua,
        significance,
        sectors,
        lags: search.noise_acf.len() - 1,
    })
}

fn mad_sigma(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_unstable_by(f64::total_cmp);
    let med = s[s.len() / 2];
    let mut d: Vec<f64> = s.iter().map(|x| (x - med).abs()).collect();
    d.sort_unstable_by(f64::total_cmp);
    1.4826 * d[d.len() / 2]
}

#[cfg(test)]
mod tests;
