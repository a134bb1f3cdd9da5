//! The halo of an ensemble of particles as a size-weighted sum of Airy patterns.
//!
//! Particles scattered at random positions add their far fields with random phases, so on
//! average their intensities add (the speckle is that average's fluctuation). One opaque
//! disc of diameter D diffracts, off the axis, as a hole of the same size (Babinet), with
//! an amplitude proportional to its area: I_D(s) ∝ D⁴·[2J1(x)/x]², x = π D s/λ (Born &
//! Wolf, *Principles of Optics*, §8.5.2 and §8.3.2). For a number distribution n(D) the
//! halo is ∫ n(D) D⁴ [2J1(x)/x]² dD, taken here by Gauss–Hermite quadrature over the
//! distribution's normal variable ([`NormalRule`]).

use super::super::profile::IntensityModel;
use crate::fit::bessel::airy_intensity_and_derivative;
use crate::fit::quadrature::NormalRule;
use std::f64::consts::PI;

/// Parameter indices of [`EnsembleModel`].
pub mod param {
    /// The centre (a radial profile's origin: held at 0).
    pub const X0: usize = 0;
    /// The halo's intensity at the axis (what a single size would give there).
    pub const AMPLITUDE: usize = 1;
    /// Background.
    pub const BACKGROUND: usize = 2;
    /// Background slope per unit r/L.
    pub const SLOPE: usize = 3;
    /// Background curvature per unit (r/L)².
    pub const CURVATURE: usize = 4;
    /// Number-mean diameter over the wavelength.
    pub const MEAN_OVER_LAMBDA: usize = 5;
    /// Standard deviation of the diameters over the wavelength (its sign is immaterial).
    pub const SD_OVER_LAMBDA: usize = 6;
}

/// The shape of the number distribution of diameters.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SizeModel {
    /// Normal in D (nodes at D ≤ 0 carry no particles).
    Normal,
    /// Lognormal in D, with the given number mean and standard deviation.
    Lognormal,
}

impl SizeModel {
    /// The name for the record and the report.
    pub fn name(self) -> &'static str {
        match self {
            SizeModel::Normal => "normal",
            SizeModel::Lognormal => "lognormal",
        }
    }

    /// The diameter over λ at the standard normal node z for mean q and SD t (both over λ),
    /// with its derivatives with respect to q and t.
    pub fn node(self, q: f64, t: f64, z: f64) -> (f64, f64, f64) {
        let (sign, t) = (if t < 0.0 { -1.0 } else { 1.0 }, t.abs());
        match self {
            SizeModel::Normal => (q + t * z, 1.0, sign * z),
            SizeModel::Lognormal => {
                // ln e = ln q − σ²/2 + σ z with σ² = ln(1 + ρ²), ρ = t/q: a lognormal whose
                // mean is q and whose variance is t² (Aitchison & Brown, *The Lognormal
                // Distribution*, 1957, eqs. 2.8–2.9).
                let rho = t / q;
                let sigma = rho.powi(2).ln_1p().sqrt();
                let e = (q.ln() - 0.5 * sigma * sigma + sigma * z).exp();
                // dσ/dρ = ρ/((1 + ρ²)σ), which tends to 1 as ρ → 0.
                let dsigma = if sigma > 1e-8 {
                    rho / ((1.0 + rho * rho) * sigma)
                } else {
                    1.0
                };
                let dln_drho = (z - sigma) * dsigma;
                let dq = e * (1.0 / q - dln_drho * rho / q);
                let dt = e * dln_drho / q;
                (e, dq, sign * dt)
            }
        }
    }

    /// The fraction of the number distribution in the diameter bin [a, b] (over λ), for
    /// mean q and SD t over λ.
    pub fn mass_between(self, q: f64, t: f64, a: f64, b: f64) -> f64 {
        let t = t.abs().max(1e-12 * q);
        let cdf = |e: f64| match self {
            SizeModel::Normal => normal_cdf((e - q) / t),
            SizeModel::Lognormal => {
                if e <= 0.0 {
                    return 0.0;
                }
                let sigma = (t / q).powi(2).ln_1p().sqrt();
                normal_cdf((e.ln() - q.ln() + 0.5 * sigma * sigma) / sigma)
            }
        };
        (cdf(b) - cdf(a)).max(0.0)
    }
}

/// Φ(x), the standard normal distribution function: Φ(x) = erfc(−x/√2)/2.
fn normal_cdf(x: f64) -> f64 {
    0.5 * libm::erfc(-x / std::f64::consts::SQRT_2)
}

/// I = B + B′u + B″u² + A·h(s), with h the ensemble halo normalised to 1 on the axis.
pub struct EnsembleModel {
    /// The distribution's shape.
    pub shape: SizeModel,
    rule: NormalRule,
}

/// Quadrature nodes over the size distribution: enough for the halo's rings to be
/// averaged correctly out to some 15 rings at a 25 % spread (the integrand's phase
/// changes by π·t·s per unit z).
const NODES: usize = 32;

impl EnsembleModel {
    /// The model for a distribution shape.
    pub fn new(shape: SizeModel) -> EnsembleModel {
        EnsembleModel::with_nodes(shape, NODES)
    }

    /// The model with a quadrature of `nodes` points (coarser for quick scans).
    pub fn with_nodes(shape: SizeModel, nodes: usize) -> EnsembleModel {
        EnsembleModel {
            shape,
            rule: NormalRule::new(nodes),
        }
    }

    /// The normalised halo h(s) and its derivatives with respect to q, t and s.
    pub fn halo(&self, q: f64, t: f64, s: f64) -> (f64, f64, f64, f64) {
        let (mut n, mut m) = (0.0, 0.0);
        let (mut dn_q, mut dn_t, mut dm_q, mut dm_t, mut dn_s) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (&z, &w) in self.rule.nodes.iter().zip(&self.rule.weights) {
            let (e, de_q, de_t) = self.shape.node(q, t, z);
            if !(e > 0.0) {
                continue;
            }
            let (g, dg) = airy_intensity_and_derivative(PI * e * s);
            let e3 = e * e * e;
            let e4 = e3 * e;
            n += w * e4 * g;
            m += w * e4;
            let dn_de = w * (4.0 * e3 * g + e4 * dg * PI * s);
            let dm_de = w * 4.0 * e3;
            dn_q += dn_de * de_q;
            dn_t += dn_de * de_t;
            dm_q += dm_de * de_q;
            dm_t += dm_de * de_t;
            dn_s += w * e4 * dg * PI * e;
        }
        if !(m > 0.0) {
            return (0.0, 0.0, 0.0, 0.0);
        }
        let h = n / m;
        (h, (dn_q - h * dm_q) / m, (dn_t - h * dm_t) / m, dn_s / m)
    }
}

impl IntensityModel for EnsembleModel {
    fn names(&self) -> &'static [&'static str] {
        &[
            "centre_m",
            "amplitude",
            "background",
            "background_slope",
            "background_curvature",
            "mean_diameter_over_lambda",
            "sd_diameter_over_lambda",
        ]
    }

    fn intensity(&self, p: &[f64], s: f64, u: f64) -> f64 {
        p[2] + (p[3] + p[4] * u) * u + p[1] * self.halo(p[5], p[6], s).0
    }

    fn typical(&self, p: &[f64]) -> Vec<f64> {
        let a = p[1].abs().max(1e-6);
        let q = p[5].abs().max(1.0);
        vec![1.0, a, a, a, a, q, 0.1 * q]
    }

    fn gradient(&self, p: &[f64], s: f64, u: f64, g: &mut [f64]) -> Option<(f64, f64)> {
        let (h, dq, dt, ds) = self.halo(p[5], p[6], s);
        g[1] = h;
        g[2] = 1.0;
        g[3] = u;
        g[4] = u * u;
        g[5] = p[1] * dq;
        g[6] = p[1] * dt;
        Some((p[1] * ds, p[3] + 2.0 * p[4] * u))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::bessel::j1;

    #[test]
    fn a_narrow_distribution_is_the_airy_pattern_of_its_mean() {
        // With t → 0 the halo is [2J1(x)/x]² of the mean (Born & Wolf §8.5.2), checked
        // with J1 directly at a few x, including the first dark ring x = 3.8317.
        for shape in [SizeModel::Normal, SizeModel::Lognormal] {
            let m = EnsembleModel::new(shape);
            let q = 12.3;
            for x in [0.7, 2.0, 3.8317, 5.1, 9.0] {
                let s = x / (PI * q);
                let want = (2.0 * j1(x) / x).powi(2);
                let got = m.halo(q, 1e-7 * q, s).0;
                assert!(
                    (got - want).abs() < 1e-9,
                    "{shape:?} x {x}: {got} vs {want}"
                );
            }
        }
    }

    #[test]
    fn a_spread_fills_the_dark_rings_and_keeps_the_axis_at_one() {
        let m = EnsembleModel::new(SizeModel::Normal);
        let q = 12.3;
        let s = 3.8317 / (PI * q);
        let narrow = m.halo(q, 0.01 * q, s).0;
        let wide = m.halo(q, 0.2 * q, s).0;
        assert!(narrow < 1e-4 && wide > 10.0 * narrow, "{narrow} {wide}");
        assert!((m.halo(q, 0.2 * q, 0.0).0 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn the_halo_of_a_spread_is_the_direct_integral() {
        // The quadrature against a plain midpoint integral of n(D)·D⁴·[2J1/x]² over
        // ±8σ in 20 000 steps (the definition, evaluated independently of the rule).
        let (q, t, x) = (20.0, 3.0, 6.0);
        let s = x / (PI * q);
        let m = EnsembleModel::new(SizeModel::Normal);
        let (mut num, mut den) = (0.0, 0.0);
        let steps = 20_000;
        for k in 0..steps {
            let z = -8.0 + 16.0 * (k as f64 + 0.5) / steps as f64;
            let e = q + t * z;
            let w = (-0.5 * z * z).exp();
            let y = PI * e * s;
            num += w * e.powi(4) * (2.0 * j1(y) / y).powi(2);
            den += w * e.powi(4);
        }
        let got = m.halo(q, t, s).0;
        assert!((got - num / den).abs() < 1e-7, "{got} vs {}", num / den);
    }

    #[test]
    fn lognormal_nodes_have_the_asked_mean_and_sd() {
        // The rule's expectations of e and e² against q and q² + t² (the definition of
        // the number mean and variance).
        let rule = NormalRule::new(NODES);
        let (q, t) = (30.0, 9.0);
        let mean = rule.expect(|z| SizeModel::Lognormal.node(q, t, z).0);
        let second = rule.expect(|z| SizeModel::Lognormal.node(q, t, z).0.powi(2));
        assert!((mean - q).abs() < 1e-9 * q, "{mean}");
        assert!((second - mean * mean - t * t).abs() < 1e-6 * t * t);
    }

    #[test]
    fn node_derivatives_match_differences() {
        for shape in [SizeModel::Normal, SizeModel::Lognormal] {
            let (q, t, z) = (15.0, 2.5, 1.3);
            let (_, dq, dt) = shape.node(q, t, z);
            let h = 1e-6;
            let fq = (shape.node(q + h, t, z).0 - shape.node(q - h, t, z).0) / (2.0 * h);
            let ft = (shape.node(q, t + h, z).0 - shape.node(q, t - h, z).0) / (2.0 * h);
            assert!(
                (dq - fq).abs() < 1e-7 && (dt - ft).abs() < 1e-7,
                "{shape:?}"
            );
        }
        let m = EnsembleModel::new(SizeModel::Lognormal);
        let (q, t, s) = (15.0, 2.5, 0.2);
        let (_, dq, dt, ds) = m.halo(q, t, s);
        let h = 1e-6;
        let f = |a: f64, b: f64, c: f64| m.halo(a, b, c).0;
        assert!((dq - (f(q + h, t, s) - f(q - h, t, s)) / (2.0 * h)).abs() < 1e-6);
        assert!((dt - (f(q, t + h, s) - f(q, t - h, s)) / (2.0 * h)).abs() < 1e-6);
        assert!((ds - (f(q, t, s + 1e-8) - f(q, t, s - 1e-8)) / 2e-8).abs() < 1e-4);
    }

    #[test]
    fn bin_masses_follow_the_normal_table() {
        // Φ(1) − Φ(−1) = 0.682689 (A&S table 26.1), the table's 8 digits.
        let m = SizeModel::Normal.mass_between(10.0, 2.0, 8.0, 12.0);
        assert!((m - 0.682_689_49).abs() < 1e-8, "{m}");
        let l = SizeModel::Lognormal.mass_between(10.0, 2.0, 0.0, 1e9);
        assert!((l - 1.0).abs() < 1e-6);
    }
}
