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
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;
use std::sync::OnceLock;

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
/// Bins of the luma histogram over linear 0..1; fine enough that an 8-bit code step near
/// black (3e-4 in linear light) spans some 20 bins. Colour channels are histogrammed by
/// code, which is exact.
const LUMA_BINS: usize = 65536;
/// Consistency constant of the MAD for a normal distribution, 1/Φ⁻¹(3/4).
const MAD_TO_SIGMA: f64 = 1.4826;
/// Colour channels with less than this share of the strongest colour signal are too weak
/// to measure on.
const MIN_SIGNAL_SHARE: f64 = 0.25;

/// Counts per bin, and how many of them were clipped. Bin values (linear light) rise
/// with the bin index.
#[derive(Clone)]
struct Histogram {
    count: Vec<u32>,
    clipped: Vec<u32>,
}

impl Histogram {
    fn new(bins: usize) -> Self {
        Histogram {
            count: vec![0; bins],
            clipped: vec![0; bins],
        }
    }

    fn merge(&mut self, other: &Histogram) {
        for (a, b) in self.count.iter_mut().zip(&other.count) {
            *a += b;
        }
        for (a, b) in self.clipped.iter_mut().zip(&other.clipped) {
            *a += b;
        }
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
        self.count.len() - 1
    }

    /// `values[bin]` is the linear value of each bin, non-decreasing.
    fn stats(&self, channel: Channel, values: &[f32]) -> ChannelStats {
        let n: u64 = self.count.iter().map(|&c| u64::from(c)).sum();
        if n == 0 {
            return ChannelStats {
                channel,
                signal: 0.0,
                noise: 0.0,
                clipped_fraction: 0.0,
            };
        }
        let value = |bin: usize| f64::from(values[bin]);
        let half = n.div_ceil(2);
        let median = self.bin_at_rank(half);
        let high = self.bin_at_rank(((n as f64) * 0.999).ceil().max(1.0) as u64);
        // MAD: grow a window around the median, always by the nearer side in value,
        // until it holds half the samples.
        let (mut lo, mut hi) = (median, median);
        let mut inside = u64::from(self.count[median]);
        let mut mad = 0.0f64;
        while inside < half {
            let below = lo.checked_sub(1).map(|b| value(median) - value(b));
            let above = (hi + 1 < self.count.len()).then(|| value(hi + 1) - value(median));
            match (below, above) {
                (Some(d), Some(u)) if d <= u => {
                    lo -= 1;
                    inside += u64::from(self.count[lo]);
                    mad = d;
                }
                (_, Some(u)) => {
                    hi += 1;
                    inside += u64::from(self.count[hi]);
                    mad = u;
                }
                (Some(d), None) => {
                    lo -= 1;
                    inside += u64::from(self.count[lo]);
                    mad = d;
                }
                (None, None) => break,
            }
        }
        let signal = value(high) - value(median);
        let threshold = value(median) + 0.5 * signal;
        let bright_from = values[..self.count.len()].partition_point(|&v| f64::from(v) < threshold);
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
            signal,
            noise: MAD_TO_SIGMA * mad,
            clipped_fraction: if bright == 0 {
                0.0
            } else {
                clipped as f64 / bright as f64
            },
        }
    }
}

fn luma_bin_values() -> &'static [f32] {
    static VALUES: OnceLock<Vec<f32>> = OnceLock::new();
    VALUES.get_or_init(|| {
        (0..LUMA_BINS)
            .map(|b| b as f32 / (LUMA_BINS - 1) as f32)
            .collect()
    })
}

#[inline]
fn luma_bin(y: f32) -> usize {
    (((y.clamp(0.0, 1.0) * (LUMA_BINS - 1) as f32) + 0.5) as usize).min(LUMA_BINS - 1)
}

/// Grid step so that about [`TARGET_SAMPLES`] pixels are read (1 on small photos).
fn grid_step(width: usize, height: usize) -> usize {
    (((width * height) as f64 / TARGET_SAMPLES as f64)
        .sqrt()
        .floor() as usize)
        .max(1)
}

/// Sample code type: 8- or 16-bit.
trait Code: Copy + Into<usize> + Sync {
    const CLIP: usize;
    const BINS: usize;
    fn lut() -> &'static [f32];
}

impl Code for u8 {
    const CLIP: usize = CLIP_CODE_8 as usize;
    const BINS: usize = 256;
    fn lut() -> &'static [f32] {
        lut8()
    }
}

impl Code for u16 {
    const CLIP: usize = CLIP_CODE_16 as usize;
    const BINS: usize = 65536;
    fn lut() -> &'static [f32] {
        lut16()
    }
}

/// Histograms (by code for each stored channel, by value for luma when colour) over the
/// grid rows, split into one contiguous part per worker thread.
fn histograms<T: Code>(photo: &Photo, s: &[T], step: usize) -> Vec<Histogram> {
    let (w, spp, nc) = (photo.width(), photo.spp(), photo.channels());
    let grid_rows: Vec<usize> = (step / 2..photo.height()).step_by(step).collect();
    let parts = rayon::current_num_threads().clamp(1, grid_rows.len().max(1));
    let per_part = grid_rows.len().div_ceil(parts).max(1);
    let lut = T::lut();
    let build = |rows: &[usize]| {
        let mut codes: Vec<Vec<u32>> = vec![vec![0; T::BINS]; nc];
        let mut luma = Histogram::new(if nc == 3 { LUMA_BINS } else { 0 });
        for &y in rows {
            for x in (step / 2..w).step_by(step) {
                let i = (y * w + x) * spp;
                if nc == 1 {
                    codes[0][s[i].into()] += 1;
                    continue;
                }
                let px: [usize; 3] = [s[i].into(), s[i + 1].into(), s[i + 2].into()];
                for (hist, &c) in codes.iter_mut().zip(&px) {
                    hist[c] += 1;
                }
                let y_lin = LUMA_WEIGHTS[0] * lut[px[0]]
                    + LUMA_WEIGHTS[1] * lut[px[1]]
                    + LUMA_WEIGHTS[2] * lut[px[2]];
                let bin = luma_bin(y_lin);
                luma.count[bin] += 1;
                luma.clipped[bin] += u32::from(px.iter().any(|&c| c >= T::CLIP));
            }
        }
        let mut out: Vec<Histogram> = codes
            .into_iter()
            .map(|count| {
                // Clipping of a code histogram follows from the code itself.
                let clipped = (0..T::BINS)
                    .map(|b| if b >= T::CLIP { count[b] } else { 0 })
                    .collect();
                Histogram { count, clipped }
            })
            .collect();
        if nc == 3 {
            out.push(luma);
        }
        out
    };
    grid_rows
        .par_chunks(per_part)
        .map(build)
        .reduce_with(|mut a, b| {
            for (x, y) in a.iter_mut().zip(&b) {
                x.merge(y);
            }
            a
        })
        .unwrap_or_else(|| build(&[]))
}

pub(crate) fn choose(photo: &Photo) -> ChannelChoice {
    let step = grid_step(photo.width(), photo.height());
    let (hist, lut) = match photo.samples() {
        Samples::U8(s) => (histograms(photo, s, step), lut8() as &[f32]),
        Samples::U16(s) => (histograms(photo, s, step), lut16()),
    };
    if photo.channels() == 1 {
        return ChannelChoice {
            channel: Channel::Luma,
            reason: "grey photo: its one channel is used as luma".into(),
            stats: vec![hist[0].stats(Channel::Luma, lut)],
        };
    }
    let stats: Vec<ChannelStats> = [Channel::R, Channel::G, Channel::B, Channel::Luma]
        .iter()
        .zip(&hist)
        .map(|(&c, h)| {
            let values = if c == Channel::Luma {
                luma_bin_values()
            } else {
                lut
            };
            h.stats(c, values)
        })
        .collect();
    let (channel, reason) = decide(&stats);
    ChannelChoice {
        channel,
        reason,
        stats,
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
    // The tolerance only absorbs rounding: channels that clip together keep luma.
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
