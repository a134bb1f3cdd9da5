//! Axis arithmetic for the profile plot: value ranges that survive empty, flat and
//! single-valued data, tick steps from the 1-2-5 sequence, and tick labels with just enough
//! decimals to tell neighbouring ticks apart.

/// A closed value interval with `lo < hi`, both finite.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Span {
    pub(crate) lo: f64,
    pub(crate) hi: f64,
}

impl Span {
    /// The range of the finite values, widened where it is empty or flat so that it can be
    /// drawn; `None` when there is no finite value at all.
    pub(crate) fn of(values: impl IntoIterator<Item = f64>) -> Option<Span> {
        let (lo, hi) = values
            .into_iter()
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(v), hi.max(v))
            });
        (lo <= hi).then(|| Span::widened(lo, hi))
    }

    /// `lo..hi`, opened up around a single value by a tenth of its size (or by 1 at zero), so
    /// that a flat profile shows as a line across the middle.
    pub(crate) fn widened(lo: f64, hi: f64) -> Span {
        let width = hi - lo;
        let mid = lo / 2.0 + hi / 2.0;
        if width > mid.abs() * 1e-12 && width.is_finite() {
            return Span { lo, hi };
        }
        let half = if mid == 0.0 { 1.0 } else { mid.abs() * 0.1 };
        Span {
            lo: mid - half,
            hi: mid + half,
        }
    }

    pub(crate) fn width(self) -> f64 {
        self.hi - self.lo
    }

    /// The span grown by `frac` of its width on both sides, so that no sample sits on the
    /// frame.
    pub(crate) fn padded(self, frac: f64) -> Span {
        let pad = self.width() * frac;
        Span::widened(self.lo - pad, self.hi + pad)
    }
}

/// The smallest step from the 1-2-5 sequence (1, 2, 5, 10, 20, ...) that cuts `span` into at
/// most `max_ticks` intervals: the usual choice for readable axes (common practice, since
/// every tick value then has a single significant digit that changes).
pub(crate) fn nice_step(span: f64, max_ticks: usize) -> f64 {
    let raw = span.abs() / max_ticks.max(1) as f64;
    if !(raw.is_finite() && raw > 0.0) {
        return 1.0;
    }
    let mag = 10f64.powf(raw.log10().floor());
    // A relative slack so that e.g. 10 over 5 intervals gives 2, not 5.
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw * (1.0 - 1e-9))
        .unwrap_or(10.0 * mag)
}

/// Tick values of `step` within `span`, as whole multiples of `step` so that no rounding
/// error builds up.
pub(crate) fn ticks(span: Span, step: f64) -> Vec<f64> {
    if !(step.is_finite() && step > 0.0) {
        return Vec::new();
    }
    let first = (span.lo / step - 1e-9).ceil();
    let last = (span.hi / step + 1e-9).floor();
    if !(first.is_finite() && last.is_finite()) || last - first > 1000.0 {
        return Vec::new();
    }
    (first as i64..=last as i64)
        .map(|k| k as f64 * step)
        .collect()
}

/// The label of a tick at `v` on an axis with ticks `step` apart: fixed decimals for
/// everyday numbers, an exponent for very large or very small ones.
pub(crate) fn tick_label(v: f64, step: f64, largest: f64) -> String {
    // A tick within rounding of zero is zero (no "-0").
    let v = if v.abs() < step * 1e-6 { 0.0 } else { v };
    let step_exp = (step.log10() + 1e-9).floor() as i32;
    let big_exp = largest.abs().max(step).log10().floor() as i32;
    if big_exp >= 6 || step_exp <= -5 {
        let digits = (big_exp - step_exp).clamp(0, 6) as usize;
        return format!("{v:.digits$e}");
    }
    let decimals = (-step_exp).max(0) as usize;
    format!("{v:.decimals$}")
}

/// Maps values of `span` onto pixels `0..=len-1`; `flip` runs the pixels upwards, as a
/// y axis does.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Scale {
    pub(crate) span: Span,
    pub(crate) len: u32,
    pub(crate) flip: bool,
}

impl Scale {
    /// The pixel coordinate (pixel centres at whole numbers) of value `v`.
    pub(crate) fn px(self, v: f64) -> f64 {
        let t = (v - self.span.lo) / self.span.width() * (self.len.max(1) - 1) as f64;
        if self.flip {
            (self.len.max(1) - 1) as f64 - t
        } else {
            t
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn steps_follow_one_two_five() {
        // Expected values worked by hand from the 1-2-5 rule (common practice).
        assert_eq!(nice_step(10.0, 5), 2.0);
        assert_eq!(nice_step(10.0, 10), 1.0);
        assert_eq!(nice_step(10.0, 4), 5.0);
        assert_eq!(nice_step(10.0, 3), 5.0);
        assert_eq!(nice_step(10.0, 1), 10.0);
        assert_eq!(nice_step(7.3, 8), 1.0);
        assert_eq!(nice_step(0.0123, 5), 0.005);
        assert_eq!(nice_step(30000.0, 6), 5000.0);
        assert!((nice_step(1.2e-6, 6) - 2e-7).abs() < 1e-20);
        assert_eq!(
            nice_step(-4.0, 4),
            1.0,
            "a reversed span counts by its size"
        );
        assert_eq!(nice_step(0.0, 4), 1.0);
        assert_eq!(nice_step(f64::NAN, 4), 1.0);
    }

    #[test]
    fn ticks_are_whole_multiples_inside_the_span() {
        let t = ticks(
            Span {
                lo: -0.35,
                hi: 0.62,
            },
            0.2,
        );
        assert_eq!(t.len(), 5);
        let want = [-0.2, 0.0, 0.2, 0.4, 0.6];
        for (a, b) in t.iter().zip(want) {
            assert!((a - b).abs() < 1e-12, "{t:?}");
        }
        // The ends count when they are ticks themselves.
        assert_eq!(ticks(Span { lo: 0.0, hi: 1.0 }, 0.5), vec![0.0, 0.5, 1.0]);
        assert!(ticks(Span { lo: 0.0, hi: 1.0 }, 0.0).is_empty());
        assert!(ticks(Span { lo: 0.0, hi: 1e9 }, 1.0).is_empty(), "too many");
    }

    #[test]
    fn labels_carry_the_step_decimals() {
        assert_eq!(tick_label(0.30000000000000004, 0.1, 1.0), "0.3");
        assert_eq!(tick_label(-1e-17, 0.1, 1.0), "0.0");
        assert_eq!(tick_label(20.0, 5.0, 40.0), "20");
        assert_eq!(tick_label(-2.5, 0.5, 3.0), "-2.5");
        assert_eq!(tick_label(0.004, 0.002, 0.01), "0.004");
        assert_eq!(tick_label(2.0e6, 5e5, 3e6), "2.0e6");
        // The top tick, 1.0e-5, needs the digit that 4e-6 then shows as well.
        assert_eq!(tick_label(4e-6, 2e-6, 1e-5), "4.0e-6");
    }

    #[test]
    fn spans_survive_flat_and_empty_data() {
        assert_eq!(Span::of([]), None);
        assert_eq!(Span::of([f64::NAN, f64::INFINITY]), None);
        assert_eq!(
            Span::of([3.0, f64::NAN, 1.0]),
            Some(Span { lo: 1.0, hi: 3.0 })
        );
        let flat = Span::of([5.0, 5.0]).unwrap();
        assert!(flat.lo < 5.0 && flat.hi > 5.0, "{flat:?}");
        let zero = Span::of([0.0]).unwrap();
        assert_eq!(zero, Span { lo: -1.0, hi: 1.0 });
        let r = Span { lo: 0.0, hi: 2.0 }.padded(0.05);
        assert!(
            (r.lo + 0.1).abs() < 1e-12 && (r.hi - 2.1).abs() < 1e-12,
            "{r:?}"
        );
    }

    #[test]
    fn scales_map_ends_to_the_edge_pixels() {
        let s = Scale {
            span: Span { lo: -1.0, hi: 1.0 },
            len: 101,
            flip: true,
        };
        assert_eq!(s.px(-1.0), 100.0);
        assert_eq!(s.px(1.0), 0.0);
        assert_eq!(s.px(0.0), 50.0);
    }
}
