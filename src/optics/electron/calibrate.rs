//! Calibrating the camera length (flat screen) or the bulb radius (spherical screen)
//! against a film of known lattice: each indexed ring gives r = L·g(2θ) with 2θ from
//! Bragg's law at the known spacing (g = tan or sin), so L is a weighted linear least
//! squares over all rings, L = Σ w r g / Σ w g² with w = 1/u(r)². Its budget carries the
//! voltage, the reference constants, the scale and every radius; the radii are enlarged by
//! the Birge ratio when the rings scatter more than they should.
//!
//! Used at the same voltage as the measurement that follows, the voltage error largely
//! cancels between the two (λL is what the rings fix); the measurement's budget then
//! counts it twice, which errs on the safe side.

use super::{
    RingRadius, Screen, ScreenKind, bragg_deflection_rad, geometry_factor, solve_rings,
    wavelength_m,
};
use crate::optics::OpticsError;
use crate::optics::lattice::{Family, Indexing, Lattice, Reflection, chi2_survival, index_rings};
use crate::scale::ScaleComponent;
use crate::uncertainty::{self, Estimate, Input};

/// A solved camera length or sphere radius.
#[derive(Debug, Clone, PartialEq)]
pub struct CameraCalibration {
    /// Flat or sphere.
    pub kind: ScreenKind,
    /// The distance L (flat) or the sphere radius R, m, with budget.
    pub length: Estimate,
    /// The camera constant λ·L, m², with budget (what the rings fix most directly).
    pub camera_constant: Estimate,
    /// The wavelength used, m, with its budget (the voltage).
    pub wavelength: Estimate,
    /// χ² of the ring radii about r = L·g(2θ), against their stated uncertainties.
    pub chi2: f64,
    /// Degrees of freedom, rings − 1.
    pub dof: usize,
    /// The factor the radius uncertainties were enlarged by (≥ 1).
    pub birge_ratio: f64,
    /// Measured minus fitted radius, mm, in input order.
    pub residuals_mm: Vec<f64>,
    /// Things the user should know.
    pub warnings: Vec<String>,
    /// What was assumed.
    pub assumptions: Vec<String>,
}

impl CameraCalibration {
    /// The calibrated screen.
    pub fn screen(&self) -> Screen {
        Screen::new(self.kind, self.length.value)
    }
}

/// Solves the camera length (or sphere radius) from rings already indexed against a film
/// of known constants: `reflections[i]` is ring `i`'s, and `reference` must carry a (and c
/// for hexagonal rings with l ≠ 0). A reference constant given without uncertainty is taken
/// as exact, and this is listed in the assumptions.
pub fn calibrate_camera(
    rings: &[RingRadius],
    reflections: &[Reflection],
    reference: &Lattice,
    voltage: &Input,
    kind: ScreenKind,
    scale: &[ScaleComponent],
) -> Result<CameraCalibration, OpticsError> {
    if rings.is_empty() || rings.len() != reflections.len() {
        return Err(OpticsError::BadInput(format!(
            "calibration needs one reflection per ring, got {} rings and {} reflections",
            rings.len(),
            reflections.len()
        )));
    }
    wavelength_m(voltage.value)?;
    let family = reference.family;
    let Some(a) = reference.a_m else {
        return Err(OpticsError::BadInput(format!(
            "calibration needs the reference film's constant: write e.g. `{family}:a=0.40782nm`"
        )));
    };
    let needs_c = family == Family::Hex && reflections.iter().any(|r| r.l != 0);
    let c = match (needs_c, reference.c_m) {
        (true, None) => {
            return Err(OpticsError::BadInput(
                "hk.l rings with l ≠ 0 need the reference film's c as well: write e.g. \
                 `hex:a=0.2461nm,c=0.6708nm`"
                    .into(),
            ));
        }
        (true, Some(c)) => Some(c),
        (false, _) => None,
    };
    for r in rings {
        if !(r.radius_mm > 0.0 && r.radius_mm.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "{}: a ring radius must be > 0, got {} mm",
                r.label, r.radius_mm
            )));
        }
        if !(r.u_mm > 0.0 && r.u_mm.is_finite()) {
            return Err(OpticsError::BadInput(format!(
                "{}: calibration weighs rings by their radius uncertainty, which must be > 0, \
                 got {} mm",
                r.label, r.u_mm
            )));
        }
    }
    let mut assumptions = vec![match kind {
        ScreenKind::Flat => "flat screen perpendicular to the beam: r = L·tan 2θ".to_string(),
        ScreenKind::Sphere => "spherical screen centred on the film, seen from the front: \
                               r = R·sin 2θ"
            .to_string(),
    }];
    let mut inputs = vec![
        Input {
            name: "voltage".into(),
            ..voltage.clone()
        },
        reference_input("a", a, reference.u_a_m, &mut assumptions),
    ];
    if let Some(c) = c {
        inputs.push(reference_input("c", c, reference.u_c_m, &mut assumptions));
    }
    let scale_start = inputs.len();
    for s in scale {
        inputs.push(Input::normal(format!("scale: {}", s.name), 1.0, s.u_rel));
    }
    let ring_start = inputs.len();
    let weights: Vec<f64> = rings.iter().map(|r| (r.u_mm * 1e-3).powi(-2)).collect();
    let fit = |x: &[f64]| -> Result<(f64, f64, Vec<f64>), OpticsError> {
        let lambda = wavelength_m(x[0])?;
        let (a, c) = (x[1], c.map(|_| x[2]));
        let factor: f64 = x[scale_start..ring_start].iter().product();
        let (mut num, mut den) = (0.0, 0.0);
        let mut g = Vec::with_capacity(rings.len());
        for (i, refl) in reflections.iter().enumerate() {
            let two_theta = bragg_deflection_rad(lambda, refl.d_m(family, a, c))?;
            if two_theta >= std::f64::consts::FRAC_PI_2 {
                return Err(OpticsError::Unsolvable(format!(
                    "reflection {} is deflected by 90° or more and gives no ring",
                    refl.label
                )));
            }
            let gi = geometry_factor(kind, two_theta);
            let r = x[ring_start + i] * factor;
            num += weights[i] * r * gi;
            den += weights[i] * gi * gi;
            g.push(gi);
        }
        Ok((num / den, lambda, g))
    };
    let nominal: Vec<f64> = inputs
        .iter()
        .map(|i| i.value)
        .chain(rings.iter().map(|r| r.radius_mm * 1e-3))
        .collect();
    let (length0, _, g0) = fit(&nominal)?;
    let n = rings.len();
    let residuals_mm: Vec<f64> = (0..n)
        .map(|i| rings[i].radius_mm - length0 * g0[i] * 1e3)
        .collect();
    let chi2: f64 = (0..n)
        .map(|i| (residuals_mm[i] / rings[i].u_mm).powi(2))
        .sum();
    let dof = n - 1;
    let birge_ratio = if dof > 0 {
        (chi2 / dof as f64).sqrt().max(1.0)
    } else {
        1.0
    };
    let mut warnings = Vec::new();
    if dof == 0 {
        warnings.push(
            "one ring only: nothing checks the calibration or its indexing; measure more rings"
                .to_string(),
        );
    } else if chi2_survival(chi2, dof) < 0.01 {
        warnings.push(format!(
            "the calibration rings scatter {birge_ratio:.1}× more than their radius \
             uncertainties allow: a ring may be misindexed, the screen tilted or the pattern \
             elliptical; the radius uncertainties were enlarged to match"
        ));
    }
    for r in rings {
        inputs.push(Input::normal(
            format!("{} radius", r.label),
            r.radius_mm * 1e-3,
            r.u_mm * 1e-3 * birge_ratio,
        ));
    }
    let propagation = uncertainty::propagate(&inputs, &[], |x| {
        let (length, lambda, _) = fit(x)?;
        Ok::<_, OpticsError>(vec![length, lambda * length, lambda])
    })?;
    let mut outputs = propagation.outputs.into_iter();
    let (Some(length), Some(camera_constant), Some(mut wavelength)) =
        (outputs.next(), outputs.next(), outputs.next())
    else {
        return Err(OpticsError::Unsolvable(
            "the propagation returned too few outputs".into(),
        ));
    };
    wavelength.budget.truncate(1);
    if !(length.value > 0.0) {
        return Err(OpticsError::Unsolvable(
            "the fitted camera length is not positive".into(),
        ));
    }
    Ok(CameraCalibration {
        kind,
        length,
        camera_constant,
        wavelength,
        chi2,
        dof,
        birge_ratio,
        residuals_mm,
        warnings,
        assumptions,
    })
}

fn reference_input(name: &str, value: f64, u: Option<f64>, assumptions: &mut Vec<String>) -> Input {
    if u.is_none() {
        assumptions.push(format!(
            "the reference film's {name} = {:.5} nm was given without uncertainty and is taken \
             as exact",
            value * 1e9
        ));
    }
    Input::normal(format!("reference {name}"), value, u.unwrap_or(0.0))
}

/// Indexes rings of a known film by their ratios and calibrates the camera length from
/// them, repeating both until the assignment stops changing (a flat screen's tan 2θ makes
/// the spacing ratios depend slightly on the length assumed). `start_length_m` is the
/// length to begin with (default: 10× the largest radius for a flat screen, 1.5× for a
/// sphere).
pub fn index_and_calibrate(
    rings: &[RingRadius],
    reference: &Lattice,
    voltage: &Input,
    kind: ScreenKind,
    start_length_m: Option<f64>,
    scale: &[ScaleComponent],
) -> Result<(Indexing, CameraCalibration), OpticsError> {
    let r_max_m = rings.iter().map(|r| r.radius_mm).fold(0.0, f64::max) * 1e-3;
    let mut length = start_length_m.unwrap_or(match kind {
        ScreenKind::Flat => 10.0 * r_max_m,
        ScreenKind::Sphere => 1.5 * r_max_m,
    });
    let mut previous: Option<Vec<Reflection>> = None;
    for _ in 0..8 {
        let solved = solve_rings(rings, voltage, Screen::new(kind, length), 0.0, scale)?;
        let indexing = index_rings(&solved.joint.for_indexing(), reference)?;
        let calibration = calibrate_camera(
            rings,
            &indexing.best.reflections,
            reference,
            voltage,
            kind,
            scale,
        )?;
        let settled = previous.as_ref() == Some(&indexing.best.reflections);
        length = calibration.length.value;
        if settled {
            return Ok((indexing, calibration));
        }
        previous = Some(indexing.best.reflections.clone());
    }
    Err(OpticsError::Unsolvable(
        "the indexing of the calibration rings did not settle: it changes with the camera \
         length; give a closer --distance to start from"
            .into(),
    ))
}
