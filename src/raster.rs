//! The pixel-access seam between the photo and the measuring stages. `scale` and `find`
//! read pixels only through [`Raster`], so they run the same on a decoded photo's
//! [`Plane`](crate::photo::Plane) and on small synthetic images in tests.

use crate::photo::Plane;

/// A single-channel image in linear light. Pixel centres sit at integer coordinates, the
/// top-left pixel's centre at (0, 0), x to the right and y down.
pub trait Raster: Sync {
    /// Width in pixels.
    fn width(&self) -> usize;
    /// Height in pixels.
    fn height(&self) -> usize;
    /// Linear value at a pixel (caller keeps x < width, y < height).
    fn value(&self, x: usize, y: usize) -> f32;
    /// Whether the pixel is clipped (its value is a lower bound only).
    fn clipped(&self, x: usize, y: usize) -> bool;

    /// Fills `out` (length width) with row `y`.
    fn row_into(&self, y: usize, out: &mut [f32]) {
        for (x, v) in out.iter_mut().enumerate() {
            *v = self.value(x, y);
        }
    }

    /// Adds row `y` into per-block sums of values and counts of clipped pixels, blocks of
    /// `block` pixels from x = 0.
    fn add_block_row(&self, y: usize, block: usize, sums: &mut [f32], clips: &mut [u16]) {
        for (b, (s, c)) in sums.iter_mut().zip(clips.iter_mut()).enumerate() {
            for x in b * block..((b + 1) * block).min(self.width()) {
                *s += self.value(x, y);
                *c += u16::from(self.clipped(x, y));
            }
        }
    }

    /// Bilinear interpolation between pixel centres; None outside the image.
    fn bilinear(&self, x: f64, y: f64) -> Option<f32> {
        let (w, h) = (self.width(), self.height());
        if !(x >= 0.0 && y >= 0.0 && x <= (w - 1) as f64 && y <= (h - 1) as f64) {
            return None;
        }
        let x0 = (x.floor() as usize).min(w.saturating_sub(2));
        let y0 = (y.floor() as usize).min(h.saturating_sub(2));
        let (fx, fy) = ((x - x0 as f64) as f32, (y - y0 as f64) as f32);
        let x1 = (x0 + 1).min(w - 1);
        let y1 = (y0 + 1).min(h - 1);
        let top = self.value(x0, y0) * (1.0 - fx) + self.value(x1, y0) * fx;
        let bottom = self.value(x0, y1) * (1.0 - fx) + self.value(x1, y1) * fx;
        Some(top * (1.0 - fy) + bottom * fy)
    }
}

impl Raster for Plane<'_> {
    fn width(&self) -> usize {
        Plane::width(self)
    }
    fn height(&self) -> usize {
        Plane::height(self)
    }
    fn value(&self, x: usize, y: usize) -> f32 {
        self.get(x, y)
    }
    fn clipped(&self, x: usize, y: usize) -> bool {
        self.saturated(x, y)
    }
    fn row_into(&self, y: usize, out: &mut [f32]) {
        self.row(y, out)
    }
    fn add_block_row(&self, y: usize, block: usize, sums: &mut [f32], clips: &mut [u16]) {
        Plane::add_block_row(self, y, block, sums, clips)
    }
}

/// An owned raster, for synthetic images in tests and for derived planes.
#[derive(Debug, Clone)]
pub struct OwnedRaster {
    width: usize,
    height: usize,
    data: Vec<f32>,
    clip_level: f32,
}

impl OwnedRaster {
    /// A raster from row-major values; values at or above `clip_level` count as clipped.
    pub fn new(width: usize, height: usize, data: Vec<f32>, clip_level: f32) -> Option<Self> {
        (data.len() == width * height && width >= 2 && height >= 2).then_some(OwnedRaster {
            width,
            height,
            data,
            clip_level,
        })
    }

    /// A raster evaluated from a function of the pixel centre.
    pub fn from_fn(width: usize, height: usize, f: impl Fn(f64, f64) -> f32) -> Self {
        let data = (0..width * height)
            .map(|i| f((i % width) as f64, (i / width) as f64))
            .collect();
        OwnedRaster {
            width,
            height,
            data,
            clip_level: f32::INFINITY,
        }
    }

    /// Sets the level at and above which a value counts as clipped, clipping the data.
    pub fn with_clip(mut self, level: f32) -> Self {
        self.clip_level = level;
        for v in &mut self.data {
            *v = v.min(level);
        }
        self
    }
}

impl Raster for OwnedRaster {
    fn width(&self) -> usize {
        self.width
    }
    fn height(&self) -> usize {
        self.height
    }
    fn value(&self, x: usize, y: usize) -> f32 {
        self.data[y * self.width + x]
    }
    fn clipped(&self, x: usize, y: usize) -> bool {
        self.data[y * self.width + x] >= self.clip_level
    }
    fn row_into(&self, y: usize, out: &mut [f32]) {
        out.copy_from_slice(&self.data[y * self.width..(y + 1) * self.width]);
    }
}
