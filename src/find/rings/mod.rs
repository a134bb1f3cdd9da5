//! Ring patterns (pinholes, particle halos, electron rings): the centre and the radial
//! profile. The centre starts from the radial-symmetry method ([`symmetry`]) on the
//! coarse block map around the brightest region, and is refined in screen millimetres by
//! sharpening the radial profile ([`centre`]); the profile itself is a sector × radius
//! table filled in one pass through the screen map ([`radial`]).

pub mod centre;
pub mod radial;
pub mod symmetry;

pub use centre::{Annulus, RingCentre, refine_centre};
pub use radial::{RadialCells, RadialOptions, RadialProfile};

use super::FindError;
use super::blobs::{CoarseMap, find_blobs};
use nalgebra::Vector2;
use symmetry::{Grid, radial_symmetry_centre};

/// A first estimate of a ring pattern's centre, px: the radial-symmetry centre of the
/// coarse map's gradients within `reach` (a share of the frame's larger side) of the
/// brightest region, clipped blocks left out. Errors when the frame holds no bright
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
