//! One panel of the profile plot: a white canvas of its own, so that whatever is drawn on
//! it is clipped to the frame, pasted into the plot once drawn. Lines, dots and text are the
//! overlay's painters.

use super::axes::{Scale, Span};
use crate::record::overlay::paint::{draw_text, thick_segment};
use image::{Rgb, RgbImage};

pub(crate) const PAPER: Rgb<u8> = Rgb([255, 255, 255]);
pub(crate) const INK: Rgb<u8> = Rgb([25, 25, 25]);
pub(crate) const FRAME: Rgb<u8> = Rgb([90, 90, 90]);
const GRID: Rgb<u8> = Rgb([226, 226, 226]);

/// A panel's place in the plot and its value-to-pixel scales.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Panel {
    /// Top-left pixel of the canvas in the plot.
    pub(crate) x0: i32,
    pub(crate) y0: i32,
    pub(crate) sx: Scale,
    pub(crate) sy: Scale,
}

impl Panel {
    pub(crate) fn new(x0: i32, y0: i32, w: u32, h: u32, xs: Span, ys: Span) -> Panel {
        Panel {
            x0,
            y0,
            sx: Scale {
                span: xs,
                len: w,
                flip: false,
            },
            sy: Scale {
                span: ys,
                len: h,
                flip: true,
            },
        }
    }

    pub(crate) fn width(&self) -> u32 {
        self.sx.len
    }

    pub(crate) fn height(&self) -> u32 {
        self.sy.len
    }

    /// Canvas pixel of the value pair (x, y).
    pub(crate) fn at(&self, x: f64, y: f64) -> [f64; 2] {
        [self.sx.px(x), self.sy.px(y)]
    }

    /// A blank canvas with grid lines at the ticks.
    pub(crate) fn canvas(&self, x_ticks: &[f64], y_ticks: &[f64]) -> RgbImage {
        let (w, h) = (self.width(), self.height());
        let mut c = RgbImage::from_pixel(w, h, PAPER);
        for &t in x_ticks {
            let x = self.sx.px(t);
            thick_segment(&mut c, [x, 0.0], [x, h as f64], 0, GRID);
        }
        for &t in y_ticks {
            let y = self.sy.px(t);
            thick_segment(&mut c, [0.0, y], [w as f64, y], 0, GRID);
        }
        c
    }

    /// Pastes the canvas into the plot and frames it.
    pub(crate) fn paste(&self, img: &mut RgbImage, canvas: &RgbImage) {
        image::imageops::replace(img, canvas, self.x0 as i64, self.y0 as i64);
        let (l, t) = (self.x0 as f64 - 1.0, self.y0 as f64 - 1.0);
        let (r, b) = (
            l + self.width() as f64 + 1.0,
            t + self.height() as f64 + 1.0,
        );
        let corners = [[l, t], [r, t], [r, b], [l, b], [l, t]];
        for pair in corners.windows(2) {
            thick_segment(img, pair[0], pair[1], 0, FRAME);
        }
    }

    /// Tick marks and labels: below the panel for `x`, left of it for `y`.
    pub(crate) fn label_ticks(
        &self,
        img: &mut RgbImage,
        ticks: &[(f64, String)],
        x_axis: bool,
        g: u32,
    ) {
        let len = 3.0 * g as f64;
        for (t, text) in ticks {
            let tw = text_width(text, g);
            if x_axis {
                let x = self.x0 as f64 + self.sx.px(*t);
                let y = (self.y0 + self.height() as i32) as f64;
                thick_segment(img, [x, y], [x, y + len], 0, FRAME);
                let ty = (y + len) as i32 + 2 * g as i32;
                draw_text(img, x.round() as i32 - tw / 2, ty, text, g, INK);
            } else {
                let x = self.x0 as f64 - 1.0;
                let y = self.y0 as f64 + self.sy.px(*t);
                thick_segment(img, [x - len, y], [x, y], 0, FRAME);
                let tx = (x - len) as i32 - g as i32 * 2 - tw;
                draw_text(img, tx, y.round() as i32 - 4 * g as i32, text, g, INK);
            }
        }
    }
}

/// Width of `text` in the 8×8 font at scale `g`, px.
pub(crate) fn text_width(text: &str, g: u32) -> i32 {
    8 * g as i32 * text.chars().count() as i32
}

/// `text` cut to what fits in `px` pixels at scale `g`.
pub(crate) fn fit_text(text: &str, px: i32, g: u32) -> String {
    let n = (px / (8 * g as i32)).max(0) as usize;
    text.chars().take(n).collect()
}

/// Joins consecutive points of each run, `radius` px thick.
pub(crate) fn polyline(c: &mut RgbImage, pts: &[[f64; 2]], radius: i32, colour: Rgb<u8>) {
    for pair in pts.windows(2) {
        thick_segment(c, pair[0], pair[1], radius, colour);
    }
}

/// A dot of `radius` px at each point.
pub(crate) fn dots(c: &mut RgbImage, pts: &[[f64; 2]], radius: i32, colour: Rgb<u8>) {
    for p in pts {
        thick_segment(c, *p, *p, radius, colour);
    }
}

/// A dashed vertical line at canvas column `x`.
pub(crate) fn dashed_vline(c: &mut RgbImage, x: f64, dash: f64, colour: Rgb<u8>) {
    let h = c.height() as f64;
    let mut y = 0.0;
    while y < h {
        thick_segment(c, [x, y], [x, (y + dash).min(h)], 0, colour);
        y += dash * 1.75;
    }
}

/// How a legend entry's sample is drawn.
#[derive(Clone, Copy, PartialEq)]
pub(crate) enum Swatch {
    Line(i32),
    Dot(i32),
}

/// A small legend in the canvas's top-right corner, on a framed white box.
pub(crate) fn legend(c: &mut RgbImage, entries: &[(&str, Rgb<u8>, Swatch)], g: u32) {
    let gi = g as i32;
    let (pad, row, sample) = (3 * gi, 8 * gi + 3 * gi, 14 * gi);
    let text_w = entries
        .iter()
        .map(|(t, ..)| text_width(t, g))
        .max()
        .unwrap_or(0);
    let (w, h) = (
        pad + sample + pad + text_w + pad,
        pad + row * entries.len() as i32,
    );
    let (x, y) = (c.width() as i32 - w - 2 * pad, 2 * pad);
    if x < 0 || y + h > c.height() as i32 {
        return;
    }
    for yy in y..y + h {
        for xx in x..x + w {
            c.put_pixel(xx as u32, yy as u32, PAPER);
        }
    }
    let (l, t, r, b) = (x as f64, y as f64, (x + w - 1) as f64, (y + h - 1) as f64);
    polyline(c, &[[l, t], [r, t], [r, b], [l, b], [l, t]], 0, FRAME);
    for (i, (text, colour, swatch)) in entries.iter().enumerate() {
        let top = y + pad + i as i32 * row;
        let mid = (top + 4 * gi) as f64;
        let (s0, s1) = ((x + pad) as f64, (x + pad + sample) as f64);
        match swatch {
            Swatch::Line(radius) => thick_segment(c, [s0, mid], [s1, mid], *radius, *colour),
            Swatch::Dot(radius) => {
                let n = 3;
                let pts: Vec<[f64; 2]> = (0..n)
                    .map(|k| [s0 + (s1 - s0) * (k as f64 + 0.5) / n as f64, mid])
                    .collect();
                dots(c, &pts, *radius, *colour);
            }
        }
        draw_text(c, x + 2 * pad + sample, top, text, g, INK);
    }
}
