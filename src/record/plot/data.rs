//! The samples of a profile plot, checked, put in x order and spanned: the value ranges the
//! panels show.

use super::ProfilePlot;
use super::axes::Span;
use crate::record::RecordError;

/// One sample with a finite position.
#[derive(Clone, Copy)]
pub(super) struct Sample {
    pub(super) x: f64,
    pub(super) measured: f64,
    pub(super) model: f64,
    pub(super) used: bool,
}

impl Sample {
    pub(super) fn residual(&self) -> f64 {
        self.measured - self.model
    }
}

/// The samples in x order and the ranges they span (`None`: nothing finite to span).
pub(super) struct Data {
    pub(super) samples: Vec<Sample>,
    pub(super) x: Option<Span>,
    pub(super) y: Option<Span>,
    pub(super) residual: Option<Span>,
}

impl Data {
    pub(super) fn new(plot: &ProfilePlot) -> Result<Data, RecordError> {
        let n = plot.x.len();
        for (name, len) in [
            ("measured", plot.measured.len()),
            ("used", plot.used.len()),
            ("model", plot.model.len()),
        ] {
            if len != n {
                return Err(RecordError::Plot(format!(
                    "the profile has {n} positions but {len} {name} values; every sample \
                     needs one of each"
                )));
            }
        }
        let mut samples: Vec<Sample> = (0..n)
            .map(|i| Sample {
                x: plot.x[i],
                measured: plot.measured[i],
                model: plot.model[i],
                used: plot.used[i],
            })
            .filter(|s| s.x.is_finite() && (s.measured.is_finite() || s.model.is_finite()))
            .collect();
        samples.sort_by(|a, b| a.x.total_cmp(&b.x));
        let x = Span::of(samples.iter().map(|s| s.x));
        let y =
            Span::of(samples.iter().flat_map(|s| [s.measured, s.model])).map(|s| s.padded(0.05));
        // The residual's scale follows the fitted samples: a left-out saturated one could be
        // far off and would flatten the rest.
        let biggest = |keep: &dyn Fn(&Sample) -> bool| {
            samples
                .iter()
                .filter(|s| keep(s))
                .map(|s| s.residual().abs())
                .filter(|r| r.is_finite())
                .reduce(f64::max)
        };
        let residual = biggest(&|s| s.used)
            .or_else(|| biggest(&|_| true))
            .map(|m| Span::widened(-m, m).padded(0.1));
        Ok(Data {
            samples,
            x,
            y,
            residual,
        })
    }
}
