//! The `electron` profile plots: the radial profile on a log scale with the glow fitted
//! under the rings, and the rings' contrast over the glow with the fitted peaks, each ring
//! marked. `--plot` writes both, one above the other; the overlay's margin carries the
//! contrast panel, where rings a few per cent high can be seen.

use crate::Error;
use crate::find::rings::RadialProfile;
use crate::find::rings::peaks::RingSearch;
use crate::record::atomic::write_atomic;
use crate::record::overlay::encode_png;
use crate::record::plot::{ProfilePlot, render_profile};
use image::RgbImage;
use std::path::Path;

/// The series the two panels draw, over the bins out to a little past the searched range.
pub(super) struct Panels {
    pub x: Vec<f64>,
    pub used: Vec<bool>,
    pub log_measured: Vec<f64>,
    pub log_glow: Vec<f64>,
    pub contrast: Vec<f64>,
    pub contrast_model: Vec<f64>,
    pub markers: Vec<(f64, String)>,
    pub x_label: String,
}

impl Panels {
    /// The panels of a search; `markers` at the rings' radii; `unit` of the radius.
    pub fn new(
        profile: &RadialProfile,
        search: &RingSearch,
        markers: Vec<(f64, String)>,
        unit: &str,
    ) -> Self {
        let (lo, hi) = search.range_mm;
        let end = hi + 0.1 * (hi - lo);
        let bins: Vec<usize> = (0..profile.r_mm.len())
            .filter(|&i| profile.r_mm[i] <= end)
            .collect();
        let log = |v: f64| if v > 0.0 { v.log10() } else { f64::NAN };
        let pct = |v: f64| 100.0 * v;
        Panels {
            x: bins.iter().map(|&i| profile.r_mm[i]).collect(),
            used: bins
                .iter()
                .map(|&i| search.background[i].is_finite())
                .collect(),
            log_measured: bins.iter().map(|&i| log(profile.value[i])).collect(),
            log_glow: bins.iter().map(|&i| log(search.background[i])).collect(),
            contrast: bins
                .iter()
                .map(|&i| pct(profile.value[i] / search.background[i] - 1.0))
                .collect(),
            contrast_model: bins
                .iter()
                .map(|&i| pct(search.model[i] / search.background[i] - 1.0))
                .collect(),
            markers,
            x_label: format!("radius on the screen ({unit})"),
        }
    }

    /// The log profile with the glow.
    pub fn glow_plot(&self) -> ProfilePlot<'_> {
        ProfilePlot {
            title: "electron rings: radial profile and the glow under the rings (log scale)".into(),
            x_label: self.x_label.clone(),
            y_label: "log10 intensity (linear light)".into(),
            x: &self.x,
            measured: &self.log_measured,
            used: &self.used,
            model: &self.log_glow,
            markers: self.markers.clone(),
        }
    }

    /// The contrast over the glow with the fitted rings.
    pub fn contrast_plot(&self) -> ProfilePlot<'_> {
        ProfilePlot {
            title: "electron rings: light over the glow (%) and the fitted rings".into(),
            x_label: self.x_label.clone(),
            y_label: "over the glow (%)".into(),
            x: &self.x,
            measured: &self.contrast,
            used: &self.used,
            model: &self.contrast_model,
            markers: self.markers.clone(),
        }
    }

    /// Writes both panels, one above the other, as a PNG.
    pub fn write(&self, path: &Path, force: bool) -> Result<(), Error> {
        let (w, h) = (1200, 620);
        let top = render_profile(&self.glow_plot(), w, h)?;
        let bottom = render_profile(&self.contrast_plot(), w, h)?;
        let mut img = RgbImage::new(w, 2 * h);
        image::imageops::replace(&mut img, &top, 0, 0);
        image::imageops::replace(&mut img, &bottom, 0, i64::from(h));
        let png = encode_png(&img)?;
        write_atomic(path, &png, force)?;
        Ok(())
    }
}
