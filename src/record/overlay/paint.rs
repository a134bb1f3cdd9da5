//! Drawing primitives for the overlay: thick outlined polylines clipped to the image
//! (Liang–Barsky), darkened boxes, and text in the 8×8 bitmap font of `font8x8`.

use image::{Rgb, RgbImage};
use imageproc::drawing::draw_line_segment_mut;

/// The near-black outline under every coloured stroke.
pub(crate) const OUTLINE: Rgb<u8> = Rgb([14, 16, 20]);

/// Sizes that follow the preview's size.
#[derive(Clone, Copy)]
pub(crate) struct Pen {
    /// Stroke radius, px (0 draws a 1 px line).
    pub(crate) radius: i32,
    /// Glyph scale: each font pixel becomes a `glyph`×`glyph` block.
    pub(crate) glyph: u32,
}

impl Pen {
    pub(crate) fn for_image(img: &RgbImage) -> Pen {
        let short = img.width().min(img.height());
        Pen {
            radius: match short {
                0..500 => 0,
                500..1400 => 1,
                _ => 2,
            },
            glyph: if short >= 900 { 3 } else { 2 },
        }
    }
    pub(crate) fn text_height(self) -> i32 {
        8 * self.glyph as i32
    }
    pub(crate) fn text_width(self, text: &str) -> i32 {
        8 * self.glyph as i32 * text.chars().count() as i32
    }
}

/// Draws polylines (each closed or not) of one mark: the dark outline of all of them
/// first, then the colour on top, so that no outline cuts through the mark's own colour.
pub(crate) fn stroke(img: &mut RgbImage, paths: &[(&[[f64; 2]], bool)], pen: Pen, colour: Rgb<u8>) {
    for (radius, c) in [(pen.radius + 1, OUTLINE), (pen.radius, colour)] {
        for (pts, closed) in paths {
            let n = pts.len();
            let segments = if *closed { n } else { n.saturating_sub(1) };
            for i in 0..segments {
                if let (Some(a), Some(b)) = (pts.get(i), pts.get((i + 1) % n)) {
                    thick_segment(img, *a, *b, radius, c);
                }
            }
        }
    }
}

/// A segment `radius` px thick, clipped to the image first so that far-off points cost
/// nothing.
pub(crate) fn thick_segment(img: &mut RgbImage, a: [f64; 2], b: [f64; 2], radius: i32, c: Rgb<u8>) {
    let margin = radius as f64 + 2.0;
    let Some((a, b)) = clip_segment(a, b, img.width() as f64, img.height() as f64, margin) else {
        return;
    };
    // imageproc's Bresenham truncates towards zero; rounding first puts each end on its
    // nearest pixel centre.
    let (a, b) = ([a[0].round(), a[1].round()], [b[0].round(), b[1].round()]);
    for dy in -radius..=radius {
        for dx in -radius..=radius {
            if dx * dx + dy * dy <= radius * radius + radius {
                let (ox, oy) = (dx as f64, dy as f64);
                draw_line_segment_mut(
                    img,
                    ((a[0] + ox) as f32, (a[1] + oy) as f32),
                    ((b[0] + ox) as f32, (b[1] + oy) as f32),
                    c,
                );
            }
        }
    }
}

/// Liang–Barsky clipping of a segment to the image grown by `margin`.
fn clip_segment(
    a: [f64; 2],
    b: [f64; 2],
    w: f64,
    h: f64,
    margin: f64,
) -> Option<([f64; 2], [f64; 2])> {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    let edges = [
        (-dx, a[0] + margin),
        (dx, w - 1.0 + margin - a[0]),
        (-dy, a[1] + margin),
        (dy, h - 1.0 + margin - a[1]),
    ];
    for (p, q) in edges {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    (t0 <= t1).then(|| {
        (
            [a[0] + t0 * dx, a[1] + t0 * dy],
            [a[0] + t1 * dx, a[1] + t1 * dy],
        )
    })
}

/// Darkens a rectangle to 35 % so that text on it reads on any photo.
pub(crate) fn shade(img: &mut RgbImage, x: i32, y: i32, w: i32, h: i32) {
    let (iw, ih) = (img.width() as i32, img.height() as i32);
    for yy in y.max(0)..(y + h).min(ih) {
        for xx in x.max(0)..(x + w).min(iw) {
            let p = img.get_pixel_mut(xx as u32, yy as u32);
            for (ch, o) in p.0.iter_mut().zip(OUTLINE.0) {
                *ch = ((*ch as u32 * 35 + o as u32 * 65) / 100) as u8;
            }
        }
    }
}

/// The 8×8 glyph of a character: ASCII, Latin-1 (for ±, µ, °) and Greek (θ, λ); others
/// show as '?'.
pub(crate) fn glyph(c: char) -> [u8; 8] {
    use font8x8::legacy::{BASIC_LEGACY, GREEK_LEGACY, LATIN_LEGACY};
    let code = c as usize;
    let found = match code {
        0..=0x7F => BASIC_LEGACY.get(code),
        0xA0..=0xFF => LATIN_LEGACY.get(code - 0xA0),
        0x390..=0x3C9 => GREEK_LEGACY.get(code - 0x390),
        _ => None,
    };
    found.copied().unwrap_or(BASIC_LEGACY[b'?' as usize])
}

/// Draws text with its top-left corner at (x, y); bit 0 of each glyph row is the leftmost
/// pixel.
pub(crate) fn draw_text(
    img: &mut RgbImage,
    x: i32,
    y: i32,
    text: &str,
    scale: u32,
    colour: Rgb<u8>,
) {
    let s = scale as i32;
    let (iw, ih) = (img.width() as i32, img.height() as i32);
    for (i, c) in text.chars().enumerate() {
        let gx = x + i as i32 * 8 * s;
        if gx >= iw {
            break;
        }
        for (row, bits) in glyph(c).iter().enumerate() {
            for col in 0..8 {
                if bits >> col & 1 == 0 {
                    continue;
                }
                for dy in 0..s {
                    for dx in 0..s {
                        let (px, py) = (gx + col * s + dx, y + row as i32 * s + dy);
                        if (0..iw).contains(&px) && (0..ih).contains(&py) {
                            img.put_pixel(px as u32, py as u32, colour);
                        }
                    }
                }
            }
        }
    }
}
