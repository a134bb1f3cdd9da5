//! The centre of a radially symmetric pattern by the radial-symmetry method of
//! Parthasarathy (Nat. Methods 9:724, 2012): every intensity gradient of a symmetric
//! pattern points at its centre, so the centre is the point closest, in weighted least
//! squares, to all the lines through the gradient samples along their gradients. It
//! needs no model of the rings and no threshold, which makes it a sound start for the
//! finer refinement that follows; it runs on the coarse block map.

use nalgebra::{Matrix2, Vector2};

/// A small grid of values with cells to leave out (clipped cells, whose gradients say
/// nothing about the pattern).
pub struct Grid<'a> {
    /// Values, row-major.
    pub values: &'a [f32],
    /// Cells to skip, row-major, the same length as `values`.
    pub skip: &'a [bool],
    /// Width and height in cells.
    pub size: (usize, usize),
}

/// The radial-symmetry centre in grid coordinates (cell centres at integers), using the
/// gradients within `radius` cells of `near` (the whole grid if None), starting from
/// `near`. Each pass weights a gradient by |∇I|²/distance from the last centre, as the
/// method prescribes, so that the far field's stray gradients count less, and later
/// passes also by how far its line misses that centre. None where the
/// gradients do not fix a point (a flat or one-dimensional pattern).
pub fn radial_symmetry_centre(
    grid: &Grid,
    near: Option<Vector2<f64>>,
    radius: f64,
) -> Option<Vector2<f64>> {
    let (w, h) = grid.size;
    if w < 3 || h < 3 || grid.values.len() != w * h || grid.skip.len() != w * h {
        return None;
    }
    // Gradients on the midpoints of 2 × 2 cells, smoothed by averaging the two diagonal
    // differences as the method's Roberts cross does.
    let mut samples: Vec<(Vector2<f64>, Vector2<f64>)> = Vec::new();
    for y in 0..h - 1 {
        for x in 0..w - 1 {
            let i = y * w + x;
            let idx = [i, i + 1, i + w, i + w + 1];
            if idx.iter().any(|&k| grid.skip[k]) {
                continue;
            }
            let [a, b, c, d] = idx.map(|k| grid.values[k] as f64);
            let g = Vector2::new(0.5 * ((b + d) - (a + c)), 0.5 * ((c + d) - (a + b)));
            if g.norm_squared() > 0.0 {
                samples.push((Vector2::new(x as f64 + 0.5, y as f64 + 0.5), g));
            }
        }
    }
    let within =
        |p: &Vector2<f64>, c: Option<Vector2<f64>>| c.is_none_or(|c| (p - c).norm() <= radius);
    let chosen: Vec<&(Vector2<f64>, Vector2<f64>)> =
        samples.iter().filter(|(p, _)| within(p, near)).collect();
    // The start: `near` where given, else the gradient-magnitude-weighted centroid (the
    // method's own start).
    let mut centre = match near {
        Some(c) => c,
        None => {
            let (mut sw, mut sp) = (0.0, Vector2::zeros());
            for (p, g) in &chosen {
                let w = g.norm_squared();
                sw += w;
                sp += p * w;
            }
            if sw <= 0.0 {
                return None;
            }
            sp / sw
        }
    };
    for pass in 0..10 {
        // Lines that miss the current centre by far more than the typical line (a
        // ruler's edges and ticks, glare) are down-weighted by a Cauchy weight on that miss
        // distance (iteratively reweighted least squares; Holland & Welsch, Commun. Stat.
        // 6:813, 1977): from the first pass when the start is given, else from the third,
        // once the plain passes have found the pattern.
        let misses: Vec<f64> = chosen
            .iter()
            .map(|(p, g)| (p - centre).dot(&Vector2::new(-g.y, g.x)).abs() / g.norm())
            .collect();
        let c = if (pass >= 2 || near.is_some()) && !misses.is_empty() {
            let mut m = misses.clone();
            let mid = m.len() / 2;
            2.0 * m.select_nth_unstable_by(mid, f64::total_cmp).1.max(0.5)
        } else {
            f64::INFINITY
        };
        let mut a = Matrix2::zeros();
        let mut b = Vector2::zeros();
        for ((p, g), miss) in chosen.iter().zip(&misses) {
            let m2 = g.norm_squared();
            let n = Vector2::new(-g.y, g.x) / m2.sqrt();
            let dist = (p - centre).norm().max(1.0);
            let wgt = m2 / dist / (1.0 + (miss / c).powi(2));
            let nn = n * n.transpose() * wgt;
            a += nn;
            b += nn * p;
        }
        let next = a.try_inverse().map(|inv| inv * b)?;
        if !(next.x.is_finite() && next.y.is_finite()) {
            return None;
        }
        let moved = (next - centre).norm();
        centre = next;
        if moved < 1e-3 && pass >= 3 {
            break;
        }
    }
    Some(centre)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rings(w: usize, h: usize, c: (f64, f64)) -> Vec<f32> {
        (0..w * h)
            .map(|i| {
                let (x, y) = ((i % w) as f64, (i / w) as f64);
                let r = (x - c.0).hypot(y - c.1);
                (0.2 + (-r / 30.0).exp() * (0.5 + 0.5 * (r / 3.0).cos())) as f32
            })
            .collect()
    }

    #[test]
    fn finds_the_centre_of_concentric_rings() {
        // A symmetric pattern's gradients all meet at its centre (Parthasarathy 2012): the
        // estimate must sit on the true centre to a small fraction of a cell.
        let (w, h) = (90, 70);
        let truth = (41.3, 33.7);
        let values = rings(w, h, truth);
        let skip = vec![false; w * h];
        let grid = Grid {
            values: &values,
            skip: &skip,
            size: (w, h),
        };
        let c = radial_symmetry_centre(&grid, None, f64::INFINITY).unwrap();
        assert!(
            (c.x - truth.0).abs() < 0.05 && (c.y - truth.1).abs() < 0.05,
            "{c:?}"
        );
    }

    #[test]
    fn skipped_core_and_a_gradient_elsewhere_do_not_move_it_far() {
        let (w, h) = (120, 90);
        let truth = (50.0, 44.0);
        let mut values = rings(w, h, truth);
        // A saturated core (left out) and a room-light ramp across the frame.
        let mut skip = vec![false; w * h];
        for (i, v) in values.iter_mut().enumerate() {
            let (x, y) = ((i % w) as f64, (i / w) as f64);
            *v += (0.002 * x) as f32;
            if (x - truth.0).hypot(y - truth.1) < 5.0 {
                skip[i] = true;
            }
        }
        let grid = Grid {
            values: &values,
            skip: &skip,
            size: (w, h),
        };
        let c = radial_symmetry_centre(&grid, Some(Vector2::new(55.0, 40.0)), 40.0).unwrap();
        assert!((c - Vector2::new(truth.0, truth.1)).norm() < 0.5, "{c:?}");
    }

    #[test]
    fn a_flat_grid_has_no_centre() {
        let values = vec![0.5f32; 100];
        let skip = vec![false; 100];
        let grid = Grid {
            values: &values,
            skip: &skip,
            size: (10, 10),
        };
        assert!(radial_symmetry_centre(&grid, None, f64::INFINITY).is_none());
    }
}
