//! Sub-pixel spot positions. Around each candidate the window is binned so a spot spans a
//! few bins (binning keeps the photon information while making the fit cheap), a plane
//! fitted to the window border gives the local background, the background-subtracted
//! weighted centroid and second moments start an elliptical Gaussian fit (on a planar
//! background) by Levenberg–Marquardt. Clipped pixels are censored: they only say the
//! true value is at least the clip level, so they add a residual only where the model
//! falls below it. The position uncertainty is the fit covariance (JᵀJ)⁻¹·s², inflated
//! by the correlation of the residuals (speckle makes neighbouring pixels agree, so
//! there are fewer independent samples than pixels).

use super::FindError;
use super::blobs::Blob;
use crate::fit::lm::{self, LeastSquares, LmOptions};
use crate::raster::Raster;
use nalgebra::{DMatrix, Matrix3, Vector2, Vector3};

/// How a spot position was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpotMethod {
    /// Censored elliptical Gaussian fit.
    GaussianFit,
    /// Weighted centroid (the fit failed or the spot is too small to fit).
    Centroid,
}

/// A located spot.
#[derive(Debug, Clone, PartialEq)]
pub struct Spot {
    /// Centre, px.
    pub px: Vector2<f64>,
    /// Standard uncertainty of each coordinate, px.
    pub px_u: Vector2<f64>,
    /// Peak height above the background (linear units; may exceed 1 for clipped spots).
    pub amplitude: f64,
    /// Gaussian σ along the major and minor axes, px.
    pub sigma_px: (f64, f64),
    /// Background level at the centre.
    pub background: f64,
    /// Clipped pixels in the fit window.
    pub clipped_pixels: usize,
    /// Variance inflation applied for correlated residuals.
    pub correlation_factor: f64,
    /// How the position was obtained.
    pub method: SpotMethod,
}

/// One binned sample of the window.
#[derive(Clone, Copy)]
struct Sample {
    x: f64,
    y: f64,
    v: f64,
    clipped: bool,
    gx: usize,
    gy: usize,
}

/// Reads the window around `centre` as bins of `bin`×`bin` px.
fn binned_window(
    raster: &dyn Raster,
    centre: Vector2<f64>,
    half_px: f64,
    bin: usize,
) -> (Vec<Sample>, usize, usize) {
    let (w, h) = (raster.width() as f64, raster.height() as f64);
    let x0 = (centre.x - half_px).floor().max(0.0) as usize;
    let y0 = (centre.y - half_px).floor().max(0.0) as usize;
    let x1 = ((centre.x + half_px).ceil().min(w - 1.0)) as usize;
    let y1 = ((centre.y + half_px).ceil().min(h - 1.0)) as usize;
    let nx = (x1 + 1 - x0) / bin;
    let ny = (y1 + 1 - y0) / bin;
    let mut out = Vec::with_capacity(nx * ny);
    let mut row = vec![0f32; raster.width()];
    let mut acc = vec![(0f64, false); nx];
    for gy in 0..ny {
        acc.iter_mut().for_each(|a| *a = (0.0, false));
        for y in y0 + gy * bin..y0 + (gy + 1) * bin {
            raster.row_into(y, &mut row);
            for (gx, a) in acc.iter_mut().enumerate() {
                let start = x0 + gx * bin;
                for (dx, v) in row[start..start + bin].iter().enumerate() {
                    a.0 += *v as f64;
                    a.1 |= raster.clipped(start + dx, y);
                }
            }
        }
        let area = (bin * bin) as f64;
        for (gx, a) in acc.iter().enumerate() {
            out.push(Sample {
                x: (x0 + gx * bin) as f64 + 0.5 * (bin as f64 - 1.0),
                y: (y0 + gy * bin) as f64 + 0.5 * (bin as f64 - 1.0),
                v: a.0 / area,
                clipped: a.1,
                gx,
                gy,
            });
        }
    }
    (out, nx, ny)
}

/// Least-squares plane v = c0 + c1·x + c2·y through the window's border samples, with
/// the robust scatter of the border about it.
fn border_plane(samples: &[Sample], nx: usize, ny: usize) -> Option<(Vector3<f64>, f64)> {
    let border: Vec<&Sample> = samples
        .iter()
        .filter(|s| s.gx < 2 || s.gy < 2 || s.gx + 2 >= nx || s.gy + 2 >= ny)
        .filter(|s| !s.clipped)
        .collect();
    if border.len() < 8 {
        return None;
    }
    let (mx, my) = (samples[0].x, samples[0].y);
    let mut ata = Matrix3::zeros();
    let mut atb = Vector3::zeros();
    for s in &border {
        let a = Vector3::new(1.0, s.x - mx, s.y - my);
        ata += a * a.transpose();
        atb += a * s.v;
    }
    let c = ata.try_inverse()? * atb;
    let mut dev: Vec<f64> = border
        .iter()
        .map(|s| (s.v - c[0] - c[1] * (s.x - mx) - c[2] * (s.y - my)).abs())
        .collect();
    let mid = dev.len() / 2;
    dev.select_nth_unstable_by(mid, f64::total_cmp);
    // Express the plane about the origin of photo coordinates.
    let plane = Vector3::new(c[0] - c[1] * mx - c[2] * my, c[1], c[2]);
    Some((plane, 1.4826 * dev[mid]))
}

/// Elliptical Gaussian on a plane: p = [A, x0, y0, a, b, c, B, bx, by] with the quadratic
/// form Q = a·dx² + 2b·dx·dy + c·dy² and the background plane about (ox, oy).
struct GaussModel<'a> {
    samples: &'a [Sample],
    origin: Vector2<f64>,
}

impl GaussModel<'_> {
    fn eval(&self, p: &[f64], s: &Sample) -> (f64, f64) {
        let (dx, dy) = (s.x - p[1], s.y - p[2]);
        let q = p[3] * dx * dx + 2.0 * p[4] * dx * dy + p[5] * dy * dy;
        let e = (-0.5 * q).exp();
        let bg = p[6] + p[7] * (s.x - self.origin.x) + p[8] * (s.y - self.origin.y);
        (bg + p[0] * e, e)
    }
}

impl LeastSquares for GaussModel<'_> {
    fn residual_count(&self) -> usize {
        self.samples.len()
    }
    fn residuals(&self, p: &[f64], r: &mut [f64]) -> bool {
        if !(p[3] > 0.0 && p[5] > 0.0 && p[3] * p[5] > p[4] * p[4]) {
            return false;
        }
        for (ri, s) in r.iter_mut().zip(self.samples) {
            let (m, _) = self.eval(p, s);
            // A bin with clipped pixels only bounds the true mean from below.
            *ri = if s.clipped {
                (m - s.v).min(0.0)
            } else {
                m - s.v
            };
        }
        true
    }
    fn jacobian(&self, p: &[f64], _r: &[f64], jac: &mut DMatrix<f64>) -> bool {
        for (i, s) in self.samples.iter().enumerate() {
            let (m, e) = self.eval(p, s);
            if s.clipped && m >= s.v {
                for j in 0..9 {
                    jac[(i, j)] = 0.0;
                }
                continue;
            }
            let (dx, dy) = (s.x - p[1], s.y - p[2]);
            let ae = p[0] * e;
            jac[(i, 0)] = e;
            jac[(i, 1)] = ae * (p[3] * dx + p[4] * dy);
            jac[(i, 2)] = ae * (p[4] * dx + p[5] * dy);
            jac[(i, 3)] = -0.5 * ae * dx * dx;
            jac[(i, 4)] = -ae * dx * dy;
            jac[(i, 5)] = -0.5 * ae * dy * dy;
            jac[(i, 6)] = 1.0;
            jac[(i, 7)] = s.x - self.origin.x;
            jac[(i, 8)] = s.y - self.origin.y;
        }
        true
    }
}

/// Refines a candidate blob to a sub-pixel spot position with uncertainty.
pub fn refine(raster: &dyn Raster, blob: &Blob) -> Result<Spot, FindError> {
    let radius = blob.radius_px.max(1.0);
    let bin = ((radius / 4.0).round() as usize).clamp(1, 8);
    let half = (4.0 * radius + 4.0 * bin as f64).clamp(8.0, 320.0);
    let (samples, nx, ny) = binned_window(raster, blob.centroid, half, bin);
    if nx < 7 || ny < 7 {
        return Err(FindError::Unmeasurable(format!(
            "the spot near ({:.0}, {:.0}) is too close to the edge of the photo to measure",
            blob.centroid.x, blob.centroid.y
        )));
    }
    let (plane, sigma_bg) = border_plane(&samples, nx, ny).ok_or_else(|| {
        FindError::Unmeasurable(format!(
            "no clean background around the spot near ({:.0}, {:.0})",
            blob.centroid.x, blob.centroid.y
        ))
    })?;
    let bg_at = |x: f64, y: f64| plane[0] + plane[1] * x + plane[2] * y;

    // Weighted centroid and second moments above 3σ of the background.
    let floor = 3.0 * sigma_bg.max(1e-6);
    let (mut sw, mut sx, mut sy) = (0.0, 0.0, 0.0);
    for s in &samples {
        let d = s.v - bg_at(s.x, s.y);
        if d > floor {
            sw += d;
            sx += d * s.x;
            sy += d * s.y;
        }
    }
    if !(sw > 0.0) {
        return Err(FindError::Unmeasurable(format!(
            "the spot near ({:.0}, {:.0}) does not stand out from its surroundings",
            blob.centroid.x, blob.centroid.y
        )));
    }
    let (cx, cy) = (sx / sw, sy / sw);
    let (mut mxx, mut myy, mut mxy) = (0.0, 0.0, 0.0);
    for s in &samples {
        let d = s.v - bg_at(s.x, s.y);
        if d > floor {
            mxx += d * (s.x - cx).powi(2);
            myy += d * (s.y - cy).powi(2);
            mxy += d * (s.x - cx) * (s.y - cy);
        }
    }
    let bin_var = (bin * bin) as f64 / 12.0;
    let cov = nalgebra::Matrix2::new(
        (mxx / sw).max(bin_var),
        mxy / sw,
        mxy / sw,
        (myy / sw).max(bin_var),
    );
    let inv = cov.try_inverse().unwrap_or(nalgebra::Matrix2::identity());
    let clipped_pixels = samples.iter().filter(|s| s.clipped).count() * bin * bin;
    let peak = samples
        .iter()
        .map(|s| s.v - bg_at(s.x, s.y))
        .fold(0.0, f64::max);
    let centroid_spot = |u: f64| Spot {
        px: Vector2::new(cx, cy),
        px_u: Vector2::new(u, u),
        amplitude: peak,
        sigma_px: (cov[(0, 0)].sqrt(), cov[(1, 1)].sqrt()),
        background: bg_at(cx, cy),
        clipped_pixels,
        correlation_factor: 1.0,
        method: SpotMethod::Centroid,
    };

    let origin = Vector2::new(cx, cy);
    let model = GaussModel {
        samples: &samples,
        origin,
    };
    let start = [
        peak.max(floor),
        cx,
        cy,
        inv[(0, 0)],
        inv[(0, 1)],
        inv[(1, 1)],
        bg_at(cx, cy),
        plane[1],
        plane[2],
    ];
    let options = LmOptions {
        ftol: 1e-10,
        xtol: 1e-10,
        gtol: 1e-10,
        max_iterations: 100,
    };
    let fit = match lm::minimize(&model, &start, &options, "spot") {
        Ok(f) => f,
        Err(_) => {
            // Fall back on the centroid with a conservative uncertainty: σ/√(flux/σ_bg).
            let snr = (sw / sigma_bg.max(1e-9)).max(1.0);
            return Ok(centroid_spot(cov.trace().sqrt() / snr.sqrt()));
        }
    };
    let p = &fit.params;
    let moved = (Vector2::new(p[1], p[2]) - origin).norm();
    let well_formed = p[0] > 0.0 && p[3] > 0.0 && p[5] > 0.0 && p[3] * p[5] > p[4] * p[4];
    let (Some(cov_p), true, true) = (fit.covariance(), well_formed, moved < half) else {
        let snr = (sw / sigma_bg.max(1e-9)).max(1.0);
        return Ok(centroid_spot(cov.trace().sqrt() / snr.sqrt()));
    };
    let factor = correlation_inflation(&samples, &fit.residuals, nx, ny);
    let shape = nalgebra::Matrix2::new(p[3], p[4], p[4], p[5]);
    let sigmas = shape
        .try_inverse()
        .map(|c| {
            let e = c.symmetric_eigen().eigenvalues;
            (e.max().max(0.0).sqrt(), e.min().max(0.0).sqrt())
        })
        .unwrap_or((0.0, 0.0));
    Ok(Spot {
        px: Vector2::new(p[1], p[2]),
        px_u: Vector2::new(
            (cov_p[(1, 1)] * factor).max(0.0).sqrt(),
            (cov_p[(2, 2)] * factor).max(0.0).sqrt(),
        ),
        amplitude: p[0],
        sigma_px: sigmas,
        background: p[6],
        clipped_pixels,
        correlation_factor: factor,
        method: SpotMethod::GaussianFit,
    })
}

/// Variance inflation for residuals correlated between neighbours: for a first-order
/// autoregressive field the variance of a mean grows by (1+ρ)/(1−ρ) per axis, with ρ
/// the lag-one correlation (common practice for an effective sample count).
fn correlation_inflation(samples: &[Sample], residuals: &[f64], nx: usize, ny: usize) -> f64 {
    let mut grid = vec![f64::NAN; nx * ny];
    for (s, r) in samples.iter().zip(residuals) {
        if !s.clipped {
            grid[s.gy * nx + s.gx] = *r;
        }
    }
    let lag = |dx: usize, dy: usize| {
        let (mut num, mut den) = (0.0, 0.0);
        for y in 0..ny - dy {
            for x in 0..nx - dx {
                let (a, b) = (grid[y * nx + x], grid[(y + dy) * nx + x + dx]);
                if a.is_finite() && b.is_finite() {
                    num += a * b;
                    den += 0.5 * (a * a + b * b);
                }
            }
        }
        if den > 0.0 {
            (num / den).clamp(0.0, 0.95)
        } else {
            0.0
        }
    };
    let (rx, ry) = (lag(1, 0), lag(0, 1));
    ((1.0 + rx) / (1.0 - rx) * (1.0 + ry) / (1.0 - ry)).clamp(1.0, 400.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::find::blobs::{coarse_map, find_blobs};
    use crate::raster::OwnedRaster;

    fn gaussian_image(cx: f64, cy: f64, sx: f64, sy: f64, amp: f64, clip: f32) -> OwnedRaster {
        OwnedRaster::from_fn(400, 300, move |x, y| {
            let q = ((x - cx) / sx).powi(2) + ((y - cy) / sy).powi(2);
            (0.05 + 0.0002 * x + amp * (-0.5 * q).exp()) as f32
        })
        .with_clip(clip)
    }

    fn locate(img: &OwnedRaster) -> Spot {
        let map = coarse_map(img, 2);
        let blob = find_blobs(&map, 8.0, 4).into_iter().next().unwrap();
        refine(img, &blob).unwrap()
    }

    #[test]
    fn clean_gaussian_spot_is_located_to_a_hundredth_of_a_pixel() {
        let img = gaussian_image(181.37, 142.81, 5.0, 3.5, 0.6, 10.0);
        let s = locate(&img);
        assert_eq!(s.method, SpotMethod::GaussianFit);
        assert!(
            (s.px - Vector2::new(181.37, 142.81)).norm() < 0.01,
            "{:?}",
            s.px
        );
        assert!(
            (s.sigma_px.0 - 5.0).abs() < 0.1 && (s.sigma_px.1 - 3.5).abs() < 0.1,
            "{:?}",
            s.sigma_px
        );
    }

    #[test]
    fn saturated_core_is_censored_not_biased() {
        // Peak 3× the clip level: a flat-topped spot. The censored fit recovers the centre
        // and the true amplitude from the wings.
        let img = gaussian_image(200.6, 150.2, 6.0, 6.0, 3.0, 0.9);
        let s = locate(&img);
        assert!(s.clipped_pixels > 20);
        assert!(
            (s.px - Vector2::new(200.6, 150.2)).norm() < 0.02,
            "{:?}",
            s.px
        );
        assert!((s.amplitude - 3.0).abs() < 0.15, "{}", s.amplitude);
    }
}
