//! The overlay: the features found, drawn on a display copy of the photo so that a
//! technician can see at a glance what was measured. Marks are given in photo pixels and
//! drawn on a preview that the caller has already scaled down. Every coloured stroke sits
//! on a dark outline so that it reads on bright paper and on a dark screen alike; labels
//! are the public-domain 8×8 bitmap font of the `font8x8` crate, scaled up, on a dark box.

pub(crate) mod paint;

use super::RecordError;
use super::text::trim_number;
use image::{ImageEncoder, Rgb, RgbImage};
use paint::{Pen, draw_text, shade, stroke};

/// Something to draw, in photo pixels (x right, y down, centre of the top-left pixel at
/// (0, 0)).
#[derive(Debug, Clone, PartialEq)]
pub enum Mark {
    /// A spot: a ring around it and a label.
    Spot {
        /// Centre, photo px.
        center: [f64; 2],
        /// Ring radius, photo px (drawn at least a few preview px wide).
        radius: f64,
        /// Label, e.g. "m=+1".
        label: String,
    },
    /// A line, e.g. the pattern axis.
    Line {
        /// Start, photo px.
        from: [f64; 2],
        /// End, photo px.
        to: [f64; 2],
    },
    /// A measured stretch (the ruler's), drawn with ticks at both ends.
    Stretch {
        /// Start, photo px.
        from: [f64; 2],
        /// End, photo px.
        to: [f64; 2],
        /// Label, e.g. "ruler 50 mm".
        label: String,
    },
    /// An ellipse, e.g. one fitted to a ring.
    Ellipse {
        /// Centre, photo px.
        center: [f64; 2],
        /// Semi-axis along `angle`, photo px.
        a: f64,
        /// Other semi-axis, photo px.
        b: f64,
        /// Angle of the `a` axis from +x towards +y, rad.
        angle: f64,
        /// Label, e.g. "ring 2 (111)".
        label: String,
    },
    /// A scale bar in the lower left corner, labelled with its length.
    ScaleBar {
        /// Screen millimetres per photo pixel.
        mm_per_px: f64,
        /// Length of the bar, mm.
        length_mm: f64,
    },
    /// A line of text across the top, e.g. the result.
    Caption(String),
}

// Our palette: saturated hues that stay apart from each other and from the red or green
// of a laser spot's core, each drawn on a near-black outline.
const SPOT: Rgb<u8> = Rgb([255, 200, 40]);
const AXIS: Rgb<u8> = Rgb([40, 200, 255]);
const STRETCH: Rgb<u8> = Rgb([255, 96, 196]);
const RING: Rgb<u8> = Rgb([150, 255, 120]);
const PLAIN: Rgb<u8> = Rgb([255, 255, 255]);

/// Draws `marks` on a copy of `preview`; `preview_per_photo_px` is the preview's size over
/// the photo's (0.25 for a photo shrunk four times). Marks with non-finite or nonsensical
/// numbers are left out rather than drawn wrongly.
pub fn render_overlay(preview: &RgbImage, preview_per_photo_px: f64, marks: &[Mark]) -> RgbImage {
    let mut img = preview.clone();
    let f = preview_per_photo_px;
    if !(f.is_finite() && f > 0.0) || img.width() == 0 || img.height() == 0 {
        return img;
    }
    let pen = Pen::for_image(&img);
    // Pixel centres line up: photo pixel x covers preview [x·f, (x+1)·f).
    let map = |p: [f64; 2]| [(p[0] + 0.5) * f - 0.5, (p[1] + 0.5) * f - 0.5];
    let mut caption_row = 0;
    for mark in marks {
        match mark {
            Mark::Spot {
                center,
                radius,
                label,
            } => {
                let c = map(*center);
                let r = (radius * f).max(6.0);
                if finite(&[c[0], c[1], r]) {
                    let ring = ellipse_points(c, r, r, 0.0);
                    stroke(&mut img, &[(&ring, true)], pen, SPOT);
                    let at = [
                        c[0] + r * 0.75 + 3.0,
                        c[1] - r * 0.75 - pen.text_height() as f64,
                    ];
                    label_at(&mut img, at, label, pen, SPOT);
                }
            }
            Mark::Line { from, to } => {
                let (a, b) = (map(*from), map(*to));
                if finite(&[a[0], a[1], b[0], b[1]]) {
                    stroke(&mut img, &[(&[a, b], false)], pen, AXIS);
                }
            }
            Mark::Stretch { from, to, label } => {
                let (a, b) = (map(*from), map(*to));
                if finite(&[a[0], a[1], b[0], b[1]]) {
                    stretch(&mut img, a, b, label, pen);
                }
            }
            Mark::Ellipse {
                center,
                a,
                b,
                angle,
                label,
            } => {
                let c = map(*center);
                let (a, b) = (a * f, b * f);
                if finite(&[c[0], c[1], a, b, *angle]) && a > 0.0 && b > 0.0 {
                    let outline = ellipse_points(c, a, b, *angle);
                    stroke(&mut img, &[(&outline, true)], pen, RING);
                    // Label just outside the ellipse's upper-right-most point.
                    let corner = outline
                        .iter()
                        .copied()
                        .max_by(|p, q| (p[0] - p[1]).total_cmp(&(q[0] - q[1])))
                        .unwrap_or(c);
                    let at = [corner[0] + 3.0, corner[1] - pen.text_height() as f64 - 3.0];
                    label_at(&mut img, at, label, pen, RING);
                }
            }
            Mark::ScaleBar {
                mm_per_px,
                length_mm,
            } => {
                let len = length_mm / mm_per_px * f;
                if finite(&[len]) && len > 0.0 {
                    scale_bar(&mut img, len, *length_mm, pen);
                }
            }
            Mark::Caption(text) => {
                caption(&mut img, caption_row, text, pen);
                caption_row += 1;
            }
        }
    }
    img
}

/// Encodes an image as PNG.
pub fn encode_png(img: &RgbImage) -> Result<Vec<u8>, RecordError> {
    let mut out = Vec::new();
    image::codecs::png::PngEncoder::new(&mut out)
        .write_image(
            img.as_raw(),
            img.width(),
            img.height(),
            image::ExtendedColorType::Rgb8,
        )
        .map_err(|e| RecordError::Encode(e.to_string()))?;
    Ok(out)
}

fn finite(xs: &[f64]) -> bool {
    xs.iter().all(|x| x.is_finite())
}

/// Points around an ellipse, enough for a smooth outline at its size.
fn ellipse_points(c: [f64; 2], a: f64, b: f64, angle: f64) -> Vec<[f64; 2]> {
    let n = ((a.max(b) * std::f64::consts::TAU / 3.0) as usize).clamp(24, 720);
    let (s, co) = angle.sin_cos();
    (0..n)
        .map(|i| {
            let t = i as f64 / n as f64 * std::f64::consts::TAU;
            let (x, y) = (a * t.cos(), b * t.sin());
            [c[0] + x * co - y * s, c[1] + x * s + y * co]
        })
        .collect()
}

fn stretch(img: &mut RgbImage, a: [f64; 2], b: [f64; 2], label: &str, pen: Pen) {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let len = dx.hypot(dy);
    let (nx, ny) = if len > 0.0 {
        (-dy / len, dx / len)
    } else {
        (0.0, 1.0)
    };
    let tick = 4.0 * pen.glyph as f64;
    let tick_at = |p: [f64; 2]| {
        [
            [p[0] - nx * tick, p[1] - ny * tick],
            [p[0] + nx * tick, p[1] + ny * tick],
        ]
    };
    let (ta, tb) = (tick_at(a), tick_at(b));
    stroke(
        img,
        &[(&[a, b], false), (&ta, false), (&tb, false)],
        pen,
        STRETCH,
    );
    // Label beside the middle, on the side away from the normal.
    let mid = [(a[0] + b[0]) / 2.0, (a[1] + b[1]) / 2.0];
    let off = tick + 4.0 + pen.text_height() as f64 / 2.0;
    let at = [
        mid[0] - nx * off - pen.text_width(label) as f64 / 2.0,
        mid[1] - ny * off - pen.text_height() as f64 / 2.0,
    ];
    label_at(img, at, label, pen, STRETCH);
}

fn scale_bar(img: &mut RgbImage, len: f64, length_mm: f64, pen: Pen) {
    let text = format!("{} mm", trim_number(length_mm));
    let g = pen.glyph as f64;
    let margin = 6.0 * g;
    let y = img.height() as f64 - margin;
    let (x0, x1) = (margin, margin + len);
    let tick = 3.0 * g;
    let thick = Pen {
        radius: pen.radius + 1,
        ..pen
    };
    let bar = [[x0, y], [x1, y]];
    let t0 = [[x0, y - tick], [x0, y + tick]];
    let t1 = [[x1, y - tick], [x1, y + tick]];
    stroke(
        img,
        &[(&bar, false), (&t0, false), (&t1, false)],
        thick,
        PLAIN,
    );
    let at = [x0, y - tick - 4.0 - pen.text_height() as f64];
    label_at(img, at, &text, pen, PLAIN);
}

fn caption(img: &mut RgbImage, row: i32, text: &str, pen: Pen) {
    let pad = 2 * pen.glyph as i32;
    let band = pen.text_height() + 2 * pad;
    let top = row * band;
    shade(img, 0, top, img.width() as i32, band);
    let fits = ((img.width() as i32 - 2 * pad) / (8 * pen.glyph as i32)).max(0) as usize;
    let shown: String = text.chars().take(fits).collect();
    draw_text(img, pad, top + pad, &shown, pen.glyph, PLAIN);
}

/// A label on a dark box, moved inside the image where it would stick out.
fn label_at(img: &mut RgbImage, at: [f64; 2], text: &str, pen: Pen, colour: Rgb<u8>) {
    if text.is_empty() || !finite(&at) {
        return;
    }
    let pad = pen.glyph as i32;
    let (w, h) = (pen.text_width(text), pen.text_height());
    let (iw, ih) = (img.width() as i32, img.height() as i32);
    let x = (at[0].round() as i32).clamp(pad, (iw - w - pad).max(pad));
    let y = (at[1].round() as i32).clamp(pad, (ih - h - pad).max(pad));
    shade(img, x - pad, y - pad, w + 2 * pad, h + 2 * pad);
    draw_text(img, x, y, text, pen.glyph, colour);
}

#[cfg(test)]
mod tests;
