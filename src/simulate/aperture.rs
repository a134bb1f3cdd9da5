//! Far field of a double slit, a single slit and a wire (or fibre) from first principles, by
//! the angular spectrum of plane waves (Goodman, *Introduction to Fourier Optics*, ch. 3), as
//! [`super::farfield`] does for gratings. The field just behind the aperture (thin-element
//! model: the transmission times a Gaussian beam) is sampled with its origin on sample 0, so
//! that a symmetric aperture has a real spectrum that interpolates smoothly between bins, and
//! Fourier transformed; bin f is the plane wave of direction cosine λ·f. Nothing here knows
//! where the fringes go: minima, envelope and missing orders are whatever the transform
//! makes of the transmission.
//!
//! A wire is an opaque strip across a wide beam. Its field is the beam's minus a slit's
//! (Babinet); the beam's own transform, subtracted from the total, leaves the diffracted
//! wave, and the undiffracted beam goes on as a beam (see [`super::fringes`]).

use super::SimError;
use super::farfield::check;
use rustfft::{FftPlanner, num_complex::Complex};
use serde::{Deserialize, Serialize};

/// What the beam passes through. SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Aperture {
    /// Two equal clear slits in an opaque screen, centre to centre `separation_m`.
    TwoSlit {
        /// Centre-to-centre distance of the slits.
        separation_m: f64,
        /// Clear width of each slit.
        width_m: f64,
    },
    /// One clear slit in an opaque screen.
    Slit {
        /// Clear width.
        width_m: f64,
    },
    /// An opaque wire or fibre across the beam.
    Wire {
        /// Diameter (the width of its shadow).
        diameter_m: f64,
    },
}

impl Aperture {
    /// Short name used in the truth: "two_slit", "slit" or "wire".
    pub fn kind_name(&self) -> &'static str {
        match self {
            Aperture::TwoSlit { .. } => "two_slit",
            Aperture::Slit { .. } => "slit",
            Aperture::Wire { .. } => "wire",
        }
    }

    /// Clear (slits) or opaque (wire) intervals along x, m, centred on the beam axis.
    fn intervals(&self) -> Vec<(f64, f64)> {
        match *self {
            Aperture::TwoSlit {
                separation_m: d,
                width_m: a,
            } => vec![
                (-0.5 * d - 0.5 * a, -0.5 * d + 0.5 * a),
                (0.5 * d - 0.5 * a, 0.5 * d + 0.5 * a),
            ],
            Aperture::Slit { width_m: a } => vec![(-0.5 * a, 0.5 * a)],
            Aperture::Wire { diameter_m: w } => vec![(-0.5 * w, 0.5 * w)],
        }
    }

    /// Smallest feature (slit or wire width), m.
    fn finest_m(&self) -> f64 {
        match *self {
            Aperture::TwoSlit { width_m, .. } | Aperture::Slit { width_m } => width_m,
            Aperture::Wire { diameter_m } => diameter_m,
        }
    }

    /// Whole extent of the structure, m.
    fn extent_m(&self) -> f64 {
        match *self {
            Aperture::TwoSlit {
                separation_m,
                width_m,
            } => separation_m + width_m,
            Aperture::Slit { width_m } => width_m,
            Aperture::Wire { diameter_m } => diameter_m,
        }
    }
}

/// The optical bench: laser, aperture and a screen perpendicular to the beam. SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ApertureSetup {
    /// What diffracts.
    pub aperture: Aperture,
    /// Laser wavelength (in the medium between aperture and screen).
    pub wavelength_m: f64,
    /// Aperture to screen, along the beam.
    pub distance_m: f64,
    /// 1/e² intensity diameter of the (collimated) Gaussian beam at the aperture.
    pub beam_diameter_m: f64,
}

impl ApertureSetup {
    /// A green pointer through slits 0.25 mm apart and 0.05 mm wide, screen at 2.5 m.
    pub fn two_slit() -> Self {
        ApertureSetup {
            aperture: Aperture::TwoSlit {
                separation_m: 0.25e-3,
                width_m: 0.05e-3,
            },
            wavelength_m: 532e-9,
            distance_m: 2.5,
            beam_diameter_m: 1.5e-3,
        }
    }

    /// A red pointer through a 0.1 mm slit, screen at 2.5 m.
    pub fn slit() -> Self {
        ApertureSetup {
            aperture: Aperture::Slit { width_m: 0.1e-3 },
            wavelength_m: 650e-9,
            distance_m: 2.5,
            beam_diameter_m: 1.5e-3,
        }
    }

    /// A red beam widened to 3 mm on a 0.127 mm wire, screen at 2.5 m.
    pub fn wire() -> Self {
        ApertureSetup {
            aperture: Aperture::Wire {
                diameter_m: 0.127e-3,
            },
            wavelength_m: 650e-9,
            distance_m: 2.5,
            beam_diameter_m: 3e-3,
        }
    }

    /// Checks every input; the message names the input and the accepted range.
    pub fn validate(&self) -> Result<(), SimError> {
        let l = self.wavelength_m;
        check(
            "wavelength_m",
            l,
            (100e-9..=20e-6).contains(&l),
            "between 100 nm and 20 µm",
        )?;
        let d = self.distance_m;
        check(
            "distance_m",
            d,
            (0.05..=100.0).contains(&d),
            "between 5 cm and 100 m",
        )?;
        let b = self.beam_diameter_m;
        check(
            "beam_diameter_m",
            b,
            (50e-6..=20e-3).contains(&b),
            "between 50 µm and 20 mm",
        )?;
        let feature =
            |name, v: f64| check(name, v, (1e-6..=5e-3).contains(&v), "between 1 µm and 5 mm");
        match self.aperture {
            Aperture::TwoSlit {
                separation_m,
                width_m,
            } => {
                feature("width_m", width_m)?;
                feature("separation_m", separation_m)?;
                check(
                    "separation_m",
                    separation_m,
                    separation_m > width_m,
                    "more than the slit width, so that the slits do not overlap",
                )?;
                // Both slits must be lit: the beam radius reaches past their outer edges.
                check(
                    "beam_diameter_m",
                    b,
                    b >= separation_m + width_m,
                    "at least the slits' outer extent (separation + width), to light both",
                )?;
            }
            Aperture::Slit { width_m } => {
                feature("width_m", width_m)?;
                check(
                    "beam_diameter_m",
                    b,
                    b >= width_m,
                    "at least the slit width, to light all of it",
                )?;
            }
            Aperture::Wire { diameter_m } => {
                feature("diameter_m", diameter_m)?;
                check(
                    "beam_diameter_m",
                    b,
                    b >= 4.0 * diameter_m,
                    "at least four wire diameters, so that the beam passes on both sides",
                )?;
            }
        }
        // The far field must be reached: Fresnel number a²/(λL) well below one.
        let a = self.aperture.extent_m();
        check(
            "distance_m",
            d,
            a * a / (l * d) <= 0.5,
            "far enough for the far field: (aperture extent)² / (wavelength · distance) ≤ 0.5",
        )
    }
}

/// The aperture's angular spectrum.
#[derive(Debug, Clone)]
pub(crate) struct ApertureSpectrum {
    /// Diffracted wave per bin (FFT order), scaled so that |a|² is the power per unit
    /// direction cosine as a fraction of the propagating power.
    pub amplitude: Vec<Complex<f64>>,
    /// Wire only: power fraction per bin of the undiffracted beam.
    pub beam_power: Option<Vec<f64>>,
    /// Width of one bin in direction cosine.
    pub dalpha: f64,
    /// Samples in the transform.
    pub samples: usize,
}

impl ApertureSpectrum {
    /// Signed bin index of FFT position `k`.
    pub fn signed(&self, k: usize) -> i64 {
        let n = self.samples;
        if k < n / 2 {
            k as i64
        } else {
            k as i64 - n as i64
        }
    }

    /// Direction cosine of the highest bin free of aliasing (the sampling's Nyquist limit,
    /// or the propagating limit 1).
    pub fn alpha_limit(&self) -> f64 {
        (0.5 * self.samples as f64 * self.dalpha).min(1.0)
    }

    /// The diffracted amplitude at direction cosine `alpha`, by Catmull–Rom interpolation
    /// between bins (the spectrum of a centred symmetric aperture is real, so it is smooth
    /// from bin to bin).
    pub fn amplitude_at(&self, alpha: f64) -> Complex<f64> {
        let u = alpha / self.dalpha;
        let k0 = u.floor();
        let t = u - k0;
        let n = self.samples as i64;
        let at = |k: i64| self.amplitude[k.rem_euclid(n) as usize];
        let k0 = k0 as i64;
        let (p0, p1, p2, p3) = (at(k0 - 1), at(k0), at(k0 + 1), at(k0 + 2));
        let t2 = t * t;
        let t3 = t2 * t;
        (p1 * 2.0
            + (p2 - p0) * t
            + (p0 * 2.0 - p1 * 5.0 + p2 * 4.0 - p3) * t2
            + (p1 * 3.0 - p0 - p2 * 3.0 + p3) * t3)
            * 0.5
    }
}

/// Samples of the largest transform we accept (complex f64: 64 MiB).
const MAX_SAMPLES: usize = 1 << 22;

/// Computes the far field. The window holds the whole lit field (the beam's ±3 radii for a
/// wire, the slits otherwise) at least four times over, and at least 64 structure extents, so
/// that a fringe spans dozens of bins; samples are at most a 32nd of the finest feature and
/// λ/2.5, so the propagating directions (|α| < 1) are all below the Nyquist limit.
pub(crate) fn angular_spectrum(setup: &ApertureSetup) -> Result<ApertureSpectrum, SimError> {
    let lambda = setup.wavelength_m;
    let w = 0.5 * setup.beam_diameter_m;
    let ap = setup.aperture;
    let wire = matches!(ap, Aperture::Wire { .. });
    let lit = if wire { 6.0 * w } else { ap.extent_m() };
    let window = (4.0 * lit).max(64.0 * ap.extent_m());
    let dx = (ap.finest_m() / 32.0).min(lambda / 2.5);
    let n = ((window / dx).ceil() as usize).next_power_of_two();
    if n > MAX_SAMPLES {
        return Err(SimError::TooFine(format!(
            "the far field of a {:.1} µm feature under a {:.2} mm beam needs {n} samples \
             (limit {MAX_SAMPLES}); use a narrower beam",
            ap.finest_m() * 1e6,
            setup.beam_diameter_m * 1e3,
        )));
    }
    let intervals = ap.intervals();
    // Cell j is centred on x = j·dx (j folded to ±n/2): the origin sits on sample 0.
    let x_of = |j: usize| {
        let js = if j < n / 2 {
            j as f64
        } else {
            j as f64 - n as f64
        };
        js * dx
    };
    let beam = |x: f64| (-(x / w).powi(2)).exp();
    // Fraction of cell [x − dx/2, x + dx/2] covered by the intervals: sharp edges are
    // box-filtered rather than snapped to the grid.
    let covered = |x: f64| {
        let (a, b) = (x - 0.5 * dx, x + 0.5 * dx);
        intervals
            .iter()
            .map(|&(lo, hi)| (b.min(hi) - a.max(lo)).max(0.0))
            .sum::<f64>()
            / dx
    };
    let mut field: Vec<Complex<f64>> = (0..n)
        .map(|j| {
            let x = x_of(j);
            let t = if wire { 1.0 - covered(x) } else { covered(x) };
            Complex::new(t * beam(x), 0.0)
        })
        .collect();
    let mut planner = FftPlanner::<f64>::new();
    let fft = planner.plan_fft_forward(n);
    fft.process(&mut field);
    let df = 1.0 / (n as f64 * dx);
    let dalpha = lambda * df;
    let signed = |k: usize| {
        if k < n / 2 {
            k as f64
        } else {
            k as f64 - n as f64
        }
    };
    let propagating = |k: usize| (lambda * signed(k) * df).abs() < 1.0;
    let total: f64 = (0..n)
        .filter(|&k| propagating(k))
        .map(|k| field[k].norm_sqr())
        .sum();
    if total.is_nan() || total <= 0.0 {
        return Err(SimError::NoOrderReachesScreen(
            "no light passes the aperture".into(),
        ));
    }
    let mut beam_power = None;
    if wire {
        // Babinet: the diffracted wave is the total minus the free beam's own transform.
        let mut free: Vec<Complex<f64>> =
            (0..n).map(|j| Complex::new(beam(x_of(j)), 0.0)).collect();
        fft.process(&mut free);
        for (e, g) in field.iter_mut().zip(&free) {
            *e -= g;
        }
        beam_power = Some(
            free.iter()
                .enumerate()
                .map(|(k, g)| {
                    if propagating(k) {
                        g.norm_sqr() / total
                    } else {
                        0.0
                    }
                })
                .collect(),
        );
    }
    let scale = 1.0 / (total * dalpha).sqrt();
    for (k, e) in field.iter_mut().enumerate() {
        *e = if propagating(k) {
            *e * scale
        } else {
            Complex::new(0.0, 0.0)
        };
    }
    Ok(ApertureSpectrum {
        amplitude: field,
        beam_power,
        dalpha,
        samples: n,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slit_spectrum_is_real_and_even_and_holds_the_power() {
        let setup = ApertureSetup::slit();
        let s = angular_spectrum(&setup).unwrap();
        let n = s.samples;
        let power: f64 = s.amplitude.iter().map(|a| a.norm_sqr()).sum::<f64>() * s.dalpha;
        assert!((power - 1.0).abs() < 1e-9, "{power}");
        for k in [1usize, 17, 400, 3000] {
            let (a, b) = (s.amplitude[k], s.amplitude[n - k]);
            assert!(
                (a - b).norm() < 1e-9 * (1.0 + a.norm()),
                "bin {k}: {a} vs {b}"
            );
            assert!(a.im.abs() < 1e-9 * (1.0 + a.re.abs()), "bin {k}: {a}");
        }
    }

    #[test]
    fn wire_diffracts_what_it_blocks() {
        // Babinet (Born & Wolf, Principles of Optics, §8.3.2): the strip diffracts the power it
        // removes from the beam, about diameter / (√(π/2)·w) of a Gaussian beam of radius w
        // when the wire crosses its centre (the beam's intensity peak 1/(√(π/2)·w) per unit
        // length, integrated over the wire).
        let setup = ApertureSetup::wire();
        let s = angular_spectrum(&setup).unwrap();
        let diffracted: f64 = s.amplitude.iter().map(|a| a.norm_sqr()).sum::<f64>() * s.dalpha;
        let w = 1.5e-3;
        let blocked = 0.127e-3 / ((std::f64::consts::PI / 2.0).sqrt() * w);
        let through = 1.0 - blocked;
        // Relative to the light that passes: blocked / through.
        let expected = blocked / through;
        assert!(
            (diffracted - expected).abs() < 0.02 * expected,
            "{diffracted} vs {expected}"
        );
        let beam: f64 = s.beam_power.as_ref().unwrap().iter().sum();
        assert!((beam - 1.0 / through).abs() < 1e-3, "{beam}");
    }

    #[test]
    fn bad_inputs_are_refused_with_their_name() {
        let two = ApertureSetup::two_slit();
        let bad = [
            (
                ApertureSetup {
                    aperture: Aperture::TwoSlit {
                        separation_m: 0.05e-3,
                        width_m: 0.05e-3,
                    },
                    ..two
                },
                "separation_m",
            ),
            (
                ApertureSetup {
                    beam_diameter_m: 0.2e-3,
                    ..two
                },
                "beam_diameter_m",
            ),
            (
                ApertureSetup {
                    wavelength_m: f64::NAN,
                    ..two
                },
                "wavelength_m",
            ),
            (
                ApertureSetup {
                    aperture: Aperture::Slit { width_m: -1e-4 },
                    ..two
                },
                "width_m",
            ),
            (
                ApertureSetup {
                    aperture: Aperture::Wire { diameter_m: 1e-3 },
                    ..ApertureSetup::wire()
                },
                "beam_diameter_m",
            ),
            (
                ApertureSetup {
                    distance_m: 0.06,
                    aperture: Aperture::Slit { width_m: 1e-3 },
                    ..ApertureSetup::slit()
                },
                "distance_m",
            ),
        ];
        for (setup, name) in bad {
            match setup.validate() {
                Err(SimError::BadInput { name: n, .. }) => assert_eq!(n, name),
                other => panic!("expected BadInput for {name}, got {other:?}"),
            }
        }
        for ok in [
            ApertureSetup::two_slit(),
            ApertureSetup::slit(),
            ApertureSetup::wire(),
        ] {
            ok.validate().unwrap();
        }
    }
}
