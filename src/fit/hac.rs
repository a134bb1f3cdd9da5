//! Parameter covariance that stays honest when residuals are neither independent nor of
//! equal variance: the heteroscedasticity-and-autocorrelation-consistent "sandwich"
//! (JᵀJ)⁻¹·Ω·(JᵀJ)⁻¹ with Ω = Σ_k w_k Σ_i (J_iᵀ r_i r_{i+k} J_{i+k} + transpose), Bartlett
//! weights w_k = 1 − k/(lags + 1) (Newey & West, *Econometrica* 55(3):703, 1987).
//!
//! A fringe profile is sampled every pixel while laser speckle and lens blur correlate its
//! noise over several pixels, and its shot noise grows with the intensity: the textbook
//! (JᵀJ)⁻¹·s² would understate the uncertainty there by the square root of the correlation
//! length.

use nalgebra::DMatrix;

/// Number of lags to sum: twice the lag at which the residuals' autocorrelation first falls
/// below 0.05, so that the Bartlett window's taper loses little of the correlated stretch
/// (the fixed rule 4·(m/100)^(2/9) of Newey & West 1994 is too short for the tens of
/// correlated samples a speckled profile has); at least 2, at most a quarter of the series.
pub fn correlation_lags(residuals: &[f64]) -> usize {
    let n = residuals.len();
    if n < 8 {
        return 0;
    }
    let mean = residuals.iter().sum::<f64>() / n as f64;
    let c0: f64 = residuals.iter().map(|r| (r - mean).powi(2)).sum();
    if !(c0 > 0.0) {
        return 0;
    }
    let cap = n / 4;
    let mut first_low = cap;
    for k in 1..cap {
        let ck: f64 = residuals
            .windows(k + 1)
            .map(|w| (w[0] - mean) * (w[k] - mean))
            .sum();
        if ck / c0 < 0.05 {
            first_low = k;
            break;
        }
    }
    (2 * first_low).clamp(2, cap.max(2))
}

/// The Newey–West covariance of least-squares parameters from the Jacobian (m × n) and the
/// residuals (length m, in sampling order) at the solution, with `lags` lags. Scaled by
/// m/(m − n) for the fitted degrees of freedom. None when JᵀJ is singular.
pub fn sandwich_covariance(
    jac: &DMatrix<f64>,
    residuals: &[f64],
    lags: usize,
) -> Option<DMatrix<f64>> {
    let (m, n) = jac.shape();
    if m != residuals.len() || m <= n {
        return None;
    }
    let bread = super::lm::inverse_normal_matrix(jac)?;
    // Score rows g_i = r_i·J_i.
    let g = DMatrix::from_fn(m, n, |i, j| residuals[i] * jac[(i, j)]);
    let mut meat = g.transpose() * &g;
    for k in 1..=lags.min(m - 1) {
        let w = 1.0 - k as f64 / (lags as f64 + 1.0);
        let head = g.rows(0, m - k);
        let tail = g.rows(k, m - k);
        let cross = head.transpose() * tail;
        meat += (&cross + cross.transpose()) * w;
    }
    let dof = m as f64 / (m - n) as f64;
    Some(&bread * meat * &bread * dof)
}

/// The autocorrelation of a long residual series at lags 0, 1, …, K, Bartlett-tapered
/// (ρ̃ₖ = (1 − k/(K + 1))·ρₖ, which keeps the implied covariance positive semi-definite,
/// Newey & West 1987), K twice the lag at which ρ first falls below 0.05 as in
/// [`correlation_lags`]. Pairs with a sample marked invalid are skipped; the residuals are
/// taken as zero-mean. Empty when fewer than 8 samples are valid.
pub fn tapered_autocorrelation(residuals: &[f64], valid: &[bool]) -> Vec<f64> {
    let n = residuals.len().min(valid.len());
    let ok = |i: usize| valid[i] && residuals[i].is_finite();
    if (0..n).filter(|&i| ok(i)).count() < 8 {
        return Vec::new();
    }
    let cap = (n / 4).max(1);
    let rho = |k: usize| -> f64 {
        let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
        for i in 0..n - k {
            if ok(i) && ok(i + k) {
                let (x, y) = (residuals[i], residuals[i + k]);
                sxy += x * y;
                sxx += x * x;
                syy += y * y;
            }
        }
        if sxx > 0.0 && syy > 0.0 {
            sxy / (sxx * syy).sqrt()
        } else {
            0.0
        }
    };
    let mut raw = vec![1.0];
    let mut first_low = cap;
    for k in 1..cap {
        let r = rho(k);
        raw.push(r);
        if r < 0.05 {
            first_low = k;
            break;
        }
    }
    let lags = (2 * first_low).clamp(1, cap);
    while raw.len() <= lags {
        let k = raw.len();
        raw.push(rho(k));
    }
    (0..=lags)
        .map(|k| (1.0 - k as f64 / (lags as f64 + 1.0)) * raw[k])
        .collect()
}

/// Covariance of least-squares parameters whose residuals have a known autocorrelation
/// (from [`tapered_autocorrelation`] on a longer stretch of the same series) and variance
/// `sigma2`: (JᵀJ)⁻¹·JᵀΩJ·(JᵀJ)⁻¹ with Ω_ij = σ²·ρ(|tᵢ − tⱼ|), `positions` tᵢ being each
/// residual's place in that series. None when JᵀJ is singular or the lengths disagree.
pub fn known_correlation_covariance(
    jac: &DMatrix<f64>,
    positions: &[usize],
    sigma2: f64,
    acf: &[f64],
) -> Option<DMatrix<f64>> {
    let m = jac.nrows();
    if positions.len() != m || acf.is_empty() {
        return None;
    }
    let bread = super::lm::inverse_normal_matrix(jac)?;
    let omega = DMatrix::from_fn(m, m, |i, j| {
        let k = positions[i].abs_diff(positions[j]);
        acf.get(k).copied().unwrap_or(0.0) * sigma2
    });
    let meat = jac.transpose() * omega * jac;
    Some(&bread * meat * &bread)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand::rngs::StdRng;
    use rand_distr::{Distribution, Normal};

    /// Mean estimate (one parameter, J = 1) of AR(1) noise: the true variance of the mean is
    /// σ²/(n(1−φ)²)·(1 + O(1/n)) (e.g. Box, Jenkins & Reinsel, *Time Series Analysis*,
    /// §2.1.5), larger than σ_x²/n by (1+φ)/(1−φ).
    #[test]
    fn sandwich_covers_the_variance_of_a_mean_of_correlated_noise() {
        let (n, phi, sigma) = (4000usize, 0.8f64, 1.0f64);
        let mut rng = StdRng::seed_from_u64(11);
        let normal = Normal::new(0.0, sigma).unwrap();
        let mut ratios = Vec::new();
        for _ in 0..40 {
            let mut x = vec![0.0; n];
            let mut prev = 0.0;
            for v in x.iter_mut() {
                prev = phi * prev + normal.sample(&mut rng);
                *v = prev;
            }
            let mean = x.iter().sum::<f64>() / n as f64;
            let r: Vec<f64> = x.iter().map(|v| v - mean).collect();
            let jac = DMatrix::from_element(n, 1, 1.0);
            let lags = correlation_lags(&r);
            let cov = sandwich_covariance(&jac, &r, lags).unwrap();
            ratios.push(cov[(0, 0)]);
        }
        let mean_var = ratios.iter().sum::<f64>() / ratios.len() as f64;
        let truth = sigma * sigma / (n as f64 * (1.0 - phi).powi(2));
        // The Bartlett taper biases the estimate low by about 15 % at this correlation
        // (1 + 2Σ(1 − k/29)·0.8^k ≈ 7.6 of the full 9); the naive σ_x²/n is 9× too small.
        assert!(
            mean_var > 0.7 * truth && mean_var < 1.2 * truth,
            "{mean_var} vs {truth}"
        );
        let naive = sigma * sigma / (1.0 - phi * phi) / n as f64;
        assert!(mean_var > 3.0 * naive);
    }

    /// With white noise the sandwich reduces to the usual s²(JᵀJ)⁻¹ (Newey & West 1987,
    /// with zero autocovariances).
    #[test]
    fn white_noise_gives_the_textbook_covariance() {
        let n = 2000;
        let mut rng = StdRng::seed_from_u64(3);
        let normal = Normal::new(0.0, 0.5).unwrap();
        let x: Vec<f64> = (0..n).map(|i| i as f64 / n as f64).collect();
        let r: Vec<f64> = (0..n).map(|_| normal.sample(&mut rng)).collect();
        let jac = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let hac = sandwich_covariance(&jac, &r, 0).unwrap();
        let s2 = r.iter().map(|v| v * v).sum::<f64>() / (n - 2) as f64;
        let textbook = super::super::lm::inverse_normal_matrix(&jac).unwrap() * s2;
        for i in 0..2 {
            let rel = hac[(i, i)] / textbook[(i, i)];
            assert!((rel - 1.0).abs() < 0.15, "{rel}");
        }
        assert!(correlation_lags(&r) <= 4);
    }
    /// The variance of a mean of AR(1) noise from the series' own tapered
    /// autocorrelation: σ²/(n(1−φ)²) (Box, Jenkins & Reinsel, §2.1.5), less the taper's
    /// share, far above the naive σ²/n.
    #[test]
    fn known_correlation_gives_the_variance_of_a_correlated_mean() {
        let (n, phi) = (20000usize, 0.8f64);
        let mut rng = StdRng::seed_from_u64(5);
        let normal = Normal::new(0.0, (1.0 - phi * phi).sqrt()).unwrap();
        let mut prev = 0.0;
        let x: Vec<f64> = (0..n)
            .map(|_| {
                prev = phi * prev + normal.sample(&mut rng);
                prev
            })
            .collect();
        let acf = tapered_autocorrelation(&x, &vec![true; n]);
        assert!((acf[1] / (1.0 - 1.0 / acf.len() as f64) - phi).abs() < 0.03);
        // A window of 200 samples fitted by its mean.
        let m = 200;
        let jac = DMatrix::from_element(m, 1, 1.0);
        let pos: Vec<usize> = (0..m).collect();
        let v = known_correlation_covariance(&jac, &pos, 1.0, &acf).unwrap()[(0, 0)];
        let truth = (1.0 + phi) / (1.0 - phi) / m as f64; // σ² = 1, large-m form
        assert!(v > 0.7 * truth && v < 1.1 * truth, "{v} vs {truth}");
    }
}
