//! Which candidates are laser light. A laser is nearly monochromatic, so its spots and
//! fringes stand out in the pattern's colour channel far more than in the other two,
//! while a white glint, a window or a lamp brightens all three alike.

use super::blobs::Blob;
use crate::raster::Raster;

/// Largest excess in another colour channel, as a share of the pattern channel's, for
/// a candidate still taken as laser light. A laser line lies in one filter's band of a
/// Bayer sensor, and the other two pass about a tenth of it (common practice), but a
/// clipped core reads low in its own channel while its halo still spills into the
/// others; white light gains alike in all three (a share near 1).
pub const MAX_CROSS_COLOUR: f64 = 0.6;

/// Leaves out the candidates whose light is not the laser's: each candidate's excess over
/// the ring around it is compared channel by channel, and one whose strongest other
/// channel gains more than [`MAX_CROSS_COLOUR`] of the pattern channel's excess is dropped.
pub fn keep_laser_coloured(own: &dyn Raster, others: &[&dyn Raster], blobs: &mut Vec<Blob>) {
    let (w, h) = (own.width(), own.height());
    let excess = |plane: &dyn Raster, b: &Blob| -> f64 {
        let (x0, y0, x1, y1) = b.bbox;
        let (bw, bh) = (x1 + 1 - x0, y1 + 1 - y0);
        let (px, py) = (bw.div_ceil(2), bh.div_ceil(2));
        let (ox0, oy0) = (x0.saturating_sub(px), y0.saturating_sub(py));
        let (ox1, oy1) = ((x1 + px).min(w - 1), (y1 + py).min(h - 1));
        let step = ((bw * bh) as f64 / 400.0).sqrt().ceil().max(1.0) as usize;
        let (mut inner, mut ni, mut ring, mut nr) = (0.0, 0usize, 0.0, 0usize);
        for y in (oy0..=oy1).step_by(step) {
            for x in (ox0..=ox1).step_by(step) {
                let v = f64::from(plane.value(x, y));
                if (x0..=x1).contains(&x) && (y0..=y1).contains(&y) {
                    inner += v;
                    ni += 1;
                } else {
                    ring += v;
                    nr += 1;
                }
            }
        }
        inner / ni.max(1) as f64 - ring / nr.max(1) as f64
    };
    blobs.retain(|b| {
        let mine = excess(own, b);
        let cross = others
            .iter()
            .map(|&c| excess(c, b))
            .fold(f64::MIN, f64::max);
        mine > 0.0 && cross <= MAX_CROSS_COLOUR * mine
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::find::blobs::{coarse_map, find_blobs};
    use crate::raster::OwnedRaster;

    /// A red spot (light in the red channel only) and a white glint (alike in all three):
    /// the glint goes, the spot stays. The truth is the construction.
    #[test]
    fn white_light_is_left_out_and_laser_light_kept() {
        let spot = |x: f64, y: f64, cx: f64, cy: f64| {
            (-((x - cx).powi(2) + (y - cy).powi(2)) / 18.0).exp()
        };
        let red = OwnedRaster::from_fn(200, 120, |x, y| {
            (0.05 + 0.8 * spot(x, y, 50.0, 60.0) + 0.6 * spot(x, y, 150.0, 60.0)) as f32
        });
        let other = OwnedRaster::from_fn(200, 120, |x, y| {
            (0.05 + 0.05 * spot(x, y, 50.0, 60.0) + 0.6 * spot(x, y, 150.0, 60.0)) as f32
        });
        let mut blobs = find_blobs(&coarse_map(&red, 1), 8.0, 10);
        assert_eq!(blobs.len(), 2);
        keep_laser_coloured(&red, &[&other, &other], &mut blobs);
        assert_eq!(blobs.len(), 1);
        assert!(
            (blobs[0].centroid.x - 50.0).abs() < 2.0,
            "{:?}",
            blobs[0].centroid
        );
    }
}
