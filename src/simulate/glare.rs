//! Glare: a lens-flare streak through the brightest light (a smear on the front element
//! scattering it along one line, with a ghost of an internal reflection), and blooming, where
//! charge above saturation spills along the sensor's columns and glows around the saturated
//! area. Both work on the linear image; flare before the PSF, bloom after it.

use super::screen::unit_hash;
use rayon::prelude::*;

/// The flare streak's angle in the image: 60° to 80° from the pattern's direction, either
/// way, by the seed.
pub(crate) fn flare_angle(pattern_dir: [f64; 2], seed: u64) -> f64 {
    let base = pattern_dir[1].atan2(pattern_dir[0]);
    let u = unit_hash(seed, 0x0066_6c61_7265, 1);
    let turn = (60.0 + 20.0 * u).to_radians();
    if unit_hash(seed, 0x0066_6c61_7265, 2) < 0.5 {
        base + turn
    } else {
        base - turn
    }
}

/// Adds a lens-flare streak through `p` (px) at `angle`: light scattered by a smear on the
/// front element, a thin line fading exponentially away from the source over a quarter of
/// the frame, with a soft wider skirt, and one faint ghost disc mirrored through the image
/// centre (an internal reflection). Linear light, before the PSF.
pub(crate) fn add_flare(
    data: &mut [f32],
    width: usize,
    height: usize,
    p: [f64; 2],
    angle: f64,
    peak: f64,
    rgb: [f32; 3],
) {
    let (w, h) = (width as f64, height as f64);
    let scale = (w / 1600.0).max(0.25);
    let (dy, dx) = angle.sin_cos();
    let (sigma, skirt) = (1.2 * scale, 7.0 * scale);
    let decay = 0.25 * w.max(h);
    let centre = [0.5 * (w - 1.0), 0.5 * (h - 1.0)];
    let ghost = [
        centre[0] + 0.6 * (centre[0] - p[0]),
        centre[1] + 0.6 * (centre[1] - p[1]),
    ];
    let ghost_r = 0.03 * w;
    let reach = 6.0 * skirt;
    data.par_chunks_mut(width * 3)
        .enumerate()
        .for_each(|(y, row)| {
            let yf = y as f64;
            for (x, px) in row.chunks_exact_mut(3).enumerate() {
                let xf = x as f64;
                let (ex, ey) = (xf - p[0], yf - p[1]);
                let across = -ex * dy + ey * dx;
                let mut v = 0.0;
                if across.abs() < reach {
                    let along = (ex * dx + ey * dy).abs();
                    let fade = (-along / decay).exp();
                    v += fade
                        * ((-0.5 * (across / sigma).powi(2)).exp()
                            + 0.15 * (-0.5 * (across / skirt).powi(2)).exp());
                }
                let g = (xf - ghost[0]).hypot(yf - ghost[1]);
                if g < 1.5 * ghost_r {
                    v += 0.04 * (0.5 - (g - ghost_r) / (0.2 * ghost_r)).clamp(0.0, 1.0);
                }
                if v > 0.0 {
                    let v = (peak * v) as f32;
                    for (o, c) in px.iter_mut().zip(rgb) {
                        *o += v * c;
                    }
                }
            }
        });
}

/// Two-sided exponential smoothing of `n` samples `stride` apart, normalized to keep the
/// sum: recursive passes forwards and backwards (a first-order IIR filter).
fn exp_smooth(data: &mut [f32], start: usize, n: usize, stride: usize, length: f64) {
    let a = (-1.0 / length.max(0.1)).exp() as f32;
    let norm = (1.0 - a) / (1.0 + a);
    let mut fwd = vec![0.0f32; n];
    let mut acc = 0.0f32;
    for (i, f) in fwd.iter_mut().enumerate() {
        acc = data[start + i * stride] + a * acc;
        *f = acc;
    }
    let mut back = 0.0f32;
    for i in (0..n).rev() {
        let x = data[start + i * stride];
        // fwd counts the sample itself once; the backward pass adds the samples after it.
        data[start + i * stride] = norm * (fwd[i] + a * back);
        back = x + a * back;
    }
}

/// [`exp_smooth`] down every column of a `width`-wide plane, a row at a time (so memory is
/// read in order); returns the smoothed copy.
fn exp_smooth_columns(plane: &[f32], width: usize, length: f64) -> Vec<f32> {
    let a = (-1.0 / length.max(0.1)).exp() as f32;
    let norm = (1.0 - a) / (1.0 + a);
    let mut out = plane.to_vec();
    let height = plane.len() / width.max(1);
    for y in 1..height {
        let (done, rest) = out.split_at_mut(y * width);
        let prev = &done[(y - 1) * width..];
        for (o, p) in rest[..width].iter_mut().zip(prev) {
            *o += a * p;
        }
    }
    let mut back = vec![0.0f32; width];
    for y in (0..height).rev() {
        let row = &mut out[y * width..(y + 1) * width];
        let orig = &plane[y * width..(y + 1) * width];
        for ((o, b), x) in row.iter_mut().zip(back.iter_mut()).zip(orig) {
            *o = norm * (*o + a * *b);
            *b = x + a * *b;
        }
    }
    out
}

/// Blooming after the PSF: the charge above saturation, compressed logarithmically (the
/// sensor's anti-blooming drain takes most of it), spills along the columns over 2 % of the
/// height and glows around the saturated area over 0.4 % of the width. One channel at a
/// time, to keep memory low.
pub(crate) fn bloom(data: &mut [f32], width: usize, height: usize, strength: f64) {
    let s = strength as f32;
    let column_len = 0.02 * height as f64;
    let glow_len = 0.004 * width as f64;
    for c in 0..3 {
        let excess: Vec<f32> = data
            .iter()
            .skip(c)
            .step_by(3)
            .map(|&v| (v - 1.0).max(0.0).ln_1p())
            .collect();
        if excess.iter().all(|&e| e == 0.0) {
            continue;
        }
        let smear = exp_smooth_columns(&excess, width, column_len);
        for (d, m) in data.iter_mut().skip(c).step_by(3).zip(&smear) {
            *d += 0.4 * s * m;
        }
        drop(smear);
        let mut glow = exp_smooth_columns(&excess, width, glow_len);
        drop(excess);
        glow.par_chunks_mut(width)
            .for_each(|row| exp_smooth(row, 0, width, 1, glow_len));
        // The spread charge, scaled so a broad saturated patch gains about `strength`.
        for (d, g) in data.iter_mut().skip(c).step_by(3).zip(&glow) {
            *d += 0.6 * s * g;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exponential_smoothing_keeps_the_sum_and_is_symmetric() {
        let n = 401;
        let mut v = vec![0.0f32; n];
        v[200] = 1.0;
        exp_smooth(&mut v, 0, n, 1, 10.0);
        let sum: f32 = v.iter().sum();
        assert!((sum - 1.0).abs() < 1e-4, "{sum}");
        assert!((v[190] - v[210]).abs() < 1e-7);
        // A two-sided exponential kernel exp(−|i|/ℓ): ten samples away it is e⁻¹ of the peak.
        assert!((v[210] / v[200] - (-1.0f32).exp()).abs() < 1e-4);
        // Down the columns of a plane, the same filter.
        let mut plane = vec![0.0f32; 3 * n];
        plane[200 * 3 + 1] = 1.0;
        let cols = exp_smooth_columns(&plane, 3, 10.0);
        for y in 0..n {
            assert!((cols[y * 3 + 1] - v[y]).abs() < 1e-6);
            assert_eq!(cols[y * 3], 0.0);
        }
    }

    #[test]
    fn bloom_spreads_only_light_above_saturation() {
        let (w, h) = (60, 80);
        let mut img = vec![0.5f32; w * h * 3];
        let before = img.clone();
        bloom(&mut img, w, h, 1.0);
        assert_eq!(img, before);
        for c in 0..3 {
            img[(40 * w + 30) * 3 + c] = 50.0;
        }
        bloom(&mut img, w, h, 1.0);
        // Spill along the column reaches farther than along the row.
        let at = |x: usize, y: usize| img[(y * w + x) * 3];
        assert!(at(30, 30) > at(20, 40), "{} {}", at(30, 30), at(20, 40));
        assert!(at(30, 30) > 0.5 && at(0, 0) >= 0.5);
    }
}
