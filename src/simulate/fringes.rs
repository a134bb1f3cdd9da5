//! From an aperture's plane waves to fringes on the screen. Every bin of the angular
//! spectrum is a ray from the aperture, intersected with the screen plane z = L as a vector
//! ray–plane intersection; between the landing points the irradiance along X is the
//! interpolated amplitude squared times the Jacobian dα/dX of that landing map, tabulated
//! over the whole fringe train as one light source. Across the pattern (Y), where the
//! transform is one-dimensional, the beam's own Gaussian profile and divergence are added in
//! closed form, as for a grating's spots. A wire's undiffracted beam lands as a grating's
//! zero order does, with the beam's footprint (see [`super::spots`]).
//!
//! The fringe truth (dark and bright fringes, the mean period) is measured numerically on
//! that tabulated irradiance: local extrema found on the table and refined by golden-section
//! search on the interpolant.
//!
//! Frame (millimetres): aperture at the origin, beam along +z, screen the plane z = L;
//! screen X = world x (across the slits), Y = world y (along them), origin on the beam.

use super::SimError;
use super::aperture::{Aperture, ApertureSetup, ApertureSpectrum};
use super::farfield::{AngularSpectrum, GratingProfile, GratingSetup, OrderWaves, PlaneWave};
use super::spots::{self, OrderSpot};
use nalgebra::Vector3;

/// Dark fringes listed on each side of the centre.
pub(crate) const MINIMA_PER_SIDE: usize = 10;
/// Bright fringes listed on each side of the central one.
pub(crate) const MAXIMA_PER_SIDE: usize = 5;

/// Light of an aperture on the screen.
#[derive(Debug, Clone)]
pub(crate) struct FringeLight {
    /// The diffracted fringe train, then (wire) the undiffracted beam.
    pub spots: Vec<OrderSpot>,
    /// Dark fringes, signed index (−1 the first left of centre), X in mm, irradiance.
    pub minima: Vec<Extremum>,
    /// Bright fringes: index 0 the central one.
    pub maxima: Vec<Extremum>,
    /// The brightest fringe outside the undiffracted beam: the exposure reference.
    pub reference: Extremum,
    /// Mean spacing of the dark fringes near the centre (two slits), mm, and how many
    /// fringes on each side it spans.
    pub period: Option<(f64, usize)>,
    pub spectrum_samples: usize,
}

/// One fringe extremum on the pattern axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Extremum {
    pub index: i32,
    pub x_mm: f64,
    /// Irradiance integrated over Y, power fraction per mm.
    pub per_mm: f64,
}

/// Where a ray of direction cosine `alpha` meets the screen plane, and the path length.
fn land(alpha: f64, distance_mm: f64) -> Option<(f64, f64)> {
    let d = Vector3::new(alpha, 0.0, (1.0 - alpha * alpha).max(0.0).sqrt());
    let normal = Vector3::z();
    let cos_screen = d.dot(&normal);
    if cos_screen <= 1e-2 {
        return None;
    }
    let t = distance_mm / cos_screen;
    let hit = d * t;
    Some((hit.x, t))
}

/// The direction cosine whose ray lands at X (the inverse of [`land`]: the unit vector
/// towards (X, 0, L)).
fn alpha_landing_at(x_mm: f64, distance_mm: f64) -> f64 {
    x_mm / x_mm.hypot(distance_mm)
}

/// The fringe train's irradiance per mm at X: |a(α)|² · dα/dX with α the landing direction.
fn train_at(spec: &ApertureSpectrum, x_mm: f64, distance_mm: f64) -> f64 {
    let alpha = alpha_landing_at(x_mm, distance_mm);
    // Jacobian of the landing map from finite differences of the ray intersection itself.
    let h = 1e-7;
    let (Some((x0, _)), Some((x1, _))) =
        (land(alpha - h, distance_mm), land(alpha + h, distance_mm))
    else {
        return 0.0;
    };
    let dx_dalpha = (x1 - x0) / (2.0 * h);
    spec.amplitude_at(alpha).norm_sqr() / dx_dalpha
}

/// Lays the fringes on the screen and measures them.
pub(crate) fn light_on_screen(
    setup: &ApertureSetup,
    spec: &ApertureSpectrum,
) -> Result<FringeLight, SimError> {
    let l_mm = setup.distance_m * 1e3;
    let w_mm = 0.5 * setup.beam_diameter_m * 1e3;
    let lambda_mm = setup.wavelength_m * 1e3;
    let sigma_y = (0.5 * w_mm).hypot(l_mm * lambda_mm / (2.0 * std::f64::consts::PI * w_mm));

    // Reach: up to 1.5 distances or the Nyquist limit of the sampling, whichever is nearer.
    let alpha_max = (0.95 * spec.alpha_limit()).min(0.83);
    let (x_max, _) = land(alpha_max, l_mm).ok_or_else(|| {
        SimError::NoOrderReachesScreen("the fringes never meet the screen".into())
    })?;
    // A landing-bin spacing near the centre spans about six table steps.
    let bin_mm = l_mm * spec.dalpha;
    let step = (bin_mm / 6.0).max(2.0 * x_max / 400_000.0);
    let count = (2.0 * x_max / step).ceil() as usize + 1;
    let x0 = -x_max;
    let profile: Vec<f64> = (0..count)
        .map(|i| train_at(spec, x0 + i as f64 * step, l_mm))
        .collect();
    let integral: f64 = profile.iter().sum::<f64>() * step;
    let peak = profile.iter().cloned().fold(0.0, f64::max);
    let norm_y = (2.0 * std::f64::consts::PI).sqrt() * sigma_y;
    let (mut m2, mut m0) = (0.0, 0.0);
    for (i, v) in profile.iter().enumerate() {
        let x = x0 + i as f64 * step;
        m0 += v;
        m2 += v * x * x;
    }
    let mut spots = vec![OrderSpot {
        order: 0,
        relative_power: integral,
        centroid_mm: [0.0, 0.0],
        sigma_y_mm: sigma_y,
        x0_mm: x0,
        step_mm: step,
        profile,
        peak_per_mm2: peak / norm_y,
        sigma_x_mm: (m2 / m0.max(f64::MIN_POSITIVE)).sqrt(),
        map: None,
    }];
    if let Some(beam) = &spec.beam_power {
        spots.push(through_beam(setup, spec, beam)?);
    }

    let total = |x: f64| {
        let mut v = train_at(spec, x, l_mm);
        if let Some(b) = spots.get(1) {
            v += b.irradiance(x, 0.0) * norm_y_of(b);
        }
        v
    };
    let (minima, maxima) = extrema(&spots, &total);
    if minima.len() < 2 * 2 {
        return Err(SimError::NoOrderReachesScreen(format!(
            "fewer than two dark fringes each side reach the screen within {:.0} mm; use a \
             wider slit or wire, or a longer wavelength",
            x_max
        )));
    }
    // Exposure: the central maximum for slits; for a wire, whose centre is the beam, the
    // brightest side fringe.
    let reference = match setup.aperture {
        Aperture::Wire { .. } => maxima
            .iter()
            .filter(|m| m.index != 0)
            .max_by(|a, b| a.per_mm.total_cmp(&b.per_mm))
            .copied(),
        _ => maxima.iter().find(|m| m.index == 0).copied(),
    }
    .ok_or_else(|| SimError::NoOrderReachesScreen("no bright fringe found".into()))?;
    let period = match setup.aperture {
        Aperture::TwoSlit { .. } => mean_period(&minima),
        _ => None,
    };
    Ok(FringeLight {
        spots,
        minima,
        maxima,
        reference,
        period,
        spectrum_samples: spec.samples,
    })
}

fn norm_y_of(s: &OrderSpot) -> f64 {
    (2.0 * std::f64::consts::PI).sqrt() * s.sigma_y_mm
}

/// The undiffracted beam of a wire: its bins land as a grating's zero order (normal
/// incidence, the same beam), with the beam's footprint.
fn through_beam(
    setup: &ApertureSetup,
    spec: &ApertureSpectrum,
    power: &[f64],
) -> Result<OrderSpot, SimError> {
    let peak = power.iter().cloned().fold(0.0, f64::max);
    let waves: Vec<PlaneWave> = power
        .iter()
        .enumerate()
        .filter(|&(_, &p)| p > 1e-12 * peak)
        .map(|(k, &p)| PlaneWave {
            alpha: spec.signed(k) as f64 * spec.dalpha,
            power: p,
        })
        .collect();
    let total: f64 = waves.iter().map(|w| w.power).sum();
    let beam_setup = GratingSetup {
        wavelength_m: setup.wavelength_m,
        pitch_m: setup.beam_diameter_m,
        distance_m: setup.distance_m,
        incidence_rad: 0.0,
        reflect: false,
        beam_diameter_m: setup.beam_diameter_m,
        profile: GratingProfile::BinaryAmplitude { duty: 0.5 },
    };
    let as_order = AngularSpectrum {
        orders: vec![OrderWaves {
            order: 0,
            power: total,
            waves,
        }],
        missing: Vec::new(),
        grazing: Vec::new(),
        samples: spec.samples,
        dalpha: spec.dalpha,
    };
    let mut light = spots::light_on_screen(&beam_setup, &as_order)?;
    let mut beam = light.spots.pop().ok_or_else(|| {
        SimError::NoOrderReachesScreen("the wire's beam misses the screen".into())
    })?;
    // Its own speckle: a different seed from the fringes'.
    beam.order = 1;
    Ok(beam)
}

/// Local extrema of `f` (per mm) over the tabulated train, from the centre out, refined by
/// golden-section search; a minimum must be at most 0.8 of the lower of its neighbouring
/// maxima (no numerical ripple counts).
fn extrema(spots: &[OrderSpot], f: &dyn Fn(f64) -> f64) -> (Vec<Extremum>, Vec<Extremum>) {
    let s = &spots[0];
    let n = s.profile.len();
    let x_at = |i: usize| s.x0_mm + i as f64 * s.step_mm;
    let v: Vec<f64> = (0..n).map(|i| f(x_at(i))).collect();
    let centre = (n - 1) / 2;
    let mut minima = Vec::new();
    let mut maxima = Vec::new();
    // Central maximum: the highest table value near the centre.
    let refine = |i: usize, sign: f64| -> (f64, f64) {
        let (mut a, mut b) = (x_at(i.saturating_sub(1)), x_at((i + 1).min(n - 1)));
        let g = 0.5 * (5f64.sqrt() - 1.0);
        let h = |x: f64| sign * f(x);
        let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
        let (mut fc, mut fd) = (h(c), h(d));
        for _ in 0..60 {
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
        let x = 0.5 * (a + b);
        (x, f(x))
    };
    let (xc, vc) = refine(centre, -1.0);
    maxima.push(Extremum {
        index: 0,
        x_mm: xc,
        per_mm: vc,
    });
    for dir in [1i64, -1] {
        let sign = dir as f64;
        let mut i = centre as i64;
        let mut k_min = 0;
        let mut k_max = 0;
        let mut last_max = vc;
        let mut pending: Option<(usize, f64)> = None;
        while i + dir >= 1 && i + dir < n as i64 - 1 && k_min < MINIMA_PER_SIDE as i32 {
            i += dir;
            let u = i as usize;
            let (p, c, q) = (v[u - 1], v[u], v[u + 1]);
            if c < p && c <= q || c <= p && c < q {
                pending = Some((u, c));
            } else if (c > p && c >= q || c >= p && c > q) && u != centre {
                if let Some((j, vm)) = pending.take() {
                    if vm <= 0.8 * last_max.min(c) {
                        k_min += 1;
                        let (x, val) = refine(j, 1.0);
                        minima.push(Extremum {
                            index: (sign as i32) * k_min,
                            x_mm: x,
                            per_mm: val,
                        });
                        if k_max < MAXIMA_PER_SIDE as i32 {
                            k_max += 1;
                            let (x, val) = refine(u, -1.0);
                            maxima.push(Extremum {
                                index: (sign as i32) * k_max,
                                x_mm: x,
                                per_mm: val,
                            });
                        }
                    }
                }
                last_max = c;
            }
        }
    }
    minima.sort_by(|a, b| a.x_mm.total_cmp(&b.x_mm));
    maxima.sort_by(|a, b| a.x_mm.total_cmp(&b.x_mm));
    (minima, maxima)
}

/// Mean spacing of the dark fringes nearest the centre: the outermost of the central pairs
/// whose every step stays within 20 % of the central step, at most three each side (farther
/// out, near the envelope's zeros, a beam that lights the two slits unequally across their
/// widths pulls the minima off the even spacing).
fn mean_period(minima: &[Extremum]) -> Option<(f64, usize)> {
    let at = |k: i32| minima.iter().find(|m| m.index == k).map(|m| m.x_mm);
    let first = at(1)? - at(-1)?;
    let mut k = 1;
    while k < 3 {
        let (Some(r), Some(r0), Some(l), Some(l0)) = (at(k + 1), at(k), at(-k - 1), at(-k)) else {
            break;
        };
        if ((r - r0) - first).abs() > 0.2 * first || ((l0 - l) - first).abs() > 0.2 * first {
            break;
        }
        k += 1;
    }
    Some(((at(k)? - at(-k)?) / (2 * k - 1) as f64, k as usize))
}

/// Far field and its landing on the screen.
pub(crate) fn compute(setup: &ApertureSetup) -> Result<FringeLight, SimError> {
    let spec = super::aperture::angular_spectrum(setup)?;
    light_on_screen(setup, &spec)
}
