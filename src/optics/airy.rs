//! The Airy pattern of a circular aperture and the rings it makes (Born & Wolf,
//! *Principles of Optics*, §8.5.2; Hecht, *Optics*, §10.2.5): I(x) = I0·[2J1(x)/x]²,
//! x = π D sin θ/λ. Dark rings sit at the zeros of J1, bright rings at the zeros of J2
//! (where d/dx[2J1(x)/x] = −2J2(x)/x vanishes). Which ring a photo shows first is not
//! obvious: an overexposed centre swallows the first dark ring or two. The ratios of the
//! visible rings' radii tell (they are the ratios of the zeros, whatever D, λ and L are),
//! so [`identify_dark_rings`] works from the ratios alone.

use super::profile::{FringeProfile, IntensityModel};
use crate::fit::bessel::{airy_intensity_and_derivative, j1, jinc_derivative};
use std::f64::consts::PI;

/// Parameter indices of [`AiryModel`].
pub mod param {
    /// The centre (a radial profile's origin: held at 0).
    pub const X0: usize = 0;
    /// Peak intensity I0.
    pub const AMPLITUDE: usize = 1;
    /// Background.
    pub const BACKGROUND: usize = 2;
    /// Background slope per unit r/L.
    pub const SLOPE: usize = 3;
    /// Background curvature per unit (r/L)².
    pub const CURVATURE: usize = 4;
    /// D/λ.
    pub const D_OVER_LAMBDA: usize = 5;
}

/// I = B + B′u + B″u² + I0·[2J1(π (D/λ) s)/(π (D/λ) s)]², u = r/L, s = sin θ.
pub struct AiryModel;

impl IntensityModel for AiryModel {
    fn names(&self) -> &'static [&'static str] {
        &[
            "centre_m",
            "amplitude",
            "background",
            "background_slope",
            "background_curvature",
            "d_over_lambda",
        ]
    }

    fn intensity(&self, p: &[f64], s: f64, u: f64) -> f64 {
        p[2] + (p[3] + p[4] * u) * u + p[1] * airy_intensity_and_derivative(PI * p[5] * s).0
    }

    fn typical(&self, p: &[f64]) -> Vec<f64> {
        let a = p[1].abs().max(1e-6);
        vec![1.0, a, a, a, a, p[5].abs()]
    }

    fn gradient(&self, p: &[f64], s: f64, u: f64, g: &mut [f64]) -> Option<(f64, f64)> {
        let (i, di) = airy_intensity_and_derivative(PI * p[5] * s);
        g[1] = i;
        g[2] = 1.0;
        g[3] = u;
        g[4] = u * u;
        g[5] = p[1] * di * PI * s;
        Some((p[1] * di * PI * p[5], p[3] + 2.0 * p[4] * u))
    }
}

/// The m-th positive zero of `f` near McMahon's start, by Newton's method with the
/// derivative `df` (converges in a few steps from A&S 9.5.12's first term).
fn zero_near(start: f64, f: impl Fn(f64) -> f64, df: impl Fn(f64) -> f64) -> f64 {
    let mut x = start;
    for _ in 0..50 {
        let step = f(x) / df(x);
        x -= step;
        if step.abs() < 1e-15 * x {
            break;
        }
    }
    x
}

/// The m-th zero (m ≥ 1) of J1: the m-th dark ring's x. McMahon's expansion
/// (Abramowitz & Stegun 9.5.12) with β = (m + 1/4)π starts Newton on J1, whose derivative
/// is J0 − J1/x (A&S 9.1.27).
pub fn dark_ring_x(m: usize) -> f64 {
    let beta = (m as f64 + 0.25) * PI;
    let start = beta - 3.0 / (8.0 * beta);
    zero_near(start, j1, |x| crate::fit::bessel::j0(x) - j1(x) / x)
}

/// The m-th zero (m ≥ 1) of J2: the m-th bright ring's x (beyond the central disc).
pub fn bright_ring_x(m: usize) -> f64 {
    // J2 = −(x/2)·d/dx[2J1/x]; Newton on the jinc slope, with its derivative by a
    // central difference (the slope's own zero is all that is needed).
    let beta = (m as f64 + 0.75) * PI;
    let start = beta - 15.0 / (8.0 * beta);
    let h = 1e-6;
    zero_near(start, jinc_derivative, |x| {
        (jinc_derivative(x + h) - jinc_derivative(x - h)) / (2.0 * h)
    })
}

/// A ring located in a radial profile.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RingRadius {
    /// Radius on the screen, mm.
    pub r_mm: f64,
    /// Its standard uncertainty, mm.
    pub u_mm: f64,
    /// sin θ at the nominal distance.
    pub sine: f64,
}

/// Which dark ring the first visible one is, from the radius ratios alone.
#[derive(Debug, Clone, PartialEq)]
pub struct Identification {
    /// Order (1 = the first dark ring) of the first visible dark ring.
    pub first_order: usize,
    /// D/λ implied by that assignment (least squares over the rings).
    pub d_over_lambda: f64,
    /// χ²/ν of the assignment; and of the runner-up (the next best offset).
    pub chi2: f64,
    /// The runner-up's χ²/ν and its first order.
    pub runner_up: Option<(usize, f64)>,
}

/// Assigns the visible dark rings (sorted by radius, consecutive orders assumed) to the
/// zeros of J1: for each candidate order k of the first visible ring, D/λ is fitted to
/// π (D/λ) s_i = x_{k+i} by weighted least squares and the assignment's χ² is kept; the
/// best k wins. The ratio of the zeros changes with k (x2/x1 = 1.83, x3/x2 = 1.45,
/// x4/x3 = 1.31, ...), so two or more rings fix it. None with fewer than two rings.
pub fn identify_dark_rings(rings: &[RingRadius], max_first: usize) -> Option<Identification> {
    if rings.len() < 2 {
        return None;
    }
    let mut scored: Vec<(usize, f64, f64)> = (1..=max_first.max(1))
        .map(|k| {
            let (mut sxx, mut sxz) = (0.0, 0.0);
            let w: Vec<f64> = rings
                .iter()
                .map(|r| {
                    // u(s) from u(r) through ds/dr = L²/(r² + L²)^(3/2) ≈ s/r · cos²θ;
                    // the ratio test needs only relative weights, so s·u_r/r serves.
                    let us = (r.sine * r.u_mm / r.r_mm).max(1e-12);
                    1.0 / (us * us)
                })
                .collect();
            for (i, r) in rings.iter().enumerate() {
                let z = dark_ring_x(k + i);
                sxx += w[i] * (PI * r.sine).powi(2);
                sxz += w[i] * PI * r.sine * z;
            }
            let q = sxz / sxx;
            let chi2 = rings
                .iter()
                .enumerate()
                .map(|(i, r)| w[i] * (PI * q * r.sine - dark_ring_x(k + i)).powi(2))
                .sum::<f64>()
                / (rings.len() - 1) as f64;
            (k, q, chi2)
        })
        .collect();
    scored.sort_by(|a, b| a.2.total_cmp(&b.2));
    let (k, q, chi2) = scored[0];
    Some(Identification {
        first_order: k,
        d_over_lambda: q,
        chi2,
        runner_up: scored.get(1).map(|&(k2, _, c2)| (k2, c2)),
    })
}

/// Local minima of a radial profile outside `r_min_mm`, found without any model: the
/// profile is smoothed over ±2 bins, and a bin is a minimum when it is the lowest within
/// ±`half_window` bins and its prominence on both sides (the highest value before the
/// profile falls below it again) is at least 4 standard errors. Each is refined
/// by a parabola through it and its neighbours.
pub fn profile_minima(
    profile: &FringeProfile,
    std_error: &[f64],
    r_min_mm: f64,
    half_window: usize,
) -> Vec<(f64, f64)> {
    let n = profile.x_mm.len();
    let ok = |i: usize| profile.exact(i) && profile.value[i].is_finite();
    let smooth: Vec<f64> = (0..n)
        .map(|i| {
            let (mut s, mut w) = (0.0, 0.0);
            for j in i.saturating_sub(2)..(i + 3).min(n) {
                if ok(j) {
                    let wt = [1.0, 4.0, 6.0, 4.0, 1.0][j + 2 - i];
                    s += wt * profile.value[j];
                    w += wt;
                }
            }
            if w > 0.0 { s / w } else { f64::NAN }
        })
        .collect();
    let mut out = Vec::new();
    let h = half_window.max(2);
    for i in h..n.saturating_sub(h) {
        if profile.x_mm[i] < r_min_mm || !ok(i) || !smooth[i].is_finite() {
            continue;
        }
        let window = i - h..=i + h;
        if window.clone().any(|j| !ok(j) || !(smooth[j] >= smooth[i])) {
            continue;
        }
        // Prominence: the highest value on each side before the profile drops below this
        // minimum again (or a gap, or the end).
        let rise = |steps: &mut dyn Iterator<Item = usize>| {
            let mut top = f64::MIN;
            for j in steps {
                if !ok(j) || !smooth[j].is_finite() || smooth[j] < smooth[i] {
                    break;
                }
                top = top.max(smooth[j]);
            }
            top
        };
        let left = rise(&mut (0..i).rev());
        let right = rise(&mut (i + 1..n));
        let se = std_error[i].max(1e-12);
        if left - smooth[i] < 4.0 * se || right - smooth[i] < 4.0 * se {
            continue;
        }
        // Vertex of the parabola through the smoothed bins i − 1, i, i + 1.
        let (a, b, c) = (smooth[i - 1], smooth[i], smooth[i + 1]);
        let den = a - 2.0 * b + c;
        let frac = if den > 0.0 {
            (0.5 * (a - c) / den).clamp(-0.5, 0.5)
        } else {
            0.0
        };
        let step = profile.x_mm[i + 1] - profile.x_mm[i];
        out.push((profile.x_mm[i] + frac * step, smooth[i]));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ring_positions_are_the_tabulated_zeros() {
        // Zeros of J1: 3.8317059702, 7.0155866698, 10.1734681351, 13.3236919363
        // (Abramowitz & Stegun table 9.5); bright rings of the Airy pattern at 5.1356,
        // 8.4172, 11.6198 (zeros of J2, A&S table 9.5; REFERENCES.md gives 5.136, 8.417,
        // 11.62).
        let dark = [3.8317059702, 7.0155866698, 10.1734681351, 13.3236919363];
        for (m, z) in dark.iter().enumerate() {
            assert!((dark_ring_x(m + 1) - z).abs() < 1e-9, "dark {}", m + 1);
        }
        let bright = [5.1356223018, 8.4172441404, 11.6198411721];
        for (m, z) in bright.iter().enumerate() {
            assert!((bright_ring_x(m + 1) - z).abs() < 1e-8, "bright {}", m + 1);
        }
        // The first dark ring at sin θ = 1.2197 λ/D (REFERENCES.md; 3.8317/π).
        assert!((dark_ring_x(1) / PI - 1.2197).abs() < 5e-5);
    }

    fn rings_at(q: f64, orders: std::ops::RangeInclusive<usize>) -> Vec<RingRadius> {
        let l = 1000.0;
        orders
            .map(|m| {
                let s = dark_ring_x(m) / (PI * q);
                let r = l * s / (1.0 - s * s).sqrt();
                RingRadius {
                    r_mm: r,
                    u_mm: 0.002 * r,
                    sine: s,
                }
            })
            .collect()
    }

    #[test]
    fn ratios_tell_which_ring_is_first() {
        // The same D/λ seen from its 1st, 2nd or 3rd dark ring on: the identification
        // must name that ring and recover D/λ.
        for first in 1..=3 {
            let rings = rings_at(300.0, first..=first + 3);
            let id = identify_dark_rings(&rings, 5).unwrap();
            assert_eq!(id.first_order, first);
            assert!((id.d_over_lambda - 300.0).abs() < 1e-6 * 300.0);
            assert!(id.runner_up.unwrap().1 > 100.0 * id.chi2.max(1e-6));
        }
        assert!(identify_dark_rings(&rings_at(300.0, 1..=1), 5).is_none());
    }
}
