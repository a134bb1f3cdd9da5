//! Far field of a circular pinhole from first principles. The field just behind it (thin
//! element: the clear disc times the Gaussian beam) is transformed in two dimensions, but a
//! radially symmetric field's transform is radially symmetric, so one line through the
//! origin holds all of it; along β = 0 the 2-D Fourier integral ∫∫ f(x, y) e^{−i2π x α/λ}
//! dx dy is the 1-D transform of the projection p(x) = ∫ f(x, y) dy (the projection-slice
//! theorem, Bracewell, *The Fourier Transform and Its Applications*, ch. 13). The projection
//! is integrated by quadrature over each chord of the disc (composite Simpson along y,
//! averaged over each sample's cell across x, finely where the cell straddles the rim) and
//! Fourier transformed with wide zero padding, so the radial profile is sampled finely in
//! sin θ. No closed form of the pattern is used: its rings are wherever the transform puts
//! them, found as local minima and maxima of the computed intensity.

use super::SimError;
use super::direction_map::{DirectionMap, Table};
use super::farfield::check;
use rustfft::{FftPlanner, num_complex::Complex};
use serde::{Deserialize, Serialize};

/// A laser through a pinhole onto a screen perpendicular to the beam. SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PinholeSetup {
    /// Diameter of the clear circular hole.
    pub diameter_m: f64,
    /// Laser wavelength (in the medium between pinhole and screen).
    pub wavelength_m: f64,
    /// Pinhole to screen, along the beam.
    pub distance_m: f64,
    /// 1/e² intensity diameter of the collimated Gaussian beam, centred on the hole (a beam
    /// many times the hole is, in effect, a flat wave).
    pub beam_diameter_m: f64,
}

impl Default for PinholeSetup {
    /// A red pointer through a 0.2 mm pinhole, screen at 2.5 m.
    fn default() -> Self {
        PinholeSetup {
            diameter_m: 0.2e-3,
            wavelength_m: 650e-9,
            distance_m: 2.5,
            beam_diameter_m: 1.5e-3,
        }
    }
}

impl PinholeSetup {
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
        let a = self.diameter_m;
        check(
            "diameter_m",
            a,
            (5e-6..=5e-3).contains(&a),
            "between 5 µm and 5 mm",
        )?;
        check(
            "diameter_m",
            a,
            a >= 4.0 * l,
            "at least four wavelengths, for the thin-element model to hold",
        )?;
        let b = self.beam_diameter_m;
        check(
            "beam_diameter_m",
            b,
            (50e-6..=100e-3).contains(&b),
            "between 50 µm and 100 mm",
        )?;
        check(
            "beam_diameter_m",
            b,
            b >= a,
            "at least the pinhole diameter, to light all of it",
        )?;
        check(
            "distance_m",
            d,
            a * a / (l * d) <= 0.5,
            "far enough for the far field: diameter² / (wavelength · distance) ≤ 0.5",
        )
    }
}

/// The pinhole's radially symmetric far field.
#[derive(Debug, Clone)]
pub(crate) struct RadialFarField {
    /// Real amplitude at sin θ = k·`drho`, scaled so that its square is the power per unit
    /// dα·dβ as a fraction of the power through the hole.
    pub amplitude: Vec<f64>,
    pub drho: f64,
    /// Highest sin θ the sampling resolves without aliasing (or nearly 1).
    pub rho_max: f64,
    /// Samples in the transform, and the sample step in the pinhole plane, m.
    pub samples: usize,
    pub step_m: f64,
}

/// One ring of the far field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Ring {
    /// Counted from the centre: 1 the first dark (or first bright) ring.
    pub index: u32,
    pub rho: f64,
    /// Far-field intensity relative to the centre's.
    pub relative: f64,
}

/// Rings listed of each kind.
pub(crate) const RINGS_LISTED: usize = 12;
/// Samples of the largest transform we accept.
const MAX_SAMPLES: usize = 1 << 22;

impl RadialFarField {
    /// Amplitude at sin θ = `rho` by Catmull–Rom interpolation between bins (the profile is
    /// even in ρ, real and smooth from bin to bin under the wide zero padding).
    pub fn amplitude_at(&self, rho: f64) -> f64 {
        let u = rho.abs() / self.drho;
        let k0 = u.floor();
        let t = u - k0;
        let k0 = k0 as i64;
        let at = |k: i64| {
            self.amplitude
                .get(k.unsigned_abs() as usize)
                .copied()
                .unwrap_or(0.0)
        };
        let (p0, p1, p2, p3) = (at(k0 - 1), at(k0), at(k0 + 1), at(k0 + 2));
        let (t2, t3) = (t * t, t * t * t);
        0.5 * (2.0 * p1
            + (p2 - p0) * t
            + (2.0 * p0 - 5.0 * p1 + 4.0 * p2 - p3) * t2
            + (3.0 * p1 - p0 - 3.0 * p2 + p3) * t3)
    }

    /// Intensity per unit dα·dβ at sin θ = `rho`.
    pub fn intensity_at(&self, rho: f64) -> f64 {
        self.amplitude_at(rho).powi(2)
    }

    /// The far field as a radial table on a screen `distance_mm` away.
    pub fn to_map(&self, distance_mm: f64) -> DirectionMap {
        let last = (self.rho_max / self.drho).floor() as usize + 1;
        let values = self.amplitude[..last.min(self.amplitude.len())]
            .iter()
            .map(|a| (a * a) as f32)
            .collect();
        DirectionMap {
            distance_mm,
            rho_max: self.rho_max,
            table: Table::Radial {
                step: self.drho,
                values,
            },
        }
    }

    /// Fraction of the power through the hole that the table holds (Parseval: 1 when no
    /// light escapes beyond `rho_max`): 2π ∫ I(ρ) ρ dρ by the trapezoid rule on the bins.
    pub fn power_held(&self) -> f64 {
        let last = (self.rho_max / self.drho).floor() as usize;
        (1..=last.min(self.amplitude.len() - 1))
            .map(|k| self.amplitude[k].powi(2) * k as f64 * self.drho)
            .sum::<f64>()
            * self.drho
            * 2.0
            * std::f64::consts::PI
    }

    /// Dark and bright rings: local minima and maxima of the intensity on the bins, from the
    /// centre out, each refined by golden-section search on the interpolant. A minimum
    /// counts only if it lies at most 0.8 of the lower of its neighbouring maxima (no
    /// numerical ripple counts); rings beyond 0.9 of `rho_max` are left out.
    pub fn rings(&self) -> (Vec<Ring>, Vec<Ring>) {
        let centre = self.intensity_at(0.0).max(f64::MIN_POSITIVE);
        let last = ((0.9 * self.rho_max / self.drho) as usize).min(self.amplitude.len() - 2);
        let v: Vec<f64> = self.amplitude[..=last + 1].iter().map(|a| a * a).collect();
        let (mut dark, mut bright) = (Vec::new(), Vec::new());
        let mut last_max = v[0];
        let mut pending: Option<usize> = None;
        for k in 1..=last {
            if dark.len() >= RINGS_LISTED {
                break;
            }
            let (p, c, q) = (v[k - 1], v[k], v[k + 1]);
            if c < p && c <= q {
                pending = Some(k);
            } else if c > p && c >= q {
                if let Some(j) = pending.take() {
                    if v[j] <= 0.8 * last_max.min(c) {
                        let rho = self.refine(j, 1.0);
                        dark.push(Ring {
                            index: dark.len() as u32 + 1,
                            rho,
                            relative: self.intensity_at(rho) / centre,
                        });
                        let rho = self.refine(k, -1.0);
                        bright.push(Ring {
                            index: bright.len() as u32 + 1,
                            rho,
                            relative: self.intensity_at(rho) / centre,
                        });
                    }
                }
                last_max = c;
            }
        }
        (dark, bright)
    }

    /// Golden-section search for the minimum (`sign` 1) or maximum (−1) of the intensity
    /// between the bins either side of bin `k`.
    fn refine(&self, k: usize, sign: f64) -> f64 {
        let (mut a, mut b) = ((k - 1) as f64 * self.drho, (k + 1) as f64 * self.drho);
        let g = 0.5 * (5f64.sqrt() - 1.0);
        let h = |x: f64| sign * self.intensity_at(x);
        let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
        let (mut fc, mut fd) = (h(c), h(d));
        for _ in 0..80 {
            if fc < fd {
                b = d;
                d = c;
                fd = fc;
                c = b - g * (b - a);
                fc = h(c);
            } else {
                a = c;
                c = d;
                fc = fd;
                d = a + g * (b - a);
                fd = h(d);
            }
        }
        0.5 * (a + b)
    }
}

/// ∫ f(x, y) dy along the chord of the disc at `x`, f = exp(−(x² + y²)/w²), by composite
/// Simpson over 32 intervals (the integrand is a smooth Gaussian on the chord).
fn chord_integral(x: f64, radius: f64, w: f64) -> f64 {
    let h2 = radius * radius - x * x;
    if h2 <= 0.0 {
        return 0.0;
    }
    let h = h2.sqrt();
    let n = 32;
    let dy = h / n as f64;
    let f = |y: f64| (-(y / w).powi(2)).exp();
    let mut s = f(0.0) + f(h);
    for i in 1..n {
        s += if i % 2 == 1 { 4.0 } else { 2.0 } * f(i as f64 * dy);
    }
    2.0 * (s * dy / 3.0) * (-(x / w).powi(2)).exp()
}

/// The mean of the projection over the cell [x − dx/2, x + dx/2]: midpoints, 4 in a cell
/// wholly inside the disc, 64 in one that straddles the rim.
fn cell_projection(x: f64, dx: f64, radius: f64, w: f64) -> f64 {
    let (lo, hi) = (x - 0.5 * dx, x + 0.5 * dx);
    if lo.abs().min(hi.abs()) >= radius && lo * hi > 0.0 {
        return 0.0;
    }
    let m = if lo.abs().max(hi.abs()) <= radius {
        4
    } else {
        64
    };
    (0..m)
        .map(|i| chord_integral(lo + (i as f64 + 0.5) * dx / m as f64, radius, w))
        .sum::<f64>()
        / m as f64
}

/// Computes the far field. Samples are at most a 200th of the diameter (so the Nyquist
/// limit reaches 100 λ/D, or every propagating direction) and the window 128 diameters, so
/// that a ring spans well over a hundred bins.
pub(crate) fn far_field(setup: &PinholeSetup) -> Result<RadialFarField, SimError> {
    let lambda = setup.wavelength_m;
    let radius = 0.5 * setup.diameter_m;
    let w = 0.5 * setup.beam_diameter_m;
    let dx = (setup.diameter_m / 200.0).min(0.5 * lambda);
    let n = ((128.0 * setup.diameter_m / dx).ceil() as usize).next_power_of_two();
    if n > MAX_SAMPLES {
        return Err(SimError::TooFine(format!(
            "the far field of a {:.1} µm pinhole needs {n} samples (limit {MAX_SAMPLES})",
            setup.diameter_m * 1e6
        )));
    }
    // Cell j is centred on x = j·dx (j folded to ±n/2): the origin sits on sample 0, so the
    // even projection has a real transform.
    let x_of = |j: usize| {
        if j < n / 2 {
            j as f64 * dx
        } else {
            (j as f64 - n as f64) * dx
        }
    };
    let reach = (radius / dx).ceil() as usize + 1;
    let mut field = vec![Complex::new(0.0, 0.0); n];
    // Power through the hole, ∫∫ |f|² = ∫ (chord integral of exp(−2r²/w²)) dx.
    let mut power = 0.0;
    for j in (0..=reach).chain(n - reach..n) {
        let x = x_of(j);
        field[j] = Complex::new(cell_projection(x, dx, radius, w), 0.0);
        power += cell_projection(x, dx, radius, w / std::f64::consts::SQRT_2) * dx;
    }
    if !(power > 0.0) {
        return Err(SimError::NoOrderReachesScreen(
            "no light passes the pinhole".into(),
        ));
    }
    FftPlanner::<f64>::new()
        .plan_fft_forward(n)
        .process(&mut field);
    // Bin k is the spatial frequency k/(n·dx), i.e. sin θ = λk/(n·dx); the continuous
    // transform is dx times the sum, and |F|²/λ² is the power per unit dα·dβ.
    let drho = lambda / (n as f64 * dx);
    let scale = dx / (lambda * power.sqrt());
    let rho_max = (0.9 * 0.5 * lambda / dx).min(0.999);
    let kept = ((rho_max / drho).ceil() as usize + 3).min(n / 2);
    let amplitude = field[..kept].iter().map(|c| c.re * scale).collect();
    Ok(RadialFarField {
        amplitude,
        drho,
        rho_max,
        samples: n,
        step_m: dx,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_table_holds_the_power_through_the_hole() {
        // Parseval's theorem (Goodman, Introduction to Fourier Optics, §2.1.3): the far field
        // carries the power that passes; what lies beyond 100 λ/D is a fraction of a percent.
        let ff = far_field(&PinholeSetup::default()).unwrap();
        let held = ff.power_held();
        assert!(held > 0.99 && held <= 1.0 + 1e-6, "{held}");
    }

    #[test]
    fn bad_inputs_are_refused_with_their_name() {
        let ok = PinholeSetup::default();
        ok.validate().unwrap();
        let bad = [
            (
                PinholeSetup {
                    diameter_m: f64::NAN,
                    ..ok
                },
                "diameter_m",
            ),
            (
                PinholeSetup {
                    beam_diameter_m: 0.1e-3,
                    ..ok
                },
                "beam_diameter_m",
            ),
            (
                PinholeSetup {
                    distance_m: 0.06,
                    diameter_m: 1e-3,
                    ..ok
                },
                "distance_m",
            ),
            (
                PinholeSetup {
                    wavelength_m: -1.0,
                    ..ok
                },
                "wavelength_m",
            ),
        ];
        for (setup, name) in bad {
            match setup.validate() {
                Err(SimError::BadInput { name: n, .. }) => assert_eq!(n, name),
                other => panic!("expected BadInput for {name}, got {other:?}"),
            }
        }
    }
}
