//! Sub-pixel ring centre by sharpening the radial profile. About a wrong centre, the
//! rings of one sector sit further out than in the opposite one: sector φ's profile is
//! the mean profile shifted by δ·(cos φ, sin φ), δ the centre's error. Each sector's shift
//! is measured against the mean profile (a cross-correlation of the profiles' slopes when
//! far off, a one-dimensional Lucas–Kanade step once close), and δ is the least-squares
//! fit of those shifts to a cosine in φ. Every ring, broad or sharp, and every part of a
//! halo's edge takes part, so the method needs neither ridge points nor a ring model, and
//! its uncertainty comes from the scatter of independent sectors about the fit.

use super::radial::{RadialCells, RadialOptions};
use crate::find::FindError;
use crate::raster::Raster;
use crate::scale::ScreenMap;
use nalgebra::{Matrix2, Matrix3, Vector2, Vector3};
use std::f64::consts::PI;

/// A refined ring centre.
#[derive(Debug, Clone)]
pub struct RingCentre {
    /// Centre on the screen, mm.
    pub mm: Vector2<f64>,
    /// Its covariance, mm².
    pub covariance_mm: Matrix2<f64>,
    /// The centre in photo pixels.
    pub px: Vector2<f64>,
    /// Standard uncertainties of `px` along x and y.
    pub u_px: [f64; 2],
    /// Sectors whose shifts entered the last fit.
    pub sectors_used: usize,
    /// Refinement passes made.
    pub iterations: usize,
}

/// The radii (mm) between which the sectors' profiles are compared.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Annulus {
    /// Inner radius, mm (beyond a saturated core).
    pub inner_mm: f64,
    /// Outer radius, mm.
    pub outer_mm: f64,
}

const SECTORS: usize = 36;
const MAX_PASSES: usize = 12;

/// Refines `start_mm` until the centre moves by less than a hundredth of a pixel.
pub fn refine_centre(
    raster: &dyn Raster,
    map: &ScreenMap,
    start_mm: Vector2<f64>,
    annulus: Annulus,
) -> Result<RingCentre, FindError> {
    let mm_px = map.mm_per_px_at(map.to_px(start_mm));
    // Enough pixels per pass for the shape of the rings, not every one: about 1.5 million
    // for the passes that set the result, 0.4 million while the centre is still moving
    // by more than half a pixel.
    let area_px = PI * (annulus.outer_mm / mm_px).powi(2);
    let frame = (raster.width() * raster.height()) as f64;
    let options = |pixels: f64| {
        let stride = (area_px.min(frame) / pixels).sqrt().ceil().max(1.0) as usize;
        RadialOptions {
            sectors: SECTORS,
            bin_mm: 0.5 * mm_px * stride as f64,
            r_max_mm: annulus.outer_mm,
            stride,
        }
    };
    let (quick, fine) = (options(0.4e6), options(1.5e6));
    let mut centre = start_mm;
    let mut last = None;
    let mut moving = true;
    for pass in 0..MAX_PASSES {
        let opts = if moving { &quick } else { &fine };
        let cells = RadialCells::tabulate(raster, map, centre, opts);
        // Far from the centre, a whole-bin search; near it, the linearised step.
        let coarse = pass < 2;
        let (shift, cov, used) = sector_fit(&cells, annulus, coarse)?;
        centre += shift;
        last = Some((cov, used, pass + 1));
        if moving {
            moving = coarse || shift.norm() > 0.5 * mm_px;
            continue;
        }
        // Done when the step is a hundredth of a pixel, or well inside the centre's own
        // uncertainty (speckle keeps a halo's centre jittering at that level).
        let sigma = cov.symmetric_eigenvalues().max().max(0.0).sqrt();
        if shift.norm() < (0.01 * mm_px).max(0.3 * sigma) {
            break;
        }
    }
    let (covariance_mm, sectors_used, iterations) =
        last.ok_or_else(|| FindError::Unmeasurable("no centre refinement ran".into()))?;
    let px = map.to_px(centre);
    // px covariance through the inverse of the map's Jacobian at the centre.
    let j = map.jacobian(px);
    let ji = j
        .try_inverse()
        .ok_or_else(|| FindError::Unmeasurable("the scale is singular at the centre".into()))?;
    let cpx = ji * covariance_mm * ji.transpose();
    Ok(RingCentre {
        mm: centre,
        covariance_mm,
        px,
        u_px: [cpx[(0, 0)].max(0.0).sqrt(), cpx[(1, 1)].max(0.0).sqrt()],
        sectors_used,
        iterations,
    })
}

/// Each sector's radial shift against the mean profile, then δ by least squares over
/// sectors with 3.5-MAD rejection. Returns δ (mm), its covariance and the sectors used.
fn sector_fit(
    cells: &RadialCells,
    annulus: Annulus,
    coarse: bool,
) -> Result<(Vector2<f64>, Matrix2<f64>, usize), FindError> {
    let bin = cells.bin_mm;
    let b0 = ((annulus.inner_mm / bin) as usize).max(1);
    let b1 = ((annulus.outer_mm / bin) as usize).min(cells.bins - 2);
    if b1 < b0 + 8 {
        return Err(FindError::Unmeasurable(format!(
            "the ring region {:.2}–{:.2} mm is too narrow to centre on",
            annulus.inner_mm, annulus.outer_mm
        )));
    }
    let reference = cells.profile(|_| true);
    let usable = |b: usize| reference.has(b) && !reference.clipped[b];
    let slope = |b: usize| -> Option<f64> {
        (usable(b - 1) && usable(b + 1))
            .then(|| 0.5 * (reference.value[b + 1] - reference.value[b - 1]))
    };
    let mut rows: Vec<(f64, f64)> = Vec::new(); // (angle, shift in mm)
    for s in 0..cells.sectors {
        let pts: Vec<(usize, f64, f64)> = (b0..=b1)
            .filter_map(|b| {
                let v = cells.cell(s, b)?;
                (cells.cell_clipped(s, b) <= 0.02 && usable(b)).then_some((
                    b,
                    v,
                    reference.value[b],
                ))
            })
            .collect();
        if pts.len() < (b1 - b0) / 2 {
            continue; // mostly off the frame
        }
        let shift_bins = if coarse {
            correlate(cells, s, &reference.value, b0, b1)
        } else {
            lucas_kanade(&pts, &slope)
        };
        if let Some(d) = shift_bins.filter(|d| d.is_finite()) {
            rows.push((cells.sector_angle(s), d * bin));
        }
    }
    let fit = |rows: &[(f64, f64)]| -> Option<(Vector3<f64>, Matrix3<f64>, Vec<f64>)> {
        let mut ata = Matrix3::zeros();
        let mut atb = Vector3::zeros();
        for &(a, d) in rows {
            let v = Vector3::new(a.cos(), a.sin(), 1.0);
            ata += v * v.transpose();
            atb += v * d;
        }
        let inv = ata.try_inverse()?;
        let p = inv * atb;
        let res = rows
            .iter()
            .map(|&(a, d)| d - (p.x * a.cos() + p.y * a.sin() + p.z))
            .collect();
        Some((p, inv, res))
    };
    let count = rows.len();
    let too_few = || {
        FindError::Unmeasurable(format!(
            "only {count} sectors around the centre show the rings: too little of the \
             pattern is in the frame to centre on it"
        ))
    };
    if rows.len() < 8 {
        return Err(too_few());
    }
    let (mut p, mut inv, res) = fit(&rows).ok_or_else(too_few)?;
    let mut abs: Vec<f64> = res.iter().map(|r| r.abs()).collect();
    abs.sort_unstable_by(f64::total_cmp);
    let mad = 1.4826 * abs[abs.len() / 2];
    if mad > 0.0 {
        let kept: Vec<(f64, f64)> = rows
            .iter()
            .zip(&res)
            .filter(|(_, r)| r.abs() <= 3.5 * mad)
            .map(|(row, _)| *row)
            .collect();
        if kept.len() >= 8 && kept.len() < rows.len() {
            rows = kept;
            (p, inv, _) = fit(&rows).ok_or_else(too_few)?;
        }
    }
    let (_, _, res) = fit(&rows).ok_or_else(too_few)?;
    let dof = (rows.len() - 3) as f64;
    let s2 = res.iter().map(|r| r * r).sum::<f64>() / dof;
    let cov = Matrix2::new(inv[(0, 0)], inv[(0, 1)], inv[(1, 0)], inv[(1, 1)]) * s2;
    Ok((Vector2::new(p.x, p.y), cov, rows.len()))
}

/// Shift (bins, outward positive) of sector `s` against the reference by the peak of the
/// cross-correlation of their slopes, interpolated by a parabola.
fn correlate(
    cells: &RadialCells,
    s: usize,
    reference: &[f64],
    b0: usize,
    b1: usize,
) -> Option<f64> {
    let max_lag = ((b1 - b0) / 6).clamp(4, 40) as isize;
    let slope_of = |f: &dyn Fn(usize) -> Option<f64>, b: usize| -> Option<f64> {
        Some(f(b + 1)? - f(b.checked_sub(1)?)?)
    };
    let sector = |b: usize| {
        cells
            .cell(s, b)
            .filter(|_| cells.cell_clipped(s, b) <= 0.02)
    };
    let refv = |b: usize| reference.get(b).copied().filter(|v| v.is_finite());
    let score = |lag: isize| -> f64 {
        let mut acc = 0.0;
        for b in b0..=b1 {
            let bs = b as isize + lag;
            if bs < 1 || bs as usize + 1 >= cells.bins {
                continue;
            }
            if let (Some(a), Some(r)) = (slope_of(&sector, bs as usize), slope_of(&refv, b)) {
                acc += a * r;
            }
        }
        acc
    };
    let scores: Vec<f64> = (-max_lag..=max_lag).map(score).collect();
    let (k, _) = scores
        .iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))?;
    let lag = k as f64 - max_lag as f64;
    if k == 0 || k + 1 == scores.len() {
        return Some(lag);
    }
    let (a, b, c) = (scores[k - 1], scores[k], scores[k + 1]);
    let den = a - 2.0 * b + c;
    Some(if den < 0.0 {
        lag + 0.5 * (a - c) / den
    } else {
        lag
    })
}

/// Shift (bins) of a sector's profile v(b) ≈ g·ref(b − δ) + o, linearised:
/// v = g·ref − g·δ·ref′ + o, solved for (g, g·δ, o) by least squares.
fn lucas_kanade(pts: &[(usize, f64, f64)], slope: &dyn Fn(usize) -> Option<f64>) -> Option<f64> {
    let mut ata = Matrix3::zeros();
    let mut atb = Vector3::zeros();
    let mut n = 0;
    for &(b, v, r) in pts {
        let Some(d) = slope(b) else { continue };
        let row = Vector3::new(r, -d, 1.0);
        ata += row * row.transpose();
        atb += row * v;
        n += 1;
    }
    if n < 8 {
        return None;
    }
    let p = ata.try_inverse()? * atb;
    (p.x.abs() > 1e-12).then(|| p.y / p.x)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::raster::OwnedRaster;
    use crate::scale::ScaleMethod;

    fn airy_like(cx: f64, cy: f64, noise_seed: Option<u64>) -> OwnedRaster {
        // A ring pattern of our own (not a diffraction formula): damped cosine rings.
        OwnedRaster::from_fn(240, 200, move |x, y| {
            let r = (x - cx).hypot(y - cy);
            let mut v = 0.05 + 0.8 * (-r / 40.0).exp() * (0.5 + 0.5 * (r / 4.0).cos());
            if let Some(seed) = noise_seed {
                // splitmix64 (Steele, Lea & Flood 2014) of the pixel index: a reproducible
                // ±1 % noise
                let mut z = seed
                    .wrapping_add((y as u64 * 1000 + x as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15));
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                z ^= z >> 31;
                v += 0.01 * ((z >> 11) as f64 / (1u64 << 53) as f64 - 0.5);
            }
            v as f32
        })
    }

    #[test]
    fn clean_rings_centre_to_a_hundredth_of_a_pixel() {
        // DESIGN §6: bias ≤ 0.05 px on clean simulated rings.
        let (cx, cy) = (118.37, 96.81);
        let img = airy_like(cx, cy, None);
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.2).unwrap();
        let annulus = Annulus {
            inner_mm: 1.0,
            outer_mm: 18.0,
        };
        let start = Vector2::new((cx + 3.1) * 0.2, (cy - 2.4) * 0.2);
        let c = refine_centre(&img, &map, start, annulus).unwrap();
        assert!(
            (c.px.x - cx).abs() < 0.02 && (c.px.y - cy).abs() < 0.02,
            "{:?}",
            c.px
        );
        assert!(c.u_px[0] < 0.05, "{:?}", c.u_px);
    }

    #[test]
    fn noisy_rings_partly_off_the_frame_stay_within_their_uncertainty() {
        let (cx, cy) = (60.2, 95.4); // 60 px from the left edge: rings cut by it
        let img = airy_like(cx, cy, Some(3));
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.2).unwrap();
        let annulus = Annulus {
            inner_mm: 1.0,
            outer_mm: 20.0,
        };
        let start = Vector2::new((cx - 2.0) * 0.2, (cy + 1.5) * 0.2);
        let c = refine_centre(&img, &map, start, annulus).unwrap();
        let (ex, ey) = (c.px.x - cx, c.px.y - cy);
        assert!(ex.abs() < 0.1 && ey.abs() < 0.1, "{:?}", c.px);
        assert!(ex.abs() <= 4.0 * c.u_px[0] + 0.01 && ey.abs() <= 4.0 * c.u_px[1] + 0.01);
    }
}
