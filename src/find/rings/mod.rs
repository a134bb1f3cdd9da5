//! Ring patterns (pinholes, particle halos, electron rings): the centre and the radial
//! profile. The centre starts from the radial-symmetry method ([`symmetry`]) on the
//! coarse block map around the brightest region, and is refined in screen millimetres by
//! sharpening the radial profile ([`centre`]); the profile itself is a sector × radius
//! table filled in one pass through the screen map ([`radial`]).

pub mod centre;
pub mod glow;
pub mod peaks;
pub mod radial;
pub mod ridge;
pub mod symmetry;

pub use centre::{Annulus, RingCentre, refine_centre};
pub use radial::{RadialCells, RadialOptions, RadialProfile};

use super::FindError;
use super::blobs::{CoarseMap, find_blobs};
use nalgebra::Vector2;
use symmetry::{Grid, radial_symmetry_centre};

/// A first estimate of a ring pattern's centre, px: the radial-symmetry centre of the
/// coarse map's gradients within `reach` (a share of the frame's larger side) of the
/// brightest region, clipped blocks left out; or, where the region has an overexposed
/// core, the centroid of that core. Errors when the frame holds no bright
/// region or the gradients do not fix a centre.
pub fn start_centre(map: &CoarseMap, reach: f64) -> Result<Vector2<f64>, FindError> {
    let blob = find_blobs(map, 8.0, 1).into_iter().next().ok_or_else(|| {
        FindError::NoPattern(
            "nothing in the photo stands out from the background: no ring pattern, or the \
             beam was off"
                .into(),
        )
    })?;
    let (bw, bh) = map.size;
    let b = map.block as f64;
    let to_grid = |px: f64| (px - 0.5 * (b - 1.0)) / b;
    let near = Vector2::new(to_grid(blob.centroid.x), to_grid(blob.centroid.y));
    // An overexposed core is round however speckled, and nothing else in the frame moves
    // its centroid; a ruler's ticks and edges can pull the gradient lines, so where there
    // is a core its centroid is the start, and the gradients serve only without one.
    if let Some(core) = clipped_centroid(map, near, 2.0 * blob.radius_px / b + 2.0) {
        return Ok(core * b + Vector2::repeat(0.5 * (b - 1.0)));
    }
    let skip: Vec<bool> = map.clipped.iter().map(|&c| c > 0).collect();
    let grid = Grid {
        values: &map.mean,
        skip: &skip,
        size: (bw, bh),
    };
    let radius = reach * bw.max(bh) as f64;
    let c = radial_symmetry_centre(&grid, Some(near), radius).ok_or_else(|| {
        FindError::NoPattern(
            "the bright region has no ring structure around it: its gradients point nowhere \
             in common"
                .into(),
        )
    })?;
    Ok(c * b + Vector2::repeat(0.5 * (b - 1.0)))
}

/// Centroid (grid cells) of the clipped blocks within `radius` cells of `near`, re-centred
/// and the radius set to twice the blocks' RMS spread until it settles. None without any.
fn clipped_centroid(map: &CoarseMap, near: Vector2<f64>, radius: f64) -> Option<Vector2<f64>> {
    let (bw, _) = map.size;
    let full = map.block * map.block;
    let cells: Vec<Vector2<f64>> = map
        .clipped
        .iter()
        .enumerate()
        .filter(|(_, c)| usize::from(**c) * 2 >= full)
        .map(|(i, _)| Vector2::new((i % bw) as f64, (i / bw) as f64))
        .collect();
    let (mut c, mut r) = (near, radius);
    for _ in 0..10 {
        let inside: Vec<&Vector2<f64>> = cells.iter().filter(|p| (*p - c).norm() <= r).collect();
        if inside.is_empty() {
            return None;
        }
        let n = inside.len() as f64;
        let next = inside.iter().copied().sum::<Vector2<f64>>() / n;
        let spread = (inside
            .iter()
            .map(|p| (*p - next).norm_squared())
            .sum::<f64>()
            / n)
            .sqrt();
        let moved = (next - c).norm();
        c = next;
        r = (2.0 * spread).max(2.0);
        if moved < 0.01 {
            break;
        }
    }
    Some(c)
}

/// Radius (px) of the overexposed centre about `centre_px`: where, going outwards in
/// rings one block wide, fewer than half the blocks are mostly clipped. 0 if the centre
/// block is not clipped.
pub fn core_radius_px(map: &CoarseMap, centre_px: Vector2<f64>) -> f64 {
    let (bw, bh) = map.size;
    let b = map.block as f64;
    let full = map.block * map.block;
    let c = (centre_px - Vector2::repeat(0.5 * (b - 1.0))) / b;
    let max_r = bw.max(bh);
    let (mut total, mut clipped) = (vec![0usize; max_r + 1], vec![0usize; max_r + 1]);
    for (i, &n) in map.clipped.iter().enumerate() {
        let p = Vector2::new((i % bw) as f64, (i / bw) as f64);
        let k = (p - c).norm().round() as usize;
        if k <= max_r {
            total[k] += 1;
            if usize::from(n) * 2 >= full {
                clipped[k] += 1;
            }
        }
    }
    let edge = (0..=max_r).find(|&k| total[k] > 0 && clipped[k] * 2 < total[k]);
    match edge {
        Some(0) | None => 0.0,
        Some(k) => (k as f64 + 0.5) * b,
    }
}
