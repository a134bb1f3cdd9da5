//! The photo behind [`super::render_electron`]: a phone's view of a diffraction tube in a
//! darkened room. Every sample's ray from the pinhole camera (the same [`Camera`] as the
//! other kinds) is met with the scene in 3-D: a flat ruler in the screen's front plane
//! (z = 0), then the flat phosphor disc in that plane or the spherical bulb behind it
//! (centre on the axis at z = R, so the bulb's front touches z = 0). Where the ray meets the
//! phosphor, the deflection ψ of the electrons that land there gives the light: a diffuse
//! glow falling steeply with ψ, the rings, and the undiffracted beam's spot; on a flat screen
//! the flux per area carries cos³ψ (solid angle per area), on the bulb it is uniform. Then
//! the camera's vignetting, a lens ghost of the spot, blur, blooming, noise and sRGB.

use super::camera::{Camera, CameraSpec, Framing};
use super::effects::{self, Effects};
use super::electron::{ElectronSetup, TubeScreen};
use super::electron_light::{Light, Profile};
use super::electron_truth::{self, ElectronTruth};
use super::glare;
use super::scene::{Ruler, Scene};
use super::screen::{Footprint, Screen, box_cover, value_noise};
use super::{SimError, SimPhoto};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Camera RGB of the green P31-like phosphor (ZnS:Cu, a broad band near 530 nm), brightest
/// channel 1: a plausible response, not data.
pub(crate) const PHOSPHOR_RGB: [f32; 3] = [0.30, 1.0, 0.36];

/// The room around the tube and the look of the phosphor.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TubeScene {
    /// Linear signal of white paper lit by the dim room light (a darkened room: 0.025).
    pub room_level: f64,
    /// Fractional darkening at the frame corners.
    pub vignetting: f64,
    /// A flat ruler in the screen's front plane below the tube, parallel to image x when the
    /// camera is not rolled. Here `offset_mm` is the gap between the tube's outline and the
    /// ruler's ticked edge, and the scale is centred under the pattern plus `shift_mm`.
    pub ruler: Option<Ruler>,
    /// Linear signal (green channel) of the phosphor's diffuse glow next to the spot.
    pub glow_level: f64,
    /// Deflection at which the glow's steep part has fallen to 35 % (it goes as
    /// (1 + (ψ/w)²)^(−3/2)), rad.
    pub glow_width_rad: f64,
    /// The glow's flat floor (electrons scattered everywhere, light piped by the glass), as
    /// a fraction of `glow_level`.
    pub glow_floor: f64,
    /// A lens ghost of the spot mirrored through the image centre, its peak relative to
    /// saturation (0: none).
    pub ghost: f64,
}

impl Default for TubeScene {
    /// A darkened room, a ruler 8 mm below the tube, a faint ghost.
    fn default() -> Self {
        TubeScene {
            room_level: 0.025,
            vignetting: 0.3,
            ruler: Some(Ruler {
                offset_mm: 8.0,
                length_mm: 100.0,
                width_mm: 16.0,
                ..Ruler::default()
            }),
            glow_level: 0.6,
            glow_width_rad: 0.07,
            glow_floor: 0.05,
            ghost: 0.03,
        }
    }
}

impl TubeScene {
    /// Checks the inputs.
    pub fn validate(&self) -> Result<(), SimError> {
        let checks = [
            (
                "room_level",
                self.room_level,
                (0.0..=1.0).contains(&self.room_level),
            ),
            (
                "vignetting",
                self.vignetting,
                (0.0..0.9).contains(&self.vignetting),
            ),
            (
                "glow_level",
                self.glow_level,
                (0.0..=10.0).contains(&self.glow_level),
            ),
            (
                "glow_width_rad",
                self.glow_width_rad,
                (0.005..=1.5).contains(&self.glow_width_rad),
            ),
            (
                "glow_floor",
                self.glow_floor,
                (0.0..=1.0).contains(&self.glow_floor),
            ),
            ("ghost", self.ghost, (0.0..=5.0).contains(&self.ghost)),
        ];
        for (name, value, ok) in checks {
            if !(value.is_finite() && ok) {
                return Err(SimError::BadInput {
                    name,
                    value,
                    expected: "a finite value in the documented range (see TubeScene)",
                });
            }
        }
        if let Some(r) = self.ruler {
            let scene = Scene {
                ruler: Some(r),
                ..Scene::default()
            };
            scene.validate()?;
        }
        Ok(())
    }
}

/// The tube and ruler, placed.
pub(crate) struct Tube {
    pub screen: TubeScreen,
    /// Screen with the ruler only (its reflectance drawing).
    pub ruler_screen: Screen,
    /// Where the ruler's strip is: [x0, x1, y0, y1], mm.
    ruler_box: Option<[f64; 4]>,
    /// Width of the glass rim or bezel round a flat screen, mm.
    rim_mm: f64,
}

impl Tube {
    fn new(screen: TubeScreen, scene: &TubeScene, seed: u64) -> Self {
        let rim_mm = match screen {
            TubeScreen::Flat { .. } => 7.0,
            TubeScreen::Sphere { .. } => 0.0,
        };
        let ruler = scene.ruler.map(|r| Ruler {
            offset_mm: screen.outline_mm() + rim_mm + r.offset_mm,
            ..r
        });
        let ruler_screen = Screen::new(
            Scene {
                ruler,
                ..Scene::default()
            },
            0.0,
            None,
            seed,
        );
        let ruler_box = ruler_screen.ruler.as_ref().map(|p| {
            [
                p.start_x_mm - 5.0,
                p.end_x_mm + 5.0,
                p.ruler.offset_mm,
                p.ruler.offset_mm + p.ruler.width_mm,
            ]
        });
        Tube {
            screen,
            ruler_screen,
            ruler_box,
            rim_mm,
        }
    }

    /// Screen-plane points the automatic framing keeps in view.
    fn frame_points(&self) -> Vec<[f64; 2]> {
        let r = self.screen.outline_mm() + self.rim_mm + 4.0;
        let mut pts: Vec<[f64; 2]> = (0..24)
            .map(|i| {
                let a = i as f64 * std::f64::consts::PI / 12.0;
                [r * a.cos(), r * a.sin()]
            })
            .collect();
        if let Some(p) = &self.ruler_screen.ruler {
            pts.extend(p.corners_mm());
        }
        pts
    }
}

/// One sample's light: what a ray through the camera centre `c` and the front-plane point
/// `q` sees.
struct Sample<'a> {
    tube: &'a Tube,
    light: &'a Light,
    profile: Profile,
    room: f64,
    seed: u64,
}

const BACKGROUND: f32 = 0.025;
const PHOSPHOR_WHITE: [f32; 3] = [0.62, 0.63, 0.58];

impl Sample<'_> {
    /// The phosphor's grain near the front-plane point `q`, a factor near 1 (smooth over a
    /// pixel, so one value serves all its samples).
    fn grain(&self, q: [f64; 2]) -> f64 {
        1.0 + 0.05 * value_noise(q[0] / 0.12, q[1] / 0.12, self.seed)
            + 0.03 * value_noise(q[0] / 0.9, q[1] / 0.9, self.seed ^ 0x7068_6f73)
    }

    fn see(&self, c: [f64; 3], q: [f64; 2], fp: Footprint, grain: f64) -> [f32; 3] {
        let room = self.room as f32;
        let behind = match self.tube.screen {
            TubeScreen::Flat { .. } => self.flat(q, fp, grain),
            TubeScreen::Sphere {
                radius_m,
                coated_to_rad,
            } => self.sphere(c, q, radius_m * 1e3, coated_to_rad, fp, grain),
        };
        let Some(b) = self.tube.ruler_box else {
            return behind;
        };
        let cover =
            (box_cover(q[0], fp.hx, b[0], b[1]) * box_cover(q[1], fp.hy, b[2], b[3])) as f32;
        if cover <= 0.0 {
            return behind;
        }
        let Some(r) = &self.tube.ruler_screen.ruler else {
            return behind;
        };
        // Lit by the room and, faintly, by the glowing screen above it.
        let face = self
            .tube
            .ruler_screen
            .ruler_over(r, [0.0; 3], q[0], q[1], fp);
        let gap = q[1] - self.tube.screen.outline_mm();
        let spill = if self.light.on {
            (0.15 * self.light.glow_level / (1.0 + (gap / 30.0).powi(2))) as f32
        } else {
            0.0
        };
        let mut out = [0.0f32; 3];
        for i in 0..3 {
            out[i] = behind[i] * (1.0 - cover) + face[i] * (room + spill * PHOSPHOR_RGB[i]);
        }
        out
    }

    /// The phosphor's emission and its reflectance under the room light at the front-view
    /// distance `rho` from the axis.
    fn phosphor(&self, rho: f64, grain: f64) -> [f32; 3] {
        let e = self.profile.at(rho) * grain as f32;
        let room = self.room as f32;
        [0, 1, 2].map(|i| e * PHOSPHOR_RGB[i] + room * PHOSPHOR_WHITE[i])
    }

    fn flat(&self, q: [f64; 2], fp: Footprint, grain: f64) -> [f32; 3] {
        // Not `hypot`: its care for overflow costs more than the whole rest of a sample.
        let rho = (q[0] * q[0] + q[1] * q[1]).sqrt();
        let rs = self.tube.screen.outline_mm();
        let h = fp.hx.max(fp.hy);
        let on = box_cover(rho, h, -1.0, rs) as f32;
        let room = self.room as f32;
        let mut out = [room * BACKGROUND; 3];
        if on < 1.0 {
            // The bezel: dark grey, a little brighter at its outer lip.
            let rim = box_cover(rho, h, rs, rs + self.tube.rim_mm) as f32;
            let z = (rho - rs - self.tube.rim_mm + 1.0) / 0.8;
            let lip = if z.abs() < 6.0 {
                (-z * z).exp() as f32
            } else {
                0.0
            };
            let bezel = room * (0.12 + 0.25 * lip);
            out = out.map(|b| b * (1.0 - rim) + bezel * rim);
        }
        if on > 0.0 {
            let ph = self.phosphor(rho, grain);
            for (o, p) in out.iter_mut().zip(ph) {
                *o = *o * (1.0 - on) + p * on;
            }
        }
        out
    }

    fn sphere(
        &self,
        c: [f64; 3],
        q: [f64; 2],
        r_mm: f64,
        coated: f64,
        fp: Footprint,
        grain: f64,
    ) -> [f32; 3] {
        let room = self.room as f32;
        let d = [q[0] - c[0], q[1] - c[1], -c[2]];
        let n = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
        let d = d.map(|v| v / n);
        // |c + t d − s|² = R², s = (0, 0, R).
        let oc = [c[0], c[1], c[2] - r_mm];
        let b = oc[0] * d[0] + oc[1] * d[1] + oc[2] * d[2];
        let disc = b * b - (oc[0] * oc[0] + oc[1] * oc[1] + oc[2] * oc[2] - r_mm * r_mm);
        if disc <= 0.0 {
            return [room * BACKGROUND; 3];
        }
        let t = -b - disc.sqrt();
        let p = [c[0] + t * d[0], c[1] + t * d[1], c[2] + t * d[2]];
        let normal = [p[0] / r_mm, p[1] / r_mm, (p[2] - r_mm) / r_mm];
        let cos_psi = (-normal[2]).clamp(-1.0, 1.0);
        let psi = cos_psi.acos();
        // Through the coating's edge, softened over the sample's footprint on the glass.
        let h = fp.hx.max(fp.hy) / cos_psi.abs().max(0.2);
        let on = box_cover(r_mm * psi, h, -1.0, r_mm * coated) as f32;
        let mut out = [room * 0.6 * BACKGROUND; 3];
        if on > 0.0 {
            let ph = self.phosphor((p[0] * p[0] + p[1] * p[1]).sqrt(), grain);
            for (o, v) in out.iter_mut().zip(ph) {
                *o = *o * (1.0 - on) + v * on;
            }
        }
        // The glass reflects the room (Schlick's Fresnel approximation, n = 1.5) and a lamp
        // up and to the left.
        let cos_i = -(d[0] * normal[0] + d[1] * normal[1] + d[2] * normal[2]);
        let fresnel = 0.04 + 0.96 * (1.0 - cos_i.clamp(0.0, 1.0)).powi(5);
        let refl = [0, 1, 2].map(|i| d[i] + 2.0 * cos_i * normal[i]);
        let lamp = [-0.45, -0.55, -0.70];
        let norm: f64 = lamp[0] * lamp[0] + lamp[1] * lamp[1] + lamp[2] * lamp[2];
        let dot = (refl[0] * lamp[0] + refl[1] * lamp[1] + refl[2] * lamp[2]) / norm.sqrt();
        let glint = if dot > 0.99 {
            30.0 * dot.powi(600)
        } else {
            0.0
        };
        let env = (fresnel * (0.8 + glint)) as f32 * room;
        out.map(|v| v + env)
    }
}

/// Renders the photo in linear light; returns the interleaved RGB and the truth.
pub(crate) fn render_linear(
    setup: &ElectronSetup,
    scene: &TubeScene,
    spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<(Vec<f32>, ElectronTruth), SimError> {
    setup.validate()?;
    scene.validate()?;
    spec.validate()?;
    effects.validate()?;
    let (rings, beyond) = setup.rings();
    if setup.beam_on && rings.is_empty() {
        return Err(SimError::NoOrderReachesScreen(format!(
            "no ring of {} at {:.0} V falls within the screen's {:.1}° of deflection (next: {}); \
             raise the voltage, or use a larger or nearer screen",
            setup.lattice.family.name(),
            setup.voltage_v,
            setup.screen.max_deflection_rad().to_degrees(),
            if beyond.is_empty() {
                "none".to_string()
            } else {
                beyond.join(", ")
            }
        )));
    }
    let rings = if setup.beam_on { rings } else { Vec::new() };
    let tube = Tube::new(setup.screen, scene, seed);
    let camera = match spec.framing {
        Framing::Fixed {
            aim_mm,
            distance_mm,
        } => Camera::new(*spec, aim_mm, distance_mm)?,
        Framing::Auto { margin, .. } => Camera::frame(*spec, &tube.frame_points(), margin)?,
    };
    let light = Light::new(setup, scene, effects, rings);
    let (w, h) = (spec.width_px as usize, spec.height_px as usize);
    let mut rgb = draw(&camera, &tube, &light, scene, seed);
    let centre_px = camera.project([0.0, 0.0]);
    let ghost_px = match centre_px {
        Some(p) if setup.beam_on && scene.ghost > 0.0 => {
            let g = add_ghost(&mut rgb, w, h, p, scene.ghost);
            Some(g)
        }
        _ => None,
    };
    let flare = match centre_px {
        Some(p) if setup.beam_on && effects.flare > 0.0 => {
            let angle = glare::flare_angle([1.0, 0.0], seed);
            glare::add_flare(&mut rgb, w, h, p, angle, effects.flare, PHOSPHOR_RGB);
            Some((p, angle))
        }
        _ => None,
    };
    effects::blur(&mut rgb, w, h, 3, effects.blur_px);
    if effects.bloom > 0.0 {
        glare::bloom(&mut rgb, w, h, effects.bloom);
    }
    let truth = electron_truth::build(electron_truth::Parts {
        setup,
        scene,
        effects,
        seed,
        camera: &camera,
        tube: &tube,
        light: &light,
        beyond,
        ghost_px,
        flare,
    });
    Ok((rgb, truth))
}

/// The pixel loop: s×s samples per pixel, rows in parallel.
fn draw(camera: &Camera, tube: &Tube, light: &Light, scene: &TubeScene, seed: u64) -> Vec<f32> {
    let spec = &camera.spec;
    let (w, h) = (spec.width_px as usize, spec.height_px as usize);
    let ss = spec.supersample.max(1) as usize;
    let m = camera.inverse();
    let hi = [0, 1, 2].map(|r| [0, 1, 2].map(|c| m[(r, c)]));
    let c = camera.centre_mm;
    let sample = Sample {
        tube,
        light,
        profile: Profile::new(light, tube.screen),
        room: scene.room_level,
        seed,
    };
    let (cx, cy) = (0.5 * (w as f64 - 1.0), 0.5 * (h as f64 - 1.0));
    let r2_corner = cx * cx + cy * cy;
    let mut img = vec![0.0f32; w * h * 3];
    img.par_chunks_mut(w * 3).enumerate().for_each(|(y, row)| {
        let yf = y as f64;
        for (x, px) in row.chunks_exact_mut(3).enumerate() {
            let xf = x as f64;
            let q3 = hi[2][0] * xf + hi[2][1] * yf + hi[2][2];
            let mut grain = 1.0;
            let fp = if q3 > 0.0 {
                let sx = (hi[0][0] * xf + hi[0][1] * yf + hi[0][2]) / q3;
                let sy = (hi[1][0] * xf + hi[1][1] * yf + hi[1][2]) / q3;
                grain = sample.grain([sx, sy]);
                let j = [
                    (hi[0][0] - sx * hi[2][0]) / q3,
                    (hi[0][1] - sx * hi[2][1]) / q3,
                    (hi[1][0] - sy * hi[2][0]) / q3,
                    (hi[1][1] - sy * hi[2][1]) / q3,
                ];
                Footprint {
                    hx: 0.5 * (j[0].abs() + j[1].abs()) / ss as f64,
                    hy: 0.5 * (j[2].abs() + j[3].abs()) / ss as f64,
                }
            } else {
                Footprint { hx: 1.0, hy: 1.0 }
            };
            let mut acc = [0.0f32; 3];
            for jy in 0..ss {
                for ix in 0..ss {
                    let u = xf + (ix as f64 + 0.5) / ss as f64 - 0.5;
                    let v = yf + (jy as f64 + 0.5) / ss as f64 - 0.5;
                    let w3 = hi[2][0] * u + hi[2][1] * v + hi[2][2];
                    let seen = if w3 <= 1e-15 {
                        [(scene.room_level as f32) * BACKGROUND; 3]
                    } else {
                        let q = [
                            (hi[0][0] * u + hi[0][1] * v + hi[0][2]) / w3,
                            (hi[1][0] * u + hi[1][1] * v + hi[1][2]) / w3,
                        ];
                        sample.see(c, q, fp, grain)
                    };
                    for (a, s) in acc.iter_mut().zip(seen) {
                        *a += s;
                    }
                }
            }
            let r2 = (xf - cx).powi(2) + (yf - cy).powi(2);
            let vignette = (1.0 - scene.vignetting * r2 / r2_corner) as f32 / (ss * ss) as f32;
            for (o, a) in px.iter_mut().zip(acc) {
                *o = a * vignette;
            }
        }
    });
    img
}

/// Adds a lens ghost of the spot: a soft disc mirrored through the image centre (an internal
/// reflection between lens elements). Returns its centre, px.
fn add_ghost(data: &mut [f32], width: usize, height: usize, spot: [f64; 2], peak: f64) -> [f64; 2] {
    let (w, h) = (width as f64, height as f64);
    let centre = [0.5 * (w - 1.0), 0.5 * (h - 1.0)];
    let g = [
        centre[0] + 0.6 * (centre[0] - spot[0]),
        centre[1] + 0.6 * (centre[1] - spot[1]),
    ];
    let radius = 0.018 * w.max(h);
    let y0 = (g[1] - 1.5 * radius).floor().max(0.0) as usize;
    let y1 = ((g[1] + 1.5 * radius).ceil().max(0.0) as usize).min(height);
    let x0 = (g[0] - 1.5 * radius).floor().max(0.0) as usize;
    let x1 = ((g[0] + 1.5 * radius).ceil().max(0.0) as usize).min(width);
    for y in y0..y1 {
        for x in x0..x1 {
            let r = (x as f64 - g[0]).hypot(y as f64 - g[1]) / radius;
            // A disc with a soft edge and a slightly brighter rim, as lens ghosts show.
            let v = peak * (0.5 - (r - 1.0) / 0.25).clamp(0.0, 1.0) * (0.7 + 0.3 * r.min(1.0));
            if v > 0.0 {
                let i = (y * width + x) * 3;
                for (c, k) in PHOSPHOR_RGB.iter().enumerate() {
                    data[i + c] += (v * *k as f64) as f32;
                }
            }
        }
    }
    g
}

/// Renders an electron-diffraction tube photo through noise and sRGB encoding.
pub(crate) fn render(
    setup: &ElectronSetup,
    scene: &TubeScene,
    spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
) -> Result<SimPhoto<ElectronTruth>, SimError> {
    let (rgb, truth) = render_linear(setup, scene, spec, effects, seed)?;
    let bytes = effects::to_srgb8(&rgb, spec.width_px as usize, effects, seed);
    drop(rgb);
    let image =
        image::RgbImage::from_raw(spec.width_px, spec.height_px, bytes).ok_or_else(|| {
            SimError::CameraSeesNoScreen("internal: image buffer size mismatch".into())
        })?;
    Ok(SimPhoto { image, truth })
}
