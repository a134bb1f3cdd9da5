//! The profile plot: a measured intensity profile with the model fitted to it, and below it
//! the residual (measured − model), so that a reader can see whether the model fits. Samples
//! left out of the fit (saturated ones, say) are drawn muted; optional vertical markers
//! (the minima found, say) carry short labels. Text is the overlay's 8×8 bitmap font.
//!
//! Colours are hues of the colour-blind-safe set of Okabe & Ito, "Color Universal Design"
//! (2008; RGB values from memory): blue for the data, vermilion for the model, reddish
//! purple for markers, and the left-out samples in grey, so that the roles also differ in
//! lightness and line style, not in hue alone.

mod axes;
mod data;
mod panel;

use super::RecordError;
use super::overlay::encode_png;
use super::overlay::paint::{OUTLINE, draw_text};
use axes::{Span, nice_step, tick_label, ticks};
use data::{Data, Sample};
use image::{Rgb, RgbImage};
use panel::{
    INK, PAPER, Panel, Swatch, dashed_vline, dots, fit_text, legend, polyline, text_width,
};
use std::path::Path;

const DATA: Rgb<u8> = Rgb([0, 114, 178]);
const MODEL: Rgb<u8> = Rgb([213, 94, 0]);
const MARKER: Rgb<u8> = Rgb([204, 121, 167]);
const LEFT_OUT: Rgb<u8> = Rgb([185, 185, 185]);

/// Smallest plot drawn, px: below this the labels no longer fit.
pub const MIN_SIZE: (u32, u32) = (200, 150);
/// Largest plot drawn, px², so that a mistyped size cannot exhaust memory.
const MAX_PIXELS: u64 = 40_000_000;

/// What the profile plot shows. The four sample slices run in parallel (sample i is
/// `x[i]`, `measured[i]`, `used[i]`, `model[i]`) and must be equally long; non-finite
/// values are left out.
#[derive(Debug, Clone)]
pub struct ProfilePlot<'a> {
    /// The line across the top, e.g. "double slit: d = 0.250 ± 0.004 mm".
    pub title: String,
    /// Label of the x axis with its unit, e.g. "position on screen (mm)".
    pub x_label: String,
    /// Label of the measured values with their unit, e.g. "intensity (a.u.)".
    pub y_label: String,
    /// Sample positions, in the unit of `x_label`.
    pub x: &'a [f64],
    /// Measured values.
    pub measured: &'a [f64],
    /// Whether each sample took part in the fit (false: saturated or otherwise left out).
    pub used: &'a [bool],
    /// The fitted model at each sample.
    pub model: &'a [f64],
    /// Vertical markers at x positions, with short labels such as "-2" or "+1".
    pub markers: Vec<(f64, String)>,
}

/// Where [`attach_plot`] puts the plot.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Side {
    /// To the right of the image, as tall as it.
    Right,
    /// Under the image, as wide as it.
    Below,
}

impl Side {
    /// Under a landscape image, beside a portrait one, so the result stays near square.
    pub fn auto(img: &RgbImage) -> Side {
        if img.width() >= img.height() {
            Side::Below
        } else {
            Side::Right
        }
    }
}

/// Renders the plot as a `width`×`height` image. Unequal slice lengths and sizes below
/// [`MIN_SIZE`] are errors; a profile without a single finite sample gives empty panels
/// that say so.
pub fn render_profile(
    plot: &ProfilePlot,
    width: u32,
    height: u32,
) -> Result<RgbImage, RecordError> {
    let data = Data::new(plot)?;
    let plan = Plan::new(&data, width, height)?;
    let mut img = RgbImage::from_pixel(width, height, PAPER);
    plan.draw(&mut img, &data, plot);
    Ok(img)
}

/// The image with the plot attached on `side`, sized to the image's height (`Right`) or
/// width (`Below`); any corner left over is filled dark like the overlay's label boxes.
pub fn attach_plot(
    img: &RgbImage,
    plot: &ProfilePlot,
    side: Side,
) -> Result<RgbImage, RecordError> {
    let (w, h) = img.dimensions();
    let (pw, ph) = match side {
        Side::Below => {
            let pw = w.max(480);
            (pw, (pw * 9 / 20).clamp(MIN_SIZE.1, 900))
        }
        Side::Right => {
            let ph = h.max(360);
            ((ph * 4 / 3).clamp(MIN_SIZE.0, 1600), ph)
        }
    };
    let p = render_profile(plot, pw, ph)?;
    let (cw, ch, px, py) = match side {
        Side::Below => (w.max(pw), h + ph, 0, h),
        Side::Right => (w + pw, h.max(ph), w, 0),
    };
    let mut out = RgbImage::from_pixel(cw, ch, OUTLINE);
    image::imageops::replace(&mut out, img, 0, 0);
    image::imageops::replace(&mut out, &p, px as i64, py as i64);
    Ok(out)
}

/// Renders the plot and writes it to `path` as PNG, atomically; an existing file is
/// refused unless `force`.
pub fn write_plot(
    path: &Path,
    plot: &ProfilePlot,
    width: u32,
    height: u32,
    force: bool,
) -> Result<(), RecordError> {
    let png = encode_png(&render_profile(plot, width, height)?)?;
    super::atomic::write_atomic(path, &png, force)
}

/// Where everything goes: text scale, rows and the two panels with their ticks.
struct Plan {
    g: u32,
    title_y: i32,
    top: Panel,
    bottom: Panel,
    x_ticks: Vec<(f64, String)>,
    top_ticks: Vec<(f64, String)>,
    bottom_ticks: Vec<(f64, String)>,
    x_label_y: i32,
}

/// Ticks of a `len` px long axis over `span`, at least `spacing_px` apart.
fn axis_ticks(span: Span, len: u32, spacing_px: u32) -> Vec<(f64, String)> {
    let step = nice_step(span.width(), (len / spacing_px.max(1)).max(2) as usize);
    let largest = span.lo.abs().max(span.hi.abs());
    ticks(span, step)
        .into_iter()
        .map(|t| (t, tick_label(t, step, largest)))
        .collect()
}

impl Plan {
    fn new(data: &Data, width: u32, height: u32) -> Result<Plan, RecordError> {
        let (min_w, min_h) = MIN_SIZE;
        if width < min_w || height < min_h || width as u64 * height as u64 > MAX_PIXELS {
            return Err(RecordError::Plot(format!(
                "a {width}×{height} px plot cannot be drawn; give at least {min_w}×{min_h} px \
                 and at most {MAX_PIXELS} px in all"
            )));
        }
        let g = if width.min(height) >= 400 { 2 } else { 1 };
        let (th, pad) = (8 * g as i32, 3 * g as i32);
        let title_y = pad;
        let top_y0 = title_y + th + 2 * pad + th + pad;
        let between = 2 * pad + th + pad;
        let under = 5 * g as i32 + th + 2 * pad + th + pad;
        let avail = height as i32 - top_y0 - between - under;
        let top_h = (avail as f64 * 0.68).round() as u32;
        let bottom_h = (avail - top_h as i32).max(0) as u32;
        let unit = Span { lo: 0.0, hi: 1.0 };
        let (xs, ys) = (data.x.unwrap_or(unit), data.y.unwrap_or(unit));
        let rs = data.residual.unwrap_or(Span { lo: -1.0, hi: 1.0 });
        let top_ticks = axis_ticks(ys, top_h, 2 * th as u32);
        let bottom_ticks = axis_ticks(rs, bottom_h, 2 * th as u32);
        let widest = top_ticks
            .iter()
            .chain(&bottom_ticks)
            .map(|(_, t)| text_width(t, g))
            .max()
            .unwrap_or(0);
        let left = pad + widest + 5 * g as i32 + 1;
        let right = pad + 3 * th;
        let w = width as i32 - left - right;
        if w < 40 || bottom_h < 20 {
            return Err(RecordError::Plot(format!(
                "a {width}×{height} px plot leaves no room for the panels beside their labels; \
                 give a larger size"
            )));
        }
        let w = w as u32;
        // Space the x ticks by their widest label, which depends on the step chosen.
        let mut x_ticks = axis_ticks(xs, w, 6 * th as u32);
        let chars = x_ticks.iter().map(|(_, t)| t.len()).max().unwrap_or(1) as u32;
        if chars + 2 > 6 {
            x_ticks = axis_ticks(xs, w, (chars + 2) * th as u32);
        }
        let top = Panel::new(left, top_y0, w, top_h, xs, ys);
        let bottom_y0 = top_y0 + top_h as i32 + between;
        let bottom = Panel::new(left, bottom_y0, w, bottom_h, xs, rs);
        Ok(Plan {
            g,
            title_y,
            top,
            bottom,
            x_ticks,
            top_ticks,
            bottom_ticks,
            x_label_y: bottom_y0 + bottom_h as i32 + 5 * g as i32 + th + 2 * pad,
        })
    }

    fn draw(&self, img: &mut RgbImage, data: &Data, plot: &ProfilePlot) {
        let g = self.g;
        let (gi, th) = (g as i32, 8 * g as i32);
        let pad = 3 * gi;
        let full = img.width() as i32 - 2 * pad;
        draw_text(
            img,
            pad,
            self.title_y,
            &fit_text(&plot.title, full, g),
            g,
            INK,
        );
        let row = |p: &Panel| p.y0 - pad - th;
        let y_label = fit_text(&plot.y_label, full, g);
        draw_text(img, pad, row(&self.top), &y_label, g, INK);
        let r_label = fit_text("residual: measured - model", full, g);
        draw_text(img, pad, row(&self.bottom), &r_label, g, INK);

        let xt: Vec<f64> = self.x_ticks.iter().map(|t| t.0).collect();
        let values = |ticks: &[(f64, String)]| ticks.iter().map(|t| t.0).collect::<Vec<_>>();
        let markers: Vec<&(f64, String)> = plot
            .markers
            .iter()
            .filter(|(x, _)| data.x.is_some_and(|s| (s.lo..=s.hi).contains(x)))
            .collect();
        let dense = data.samples.len() * 3 > self.top.width() as usize;
        // Dense data is a band that the thinner model line runs inside; sparse data are
        // dots.
        let (data_radius, residual_radius, swatch) = if dense {
            (gi, 1, Swatch::Line(gi))
        } else {
            (gi + 1, gi + 1, Swatch::Dot(gi + 1))
        };
        let model_radius = gi - 1;

        // Top: measured (left-out samples first, muted), then the model over them.
        let mut c = self.top.canvas(&xt, &values(&self.top_ticks));
        for (x, _) in &markers {
            dashed_vline(&mut c, self.top.sx.px(*x), 4.0 * g as f64, MARKER);
        }
        let point = |s: &Sample, v: f64| self.top.at(s.x, v);
        for pass_used in [false, true] {
            let colour = if pass_used { DATA } else { LEFT_OUT };
            if dense {
                for pair in data.samples.windows(2) {
                    let (a, b) = (pair[0], pair[1]);
                    let both = a.used && b.used;
                    if both == pass_used && a.measured.is_finite() && b.measured.is_finite() {
                        polyline(
                            &mut c,
                            &[point(&a, a.measured), point(&b, b.measured)],
                            data_radius,
                            colour,
                        );
                    }
                }
            } else {
                let pts: Vec<[f64; 2]> = data
                    .samples
                    .iter()
                    .filter(|s| s.used == pass_used && s.measured.is_finite())
                    .map(|s| point(s, s.measured))
                    .collect();
                dots(&mut c, &pts, data_radius, colour);
            }
        }
        for run in data.samples.split(|s| !s.model.is_finite()) {
            let pts: Vec<[f64; 2]> = run.iter().map(|s| point(s, s.model)).collect();
            polyline(&mut c, &pts, model_radius, MODEL);
            if pts.len() == 1 {
                dots(&mut c, &pts, gi, MODEL);
            }
        }
        let mut entries = vec![("measured", DATA, swatch)];
        if data
            .samples
            .iter()
            .any(|s| !s.used && s.measured.is_finite())
        {
            entries.push(("clipped or left out", LEFT_OUT, swatch));
        }
        entries.push(("model", MODEL, Swatch::Line(model_radius)));
        if data.samples.is_empty() {
            let note = "no finite samples to plot";
            let x = (c.width() as i32 - text_width(note, g)) / 2;
            let y = c.height() as i32 / 2 - 4 * gi;
            draw_text(&mut c, x, y, note, g, INK);
        } else {
            legend(&mut c, &entries, g);
        }
        self.top.paste(img, &c);
        self.top.label_ticks(img, &self.top_ticks, false, g);

        // Bottom: the residual about its zero line.
        let mut c = self.bottom.canvas(&xt, &values(&self.bottom_ticks));
        for (x, _) in &markers {
            dashed_vline(&mut c, self.bottom.sx.px(*x), 4.0 * g as f64, MARKER);
        }
        let zero = self.bottom.sy.px(0.0);
        let right = c.width() as f64;
        polyline(&mut c, &[[0.0, zero], [right, zero]], 0, INK);
        for pass_used in [false, true] {
            let pts: Vec<[f64; 2]> = data
                .samples
                .iter()
                .filter(|s| s.used == pass_used && s.residual().is_finite())
                .map(|s| self.bottom.at(s.x, s.residual()))
                .collect();
            let colour = if pass_used { DATA } else { LEFT_OUT };
            dots(&mut c, &pts, residual_radius, colour);
        }
        self.bottom.paste(img, &c);
        self.bottom.label_ticks(img, &self.bottom_ticks, false, g);
        self.bottom.label_ticks(img, &self.x_ticks, true, g);

        let x_label = fit_text(&plot.x_label, full, g);
        let x = self.bottom.x0 + (self.bottom.width() as i32 - text_width(&x_label, g)) / 2;
        draw_text(img, x.max(pad), self.x_label_y, &x_label, g, INK);

        // Marker labels in the row above the top panel, each where it does not touch the
        // axis label or an earlier marker label.
        let mut taken = vec![(pad, pad + text_width(&y_label, g))];
        for (x, label) in markers {
            let w = text_width(label, g);
            let at = self.top.x0 + self.top.sx.px(*x).round() as i32 - w / 2;
            let span = (at - gi, at + w + gi);
            let free = taken.iter().all(|t| span.1 <= t.0 || span.0 >= t.1);
            if free && span.0 >= 0 && span.1 <= img.width() as i32 {
                draw_text(img, at, row(&self.top), label, g, MARKER);
                taken.push(span);
            }
        }
    }
}

#[cfg(test)]
mod tests;
