//! The truth of an electron-diffraction photo, `PHOTO.truth.json`: the inputs, the
//! wavelength, the pattern's centre, and per ring its reflection, spacing, deflection, radius
//! on the screen and the exact ellipse it makes in the photo. A ring is a circle in a plane
//! parallel to the screen's front plane (z = 0; on the bulb, R·(1 − cos 2θ) behind it), so
//! its image is the conic H⁻ᵀ·C·H⁻¹ of that plane's homography H (Hartley & Zisserman,
//! *Multiple View Geometry*, §2.2.3), and the ellipse's centre, axes and angle follow from it.

use super::camera::Camera;
use super::effects::Effects;
use super::electron::{ElectronSetup, TubeScreen};
use super::electron_light::Light;
use super::electron_photo::{Tube, TubeScene};
use super::truth::{CameraTruth, RulerTruth, view_truth};
use nalgebra::{Matrix2, Matrix3};
use serde::{Deserialize, Serialize};

/// Truth of an electron-diffraction photo.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ElectronTruth {
    /// Experiment kind, "electron".
    pub kind: String,
    /// Seed of every random choice in the photo.
    pub seed: u64,
    /// The tube as given (SI units).
    pub inputs: ElectronSetup,
    /// The electron wavelength, m.
    pub wavelength_m: f64,
    /// How screen millimetres are measured.
    pub screen_frame: String,
    /// The pattern's centre (the undiffracted beam) on the screen, mm: the origin.
    pub centre_mm: [f64; 2],
    /// That centre in the photo, px.
    pub centre_px: Option<[f64; 2]>,
    /// The camera as placed.
    pub camera: CameraTruth,
    /// Front plane (z = 0) mm → px, row-major, last entry 1.
    pub homography: [[f64; 3]; 3],
    /// The rings on the phosphor, inner first (none with the beam off).
    pub rings: Vec<RingTruth>,
    /// The next rings past the screen's edge (not drawn).
    pub rings_beyond_screen: Vec<String>,
    /// Radius of the phosphor's outline seen from the front, mm.
    pub screen_radius_mm: f64,
    /// The outline's ellipse in the photo: the phosphor disc's edge, or the bulb's equator
    /// (radius R, R behind the front plane); `None` if it cannot be imaged.
    pub outline: Option<EllipseTruth>,
    /// Centre of the lens ghost of the spot (not a ring), px.
    pub ghost_px: Option<[f64; 2]>,
    /// The ruler in the front plane, if present.
    pub ruler: Option<RulerTruth>,
    /// The room and phosphor as given.
    pub scene: TubeScene,
    /// The effects as given.
    pub effects: Effects,
    /// Plain-language remarks.
    pub notes: Vec<String>,
}

/// One ring.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RingTruth {
    /// Reflection label: "111" (cubic), "10.0" (hexagonal hk.l); several families sharing a
    /// spacing are joined by "/".
    pub label: String,
    /// Representative indices (h, k, l).
    pub hkl: [i32; 3],
    /// Reflections with a non-zero structure factor in the ring.
    pub multiplicity: u32,
    /// Interplanar spacing, m.
    pub d_m: f64,
    /// Deflection 2θ, rad.
    pub two_theta_rad: f64,
    /// Distance of the ring from the axis on the screen (flat: L·tan 2θ; bulb: R·sin 2θ,
    /// as seen from the front along the axis), mm.
    pub radius_mm: f64,
    /// Depth of the ring's plane behind the front plane, mm (0 on a flat screen).
    pub depth_mm: f64,
    /// Half-extent of the ring's image along image x and y, px (0 if it cannot be imaged).
    pub radius_px: [f64; 2],
    /// The ring's image (`None` if it cannot be imaged).
    pub ellipse: Option<EllipseTruth>,
    /// FWHM of the ring across its radius on the screen, mm.
    pub fwhm_mm: f64,
    /// Ring power relative to the strongest ring.
    pub relative_intensity: f64,
    /// The ring's peak over the phosphor's glow at its radius (0.05: 5 % above it).
    pub peak_over_glow: f64,
    /// Whether the whole ellipse lies on the sensor.
    pub in_frame: bool,
}

/// An ellipse in the photo.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EllipseTruth {
    /// Centre, px.
    pub centre_px: [f64; 2],
    /// Semi-major and semi-minor axes, px.
    pub semi_axes_px: [f64; 2],
    /// Angle of the major axis from image x towards image y (clockwise as seen), rad, in
    /// (−π/2, π/2].
    pub angle_rad: f64,
}

impl EllipseTruth {
    /// Half-extents along image x and y.
    pub fn half_extents(&self) -> [f64; 2] {
        let [a, b] = self.semi_axes_px;
        let (s, c) = self.angle_rad.sin_cos();
        [
            (a * a * c * c + b * b * s * s).sqrt(),
            (a * a * s * s + b * b * c * c).sqrt(),
        ]
    }
}

pub(crate) struct Parts<'a> {
    pub setup: &'a ElectronSetup,
    pub scene: &'a TubeScene,
    pub effects: &'a Effects,
    pub seed: u64,
    pub camera: &'a Camera,
    pub tube: &'a Tube,
    pub light: &'a Light,
    pub beyond: Vec<String>,
    pub ghost_px: Option<[f64; 2]>,
    pub flare: Option<([f64; 2], f64)>,
}

/// The image of the circle of `radius_mm` about the axis, `depth_mm` behind the front plane.
pub(crate) fn ring_ellipse(cam: &Camera, radius_mm: f64, depth_mm: f64) -> Option<EllipseTruth> {
    // A point (X, Y, z) lies on the camera's ray through the front-plane point
    // c + t·((X, Y, z) − c), t = −c_z/(z − c_z): an affine map of the ring's plane.
    let c = cam.centre_mm;
    let t = -c[2] / (depth_mm - c[2]);
    let a = Matrix3::new(
        t,
        0.0,
        (1.0 - t) * c[0],
        0.0,
        t,
        (1.0 - t) * c[1],
        0.0,
        0.0,
        1.0,
    );
    let h = cam.homography() * a;
    let h_inv = h.try_inverse()?;
    let circle = Matrix3::from_diagonal(&nalgebra::Vector3::new(1.0, 1.0, -radius_mm * radius_mm));
    let q = h_inv.transpose() * circle * h_inv;
    conic_to_ellipse(&q)
}

/// Centre, axes and angle of the ellipse x̃ᵀ·Q·x̃ = 0.
fn conic_to_ellipse(q: &Matrix3<f64>) -> Option<EllipseTruth> {
    let m = Matrix2::new(q[(0, 0)], q[(0, 1)], q[(1, 0)], q[(1, 1)]);
    let centre = -m.try_inverse()? * nalgebra::Vector2::new(q[(0, 2)], q[(1, 2)]);
    let f = q[(2, 2)] + q[(0, 2)] * centre.x + q[(1, 2)] * centre.y;
    let eig = m.symmetric_eigen();
    let (l0, l1) = (eig.eigenvalues[0], eig.eigenvalues[1]);
    if l0 * l1 <= 0.0 || f * l0 >= 0.0 {
        return None;
    }
    // The smaller |λ| belongs to the major axis.
    let (major, minor, v) = if l0.abs() < l1.abs() {
        (l0, l1, eig.eigenvectors.column(0))
    } else {
        (l1, l0, eig.eigenvectors.column(1))
    };
    let mut angle = v[1].atan2(v[0]);
    if angle <= -std::f64::consts::FRAC_PI_2 {
        angle += std::f64::consts::PI;
    } else if angle > std::f64::consts::FRAC_PI_2 {
        angle -= std::f64::consts::PI;
    }
    Some(EllipseTruth {
        centre_px: [centre.x, centre.y],
        semi_axes_px: [(-f / major).sqrt(), (-f / minor).sqrt()],
        angle_rad: angle,
    })
}

/// Assembles the truth.
pub(crate) fn build(p: Parts) -> ElectronTruth {
    let cam = p.camera;
    let screen = p.setup.screen;
    let scene = super::scene::Scene {
        ruler: p.tube.ruler_screen.scene.ruler,
        ..super::scene::Scene::default()
    };
    let view = view_truth(&scene, cam, &p.tube.ruler_screen, 0.0);
    let (w, h) = (cam.spec.width_px as f64, cam.spec.height_px as f64);
    let contrasts = p.light.contrasts();
    let rings: Vec<RingTruth> = p
        .light
        .rings()
        .iter()
        .zip(contrasts)
        .map(|(r, contrast)| {
            let radius_mm = screen.radius_mm(r.two_theta);
            let depth_mm = screen.depth_mm(r.two_theta);
            let ellipse = ring_ellipse(cam, radius_mm, depth_mm);
            let ext = ellipse.map_or([0.0; 2], |e| e.half_extents());
            let in_frame = ellipse.is_some_and(|e| {
                e.centre_px[0] - ext[0] >= -0.5
                    && e.centre_px[0] + ext[0] <= w - 0.5
                    && e.centre_px[1] - ext[1] >= -0.5
                    && e.centre_px[1] + ext[1] <= h - 0.5
            });
            let fwhm_rad = r.sigma_rad * (8.0 * std::f64::consts::LN_2).sqrt();
            // dr/dψ on the screen: flat L·sec²ψ, bulb R·cos ψ.
            let slope = match screen {
                TubeScreen::Flat { distance_m, .. } => 1e3 * distance_m / r.two_theta.cos().powi(2),
                TubeScreen::Sphere { radius_m, .. } => 1e3 * radius_m * r.two_theta.cos(),
            };
            RingTruth {
                label: r.label.clone(),
                hkl: r.hkl,
                multiplicity: r.multiplicity,
                d_m: r.d_m,
                two_theta_rad: r.two_theta,
                radius_mm,
                depth_mm,
                radius_px: ext,
                ellipse,
                fwhm_mm: fwhm_rad * slope,
                relative_intensity: r.relative_power,
                peak_over_glow: contrast,
                in_frame,
            }
        })
        .collect();
    let screen_radius_mm = screen.outline_mm();
    let outline_depth = match screen {
        TubeScreen::Flat { .. } => 0.0,
        TubeScreen::Sphere { radius_m, .. } => 1e3 * radius_m,
    };
    let outline = ring_ellipse(cam, screen_radius_mm, outline_depth);
    let mut notes = vec![
        "ring intensities: kinematic powder model, Σ|S|²·f(q)²·exp(−2Bs²)/sin θ with a \
         screened-Coulomb atomic amplitude; profiles Gaussian in 2θ (Scherrer width and beam \
         divergence in quadrature)"
            .to_string(),
        match screen {
            TubeScreen::Flat { .. } => {
                "flat screen perpendicular to the beam: r = L·tan 2θ".to_string()
            }
            TubeScreen::Sphere { .. } => "spherical bulb centred on the film: a ring lies on \
                 the sphere at r = R·sin 2θ from the axis, R·(1 − cos 2θ) behind the bulb's \
                 front plane; the ruler lies in that front plane"
                .to_string(),
        },
        "the centre spot's peak is the overexposure in the phosphor's weakest (red) channel"
            .to_string(),
    ];
    if !p.setup.beam_on {
        notes.push("beam off: no spot, glow or rings".into());
    }
    if !p.beyond.is_empty() && p.setup.beam_on {
        notes.push(format!(
            "rings past the screen's edge, not drawn: {}",
            p.beyond.join(", ")
        ));
    }
    for r in &rings {
        if !r.in_frame {
            notes.push(format!("ring {} runs off the frame", r.label));
        }
    }
    if let Some(g) = p.ghost_px {
        notes.push(format!(
            "lens ghost of the spot (not a ring) at px [{:.0}, {:.0}]",
            g[0], g[1]
        ));
    }
    if let Some((q, angle)) = p.flare {
        notes.push(format!(
            "lens-flare streak through px [{:.0}, {:.0}] at {:.1}° from image x",
            q[0],
            q[1],
            angle.to_degrees()
        ));
    }
    ElectronTruth {
        kind: "electron".into(),
        seed: p.seed,
        inputs: *p.setup,
        wavelength_m: p.setup.wavelength_m(),
        screen_frame: "origin where the undiffracted beam meets the screen; X right, Y down \
                       as the camera sees the screen from the front; millimetres in the \
                       screen's front plane (z = 0, the flat screen itself or the plane \
                       touching the bulb's front), points behind it given by their front view"
            .into(),
        centre_mm: [0.0, 0.0],
        centre_px: cam.project([0.0, 0.0]),
        camera: view.camera,
        homography: view.homography,
        rings,
        rings_beyond_screen: p.beyond,
        screen_radius_mm,
        outline,
        ghost_px: p.ghost_px,
        ruler: view.ruler,
        scene: *p.scene,
        effects: *p.effects,
        notes,
    }
}
