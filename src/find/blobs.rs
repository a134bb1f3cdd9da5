//! Bright blobs on a coarse block-mean map. One parallel pass over the photo builds the
//! map (so a 12-megapixel photo is read once), a tiled median gives the smooth room
//! background, and connected regions above a robust noise threshold become candidates
//! that later stages refine at full resolution.

use crate::raster::Raster;
use nalgebra::Vector2;
use rayon::prelude::*;

/// A candidate bright region, in full-resolution photo pixels.
#[derive(Debug, Clone, PartialEq)]
pub struct Blob {
    /// Flux-weighted centroid, px.
    pub centroid: Vector2<f64>,
    /// Brightest coarse block's background-subtracted value.
    pub peak: f64,
    /// Background-subtracted sum over the region (block means × block area).
    pub flux: f64,
    /// Bounding box (x0, y0, x1, y1) in px, inclusive.
    pub bbox: (usize, usize, usize, usize),
    /// RMS radius of the region, px.
    pub radius_px: f64,
    /// Fraction of the region's pixels that are clipped.
    pub clipped_fraction: f64,
}

/// The coarse map and its statistics.
#[derive(Debug, Clone)]
pub struct CoarseMap {
    /// Block size in px.
    pub block: usize,
    /// Map width and height in blocks.
    pub size: (usize, usize),
    /// Block means.
    pub mean: Vec<f32>,
    /// Clipped pixels per block.
    pub clipped: Vec<u16>,
    /// Smooth background per block.
    pub background: Vec<f32>,
    /// Robust standard deviation of block means about the background.
    pub noise: f64,
}

/// Block size that keeps the coarse map near 800 blocks across.
pub fn block_size_for(width: usize, height: usize) -> usize {
    (width.max(height) / 800).clamp(1, 16)
}

/// Builds the coarse map: block means and clipped counts in one parallel pass.
pub fn coarse_map(raster: &dyn Raster, block: usize) -> CoarseMap {
    let (w, h) = (raster.width(), raster.height());
    let (bw, bh) = (w / block, h / block);
    let rows: Vec<(Vec<f32>, Vec<u16>)> = (0..bh)
        .into_par_iter()
        .map(|by| {
            let mut sums = vec![0f32; bw];
            let mut clips = vec![0u16; bw];
            for y in by * block..(by + 1) * block {
                raster.add_block_row(y, block, &mut sums, &mut clips);
            }
            let area = (block * block) as f32;
            sums.iter_mut().for_each(|s| *s /= area);
            (sums, clips)
        })
        .collect();
    let mut mean = Vec::with_capacity(bw * bh);
    let mut clipped = Vec::with_capacity(bw * bh);
    for (m, c) in rows {
        mean.extend(m);
        clipped.extend(c);
    }
    let background = tiled_median_background(&mean, bw, bh);
    // The noise is a median over the frame: every 7th block (a stride prime to any
    // frame width in blocks that matters) estimates it as well as all of them do.
    let mut dev: Vec<f32> = mean
        .iter()
        .zip(&background)
        .step_by(if mean.len() > 70_000 { 7 } else { 1 })
        .map(|(m, b)| (m - b).abs())
        .collect();
    let mid = dev.len() / 2;
    let noise = if dev.is_empty() {
        0.0
    } else {
        dev.select_nth_unstable_by(mid, f32::total_cmp);
        1.4826 * dev[mid] as f64
    };
    CoarseMap {
        block,
        size: (bw, bh),
        mean,
        clipped,
        background,
        noise,
    }
}

/// Background as the median of tiles about 1/12 of the frame, bilinearly interpolated
/// between tile centres. A median ignores spots that cover less than half a tile.
fn tiled_median_background(mean: &[f32], bw: usize, bh: usize) -> Vec<f32> {
    if bw == 0 || bh == 0 {
        return Vec::new();
    }
    let tile = (bw.max(bh) / 12).max(4);
    let (tx, ty) = (bw.div_ceil(tile), bh.div_ceil(tile));
    let mut medians = vec![0f32; tx * ty];
    let mut buf = Vec::with_capacity(tile * tile);
    for j in 0..ty {
        for i in 0..tx {
            buf.clear();
            for y in j * tile..((j + 1) * tile).min(bh) {
                buf.extend_from_slice(&mean[y * bw + i * tile..y * bw + ((i + 1) * tile).min(bw)]);
            }
            let mid = buf.len() / 2;
            buf.select_nth_unstable_by(mid, f32::total_cmp);
            medians[j * tx + i] = buf[mid];
        }
    }
    // Column weights once: the same for every row.
    let columns: Vec<(usize, usize, f32)> = (0..bw)
        .map(|x| {
            let fx = ((x as f32 + 0.5) / tile as f32 - 0.5).clamp(0.0, (tx - 1) as f32);
            let i0 = (fx.floor() as usize).min(tx.saturating_sub(2));
            (i0, (i0 + 1).min(tx - 1), fx - i0 as f32)
        })
        .collect();
    let mut out = vec![0f32; bw * bh];
    for (y, row) in out.chunks_exact_mut(bw).enumerate() {
        let fy = ((y as f32 + 0.5) / tile as f32 - 0.5).clamp(0.0, (ty - 1) as f32);
        let j0 = (fy.floor() as usize).min(ty.saturating_sub(2));
        let j1 = (j0 + 1).min(ty - 1);
        let ay = fy - j0 as f32;
        let (m0, m1) = (
            &medians[j0 * tx..(j0 + 1) * tx],
            &medians[j1 * tx..(j1 + 1) * tx],
        );
        for (o, &(i0, i1, ax)) in row.iter_mut().zip(&columns) {
            let top = m0[i0] * (1.0 - ax) + m0[i1] * ax;
            let bot = m1[i0] * (1.0 - ax) + m1[i1] * ax;
            *o = top * (1.0 - ay) + bot * ay;
        }
    }
    out
}

/// Connected regions (8-neighbour) above `background + threshold_sigma·noise`, largest
/// flux first, at most `max_blobs`.
pub fn find_blobs(map: &CoarseMap, threshold_sigma: f64, max_blobs: usize) -> Vec<Blob> {
    let (bw, bh) = map.size;
    // A relative floor too: without it a noiseless frame would turn the background
    // model's small errors at the frame edge into blobs.
    let range = map
        .mean
        .iter()
        .zip(&map.background)
        .map(|(m, b)| m - b)
        .fold(0f32, f32::max) as f64;
    let floor = (threshold_sigma * map.noise).max(0.005 * range).max(1e-4) as f32;
    let above: Vec<bool> = map
        .mean
        .iter()
        .zip(&map.background)
        .map(|(m, b)| m - b > floor)
        .collect();
    let mut label = vec![u32::MAX; bw * bh];
    let mut blobs = Vec::new();
    let mut stack = Vec::new();
    let b = map.block as f64;
    for start in 0..bw * bh {
        if !above[start] || label[start] != u32::MAX {
            continue;
        }
        let id = blobs.len() as u32;
        label[start] = id;
        stack.push(start);
        let (mut sw, mut sx, mut sy, mut sxx, mut syy) = (0.0, 0.0, 0.0, 0.0, 0.0);
        let (mut peak, mut clip, mut count) = (0f64, 0usize, 0usize);
        let (mut x0, mut y0, mut x1, mut y1) = (usize::MAX, usize::MAX, 0, 0);
        while let Some(i) = stack.pop() {
            let (x, y) = (i % bw, i / bw);
            let v = (map.mean[i] - map.background[i]) as f64;
            let (cx, cy) = ((x as f64 + 0.5) * b - 0.5, (y as f64 + 0.5) * b - 0.5);
            sw += v;
            sx += v * cx;
            sy += v * cy;
            sxx += v * cx * cx;
            syy += v * cy * cy;
            peak = peak.max(v);
            clip += map.clipped[i] as usize;
            count += 1;
            x0 = x0.min(x);
            y0 = y0.min(y);
            x1 = x1.max(x);
            y1 = y1.max(y);
            for dy in -1i64..=1 {
                for dx in -1i64..=1 {
                    let (nx, ny) = (x as i64 + dx, y as i64 + dy);
                    if nx < 0 || ny < 0 || nx >= bw as i64 || ny >= bh as i64 {
                        continue;
                    }
                    let j = ny as usize * bw + nx as usize;
                    if above[j] && label[j] == u32::MAX {
                        label[j] = id;
                        stack.push(j);
                    }
                }
            }
        }
        let (mx, my) = (sx / sw, sy / sw);
        let var = ((sxx / sw - mx * mx) + (syy / sw - my * my)).max(0.0);
        blobs.push(Blob {
            centroid: Vector2::new(mx, my),
            peak,
            flux: sw * b * b,
            bbox: (
                x0 * map.block,
                y0 * map.block,
                ((x1 + 1) * map.block).saturating_sub(1),
                ((y1 + 1) * map.block).saturating_sub(1),
            ),
            radius_px: var.sqrt().max(0.5 * b),
            clipped_fraction: clip as f64 / (count * map.block * map.block) as f64,
        });
    }
    blobs.sort_by(|a, b| b.flux.total_cmp(&a.flux));
    blobs.truncate(max_blobs);
    blobs
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::OwnedRaster;

    #[test]
    fn two_spots_on_a_gradient_are_found_in_flux_order() {
        let img = OwnedRaster::from_fn(640, 480, |x, y| {
            let g = |cx: f64, cy: f64, s: f64, a: f64| {
                a * (-((x - cx).powi(2) + (y - cy).powi(2)) / (2.0 * s * s)).exp()
            };
            (0.05 + 0.1 * x / 640.0 + g(200.0, 240.0, 6.0, 0.9) + g(420.5, 250.0, 4.0, 0.3)) as f32
        });
        let map = coarse_map(&img, 2);
        let blobs = find_blobs(&map, 8.0, 10);
        assert_eq!(blobs.len(), 2, "{blobs:?}");
        assert!((blobs[0].centroid - Vector2::new(200.0, 240.0)).norm() < 1.0);
        assert!((blobs[1].centroid - Vector2::new(420.5, 250.0)).norm() < 1.0);
        assert!(blobs[0].flux > blobs[1].flux);
    }

    #[test]
    fn flat_frame_has_no_blobs() {
        let img = OwnedRaster::from_fn(320, 240, |_, _| 0.3);
        let map = coarse_map(&img, 2);
        assert!(find_blobs(&map, 8.0, 10).is_empty());
    }
}
