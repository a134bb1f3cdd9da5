//! From plane waves to light on the screen: every plane wave of an order is a ray from the
//! grating, intersected with the screen plane as a vector ray–plane intersection; it lands as
//! the beam's footprint there (the Gaussian cross-section projected onto the screen, so
//! stretched by the ray's obliquity). The sum over an order's waves is its spot; the sum's
//! spread in X is the beam's far-field divergence (each bin covering its cell of directions,
//! so the sum stays smooth however far the screen), and across the pattern (Y), where the
//! transform is one-dimensional, the same Gaussian-beam divergence is added in closed form.
//! An order's truth position is the power-weighted centroid of its rays' landing points.
//!
//! Frames (millimetres). Transmission: grating at the origin, incident beam along +z,
//! screen the plane z = L perpendicular to the beam, grating tilted by θi about the lines
//! (axis u = (cos θi, 0, sin θi), normal n = (−sin θi, 0, cos θi)); screen origin at the
//! undeviated beam. Reflection: grating in the plane z = 0 with normal +z and axis +x, screen
//! the parallel plane z = L, beam arriving along (sin θi, 0, −cos θi) through a hole in the
//! screen; screen origin at the foot of the grating normal. In both, screen X = world x and
//! screen Y = world y (across the pattern, "down" as the camera sees the lit face).

use super::SimError;
use super::direction_map::DirectionMap;
use super::farfield::{AngularSpectrum, GratingSetup};
use nalgebra::Vector3;
use std::sync::Arc;

/// Light of one order on the screen.
#[derive(Debug, Clone)]
pub(crate) struct OrderSpot {
    pub order: i32,
    /// Fraction of the propagating power.
    pub relative_power: f64,
    /// Power-weighted centroid of the landing points, screen mm.
    pub centroid_mm: [f64; 2],
    /// Gaussian width across the pattern, mm.
    pub sigma_y_mm: f64,
    /// Irradiance integrated over Y (power fraction per mm), tabulated along X.
    pub x0_mm: f64,
    pub step_mm: f64,
    pub profile: Vec<f64>,
    /// Peak irradiance, power fraction per mm².
    pub peak_per_mm2: f64,
    /// RMS width of the spot along X, mm.
    pub sigma_x_mm: f64,
    /// A two-dimensional far field (rings, halos) instead of the tabulated profile.
    pub map: Option<Arc<DirectionMap>>,
}

impl OrderSpot {
    /// X range where this order has light.
    pub fn x_range_mm(&self) -> (f64, f64) {
        if let Some(m) = &self.map {
            return (-m.reach_mm(), m.reach_mm());
        }
        (
            self.x0_mm,
            self.x0_mm + self.step_mm * (self.profile.len().saturating_sub(1)) as f64,
        )
    }

    /// Half-height of the band where this order has light.
    pub fn y_reach_mm(&self) -> f64 {
        if let Some(m) = &self.map {
            return m.reach_mm();
        }
        6.0 * self.sigma_y_mm
    }

    /// Irradiance at a screen point, power fraction per mm².
    pub fn irradiance(&self, x_mm: f64, y_mm: f64) -> f64 {
        if let Some(m) = &self.map {
            return m.irradiance(x_mm, y_mm);
        }
        let u = (x_mm - self.x0_mm) / self.step_mm;
        if u.is_nan() || u < 0.0 {
            return 0.0;
        }
        let i = u as usize; // u ≥ 0, so truncation is the floor
        let (Some(a), Some(b)) = (self.profile.get(i), self.profile.get(i + 1)) else {
            return 0.0;
        };
        let t = u - i as f64;
        let across = (-0.5 * (y_mm / self.sigma_y_mm).powi(2)).exp()
            / ((2.0 * std::f64::consts::PI).sqrt() * self.sigma_y_mm);
        (a + (b - a) * t) * across
    }
}

/// Where each order lands.
#[derive(Debug, Clone)]
pub(crate) struct ScreenLight {
    pub spots: Vec<OrderSpot>,
    /// Orders that propagate but never meet the screen plane.
    pub unreached: Vec<i32>,
}

/// A ray's landing point on the screen.
struct Landing {
    x_mm: f64,
    path_mm: f64,
    /// Cosine between the ray and the screen normal.
    cos_screen: f64,
    /// Cosine between the ray and the grating normal.
    cos_grating: f64,
}

/// The plane-wave direction for direction cosine `alpha` along the grating axis.
fn direction(setup: &GratingSetup, alpha: f64) -> (Vector3<f64>, f64) {
    let gamma = (1.0 - alpha * alpha).max(0.0).sqrt();
    let (s, c) = setup.incidence_rad.sin_cos();
    let (axis, normal) = if setup.reflect {
        (Vector3::x(), Vector3::z())
    } else {
        (Vector3::new(c, 0.0, s), Vector3::new(-s, 0.0, c))
    };
    (axis * alpha + normal * gamma, gamma)
}

fn land(setup: &GratingSetup, alpha: f64) -> Option<Landing> {
    let (d, gamma) = direction(setup, alpha);
    let screen_normal = Vector3::z();
    let screen_point = Vector3::new(0.0, 0.0, setup.distance_m * 1e3);
    let cos_screen = d.dot(&screen_normal);
    // Rays within about half a degree of the screen plane make no spot.
    if cos_screen <= 1e-2 {
        return None;
    }
    let t = screen_point.dot(&screen_normal) / cos_screen;
    let hit = d * t;
    // Beyond a kilometre the "screen" is a fiction.
    if hit.x.abs() > 1e6 {
        return None;
    }
    Some(Landing {
        x_mm: hit.x,
        path_mm: t,
        cos_screen,
        cos_grating: gamma,
    })
}

/// Lays every order of `spectrum` onto the screen.
pub(crate) fn light_on_screen(
    setup: &GratingSetup,
    spectrum: &AngularSpectrum,
) -> Result<ScreenLight, SimError> {
    let w_mm = 0.5 * setup.beam_diameter_m * 1e3;
    let lambda_mm = setup.wavelength_m * 1e3;
    let cos_i = setup.incidence_rad.cos();
    let half_bin = 0.5 * spectrum.dalpha;
    let mut out = ScreenLight {
        spots: Vec::new(),
        unreached: Vec::new(),
    };
    for order in &spectrum.orders {
        // Each bin stands for the plane waves of its cell [α − Δα/2, α + Δα/2]: it lands as
        // a strip of that cell's width centred on its own ray, blurred by the footprint.
        let landed: Option<Vec<Strip>> = order
            .waves
            .iter()
            .map(|wv| {
                let centre = land(setup, wv.alpha)?;
                let lo = land(setup, wv.alpha - half_bin)?;
                let hi = land(setup, wv.alpha + half_bin)?;
                // Footprint along X: the beam lights w / cos θi of the grating; the order
                // leaves it with width (w / cos θi)·cos θm; the screen stretches that by
                // 1 / cos(screen).
                let sigma = 0.5 * w_mm * (centre.cos_grating / cos_i) / centre.cos_screen;
                Some(Strip {
                    x_mm: centre.x_mm,
                    half_mm: 0.5 * (hi.x_mm - lo.x_mm).abs(),
                    sigma_mm: sigma,
                    path_mm: centre.path_mm,
                    power: wv.power,
                })
            })
            .collect();
        let Some(landed) = landed.filter(|l| !l.is_empty()) else {
            out.unreached.push(order.order);
            continue;
        };
        let weight: f64 = landed.iter().map(|b| b.power).sum();
        let centroid = landed.iter().map(|b| b.x_mm * b.power).sum::<f64>() / weight;
        let path = landed.iter().map(|b| b.path_mm * b.power).sum::<f64>() / weight;
        let sigma_y = (0.5 * w_mm).hypot(path * lambda_mm / (2.0 * std::f64::consts::PI * w_mm));

        let s_min = landed
            .iter()
            .map(|b| b.sigma_mm)
            .fold(f64::INFINITY, f64::min);
        let reach = landed
            .iter()
            .map(|b| b.half_mm + 7.0 * b.sigma_mm)
            .fold(0.0, f64::max);
        let x_lo = landed.iter().map(|b| b.x_mm).fold(f64::INFINITY, f64::min) - reach;
        let x_hi = landed
            .iter()
            .map(|b| b.x_mm)
            .fold(f64::NEG_INFINITY, f64::max)
            + reach;
        let step = (s_min / 8.0).max((x_hi - x_lo) / 20_000.0);
        let count = ((x_hi - x_lo) / step).ceil() as usize + 2;
        let profile: Vec<f64> = (0..count)
            .map(|i| {
                let x = x_lo + i as f64 * step;
                landed.iter().map(|b| b.power * b.density(x)).sum()
            })
            .collect();
        let peak = profile.iter().cloned().fold(0.0, f64::max)
            / ((2.0 * std::f64::consts::PI).sqrt() * sigma_y);
        let (mut m0, mut m2) = (0.0, 0.0);
        for (i, v) in profile.iter().enumerate() {
            let dx = x_lo + i as f64 * step - centroid;
            m0 += v;
            m2 += v * dx * dx;
        }
        out.spots.push(OrderSpot {
            order: order.order,
            relative_power: order.power,
            centroid_mm: [centroid, 0.0],
            sigma_y_mm: sigma_y,
            x0_mm: x_lo,
            step_mm: step,
            profile,
            peak_per_mm2: peak,
            sigma_x_mm: (m2 / m0.max(f64::MIN_POSITIVE)).sqrt(),
            map: None,
        });
    }
    out.unreached.extend(spectrum.grazing.iter().copied());
    out.unreached.sort_unstable();
    Ok(out)
}

/// One bin's light on the screen: a strip of half-width `half_mm` around its ray's landing
/// point, blurred by a Gaussian footprint of σ `sigma_mm`.
struct Strip {
    x_mm: f64,
    half_mm: f64,
    sigma_mm: f64,
    path_mm: f64,
    power: f64,
}

impl Strip {
    /// Density per mm along X (integrates to 1).
    fn density(&self, x: f64) -> f64 {
        let z = (x - self.x_mm) / self.sigma_mm;
        let h = self.half_mm / self.sigma_mm;
        if z.abs() > h + 7.0 {
            0.0
        } else if h < 0.01 {
            (-0.5 * z * z).exp() / ((2.0 * std::f64::consts::PI).sqrt() * self.sigma_mm)
        } else {
            (normal_cdf(z + h) - normal_cdf(z - h)) / (2.0 * self.half_mm)
        }
    }
}

/// Standard normal distribution function from erf (Abramowitz & Stegun 7.1.26, absolute
/// error below 1.5e-7).
fn normal_cdf(z: f64) -> f64 {
    let x = z.abs() / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * x);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736
                + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    let erf = 1.0 - poly * (-x * x).exp();
    if z >= 0.0 {
        0.5 * (1.0 + erf)
    } else {
        0.5 * (1.0 - erf)
    }
}

/// Far field and its landing on the screen.
pub(crate) fn compute(setup: &GratingSetup) -> Result<(AngularSpectrum, ScreenLight), SimError> {
    let spectrum = super::farfield::angular_spectrum(setup)?;
    let light = light_on_screen(setup, &spectrum)?;
    Ok((spectrum, light))
}

/// Where the beam passes through the screen in reflection (screen mm), and the hole radius.
pub(crate) fn hole(setup: &GratingSetup) -> Option<([f64; 2], f64)> {
    setup.reflect.then(|| {
        let x = -setup.distance_m * 1e3 * setup.incidence_rad.tan();
        ([x, 0.0], (1.5 * setup.beam_diameter_m * 1e3).max(3.0))
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::farfield::GratingProfile;

    fn spot(light: &ScreenLight, m: i32) -> &OrderSpot {
        light.spots.iter().find(|s| s.order == m).unwrap()
    }

    #[test]
    fn cd_and_dvd_first_orders_land_where_the_textbook_says() {
        // Outside check (test only): the grating equation d(sin θm − sin θi) = mλ (any optics
        // text, e.g. Hecht, Optics, ch. 10) with a perpendicular screen, X = L tan θm.
        // REFERENCES.md: CD 1.6 µm at 650 nm → 23.97°, DVD 0.74 µm at 650 nm → 61.45°.
        for (pitch, degrees) in [(1.6e-6, 23.97), (0.74e-6, 61.45)] {
            let setup = GratingSetup {
                pitch_m: pitch,
                distance_m: 0.25,
                ..GratingSetup::default()
            };
            let (_, light) = compute(&setup).unwrap();
            let x = spot(&light, 1).centroid_mm[0];
            let expected = 250.0 * (650e-9f64 / pitch).asin().tan();
            // The centroid of the spread spot sits slightly off the central ray because
            // X(sin θ) curves: ½·X''·σ², about 0.25 µm for the DVD; allow 1e-5 relative.
            assert!((x - expected).abs() < 1e-5 * expected, "{x} vs {expected}");
            let angle = (x / 250.0).atan().to_degrees();
            assert!((angle - degrees).abs() < 0.005, "{angle}° vs {degrees}°");
            let minus = spot(&light, -1).centroid_mm[0];
            assert!((minus + x).abs() < 1e-6);
        }
    }

    #[test]
    fn oblique_transmission_and_reflection_agree_with_the_grating_equation() {
        let lambda = 532e-9;
        let pitch = 1.0e-3 / 600.0;
        let incidence = 20f64.to_radians();
        for reflect in [false, true] {
            let setup = GratingSetup {
                wavelength_m: lambda,
                pitch_m: pitch,
                distance_m: 0.3,
                incidence_rad: incidence,
                reflect,
                profile: GratingProfile::SinusoidalPhase { amplitude_rad: 1.5 },
                ..GratingSetup::default()
            };
            let (_, light) = compute(&setup).unwrap();
            for s in &light.spots {
                // d(sin θm − sin θi) = mλ, angles from the grating normal. Transmission:
                // the screen is perpendicular to the beam, so X = L tan(θm − θi).
                // Reflection: the screen is parallel to the grating, so X = L tan θm.
                let sin_m = incidence.sin() + s.order as f64 * lambda / pitch;
                let theta_m = sin_m.asin();
                let to_screen_normal = if reflect {
                    theta_m
                } else {
                    theta_m - incidence
                };
                // Near grazing the spot smears over metres; compare the orders a screen shows.
                if to_screen_normal.abs() > 75f64.to_radians() {
                    continue;
                }
                let expected = 300.0 * to_screen_normal.tan();
                assert!(
                    (s.centroid_mm[0] - expected).abs() < 3e-5 * (expected.abs() + 1.0),
                    "reflect {reflect} order {}: {} vs {expected}",
                    s.order,
                    s.centroid_mm[0]
                );
            }
            assert!(light.spots.len() >= 3);
        }
    }

    #[test]
    fn spot_profile_integrates_to_the_order_power_and_widens_like_a_gaussian_beam() {
        let setup = GratingSetup {
            distance_m: 3.0,
            ..GratingSetup::default()
        };
        let (_, light) = compute(&setup).unwrap();
        let zero = spot(&light, 0);
        let integral: f64 = zero.profile.iter().sum::<f64>() * zero.step_mm;
        assert!((integral - zero.relative_power).abs() < 1e-3 * zero.relative_power);
        // Gaussian beam (Siegman, Lasers, ch. 17): w(z) = w0 √(1 + (z/zR)²), zR = π w0²/λ;
        // the spot's σ is w/2 in both directions.
        let w0 = 0.75;
        let z_r = std::f64::consts::PI * w0 * w0 / 650e-6;
        let expected = 0.5 * w0 * (1.0 + (3000.0 / z_r).powi(2)).sqrt();
        let mean = zero.centroid_mm[0];
        let var = zero
            .profile
            .iter()
            .enumerate()
            .map(|(i, v)| v * (zero.x0_mm + i as f64 * zero.step_mm - mean).powi(2))
            .sum::<f64>()
            * zero.step_mm
            / integral;
        assert!(
            (var.sqrt() - expected).abs() < 0.01 * expected,
            "{} vs {expected}",
            var.sqrt()
        );
        assert!((zero.sigma_y_mm - expected).abs() < 1e-3 * expected);
    }
}
