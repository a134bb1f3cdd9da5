//! A small sRGB 8-bit display copy for overlays. Reduction is a box (area) average in
//! linear light, so that a small bright spot keeps its energy instead of being dropped or
//! darkened by averaging gamma-encoded codes; the result is encoded back with the sRGB
//! transfer of IEC 61966-2-1 and rounded to the nearest code.

use super::Photo;
use super::decode::Samples;
use super::plane::{lut8, lut16, srgb_to_linear};
use rayon::prelude::*;
use std::sync::OnceLock;

pub(crate) fn preview_rgb8(photo: &Photo, max_side: u32) -> (image::RgbImage, f64) {
    let (w, h) = (photo.width(), photo.height());
    let max_side = max_side.max(1) as usize;
    let long = w.max(h);
    if long <= max_side {
        return (full_size(photo), 1.0);
    }
    let scale = max_side as f64 / long as f64;
    let pw = ((w as f64 * scale).round() as usize).clamp(1, max_side);
    let ph = ((h as f64 * scale).round() as usize).clamp(1, max_side);
    let out = if photo.channels() == 3 {
        reduce::<3>(photo, pw, ph)
    } else {
        reduce::<1>(photo, pw, ph)
    };
    let image = image::RgbImage::from_raw(pw as u32, ph as u32, out)
        .unwrap_or_else(|| image::RgbImage::new(pw as u32, ph as u32));
    (image, scale)
}

/// Output rows per parallel band.
const BAND: usize = 16;

/// The area average to `pw × ph`, as interleaved sRGB 8-bit RGB; `NC` colour channels.
fn reduce<const NC: usize>(photo: &Photo, pw: usize, ph: usize) -> Vec<u8> {
    let w = photo.width();
    let cols = spans(w, pw);
    let rows = spans(photo.height(), ph);
    let encoder = Encoder::get();
    let mut out = vec![0u8; pw * ph * 3];
    // Bands of output rows in parallel; inside a band each source row is converted to
    // linear light once, filtered across, and added to the one or two output rows it
    // overlaps.
    out.par_chunks_mut(BAND * pw * 3)
        .enumerate()
        .for_each(|(band, chunk)| {
            let j0 = band * BAND;
            let band_rows = &rows[j0..j0 + chunk.len() / (pw * 3)];
            let mut acc = vec![[0.0f32; NC]; band_rows.len() * pw];
            let mut lin = vec![[0.0f32; NC]; w];
            let mut across = vec![[0.0f32; NC]; pw];
            let y_first = band_rows.first().and_then(|r| r.first()).map_or(0, |s| s.0);
            let y_last = band_rows.last().and_then(|r| r.last()).map_or(0, |s| s.0);
            for y in y_first..=y_last {
                linear_row(photo, y, &mut lin);
                filter_across(&lin, &cols, &mut across);
                for (r, span) in band_rows.iter().enumerate() {
                    if let Some(&(_, wy)) = span.iter().find(|s| s.0 == y) {
                        for (a, v) in acc[r * pw..(r + 1) * pw].iter_mut().zip(&across) {
                            for c in 0..NC {
                                a[c] += wy * v[c];
                            }
                        }
                    }
                }
            }
            for (px, v) in chunk.chunks_exact_mut(3).zip(&acc) {
                for (c, o) in px.iter_mut().enumerate() {
                    *o = encoder.encode(v[if NC == 3 { c } else { 0 }]);
                }
            }
        });
    out
}

/// Row `y` in linear light (alpha skipped).
fn linear_row<const NC: usize>(photo: &Photo, y: usize, lin: &mut [[f32; NC]]) {
    let (w, spp) = (photo.width(), photo.spp());
    let range = y * w * spp..(y + 1) * w * spp;
    match photo.samples() {
        Samples::U8(s) => to_linear(&s[range], lut8(), spp, lin),
        Samples::U16(s) => to_linear(&s[range], lut16(), spp, lin),
    }
}

fn to_linear<T: Copy + Into<usize>, const NC: usize>(
    src: &[T],
    lut: &[f32],
    spp: usize,
    lin: &mut [[f32; NC]],
) {
    for (l, px) in lin.iter_mut().zip(src.chunks_exact(spp)) {
        for c in 0..NC {
            l[c] = lut[px[c].into()];
        }
    }
}

fn filter_across<const NC: usize>(
    lin: &[[f32; NC]],
    cols: &[Vec<(usize, f32)>],
    out: &mut [[f32; NC]],
) {
    for (cell, span) in out.iter_mut().zip(cols) {
        let mut sum = [0.0f32; NC];
        for &(x, wx) in span {
            let v = lin[x];
            for c in 0..NC {
                sum[c] += wx * v[c];
            }
        }
        *cell = sum;
    }
}

/// For each of `n` output cells along an axis of `len` source pixels, the source pixels
/// it overlaps and the overlap as a share of the cell (the shares sum to 1).
fn spans(len: usize, n: usize) -> Vec<Vec<(usize, f32)>> {
    let cell = len as f64 / n as f64;
    (0..n)
        .map(|i| {
            let (a, b) = (i as f64 * cell, (i + 1) as f64 * cell);
            let first = a.floor() as usize;
            let last = (b.ceil() as usize).min(len);
            (first..last)
                .filter_map(|p| {
                    let overlap = (b.min(p as f64 + 1.0) - a.max(p as f64)) / cell;
                    (overlap > 1e-9).then_some((p, overlap as f32))
                })
                .collect()
        })
        .collect()
}

/// Linear light → nearest 8-bit sRGB code: the count of decision levels (the linear
/// values half way between codes in the sRGB domain) at or below the value, started from
/// a coarse table so that only a step or two of search is left.
struct Encoder {
    levels: [f32; 255],
    start: Vec<u8>,
}

/// Cells of the coarse table over linear 0..1; near black one cell spans under one code.
const ENCODER_CELLS: usize = 4096;

impl Encoder {
    fn get() -> &'static Encoder {
        static ENCODER: OnceLock<Encoder> = OnceLock::new();
        ENCODER.get_or_init(|| {
            let levels: [f32; 255] =
                std::array::from_fn(|k| srgb_to_linear((k as f64 + 0.5) / 255.0) as f32);
            let start = (0..=ENCODER_CELLS)
                .map(|b| {
                    let v = b as f32 / ENCODER_CELLS as f32;
                    levels.partition_point(|&t| t <= v) as u8
                })
                .collect();
            Encoder { levels, start }
        })
    }

    #[inline]
    fn encode(&self, v: f32) -> u8 {
        if v.is_nan() || v <= 0.0 {
            return 0;
        }
        if v >= 1.0 {
            return 255;
        }
        let mut code = self.start[(v * ENCODER_CELLS as f32) as usize];
        while code < 255 && self.levels[usize::from(code)] <= v {
            code += 1;
        }
        code
    }
}

/// The photo at full size: 8-bit codes copied, 16-bit ones rounded to 8 bits (both are
/// sRGB-encoded, so no transfer is needed).
fn full_size(photo: &Photo) -> image::RgbImage {
    let (w, h) = (photo.width() as u32, photo.height() as u32);
    let (spp, colour) = (photo.spp(), photo.channels() == 3);
    let pick = |px: &[u8]| {
        if colour {
            [px[0], px[1], px[2]]
        } else {
            [px[0]; 3]
        }
    };
    let out: Vec<u8> = match photo.samples() {
        Samples::U8(s) => s.chunks_exact(spp).flat_map(pick).collect(),
        Samples::U16(s) => s
            .chunks_exact(spp)
            .flat_map(|px| {
                let to8 = |v: u16| ((u32::from(v) * 255 + 32767) / 65535) as u8;
                if colour {
                    [to8(px[0]), to8(px[1]), to8(px[2])]
                } else {
                    [to8(px[0]); 3]
                }
            })
            .collect(),
    };
    image::RgbImage::from_raw(w, h, out).unwrap_or_else(|| image::RgbImage::new(w, h))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::photo::linear_to_srgb;
    use image::{DynamicImage, Rgb, RgbImage};

    #[test]
    fn spans_cover_each_axis_exactly_once() {
        for (len, n) in [(10, 3), (4000, 1200), (7, 7), (5, 1)] {
            let s = spans(len, n);
            let mut coverage = vec![0.0f64; len];
            for cell in &s {
                let total: f32 = cell.iter().map(|&(_, w)| w).sum();
                assert!((total - 1.0).abs() < 1e-5);
                for &(p, w) in cell {
                    coverage[p] += f64::from(w) * len as f64 / n as f64;
                }
            }
            assert!(coverage.iter().all(|c| (c - 1.0).abs() < 1e-4), "{len}/{n}");
        }
    }

    #[test]
    fn encode_rounds_to_the_nearest_code() {
        let e = Encoder::get();
        for code in 0..=255u8 {
            let v = srgb_to_linear(f64::from(code) / 255.0) as f32;
            assert_eq!(e.encode(v), code);
        }
        // Against the formula directly, on a fine sweep of linear values.
        for i in 0..=20000 {
            let v = i as f64 / 20000.0;
            let expect = (255.0 * linear_to_srgb(v)).round() as u8;
            let got = e.encode(v as f32);
            assert!(got.abs_diff(expect) <= 1, "v {v}: {got} vs {expect}");
        }
        assert_eq!(e.encode(-1.0), 0);
        assert_eq!(e.encode(f32::NAN), 0);
        assert_eq!(e.encode(2.0), 255);
    }

    #[test]
    fn reduction_averages_in_linear_light() {
        // Checkerboard of codes 0 and 255: its linear mean is 0.5, which encodes to code
        // round(255 · linear_to_srgb(0.5)) = 188, not the 128 of a gamma-domain average.
        let img = RgbImage::from_fn(64, 32, |x, y| {
            if (x + y) % 2 == 0 {
                Rgb([255, 255, 255])
            } else {
                Rgb([0, 0, 0])
            }
        });
        let photo = Photo::from_image(DynamicImage::ImageRgb8(img), "checker").unwrap();
        let (preview, scale) = photo.preview_rgb8(16);
        assert_eq!(preview.dimensions(), (16, 8));
        assert_eq!(scale, 0.25);
        let expect = (255.0 * linear_to_srgb(0.5)).round() as u8;
        assert_eq!(expect, 188);
        assert!(preview.pixels().all(|p| p.0 == [expect; 3]));
    }

    #[test]
    fn small_photos_are_copied_and_positions_map_through_the_factor() {
        let img = RgbImage::from_fn(30, 20, |x, y| Rgb([x as u8 * 8, y as u8 * 12, 77]));
        let photo = Photo::from_image(DynamicImage::ImageRgb8(img.clone()), "small").unwrap();
        let (copy, scale) = photo.preview_rgb8(30);
        assert_eq!(scale, 1.0);
        assert_eq!(copy, img);
        // A bright pixel at photo (21, 9) lands in preview cell ((21 + 0.5)·s − 0.5, …).
        let mut spot = RgbImage::from_pixel(300, 200, Rgb([0, 0, 0]));
        spot.put_pixel(210, 90, Rgb([255, 255, 255]));
        let photo = Photo::from_image(DynamicImage::ImageRgb8(spot), "spot").unwrap();
        let (preview, s) = photo.preview_rgb8(30);
        assert_eq!(preview.dimensions(), (30, 20));
        let (px, py) = (
            (210.5 * s - 0.5).round() as u32,
            (90.5 * s - 0.5).round() as u32,
        );
        let brightest = preview
            .enumerate_pixels()
            .max_by_key(|(_, _, p)| p.0[0])
            .map(|(x, y, _)| (x, y));
        assert_eq!(brightest, Some((px, py)));
    }

    #[test]
    fn grey_16_bit_preview() {
        let img = image::ImageBuffer::<image::Luma<u16>, _>::from_pixel(4, 2, image::Luma([65535]));
        let photo = Photo::from_image(DynamicImage::ImageLuma16(img), "g16").unwrap();
        let (p, _) = photo.preview_rgb8(2);
        assert_eq!(p.dimensions(), (2, 1));
        assert!(p.pixels().all(|px| px.0 == [255; 3]));
        let (full, _) = photo.preview_rgb8(10);
        assert!(full.pixels().all(|px| px.0 == [255; 3]));
    }
}
