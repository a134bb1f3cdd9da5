//! The known truth of a synthetic photo, written beside it as `PHOTO.truth.json`. Inputs are
//! in SI units; screen positions in millimetres in the frame described by [`ScreenFrame`];
//! pixel positions in the convention of DESIGN §2 (centre of the top-left pixel at (0, 0)).

use super::camera::{Camera, CameraSpec};
use super::clutter::ClutterLayout;
use super::effects::Effects;
use super::farfield::{AngularSpectrum, GratingProfile, GratingSetup};
use super::photo::{Rendered, sheet_corners};
use super::scene::{GraphPaper, Scene, Surface};
use super::screen::{PlacedRuler, Screen};
use super::spots::{OrderSpot, ScreenLight};
use serde::{Deserialize, Serialize};

/// Truth of one rendered photo.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Experiment kind, "grating".
    pub kind: String,
    /// Seed of every random choice in the photo.
    pub seed: u64,
    /// The bench, SI units.
    pub inputs: GratingInputs,
    /// The screen coordinate frame.
    pub screen: ScreenFrame,
    /// The camera as placed.
    pub camera: CameraTruth,
    /// Screen mm → image px, row-major, last entry 1.
    pub homography: [[f64; 3]; 3],
    /// Every order with light, from the most negative.
    pub orders: Vec<OrderTruth>,
    /// Propagating orders with no power (e.g. even orders at duty 0.5).
    pub missing_orders: Vec<i32>,
    /// Orders that propagate but do not reach the screen (or only at grazing).
    pub unreached_orders: Vec<i32>,
    /// True when no order but the zero order propagates (the pitch is too fine).
    pub only_zero_order: bool,
    /// The ruler, if present.
    pub ruler: Option<RulerTruth>,
    /// Graph paper, if present.
    pub grid: Option<GridTruth>,
    /// Paper sheet, if present.
    pub sheet: Option<SheetTruth>,
    /// The scene as given.
    pub scene: Scene,
    /// The effects as given.
    pub effects: Effects,
    /// Plain-language remarks (hidden orders, distractors, limits of the model).
    pub notes: Vec<String>,
}

/// Bench inputs in SI units.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GratingInputs {
    /// Laser wavelength, m.
    pub wavelength_m: f64,
    /// Grating period, m.
    pub pitch_m: f64,
    /// Grating to screen, m (along the beam for transmission, the normal for reflection).
    pub distance_m: f64,
    /// Incidence angle from the grating normal, rad.
    pub incidence_rad: f64,
    /// Reflection geometry.
    pub reflect: bool,
    /// Beam 1/e² diameter, m.
    pub beam_diameter_m: f64,
    /// Clear fraction of a binary amplitude grating.
    pub duty: Option<f64>,
    /// Peak phase of a sinusoidal phase grating, rad.
    pub phase_amplitude_rad: Option<f64>,
}

impl From<&GratingSetup> for GratingInputs {
    fn from(s: &GratingSetup) -> Self {
        let (duty, phase) = match s.profile {
            GratingProfile::BinaryAmplitude { duty } => (Some(duty), None),
            GratingProfile::SinusoidalPhase { amplitude_rad } => (None, Some(amplitude_rad)),
        };
        GratingInputs {
            wavelength_m: s.wavelength_m,
            pitch_m: s.pitch_m,
            distance_m: s.distance_m,
            incidence_rad: s.incidence_rad,
            reflect: s.reflect,
            beam_diameter_m: s.beam_diameter_m,
            duty,
            phase_amplitude_rad: phase,
        }
    }
}

/// The screen coordinate frame.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ScreenFrame {
    /// What the origin is: "zero order" (transmission: the undeviated beam) or "foot of the
    /// grating normal" (reflection).
    pub origin: String,
    /// Axes: X along the pattern, Y across it, downwards as the camera sees the lit face.
    pub axes: String,
    /// Centre of the beam's hole in the screen (reflection), mm.
    pub hole_mm: Option<[f64; 2]>,
    /// Radius of that hole, mm.
    pub hole_radius_mm: Option<f64>,
}

/// The placed camera.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct CameraTruth {
    /// The camera inputs.
    pub spec: CameraSpec,
    /// Screen point on the optical axis, mm.
    pub aim_mm: [f64; 2],
    /// Camera centre to aim point, mm.
    pub distance_mm: f64,
    /// Camera centre in the screen frame (screen plane z = 0, camera at z < 0), mm.
    pub centre_mm: [f64; 3],
}

/// One diffraction order.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct OrderTruth {
    /// Order number m.
    pub order: i32,
    /// Power-weighted centroid of the order's light on the screen, mm.
    pub screen_mm: [f64; 2],
    /// That centroid through the homography, px (`None` if behind the camera).
    pub px: Option<[f64; 2]>,
    /// Whether `px` lies on the sensor.
    pub in_frame: bool,
    /// Fraction of the propagating power.
    pub relative_power: f64,
    /// Whether the order falls into the beam's hole (reflection) and is not seen.
    pub in_hole: bool,
}

/// The ruler.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RulerTruth {
    /// First and last tick, on the line through the middles of the short ticks, mm.
    pub start_mm: [f64; 2],
    /// See `start_mm`.
    pub end_mm: [f64; 2],
    /// `start_mm` through the homography.
    pub start_px: Option<[f64; 2]>,
    /// `end_mm` through the homography.
    pub end_px: Option<[f64; 2]>,
    /// Tick spacing, m.
    pub tick_m: f64,
    /// Y of the ticked edge, mm.
    pub edge_y_mm: f64,
    /// True screen millimetres per image pixel along the ruler, below the zero order.
    pub mm_per_px_near_zero: Option<f64>,
}

/// Two graph-paper crossings near the pattern.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GridTruth {
    /// Line spacing, mm.
    pub pitch_mm: f64,
    /// Two crossings of heavy (10-line) lines, mm.
    pub points_mm: [[f64; 2]; 2],
    /// The same, px.
    pub points_px: [[f64; 2]; 2],
    /// Their true distance on the screen, mm.
    pub length_mm: f64,
}

/// The paper sheet.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SheetTruth {
    /// Corners, mm: the sheet's (−w/2, −h/2), (w/2, −h/2), (w/2, h/2), (−w/2, h/2).
    pub corners_mm: [[f64; 2]; 4],
    /// The same, px (`None` behind the camera).
    pub corners_px: [Option<[f64; 2]>; 4],
}

pub(crate) struct TruthParts<'a> {
    pub setup: &'a GratingSetup,
    pub scene: &'a Scene,
    pub effects: &'a Effects,
    pub seed: u64,
    pub camera: &'a Camera,
    pub screen: &'a Screen,
    pub light: &'a ScreenLight,
    pub spectrum: &'a AngularSpectrum,
    pub in_hole: &'a dyn Fn(&OrderSpot) -> bool,
    pub reference: Option<i32>,
    pub clutter: &'a ClutterLayout,
}

/// Assembles the truth of a rendered photo.
pub(crate) fn build(p: TruthParts) -> Truth {
    let cam = p.camera;
    let orders: Vec<OrderTruth> = p
        .light
        .spots
        .iter()
        .map(|s| {
            let px = cam.project(s.centroid_mm);
            OrderTruth {
                order: s.order,
                screen_mm: s.centroid_mm,
                px,
                in_frame: px.is_some_and(|q| cam.in_frame(q)),
                relative_power: s.relative_power,
                in_hole: (p.in_hole)(s),
            }
        })
        .collect();
    let propagating: Vec<i32> = p
        .spectrum
        .orders
        .iter()
        .map(|o| o.order)
        .chain(p.spectrum.missing.iter().copied())
        .chain(p.spectrum.grazing.iter().copied())
        .collect();
    let only_zero_order = propagating.iter().all(|&m| m == 0);
    let zero_x = orders
        .iter()
        .find(|o| o.order == 0)
        .map_or(0.0, |o| o.screen_mm[0]);
    let view = view_truth(p.scene, cam, p.screen, zero_x);
    let mut notes = vec![format!(
        "order powers: scalar thin-element model, a {}-sample transform, normalized over the \
         propagating plane waves",
        p.spectrum.samples
    )];
    if p.setup.reflect {
        notes.push("reflection: screen parallel to the grating, beam through a hole in it".into());
    } else {
        notes.push("transmission: screen perpendicular to the incident beam".into());
    }
    if only_zero_order {
        notes.push(
            "only the zero order propagates: the pitch is too fine for this wavelength, so \
             there is no first order to measure"
                .into(),
        );
    }
    for o in &orders {
        if o.in_hole {
            notes.push(format!(
                "order {} returns into the beam's hole and is not seen",
                o.order
            ));
        } else if !o.in_frame {
            notes.push(format!("order {} lands outside the frame", o.order));
        }
    }
    if let Some(m) = p.reference {
        notes.push(format!("exposure set on order {m}"));
    }
    notes.extend(clutter_notes(p.clutter));
    let (hole_mm, hole_radius_mm) = match p.screen.hole {
        Some((c, r)) => (Some(c), Some(r)),
        None => (None, None),
    };
    Truth {
        kind: "grating".into(),
        seed: p.seed,
        inputs: GratingInputs::from(p.setup),
        screen: ScreenFrame {
            origin: if p.setup.reflect {
                "foot of the grating normal".into()
            } else {
                "zero order (the undeviated beam)".into()
            },
            axes: "X along the pattern axis, Y across it, downwards as the camera sees the lit \
                   face; millimetres"
                .into(),
            hole_mm,
            hole_radius_mm,
        },
        camera: view.camera,
        homography: view.homography,
        orders,
        missing_orders: p.spectrum.missing.clone(),
        unreached_orders: p.light.unreached.clone(),
        only_zero_order,
        ruler: view.ruler,
        grid: view.grid,
        sheet: view.sheet,
        scene: *p.scene,
        effects: *p.effects,
        notes,
    }
}

/// What every photo's truth says about the camera and the scale objects.
pub(crate) struct ViewTruth {
    pub camera: CameraTruth,
    pub homography: [[f64; 3]; 3],
    pub ruler: Option<RulerTruth>,
    pub grid: Option<GridTruth>,
    pub sheet: Option<SheetTruth>,
}

/// The camera, homography, ruler, grid and sheet truth; `zero_x` is the pattern's centre.
pub(crate) fn view_truth(scene: &Scene, cam: &Camera, screen: &Screen, zero_x: f64) -> ViewTruth {
    let hmat = cam.homography();
    let homography = [0, 1, 2].map(|r| [0, 1, 2].map(|c| hmat[(r, c)]));
    let ruler = screen.ruler.as_ref().map(|r: &PlacedRuler| {
        let y = r.tick_line_y_mm();
        let (a, b) = ([r.start_x_mm, y], [r.end_x_mm, y]);
        RulerTruth {
            start_mm: a,
            end_mm: b,
            start_px: cam.project(a),
            end_px: cam.project(b),
            tick_m: r.ruler.tick_m,
            edge_y_mm: r.ruler.offset_mm,
            mm_per_px_near_zero: cam.mm_per_px_along([zero_x, y], [1.0, 0.0]),
        }
    });
    let grid = scene
        .graph_paper
        .and_then(|g| grid_truth(g, scene, cam, zero_x));
    let sheet = match scene.surface {
        Surface::Paper => None,
        Surface::Sheet { .. } => {
            let corners_mm = sheet_corners(scene);
            Some(SheetTruth {
                corners_mm,
                corners_px: corners_mm.map(|c| cam.project(c)),
            })
        }
    };
    ViewTruth {
        camera: CameraTruth {
            spec: cam.spec,
            aim_mm: cam.aim_mm,
            distance_mm: cam.distance_mm,
            centre_mm: cam.centre_mm,
        },
        homography,
        ruler,
        grid,
        sheet,
    }
}

/// Notes on the image-space distractors.
pub(crate) fn clutter_notes(clutter: &ClutterLayout) -> Vec<String> {
    let mut notes = Vec::new();
    if let Some(g) = clutter.glint_px() {
        notes.push(format!(
            "glint (not an order) near px [{:.0}, {:.0}]",
            g[0], g[1]
        ));
    }
    if let Some(t) = clutter.table_top_px() {
        notes.push(format!("table covers the frame below y ≈ {t:.0} px"));
    }
    if let Some(s) = &clutter.shade {
        notes.push(format!(
            "room light shadowed (to {:.0} %) beyond an edge through px [{:.0}, {:.0}] on the \
             side of [{:.2}, {:.2}]",
            100.0 * s.depth,
            s.point[0],
            s.point[1],
            s.normal[0],
            s.normal[1]
        ));
    }
    notes
}

/// Notes on the pencil marks, flare and blooming of a rendered photo.
pub(crate) fn effect_notes(r: &Rendered) -> Vec<String> {
    let mut notes = Vec::new();
    if !r.screen.marks.is_empty() {
        let xs: Vec<String> = r
            .screen
            .marks
            .iter()
            .map(|m| format!("{:.1}", 0.5 * (m.a[0] + m.b[0])))
            .collect();
        notes.push(format!(
            "pencil strokes (not fringes) centred at X = [{}] mm",
            xs.join(", ")
        ));
    }
    if let Some((p, angle)) = r.flare {
        notes.push(format!(
            "lens-flare streak (not a fringe) through px [{:.0}, {:.0}] at {:.1}° from image x",
            p[0],
            p[1],
            angle.to_degrees()
        ));
    }
    notes
}

/// Two crossings of heavy grid lines just above the pattern, as far apart as the frame
/// (and the sheet, if any) allows, up to ±100 mm.
fn grid_truth(g: GraphPaper, scene: &Scene, cam: &Camera, zero_x: f64) -> Option<GridTruth> {
    let (s, c) = g.rotation_rad.sin_cos();
    let heavy = 10.0 * g.pitch_mm;
    let to_grid = |x: f64, y: f64| {
        let (dx, dy) = (x - g.offset_mm[0], y - g.offset_mm[1]);
        (c * dx + s * dy, -s * dx + c * dy)
    };
    let to_screen = |u: f64, v: f64| {
        [
            g.offset_mm[0] + c * u - s * v,
            g.offset_mm[1] + s * u + c * v,
        ]
    };
    let (u0, v0) = to_grid(zero_x, 0.0);
    let v = heavy * ((v0 - 3.0 * g.pitch_mm) / heavy).floor();
    let k0 = (u0 / heavy).round();
    let (w, h) = (cam.spec.width_px as f64, cam.spec.height_px as f64);
    let on_sheet = |p: [f64; 2]| match scene.surface {
        Surface::Paper => true,
        Surface::Sheet {
            width_mm,
            height_mm,
            centre_mm,
            rotation_rad,
        } => {
            let (s, c) = rotation_rad.sin_cos();
            let (dx, dy) = (p[0] - centre_mm[0], p[1] - centre_mm[1]);
            (c * dx + s * dy).abs() < 0.5 * width_mm - 2.0
                && (-s * dx + c * dy).abs() < 0.5 * height_mm - 2.0
        }
    };
    let usable = |p: [f64; 2]| {
        on_sheet(p)
            && cam.project(p).is_some_and(|q| {
                q[0] > 0.03 * w && q[0] < 0.97 * w && q[1] > 0.03 * h && q[1] < 0.97 * h
            })
    };
    let max_k = (100.0 / heavy).floor().max(1.0) as i64;
    (1..=max_k).rev().find_map(|k| {
        let a = to_screen(heavy * (k0 - k as f64), v);
        let b = to_screen(heavy * (k0 + k as f64), v);
        (usable(a) && usable(b)).then(|| GridTruth {
            pitch_mm: g.pitch_mm,
            points_mm: [a, b],
            points_px: [
                cam.project(a).unwrap_or_default(),
                cam.project(b).unwrap_or_default(),
            ],
            length_mm: 2.0 * k as f64 * heavy,
        })
    })
}
