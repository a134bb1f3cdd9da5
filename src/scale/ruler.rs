//! Scale from the tick marks of a ruler in the screen plane. The user gives the rough
//! ends of a stretch; a band profile along it finds the tick period by FFT with
//! Jacobsen interpolation ([`crate::fit::spectral`]), each tick is located by its
//! darkness-weighted centroid, and tick positions are fitted against tick index with the
//! one-dimensional projective model t(k) = (a + b·k)/(1 + c·k), which is exact for a
//! straight ruler seen in perspective. A varying tick spacing (c ≠ 0) means the camera
//! was not square to the screen.

use super::{ScaleError, ScaleMethod, ScreenMap};
use crate::fit::lm::{self, LeastSquares, LmOptions};
use crate::fit::spectral::PeriodEstimator;
use crate::raster::Raster;
use crate::scale::profile::{BandProfile, band_profile};
use nalgebra::{Matrix3, Vector2};

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
    /// Accuracy class for the ruler's own error.
    pub class: RulerClass,
}

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
    let ticks = locate_ticks(&profile)?;
    let fit = fit_ticks(&ticks, length)?;
    let map = build_map(&profile, &fit, spec)?;
    Ok((map, fit))
}

/// Steps across the rough line to find the band where ticks are strongest, then widens
/// the band over the neighbouring offsets that still show them.
fn best_band(
    raster: &dyn Raster,
    a: Vector2<f64>,
    b: Vector2<f64>,
) -> Result<BandProfile, ScaleError> {
    let length = (b - a).norm();
    let reach = (0.05 * length).clamp(12.0, 60.0) as i32;
    let mut est = PeriodEstimator::new();
    let mut scores = Vec::new();
    for off in (-reach..=reach).step_by(2) {
        let score = band_profile(raster, a, b, 2, off as f64, 0.5)
            .and_then(|p| {
                let v = clean(&p.values);
                est.dominant_period(&v, MIN_PERIOD_SAMPLES, v.len() as f64 / 6.0)
            })
            .map_or(0.0, |e| e.peak_to_median);
        scores.push((off, score));
    }
    let (best_i, &(_, best)) = scores
        .iter()
        .enumerate()
        .max_by(|x, y| x.1.1.total_cmp(&y.1.1))
        .ok_or_else(|| ScaleError::NotMeasured("no ruler profile could be sampled".into()))?;
    if best < 30.0 {
        return Err(ScaleError::NotMeasured(format!(
            "no regular tick marks found along the ruler stretch (best periodic signal {best:.0}× \
             the noise floor, need 30×); check the --ruler ends lie on the tick marks"
        )));
    }
    let keep = |s: f64| s > 0.5 * best;
    let mut lo = best_i;
    while lo > 0 && keep(scores[lo - 1].1) {
        lo -= 1;
    }
    let mut hi = best_i;
    while hi + 1 < scores.len() && keep(scores[hi + 1].1) {
        hi += 1;
    }
    let (o_lo, o_hi) = (scores[lo].0 as f64, scores[hi].0 as f64);
    let centre = 0.5 * (o_lo + o_hi);
    let half = (0.5 * (o_hi - o_lo)).round() as usize + 2;
    band_profile(raster, a, b, half, centre, 0.5)
        .ok_or_else(|| ScaleError::NotMeasured("the ruler band left the photo".into()))
}

/// Shortest tick period looked for, in profile samples (half-pixel steps): 3 px. Finer
/// ticks are blurred by the lens and the JPEG and cannot be counted reliably.
const MIN_PERIOD_SAMPLES: f64 = 6.0;

/// The tick period in samples. The strongest period of a ruler's profile may be that of
/// its longer 5 mm or 10 mm marks, so the fine subdivisions (1/5 and 1/10 of it) are
/// looked for too, and the finest one that stands clearly out of the noise floor wins;
/// taking a 5 mm mark for a 1 mm tick would make every length five times too short.
fn tick_period(est: &mut PeriodEstimator, v: &[f64]) -> Option<f64> {
    let n = v.len() as f64;
    let coarse = est.dominant_period(v, MIN_PERIOD_SAMPLES, n / 6.0)?;
    let power = |amplitude: f64| (amplitude * n / 2.0).powi(2);
    let floor = power(coarse.amplitude) / coarse.peak_to_median;
    for div in [10.0, 5.0] {
        let want = coarse.period / div;
        if want < MIN_PERIOD_SAMPLES {
            continue;
        }
        // Perspective stretches the spacing along the ruler, which broadens both peaks, so
        // the subdivision may sit a few per cent off a tenth of the coarse period.
        if let Some(fine) = est.dominant_period(v, want * 0.9, want * 1.1) {
            let close = ((fine.period - want) / want).abs() < 0.08;
            if close && power(fine.amplitude) > 6.0 * floor {
                return Some(fine.period);
            }
        }
    }
    Some(coarse.period)
}

/// Replaces NaN samples by the mean so the FFT sees no holes.
fn clean(v: &[f64]) -> Vec<f64> {
    let finite: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    let mean = finite.iter().sum::<f64>() / finite.len().max(1) as f64;
    v.iter()
        .map(|x| if x.is_finite() { *x } else { mean })
        .collect()
}

/// Finds every dark tick along the profile: period by FFT, then each tick's
/// darkness-weighted centroid, re-centred twice so the window is symmetric about it.
fn locate_ticks(profile: &BandProfile) -> Result<Vec<(i64, f64)>, ScaleError> {
    let v = clean(&profile.values);
    let step = profile.step_px;
    let mut est = PeriodEstimator::new();
    let period = tick_period(&mut est, &v)
        .ok_or_else(|| ScaleError::NotMeasured("no tick period along the ruler".into()))?; // samples
    let n = v.len();
    let sample = |x: f64| -> f64 {
        let x = x.clamp(0.0, (n - 1) as f64);
        let i = (x.floor() as usize).min(n - 2);
        let f = x - i as f64;
        v[i] * (1.0 - f) + v[i + 1] * f
    };
    let centroid = |c: f64| -> Option<f64> {
        let half = 0.5 * period;
        let (lo, hi) = (c - half, c + half);
        if lo < 0.0 || hi > (n - 1) as f64 {
            return None;
        }
        // Light level: the brighter half of the window is paper between ticks.
        let mut w: Vec<f64> = (lo.ceil() as usize..=hi.floor() as usize)
            .map(|i| v[i])
            .collect();
        w.sort_by(f64::total_cmp);
        let light = w[(w.len() * 3) / 4];
        let core = 0.35 * period;
        let (mut sw, mut swx) = (0.0, 0.0);
        let mut x = c - core;
        let dx = 0.25;
        while x <= c + core {
            let d = (light - sample(x)).max(0.0);
            sw += d;
            swx += d * x;
            x += dx;
        }
        (sw > 0.0).then(|| swx / sw)
    };
    // Seed at the darkest sample of the first period, then walk by one period.
    let first_end = (period.ceil() as usize).min(n - 1);
    let seed = (0..=first_end)
        .min_by(|&i, &j| v[i].total_cmp(&v[j]))
        .unwrap_or(0) as f64;
    let mut ticks = Vec::new();
    let mut k: i64 = 0;
    let mut guess = seed;
    let mut last_found: Option<(i64, f64)> = None;
    let max_ticks = (2.0 * n as f64 / period) as i64 + 2;
    while guess < (n - 1) as f64 + 0.5 * period && k < max_ticks {
        let mut c = guess;
        let mut ok = true;
        for _ in 0..3 {
            match centroid(c) {
                Some(nc) if (nc - guess).abs() < 0.4 * period => c = nc,
                _ => {
                    ok = false;
                    break;
                }
            }
        }
        if ok {
            ticks.push((k, c * step));
            last_found = Some((k, c));
        }
        k += 1;
        // Follow the local period from the last two ticks found; perspective changes it.
        guess = match (last_found, ticks.len() >= 2) {
            (Some((kl, cl)), true) => {
                let (k0, t0) = ticks[ticks.len() - 2];
                // Perspective changes the period slowly; a jump means a misplaced tick.
                let local =
                    ((cl - t0 / step) / (kl - k0) as f64).clamp(0.8 * period, 1.25 * period);
                cl + local * (k - kl) as f64
            }
            (Some((kl, cl)), false) => cl + period * (k - kl) as f64,
            _ => seed + period * k as f64,
        };
    }
    if ticks.len() < 8 {
        return Err(ScaleError::NotMeasured(format!(
            "only {} tick marks located along the ruler; need at least 8 (give a longer stretch)",
            ticks.len()
        )));
    }
    Ok(ticks)
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
        "the ruler tick fit kept rejecting marks".into(),
    ))
}

/// The px → mm homography of the ruler: along the ruler, tick index from the inverse of
/// t(k), so X = tick·(t − a)/(b − c·t); across it the same local scale as along at the
/// middle, sharing the denominator (the form a camera rotated about the axis across
/// the ruler produces).
fn build_map(
    profile: &BandProfile,
    fit: &TickFit,
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
    let to_line = Matrix3::new(u.x, u.y, -u.dot(&o), n.x, n.y, -n.dot(&o), 0.0, 0.0, 1.0);
    let reference = o + u * t_ref;
    let mut map = ScreenMap::from_homography(ScaleMethod::Ruler, ruler * to_line, reference)?;
    map.residual_px = Some(fit.rms_px);
    map.stretch_px = Some((
        profile.origin,
        profile.position((profile.values.len() - 1) as f64),
    ));
    map = map.with_component("ruler tick fit", fit.u_rel);
    let (kf, _) = fit.ticks[0];
    let (kl, _) = fit.ticks[fit.ticks.len() - 1];
    let stretch_mm = (kl - kf) as f64 * tick;
    let mpe = spec.class.mpe_mm(stretch_mm);
    map = map.with_component(
        format!("ruler accuracy class {}", spec.class.name()),
        mpe / 3f64.sqrt() / stretch_mm,
    );
    map.assumptions.push(format!(
        "ruler error within the class {} maximum permissible error ±{mpe:.1} mm over the \
         {stretch_mm:.0} mm stretch (MI-008), taken as a rectangular distribution",
        spec.class.name()
    ));
    if let Some(u) = spec.tick_u_rel {
        map = map.with_component("tick spacing", u);
    }
    if fit.drift.abs() > DRIFT_WARNING {
        map.warnings.push(format!(
            "the tick spacing changes by {:.1} % along the ruler: the camera is not square to \
             the screen. The perspective along the ruler is corrected, but only along it: keep \
             the ruler close to and parallel with the pattern",
            100.0 * fit.drift
        ));
    }
    Ok(map)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::OwnedRaster;

    /// A synthetic ruler: light strip with dark Gaussian ticks every `period` px starting
    /// at x0 along the row y ∈ [40, 70], seen with a 1-D perspective x = (x0 + p k)/(1 + c k).
    fn ruler_image(period: f64, c: f64) -> OwnedRaster {
        let x0 = 23.3;
        OwnedRaster::from_fn(900, 120, move |x, y| {
            if !(40.0..=70.0).contains(&y) {
                return 0.2;
            }
            // Nearest tick index in the perspective model, then a dark line of σ 0.8 px.
            let k = ((x - x0) / (period - c * x)).round();
            let mut dark = 0.0;
            for dk in -1..=1 {
                let kk = k + dk as f64;
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
            class: RulerClass::II,
        }
    }

    #[test]
    fn square_on_ruler_gives_the_tick_period() {
        let img = ruler_image(12.5, 0.0);
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
        let img = ruler_image(12.5, 2e-4);
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
