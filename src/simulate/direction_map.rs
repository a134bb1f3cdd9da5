//! A two-dimensional far field laid on a screen perpendicular to the beam. The far field is
//! given per unit of direction cosines (α, β): the plane wave (α, β, γ), γ = √(1 − α² − β²),
//! is a ray from the diffracting object at the origin that meets the screen z = L at
//! (Lα/γ, Lβ/γ). Inverting, the screen point (X, Y) is reached by the unit vector towards
//! (X, Y, L), α = X/R, β = Y/R with R = √(X² + Y² + L²), and the irradiance there is the far
//! field times the Jacobian |∂(α, β)/∂(X, Y)| = L²/R⁴ of that landing map (a test checks it
//! against finite differences of the ray intersection).
//!
//! Two layouts: a radial table (a radially symmetric far field, indexed by sin θ = √(α²+β²))
//! and a square grid in FFT order (bin (i, j) at α = i·Δα, β = j·Δα, indices folded to
//! ±n/2).

use nalgebra::Vector3;

/// Far-field intensity over direction cosines, landed on a screen at `distance_mm`.
#[derive(Debug, Clone)]
pub(crate) struct DirectionMap {
    /// Object to screen, mm.
    pub distance_mm: f64,
    /// Direction-cosine radius beyond which the table holds no light.
    pub rho_max: f64,
    pub table: Table,
}

/// The intensity samples: power fraction per unit dα·dβ.
#[derive(Debug, Clone)]
pub(crate) enum Table {
    /// `values[k]` at sin θ = k·`step`.
    Radial { step: f64, values: Vec<f32> },
    /// `values[i·n + j]` at (α, β) = (signed(i), signed(j))·`dalpha`.
    Grid {
        n: usize,
        dalpha: f64,
        values: Vec<f32>,
    },
}

/// Where the ray of direction cosines (α, β) meets the screen z = L (mm), by a vector
/// ray–plane intersection; `None` if it runs within half a degree of the plane or away.
pub(crate) fn land(alpha: f64, beta: f64, distance_mm: f64) -> Option<[f64; 2]> {
    let gamma2 = 1.0 - alpha * alpha - beta * beta;
    if gamma2 <= 0.0 {
        return None;
    }
    let d = Vector3::new(alpha, beta, gamma2.sqrt());
    let normal = Vector3::z();
    let cos_screen = d.dot(&normal);
    if cos_screen <= 1e-2 {
        return None;
    }
    let hit = d * (distance_mm / cos_screen);
    Some([hit.x, hit.y])
}

/// The screen radius (mm) reached by rays at sin θ = `rho` (the landing of (ρ, 0)).
pub(crate) fn radius_at(rho: f64, distance_mm: f64) -> Option<f64> {
    land(rho, 0.0, distance_mm).map(|p| p[0])
}

/// |∂(α, β)/∂(X, Y)| of the landing at screen point (X, Y): L²/R⁴, R = √(X² + Y² + L²).
pub(crate) fn jacobian(x_mm: f64, y_mm: f64, distance_mm: f64) -> f64 {
    let l2 = distance_mm * distance_mm;
    let r2 = x_mm * x_mm + y_mm * y_mm + l2;
    l2 / (r2 * r2)
}

impl DirectionMap {
    /// Far-field intensity per unit dα·dβ at direction cosines (α, β).
    pub fn intensity(&self, alpha: f64, beta: f64) -> f64 {
        match &self.table {
            Table::Radial { step, values } => {
                let u = alpha.hypot(beta) / step;
                let i = u as usize; // u ≥ 0
                match (values.get(i), values.get(i + 1)) {
                    (Some(&a), Some(&b)) => {
                        let t = (u - i as f64) as f32;
                        (a + (b - a) * t) as f64
                    }
                    _ => 0.0,
                }
            }
            Table::Grid { n, dalpha, values } => {
                let (u, v) = (alpha / dalpha, beta / dalpha);
                let half = (*n / 2) as f64 - 1.0;
                if !(u.abs() < half && v.abs() < half) {
                    return 0.0;
                }
                let (fu, fv) = (u.floor(), v.floor());
                let (tu, tv) = ((u - fu) as f32, (v - fv) as f32);
                let fold = |k: f64| (k as i64).rem_euclid(*n as i64) as usize;
                let (i0, i1, j0, j1) = (fold(fu), fold(fu + 1.0), fold(fv), fold(fv + 1.0));
                let at = |i: usize, j: usize| values[i * n + j];
                let top = at(i0, j0) + (at(i0, j1) - at(i0, j0)) * tv;
                let bottom = at(i1, j0) + (at(i1, j1) - at(i1, j0)) * tv;
                (top + (bottom - top) * tu) as f64
            }
        }
    }

    /// Irradiance at screen point (X, Y), power fraction per mm².
    pub fn irradiance(&self, x_mm: f64, y_mm: f64) -> f64 {
        let l = self.distance_mm;
        let r2 = x_mm * x_mm + y_mm * y_mm + l * l;
        let inv = 1.0 / r2.sqrt();
        let (alpha, beta) = (x_mm * inv, y_mm * inv);
        if alpha * alpha + beta * beta >= self.rho_max * self.rho_max {
            return 0.0;
        }
        let jacobian = l * l * inv * inv * inv * inv;
        self.intensity(alpha, beta) * jacobian
    }

    /// Screen radius holding all the light, mm (capped at a kilometre, where the "screen"
    /// is a fiction).
    pub fn reach_mm(&self) -> f64 {
        radius_at(self.rho_max.min(0.999), self.distance_mm)
            .unwrap_or(1e6)
            .min(1e6)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jacobian_matches_finite_differences_of_the_landing() {
        // A flat far field of 1 per dα·dβ: the irradiance is then the Jacobian alone.
        let l = 500.0;
        let map = DirectionMap {
            distance_mm: l,
            rho_max: 0.99,
            table: Table::Radial {
                step: 0.01,
                values: vec![1.0; 101],
            },
        };
        for (alpha, beta) in [(0.0, 0.0), (0.2, 0.1), (-0.35, 0.4), (0.6, -0.5)] {
            let h = 1e-6;
            let p = |a: f64, b: f64| land(a, b, l).unwrap();
            let (xa0, xa1) = (p(alpha - h, beta), p(alpha + h, beta));
            let (xb0, xb1) = (p(alpha, beta - h), p(alpha, beta + h));
            let dxa = [(xa1[0] - xa0[0]) / (2.0 * h), (xa1[1] - xa0[1]) / (2.0 * h)];
            let dxb = [(xb1[0] - xb0[0]) / (2.0 * h), (xb1[1] - xb0[1]) / (2.0 * h)];
            let area_per_dadb = (dxa[0] * dxb[1] - dxa[1] * dxb[0]).abs();
            let at = p(alpha, beta);
            let got = map.irradiance(at[0], at[1]);
            let expected = 1.0 / area_per_dadb;
            assert!(
                (got - expected).abs() < 1e-6 * expected,
                "({alpha}, {beta}): {got} vs {expected}"
            );
        }
    }

    #[test]
    fn a_ray_lands_at_l_tan_theta() {
        // A ray at angle θ from the normal meets a plane L away at L·tan θ.
        for theta in [0.0f64, 0.01, 0.3, 0.9] {
            let r = radius_at(theta.sin(), 2500.0).unwrap();
            assert!((r - 2500.0 * theta.tan()).abs() < 1e-9 * (1.0 + r));
        }
        assert!(land(0.8, 0.7, 100.0).is_none());
    }

    #[test]
    fn grid_lookup_interpolates_between_folded_bins() {
        let n = 8;
        let mut values = vec![0.0f32; n * n];
        // Bin (−1, 0) folds to row 7.
        values[7 * n] = 4.0;
        let map = DirectionMap {
            distance_mm: 100.0,
            rho_max: 1.0,
            table: Table::Grid {
                n,
                dalpha: 0.1,
                values,
            },
        };
        assert!((map.intensity(-0.1, 0.0) - 4.0).abs() < 1e-6);
        assert!((map.intensity(-0.05, 0.0) - 2.0).abs() < 1e-6);
        assert!((map.intensity(-0.1, 0.05) - 2.0).abs() < 1e-6);
        assert_eq!(map.intensity(0.35, 0.0), 0.0);
    }
}
