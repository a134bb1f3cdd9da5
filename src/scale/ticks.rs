//! Tick marks along a ruler profile: the period by FFT, every dark dip located on its
//! own, dips indexed by the local spacing, and the check that the marks found really are
//! the finest ticks of a ruler rather than its longer 5 or 10 mm marks.
//!
//! Dips are found first and indexed afterwards, not walked one period at a time: a camera
//! a little off square changes the tick spacing along the ruler by tens of per cent, and
//! a walk that predicts from the mean period loses lock where the spacing is far from it.

use super::ScaleError;
use crate::fit::line::fit_line;
use crate::fit::spectral::PeriodEstimator;
use crate::raster::Raster;
use crate::scale::profile::BandProfile;
use rayon::prelude::*;

/// Shortest tick period looked for, in profile samples (half-pixel steps): 3 px. Finer
/// ticks are blurred by the lens and the JPEG and cannot be counted reliably.
pub(super) const MIN_PERIOD_SAMPLES: f64 = 6.0;

/// Most re-centring steps of a darkness-weighted centroid; it stops sooner once it
/// moves by less than a thousandth of a sample.
const MAX_CENTROID_STEPS: usize = 20;

/// Darkness-weighted centroid of `weight` over c ± half, in quarter-sample steps; None
/// where the window holds no weight or leaves the data.
fn centroid(c: f64, half: f64, weight: impl Fn(f64) -> Option<f64>) -> Option<f64> {
    let (mut sw, mut swx) = (0.0, 0.0);
    let mut x = c - half;
    while x <= c + half {
        let d = weight(x)?;
        sw += d;
        swx += d * x;
        x += 0.25;
    }
    (sw > 0.0).then(|| swx / sw)
}

/// Re-centres from `start` by `step` until it moves by less than a thousandth of a
/// sample, or [`MAX_CENTROID_STEPS`] times.
fn converge(start: f64, mut step: impl FnMut(f64) -> Option<f64>) -> Option<f64> {
    let mut c = start;
    for _ in 0..MAX_CENTROID_STEPS {
        let next = step(c)?;
        let moved = (next - c).abs();
        c = next;
        if moved < 1e-3 {
            break;
        }
    }
    Some(c)
}

/// Fewest ticks a scale is built from.
const MIN_TICKS: usize = 8;

/// Ticks counted along one profile.
#[derive(Debug, Clone)]
pub(super) struct TickRun {
    /// Mean tick period, samples.
    pub period: f64,
    /// How far that period stands above the spectrum's noise floor.
    pub score: f64,
    /// (tick index, centre in samples, depth below the paper), consecutive up to holes.
    pub ticks: Vec<(i64, f64, f64)>,
}

/// Least share of the stretch the counted ticks must span: the user's stretch lies along
/// the ruler, so a run over a small part of it is a digit or a pattern, not the scale.
const MIN_COVERAGE: f64 = 0.5;

/// Candidate tick periods in samples, finest first, each with how far it stands above
/// the noise floor (peak power over the median power of the spectrum). The strongest
/// period of a ruler's profile may be that of its longer 5 mm or 10 mm marks, so the
/// fine subdivisions (1/10 and 1/5 of it) are candidates too. A sharp coarse mark has
/// strong harmonics at exactly those periods, so a candidate is only a hypothesis: the
/// dips counted at it decide ([`count_ticks`]).
fn period_candidates(est: &mut PeriodEstimator, v: &[f64]) -> Vec<(f64, f64)> {
    let n = v.len() as f64;
    let Some(coarse) = est.dominant_period(v, MIN_PERIOD_SAMPLES, n / 6.0) else {
        return Vec::new();
    };
    let power = |amplitude: f64| (amplitude * n / 2.0).powi(2);
    let floor = power(coarse.amplitude) / coarse.peak_to_median;
    let mut out = Vec::new();
    for div in [10.0, 5.0] {
        let want = coarse.period / div;
        if want < MIN_PERIOD_SAMPLES {
            continue;
        }
        // Perspective stretches the spacing along the ruler, which broadens both peaks, so
        // the subdivision may sit a few per cent off a tenth of the coarse period.
        if let Some(fine) = est.dominant_period(v, want * 0.9, want * 1.1) {
            let close = ((fine.period - want) / want).abs() < 0.08;
            let score = power(fine.amplitude) / floor;
            if close && score > 6.0 {
                out.push((fine.period, score));
            }
        }
    }
    out.push((coarse.period, coarse.peak_to_median));
    out
}

/// The finest period at which the profile's dips can be counted over at least half of
/// it, with the ticks counted, or None when no candidate period holds up.
pub(super) fn count_ticks(est: &mut PeriodEstimator, values: &[f64]) -> Option<TickRun> {
    let v = clean(values);
    let n = v.len() as f64;
    period_candidates(est, &v)
        .into_iter()
        .find_map(|(period, score)| {
            let ticks = index_dips(&find_dips(&v, period), period);
            let span = match (ticks.first(), ticks.last()) {
                (Some(f), Some(l)) => (l.0 - f.0) as f64 * period,
                _ => 0.0,
            };
            (span >= MIN_COVERAGE * n).then_some(TickRun {
                period,
                score,
                ticks,
            })
        })
}

/// Replaces NaN samples by the mean so the FFT sees no holes.
fn clean(v: &[f64]) -> Vec<f64> {
    let finite: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    let mean = finite.iter().sum::<f64>() / finite.len().max(1) as f64;
    v.iter()
        .map(|x| if x.is_finite() { *x } else { mean })
        .collect()
}

/// A dark dip of the profile: refined centre (samples) and depth below the paper.
#[derive(Debug, Clone, Copy)]
struct Dip {
    centre: f64,
    depth: f64,
}

/// Finds every tick along the profile and numbers them: (tick index, position along the
/// stretch in px, depth below the paper). Indices are consecutive integers up to holes
/// where a tick is hidden.
pub(super) fn locate_ticks(profile: &BandProfile) -> Result<Vec<(i64, f64, f64)>, ScaleError> {
    let run = count_ticks(&mut PeriodEstimator::new(), &profile.values).ok_or_else(|| {
        ScaleError::NotMeasured(
            "no regular run of tick marks over half the ruler stretch; check the --ruler \
             ends lie on the tick marks"
                .into(),
        )
    })?;
    if run.ticks.len() < MIN_TICKS {
        return Err(ScaleError::NotMeasured(format!(
            "only {} tick marks located along the ruler; need at least {MIN_TICKS} (give a \
             longer stretch)",
            run.ticks.len()
        )));
    }
    Ok(run
        .ticks
        .into_iter()
        .map(|(k, c, d)| (k, c * profile.step_px, d))
        .collect())
}

/// Local paper level: the 80th percentile of the samples within one mean period, so a
/// dark tick never lifts or lowers its own reference. The paper level changes slowly, so
/// it is taken every quarter period and interpolated between.
fn paper_level(v: &[f64], period: f64) -> Vec<f64> {
    let n = v.len();
    let half = (period.ceil() as usize).max(2);
    let stride = ((period / 4.0) as usize).max(1);
    let mut window = Vec::with_capacity(2 * half + 1);
    let knots: Vec<(usize, f64)> = (0..n)
        .step_by(stride)
        .chain(std::iter::once(n - 1))
        .map(|i| {
            window.clear();
            window.extend_from_slice(&v[i.saturating_sub(half)..(i + half + 1).min(n)]);
            let q = ((window.len() * 4) / 5).min(window.len() - 1);
            (i, *window.select_nth_unstable_by(q, f64::total_cmp).1)
        })
        .collect();
    let mut out = Vec::with_capacity(n);
    for pair in knots.windows(2) {
        let ((i0, l0), (i1, l1)) = (pair[0], pair[1]);
        for i in i0..i1 {
            let f = (i - i0) as f64 / (i1 - i0) as f64;
            out.push(l0 + f * (l1 - l0));
        }
    }
    out.push(knots[knots.len() - 1].1);
    out
}

/// Every local darkness maximum that is the darkest point within ±0.3 mean periods and
/// at least a quarter as deep as a typical tick, refined to its darkness-weighted
/// centroid. The window is narrow enough for spacings down to 0.6 of the mean period.
fn find_dips(v: &[f64], period: f64) -> Vec<Dip> {
    let n = v.len();
    let light = paper_level(v, period);
    let dark: Vec<f64> = (0..n).map(|i| (light[i] - v[i]).max(0.0)).collect();
    let r = ((0.3 * period).round() as usize).max(1);
    let mut peaks: Vec<(usize, f64)> = (0..n)
        .filter(|&i| {
            let (lo, hi) = (i.saturating_sub(r), (i + r + 1).min(n));
            dark[i] > 0.0 && (lo..hi).all(|j| dark[j] < dark[i] || (dark[j] == dark[i] && j >= i))
        })
        .map(|i| (i, dark[i]))
        .collect();
    if peaks.is_empty() {
        return Vec::new();
    }
    // A typical tick depth: the upper quartile of the candidates, so noise maxima between
    // faint ticks do not set the bar.
    let mut depths: Vec<f64> = peaks.iter().map(|p| p.1).collect();
    depths.sort_by(f64::total_cmp);
    let typical = depths[(depths.len() * 3) / 4];
    peaks.retain(|p| p.1 >= 0.25 * typical);
    let sample = |x: f64| -> f64 {
        let x = x.clamp(0.0, (n - 1) as f64);
        let i = (x.floor() as usize).min(n - 2);
        let f = x - i as f64;
        dark[i] * (1.0 - f) + dark[i + 1] * f
    };
    let core = 0.3 * period;
    peaks
        .iter()
        .filter_map(|&(i, depth)| {
            // Only the part of the dip deeper than a fifth of its own depth counts, so a
            // tilted paper level cannot pull the centroid sideways.
            let c = converge(i as f64, |c| {
                centroid(c, core, |x| Some((sample(x) - 0.2 * depth).max(0.0)))
            })?;
            (c - core >= 0.0 && c + core <= (n - 1) as f64).then_some(Dip { centre: c, depth })
        })
        .collect()
}

/// Numbers the dips by the local spacing: each gap is divided by the median of the gaps
/// around it and rounded to whole ticks. A dip closer to a neighbour than half the local
/// spacing (a printed digit, a scratch) is dropped in favour of the deeper one; a gap
/// that is not close to a whole number of spacings, or spans more than three, breaks the
/// count, and the longest consistently counted run is kept.
fn index_dips(dips: &[Dip], period: f64) -> Vec<(i64, f64, f64)> {
    let mut kept: Vec<Dip> = dips.to_vec();
    kept.sort_by(|a, b| a.centre.total_cmp(&b.centre));
    // Drop the shallower of any pair too close to be neighbouring ticks, then re-judge.
    loop {
        let spacing = local_spacings(&kept, period);
        let close = (0..kept.len().saturating_sub(1))
            .find(|&j| kept[j + 1].centre - kept[j].centre < 0.5 * spacing[j]);
        match close {
            Some(j) => {
                let drop = if kept[j].depth < kept[j + 1].depth {
                    j
                } else {
                    j + 1
                };
                kept.remove(drop);
            }
            None => break,
        }
    }
    if kept.is_empty() {
        return Vec::new();
    }
    let spacing = local_spacings(&kept, period);
    let mut runs: Vec<Vec<(i64, f64, f64)>> = vec![vec![(0, kept[0].centre, kept[0].depth)]];
    for j in 0..kept.len() - 1 {
        let ratio = (kept[j + 1].centre - kept[j].centre) / spacing[j];
        let steps = ratio.round();
        let run = runs.last_mut().expect("one run at least");
        if (ratio - steps).abs() <= 0.3 && (1.0..=3.0).contains(&steps) {
            let k = run.last().expect("runs are never empty").0 + steps as i64;
            run.push((k, kept[j + 1].centre, kept[j + 1].depth));
        } else {
            runs.push(vec![(0, kept[j + 1].centre, kept[j + 1].depth)]);
        }
    }
    runs.into_iter().max_by_key(|r| r.len()).unwrap_or_default()
}

/// For each gap between neighbouring dips, the median of the gaps within six of it that
/// lie between 0.6 and 1.6 mean periods: the local tick spacing, robust to a missing
/// tick (a double gap) or a stray dip (two short gaps).
fn local_spacings(dips: &[Dip], period: f64) -> Vec<f64> {
    let gaps: Vec<f64> = dips.windows(2).map(|w| w[1].centre - w[0].centre).collect();
    let mut near = Vec::with_capacity(13);
    (0..gaps.len())
        .map(|j| {
            near.clear();
            near.extend(
                gaps[j.saturating_sub(6)..(j + 7).min(gaps.len())]
                    .iter()
                    .copied()
                    .filter(|g| (0.6 * period..=1.6 * period).contains(g)),
            );
            if near.is_empty() {
                return period;
            }
            near.sort_by(f64::total_cmp);
            near[near.len() / 2]
        })
        .collect()
}

/// One tick followed across the band.
#[derive(Debug, Clone, Copy)]
pub(super) struct TickTrace {
    /// Lowest and highest offset across the band (px from its centre line) where the
    /// tick stays darker than half its darkness on the centre line.
    pub extent: (i32, i32),
    /// Slope of its centre line, px along per px across, with its standard
    /// uncertainty; None for ticks under 6 px long.
    pub slant: Option<TickSlant>,
}

/// The slant of one tick in the photo.
#[derive(Debug, Clone, Copy)]
pub(super) struct TickSlant {
    /// Position along the band where its centre line crosses the band's, px.
    pub t: f64,
    /// d(along)/d(across) of its centre line.
    pub slope: f64,
    /// Standard uncertainty of the slope.
    pub u: f64,
}

/// Follows every tick row by row across the band, outwards from the centre line, each
/// row's darkness-weighted centre found from the row before it. The rows the tick
/// reaches give its length; a straight line through their centres gives its slant.
/// Ticks are parallel on the screen, so in the photo they meet at the vanishing point of
/// the across direction: their slants tell a camera tilted about the ruler's own line,
/// which the spacing along the ruler cannot show.
pub(super) fn trace_ticks(
    raster: &dyn Raster,
    profile: &BandProfile,
    ticks: &[(i64, f64)],
    period_px: f64,
) -> Vec<TickTrace> {
    let reach = (8.0 * period_px).clamp(10.0, 150.0) as i32;
    let half = 0.3 * period_px;
    let value = |s: f64, off: f64| {
        let p = profile.origin + profile.along * s + profile.across * off;
        raster.bilinear(p.x, p.y).map(f64::from)
    };
    // Centre and darkness of the tick on row `off`, starting from `c`.
    let row = |c: f64, off: f64| -> Option<(f64, f64)> {
        // Iterated to convergence: a window narrower than the blurred tick pulls each
        // centroid towards where the window started, and stopping early would carry
        // that lag from row to row and flatten the slant.
        let mut light = 0.0;
        let c = converge(c, |c| {
            light = 0.5 * (value(c - 0.5 * period_px, off)? + value(c + 0.5 * period_px, off)?);
            centroid(c, half, |x| Some((light - value(x, off)?).max(0.0)))
        })?;
        Some((c, light - value(c, off)?))
    };
    ticks
        .par_iter()
        .map(|&(_, t)| {
            let Some((c0, d0)) = row(t, 0.0).filter(|r| r.1 > 0.0) else {
                return TickTrace {
                    extent: (0, -1),
                    slant: None,
                };
            };
            let mut pts = vec![(0.0, c0)];
            let mut ends = [0i32; 2];
            for (end, dir) in ends.iter_mut().zip([-1, 1]) {
                let mut c = c0;
                for o in 1..=reach {
                    match row(c, (dir * o) as f64) {
                        Some((nc, d)) if d > 0.5 * d0 && (nc - c).abs() < half => {
                            c = nc;
                            *end = dir * o;
                            pts.push(((dir * o) as f64, nc));
                        }
                        _ => break,
                    }
                }
            }
            // The blurred ends of the tick say little about its direction.
            let (lo, hi) = (ends[0] + 1, ends[1] - 1);
            let core: Vec<(f64, f64)> = pts
                .into_iter()
                .filter(|p| p.0 >= lo as f64 && p.0 <= hi as f64)
                .collect();
            TickTrace {
                extent: (ends[0], ends[1]),
                slant: if core.len() >= 6 {
                    line_through(&core)
                } else {
                    None
                },
            }
        })
        .collect()
}

/// Least-squares line t = t0 + slope·o through the (o, t) rows of a tick (at least 6).
fn line_through(pts: &[(f64, f64)]) -> Option<TickSlant> {
    let (o, t): (Vec<f64>, Vec<f64>) = pts.iter().copied().unzip();
    let fit = fit_line(&o, &t, &vec![1.0; pts.len()]).ok()?;
    // Floor of 0.02 px per centre: bilinear sampling and the JPEG leave at least that.
    let sigma = fit.s2.sqrt().max(0.02);
    Some(TickSlant {
        t: fit.intercept,
        slope: fit.slope,
        u: sigma / fit.sxx.sqrt(),
    })
}

/// Whether every `modulus`-th mark stands out from the rest in `values` (a tick's length,
/// a line's depth), as the 5 mm and 10 mm marks of a millimetre ruler or graph paper do
/// (common practice of rule and paper makers). Returns, for the phase that makes it
/// largest, the mean value of every `modulus`-th mark over the mean of the rest, or None
/// when too few marks were measured. Means, not medians: counted 5 mm marks alternate
/// with 10 mm ones, and the median of a handful of alternating values swings to either,
/// while their mean stays in between.
pub(super) fn phase_contrast(ticks: &[(i64, f64)], values: &[f64], modulus: i64) -> Option<f64> {
    let mut best: Option<f64> = None;
    for phase in 0..modulus {
        let (mut long, mut rest) = ((0.0, 0usize), (0.0, 0usize));
        for (&(k, _), &len) in ticks.iter().zip(values) {
            let class = if k.rem_euclid(modulus) == phase {
                &mut long
            } else {
                &mut rest
            };
            class.0 += len;
            class.1 += 1;
        }
        if long.1 < 3 || rest.1 < 3 {
            continue;
        }
        let ratio = (long.0 / long.1 as f64) / (rest.0 / rest.1 as f64).max(1e-12);
        best = Some(best.map_or(ratio, |b: f64| b.max(ratio)));
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;

    fn dips(centres: &[f64]) -> Vec<Dip> {
        centres
            .iter()
            .map(|&c| Dip {
                centre: c,
                depth: 1.0,
            })
            .collect()
    }

    #[test]
    fn spacing_changing_by_a_third_is_counted_without_a_slip() {
        // Perspective t(k) = 20·k/(1 + 0.006·k): the spacing falls from 20 to ~14 over
        // 60 ticks, while the mean period is about 17.
        let t = |k: f64| 20.0 * k / (1.0 + 0.006 * k);
        let centres: Vec<f64> = (0..60).map(|k| 5.0 + t(k as f64)).collect();
        let got = index_dips(&dips(&centres), 17.0);
        assert_eq!(got.len(), 60);
        for (i, (k, _, _)) in got.iter().enumerate() {
            assert_eq!(*k, i as i64);
        }
    }

    #[test]
    fn a_hidden_tick_leaves_a_hole_and_a_stray_dip_is_dropped() {
        let mut centres: Vec<f64> = (0..30).map(|k| 10.0 * k as f64).collect();
        centres.remove(12); // hidden under a printed number
        centres.push(203.0); // a speck near tick 20
        let mut d = dips(&centres);
        d.last_mut().unwrap().depth = 0.4;
        let got = index_dips(&d, 10.0);
        assert_eq!(got.len(), 29);
        assert!(
            got.iter()
                .all(|&(k, c, _)| (c - 10.0 * k as f64).abs() < 1e-9)
        );
        assert!(!got.iter().any(|&(k, _, _)| k == 12));
    }

    #[test]
    fn fifth_tick_contrast_tells_millimetre_ticks_from_five_millimetre_marks() {
        // Millimetre ticks: 3, 4.5 and 6 mm long at every tick, 5th and 10th.
        let mm: Vec<(i64, f64)> = (0..40).map(|k| (k, 0.0)).collect();
        let len = |k: i64| match (k % 10, k % 5) {
            (0, _) => 60.0,
            (_, 0) => 45.0,
            _ => 30.0,
        };
        let lengths: Vec<f64> = mm.iter().map(|&(k, _)| len(k)).collect();
        assert!(phase_contrast(&mm, &lengths, 5).unwrap() > 1.4);
        // The same ruler with only its 5 mm marks resolved: lengths alternate 45, 60.
        let coarse: Vec<f64> = (0..40).map(|k| len(5 * k)).collect();
        assert!(phase_contrast(&mm, &coarse, 5).unwrap() < 1.2);
    }
}
