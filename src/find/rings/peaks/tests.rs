//! The peak finder on synthetic radial profiles: a saturated core, a glow with a knee
//! (the shape a phosphor's diffuse light takes, falling as r⁻³ beyond it), a sharp tube edge
//! at 50 mm, rings a few per cent high written here as Gaussians in radius spread over
//! their circumference, and correlated noise (AR(1), as blur and grain make neighbouring
//! bins alike).

use super::*;
use rand::SeedableRng;
use rand::rngs::StdRng;
use rand_distr::{Distribution, Normal};

const BIN: f64 = 0.07;
const PX: f64 = 0.14;

fn glow(r: f64) -> f64 {
    0.6 * (1.0 + (r / 9.0).powi(2)).powf(-1.5) + 0.03
}

/// (radius mm, σ mm, height over the glow).
type Ring = (f64, f64, f64);

fn profile(rings: &[Ring], noise: f64, seed: u64) -> RadialProfile {
    let n = 900;
    let mut rng = StdRng::seed_from_u64(seed);
    let normal = Normal::new(0.0, 1.0).unwrap();
    let phi: f64 = 0.8;
    let mut e = 0.0;
    let mut p = RadialProfile::default();
    for i in 0..n {
        let r = (i as f64 + 0.5) * BIN;
        e = phi * e + (1.0 - phi * phi).sqrt() * normal.sample(&mut rng);
        let (v, se, clipped) = if r < 3.0 {
            (1.0, 0.0, true)
        } else if r > 50.0 {
            (0.003 * (1.0 + noise * e), 0.003 * noise, false)
        } else {
            let ring: f64 = rings
                .iter()
                .map(|&(c, s, a)| a * glow(c) * c / r * (-0.5 * ((r - c) / s).powi(2)).exp())
                .sum();
            let v = glow(r) + ring;
            (v * (1.0 + noise * e), v * noise, false)
        };
        p.r_mm.push(r);
        p.value.push(v);
        p.std_error.push(se);
        p.sectors.push(36);
        p.clipped.push(clipped);
    }
    p
}

fn opts() -> PeakOptions {
    PeakOptions {
        px_mm: PX,
        core_mm: 3.0,
    }
}

const GOLD_LIKE: [Ring; 5] = [
    (10.17, 0.33, 0.030),
    (11.75, 0.33, 0.025),
    (16.67, 0.33, 0.035),
    (19.60, 0.33, 0.040),
    // On the outer flank of the last, 2.7 σ away: not a maximum of the profile.
    (20.48, 0.33, 0.025),
];

#[test]
fn nearly_noise_free_rings_come_back_to_a_few_micrometres() {
    let p = profile(&GOLD_LIKE, 1e-4, 1);
    let s = find_ring_peaks(&p, &opts(), &FromResiduals).unwrap();
    assert_eq!(
        s.peaks.len(),
        GOLD_LIKE.len(),
        "{:?}\n{:?}",
        s.peaks,
        s.rejected
    );
    for (peak, ring) in s.peaks.iter().zip(GOLD_LIKE) {
        // 0.05 % of the radius: what the glow's polynomial leaves under the rings.
        assert!(
            (peak.radius_mm / ring.0 - 1.0).abs() < 5e-4,
            "{peak:?} vs {ring:?}"
        );
        assert!((peak.fwhm_mm / (FWHM_PER_SIGMA * ring.1) - 1.0).abs() < 0.02);
    }
    let e = s.edge.unwrap();
    assert!((e.radius_mm - 50.0).abs() < BIN, "{e:?}");
}

#[test]
fn rings_in_correlated_noise_are_found_within_their_uncertainty() {
    // 0.2 % noise per bin (what a simulated tube photo's profile shows between its
    // rings), rings 2.5–4 % high. Over seeds, every ring is found and nothing else is; the
    // stated u(r) covers the error as DESIGN §6 asks (|error| ≤ 2u in 95 %: here at least
    // 90 % of the few dozen cases, and none beyond 4u).
    let (mut within, mut all) = (0, 0);
    for seed in 1..=8 {
        let p = profile(&GOLD_LIKE, 0.002, seed);
        let s = find_ring_peaks(&p, &opts(), &FromResiduals).unwrap();
        assert_eq!(
            s.peaks.len(),
            GOLD_LIKE.len(),
            "seed {seed}: {:?}\nrejected {:?}",
            s.peaks,
            s.rejected
        );
        for (peak, ring) in s.peaks.iter().zip(GOLD_LIKE) {
            let err = (peak.radius_mm - ring.0).abs();
            assert!(
                err <= 4.0 * peak.u_radius_mm && peak.u_radius_mm < 0.1,
                "seed {seed}: {peak:?} vs {ring:?}"
            );
            within += usize::from(err <= 2.0 * peak.u_radius_mm);
            all += 1;
            assert!(peak.significance >= MIN_SIGNIFICANCE);
        }
    }
    assert!(
        within as f64 >= 0.9 * all as f64,
        "{within} of {all} within 2u"
    );
}

#[test]
fn glow_and_noise_alone_give_no_rings() {
    for seed in 1..=10 {
        let p = profile(&[], 0.003, seed);
        let s = find_ring_peaks(&p, &opts(), &FromResiduals).unwrap();
        assert!(s.peaks.is_empty(), "seed {seed}: {:?}", s.peaks);
        assert!(s.edge.is_some());
    }
}

#[test]
fn a_ring_too_faint_for_the_noise_does_not_count() {
    // 0.1 % high in 0.3 % noise per bin: about one standard uncertainty of its height.
    let rings = [(15.0, 0.33, 0.001), (25.0, 0.33, 0.03)];
    for seed in 7..=10 {
        let p = profile(&rings, 0.003, seed);
        let s = find_ring_peaks(&p, &opts(), &FromResiduals).unwrap();
        assert_eq!(
            s.peaks.len(),
            1,
            "seed {seed}: {:?}\n{:?}",
            s.peaks,
            s.rejected
        );
        let p = &s.peaks[0];
        assert!((p.radius_mm - 25.0).abs() < 4.0 * p.u_radius_mm, "{p:?}");
    }
}

#[test]
fn the_search_stops_where_the_frame_cuts_the_pattern() {
    let cut = 18.5;
    let mut p = profile(&GOLD_LIKE, 0.002, 2);
    for i in 0..p.r_mm.len() {
        if p.r_mm[i] > cut {
            p.value[i] = f64::NAN;
            p.std_error[i] = f64::NAN;
        }
    }
    let s = find_ring_peaks(&p, &opts(), &FromResiduals).unwrap();
    let seen = s.frame_cut_mm.unwrap();
    assert!((seen - cut).abs() < 2.0 * BIN, "{seen}");
    assert!(s.edge.is_none());
    // The three rings inside the cut, none beyond it.
    assert_eq!(s.peaks.len(), 3, "{:?}\n{:?}", s.peaks, s.rejected);
    assert!(s.peaks.iter().all(|p| p.radius_mm < cut));
}

#[test]
fn the_analytic_jacobian_matches_differences() {
    let p = profile(&GOLD_LIKE, 0.002, 3);
    let g = Glow::fit(&p, 3.5, 48.0, PX).unwrap();
    let idx: Vec<usize> = (0..p.r_mm.len())
        .filter(|&i| p.r_mm[i] > 17.5 && p.r_mm[i] < 22.5)
        .collect();
    let problem = RingFit {
        r: idx.iter().map(|&i| p.r_mm[i]).collect(),
        v: idx.iter().map(|&i| p.value[i]).collect(),
        w: idx.iter().map(|&i| 1.0 / p.std_error[i]).collect(),
        glow: &g,
        centre: 20.0,
        half: 2.5,
        fixed: vec![],
    };
    let params = [0.01, -0.02, 0.003, 0.04, 19.62, 0.34, 0.02, 20.5];
    let m = problem.r.len();
    let mut r = vec![0.0; m];
    assert!(problem.residuals(&params, &mut r));
    let (mut exact, mut diff) = (DMatrix::zeros(m, 8), DMatrix::zeros(m, 8));
    assert!(problem.jacobian(&params, &r, &mut exact));
    assert!(forward_difference_jacobian(
        &problem, &params, &r, &mut diff
    ));
    for j in 0..8 {
        let scale = exact.column(j).norm();
        let err = (exact.column(j) - diff.column(j)).norm();
        assert!(err <= 1e-5 * scale, "column {j}: {err} of {scale}");
    }
}
