//! Gauss–Hermite quadrature for expectations over a normal variable: E[f(Z)] ≈ Σ wᵢ f(zᵢ)
//! for Z ~ N(0, 1), exact for polynomials of degree up to 2n − 1.
//!
//! Nodes and weights come from the Golub–Welsch algorithm (Golub & Welsch, "Calculation of
//! Gauss quadrature rules", *Math. Comp.* 23, 1969): the nodes are the eigenvalues of the
//! symmetric tridiagonal Jacobi matrix of the monic orthogonal polynomials, here the
//! probabilists' Hermite polynomials Heₖ (Heₖ₊₁ = x·Heₖ − k·Heₖ₋₁, so the off-diagonal is
//! √k), and each weight is the squared first component of its unit eigenvector times the
//! total mass, 1 for the standard normal density.

use nalgebra::{DMatrix, SymmetricEigen};

/// Nodes and weights of an n-point rule for the standard normal density, nodes ascending,
/// weights summing to 1.
#[derive(Debug, Clone, PartialEq)]
pub struct NormalRule {
    /// The nodes zᵢ.
    pub nodes: Vec<f64>,
    /// The weights wᵢ > 0.
    pub weights: Vec<f64>,
}

impl NormalRule {
    /// The n-point Gauss–Hermite rule for N(0, 1) (n ≥ 1).
    pub fn new(n: usize) -> NormalRule {
        let n = n.max(1);
        let jacobi = DMatrix::from_fn(n, n, |i, j| {
            if i.abs_diff(j) == 1 {
                (i.max(j) as f64).sqrt()
            } else {
                0.0
            }
        });
        let eig = SymmetricEigen::new(jacobi);
        let mut pairs: Vec<(f64, f64)> = (0..n)
            .map(|k| (eig.eigenvalues[k], eig.eigenvectors[(0, k)].powi(2)))
            .collect();
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
        // The rule is symmetric; averaging each node with its mirror removes the
        // eigensolver's last-digit asymmetry, so odd moments vanish to rounding.
        let mut nodes: Vec<f64> = pairs.iter().map(|p| p.0).collect();
        let mut weights: Vec<f64> = pairs.iter().map(|p| p.1).collect();
        for i in 0..n / 2 {
            let j = n - 1 - i;
            let z = 0.5 * (nodes[j] - nodes[i]);
            let w = 0.5 * (weights[i] + weights[j]);
            (nodes[i], nodes[j], weights[i], weights[j]) = (-z, z, w, w);
        }
        if n % 2 == 1 {
            nodes[n / 2] = 0.0;
        }
        let total: f64 = weights.iter().sum();
        weights.iter_mut().for_each(|w| *w /= total);
        NormalRule { nodes, weights }
    }

    /// E[f(Z)] by the rule.
    pub fn expect(&self, f: impl Fn(f64) -> f64) -> f64 {
        self.nodes
            .iter()
            .zip(&self.weights)
            .map(|(&z, &w)| w * f(z))
            .sum()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn three_points_match_the_closed_form() {
        // Physicists' 3-point rule (A&S table 25.10): x = 0, ±√(3/2), weights 2√π/3 and
        // √π/6. With z = √2·x and weights over √π: z = 0, ±√3, weights 2/3 and 1/6.
        let r = NormalRule::new(3);
        let want_z = [-(3f64.sqrt()), 0.0, 3f64.sqrt()];
        let want_w = [1.0 / 6.0, 2.0 / 3.0, 1.0 / 6.0];
        for k in 0..3 {
            assert!((r.nodes[k] - want_z[k]).abs() < 1e-14, "{:?}", r.nodes);
            assert!((r.weights[k] - want_w[k]).abs() < 1e-14, "{:?}", r.weights);
        }
        // And the 2-point rule: x = ±1/√2, weights √π/2 each (A&S table 25.10).
        let r = NormalRule::new(2);
        assert!((r.nodes[1] - 1.0).abs() < 1e-14 && (r.weights[0] - 0.5).abs() < 1e-14);
    }

    #[test]
    fn moments_of_the_normal_are_exact_up_to_degree_2n_minus_1() {
        // E[Z^(2k)] = (2k − 1)!! for the standard normal, odd moments 0 (any statistics
        // text; e.g. Papoulis, *Probability, Random Variables and Stochastic Processes*).
        let n = 24;
        let r = NormalRule::new(n);
        let mut double_factorial = 1.0;
        for k in 0..n {
            if k > 0 {
                double_factorial *= (2 * k - 1) as f64;
            }
            let even = r.expect(|z| z.powi(2 * k as i32));
            assert!(
                (even - double_factorial).abs() < 1e-9 * double_factorial,
                "E[Z^{}] = {even}, want {double_factorial}",
                2 * k
            );
            let odd = r.expect(|z| z.powi(2 * k as i32 + 1));
            assert!(
                odd.abs() < 1e-9 * double_factorial.max(1.0),
                "odd {k}: {odd}"
            );
        }
    }

    #[test]
    fn a_smooth_expectation_converges_to_the_closed_form() {
        // E[cos(aZ)] = exp(−a²/2), the normal's characteristic function.
        let a = 3.0;
        let r = NormalRule::new(40);
        let got = r.expect(|z| (a * z).cos());
        assert!((got - (-a * a / 2.0f64).exp()).abs() < 1e-12, "{got}");
        // The weights are the density's mass: they sum to 1 and the largest sits near
        // 0 with about 1/√(2π) times the node spacing there.
        assert!((r.weights.iter().sum::<f64>() - 1.0).abs() < 1e-14);
        let mid = r.nodes.len() / 2;
        let spacing = r.nodes[mid] - r.nodes[mid - 1];
        let density = r.weights[mid] / spacing;
        assert!(
            (density - 1.0 / (2.0 * PI).sqrt()).abs() < 0.02,
            "{density}"
        );
    }
}
