//! Propagation of distributions by Monte Carlo after JCGM 101:2008 §7: draw the inputs from
//! their distributions (correlated normal inputs through the Cholesky factor of their
//! correlation matrix, §6.4.8), evaluate the model, and summarize each output by its mean,
//! standard deviation (§7.6) and probabilistically symmetric 95 % coverage interval (§7.7).
//!
//! Trials run in parallel in fixed chunks, each with its own generator seeded from the seed
//! and the chunk's index, so a given seed gives the same result on any number of threads.

use rand::rngs::Xoshiro256PlusPlus;
use rand::{RngExt, SeedableRng};
use rand_distr::StandardNormal;
use rayon::prelude::*;

use super::{Correlation, Distribution, Input, UncertaintyError, check_inputs};

/// Coverage probability of [`McEstimate`]'s interval.
pub const COVERAGE_PROBABILITY: f64 = 0.95;

/// Trials for a 95 % interval: JCGM 101:2008 §7.2.2 asks for M ≥ 10⁴/(1 − p), 2·10⁵ for
/// p = 0.95, so that the interval endpoints are reliable to about two significant digits.
pub const DEFAULT_TRIALS: usize = 200_000;

/// The fraction of trials in which the model may fail (no solution, non-finite output)
/// before the Monte Carlo result is refused: beyond it the failures would bias the output
/// distribution noticeably.
pub const MAX_FAILED_FRACTION: f64 = 0.01;

/// The least number of trials that forms a 95 % interval: 1/(1 − p) = 20.
const MIN_TRIALS: usize = 20;

/// Trials per chunk: a unit of parallel work and of seeding, independent of the thread count.
const CHUNK: usize = 4096;

/// JCGM 101:2008 §7.2.2: M ≥ 10⁴/(1 − p) for a coverage probability p (0 < p < 1).
pub fn recommended_trials(p: f64) -> usize {
    (1e4 / (1.0 - p)).ceil() as usize
}

/// Summary of one output's Monte Carlo distribution.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct McEstimate {
    /// Mean of the output values (JCGM 101:2008 eq. 13).
    pub mean: f64,
    /// Their standard deviation (JCGM 101:2008 eq. 14).
    pub u: f64,
    /// Lower end of the 95 % probabilistically symmetric coverage interval (§7.7.2).
    pub low: f64,
    /// Upper end of that interval.
    pub high: f64,
}

/// The result of [`monte_carlo`].
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct MonteCarlo {
    /// Trials run.
    pub trials: usize,
    /// Trials in which the model failed or gave non-finite outputs (left out of the summary).
    pub failed: usize,
    /// One summary per model output.
    pub outputs: Vec<McEstimate>,
}

/// Runs `trials` Monte Carlo trials (see [`DEFAULT_TRIALS`]) of `model` with the inputs drawn
/// from their distributions and the given correlations, reproducibly for a given `seed`.
/// Correlated inputs must be normal and their correlation matrix positive definite. Trials in
/// which the model fails are counted and left out; more than 1 % of them is an error.
pub fn monte_carlo<E: Send>(
    inputs: &[Input],
    correlations: &[Correlation],
    model: impl Fn(&[f64]) -> Result<Vec<f64>, E> + Sync,
    trials: usize,
    seed: u64,
) -> Result<MonteCarlo, UncertaintyError> {
    check_inputs(inputs)?;
    if trials < MIN_TRIALS {
        return Err(UncertaintyError::TooFewTrials {
            trials,
            min: MIN_TRIALS,
            recommended: recommended_trials(COVERAGE_PROBABILITY),
        });
    }
    let sampler = Sampler::new(inputs, correlations)?;
    let x0: Vec<f64> = inputs.iter().map(|i| i.value).collect();
    let m = match model(&x0) {
        Ok(y) if y.is_empty() => return Err(UncertaintyError::NoOutputs),
        Ok(y) => y.len(),
        Err(_) => return Err(UncertaintyError::ModelFailsAtEstimate),
    };

    let chunks = trials.div_ceil(CHUNK);
    let results: Vec<Chunk> = (0..chunks)
        .into_par_iter()
        .map(|c| {
            let count = CHUNK.min(trials - c * CHUNK);
            run_chunk(&sampler, &model, m, count, chunk_seed(seed, c as u64))
        })
        .collect();

    let mut failed = 0;
    let mut values = Vec::with_capacity(trials * m);
    for chunk in results {
        if let Some(got) = chunk.wrong_count {
            return Err(UncertaintyError::OutputCount { expected: m, got });
        }
        failed += chunk.failed;
        values.extend_from_slice(&chunk.values);
    }
    if failed as f64 > MAX_FAILED_FRACTION * trials as f64 {
        return Err(UncertaintyError::TooManyFailures { failed, trials });
    }
    let valid = trials - failed;
    let outputs = (0..m)
        .map(|o| {
            let mut column: Vec<f64> = (0..valid).map(|t| values[t * m + o]).collect();
            summarize(&mut column)
        })
        .collect();
    Ok(MonteCarlo {
        trials,
        failed,
        outputs,
    })
}

/// Draws input vectors.
struct Sampler {
    mean: Vec<f64>,
    u: Vec<f64>,
    rectangular: Vec<bool>,
    /// Row i of the lower Cholesky factor of the correlation matrix, non-zero entries only
    /// (just (i, 1) for an uncorrelated input), so independent inputs cost one draw each.
    rows: Vec<Vec<(usize, f64)>>,
}

impl Sampler {
    fn new(inputs: &[Input], correlations: &[Correlation]) -> Result<Self, UncertaintyError> {
        let n = inputs.len();
        let r = super::correlation_matrix(n, correlations)?;
        for c in correlations.iter().filter(|c| c.r != 0.0) {
            for k in [c.i, c.j] {
                if inputs[k].distribution != Distribution::Normal {
                    return Err(UncertaintyError::CorrelatedNonNormal {
                        name: inputs[k].name.clone(),
                    });
                }
            }
        }
        let l = nalgebra::Cholesky::new(r)
            .ok_or(UncertaintyError::NotPositiveDefinite {
                what: "definite",
                hint: "; Monte Carlo needs it definite, so express fully correlated inputs \
                       (r = ±1) through one input in the model",
            })?
            .l();
        let rows = (0..n)
            .map(|i| {
                (0..=i)
                    .filter(|&j| l[(i, j)] != 0.0)
                    .map(|j| (j, l[(i, j)]))
                    .collect()
            })
            .collect();
        Ok(Sampler {
            mean: inputs.iter().map(|i| i.value).collect(),
            u: inputs.iter().map(|i| i.u).collect(),
            rectangular: inputs
                .iter()
                .map(|i| i.distribution == Distribution::Rectangular)
                .collect(),
            rows,
        })
    }

    fn draw(&self, rng: &mut Xoshiro256PlusPlus, z: &mut [f64], x: &mut [f64]) {
        for (zi, &rect) in z.iter_mut().zip(&self.rectangular) {
            *zi = if rect {
                0.0
            } else {
                rng.sample(StandardNormal)
            };
        }
        for (i, xi) in x.iter_mut().enumerate() {
            *xi = if self.rectangular[i] {
                // Uniform over mean ± a with a = √3·u (JCGM 101:2008 §6.4.2).
                let a = 3f64.sqrt() * self.u[i];
                self.mean[i] + a * (2.0 * rng.random::<f64>() - 1.0)
            } else {
                let correlated: f64 = self.rows[i].iter().map(|&(j, l)| l * z[j]).sum();
                self.mean[i] + self.u[i] * correlated
            };
        }
    }
}

/// One chunk's outputs, trial after trial (m values each), for the trials that succeeded.
struct Chunk {
    values: Vec<f64>,
    failed: usize,
    wrong_count: Option<usize>,
}

fn run_chunk<E>(
    sampler: &Sampler,
    model: &(impl Fn(&[f64]) -> Result<Vec<f64>, E> + Sync),
    m: usize,
    count: usize,
    seed: u64,
) -> Chunk {
    let n = sampler.mean.len();
    let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
    let (mut z, mut x) = (vec![0.0; n], vec![0.0; n]);
    let mut chunk = Chunk {
        values: Vec::with_capacity(count * m),
        failed: 0,
        wrong_count: None,
    };
    for _ in 0..count {
        sampler.draw(&mut rng, &mut z, &mut x);
        match model(&x) {
            Ok(y) if y.len() != m => {
                chunk.wrong_count = Some(y.len());
                return chunk;
            }
            Ok(y) if y.iter().all(|v| v.is_finite()) => chunk.values.extend_from_slice(&y),
            _ => chunk.failed += 1,
        }
    }
    chunk
}

/// SplitMix64 finalizer (Steele, Lea & Flood, OOPSLA 2014): decorrelates nearby integers.
fn splitmix64(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The seed of one chunk. Mixing both numbers keeps the chunks of seed s + 1 from repeating
/// shifted chunks of seed s, as a plain sum would.
fn chunk_seed(seed: u64, chunk: u64) -> u64 {
    splitmix64(splitmix64(seed) ^ chunk)
}

/// Mean, standard deviation and 95 % probabilistically symmetric interval of `values`
/// (at least [`MIN_TRIALS`] finite numbers; reordered in place).
fn summarize(values: &mut [f64]) -> McEstimate {
    let count = values.len();
    let mean = values.iter().sum::<f64>() / count as f64;
    let ss: f64 = values.iter().map(|v| (v - mean) * (v - mean)).sum();
    let u = (ss / (count.saturating_sub(1).max(1)) as f64).sqrt();
    let (lo, hi) = interval_ranks(count);
    let (_, low, rest) = values.select_nth_unstable_by(lo, f64::total_cmp);
    let low = *low;
    let high = *rest.select_nth_unstable_by(hi - lo - 1, f64::total_cmp).1;
    McEstimate { mean, u, low, high }
}

/// 0-based ranks of the ends of the 95 % probabilistically symmetric interval among `count`
/// sorted values (JCGM 101:2008 §7.7.2): q = pM if that is an integer, else ⌊pM + ½⌋;
/// r = (M − q)/2 if M − q is even, else (M − q + 1)/2; the interval is [y₍ᵣ₎, y₍ᵣ₊q₎] counting
/// from 1. For p = 95/100, ⌊(95M + 50)/100⌋ is both cases at once, in exact integers.
fn interval_ranks(count: usize) -> (usize, usize) {
    let q = (95 * count + 50) / 100;
    let r = (count - q).div_ceil(2).max(1);
    (r - 1, (r + q - 1).min(count - 1))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn interval_ranks_follow_jcgm_101_7_7_2() {
        // M = 2·10⁵: q = 190 000, M − q = 10 000 even, r = 5000: [y(5000), y(195000)].
        assert_eq!(interval_ranks(200_000), (4999, 194_999));
        // M = 20: q = 19, M − q odd, r = 1: the whole range.
        assert_eq!(interval_ranks(20), (0, 19));
        // M = 101: pM = 95.95 → q = 96, M − q = 5 odd, r = 3: [y(3), y(99)].
        assert_eq!(interval_ranks(101), (2, 98));
    }

    #[test]
    fn summarize_matches_direct_order_statistics() {
        let mut v: Vec<f64> = (0..200).map(|i| ((i * 37) % 200) as f64).collect();
        let s = summarize(&mut v);
        assert_eq!(s.mean, 99.5);
        // q = 190, r = 5: y(5) = 4, y(195) = 194 counting from 1 on 0..199.
        assert_eq!((s.low, s.high), (4.0, 194.0));
        let var: f64 = (0..200).map(|i| (i as f64 - 99.5).powi(2)).sum::<f64>() / 199.0;
        assert!((s.u - var.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn chunk_seeds_differ() {
        let a: Vec<u64> = (0..4).map(|c| chunk_seed(1, c)).collect();
        let b: Vec<u64> = (0..4).map(|c| chunk_seed(2, c)).collect();
        assert!(a.iter().all(|s| !b.contains(s)));
        assert_ne!(a[0], a[1]);
    }
}
