//! The physics of an electron-diffraction tube, from first principles and independent of
//! [`crate::optics`]: the electron's wavelength from its relativistic momentum, the film's
//! reflections from the structure factor of its basis (so the extinction rules follow from
//! the atoms' positions rather than from a table), Bragg angles, where each ring meets a
//! flat or spherical screen, and how bright and broad it is.
//!
//! Ring model (kinematic powder diffraction): a ring's power is
//! P ∝ Σ |S_hkl|² · f(q)² · exp(−2B s²) / sin θ over the reflections sharing its spacing,
//! with S the structure factor of the basis, f(q) = 1/(1 + q²a²) the screened-Coulomb
//! (Wentzel) atomic amplitude normalised at q = 0 (a = 0.885·a₀·Z^(−1/3), the Thomas–Fermi
//! radius), q = 2π/d, s = 1/(2d), B a Debye–Waller factor, and 1/sin θ the powder ring's
//! Lorentz factor. Spread round a circle of circumference ∝ sin 2θ, the ring's peak per solid
//! angle falls as 1/(sin θ · sin 2θ), the "1/sin²θ" of small angles. Its angular profile is a
//! Gaussian whose FWHM in 2θ adds in quadrature the Scherrer width K·λ/(D·cos θ) (K = 0.9,
//! common practice) of crystallites of size D and the beam's divergence.

use super::SimError;
use super::electron_lattice::{Lattice, LatticeFamily};
use serde::{Deserialize, Serialize};

/// Planck constant, J·s (CODATA 2018, exact).
const H: f64 = 6.626_070_15e-34;
/// Elementary charge, C (CODATA 2018, exact).
const E: f64 = 1.602_176_634e-19;
/// Speed of light, m/s (exact).
const C: f64 = 299_792_458.0;
/// Electron mass, kg (CODATA 2018).
const ME: f64 = 9.109_383_701_5e-31;
/// Bohr radius, m (CODATA 2018).
const BOHR: f64 = 5.291_772_109_03e-11;

/// The electron's de Broglie wavelength after acceleration through `voltage_v`: its kinetic
/// energy Ek = eV and rest energy mc² give pc = √(Ek² + 2·Ek·mc²), and λ = hc/pc.
pub fn electron_wavelength_m(voltage_v: f64) -> f64 {
    let ek = E * voltage_v;
    let rest = ME * C * C;
    let pc = (ek * ek + 2.0 * ek * rest).sqrt();
    H * C / pc
}

/// The tube's screen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum TubeScreen {
    /// A flat phosphor disc perpendicular to the beam: a ring lands at r = L·tan 2θ.
    Flat {
        /// Film to screen along the beam, m.
        distance_m: f64,
        /// Radius of the phosphor disc, m.
        radius_m: f64,
    },
    /// A spherical bulb centred on the film, phosphor on its far side: a ring lies on the
    /// sphere at r = R·sin 2θ from the axis, R·(1 − cos 2θ) behind the bulb's front.
    Sphere {
        /// Bulb radius, m.
        radius_m: f64,
        /// Largest deflection the phosphor coating covers, rad.
        coated_to_rad: f64,
    },
}

impl TubeScreen {
    /// A flat screen at `distance_m` with a disc of 50 mm radius.
    pub fn flat(distance_m: f64) -> Self {
        TubeScreen::Flat {
            distance_m,
            radius_m: 0.05,
        }
    }

    /// A spherical bulb of `radius_m`, coated out to 65° of deflection.
    pub fn sphere(radius_m: f64) -> Self {
        TubeScreen::Sphere {
            radius_m,
            coated_to_rad: 65f64.to_radians(),
        }
    }

    /// The largest deflection 2θ that meets the phosphor, rad.
    pub fn max_deflection_rad(&self) -> f64 {
        match *self {
            TubeScreen::Flat {
                distance_m,
                radius_m,
            } => (radius_m / distance_m).atan(),
            TubeScreen::Sphere { coated_to_rad, .. } => coated_to_rad,
        }
    }

    /// Distance from the axis, mm, where deflection `psi` meets the screen.
    pub fn radius_mm(&self, psi: f64) -> f64 {
        match *self {
            TubeScreen::Flat { distance_m, .. } => 1e3 * distance_m * psi.tan(),
            TubeScreen::Sphere { radius_m, .. } => 1e3 * radius_m * psi.sin(),
        }
    }

    /// Depth of that point behind the screen's front plane (z = 0), mm.
    pub fn depth_mm(&self, psi: f64) -> f64 {
        match *self {
            TubeScreen::Flat { .. } => 0.0,
            TubeScreen::Sphere { radius_m, .. } => 1e3 * radius_m * (1.0 - psi.cos()),
        }
    }

    /// Radius of the phosphor as seen from the front, mm.
    pub fn outline_mm(&self) -> f64 {
        match *self {
            TubeScreen::Flat { radius_m, .. } => 1e3 * radius_m,
            TubeScreen::Sphere { radius_m, .. } => 1e3 * radius_m,
        }
    }

    fn validate(&self) -> Result<(), SimError> {
        let bad = |name, value: f64, expected| {
            Err(SimError::BadInput {
                name,
                value,
                expected,
            })
        };
        match *self {
            TubeScreen::Flat {
                distance_m,
                radius_m,
            } => {
                if !(distance_m.is_finite() && (0.01..=2.0).contains(&distance_m)) {
                    return bad(
                        "distance",
                        distance_m,
                        "a film-to-screen distance of 10 mm to 2 m",
                    );
                }
                if !(radius_m.is_finite() && radius_m >= 0.005 && radius_m <= distance_m * 3.0) {
                    return bad(
                        "screen radius",
                        radius_m,
                        "a disc radius from 5 mm to three distances",
                    );
                }
            }
            TubeScreen::Sphere {
                radius_m,
                coated_to_rad,
            } => {
                if !(radius_m.is_finite() && (0.01..=1.0).contains(&radius_m)) {
                    return bad("sphere radius", radius_m, "a bulb radius of 10 mm to 1 m");
                }
                if !(coated_to_rad.is_finite() && (0.05..=1.5).contains(&coated_to_rad)) {
                    return bad(
                        "coated_to_rad",
                        coated_to_rad,
                        "a phosphor coating out to 0.05–1.5 rad of deflection",
                    );
                }
            }
        }
        Ok(())
    }
}

/// An electron-diffraction tube: gun voltage, film and screen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ElectronSetup {
    /// Accelerating voltage, V.
    pub voltage_v: f64,
    /// The polycrystalline film.
    pub lattice: Lattice,
    /// The screen.
    pub screen: TubeScreen,
    /// Crystallite size D (Scherrer broadening), m.
    pub grain_size_m: f64,
    /// The beam's divergence, FWHM, rad: it broadens every ring alike and sizes the spot.
    pub divergence_rad: f64,
    /// Debye–Waller factor B, m².
    pub debye_waller_m2: f64,
    /// The most prominent ring's peak over the phosphor's local glow (0.08: 8 % above it).
    pub ring_contrast: f64,
    /// Beam on; off renders the tube with no spot, glow or rings.
    pub beam_on: bool,
}

impl Default for ElectronSetup {
    /// A gold film at 4.5 kV, a flat screen at 131 mm.
    fn default() -> Self {
        ElectronSetup {
            voltage_v: 4500.0,
            lattice: Lattice::gold(),
            screen: TubeScreen::flat(0.131),
            grain_size_m: 3e-9,
            divergence_rad: 2e-3,
            debye_waller_m2: 0.6e-20,
            ring_contrast: 0.08,
            beam_on: true,
        }
    }
}

/// Highest |index| searched: with a ≤ 5 nm and the screens allowed, rings past it are far
/// too faint to see.
const MAX_INDEX: i32 = 16;
/// Rings fainter than this fraction of the strongest are left out.
const MIN_POWER: f64 = 1e-3;
/// At most this many rings, innermost first, are drawn.
const MAX_RINGS: usize = 60;

/// One ring: every reflection sharing a spacing.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Ring {
    pub label: String,
    /// Representative (h k l), non-negative, descending for cubic.
    pub hkl: [i32; 3],
    /// Reflections with non-zero structure factor in the ring.
    pub multiplicity: u32,
    pub d_m: f64,
    /// Deflection 2θ, rad.
    pub two_theta: f64,
    /// Gaussian σ of the profile in 2θ, rad.
    pub sigma_rad: f64,
    /// Power relative to the strongest ring.
    pub relative_power: f64,
    /// Peak per solid angle, arbitrary units (before scaling to the glow).
    pub peak: f64,
}

impl ElectronSetup {
    /// Checks the inputs.
    pub fn validate(&self) -> Result<(), SimError> {
        let bad = |name, value: f64, expected| {
            Err(SimError::BadInput {
                name,
                value,
                expected,
            })
        };
        if !(self.voltage_v.is_finite() && (100.0..=1e6).contains(&self.voltage_v)) {
            return bad("voltage", self.voltage_v, "100 V to 1 MV");
        }
        self.lattice.validate()?;
        self.screen.validate()?;
        if !(self.grain_size_m.is_finite() && (0.5e-9..=1e-6).contains(&self.grain_size_m)) {
            return bad(
                "grain size",
                self.grain_size_m,
                "a crystallite size of 0.5 nm to 1 µm",
            );
        }
        if !(self.divergence_rad.is_finite() && (0.0..=0.05).contains(&self.divergence_rad)) {
            return bad("divergence", self.divergence_rad, "0 to 50 mrad");
        }
        if !(self.debye_waller_m2.is_finite() && (0.0..=5e-20).contains(&self.debye_waller_m2)) {
            return bad("debye_waller_m2", self.debye_waller_m2, "0 to 5 Å²");
        }
        if !(self.ring_contrast.is_finite()
            && self.ring_contrast > 0.0
            && self.ring_contrast <= 5.0)
        {
            return bad(
                "ring contrast",
                self.ring_contrast,
                "a peak over the glow of 0 to 5",
            );
        }
        Ok(())
    }

    /// The electron's wavelength, m.
    pub fn wavelength_m(&self) -> f64 {
        electron_wavelength_m(self.voltage_v)
    }

    /// The rings that meet the phosphor, inner first, and the labels of any beyond it.
    pub(crate) fn rings(&self) -> (Vec<Ring>, Vec<String>) {
        let lambda = self.wavelength_m();
        let lat = &self.lattice;
        let max_psi = self.screen.max_deflection_rad();
        // Bragg: 2d sin θ = λ; a ring on the screen needs d ≥ λ / (2 sin(ψmax/2)).
        let d_min = lambda / (2.0 * (0.5 * max_psi).sin());
        // One step past the screen, to name the next ring that misses it.
        let d_probe = 0.8 * d_min;
        let a_max = lat.a_m.max(lat.c_m.unwrap_or(0.0));
        let n = ((a_max / d_probe).ceil() as i32 + 1).min(MAX_INDEX);
        let nl = match (lat.family, lat.c_m) {
            (LatticeFamily::Hex, None) => 0,
            (LatticeFamily::Hex, Some(c)) => ((c / d_probe).ceil() as i32 + 1).min(MAX_INDEX),
            _ => n,
        };
        let a_screen = 0.885 * BOHR / (lat.atomic_number as f64).cbrt();
        // (d, hkl, |S|²) of every reflection with light.
        let mut refl: Vec<(f64, [i32; 3], f64)> = Vec::new();
        for h in -n..=n {
            for k in -n..=n {
                for l in -nl..=nl {
                    if h == 0 && k == 0 && l == 0 {
                        continue;
                    }
                    let d = lat.d_spacing([h, k, l]);
                    if d < d_probe {
                        continue;
                    }
                    let s2 = lat.structure_factor_sq([h, k, l]);
                    if s2 > 1e-6 {
                        refl.push((d, [h, k, l], s2));
                    }
                }
            }
        }
        refl.sort_by(|a, b| b.0.total_cmp(&a.0));
        let mut rings = Vec::new();
        let mut beyond = Vec::new();
        let mut i = 0;
        while i < refl.len() {
            let d = refl[i].0;
            let mut j = i;
            while j < refl.len() && (refl[j].0 - d).abs() < 1e-9 * d {
                j += 1;
            }
            let group = &refl[i..j];
            i = j;
            let sin_theta = lambda / (2.0 * d);
            if sin_theta >= 1.0 {
                beyond.push(self.group_label(group));
                continue;
            }
            let theta = sin_theta.asin();
            if 2.0 * theta > max_psi {
                beyond.push(self.group_label(group));
                continue;
            }
            let q = 2.0 * std::f64::consts::PI / d;
            let f = 1.0 / (1.0 + (q * a_screen).powi(2));
            let s = 1.0 / (2.0 * d);
            let dw = (-2.0 * self.debye_waller_m2 * s * s).exp();
            let sum_s2: f64 = group.iter().map(|r| r.2).sum();
            let power = sum_s2 * f * f * dw / sin_theta;
            let scherrer = 0.9 * lambda / (self.grain_size_m * theta.cos());
            let fwhm = scherrer.hypot(self.divergence_rad);
            let sigma = fwhm / (8.0 * std::f64::consts::LN_2).sqrt();
            rings.push(Ring {
                label: self.group_label(group),
                hkl: self.representatives(group)[0],
                multiplicity: group.len() as u32,
                d_m: d,
                two_theta: 2.0 * theta,
                sigma_rad: sigma,
                relative_power: power,
                peak: power / ((2.0 * theta).sin() * sigma),
            });
        }
        let max_p = rings.iter().map(|r| r.relative_power).fold(0.0, f64::max);
        for r in &mut rings {
            r.relative_power /= max_p.max(f64::MIN_POSITIVE);
        }
        rings.retain(|r| r.relative_power >= MIN_POWER);
        rings.truncate(MAX_RINGS);
        beyond.truncate(3);
        (rings, beyond)
    }

    /// The distinct family representatives of a ring, ascending.
    fn representatives(&self, group: &[(f64, [i32; 3], f64)]) -> Vec<[i32; 3]> {
        let mut reps: Vec<[i32; 3]> = group.iter().map(|r| canonical(self, r.1)).collect();
        reps.sort();
        reps.dedup();
        reps
    }

    /// The label of a ring: its families' representatives, joined by "/" when several share
    /// the spacing (e.g. "333/511").
    fn group_label(&self, group: &[(f64, [i32; 3], f64)]) -> String {
        self.representatives(group)
            .iter()
            .map(|&hkl| self.lattice.label(hkl))
            .collect::<Vec<_>>()
            .join("/")
    }
}

/// A family's representative: cubic h ≥ k ≥ l ≥ 0; hexagonal (h, k) turned and mirrored
/// into h ≥ k ≥ 0 (the images under 6/mmm), with |l|.
fn canonical(setup: &ElectronSetup, [h, k, l]: [i32; 3]) -> [i32; 3] {
    match setup.lattice.family {
        LatticeFamily::Hex => {
            let mut best = [i32::MIN, i32::MIN];
            let mut p = [h, k];
            for _ in 0..6 {
                // The six-fold turn (h, k) → (−k, h + k), and the mirror (h, k) → (k, h).
                p = [-p[1], p[0] + p[1]];
                for q in [p, [p[1], p[0]]] {
                    if q[0] >= q[1] && q[1] >= 0 && q > best {
                        best = q;
                    }
                }
            }
            [best[0], best[1], l.abs()]
        }
        _ => {
            let mut v = [h.abs(), k.abs(), l.abs()];
            v.sort_by(|a, b| b.cmp(a));
            v
        }
    }
}
