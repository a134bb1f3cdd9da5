//! Scale from the tick marks of a ruler in the screen plane. The user gives the rough
//! ends of a stretch; a band profile along it finds the tick period by FFT with
//! Jacobsen interpolation ([`crate::fit::spectral`]), each tick is located by its
//! darkness-weighted centroid, and tick positions are fitted against tick index with the
//! one-dimensional projective model t(k) = (a + b·k)/(1 + c·k), which is exact for a
//! straight ruler seen in perspective. A varying tick spacing (c ≠ 0) means the camera
//! was not square to the screen.

use super::{AcrossLine, ScaleError, ScaleMethod, ScreenMap};
use crate::fit::line::fit_line;
use crate::fit::lm::{self, LeastSquares, LmOptions};
use crate::fit::spectral::PeriodEstimator;
use crate::raster::Raster;
use crate::scale::profile::{BandProfile, band_profile};
use crate::scale::ticks::{self, count_ticks, locate_ticks};
use nalgebra::{Matrix3, Vector2};
use rayon::prelude::*;
use std::collections::HashMap;

/// Accuracy class of a ruler, after OIML R 35 / MID MI-008 for material measures of
/// length: maximum permissible error ±(a + b·L) mm with L in whole metres rounded up.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RulerClass {
    /// Class I: a = 0.1 mm, b = 0.1 mm.
    I,
    /// Class II: a = 0.3 mm, b = 0.2 mm.
    II,
    /// Class III: a = 0.6 mm, b = 0.4 mm.
    III,
}

impl RulerClass {
    /// Maximum permissible error in mm for a measured length in mm (MI-008; UK SI
    /// 2016/1153, schedule for material measures of length).
    pub fn mpe_mm(self, length_mm: f64) -> f64 {
        let (a, b) = match self {
            RulerClass::I => (0.1, 0.1),
            RulerClass::II => (0.3, 0.2),
            RulerClass::III => (0.6, 0.4),
        };
        let metres = (length_mm / 1000.0).ceil().max(1.0);
        a + b * metres
    }

    /// Parses "I", "II" or "III".
    pub fn parse(text: &str) -> Option<Self> {
        match text.trim().to_ascii_uppercase().as_str() {
            "I" | "1" => Some(RulerClass::I),
            "II" | "2" => Some(RulerClass::II),
            "III" | "3" => Some(RulerClass::III),
            _ => None,
        }
    }

    /// "I", "II" or "III".
    pub fn name(self) -> &'static str {
        match self {
            RulerClass::I => "I",
            RulerClass::II => "II",
            RulerClass::III => "III",
        }
    }
}

/// What the ruler measurement needs besides the photo.
#[derive(Debug, Clone, Copy)]
pub struct RulerSpec {
    /// Rough start of the stretch, px.
    pub from_px: Vector2<f64>,
    /// Rough end of the stretch, px.
    pub to_px: Vector2<f64>,
    /// Tick spacing, mm.
    pub tick_mm: f64,
    /// Relative standard uncertainty of the tick spacing beyond the class, if given.
    pub tick_u_rel: Option<f64>,
    /// What carries the marks.
    pub marks: Marks,
}

/// What carries the marks counted along the stretch.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marks {
    /// A ruler's ticks, of an accuracy class.
    Ruler(RulerClass),
    /// The lines of squared or graph paper used as the screen, counted across.
    Grid,
}

/// Half-width of the rectangular distribution taken for a graph paper's line spacing
/// when none is given: ±0.3 %, printing and the paper's swelling with humidity (common
/// practice for office paper).
pub const GRID_PITCH_HALF_WIDTH: f64 = 0.003;

/// The tick fit behind a ruler scale, for the record and tests.
#[derive(Debug, Clone)]
pub struct TickFit {
    /// Tick indices and their positions along the stretch, px.
    pub ticks: Vec<(i64, f64)>,
    /// Fitted (a, b, c) of t(k) = (a + b·k)/(1 + c·k).
    pub params: [f64; 3],
    /// Local tick period at the middle of the stretch, px.
    pub period_px: f64,
    /// Relative change of the period from the first to the last tick.
    pub drift: f64,
    /// RMS tick residual, px.
    pub rms_px: f64,
    /// Relative standard uncertainty of the period at the middle from the fit.
    pub u_rel: f64,
}

/// Largest change of tick period along the ruler before the report warns (0.5 %).
pub const DRIFT_WARNING: f64 = 0.005;

/// Measures a ruler stretch and returns the screen map with its uncertainty components.
pub fn measure(raster: &dyn Raster, spec: &RulerSpec) -> Result<(ScreenMap, TickFit), ScaleError> {
    if !(spec.tick_mm > 0.0 && spec.tick_mm.is_finite()) {
        return Err(ScaleError::Usage(format!(
            "--tick must be > 0, got {} mm",
            spec.tick_mm
        )));
    }
    let (a, b) = (spec.from_px, spec.to_px);
    let length = (b - a).norm();
    if !(length >= 30.0) {
        return Err(ScaleError::Usage(format!(
            "the ruler stretch is {length:.1} px long; give two ends at least 30 px apart \
             (--ruler X1,Y1,X2,Y2)"
        )));
    }
    for p in [a, b] {
        if !(p.x >= 0.0
            && p.y >= 0.0
            && p.x < raster.width() as f64
            && p.y < raster.height() as f64)
        {
            return Err(ScaleError::Usage(format!(
                "ruler end ({:.0}, {:.0}) lies outside the {}×{} photo",
                p.x,
                p.y,
                raster.width(),
                raster.height()
            )));
        }
    }
    let profile = best_band(raster, a, b)?;
    let marks = locate_ticks(&profile)?;
    let ticks: Vec<(i64, f64)> = marks.iter().map(|&(k, t, _)| (k, t)).collect();
    let fit = fit_ticks(&ticks, length)?;
    let mut spec = *spec;
    let mut class_note = None;
    if spec.marks == Marks::Grid {
        let depth: HashMap<i64, f64> = marks.iter().map(|&(k, _, d)| (k, d)).collect();
        let depths: Vec<f64> = fit.ticks.iter().map(|(k, _)| depth[k]).collect();
        (spec.tick_mm, class_note) = grid_line_class(&fit, &depths, spec.tick_mm)?;
    }
    let spec = &spec;
    let traces = ticks::trace_ticks(raster, &profile, &fit.ticks, fit.period_px);
    if matches!(spec.marks, Marks::Ruler(_)) && (spec.tick_mm - 1.0).abs() < 1e-9 {
        check_millimetre_ticks(&fit, &traces)?;
    }
    let slants: Vec<ticks::TickSlant> = traces.iter().filter_map(|t| t.slant).collect();
    let convergence = fit_convergence(&slants);
    let mut map = build_map(raster, &profile, &fit, convergence.as_ref(), spec)?;
    if let Some(note) = class_note {
        map.warnings.push(note);
    }
    Ok((map, fit))
}

/// Which lines of a graph paper were counted, from their depths: on the common paper
/// every 5th and 10th line is heavier (common practice of paper makers). Every fifth
/// line darker: the stated lines themselves. Alternately darker: only the heavier lines
/// were resolved, five stated spacings apart. Neither, on paper ruled finer than 2 mm:
/// refused, since the 10 mm lines alone look just like that. Returns the spacing of the
/// lines counted and, when it is not the stated one, a note.
fn grid_line_class(
    fit: &TickFit,
    depths: &[f64],
    pitch_mm: f64,
) -> Result<(f64, Option<String>), ScaleError> {
    let every_fifth = ticks::phase_contrast(&fit.ticks, depths, 5).unwrap_or(1.0);
    let alternate = ticks::phase_contrast(&fit.ticks, depths, 2).unwrap_or(1.0);
    if every_fifth >= FIFTH_TICK_RATIO {
        return Ok((pitch_mm, None));
    }
    if alternate >= FIFTH_TICK_RATIO {
        let counted = 5.0 * pitch_mm;
        let note = format!(
            "the graph paper's {pitch_mm} mm lines are too fine to resolve in this photo: its \
             heavier lines, alternately every 5th and 10th, were counted, {counted} mm apart"
        );
        return Ok((counted, Some(note)));
    }
    if pitch_mm < 2.0 {
        return Err(ScaleError::NotMeasured(format!(
            "the grid lines found every {:.1} px are all alike: on {pitch_mm} mm graph paper \
             they may be the 10 mm lines with the finer ones unresolved. Photograph the paper \
             closer, or give the spacing of the lines that show (--grid 10mm)",
            fit.period_px
        )));
    }
    Ok((pitch_mm, None))
}

/// Steps across the rough line to find the band of the finest ticks, then widens the
/// band over the neighbouring offsets that still show them. The finest, not the
/// strongest: beside the short ticks only the long 5 and 10 mm marks remain, and their
/// clean, coarse period would otherwise win.
fn best_band(
    raster: &dyn Raster,
    a: Vector2<f64>,
    b: Vector2<f64>,
) -> Result<BandProfile, ScaleError> {
    let length = (b - a).norm();
    let reach = (0.05 * length).clamp(12.0, 60.0) as i32;
    // (offset, period in samples, score against the noise floor) of each counted band
    let offsets: Vec<i32> = (-reach..=reach).step_by(2).collect();
    let bands: Vec<(i32, f64, f64)> = offsets
        .par_iter()
        .map_init(PeriodEstimator::new, |est, &off| {
            let run = band_profile(raster, a, b, 2, off as f64, 0.5)
                .and_then(|p| count_ticks(est, &p.values));
            match run {
                Some(r) if r.ticks.len() >= 8 => (off, r.period, r.score),
                _ => (off, f64::NAN, 0.0),
            }
        })
        .collect();
    let strongest = bands.iter().map(|s| s.2).fold(0.0, f64::max);
    if strongest < DETECTED {
        return Err(ScaleError::NotMeasured(format!(
            "no regular tick marks found along the ruler stretch (best periodic signal \
             {strongest:.0}× the noise floor, need {DETECTED:.0}×); check the --ruler ends lie \
             on the tick marks"
        )));
    }
    // A band of ticks is a few px wide at least and stands out like one: a period seen
    // on a single offset, or far weaker than the strongest, is an edge effect (the ends
    // of the ticks count twice) and does not make a finer class.
    let agrees = |i: usize, j: usize| {
        let (p, q) = (bands[i].1, bands[j].1);
        bands[j].2 >= DETECTED && ((p - q) / p).abs() < 0.03
    };
    let real = |i: usize| {
        bands[i].2 >= DETECTED.max(0.01 * strongest)
            && ((i > 0 && agrees(i, i - 1)) || (i + 1 < bands.len() && agrees(i, i + 1)))
    };
    let finest = (0..bands.len())
        .filter(|&i| real(i))
        .map(|i| bands[i].1)
        .fold(f64::INFINITY, f64::min);
    if !finest.is_finite() {
        return Err(ScaleError::NotMeasured(
            "no regular marks hold across more than one line of pixels along the stretch: the \
             ruler's ticks or the paper's lines are too faint or too fine here (they must be \
             at least 3 px apart)"
                .into(),
        ));
    }
    let same_ticks =
        |s: &(i32, f64, f64)| s.2 >= DETECTED && ((s.1 - finest) / finest).abs() < 0.15;
    let (best_i, best) = bands
        .iter()
        .enumerate()
        .filter(|(_, s)| same_ticks(s))
        .max_by(|x, y| x.1.2.total_cmp(&y.1.2))
        .map(|(i, s)| (i, s.2))
        .expect("the finest period belongs to a detected band");
    let keep = |s: &(i32, f64, f64)| same_ticks(s) && s.2 > 0.5 * best;
    let mut lo = best_i;
    while lo > 0 && keep(&bands[lo - 1]) {
        lo -= 1;
    }
    let mut hi = best_i;
    while hi + 1 < bands.len() && keep(&bands[hi + 1]) {
        hi += 1;
    }
    let (o_lo, o_hi) = (bands[lo].0 as f64, bands[hi].0 as f64);
    let centre = 0.5 * (o_lo + o_hi);
    let half = (0.5 * (o_hi - o_lo)).round() as usize + 2;
    band_profile(raster, a, b, half, centre, 0.5)
        .ok_or_else(|| ScaleError::NotMeasured("the ruler band left the photo".into()))
}

/// Periodic signal, in multiples of the spectrum's noise floor, taken as tick marks.
const DETECTED: f64 = 30.0;

/// Least length ratio of the 5 mm marks to the 1 mm ticks accepted as seeing both.
const FIFTH_TICK_RATIO: f64 = 1.25;

/// Refuses a "1 mm" scale whose ticks show no longer mark every fifth tick: then the
/// marks counted are the 5 or 10 mm ones, the millimetres being too fine to resolve, and
/// every length would come out five or ten times too short.
fn check_millimetre_ticks(fit: &TickFit, traces: &[ticks::TickTrace]) -> Result<(), ScaleError> {
    let lengths: Vec<f64> = traces
        .iter()
        .map(|t| (t.extent.1 - t.extent.0 + 1).max(0) as f64)
        .collect();
    match ticks::phase_contrast(&fit.ticks, &lengths, 5) {
        Some(ratio) if ratio >= FIFTH_TICK_RATIO => Ok(()),
        Some(ratio) => Err(ScaleError::NotMeasured(format!(
            "the marks found along the ruler every {:.1} px show no longer mark every fifth \
             one (length ratio {ratio:.2}, a millimetre scale has about 1.5): they are likely \
             the 5 or 10 mm marks with the millimetres too fine to resolve. Photograph the \
             ruler closer, give --tick 5mm or 10mm if that is what they are, or use --points",
            fit.period_px
        ))),
        None => Err(ScaleError::NotMeasured(
            "too few ruler ticks to tell millimetre ticks from 5 mm marks; give a longer \
             stretch"
                .into(),
        )),
    }
}

/// Where the ticks meet in the photo, as their slant s = α + β·t against position t
/// along the band: the vanishing point of the across direction, in band coordinates
/// (t, o), is (α, 1, −β) homogeneously. β = 0 when the camera is square about the ruler's
/// line, α ≠ 0 when the band crosses the ticks obliquely.
#[derive(Debug, Clone, Copy)]
pub struct Convergence {
    /// Slant at t = 0, px along per px across.
    pub alpha: f64,
    /// Change of slant along the band, per px.
    pub beta: f64,
    /// Standard uncertainty of β.
    pub u_beta: f64,
    /// Ticks used.
    pub ticks: usize,
}

/// Weighted straight line through the tick slants, with ticks beyond 4 robust σ left
/// out (a digit or a scratch across a tick) and the covariance scaled up by the Birge
/// ratio when the slants scatter more than their own uncertainties say.
fn fit_convergence(slants: &[ticks::TickSlant]) -> Option<Convergence> {
    let mut kept: Vec<ticks::TickSlant> = slants.to_vec();
    for _ in 0..3 {
        if kept.len() < 6 {
            return None;
        }
        let t: Vec<f64> = kept.iter().map(|s| s.t).collect();
        let slope: Vec<f64> = kept.iter().map(|s| s.slope).collect();
        let w: Vec<f64> = kept.iter().map(|s| 1.0 / (s.u * s.u)).collect();
        let fit = fit_line(&t, &slope, &w).ok()?;
        let (alpha, beta) = (fit.intercept, fit.slope);
        let norm: Vec<f64> = kept
            .iter()
            .map(|s| (s.slope - alpha - beta * s.t) / s.u)
            .collect();
        let mut abs: Vec<f64> = norm.iter().map(|r| r.abs()).collect();
        abs.sort_by(f64::total_cmp);
        let robust = (1.4826 * abs[abs.len() / 2]).max(1.0);
        let before = kept.len();
        let mut i = 0;
        kept.retain(|_| {
            let keep = norm[i].abs() <= 4.0 * robust;
            i += 1;
            keep
        });
        if kept.len() == before {
            // The weights are 1/u², so s² is the square of the Birge ratio.
            let birge2 = fit.s2.max(1.0);
            return Some(Convergence {
                alpha,
                beta,
                u_beta: (birge2 / fit.sxx).sqrt(),
                ticks: kept.len(),
            });
        }
    }
    None
}

struct Projective1d<'a> {
    ticks: &'a [(i64, f64)],
}

impl LeastSquares for Projective1d<'_> {
    fn residual_count(&self) -> usize {
        self.ticks.len()
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        for (ri, &(k, t)) in r.iter_mut().zip(self.ticks) {
            let den = 1.0 + p[2] * k as f64;
            if den <= 0.0 {
                return false;
            }
            *ri = (p[0] + p[1] * k as f64) / den - t;
        }
        true
    }
}

/// Local period dt/dk at the index where t = t_ref.
fn period_at(p: &[f64; 3], t_ref: f64) -> f64 {
    let [a, b, c] = *p;
    let k = (t_ref - a) / (b - c * t_ref);
    (b - a * c) / (1.0 + c * k).powi(2)
}

fn fit_ticks(ticks: &[(i64, f64)], length_px: f64) -> Result<TickFit, ScaleError> {
    let mut kept: Vec<(i64, f64)> = ticks.to_vec();
    let t_ref = 0.5 * length_px;
    for _round in 0..3 {
        let (k0, t0) = kept[0];
        let (k1, t1) = kept[kept.len() - 1];
        let b0 = (t1 - t0) / (k1 - k0) as f64;
        let start = [t0 - b0 * k0 as f64, b0, 0.0];
        let report = lm::minimize(
            &Projective1d { ticks: &kept },
            &start,
            &LmOptions::default(),
            "ruler ticks",
        )
        .map_err(|e| ScaleError::NotMeasured(format!("ruler tick fit failed: {e}")))?;
        let p = [report.params[0], report.params[1], report.params[2]];
        // Reject ticks hidden by numbers, glare or a missing mark: beyond 4 robust σ.
        let mut abs: Vec<f64> = report.residuals.iter().map(|r| r.abs()).collect();
        abs.sort_by(f64::total_cmp);
        let sigma = (1.4826 * abs[abs.len() / 2]).max(0.02);
        let before = kept.len();
        let residuals = report.residuals.clone();
        let mut i = 0;
        kept.retain(|_| {
            let keep = residuals[i].abs() <= 4.0 * sigma;
            i += 1;
            keep
        });
        if kept.len() < 8 {
            return Err(ScaleError::NotMeasured(
                "too few consistent tick marks on the ruler".into(),
            ));
        }
        if kept.len() == before {
            let cov = report.covariance().ok_or_else(|| {
                ScaleError::NotMeasured("the tick positions do not determine the scale".into())
            })?;
            let period = period_at(&p, t_ref);
            // Gradient of the local period by central differences on (a, b, c).
            let mut grad = [0.0; 3];
            for j in 0..3 {
                let h = 1e-6 * p[j].abs().max(1e-6);
                let mut hi = p;
                let mut lo = p;
                hi[j] += h;
                lo[j] -= h;
                grad[j] = (period_at(&hi, t_ref) - period_at(&lo, t_ref)) / (2.0 * h);
            }
            let mut var = 0.0;
            for i in 0..3 {
                for j in 0..3 {
                    var += grad[i] * cov[(i, j)] * grad[j];
                }
            }
            let (kf, _) = kept[0];
            let (kl, _) = kept[kept.len() - 1];
            let slope = |k: f64| (p[1] - p[0] * p[2]) / (1.0 + p[2] * k).powi(2);
            let drift = (slope(kl as f64) - slope(kf as f64)) / period;
            let rms = (report.cost / kept.len() as f64).sqrt();
            if rms > 0.12 * period {
                return Err(ScaleError::NotMeasured(format!(
                    "the ruler's tick marks are not resolved cleanly: they scatter {rms:.1} px \
                     about a regular spacing of {period:.1} px; photograph the ruler closer or \
                     sharper, or use --points"
                )));
            }
            return Ok(TickFit {
                ticks: kept,
                params: p,
                period_px: period,
                drift,
                rms_px: rms,
                u_rel: var.max(0.0).sqrt() / period,
            });
        }
    }
    Err(ScaleError::NotMeasured(
        "the fit of the marks' positions kept rejecting marks: they are not evenly spaced".into(),
    ))
}

/// The px → mm homography of the ruler, composed in band coordinates (t along, o
/// across). First each point slides along the tick line through it to the band's centre
/// line, t' = (t − α·o)/(1 + β·o), so every point on one tick maps to that tick's
/// millimetre mark wherever it lies across the ruler; then along the line the tick index
/// is the inverse of t(k), X = tick·(t' − a)/(b − c·t'); across it the local scale at the
/// middle of the stretch, sharing the denominator.
fn build_map(
    raster: &dyn Raster,
    profile: &BandProfile,
    fit: &TickFit,
    convergence: Option<&Convergence>,
    spec: &RulerSpec,
) -> Result<ScreenMap, ScaleError> {
    let [a, b, c] = fit.params;
    let u = profile.along;
    let n = profile.across;
    let o = profile.origin;
    let t_ref = 0.5 * (spec.to_px - spec.from_px).norm();
    let kappa = (b - c * a) / (b - c * t_ref);
    let tick = spec.tick_mm;
    let ruler = Matrix3::new(tick, 0.0, -tick * a, 0.0, tick * kappa, 0.0, -c, 0.0, b);
    let (alpha, beta) = convergence.map_or((0.0, 0.0), |v| (v.alpha, v.beta));
    let slide = Matrix3::new(1.0, -alpha, 0.0, 0.0, 1.0, 0.0, 0.0, beta, 1.0);
    let to_line = Matrix3::new(u.x, u.y, -u.dot(&o), n.x, n.y, -n.dot(&o), 0.0, 0.0, 1.0);
    let reference = o + u * t_ref;
    let method = match spec.marks {
        Marks::Ruler(_) => ScaleMethod::Ruler,
        Marks::Grid => ScaleMethod::Grid,
    };
    let mut map = ScreenMap::from_homography(method, ruler * slide * to_line, reference)?;
    map.residual_px = Some(fit.rms_px);
    map.stretch_px = Some((
        profile.origin,
        profile.position((profile.values.len() - 1) as f64),
    ));
    map = map.with_component("ruler tick fit", fit.u_rel);
    // The scale at offset o across the ruler is 1/(1 + β·o) of that on it, so the
    // convergence adds u(β)·|o| where the features lie.
    let (w, h) = (raster.width() as f64, raster.height() as f64);
    match convergence {
        Some(v) => {
            let line = AcrossLine {
                origin: o,
                normal: n,
                u_rel_per_px: v.u_beta,
            };
            map = map.with_component_across("ruler tick convergence", line, w, h);
            let change = v.beta * line.reach_in_frame(w, h);
            if change.abs() > DRIFT_WARNING {
                map.warnings.push(format!(
                    "the ruler's ticks converge: the scale changes by {:.1} % from the ruler \
                     to the far edge of the photo, the camera being tilted about the ruler's \
                     line. This is corrected from the ticks' slant",
                    100.0 * change.abs()
                ));
            }
        }
        None => map.assumptions.push(
            "the ruler's ticks are too short to measure their slant: the camera is taken as \
             square about the ruler's line"
                .into(),
        ),
    }
    let (kf, _) = fit.ticks[0];
    let (kl, _) = fit.ticks[fit.ticks.len() - 1];
    let stretch_mm = (kl - kf) as f64 * tick;
    match spec.marks {
        Marks::Ruler(class) => {
            let mpe = class.mpe_mm(stretch_mm);
            map = map.with_component(
                format!("ruler accuracy class {}", class.name()),
                mpe / 3f64.sqrt() / stretch_mm,
            );
            map.assumptions.push(format!(
                "ruler error within the class {} maximum permissible error ±{mpe:.1} mm over \
                 the {stretch_mm:.0} mm stretch (MI-008), taken as a rectangular distribution",
                class.name()
            ));
            if let Some(u) = spec.tick_u_rel {
                map = map.with_component("tick spacing", u);
            }
        }
        Marks::Grid => {
            let u = spec.tick_u_rel.unwrap_or_else(|| {
                map.assumptions.push(format!(
                    "graph paper line spacing not given with an uncertainty: ±{:.1} % \
                     (rectangular) assumed for printing and the paper's swelling",
                    100.0 * GRID_PITCH_HALF_WIDTH
                ));
                GRID_PITCH_HALF_WIDTH / 3f64.sqrt()
            });
            map = map.with_component("grid line spacing", u);
        }
    }
    if fit.drift.abs() > DRIFT_WARNING {
        map.warnings.push(format!(
            "the tick spacing changes by {:.1} % along the ruler: the camera is not square to \
             the screen. The perspective is corrected from the ruler; keep the ruler close to \
             and parallel with the pattern",
            100.0 * fit.drift
        ));
    }
    Ok(map)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::OwnedRaster;

    /// A synthetic ruler: a light strip y ∈ [30, 80] with dark Gaussian ticks every
    /// `period` px from x0, hanging from its top edge and 14, 21 or 28 px long (every
    /// tick, 5th, 10th), seen with a 1-D perspective x = (x0 + p k)/(1 + c k). With
    /// `every` = 5 only the 5 mm and 10 mm marks are drawn, as when the millimetres blur.
    fn ruler_image(period: f64, c: f64, every: i64) -> OwnedRaster {
        let x0 = 23.3;
        OwnedRaster::from_fn(900, 120, move |x, y| {
            if !(30.0..=80.0).contains(&y) {
                return 0.2;
            }
            // Nearest tick index in the perspective model, then a dark line of σ 0.8 px.
            let k = ((x - x0) / (period - c * x)).round();
            let mut dark = 0.0;
            for dk in -every..=every {
                let kk = k + dk as f64;
                let ki = kk as i64;
                let len = match (ki.rem_euclid(10), ki.rem_euclid(5)) {
                    (0, _) => 28.0,
                    (_, 0) => 21.0,
                    _ => 14.0,
                };
                if ki.rem_euclid(every) != 0 || y > 30.0 + len {
                    continue;
                }
                let t = (x0 + period * kk) / (1.0 + c * kk);
                dark += (-(x - t).powi(2) / (2.0 * 0.8 * 0.8)).exp();
            }
            (0.85 - 0.6 * dark) as f32
        })
    }

    fn spec(tick_mm: f64) -> RulerSpec {
        RulerSpec {
            from_px: Vector2::new(10.0, 55.0),
            to_px: Vector2::new(880.0, 57.0),
            tick_mm,
            tick_u_rel: None,
            marks: Marks::Ruler(RulerClass::II),
        }
    }

    #[test]
    fn square_on_ruler_gives_the_tick_period() {
        let img = ruler_image(12.5, 0.0, 1);
        let (map, fit) = measure(&img, &spec(1.0)).unwrap();
        // The rough line runs at a slight slant (2 px over 870): the along-line period is
        // 12.5 px · (870/√(870²+2²)) projected; the slant is tiny so 12.5 px within 1e-4.
        assert!(
            (fit.period_px - 12.5).abs() / 12.5 < 2e-4,
            "{}",
            fit.period_px
        );
        assert!((map.mm_per_px() - 1.0 / 12.5).abs() * 12.5 < 2e-4);
        assert!(fit.drift.abs() < 1e-3);
        assert!(map.warnings.is_empty());
        assert!(fit.ticks.len() >= 60);
    }

    #[test]
    fn perspective_ruler_is_fitted_and_warned_about() {
        // c = 2e-4 per tick over ~60 ticks changes the period by ~2.5 %.
        let img = ruler_image(12.5, 2e-4, 1);
        let (map, fit) = measure(&img, &spec(1.0)).unwrap();
        assert!(fit.drift.abs() > DRIFT_WARNING, "{}", fit.drift);
        assert_eq!(map.warnings.len(), 1);
        // Distances between true tick positions map to whole millimetres.
        let t = |k: f64| (23.3 + 12.5 * k) / (1.0 + 2e-4 * k);
        for (k1, k2) in [(2.0, 12.0), (30.0, 55.0)] {
            let p1 = map.to_mm(Vector2::new(t(k1), 55.0));
            let p2 = map.to_mm(Vector2::new(t(k2), 55.0));
            let mm = (p2 - p1).norm();
            assert!((mm - (k2 - k1)).abs() < 0.01, "{k1}..{k2}: {mm} mm");
        }
    }

    #[test]
    fn strong_perspective_is_counted_tick_by_tick() {
        // c = 2.5e-3 per tick: the spacing falls from 12.5 to about 10 px along the ruler
        // (a camera well off square); a walk by the mean period would slip here.
        let img = ruler_image(12.5, 2.5e-3, 1);
        let (map, fit) = measure(&img, &spec(1.0)).unwrap();
        assert!(fit.drift < -0.15, "{}", fit.drift);
        let t = |k: f64| (23.3 + 12.5 * k) / (1.0 + 2.5e-3 * k);
        for (k1, k2) in [(3.0, 13.0), (20.0, 60.0)] {
            let p1 = map.to_mm(Vector2::new(t(k1), 40.0));
            let p2 = map.to_mm(Vector2::new(t(k2), 40.0));
            let mm = (p2 - p1).norm();
            assert!((mm - (k2 - k1)).abs() < 0.01, "{k1}..{k2}: {mm} mm");
        }
    }

    /// A millimetre ruler on a screen seen by a camera tilted about the ruler's own line:
    /// x = (10·X + 450)/(1 + g·Y), y = (10·Y + 250)/(1 + g·Y), g = 0.003 per mm, so
    /// the scale 20 mm above the ruler is 7 % larger than on it. Ticks hang from Y = 0,
    /// 3, 4.5 and 6 mm long, Gaussian across (σ 0.08 mm), on a strip Y ∈ [−2, 12].
    fn tilted_ruler() -> OwnedRaster {
        let g = 0.003;
        OwnedRaster::from_fn(900, 400, move |x, y| {
            let sy = (y - 250.0) / (10.0 - g * y);
            let sx = (x * (1.0 + g * sy) - 450.0) / 10.0;
            if !(-2.0..=12.0).contains(&sy) {
                return 0.2;
            }
            let k = sx.round();
            let len = match ((k as i64).rem_euclid(10), (k as i64).rem_euclid(5)) {
                (0, _) => 6.0,
                (_, 0) => 4.5,
                _ => 3.0,
            };
            let dark = if (0.0..=len).contains(&sy) && k.abs() <= 40.0 {
                (-(sx - k).powi(2) / (2.0 * 0.08 * 0.08)).exp()
            } else {
                0.0
            };
            (0.85 - 0.6 * dark) as f32
        })
    }

    #[test]
    fn a_camera_tilted_about_the_ruler_line_is_corrected_from_the_ticks_slant() {
        let g = 0.003;
        let to_px = |sx: f64, sy: f64| {
            let w = 1.0 + g * sy;
            Vector2::new((10.0 * sx + 450.0) / w, (10.0 * sy + 250.0) / w)
        };
        let (a, b) = (to_px(-38.0, 1.5), to_px(38.0, 1.5));
        let spec = RulerSpec {
            from_px: a,
            to_px: b,
            ..spec(1.0)
        };
        let (map, _) = measure(&tilted_ruler(), &spec).unwrap();
        // Two points 60 mm apart, 20 mm off the ruler, where the pattern would be.
        let d = (map.to_mm(to_px(30.0, -20.0)) - map.to_mm(to_px(-30.0, -20.0))).norm();
        assert!((d - 60.0).abs() < 0.06, "{d} mm");
        assert!(map.warnings.iter().any(|w| w.contains("converge")));
    }

    #[test]
    fn five_millimetre_marks_are_not_taken_for_millimetre_ticks() {
        // Only every 5th mark drawn, 62.5 px apart: regular and sharp, but with --tick 1mm
        // the scale would be five times off, so it must be refused.
        let img = ruler_image(12.5, 0.0, 5);
        let e = measure(&img, &spec(1.0)).unwrap_err();
        assert!(e.to_string().contains("fifth"), "{e}");
        // Given as what they are, the same marks make a good scale.
        let (map, _) = measure(&img, &spec(5.0)).unwrap();
        assert!((map.mm_per_px() - 1.0 / 12.5).abs() * 12.5 < 1e-3);
    }

    #[test]
    fn class_mpe_follows_mi008() {
        // MI-008 class II: ±(0.3 + 0.2·L) with L rounded up to whole metres.
        assert!((RulerClass::II.mpe_mm(150.0) - 0.5).abs() < 1e-12);
        assert!((RulerClass::I.mpe_mm(1500.0) - 0.3).abs() < 1e-12);
        assert!((RulerClass::III.mpe_mm(999.0) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn blank_band_is_not_a_ruler() {
        // Uniform paper with white pixel noise (SplitMix64 of the pixel index): no period.
        let img = OwnedRaster::from_fn(900, 120, |x, y| {
            let mut z = (y as u64 * 900 + x as u64).wrapping_add(0x9E37_79B9_7F4A_7C15);
            z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
            z ^= z >> 31;
            0.5 + 0.02 * ((z >> 40) as f32 / (1u64 << 24) as f32 - 0.5)
        });
        let e = measure(&img, &spec(1.0)).unwrap_err();
        assert!(matches!(e, ScaleError::NotMeasured(_)), "{e}");
        let short = RulerSpec {
            to_px: Vector2::new(20.0, 55.0),
            ..spec(1.0)
        };
        assert!(matches!(measure(&img, &short), Err(ScaleError::Usage(_))));
    }
}
