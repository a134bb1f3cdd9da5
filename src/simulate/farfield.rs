//! Far field of a one-dimensional grating from first principles, by the angular spectrum of
//! plane waves (Goodman, *Introduction to Fourier Optics*, ch. 3). The field just behind the
//! grating (thin-element model: the grating's transmission times a Gaussian beam) is sampled
//! finely and Fourier transformed; each frequency bin f is one plane wave whose direction
//! cosine along the grating axis is λ·f plus that of the incident wave. Nothing here knows
//! where the orders go: an order is the group of bins around one Fourier-series index of the
//! periodic transmission, and its power and directions come out of the transform, so the
//! envelope and missing orders are whatever the profile makes them.

use super::SimError;
use rustfft::{FftPlanner, num_complex::Complex};
use serde::{Deserialize, Serialize};

/// The grating's transmission over one period.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "profile", rename_all = "snake_case")]
pub enum GratingProfile {
    /// Opaque and clear bars; `duty` is the clear fraction of a period (0 < duty < 1).
    BinaryAmplitude {
        /// Clear fraction of a period.
        duty: f64,
    },
    /// A lossless grating with phase `amplitude_rad · sin(2π x / pitch)`.
    SinusoidalPhase {
        /// Peak phase excursion in radians.
        amplitude_rad: f64,
    },
}

/// The optical bench: laser, grating and screen. SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GratingSetup {
    /// Laser wavelength (in the medium between grating and screen).
    pub wavelength_m: f64,
    /// Grating period.
    pub pitch_m: f64,
    /// Grating to screen: along the incident beam (transmission) or along the grating
    /// normal (reflection).
    pub distance_m: f64,
    /// Angle between the incident beam and the grating normal, in the plane of the pattern.
    pub incidence_rad: f64,
    /// Reflection grating (e.g. an optical disc) with the screen parallel to it and the
    /// beam through a hole in the screen; otherwise transmission with the screen
    /// perpendicular to the incident beam.
    pub reflect: bool,
    /// 1/e² intensity diameter of the (collimated) Gaussian beam at the grating.
    pub beam_diameter_m: f64,
    /// Transmission profile.
    pub profile: GratingProfile,
}

impl Default for GratingSetup {
    /// A red pointer on a CD-like pitch at half a metre.
    fn default() -> Self {
        GratingSetup {
            wavelength_m: 650e-9,
            pitch_m: 1.6e-6,
            distance_m: 0.5,
            incidence_rad: 0.0,
            reflect: false,
            beam_diameter_m: 1.5e-3,
            profile: GratingProfile::BinaryAmplitude { duty: 0.5 },
        }
    }
}

/// Passes a finite `value` for which `ok` holds; else a `BadInput` naming the input and the
/// accepted range.
pub(super) fn check(
    name: &'static str,
    value: f64,
    ok: bool,
    expected: &'static str,
) -> Result<(), SimError> {
    if value.is_finite() && ok {
        Ok(())
    } else {
        Err(SimError::BadInput {
            name,
            value,
            expected,
        })
    }
}

impl GratingSetup {
    /// Checks every input; the message names the input and the accepted range.
    pub fn validate(&self) -> Result<(), SimError> {
        let l = self.wavelength_m;
        check(
            "wavelength_m",
            l,
            (100e-9..=20e-6).contains(&l),
            "between 100 nm and 20 µm",
        )?;
        let p = self.pitch_m;
        check("pitch_m", p, p > 0.0, "a positive pitch")?;
        let d = self.distance_m;
        check(
            "distance_m",
            d,
            (1e-3..=100.0).contains(&d),
            "between 1 mm and 100 m",
        )?;
        let i = self.incidence_rad;
        check(
            "incidence_rad",
            i,
            i.abs() <= 80f64.to_radians(),
            "within ±80° of the grating normal",
        )?;
        let b = self.beam_diameter_m;
        check(
            "beam_diameter_m",
            b,
            (10e-6..=20e-3).contains(&b),
            "between 10 µm and 20 mm",
        )?;
        // Orders are separated only when the beam spans a few periods.
        check(
            "pitch_m",
            p,
            p <= 0.5 * b,
            "at most the beam radius, so that the beam covers enough periods to separate orders",
        )?;
        match self.profile {
            GratingProfile::BinaryAmplitude { duty } => check(
                "duty",
                duty,
                duty > 0.0 && duty < 1.0,
                "a clear fraction strictly between 0 and 1",
            ),
            GratingProfile::SinusoidalPhase { amplitude_rad } => check(
                "amplitude_rad",
                amplitude_rad,
                (0.0..=50.0).contains(&amplitude_rad),
                "a phase excursion between 0 and 50 rad",
            ),
        }
    }
}

/// One plane wave of the angular spectrum.
#[derive(Debug, Clone, Copy)]
pub(crate) struct PlaneWave {
    /// Direction cosine along the grating axis.
    pub alpha: f64,
    /// Fraction of the propagating power.
    pub power: f64,
}

/// The plane waves that make up one order.
#[derive(Debug, Clone)]
pub(crate) struct OrderWaves {
    pub order: i32,
    /// Fraction of the propagating power in this order.
    pub power: f64,
    pub waves: Vec<PlaneWave>,
}

/// All orders of the far field.
#[derive(Debug, Clone)]
pub(crate) struct AngularSpectrum {
    pub orders: Vec<OrderWaves>,
    /// Propagating orders whose power is numerically zero (e.g. even orders at duty 0.5).
    pub missing: Vec<i32>,
    /// Orders cut by the evanescent edge |α| = 1 (grazing; they reach no screen).
    pub grazing: Vec<i32>,
    /// Samples in the transform.
    pub samples: usize,
    /// Width of one bin in direction cosine.
    pub dalpha: f64,
}

/// Samples of the largest transform we accept (complex f64: 64 MiB).
const MAX_SAMPLES: usize = 1 << 22;
/// Orders with less power than this fraction are reported as missing.
const MISSING_POWER: f64 = 1e-9;

/// Computes the far field, sampled over four times the beam's footprint on the grating (the
/// zero padding makes an angular bin about a quarter of the beam's far-field σ).
pub(crate) fn angular_spectrum(setup: &GratingSetup) -> Result<AngularSpectrum, SimError> {
    let lambda = setup.wavelength_m;
    let pitch = setup.pitch_m;
    let w = 0.5 * setup.beam_diameter_m;
    let (sin_i, cos_i) = setup.incidence_rad.sin_cos();
    // The beam's amplitude exp(-(x cos θi / w)²) is below e⁻⁹ beyond this.
    let half_extent = 3.0 * w / cos_i;
    let window = 4.0 * (2.0 * half_extent);

    // Whole samples per period (the sampled grating stays exactly periodic); at least 16 and
    // dx ≤ λ/4 so that aliased harmonics stay small, relaxed to 8 and dx < λ/2 if too long.
    let strict = 16usize.max((4.0 * pitch / lambda).ceil() as usize);
    let loose = 8usize.max((2.0 * pitch / lambda).floor() as usize + 1);
    let count = |per: usize| ((window * per as f64 / pitch).ceil() as usize).next_power_of_two();
    let per_period = if count(strict) <= MAX_SAMPLES / 2 {
        strict
    } else {
        loose
    };
    let n = count(per_period);
    if n > MAX_SAMPLES {
        return Err(SimError::TooFine(format!(
            "the far field of a {:.3} µm pitch under a {:.2} mm beam at {:.0} m needs {n} samples \
             (limit {MAX_SAMPLES}); use a narrower beam or a shorter distance",
            pitch * 1e6,
            setup.beam_diameter_m * 1e3,
            setup.distance_m
        )));
    }
    let dx = pitch / per_period as f64;

    let mut field = sample_field(setup, n, dx, cos_i, w);
    FftPlanner::<f64>::new()
        .plan_fft_forward(n)
        .process(&mut field);

    // Bin k is the plane wave exp(+2πi f x) with f = k / (n dx) (k folded to ±n/2).
    let df = 1.0 / (n as f64 * dx);
    let freq = |k: usize| {
        let ks = if k < n / 2 {
            k as f64
        } else {
            k as f64 - n as f64
        };
        ks * df
    };
    let alpha_of = |k: usize| lambda * freq(k) + sin_i;
    let power: Vec<f64> = field.iter().map(|c| c.norm_sqr()).collect();
    let total: f64 = (0..n)
        .filter(|&k| alpha_of(k).abs() < 1.0)
        .map(|k| power[k])
        .sum();
    if total.is_nan() || total <= 0.0 {
        return Err(SimError::NoOrderReachesScreen(
            "no light propagates behind the grating".into(),
        ));
    }

    // Bins of one order: the beam's power spectrum has σ_f = cos θi / (2π w); keep ±8σ.
    let half_width = (8.0 * cos_i / (2.0 * std::f64::consts::PI * w) / df).ceil() as i64;
    let m_lo = (pitch * (-1.0 - sin_i) / lambda - 0.5).ceil() as i64;
    let m_hi = (pitch * (1.0 - sin_i) / lambda + 0.5).floor() as i64;
    let bin_of = |f: f64| -> i64 { (f / df).round() as i64 };
    let index = |ks: i64| -> usize { ks.rem_euclid(n as i64) as usize };

    let mut spectrum = AngularSpectrum {
        orders: Vec::new(),
        missing: Vec::new(),
        grazing: Vec::new(),
        samples: n,
        dalpha: lambda * df,
    };
    for m in m_lo..=m_hi {
        let lo = bin_of((m as f64 - 0.5) / pitch);
        let hi = bin_of((m as f64 + 0.5) / pitch);
        let in_window = (lo..hi).filter(|&ks| alpha_of(index(ks)).abs() < 1.0);
        let order_power: f64 = in_window.clone().map(|ks| power[index(ks)]).sum::<f64>() / total;
        let Some(peak) = in_window.max_by(|&a, &b| power[index(a)].total_cmp(&power[index(b)]))
        else {
            continue;
        };
        let m = m as i32;
        if order_power < MISSING_POWER {
            spectrum.missing.push(m);
            continue;
        }
        let span = (peak - half_width).max(lo)..=(peak + half_width).min(hi - 1);
        let peak_power = power[index(peak)];
        let cut = span
            .clone()
            .any(|ks| alpha_of(index(ks)).abs() >= 1.0 && power[index(ks)] > 1e-6 * peak_power);
        if cut {
            spectrum.grazing.push(m);
            continue;
        }
        let waves = span
            .map(index)
            .filter(|&k| alpha_of(k).abs() < 1.0)
            .map(|k| PlaneWave {
                alpha: alpha_of(k),
                power: power[k] / total,
            })
            .collect();
        spectrum.orders.push(OrderWaves {
            order: m,
            power: order_power,
            waves,
        });
    }
    Ok(spectrum)
}

/// The field just behind the grating, without the incident tilt (which only shifts every
/// direction cosine by sin θi). Each sample is the transmission averaged over its cell, so
/// sharp edges are box-filtered rather than snapped to the grid.
fn sample_field(setup: &GratingSetup, n: usize, dx: f64, cos_i: f64, w: f64) -> Vec<Complex<f64>> {
    let pitch = setup.pitch_m;
    let half = (n / 2) as f64;
    (0..n)
        .map(|j| {
            // Cell j spans [a, a + dx]; grating edges fall on cell boundaries.
            let a = (j as f64 - half) * dx;
            let centre = a + 0.5 * dx;
            let beam = (-(centre * cos_i / w).powi(2)).exp();
            let t = match setup.profile {
                GratingProfile::BinaryAmplitude { duty } => {
                    let open = |x: f64| {
                        let periods = (x / pitch).floor();
                        periods * duty * pitch + (x - periods * pitch).min(duty * pitch)
                    };
                    Complex::new((open(a + dx) - open(a)) / dx, 0.0)
                }
                GratingProfile::SinusoidalPhase { amplitude_rad } => {
                    const SUB: usize = 4;
                    let sum: Complex<f64> = (0..SUB)
                        .map(|s| {
                            let x = a + (s as f64 + 0.5) * dx / SUB as f64;
                            let phase =
                                amplitude_rad * (2.0 * std::f64::consts::PI * x / pitch).sin();
                            Complex::from_polar(1.0, phase)
                        })
                        .sum();
                    sum / SUB as f64
                }
            };
            t * beam
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ratio(spec: &AngularSpectrum, m: i32) -> f64 {
        let p = |k: i32| {
            spec.orders
                .iter()
                .find(|o| o.order == k)
                .map(|o| o.power)
                .unwrap_or(0.0)
        };
        p(m) / p(0)
    }

    #[test]
    fn binary_order_powers_follow_the_rectangular_wave_series() {
        // Fourier series of a rectangular wave of clear fraction D (any optics text, e.g.
        // Goodman, Introduction to Fourier Optics, amplitude gratings): c0 = D,
        // cm = sin(π m D)/(π m), so Pm/P0 = sin²(π m D)/(π m D)².
        let setup = GratingSetup {
            pitch_m: 10e-6,
            profile: GratingProfile::BinaryAmplitude { duty: 0.3 },
            ..GratingSetup::default()
        };
        let spec = angular_spectrum(&setup).unwrap();
        for m in 1..=4 {
            let x = std::f64::consts::PI * m as f64 * 0.3;
            let expected = (x.sin() / x).powi(2);
            let got = ratio(&spec, m);
            assert!(
                (got - expected).abs() < 0.01 * expected + 1e-6,
                "order {m}: {got} vs {expected}"
            );
            assert!((ratio(&spec, -m) - got).abs() < 1e-9 * (1.0 + got));
        }
    }

    #[test]
    fn half_duty_grating_has_no_even_orders() {
        // Same series: sin(π m / 2) = 0 for even m.
        let setup = GratingSetup {
            pitch_m: 10e-6,
            ..GratingSetup::default()
        };
        let spec = angular_spectrum(&setup).unwrap();
        for m in [-4, -2, 2, 4] {
            assert!(spec.missing.contains(&m), "order {m} should be missing");
        }
        assert!(spec.orders.iter().any(|o| o.order == 3));
    }

    /// Bessel function of the first kind by its power series (Abramowitz & Stegun 9.1.10).
    fn bessel_j(m: u32, x: f64) -> f64 {
        let mut term = (0.5 * x).powi(m as i32) / (1..=m).map(f64::from).product::<f64>();
        let mut sum = term;
        for k in 1..60 {
            term *= -(0.25 * x * x) / (k as f64 * (k + m) as f64);
            sum += term;
        }
        sum
    }

    #[test]
    fn sinusoidal_phase_orders_follow_bessel_powers() {
        // Jacobi–Anger: exp(i φ sin u) = Σ Jm(φ) exp(i m u), so Pm ∝ Jm(φ)²
        // (Goodman, Introduction to Fourier Optics, sinusoidal phase grating).
        let phi = 1.8;
        let setup = GratingSetup {
            pitch_m: 20e-6,
            profile: GratingProfile::SinusoidalPhase { amplitude_rad: phi },
            ..GratingSetup::default()
        };
        let spec = angular_spectrum(&setup).unwrap();
        for m in 1..=3u32 {
            let expected = (bessel_j(m, phi) / bessel_j(0, phi)).powi(2);
            let got = ratio(&spec, m as i32);
            assert!(
                (got - expected).abs() < 0.01 * expected,
                "order {m}: {got} vs {expected}"
            );
        }
    }

    #[test]
    fn blu_ray_pitch_in_red_light_keeps_only_the_zero_order() {
        // REFERENCES.md: 0.32 µm gives no first order for λ ≥ 320 nm at normal incidence.
        let setup = GratingSetup {
            pitch_m: 0.32e-6,
            beam_diameter_m: 0.6e-3,
            ..GratingSetup::default()
        };
        let spec = angular_spectrum(&setup).unwrap();
        let orders: Vec<i32> = spec.orders.iter().map(|o| o.order).collect();
        assert_eq!(orders, vec![0]);
        assert!((spec.orders[0].power - 1.0).abs() < 1e-9);
    }

    #[test]
    fn bad_inputs_are_refused_with_their_name() {
        let bad = [
            GratingSetup {
                wavelength_m: f64::NAN,
                ..GratingSetup::default()
            },
            GratingSetup {
                pitch_m: -1e-6,
                ..GratingSetup::default()
            },
            GratingSetup {
                pitch_m: 5e-3,
                ..GratingSetup::default()
            },
            GratingSetup {
                profile: GratingProfile::BinaryAmplitude { duty: 1.0 },
                ..GratingSetup::default()
            },
        ];
        for (setup, name) in bad
            .iter()
            .zip(["wavelength_m", "pitch_m", "pitch_m", "duty"])
        {
            match setup.validate() {
                Err(SimError::BadInput { name: n, .. }) => assert_eq!(n, name),
                other => panic!("expected BadInput for {name}, got {other:?}"),
            }
        }
    }
}
