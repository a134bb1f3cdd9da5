//! One channel of a photo in linear light, read through lookup tables built from the sRGB
//! transfer function of IEC 61966-2-1 (256 entries for 8-bit, 65536 for 16-bit samples).

use super::decode::Samples;
use super::{Channel, Photo};
use std::sync::OnceLock;

/// Lowest 8-bit code counted as clipped: ⌈0.98 · 255⌉ (98 % of full scale, common practice).
pub(crate) const CLIP_CODE_8: u8 = ((98 * 255 + 99) / 100) as u8;
/// Lowest 16-bit code counted as clipped: ⌈0.98 · 65535⌉.
pub(crate) const CLIP_CODE_16: u16 = ((98 * 65535 + 99) / 100) as u16;

/// Weights of linear luminance Y from linear R, G, B: the Y row of the sRGB (ITU-R BT.709
/// primaries, D65) RGB→XYZ matrix of IEC 61966-2-1.
pub(crate) const LUMA_WEIGHTS: [f32; 3] = [0.2126, 0.7152, 0.0722];

/// sRGB code value (0..1) to linear light (0..1), IEC 61966-2-1:
/// C/12.92 for C ≤ 0.04045, else ((C + 0.055)/1.055)^2.4. Values outside 0..1 follow the
/// same formula (negative ones through the linear segment).
pub fn srgb_to_linear(c: f64) -> f64 {
    if c <= 0.04045 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

/// Linear light (0..1) to sRGB code value (0..1), the inverse of [`srgb_to_linear`]:
/// 12.92·L for L ≤ 0.0031308, else 1.055·L^(1/2.4) − 0.055 (IEC 61966-2-1).
pub fn linear_to_srgb(l: f64) -> f64 {
    if l <= 0.003_130_8 {
        l * 12.92
    } else {
        1.055 * l.powf(1.0 / 2.4) - 0.055
    }
}

pub(crate) fn lut8() -> &'static [f32; 256] {
    static LUT: OnceLock<[f32; 256]> = OnceLock::new();
    LUT.get_or_init(|| std::array::from_fn(|code| srgb_to_linear(code as f64 / 255.0) as f32))
}

pub(crate) fn lut16() -> &'static [f32] {
    static LUT: OnceLock<Vec<f32>> = OnceLock::new();
    LUT.get_or_init(|| {
        (0..=u16::MAX)
            .map(|code| srgb_to_linear(f64::from(code) / 65535.0) as f32)
            .collect()
    })
}

#[derive(Debug, Clone, Copy)]
enum Mode {
    /// One stored sample at this offset within the pixel.
    Single(usize),
    /// Y from the three colour samples.
    Luma,
}

/// One channel of a photo in linear light, 0..1, in upright pixel coordinates.
#[derive(Clone, Copy)]
pub struct Plane<'a> {
    photo: &'a Photo,
    channel: Channel,
    mode: Mode,
    width: usize,
    height: usize,
}

impl<'a> Plane<'a> {
    pub(crate) fn new(photo: &'a Photo, channel: Channel) -> Plane<'a> {
        let mode = if photo.channels() == 1 {
            Mode::Single(0)
        } else {
            match channel {
                Channel::R => Mode::Single(0),
                Channel::G => Mode::Single(1),
                Channel::B => Mode::Single(2),
                Channel::Luma => Mode::Luma,
            }
        };
        Plane {
            photo,
            channel,
            mode,
            width: photo.width(),
            height: photo.height(),
        }
    }

    /// Width in pixels.
    pub fn width(&self) -> usize {
        self.width
    }

    /// Height in pixels.
    pub fn height(&self) -> usize {
        self.height
    }

    /// The channel this plane shows (as asked for; for a grey photo it reads the grey one).
    pub fn channel(&self) -> Channel {
        self.channel
    }

    /// Linear value at a pixel.
    ///
    /// # Panics
    /// If (x, y) lies outside the plane, like slice indexing; see [`Plane::get_checked`].
    #[inline]
    pub fn get(&self, x: usize, y: usize) -> f32 {
        assert!(x < self.width && y < self.height, "pixel outside the plane");
        self.at((y * self.width + x) * self.photo.spp())
    }

    /// Linear value at a pixel, or `None` outside the plane.
    pub fn get_checked(&self, x: usize, y: usize) -> Option<f32> {
        (x < self.width && y < self.height).then(|| self.get(x, y))
    }

    #[inline]
    fn at(&self, index: usize) -> f32 {
        match (self.photo.samples(), self.mode) {
            (Samples::U8(s), Mode::Single(o)) => lut8()[usize::from(s[index + o])],
            (Samples::U16(s), Mode::Single(o)) => lut16()[usize::from(s[index + o])],
            (Samples::U8(s), Mode::Luma) => luma(
                lut8(),
                s[index].into(),
                s[index + 1].into(),
                s[index + 2].into(),
            ),
            (Samples::U16(s), Mode::Luma) => luma(
                lut16(),
                s[index].into(),
                s[index + 1].into(),
                s[index + 2].into(),
            ),
        }
    }

    /// Whether any colour channel that feeds this plane is clipped (≥ 98 % of full scale)
    /// at this pixel: for luma any of R, G, B; for R only R.
    ///
    /// # Panics
    /// If (x, y) lies outside the plane, like slice indexing.
    pub fn saturated(&self, x: usize, y: usize) -> bool {
        assert!(x < self.width && y < self.height, "pixel outside the plane");
        let index = (y * self.width + x) * self.photo.spp();
        let (first, count) = match self.mode {
            Mode::Single(o) => (index + o, 1),
            Mode::Luma => (index, 3),
        };
        match self.photo.samples() {
            Samples::U8(s) => s[first..first + count].iter().any(|&v| v >= CLIP_CODE_8),
            Samples::U16(s) => s[first..first + count].iter().any(|&v| v >= CLIP_CODE_16),
        }
    }

    /// Adds row `y` into per-block accumulators: for block `b` of `block` pixels,
    /// `sums[b]` gains the linear values and `clips[b]` the clipped pixels. One fused
    /// pass over the samples: the coarse map of a 12-megapixel photo reads every pixel.
    ///
    /// # Panics
    /// If `y` lies outside the plane.
    pub fn add_block_row(&self, y: usize, block: usize, sums: &mut [f32], clips: &mut [u16]) {
        assert!(y < self.height, "row outside the plane");
        let spp = self.photo.spp();
        let n = (sums.len().min(clips.len()) * block).min(self.width);
        let start = y * self.width * spp;
        let row = start..start + n * spp;
        let mode = self.mode;
        match self.photo.samples() {
            Samples::U8(s) => match spp {
                3 => block_row::<u8, 3>(lut8(), &s[row], mode, CLIP_CODE_8, block, sums, clips),
                4 => block_row::<u8, 4>(lut8(), &s[row], mode, CLIP_CODE_8, block, sums, clips),
                _ => block_row::<u8, 1>(lut8(), &s[row], mode, CLIP_CODE_8, block, sums, clips),
            },
            Samples::U16(s) => match spp {
                3 => block_row::<u16, 3>(lut16(), &s[row], mode, CLIP_CODE_16, block, sums, clips),
                4 => block_row::<u16, 4>(lut16(), &s[row], mode, CLIP_CODE_16, block, sums, clips),
                _ => block_row::<u16, 1>(lut16(), &s[row], mode, CLIP_CODE_16, block, sums, clips),
            },
        }
    }

    /// Fills `out` with the linear values of row `y`, from x = 0 up to the shorter of
    /// `out.len()` and the width.
    ///
    /// # Panics
    /// If `y` lies outside the plane.
    pub fn row(&self, y: usize, out: &mut [f32]) {
        assert!(y < self.height, "row outside the plane");
        let spp = self.photo.spp();
        let n = out.len().min(self.width);
        let start = y * self.width * spp;
        let end = start + n * spp;
        match (self.photo.samples(), self.mode) {
            (Samples::U8(s), Mode::Single(o)) => {
                fill_single(lut8(), &s[start..end], spp, o, &mut out[..n]);
            }
            (Samples::U16(s), Mode::Single(o)) => {
                fill_single(lut16(), &s[start..end], spp, o, &mut out[..n]);
            }
            (Samples::U8(s), Mode::Luma) => fill_luma(lut8(), &s[start..end], spp, &mut out[..n]),
            (Samples::U16(s), Mode::Luma) => {
                fill_luma(lut16(), &s[start..end], spp, &mut out[..n]);
            }
        }
    }

    /// Bilinear interpolation with pixel centres at integer coordinates (the top-left
    /// pixel centre at (0, 0)); `None` outside 0 ≤ x ≤ width − 1, 0 ≤ y ≤ height − 1 or for
    /// a non-finite coordinate.
    pub fn sample_bilinear(&self, x: f64, y: f64) -> Option<f32> {
        let max_x = (self.width - 1) as f64;
        let max_y = (self.height - 1) as f64;
        if !(x >= 0.0 && y >= 0.0 && x <= max_x && y <= max_y) {
            return None;
        }
        let x0 = (x.floor() as usize).min(self.width - 1);
        let y0 = (y.floor() as usize).min(self.height - 1);
        let x1 = (x0 + 1).min(self.width - 1);
        let y1 = (y0 + 1).min(self.height - 1);
        let fx = (x - x0 as f64) as f32;
        let fy = (y - y0 as f64) as f32;
        let top = self.get(x0, y0) * (1.0 - fx) + self.get(x1, y0) * fx;
        let bottom = self.get(x0, y1) * (1.0 - fx) + self.get(x1, y1) * fx;
        Some(top * (1.0 - fy) + bottom * fy)
    }

    /// Linear value of the lowest clipped code of this plane's own channel (for luma, of
    /// equal R, G and B): values at or above it are saturated.
    pub fn clip_level(&self) -> f32 {
        match self.photo.samples() {
            Samples::U8(_) => lut8()[usize::from(CLIP_CODE_8)],
            Samples::U16(_) => lut16()[usize::from(CLIP_CODE_16)],
        }
    }
}

#[inline]
fn luma(lut: &[f32], r: usize, g: usize, b: usize) -> f32 {
    LUMA_WEIGHTS[0] * lut[r] + LUMA_WEIGHTS[1] * lut[g] + LUMA_WEIGHTS[2] * lut[b]
}

/// The fused kernel of [`Plane::add_block_row`], with the samples per pixel fixed at
/// compile time so the inner loop unrolls.
fn block_row<T: Copy + Into<usize> + PartialOrd, const SPP: usize>(
    lut: &[f32],
    s: &[T],
    mode: Mode,
    clip: T,
    block: usize,
    sums: &mut [f32],
    clips: &mut [u16],
) {
    for ((px, sum), count) in s
        .chunks(SPP * block)
        .zip(sums.iter_mut())
        .zip(clips.iter_mut())
    {
        let (mut acc, mut c) = (0f32, 0u16);
        for p in px.chunks_exact(SPP) {
            match mode {
                Mode::Single(o) => {
                    acc += lut[p[o].into()];
                    c += u16::from(p[o] >= clip);
                }
                Mode::Luma => {
                    acc += luma(lut, p[0].into(), p[1].into(), p[2].into());
                    c += u16::from(p[0] >= clip || p[1] >= clip || p[2] >= clip);
                }
            }
        }
        *sum += acc;
        *count += c;
    }
}

fn fill_single<T: Copy + Into<usize>>(lut: &[f32], s: &[T], spp: usize, o: usize, out: &mut [f32]) {
    for (v, px) in out.iter_mut().zip(s.chunks_exact(spp)) {
        *v = lut[px[o].into()];
    }
}

fn fill_luma<T: Copy + Into<usize>>(lut: &[f32], s: &[T], spp: usize, out: &mut [f32]) {
    for (v, px) in out.iter_mut().zip(s.chunks_exact(spp)) {
        *v = luma(lut, px[0].into(), px[1].into(), px[2].into());
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{DynamicImage, ImageBuffer, Luma, Rgb};

    /// The IEC 61966-2-1 decoding formula written out again, independently of the code.
    fn iec_formula(c: f64) -> f64 {
        if c <= 0.04045 {
            c / 12.92
        } else {
            ((c + 0.055) / 1.055).powf(2.4)
        }
    }

    #[test]
    fn srgb_transfer_matches_iec_61966_2_1() {
        for code in [0u32, 1, 10, 11, 12, 50, 128, 200, 254, 255] {
            let c = f64::from(code) / 255.0;
            assert!(
                (srgb_to_linear(c) - iec_formula(c)).abs() < 1e-15,
                "code {code}"
            );
        }
        // Known values, computed from the IEC 61966-2-1 formula (and widely tabulated):
        // C = 0.5 → 0.21404; code 128/255 → 0.21586; the ends map to themselves.
        assert!((srgb_to_linear(0.5) - 0.214_04).abs() < 5e-6);
        assert!((srgb_to_linear(128.0 / 255.0) - 0.215_86).abs() < 5e-6);
        assert_eq!(srgb_to_linear(0.0), 0.0);
        assert!((srgb_to_linear(1.0) - 1.0).abs() < 1e-15);
        // Boundary C = 0.04045: the linear segment gives 0.04045/12.92 = 0.0031308, and the
        // power segment just above it agrees to about 1e-7 (IEC 61966-2-1 is continuous
        // there to that precision).
        let below = srgb_to_linear(0.04045);
        assert!((below - 0.04045 / 12.92).abs() < 1e-15);
        assert!((below - 0.003_130_8).abs() < 1e-7);
        let above = srgb_to_linear(0.040_450_001);
        assert!((above - below).abs() < 1e-6);
    }

    #[test]
    fn linear_to_srgb_inverts_the_transfer() {
        for i in 0..=1000 {
            let c = f64::from(i) / 1000.0;
            assert!(
                (linear_to_srgb(srgb_to_linear(c)) - c).abs() < 1e-6,
                "c = {c}"
            );
        }
        assert!((linear_to_srgb(0.214_041_140_5) - 0.5).abs() < 1e-6);
    }

    #[test]
    fn clip_codes_are_98_percent_of_full_scale() {
        assert_eq!(CLIP_CODE_8, 250); // 0.98·255 = 249.9
        assert_eq!(CLIP_CODE_16, 64225); // 0.98·65535 = 64224.3
        assert!(f64::from(CLIP_CODE_8 - 1) < 0.98 * 255.0);
        assert!(f64::from(CLIP_CODE_16 - 1) < 0.98 * 65535.0);
    }

    #[test]
    fn luts_follow_the_formula() {
        let l8 = lut8();
        let l16 = lut16();
        for code in 0..256usize {
            assert!((f64::from(l8[code]) - iec_formula(code as f64 / 255.0)).abs() < 1e-7);
            // 8-bit code c and 16-bit code 257·c are the same sRGB value.
            assert!((l8[code] - l16[code * 257]).abs() < 1e-7);
        }
        assert_eq!(l16.len(), 65536);
    }

    fn rgb_photo() -> Photo {
        // 3 × 2 colour photo with distinct values, one clipped red sample at (2, 0).
        let img = ImageBuffer::<Rgb<u8>, _>::from_fn(3, 2, |x, y| {
            if (x, y) == (2, 0) {
                Rgb([252, 10, 20])
            } else {
                Rgb([(40 * x + 10 * y) as u8, 100, (7 * x) as u8])
            }
        });
        Photo::from_image(DynamicImage::ImageRgb8(img), "rgb").unwrap()
    }

    #[test]
    fn plane_values_and_saturation_per_channel() {
        let photo = rgb_photo();
        let r = photo.plane(Channel::R);
        let g = photo.plane(Channel::G);
        let luma_plane = photo.plane(Channel::Luma);
        let lin = |code: u8| srgb_to_linear(f64::from(code) / 255.0) as f32;
        assert!((r.get(1, 1) - lin(50)).abs() < 1e-7);
        assert!((g.get(1, 1) - lin(100)).abs() < 1e-7);
        let y = 0.2126 * lin(50) + 0.7152 * lin(100) + 0.0722 * lin(7);
        assert!((luma_plane.get(1, 1) - y).abs() < 1e-6);
        // Clipped red feeds R and luma, not G.
        assert!(r.saturated(2, 0));
        assert!(luma_plane.saturated(2, 0));
        assert!(!g.saturated(2, 0));
        assert!(!r.saturated(1, 0));
        assert!(photo.clipped(0, 2, 0));
        assert!(!photo.clipped(1, 2, 0));
        assert!(!photo.clipped(7, 2, 0));
        assert_eq!(r.get_checked(3, 0), None);
        let mut row = vec![0.0; 3];
        luma_plane.row(1, &mut row);
        for (x, v) in row.iter().enumerate() {
            assert_eq!(*v, luma_plane.get(x, 1));
        }
    }

    #[test]
    fn grey_photo_gives_the_grey_channel_for_every_plane() {
        let img = ImageBuffer::<Luma<u16>, _>::from_fn(2, 2, |x, y| {
            Luma([(x * 30000 + y * 5000) as u16])
        });
        let photo = Photo::from_image(DynamicImage::ImageLuma16(img), "grey16").unwrap();
        assert_eq!(photo.channels(), 1);
        assert_eq!(photo.bit_depth(), 16);
        let expect = srgb_to_linear(35000.0 / 65535.0) as f32;
        for channel in [Channel::R, Channel::G, Channel::B, Channel::Luma] {
            assert!((photo.plane(channel).get(1, 1) - expect).abs() < 1e-6);
        }
    }

    #[test]
    fn bilinear_sampling_uses_pixel_centres() {
        // A 16-bit grey ramp whose linear values are known exactly from the table.
        let img = ImageBuffer::<Luma<u16>, _>::from_fn(4, 3, |x, y| {
            Luma([(x * 10000 + y * 3000) as u16])
        });
        let photo = Photo::from_image(DynamicImage::ImageLuma16(img), "ramp").unwrap();
        let p = photo.plane(Channel::Luma);
        // At integer coordinates the sample is the pixel itself.
        assert_eq!(p.sample_bilinear(2.0, 1.0), Some(p.get(2, 1)));
        assert_eq!(p.sample_bilinear(3.0, 2.0), Some(p.get(3, 2)));
        // Half way between four centres: their mean.
        let mean = (p.get(1, 0) + p.get(2, 0) + p.get(1, 1) + p.get(2, 1)) / 4.0;
        assert!((p.sample_bilinear(1.5, 0.5).unwrap() - mean).abs() < 1e-6);
        // A quarter of the way along x on row 2.
        let v = 0.75 * p.get(0, 2) + 0.25 * p.get(1, 2);
        assert!((p.sample_bilinear(0.25, 2.0).unwrap() - v).abs() < 1e-6);
        // Outside the centres, or not a number: None.
        assert_eq!(p.sample_bilinear(-0.01, 1.0), None);
        assert_eq!(p.sample_bilinear(3.01, 1.0), None);
        assert_eq!(p.sample_bilinear(1.0, 2.5), None);
        assert_eq!(p.sample_bilinear(f64::NAN, 1.0), None);
    }

    #[test]
    fn bilinear_on_a_single_pixel_photo() {
        let img = ImageBuffer::<Luma<u8>, _>::from_pixel(1, 1, Luma([128]));
        let photo = Photo::from_image(DynamicImage::ImageLuma8(img), "one").unwrap();
        let p = photo.plane(Channel::Luma);
        assert_eq!(p.sample_bilinear(0.0, 0.0), Some(p.get(0, 0)));
        assert_eq!(p.sample_bilinear(0.5, 0.0), None);
    }
}
