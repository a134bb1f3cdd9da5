//! The band of fringes and its intensity profile.
//!
//! The band's direction comes from the second moments of its light on the coarse map (the
//! bright region of the laser-coloured candidates on the pattern's line), then the axis is
//! refined at full resolution: cross-sections every few tens of pixels give the band's
//! centre to a fraction of a pixel, and a total-least-squares line goes through them. The
//! profile is sampled bilinearly every pixel along that line and averaged across the
//! band's core, with each sample's standard error from the scatter across and a flag where
//! any pixel it read was clipped.

use super::FindError;
use super::axis::pattern_axis;
use super::blobs::{Blob, CoarseMap};
use crate::fit::line::tls_line;
use crate::raster::Raster;
use nalgebra::{Matrix2, Vector2};

/// The fringe band's axis in the photo.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FringeBand {
    /// A point on the axis (near the pattern's brightest part), px.
    pub point: Vector2<f64>,
    /// Unit direction along the band, pointing right (or down for an upright band).
    pub direction: Vector2<f64>,
    /// RMS half-width of the band across the axis, px.
    pub sigma_across_px: f64,
    /// Along-axis extent of the bright region, px from `point`.
    pub bright: (f64, f64),
}

impl FringeBand {
    /// Unit normal (direction turned +90°).
    pub fn normal(&self) -> Vector2<f64> {
        Vector2::new(-self.direction.y, self.direction.x)
    }

    /// The photo position `t` px along and `o` px across the axis.
    pub fn at(&self, t: f64, o: f64) -> Vector2<f64> {
        self.point + self.direction * t + self.normal() * o
    }
}

/// Cross-sections used to refine the axis.
const SECTIONS: usize = 41;

/// Finds the fringe band among the laser-coloured candidates.
pub fn fringe_band(
    raster: &dyn Raster,
    cmap: &CoarseMap,
    blobs: &[Blob],
) -> Result<FringeBand, FindError> {
    let anchor = (0..blobs.len())
        .max_by(|&a, &b| blobs[a].peak.total_cmp(&blobs[b].peak))
        .ok_or_else(|| {
            FindError::NoPattern(format!(
                "no fringes: nothing in the laser's colour stands out from the background \
                 (noise {:.4} of full scale); check the laser is on and the exposure shows \
                 the pattern",
                cmap.noise
            ))
        })?;
    let members = if blobs.len() >= 2 {
        pattern_axis(blobs, Some(anchor), 16).map_or_else(|_| vec![anchor], |a| a.members)
    } else {
        vec![anchor]
    };
    let coarse = coarse_axis(cmap, blobs, &members)?;
    let mut band = coarse;
    for _ in 0..2 {
        band = refine(raster, &band)?;
    }
    Ok(band)
}

/// Second moments of the background-subtracted light over the members' regions.
fn coarse_axis(
    cmap: &CoarseMap,
    blobs: &[Blob],
    members: &[usize],
) -> Result<FringeBand, FindError> {
    let (bw, bh) = cmap.size;
    let b = cmap.block as f64;
    let mut inside = vec![false; bw * bh];
    for &i in members {
        let (x0, y0, x1, y1) = blobs[i].bbox;
        let (bx0, by0) = (
            (x0 / cmap.block).saturating_sub(1),
            (y0 / cmap.block).saturating_sub(1),
        );
        let (bx1, by1) = (
            (x1 / cmap.block + 1).min(bw - 1),
            (y1 / cmap.block + 1).min(bh - 1),
        );
        for by in by0..=by1 {
            for bx in bx0..=bx1 {
                inside[by * bw + bx] = true;
            }
        }
    }
    let (mut sw, mut sx, mut sy) = (0.0, 0.0, 0.0);
    let mut pts = Vec::new();
    for (i, _) in inside.iter().enumerate().filter(|(_, k)| **k) {
        let v = f64::from(cmap.mean[i] - cmap.background[i]).max(0.0);
        if v <= 3.0 * cmap.noise {
            continue;
        }
        let c = Vector2::new(
            ((i % bw) as f64 + 0.5) * b - 0.5,
            ((i / bw) as f64 + 0.5) * b - 0.5,
        );
        sw += v;
        sx += v * c.x;
        sy += v * c.y;
        pts.push((c, v));
    }
    if !(sw > 0.0) {
        return Err(FindError::NoPattern(
            "no fringes: the brightest candidate has no light above the background".into(),
        ));
    }
    let centroid = Vector2::new(sx / sw, sy / sw);
    let mut m = Matrix2::zeros();
    for (c, v) in &pts {
        let d = c - centroid;
        m += d * d.transpose() * *v;
    }
    m /= sw;
    let eig = m.symmetric_eigen();
    let (major, minor) = if eig.eigenvalues[0] >= eig.eigenvalues[1] {
        (0, 1)
    } else {
        (1, 0)
    };
    let (l1, l2) = (eig.eigenvalues[major], eig.eigenvalues[minor].max(0.0));
    if !(l1 > 4.0 * l2.max(b * b / 12.0)) {
        return Err(FindError::NoPattern(format!(
            "no fringe band: the light around ({:.0}, {:.0}) px is round, not drawn out into a \
             line of fringes",
            centroid.x, centroid.y
        )));
    }
    let mut direction: Vector2<f64> = eig.eigenvectors.column(major).into_owned();
    if direction.x < 0.0 || (direction.x == 0.0 && direction.y < 0.0) {
        direction = -direction;
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (c, _) in &pts {
        let t = (c - centroid).dot(&direction);
        lo = lo.min(t - b);
        hi = hi.max(t + b);
    }
    Ok(FringeBand {
        point: centroid,
        direction,
        sigma_across_px: l2.sqrt().max(b),
        bright: (lo, hi),
    })
}

/// One refinement: the band centre in cross-sections, a weighted TLS line through them.
fn refine(raster: &dyn Raster, band: &FringeBand) -> Result<FringeBand, FindError> {
    let reach = (4.0 * band.sigma_across_px).max(8.0);
    let (lo, hi) = band.bright;
    let mut centres = Vec::new();
    let mut weights = Vec::new();
    let mut sigmas = Vec::new();
    for k in 0..SECTIONS {
        let t = lo + (hi - lo) * (k as f64 + 0.5) / SECTIONS as f64;
        let n = (2.0 * reach) as usize + 1;
        let samples: Vec<Option<f32>> = (0..n)
            .map(|j| {
                let o = -reach + j as f64;
                let p = band.at(t, o);
                raster.bilinear(p.x, p.y)
            })
            .collect();
        if samples.iter().any(|s| s.is_none()) {
            continue;
        }
        let v: Vec<f64> = samples
            .iter()
            .map(|s| f64::from(s.unwrap_or(0.0)))
            .collect();
        // Background from the outer fifth on each side.
        let edge = (n / 5).max(1);
        let mut outer: Vec<f64> = v[..edge].iter().chain(&v[n - edge..]).copied().collect();
        outer.sort_by(f64::total_cmp);
        let bg = outer[outer.len() / 2];
        let (mut sw, mut so, mut soo) = (0.0, 0.0, 0.0);
        for (j, &vj) in v.iter().enumerate() {
            let w = (vj - bg).max(0.0);
            let o = -reach + j as f64;
            sw += w;
            so += w * o;
            soo += w * o * o;
        }
        if sw <= 0.0 {
            continue;
        }
        let mean_o = so / sw;
        centres.push(band.at(t, mean_o));
        weights.push(sw);
        sigmas.push(((soo - so * so / sw) / sw).max(0.25).sqrt());
    }
    if centres.len() < 5 {
        return Err(FindError::NoPattern(
            "no fringe band: too few cross-sections of the pattern lie inside the photo".into(),
        ));
    }
    let bad_line = |e: crate::fit::FitError| {
        FindError::NoPattern(format!("the fringe band does not lie on a line: {e}"))
    };
    let mut line = tls_line(&centres, &weights).map_err(bad_line)?;
    // Sections crossed by a streak or a glint lean off the band: drop those far out by a
    // robust (median absolute deviation) scale and fit again.
    let off: Vec<f64> = centres.iter().map(|c| line.across(*c).abs()).collect();
    let mut sorted = off.clone();
    sorted.sort_by(f64::total_cmp);
    let limit = (4.0 * 1.4826 * sorted[sorted.len() / 2]).max(0.5);
    let mut keep: Vec<usize> = (0..centres.len()).filter(|&i| off[i] <= limit).collect();
    if keep.len() >= 5 && keep.len() < centres.len() {
        let c: Vec<Vector2<f64>> = keep.iter().map(|&i| centres[i]).collect();
        let w: Vec<f64> = keep.iter().map(|&i| weights[i]).collect();
        line = tls_line(&c, &w).map_err(bad_line)?;
    } else if keep.len() < 5 {
        keep = (0..centres.len()).collect();
    }
    // The band's width from the sections on it, by their median: a streak across a few
    // sections widens those alone.
    let mut widths: Vec<f64> = keep.iter().map(|&i| sigmas[i]).collect();
    widths.sort_by(f64::total_cmp);
    let sigma_across_px = widths[widths.len() / 2];
    let mut direction = line.direction;
    if direction.dot(&band.direction) < 0.0 {
        direction = -direction;
    }
    // Keep the reference point where it was along the band, moved onto the new line.
    let point = line.point + direction * (band.point - line.point).dot(&direction);
    Ok(FringeBand {
        point,
        direction,
        sigma_across_px,
        bright: band.bright,
    })
}

/// A profile along the band.
#[derive(Debug, Clone, Default)]
pub struct FringeTrack {
    /// Photo position of each sample on the axis, px.
    pub positions_px: Vec<Vector2<f64>>,
    /// Mean across the band's core (linear light).
    pub values: Vec<f64>,
    /// Standard error of each mean, from the scatter across the band about its mean shape.
    pub std_errors: Vec<f64>,
    /// Whether any pixel under the sample was clipped.
    pub clipped: Vec<bool>,
    /// Rows averaged on each side of the axis.
    pub half_width_px: usize,
}

/// Samples the profile every pixel along the band, as far as it runs inside the frame: the
/// faint outer fringes, well beyond the bright middle, carry the most angle, and the dark
/// beyond them the background.
pub fn fringe_track(raster: &dyn Raster, band: &FringeBand) -> FringeTrack {
    let half = band.sigma_across_px.round().clamp(1.0, 40.0) as usize;
    let (lo, hi) = band.bright;
    let (w, h) = (raster.width() as f64, raster.height() as f64);
    let inside = |t: f64| {
        [-(half as f64), half as f64].iter().all(|&o| {
            let p = band.at(t, o);
            p.x >= 0.0 && p.y >= 0.0 && p.x <= w - 1.0 - 1e-9 && p.y <= h - 1.0 - 1e-9
        })
    };
    let reach = w.hypot(h);
    let (a, b) = super::trim_span(lo - reach, hi + reach, inside);
    // The mean across-band shape, to judge each sample's scatter against.
    let rows = 2 * half + 1;
    let shape: Vec<f64> = (0..rows)
        .map(|j| {
            let o = j as f64 - half as f64;
            (-0.5 * (o / band.sigma_across_px).powi(2)).exp()
        })
        .collect();
    let shape_mean = shape.iter().sum::<f64>() / rows as f64;
    let mut track = FringeTrack {
        half_width_px: half,
        ..FringeTrack::default()
    };
    let n = (b - a).max(0.0) as usize + 1;
    let mut vals = vec![0.0; rows];
    for i in 0..n {
        let t = a + i as f64;
        let mut clipped = false;
        let mut ok = true;
        for (j, v) in vals.iter_mut().enumerate() {
            let p = band.at(t, j as f64 - half as f64);
            match raster.bilinear(p.x, p.y) {
                Some(x) => *v = f64::from(x),
                None => ok = false,
            }
            let (px, py) = (p.x.floor().max(0.0) as usize, p.y.floor().max(0.0) as usize);
            let (qx, qy) = (
                (px + 1).min(raster.width() - 1),
                (py + 1).min(raster.height() - 1),
            );
            clipped |= raster.clipped(px, py)
                || raster.clipped(qx, py)
                || raster.clipped(px, qy)
                || raster.clipped(qx, qy);
        }
        if !ok {
            continue;
        }
        let mean = vals.iter().sum::<f64>() / rows as f64;
        let scale = mean / shape_mean;
        let ss: f64 = vals
            .iter()
            .zip(&shape)
            .map(|(v, g)| (v - scale * g).powi(2))
            .sum();
        track.positions_px.push(band.at(t, 0.0));
        track.values.push(mean);
        track
            .std_errors
            .push((ss / (rows.max(2) - 1) as f64 / rows as f64).sqrt());
        track.clipped.push(clipped);
    }
    track
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::find::blobs::{coarse_map, find_blobs};
    use crate::raster::OwnedRaster;

    /// A tilted band of cos² fringes under a Gaussian across-profile: the axis must come
    /// back to a small fraction of a pixel and the profile must follow the fringes. The
    /// truth is the construction itself (geometry of a rotated line).
    #[test]
    fn axis_and_profile_of_a_tilted_fringe_band() {
        let angle = 0.12f64;
        let (c, s) = (angle.cos(), angle.sin());
        let centre = Vector2::new(200.3, 151.7);
        let raster = OwnedRaster::from_fn(400, 300, |x, y| {
            let d = Vector2::new(x, y) - centre;
            let t = d.x * c + d.y * s;
            let o = -d.x * s + d.y * c;
            let env = (-(t / 90.0).powi(2)).exp();
            let fr = (std::f64::consts::PI * t / 9.0).cos().powi(2);
            (0.02 + 0.8 * env * fr * (-0.5 * (o / 3.0).powi(2)).exp()) as f32
        });
        let cmap = coarse_map(&raster, 1);
        let blobs = find_blobs(&cmap, 8.0, 60);
        let band = fringe_band(&raster, &cmap, &blobs).unwrap();
        let want = Vector2::new(c, s);
        assert!(
            band.direction.dot(&want) > (1.0 - 1e-6),
            "{:?}",
            band.direction
        );
        let off = (band.point - centre).dot(&Vector2::new(-s, c));
        assert!(off.abs() < 0.05, "axis off by {off} px");
        assert!(
            (band.sigma_across_px - 3.0).abs() < 0.5,
            "{}",
            band.sigma_across_px
        );
        let track = fringe_track(&raster, &band);
        assert!(track.values.len() > 300);
        assert!(track.clipped.iter().all(|c| !c));
        // The sample nearest the centre is bright, one half-period away is dark.
        let nearest = |p: Vector2<f64>| {
            (0..track.positions_px.len())
                .min_by(|&a, &b| {
                    (track.positions_px[a] - p)
                        .norm()
                        .total_cmp(&(track.positions_px[b] - p).norm())
                })
                .unwrap()
        };
        let i0 = nearest(centre);
        let i1 = nearest(centre + want * 4.5);
        assert!(track.values[i0] > 5.0 * track.values[i1]);
    }
}
