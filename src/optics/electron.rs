//! Electron diffraction rings from a polycrystalline film: the relativistic wavelength of
//! the beam, the exact geometry from a ring's radius on the screen to its deflection 2θ,
//! and Bragg's law 2d·sin θ = λ (n = 1; higher orders are the hkl multiples).
//!
//! λ = h/√(2 mₑ e V (1 + eV/(2 mₑ c²))) with CODATA 2018 constants (Tiesinga et al., Rev.
//! Mod. Phys. 93:025010, 2021). Screens (stated in every record's assumptions):
//! - flat, perpendicular to the beam at distance L from the film: r = L·tan 2θ;
//! - spherical bulb of radius R centred on the film, the ring seen from the front along the
//!   beam (a camera far away on the axis): r = R·sin 2θ, so rings need r < R (2θ < 90°).
//!
//! The small-angle camera constant r·d = λL is reported as a check, never used.
//! Calibrating the camera length against a known film is in [`calibrate`].

mod calibrate;

pub use calibrate::{CameraCalibration, calibrate_camera, index_and_calibrate};

use super::OpticsError;
use super::lattice::JointSpacings;
use crate::scale::ScaleComponent;
use crate::uncertainty::{self, Estimate, Input};
use std::f64::consts::FRAC_PI_2;

/// Planck constant, J·s (exact, SI 2019).
pub const PLANCK_H: f64 = 6.626_070_15e-34;
/// Elementary charge, C (exact, SI 2019).
pub const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;
/// Electron mass, kg (CODATA 2018).
pub const ELECTRON_MASS: f64 = 9.109_383_701_5e-31;
/// Speed of light in vacuum, m/s (exact).
pub const SPEED_OF_LIGHT: f64 = 299_792_458.0;

fn check_voltage(volts: f64) -> Result<(), OpticsError> {
    if volts > 0.0 && volts.is_finite() {
        Ok(())
    } else {
        Err(OpticsError::BadInput(format!(
            "the accelerating voltage must be > 0, got {volts} V"
        )))
    }
}

/// The relativistic de Broglie wavelength of electrons accelerated through `volts`, m.
pub fn wavelength_m(volts: f64) -> Result<f64, OpticsError> {
    check_voltage(volts)?;
    let energy = ELEMENTARY_CHARGE * volts;
    let correction = 1.0 + energy / (2.0 * ELECTRON_MASS * SPEED_OF_LIGHT * SPEED_OF_LIGHT);
    Ok(PLANCK_H / (2.0 * ELECTRON_MASS * energy * correction).sqrt())
}

/// The non-relativistic wavelength h/√(2 mₑ e V), m: a check, too long by about
/// eV/(4 mₑc²), 0.049 % per kV.
pub fn nonrelativistic_wavelength_m(volts: f64) -> Result<f64, OpticsError> {
    check_voltage(volts)?;
    Ok(PLANCK_H / (2.0 * ELECTRON_MASS * ELEMENTARY_CHARGE * volts).sqrt())
}

/// Flat or spherical screen, without its size.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ScreenKind {
    /// A flat screen perpendicular to the beam.
    Flat,
    /// A spherical bulb centred on the film.
    Sphere,
}

impl ScreenKind {
    /// The name of the screen's length in budgets: "distance" or "sphere radius".
    pub fn length_name(self) -> &'static str {
        match self {
            ScreenKind::Flat => "distance",
            ScreenKind::Sphere => "sphere radius",
        }
    }
}

/// The screen the rings are seen on (module docs for the geometry).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Screen {
    /// Flat, perpendicular to the beam, `distance_m` from the film.
    Flat {
        /// Film-to-screen distance along the beam, m.
        distance_m: f64,
    },
    /// A bulb of radius `radius_m` centred on the film, seen from the front.
    Sphere {
        /// Radius of the bulb, m.
        radius_m: f64,
    },
}

impl Screen {
    /// A screen of the given kind and length (distance or radius), m.
    pub fn new(kind: ScreenKind, length_m: f64) -> Self {
        match kind {
            ScreenKind::Flat => Screen::Flat {
                distance_m: length_m,
            },
            ScreenKind::Sphere => Screen::Sphere { radius_m: length_m },
        }
    }

    /// Flat or sphere.
    pub fn kind(&self) -> ScreenKind {
        match self {
            Screen::Flat { .. } => ScreenKind::Flat,
            Screen::Sphere { .. } => ScreenKind::Sphere,
        }
    }

    /// The distance L or the radius R, m.
    pub fn length_m(&self) -> f64 {
        match *self {
            Screen::Flat { distance_m } => distance_m,
            Screen::Sphere { radius_m } => radius_m,
        }
    }

    fn check(&self) -> Result<(), OpticsError> {
        let l = self.length_m();
        if l > 0.0 && l.is_finite() {
            Ok(())
        } else {
            Err(OpticsError::BadInput(format!(
                "the {} must be > 0, got {l} m",
                self.kind().length_name()
            )))
        }
    }

    /// The ring radius on the screen for a deflection 2θ, m. Fails for 2θ outside
    /// (0°, 90°), which neither screen shows as a ring.
    pub fn radius_m(&self, two_theta_rad: f64) -> Result<f64, OpticsError> {
        self.check()?;
        if !(two_theta_rad > 0.0 && two_theta_rad < FRAC_PI_2) {
            return Err(OpticsError::BadInput(format!(
                "a deflection of {:.3}° does not reach the screen as a ring (0° < 2θ < 90°)",
                two_theta_rad.to_degrees()
            )));
        }
        Ok(self.length_m() * geometry_factor(self.kind(), two_theta_rad))
    }

    /// The deflection 2θ of a ring of radius `r_m` on the screen, rad. Fails for a radius
    /// that is not positive, or not inside a spherical screen's radius.
    pub fn deflection_rad(&self, r_m: f64) -> Result<f64, OpticsError> {
        self.check()?;
        if !(r_m > 0.0 && r_m.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "a ring radius must be > 0, got {} mm",
                r_m * 1e3
            )));
        }
        match *self {
            Screen::Flat { distance_m } => Ok((r_m / distance_m).atan()),
            Screen::Sphere { radius_m } if r_m < radius_m => Ok((r_m / radius_m).asin()),
            Screen::Sphere { radius_m } => Err(OpticsError::BadInput(format!(
                "a ring of radius {:.3} mm cannot lie on a spherical screen of radius {:.3} mm \
                 seen from the front (r = R·sin 2θ < R); check the sphere radius and the scale",
                r_m * 1e3,
                radius_m * 1e3
            ))),
        }
    }
}

/// tan 2θ (flat) or sin 2θ (sphere): the ring radius per unit screen length.
fn geometry_factor(kind: ScreenKind, two_theta_rad: f64) -> f64 {
    match kind {
        ScreenKind::Flat => two_theta_rad.tan(),
        ScreenKind::Sphere => two_theta_rad.sin(),
    }
}

/// Bragg's law, first order: d = λ/(2 sin θ) for a deflection 2θ, m.
pub fn bragg_spacing_m(wavelength_m: f64, two_theta_rad: f64) -> Result<f64, OpticsError> {
    if !(wavelength_m > 0.0 && wavelength_m.is_finite()) {
        return Err(OpticsError::BadInput(format!(
            "the wavelength must be > 0, got {wavelength_m} m"
        )));
    }
    if !(two_theta_rad > 0.0 && two_theta_rad < std::f64::consts::PI) {
        return Err(OpticsError::BadInput(format!(
            "a deflection of {:.3}° gives no Bragg spacing",
            two_theta_rad.to_degrees()
        )));
    }
    Ok(wavelength_m / (2.0 * (0.5 * two_theta_rad).sin()))
}

/// The deflection 2θ of a spacing d, rad: 2·asin(λ/2d). Fails when λ/2d ≥ 1.
pub fn bragg_deflection_rad(wavelength_m: f64, d_m: f64) -> Result<f64, OpticsError> {
    let s = wavelength_m / (2.0 * d_m);
    if !(s > 0.0 && s < 1.0) {
        return Err(OpticsError::BadInput(format!(
            "a spacing of {:.4} nm does not diffract a wavelength of {:.4} pm (λ/2d = {s:.3})",
            d_m * 1e9,
            wavelength_m * 1e12
        )));
    }
    Ok(2.0 * s.asin())
}

/// Where the ring of spacing `d_m` lands on the screen, m (for planning a setup).
pub fn ring_radius_m(screen: &Screen, wavelength_m: f64, d_m: f64) -> Result<f64, OpticsError> {
    screen.radius_m(bragg_deflection_rad(wavelength_m, d_m)?)
}

/// The relative difference (λL/r)/d − 1 of the small-angle camera constant r·d = λL from
/// the exact spacing `d_m` of a ring of radius `r_m` (L: the distance or sphere radius).
pub fn camera_constant_error(screen: &Screen, wavelength_m: f64, r_m: f64, d_m: f64) -> f64 {
    wavelength_m * screen.length_m() / (r_m * d_m) - 1.0
}

/// A ring's measured radius on the screen.
#[derive(Debug, Clone, PartialEq)]
pub struct RingRadius {
    /// Name in budgets and the record ("ring 1").
    pub label: String,
    /// Radius on the screen, mm.
    pub radius_mm: f64,
    /// Its standard uncertainty, mm.
    pub u_mm: f64,
}

/// One ring solved.
#[derive(Debug, Clone, PartialEq)]
pub struct RingSpacing {
    /// The ring's label.
    pub label: String,
    /// Radius on the screen, mm (before the scale inputs, which are 1 at their estimate).
    pub radius_mm: f64,
    /// Deflection 2θ, rad.
    pub deflection_rad: f64,
    /// The spacing d, m, with its budget: voltage, distance or sphere radius, each scale
    /// component, and this ring's radius.
    pub d: Estimate,
    /// [`camera_constant_error`] of this ring: what the small-angle form would be off by.
    pub small_angle_error: f64,
}

/// All rings of a pattern solved together.
#[derive(Debug, Clone, PartialEq)]
pub struct RingSolution {
    /// The electron wavelength, m, with its budget (the voltage).
    pub wavelength: Estimate,
    /// The rings, in input order.
    pub rings: Vec<RingSpacing>,
    /// The spacings with the inputs and sensitivities they share, for indexing
    /// ([`JointSpacings::for_indexing`]) and refinement with their covariance.
    pub joint: JointSpacings,
    /// Things the user should know.
    pub warnings: Vec<String>,
}

/// Solves each ring's spacing with one joint GUM propagation over the voltage (V), the
/// screen's length (distance or sphere radius, m, standard uncertainty `screen_u_m`), one
/// input per scale component (value 1, u = u_rel, multiplying every radius) and every
/// ring's radius, so that the spacings' covariance is kept.
pub fn solve_rings(
    rings: &[RingRadius],
    voltage: &Input,
    screen: Screen,
    screen_u_m: f64,
    scale: &[ScaleComponent],
) -> Result<RingSolution, OpticsError> {
    if rings.is_empty() {
        return Err(OpticsError::Unsolvable("no ring to solve".into()));
    }
    let lambda = wavelength_m(voltage.value)?;
    screen.check()?;
    if !(screen_u_m >= 0.0 && screen_u_m.is_finite()) {
        return Err(OpticsError::BadInput(format!(
            "the {}'s uncertainty must be ≥ 0, got {screen_u_m} m",
            screen.kind().length_name()
        )));
    }
    let mut warnings = Vec::new();
    for r in rings {
        if !(r.u_mm >= 0.0 && r.u_mm.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "{}: the radius uncertainty must be ≥ 0, got {} mm",
                r.label, r.u_mm
            )));
        }
        if r.u_mm == 0.0 {
            warnings.push(format!(
                "{} has no radius uncertainty: it cannot be weighed against the other rings",
                r.label
            ));
        }
        screen
            .deflection_rad(r.radius_mm * 1e-3)
            .map_err(|e| match e {
                OpticsError::BadInput(m) => OpticsError::BadInput(format!("{}: {m}", r.label)),
                other => other,
            })?;
    }
    let kind = screen.kind();
    let mut inputs = vec![
        Input {
            name: "voltage".into(),
            ..voltage.clone()
        },
        Input::normal(kind.length_name(), screen.length_m(), screen_u_m),
    ];
    let scale_start = inputs.len();
    for c in scale {
        inputs.push(Input::normal(format!("scale: {}", c.name), 1.0, c.u_rel));
    }
    let ring_start = inputs.len();
    for r in rings {
        inputs.push(Input::normal(
            format!("{} radius", r.label),
            r.radius_mm * 1e-3,
            r.u_mm * 1e-3,
        ));
    }
    let n = rings.len();
    let model = |x: &[f64]| -> Result<Vec<f64>, OpticsError> {
        let lambda = wavelength_m(x[0])?;
        let screen = Screen::new(kind, x[1]);
        let factor: f64 = x[scale_start..ring_start].iter().product();
        let mut out = Vec::with_capacity(n + 1);
        for &r in &x[ring_start..] {
            out.push(bragg_spacing_m(lambda, screen.deflection_rad(r * factor)?)?);
        }
        out.push(lambda);
        Ok(out)
    };
    let propagation = uncertainty::propagate(&inputs, &[], model)?;
    let mut outputs = propagation.outputs;
    let mut wavelength = outputs
        .pop()
        .ok_or_else(|| OpticsError::Unsolvable("the propagation returned no wavelength".into()))?;
    wavelength.budget.truncate(1);
    let rings_out = outputs
        .into_iter()
        .enumerate()
        .map(|(i, mut d)| {
            // Other rings' radii do not move this ring: leave their zero lines out.
            let own = ring_start + i;
            d.budget = d
                .budget
                .into_iter()
                .enumerate()
                .filter(|&(k, _)| k < ring_start || k == own)
                .map(|(_, line)| line)
                .collect();
            let r_m = rings[i].radius_mm * 1e-3;
            let deflection_rad = screen.deflection_rad(r_m)?;
            Ok(RingSpacing {
                label: rings[i].label.clone(),
                radius_mm: rings[i].radius_mm,
                deflection_rad,
                small_angle_error: camera_constant_error(&screen, lambda, r_m, d.value),
                d,
            })
        })
        .collect::<Result<Vec<_>, OpticsError>>()?;
    let joint = JointSpacings {
        d_m: rings_out.iter().map(|r| r.d.value).collect(),
        jacobian: propagation.jacobian.rows(0, n).into_owned(),
        inputs,
    };
    Ok(RingSolution {
        wavelength,
        rings: rings_out,
        joint,
        warnings,
    })
}

#[cfg(test)]
mod tests;
