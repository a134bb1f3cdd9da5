//! The light the beam puts on the phosphor, as a function of the electrons' deflection ψ:
//! a diffuse glow falling steeply with ψ over a flat floor, the rings scaled so the most
//! prominent stands a set fraction over the glow, and the undiffracted beam's spot with its
//! halo; and that light tabulated over the front-view distance from the axis for the pixel
//! loop.

use super::effects::Effects;
use super::electron::{ElectronSetup, Ring, TubeScreen};
use super::electron_photo::{PHOSPHOR_RGB, TubeScene};

/// The electron light on the phosphor as a function of the deflection ψ, in linear green
/// signal per unit of phosphor area seen face-on.
pub(crate) struct Light {
    rings: Vec<Ring>,
    /// Peak of each ring, linear.
    amplitude: Vec<f64>,
    /// The largest ring σ, rad.
    widest: f64,
    pub glow_level: f64,
    glow_width: f64,
    glow_floor: f64,
    spot_peak: f64,
    spot_sigma: f64,
    halo_len: f64,
    pub on: bool,
}

/// The spot's halo, relative to its core (electrons scattered by the film's support and the
/// phosphor's own light spreading in it).
const HALO: f64 = 0.10;

impl Light {
    pub(crate) fn new(
        setup: &ElectronSetup,
        scene: &TubeScene,
        effects: &Effects,
        rings: Vec<Ring>,
    ) -> Self {
        let mut light = Light {
            amplitude: Vec::new(),
            widest: rings.iter().map(|r| r.sigma_rad).fold(0.0, f64::max),
            glow_level: scene.glow_level,
            glow_width: scene.glow_width_rad,
            glow_floor: scene.glow_floor,
            // The overexposure is the spot's peak in the phosphor's weakest channel, so
            // above 1 its core clips white.
            spot_peak: effects.overexposure / PHOSPHOR_RGB[0] as f64,
            spot_sigma: (setup.divergence_rad / 2.3548).max(6e-3),
            halo_len: 0.02,
            on: setup.beam_on,
            rings,
        };
        // Scale every ring alike so the most prominent one stands `ring_contrast` over the
        // glow at its radius.
        let most = light
            .rings
            .iter()
            .map(|r| r.peak / light.glow(r.two_theta))
            .fold(0.0, f64::max);
        let k = setup.ring_contrast / most.max(f64::MIN_POSITIVE);
        light.amplitude = light.rings.iter().map(|r| k * r.peak).collect();
        light
    }

    /// The diffuse glow.
    pub fn glow(&self, psi: f64) -> f64 {
        let u = 1.0 + (psi / self.glow_width).powi(2);
        self.glow_level * ((1.0 - self.glow_floor) / (u * u.sqrt()) + self.glow_floor)
    }

    /// The rings alone.
    fn rings_at(&self, psi: f64) -> f64 {
        let mut sum = 0.0;
        // Rings run inner first: start at the first one within reach.
        let first = self
            .rings
            .partition_point(|r| r.two_theta + 6.0 * self.widest < psi);
        for (r, a) in self.rings[first..].iter().zip(&self.amplitude[first..]) {
            if r.two_theta - 6.0 * self.widest > psi {
                break;
            }
            let z = (psi - r.two_theta) / r.sigma_rad;
            if z.abs() < 6.0 {
                sum += a * (-0.5 * z * z).exp();
            }
        }
        sum
    }

    /// Everything the beam puts at ψ.
    pub(crate) fn at(&self, psi: f64) -> f64 {
        if !self.on {
            return 0.0;
        }
        let z = psi / self.spot_sigma;
        let core = if z < 8.0 { (-0.5 * z * z).exp() } else { 0.0 };
        let halo = if psi < 15.0 * self.halo_len {
            HALO * (-psi / self.halo_len).exp()
        } else {
            0.0
        };
        self.glow(psi) + self.rings_at(psi) + self.spot_peak * (core + halo)
    }

    /// Each ring's peak over the glow at its radius.
    pub fn contrasts(&self) -> Vec<f64> {
        self.rings
            .iter()
            .zip(&self.amplitude)
            .map(|(r, a)| a / self.glow(r.two_theta))
            .collect()
    }
}

impl Light {
    /// The rings, inner first.
    pub fn rings(&self) -> &[Ring] {
        &self.rings
    }
}

/// The beam's light over the front-view distance ρ from the axis, tabulated finely enough
/// (1/65536 of the screen's radius, a micrometre or so, against ring widths of a few hundred)
/// that linear interpolation is exact to far below a code: the pixel loop's one lookup.
pub(crate) struct Profile {
    step_mm: f64,
    values: Vec<f32>,
}

impl Profile {
    pub(crate) fn new(light: &Light, screen: TubeScreen) -> Self {
        let n = 1usize << 16;
        let max_mm = match screen {
            TubeScreen::Flat { radius_m, .. } => 1e3 * radius_m * 1.01,
            TubeScreen::Sphere {
                radius_m,
                coated_to_rad,
            } => 1e3 * radius_m * coated_to_rad.min(1.5).sin() * 1.01,
        };
        // Deflection and flux-per-area factor at ρ.
        let psi_of = |rho: f64| match screen {
            // ψ = atan(ρ/L); the flux per area carries cos³ψ.
            TubeScreen::Flat { distance_m, .. } => {
                let psi = (rho / (1e3 * distance_m)).atan();
                (psi, psi.cos().powi(3))
            }
            // ρ = R sin ψ on the bulb, uniform flux per area.
            TubeScreen::Sphere { radius_m, .. } => ((rho / (1e3 * radius_m)).min(1.0).asin(), 1.0),
        };
        let step_mm = max_mm / n as f64;
        let values = (0..=n + 1)
            .map(|i| {
                let (psi, area) = psi_of(i as f64 * step_mm);
                (light.at(psi) * area) as f32
            })
            .collect();
        Profile { step_mm, values }
    }

    pub(crate) fn at(&self, rho_mm: f64) -> f32 {
        let t = rho_mm / self.step_mm;
        let i = t as usize;
        if i + 1 >= self.values.len() {
            return *self.values.last().unwrap_or(&0.0);
        }
        let f = (t - i as f64) as f32;
        self.values[i] + f * (self.values[i + 1] - self.values[i])
    }
}
