//! What the camera does to the light: laser colour through plausible RGB sensitivities,
//! fully developed speckle (|low-passed circular complex Gaussian field|², Goodman, *Speckle
//! Phenomena in Optics*, ch. 3), a Gaussian PSF, Poisson shot noise plus Gaussian read noise,
//! clipping and the sRGB transfer of IEC 61966-2-1 into 8 bits.

use super::SimError;
use super::screen::unit_hash;
use rand::{RngExt, SeedableRng, rngs::Xoshiro256PlusPlus};
use rand_distr::{Distribution, Poisson, StandardNormal};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Camera and light effects.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Effects {
    /// Gaussian PSF σ in pixels (0: none).
    pub blur_px: f64,
    /// Speckle contrast, std/mean of the laser light (0: none, 1: fully developed).
    pub speckle_contrast: f64,
    /// Speckle grain: FWHM of the speckle's intensity autocorrelation, pixels.
    pub speckle_grain_px: f64,
    /// Shot and read noise on or off.
    pub noise: bool,
    /// Electrons at saturation (sets the shot noise).
    pub full_well_e: f64,
    /// Read noise, electrons rms.
    pub read_noise_e: f64,
    /// Peak of the zero order (or the brightest visible order when the zero order is hidden)
    /// in the image relative to saturation, after pixel area and blur but before speckle
    /// and noise: 3 means strongly saturated.
    pub overexposure: f64,
    /// Blooming: how strongly charge above saturation spills along the sensor's columns and
    /// glows around the saturated area (0: none, 1: strong).
    #[serde(default)]
    pub bloom: f64,
    /// A lens-flare streak (a smudge on the lens) through the brightest light, its peak
    /// relative to saturation (0: none).
    #[serde(default)]
    pub flare: f64,
}

impl Default for Effects {
    /// A phone photo: slight blur, speckle, noise, a saturated zero order.
    fn default() -> Self {
        Effects {
            blur_px: 1.0,
            speckle_contrast: 0.5,
            speckle_grain_px: 2.5,
            noise: true,
            full_well_e: 6000.0,
            read_noise_e: 3.0,
            overexposure: 3.0,
            bloom: 0.0,
            flare: 0.0,
        }
    }
}

impl Effects {
    /// No blur, speckle or noise, and no pixel saturated by the laser.
    pub fn clean() -> Self {
        Effects {
            blur_px: 0.0,
            speckle_contrast: 0.0,
            noise: false,
            overexposure: 0.5,
            ..Effects::default()
        }
    }

    /// Checks the inputs.
    pub fn validate(&self) -> Result<(), SimError> {
        let checks = [
            (
                "blur_px",
                self.blur_px,
                (0.0..=20.0).contains(&self.blur_px),
                "0 to 20 px",
            ),
            (
                "speckle_contrast",
                self.speckle_contrast,
                (0.0..=1.0).contains(&self.speckle_contrast),
                "a contrast from 0 to 1",
            ),
            (
                "speckle_grain_px",
                self.speckle_grain_px,
                (0.5..=50.0).contains(&self.speckle_grain_px),
                "0.5 to 50 px",
            ),
            (
                "full_well_e",
                self.full_well_e,
                (10.0..=1e7).contains(&self.full_well_e),
                "10 to 1e7 electrons",
            ),
            (
                "read_noise_e",
                self.read_noise_e,
                (0.0..=1e4).contains(&self.read_noise_e),
                "0 to 1e4 electrons",
            ),
            (
                "overexposure",
                self.overexposure,
                self.overexposure > 0.0 && self.overexposure <= 1e4,
                "a positive factor up to 1e4",
            ),
            (
                "bloom",
                self.bloom,
                (0.0..=4.0).contains(&self.bloom),
                "a strength from 0 to 4",
            ),
            (
                "flare",
                self.flare,
                (0.0..=20.0).contains(&self.flare),
                "a streak peak from 0 to 20 times saturation",
            ),
        ];
        for (name, value, ok, expected) in checks {
            if !(value.is_finite() && ok) {
                return Err(SimError::BadInput {
                    name,
                    value,
                    expected,
                });
            }
        }
        Ok(())
    }
}

/// Camera RGB for monochromatic light, brightest channel 1. The sensitivities are smooth
/// lobes placed like a typical colour sensor's (R near 600 nm with a small violet lobe, G
/// near 535 nm, B near 455 nm, an IR-cut filter past 680 nm): a plausible model, not data.
pub(crate) fn laser_rgb(wavelength_m: f64) -> [f32; 3] {
    let nm = wavelength_m * 1e9;
    let lobe = |c: f64, s: f64| (-0.5 * ((nm - c) / s).powi(2)).exp();
    let ir_cut = 1.0 / (1.0 + ((nm - 680.0) / 12.0).exp());
    let r = (lobe(600.0, 40.0) + 0.10 * lobe(420.0, 22.0)) * ir_cut;
    let g = lobe(535.0, 38.0) * ir_cut;
    let b = lobe(455.0, 30.0) * ir_cut;
    let max = r.max(g).max(b).max(1e-6);
    [(r / max) as f32, (g / max) as f32, (b / max) as f32]
}

/// sRGB encoding, IEC 61966-2-1.
pub(crate) fn srgb_encode(linear: f64) -> f64 {
    let l = linear.clamp(0.0, 1.0);
    if l <= 0.003_130_8 {
        12.92 * l
    } else {
        1.055 * l.powf(1.0 / 2.4) - 0.055
    }
}

/// Linear thresholds between successive 8-bit codes: code k is the nearest sRGB level.
fn code_thresholds() -> Vec<f32> {
    // Invert the encoding at each midpoint (k + ½)/255 by bisection on `srgb_encode`, so the
    // rounding is exact in the encoded domain.
    (0..255)
        .map(|k| {
            let target = (k as f64 + 0.5) / 255.0;
            let (mut lo, mut hi) = (0.0f64, 1.0f64);
            for _ in 0..60 {
                let mid = 0.5 * (lo + hi);
                if srgb_encode(mid) < target {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            (0.5 * (lo + hi)) as f32
        })
        .collect()
}

/// Gaussian kernel of σ `sigma`, radius 3.5σ, normalized.
fn kernel(sigma: f64) -> Vec<f32> {
    let r = (3.5 * sigma).ceil() as i64;
    let k: Vec<f64> = (-r..=r)
        .map(|i| (-0.5 * (i as f64 / sigma).powi(2)).exp())
        .collect();
    let s: f64 = k.iter().sum();
    k.iter().map(|v| (v / s) as f32).collect()
}

/// Separable Gaussian blur of an interleaved image with `ch` channels, in place, with the
/// edges clamped. The vertical pass runs in bands and keeps only the rows it still needs.
pub(crate) fn blur(data: &mut [f32], width: usize, height: usize, ch: usize, sigma: f64) {
    if sigma <= 0.0 || width == 0 || height == 0 {
        return;
    }
    let k = kernel(sigma);
    let r = k.len() / 2;
    let stride = width * ch;
    data.par_chunks_mut(stride).for_each(|row| {
        let src = row.to_vec();
        for x in 0..width {
            for c in 0..ch {
                let mut acc = 0.0;
                for (i, w) in k.iter().enumerate() {
                    let xs = (x + i).saturating_sub(r).min(width - 1);
                    acc += w * src[xs * ch + c];
                }
                row[x * ch + c] = acc;
            }
        }
    });
    // Vertical: output rows [y0, y1) read input rows [y0 − r, y1 + r); rows above y0 were
    // already overwritten, so their originals are kept in `above`.
    let band = 64.max(r);
    let mut above: Vec<f32> = Vec::new(); // originals of rows [y0 − r, y0), clamped at 0
    let mut y0 = 0;
    while y0 < height {
        let y1 = (y0 + band).min(height);
        let out: Vec<f32> = {
            let data_ref = &*data;
            let above_ref = &above;
            let row_at = |y: i64| -> &[f32] {
                let yc = y.clamp(0, height as i64 - 1) as usize;
                if yc >= y0 {
                    &data_ref[yc * stride..(yc + 1) * stride]
                } else {
                    let i = yc + r - y0; // above holds rows y0 − r ..
                    &above_ref[i * stride..(i + 1) * stride]
                }
            };
            let mut out = vec![0.0f32; (y1 - y0) * stride];
            out.par_chunks_mut(stride).enumerate().for_each(|(j, o)| {
                let y = (y0 + j) as i64;
                for (i, w) in k.iter().enumerate() {
                    let src = row_at(y + i as i64 - r as i64);
                    for (a, b) in o.iter_mut().zip(src) {
                        *a += w * b;
                    }
                }
            });
            out
        };
        // Keep originals of rows [y1 − r, y1) (clamped) before overwriting.
        let mut next = vec![0.0f32; r * stride];
        for i in 0..r {
            let y = (y1 as i64 - r as i64 + i as i64).max(0) as usize;
            let src: &[f32] = if y >= y0 {
                &data[y * stride..(y + 1) * stride]
            } else {
                let j = y + r - y0;
                &above[j * stride..(j + 1) * stride]
            };
            next[i * stride..(i + 1) * stride].copy_from_slice(src);
        }
        data[y0 * stride..y1 * stride].copy_from_slice(&out);
        above = next;
        y0 = y1;
    }
}

/// A speckle pattern of mean 1 and the given contrast over a `width × height` patch.
pub(crate) fn speckle(width: usize, height: usize, effects: &Effects, seed: u64) -> Vec<f32> {
    let c = effects.speckle_contrast as f32;
    // Intensity autocorrelation of a Gaussian-filtered field is exp(−r²/(2s²)) for a kernel
    // of σ s, so FWHM = 2√(2 ln 2)·s.
    let s = effects.speckle_grain_px / (2.0 * (2.0 * std::f64::consts::LN_2).sqrt());
    let margin = (3.5 * s).ceil() as usize;
    let (pw, ph) = (width + 2 * margin, height + 2 * margin);
    let mut field: Vec<f32> = (0..ph)
        .into_par_iter()
        .flat_map_iter(|y| {
            let mut rng = Xoshiro256PlusPlus::seed_from_u64(
                seed ^ (y as u64).wrapping_mul(0x2545_f491_4f6c_dd1d),
            );
            (0..2 * pw)
                .map(|_| rng.sample::<f32, _>(StandardNormal))
                .collect::<Vec<_>>()
        })
        .collect();
    blur(&mut field, pw, ph, 2, s);
    let k = kernel(s);
    let k2: f32 = k.iter().map(|v| v * v).sum();
    // Each component has variance (Σk²)² after the separable filter; |E|² has mean twice it.
    let mean = 2.0 * k2 * k2;
    let mut out = Vec::with_capacity(width * height);
    for y in 0..height {
        for x in 0..width {
            let i = ((y + margin) * pw + x + margin) * 2;
            let intensity = (field[i] * field[i] + field[i + 1] * field[i + 1]) / mean;
            out.push(1.0 - c + c * intensity);
        }
    }
    out
}

/// Adds shot and read noise (if on), clips and encodes to 8-bit sRGB.
pub(crate) fn to_srgb8(linear: &[f32], width: usize, effects: &Effects, seed: u64) -> Vec<u8> {
    let thresholds = code_thresholds();
    let stride = width * 3;
    let mut out = vec![0u8; linear.len()];
    out.par_chunks_mut(stride)
        .zip(linear.par_chunks(stride))
        .enumerate()
        .for_each(|(y, (o, l))| {
            let mut rng = Xoshiro256PlusPlus::seed_from_u64(unit_hash_seed(seed, y as u64));
            for (dst, &v) in o.iter_mut().zip(l) {
                let v = if effects.noise {
                    noisy(v as f64, effects, &mut rng) as f32
                } else {
                    v
                };
                *dst = thresholds.partition_point(|&t| t <= v) as u8;
            }
        });
    out
}

fn unit_hash_seed(seed: u64, row: u64) -> u64 {
    (unit_hash(seed, row, 0x006e_6f69_7365) * (1u64 << 53) as f64) as u64
}

/// One noisy sample: Poisson electrons (exact up to a mean of 1000, normal beyond, where the
/// two differ by far less than a code) plus Gaussian read noise.
fn noisy(v: f64, e: &Effects, rng: &mut Xoshiro256PlusPlus) -> f64 {
    let mean = v.max(0.0) * e.full_well_e;
    let shot = if mean <= 0.0 {
        0.0
    } else if mean < 1000.0 {
        Poisson::new(mean).map(|p| p.sample(rng)).unwrap_or(mean)
    } else {
        mean + mean.sqrt() * rng.sample::<f64, _>(StandardNormal)
    };
    let read = e.read_noise_e * rng.sample::<f64, _>(StandardNormal);
    (shot + read) / e.full_well_e
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn srgb_codes_round_trip_through_the_published_decoding() {
        // IEC 61966-2-1 decoding (REFERENCES.md): linear = C/12.92 for C ≤ 0.04045, else
        // ((C + 0.055)/1.055)^2.4. Each code's decoded level must encode back to that code.
        let decode = |c: f64| {
            if c <= 0.04045 {
                c / 12.92
            } else {
                ((c + 0.055) / 1.055).powf(2.4)
            }
        };
        let e = Effects::clean();
        let levels: Vec<f32> = (0..=255).map(|k| decode(k as f64 / 255.0) as f32).collect();
        let codes = to_srgb8(
            &levels.iter().flat_map(|&v| [v, v, v]).collect::<Vec<_>>(),
            256,
            &e,
            0,
        );
        for (k, c) in codes.chunks(3).enumerate() {
            assert_eq!(c[0] as usize, k);
        }
        // Mid-grey: 0.5 linear is code 188 (0.7354·255 = 187.5…, from the same formula).
        assert!((srgb_encode(0.5) - 0.735_356_9).abs() < 1e-6);
    }

    #[test]
    fn laser_colours_are_plausible() {
        let red = laser_rgb(650e-9);
        assert!(
            red[0] == 1.0 && red[1] > 0.01 && red[1] < 0.2 && red[2] < 0.01,
            "{red:?}"
        );
        let green = laser_rgb(532e-9);
        assert!(
            green[1] == 1.0 && green[0] < 0.5 && green[2] < 0.2,
            "{green:?}"
        );
        let violet = laser_rgb(405e-9);
        assert!(
            violet[2] == 1.0 && violet[0] > 0.1 && violet[0] > 3.0 * violet[1],
            "{violet:?}"
        );
    }

    #[test]
    fn speckle_has_unit_mean_and_the_asked_contrast() {
        for c in [1.0, 0.4] {
            let e = Effects {
                speckle_contrast: c,
                speckle_grain_px: 1.5,
                ..Effects::default()
            };
            let s = speckle(300, 300, &e, 7);
            let n = s.len() as f64;
            let mean = s.iter().map(|&v| v as f64).sum::<f64>() / n;
            let var = s.iter().map(|&v| (v as f64 - mean).powi(2)).sum::<f64>() / n;
            assert!((mean - 1.0).abs() < 0.03, "mean {mean}");
            assert!(
                (var.sqrt() - c).abs() < 0.05 * c,
                "contrast {} for {c}",
                var.sqrt()
            );
        }
    }

    #[test]
    fn flat_field_noise_follows_poisson_plus_read_noise() {
        let e = Effects {
            full_well_e: 2000.0,
            read_noise_e: 5.0,
            ..Effects::default()
        };
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(3);
        let v = 0.2;
        let xs: Vec<f64> = (0..40_000).map(|_| noisy(v, &e, &mut rng)).collect();
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / xs.len() as f64;
        // Poisson: variance = mean in electrons; read noise adds σ².
        let expected = (v * 2000.0 + 25.0) / 2000.0f64.powi(2);
        assert!((mean - v).abs() < 1e-3);
        assert!((var / expected - 1.0).abs() < 0.05, "{var} vs {expected}");
    }

    #[test]
    fn blur_keeps_the_sum_and_spreads_a_point() {
        let (w, h) = (41, 150);
        let mut img = vec![0.0f32; w * h];
        img[75 * w + 20] = 1.0;
        blur(&mut img, w, h, 1, 2.0);
        let sum: f32 = img.iter().sum();
        assert!((sum - 1.0).abs() < 1e-4);
        let var_y: f64 = (0..h)
            .map(|y| (0..w).map(|x| img[y * w + x] as f64).sum::<f64>() * (y as f64 - 75.0).powi(2))
            .sum();
        assert!((var_y - 4.0).abs() < 0.05, "{var_y}");
        assert!((img[75 * w + 22] - img[77 * w + 20]).abs() < 1e-6);
    }
}
