//! Which channel shows the pattern best. Statistics come from a sparse grid of samples
//! (about 750 000 on any photo, every 4th pixel each way on 12 MP): signal is the 99.9th
//! percentile minus the median, noise the median absolute deviation scaled by 1.4826 to
//! a normal σ (Hampel's MAD; Rousseeuw & Croux, JASA 88:1273, 1993), and the clipped
//! fraction is taken among the bright (pattern) samples.
//!
//! Laser spots usually clip in their own colour first. JPEG 4:2:0 keeps luma at full
//! resolution while halving chroma, so positions are best taken from luma unless it is
//! clipped more than the best colour channel (common practice); otherwise the strongest
//! of the least-clipped colour channels is used.

use super::Photo;
use super::decode::Samples;
use super::plane::{CLIP_CODE_8, CLIP_CODE_16, LUMA_WEIGHTS, lut8, lut16};
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// A colour channel, or linear luminance.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Channel {
    /// Red.
    R,
    /// Green.
    G,
    /// Blue.
    B,
    /// Linear luminance Y = 0.2126 R + 0.7152 G + 0.0722 B (IEC 61966-2-1 primaries).
    Luma,
}

impl Channel {
    fn long_name(self) -> &'static str {
        match self {
            Channel::R => "red",
            Channel::G => "green",
            Channel::B => "blue",
            Channel::Luma => "luma",
        }
    }
}

impl fmt::Display for Channel {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Channel::R => "r",
            Channel::G => "g",
            Channel::B => "b",
            Channel::Luma => "luma",
        })
    }
}

/// A channel name that is not one of r, g, b, luma.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error("unknown channel \"{0}\": use r, g, b or luma (or red, green, blue)")]
pub struct ParseChannelError(pub String);

impl FromStr for Channel {
    type Err = ParseChannelError;

    /// Accepts r, g, b, luma and red, green, blue, in any case.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s.trim().to_ascii_lowercase().as_str() {
            "r" | "red" => Ok(Channel::R),
            "g" | "green" => Ok(Channel::G),
            "b" | "blue" => Ok(Channel::B),
            "luma" => Ok(Channel::Luma),
            _ => Err(ParseChannelError(s.to_string())),
        }
    }
}

/// Statistics of one channel over the sparse sample grid, in linear light (0..1).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelStats {
    /// The channel.
    pub channel: Channel,
    /// 99.9th percentile minus the median.
    pub signal: f64,
    /// Robust σ of the background: 1.4826 × median absolute deviation.
    pub noise: f64,
    /// Fraction of the bright samples (above half way from the median to the 99.9th
    /// percentile) that are clipped in a colour feeding this channel.
    pub clipped_fraction: f64,
}

/// The automatic channel choice and why it was made.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ChannelChoice {
    /// The chosen channel.
    pub channel: Channel,
    /// Why, in one sentence.
    pub reason: String,
    /// Statistics of every channel considered (R, G, B, luma; luma alone for grey).
    pub stats: Vec<ChannelStats>,
}

/// Samples on the sparse grid: about this many, whatever the photo size.
const TARGET_SAMPLES: usize = 750_000;
/// Histogram bins over linear 0..1; fine enough that an 8-bit code step near black
/// (3e-4 in linear light) spans some 20 bins.
const BINS: usize = 65536;
/// Consistency constant of the MAD for a normal distribution, 1/Φ⁻¹(3/4).
const MAD_TO_SIGMA: f64 = 1.4826;
/// Colour channels with less than this share of the strongest colour signal are too weak
/// to measure on.
const MIN_SIGNAL_SHARE: f64 = 0.25;

struct Histogram {
    count: Vec<u32>,
    clipped: Vec<u32>,
    n: u64,
}

impl Histogram {
    fn new() -> Self {
        Histogram {
            count: vec![0; BINS],
            clipped: vec![0; BINS],
            n: 0,
        }
    }

    #[inline]
    fn add(&mut self, v: f32, clipped: bool) {
        let bin = ((v.clamp(0.0, 1.0) * (BINS - 1) as f32) + 0.5) as usize;
        let bin = bin.min(BINS - 1);
        self.count[bin] += 1;
        self.clipped[bin] += u32::from(clipped);
        self.n += 1;
    }

    /// Smallest bin whose cumulative count reaches `rank` (1-based).
    fn bin_at_rank(&self, rank: u64) -> usize {
        let mut seen = 0u64;
        for (bin, &c) in self.count.iter().enumerate() {
            seen += u64::from(c);
            if seen >= rank {
                return bin;
            }
        }
        BINS - 1
    }

    fn stats(&self, channel: Channel) -> ChannelStats {
        let scale = 1.0 / (BINS - 1) as f64;
        if self.n == 0 {
            return ChannelStats {
                channel,
                signal: 0.0,
                noise: 0.0,
                clipped_fraction: 0.0,
            };
        }
        let half = self.n.div_ceil(2);
        let median = self.bin_at_rank(half);
        let high = self.bin_at_rank(((self.n as f64) * 0.999).ceil().max(1.0) as u64);
        // MAD: grow a window around the median until it holds half the samples.
        let mut inside = u64::from(self.count[median]);
        let mut mad = 0usize;
        while inside < half {
            mad += 1;
            if let Some(lo) = median.checked_sub(mad) {
                inside += u64::from(self.count[lo]);
            }
            if let Some(&c) = self.count.get(median + mad) {
                inside += u64::from(c);
            }
        }
        let bright_from = median + (high - median).div_ceil(2);
        let bright: u64 = self.count[bright_from..]
            .iter()
            .map(|&c| u64::from(c))
            .sum();
        let clipped: u64 = self.clipped[bright_from..]
            .iter()
            .map(|&c| u64::from(c))
            .sum();
        ChannelStats {
            channel,
            signal: (high - median) as f64 * scale,
            noise: MAD_TO_SIGMA * mad as f64 * scale,
            clipped_fraction: if bright == 0 {
                0.0
            } else {
                clipped as f64 / bright as f64
            },
        }
    }
}

/// Grid step so that about [`TARGET_SAMPLES`] pixels are read (1 on small photos).
fn grid_step(width: usize, height: usize) -> usize {
    (((width * height) as f64 / TARGET_SAMPLES as f64)
        .sqrt()
        .floor() as usize)
        .max(1)
}

pub(crate) fn choose(photo: &Photo) -> ChannelChoice {
    let step = grid_step(photo.width(), photo.height());
    if photo.channels() == 1 {
        let mut h = Histogram::new();
        match photo.samples() {
            Samples::U8(s) => grid(photo, step, |i| {
                h.add(lut8()[usize::from(s[i])], s[i] >= CLIP_CODE_8);
            }),
            Samples::U16(s) => grid(photo, step, |i| {
                h.add(lut16()[usize::from(s[i])], s[i] >= CLIP_CODE_16);
            }),
        }
        return ChannelChoice {
            channel: Channel::Luma,
            reason: "grey photo: its one channel is used as luma".into(),
            stats: vec![h.stats(Channel::Luma)],
        };
    }
    let mut hist: [Histogram; 4] = std::array::from_fn(|_| Histogram::new());
    let mut add = |lin: [f32; 3], clip: [bool; 3]| {
        for c in 0..3 {
            hist[c].add(lin[c], clip[c]);
        }
        let y = LUMA_WEIGHTS[0] * lin[0] + LUMA_WEIGHTS[1] * lin[1] + LUMA_WEIGHTS[2] * lin[2];
        hist[3].add(y, clip.iter().any(|&c| c));
    };
    match photo.samples() {
        Samples::U8(s) => grid(photo, step, |i| {
            let px = [s[i], s[i + 1], s[i + 2]];
            add(
                px.map(|v| lut8()[usize::from(v)]),
                px.map(|v| v >= CLIP_CODE_8),
            );
        }),
        Samples::U16(s) => grid(photo, step, |i| {
            let px = [s[i], s[i + 1], s[i + 2]];
            add(
                px.map(|v| lut16()[usize::from(v)]),
                px.map(|v| v >= CLIP_CODE_16),
            );
        }),
    }
    let stats: Vec<ChannelStats> = [Channel::R, Channel::G, Channel::B, Channel::Luma]
        .iter()
        .zip(&hist)
        .map(|(&c, h)| h.stats(c))
        .collect();
    let (channel, reason) = decide(&stats);
    ChannelChoice {
        channel,
        reason,
        stats,
    }
}

/// Calls `f` with the sample index of every pixel on the grid, centred in each cell.
fn grid(photo: &Photo, step: usize, mut f: impl FnMut(usize)) {
    let (w, spp) = (photo.width(), photo.spp());
    for y in (step / 2..photo.height()).step_by(step) {
        for x in (step / 2..w).step_by(step) {
            f((y * w + x) * spp);
        }
    }
}

/// `stats` holds R, G, B, luma in that order.
fn decide(stats: &[ChannelStats]) -> (Channel, String) {
    let pct = |f: f64| format!("{:.1} %", 100.0 * f);
    let (colours, luma) = (&stats[..3], &stats[3]);
    let strongest = colours.iter().map(|s| s.signal).fold(0.0, f64::max);
    if strongest <= 0.0 {
        return (
            Channel::Luma,
            "no pattern signal above the background in any channel; luma is used".into(),
        );
    }
    // Among colour channels with a usable signal, the least clipped; ties go to the
    // stronger signal.
    let best = colours
        .iter()
        .filter(|s| s.signal >= MIN_SIGNAL_SHARE * strongest)
        .min_by(|a, b| {
            a.clipped_fraction
                .total_cmp(&b.clipped_fraction)
                .then(b.signal.total_cmp(&a.signal))
        })
        .unwrap_or(&colours[0]);
    // Sampling noise in the clipped fractions is far below this tolerance.
    if luma.clipped_fraction <= best.clipped_fraction + 1e-9 {
        let reason = if luma.clipped_fraction == 0.0 {
            "luma is not clipped, and JPEG keeps luma at full resolution".to_string()
        } else {
            format!(
                "luma is clipped on {} of the pattern, no more than the best colour \
                 channel ({} on {}), and JPEG keeps luma at full resolution",
                pct(luma.clipped_fraction),
                pct(best.clipped_fraction),
                best.channel.long_name()
            )
        };
        return (Channel::Luma, reason);
    }
    let clipping: Vec<&str> = colours
        .iter()
        .filter(|s| s.clipped_fraction > best.clipped_fraction)
        .map(|s| s.channel.long_name())
        .collect();
    let reason = format!(
        "luma is clipped on {} of the pattern ({} clips); {} is clipped on {} with {:.0} % \
         of the strongest colour signal",
        pct(luma.clipped_fraction),
        clipping.join(" and "),
        best.channel.long_name(),
        pct(best.clipped_fraction),
        100.0 * best.signal / strongest
    );
    (best.channel, reason)
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::{DynamicImage, Rgb, RgbImage};

    #[test]
    fn names_parse_and_display() {
        for (text, c) in [
            ("r", Channel::R),
            ("G", Channel::G),
            ("Blue", Channel::B),
            ("LUMA", Channel::Luma),
        ] {
            assert_eq!(text.parse::<Channel>(), Ok(c));
        }
        for c in [Channel::R, Channel::G, Channel::B, Channel::Luma] {
            assert_eq!(c.to_string().parse::<Channel>(), Ok(c));
        }
        let err = "y".parse::<Channel>().unwrap_err();
        assert!(err.to_string().contains("use r, g, b or luma"));
        assert_eq!(serde_json::to_string(&Channel::Luma).unwrap(), "\"luma\"");
    }

    /// A dark, slightly noisy background with a Gaussian spot of the given colour; codes
    /// above 255 clip as a camera would.
    fn spot_photo(peak: [f64; 3], sigma_px: f64) -> Photo {
        let (cx, cy) = (150.0, 90.0);
        let img = RgbImage::from_fn(300, 200, |x, y| {
            let r2 = (f64::from(x) - cx).powi(2) + (f64::from(y) - cy).powi(2);
            let g = (-r2 / (2.0 * sigma_px * sigma_px)).exp();
            // Deterministic ±2-code texture for a non-zero noise estimate.
            let texture = f64::from((x * 7 + y * 13) % 5) - 2.0;
            Rgb(std::array::from_fn(|c| {
                (12.0 + texture + peak[c] * g).clamp(0.0, 255.0) as u8
            }))
        });
        Photo::from_image(DynamicImage::ImageRgb8(img), "spot").unwrap()
    }

    #[test]
    fn red_spot_with_clipped_centre_picks_green() {
        // Red clips over the core; green sees the same spot at 40 % without clipping.
        let choice = spot_photo([600.0, 200.0, 30.0], 6.0).choose_channel();
        let r = &choice.stats[0];
        let g = &choice.stats[1];
        let luma = &choice.stats[3];
        assert!(r.clipped_fraction > 0.2, "{choice:?}");
        assert_eq!(g.clipped_fraction, 0.0);
        assert!(luma.clipped_fraction > 0.0);
        assert_eq!(choice.channel, Channel::G, "{}", choice.reason);
        assert!(choice.reason.contains("red clips"), "{}", choice.reason);
        assert!(r.noise > 0.0 && r.noise < 0.01, "noise {}", r.noise);
    }

    #[test]
    fn unclipped_red_spot_picks_luma() {
        let choice = spot_photo([200.0, 60.0, 10.0], 6.0).choose_channel();
        assert!(choice.stats.iter().all(|s| s.clipped_fraction == 0.0));
        assert_eq!(choice.channel, Channel::Luma, "{}", choice.reason);
        // Red carries the most signal.
        assert!(choice.stats[0].signal > choice.stats[1].signal);
        assert!(choice.stats[0].signal > 0.3);
    }

    #[test]
    fn white_spot_clipped_everywhere_keeps_luma() {
        let choice = spot_photo([600.0, 600.0, 600.0], 6.0).choose_channel();
        assert!(choice.stats[3].clipped_fraction > 0.2);
        assert_eq!(choice.channel, Channel::Luma, "{}", choice.reason);
    }

    #[test]
    fn clipped_red_disc_with_weak_green_keeps_luma() {
        // A flat-topped red disc, clipped throughout, with a faint green copy. Green is
        // unclipped but far too weak to count, so it must not win; luma is clipped exactly
        // where red is, so luma is kept.
        let img = RgbImage::from_fn(120, 80, |x, y| {
            let inside = (x as i32 - 30).pow(2) + (y as i32 - 50).pow(2) < 100;
            if inside {
                Rgb([255, 30, 12])
            } else {
                Rgb([12, 12, 12])
            }
        });
        let photo = Photo::from_image(DynamicImage::ImageRgb8(img), "disc").unwrap();
        let choice = photo.choose_channel();
        let (r, g, luma) = (&choice.stats[0], &choice.stats[1], &choice.stats[3]);
        assert_eq!(r.clipped_fraction, 1.0);
        assert_eq!(g.clipped_fraction, 0.0);
        assert!(g.signal < MIN_SIGNAL_SHARE * r.signal);
        assert_eq!(luma.clipped_fraction, 1.0);
        assert_eq!(choice.channel, Channel::Luma, "{}", choice.reason);
    }

    #[test]
    fn flat_photo_falls_back_to_luma() {
        let img = RgbImage::from_pixel(40, 30, Rgb([50, 50, 50]));
        let photo = Photo::from_image(DynamicImage::ImageRgb8(img), "flat").unwrap();
        let choice = photo.choose_channel();
        assert_eq!(choice.channel, Channel::Luma);
        assert!(choice.reason.contains("no pattern signal"));
        assert!(
            choice
                .stats
                .iter()
                .all(|s| s.signal == 0.0 && s.noise == 0.0)
        );
    }

    #[test]
    fn saturated_photo_reports_all_clipped() {
        let img = RgbImage::from_pixel(40, 30, Rgb([255, 252, 250]));
        let photo = Photo::from_image(DynamicImage::ImageRgb8(img), "white").unwrap();
        let choice = photo.choose_channel();
        assert!(
            choice.stats.iter().all(|s| s.clipped_fraction == 1.0),
            "{choice:?}"
        );
    }

    #[test]
    fn grey_photo_has_one_luma_entry() {
        let img = image::GrayImage::from_fn(64, 64, |x, y| {
            image::Luma([if (x as i32 - 20).pow(2) + (y as i32 - 40).pow(2) < 16 {
                255
            } else {
                10
            }])
        });
        let photo = Photo::from_image(DynamicImage::ImageLuma8(img), "grey").unwrap();
        let choice = photo.choose_channel();
        assert_eq!(choice.channel, Channel::Luma);
        assert_eq!(choice.stats.len(), 1);
        assert_eq!(choice.stats[0].clipped_fraction, 1.0);
    }

    #[test]
    fn grid_step_thins_large_photos_only() {
        assert_eq!(grid_step(300, 200), 1);
        assert_eq!(grid_step(4000, 3000), 4);
        assert_eq!(grid_step(1, 1), 1);
    }
}
