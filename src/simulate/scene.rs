//! The scene in front of the camera, as the caller describes it: the screen surface (paper
//! or a sheet on a wall), graph paper, a ruler, the room light and distractors. Rendering
//! it is [`super::screen`]'s job.

use super::SimError;
use serde::{Deserialize, Serialize};

/// The screen surface.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Surface {
    /// White paper filling the view.
    Paper,
    /// A white sheet (e.g. A4: 210 × 297 mm, ISO 216) on a beige wall.
    Sheet {
        /// Sheet width along X.
        width_mm: f64,
        /// Sheet height along Y.
        height_mm: f64,
        /// Sheet centre on the screen.
        centre_mm: [f64; 2],
        /// Sheet rotation about its centre.
        rotation_rad: f64,
    },
}

/// Graph paper printed on the paper.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GraphPaper {
    /// Spacing of the thin lines (every 5th and 10th are heavier).
    pub pitch_mm: f64,
    /// Screen position of one 10-line crossing.
    pub offset_mm: [f64; 2],
    /// Rotation of the grid against the pattern axis.
    pub rotation_rad: f64,
    /// Linear RGB of the ink.
    pub ink: [f32; 3],
}

impl Default for GraphPaper {
    /// Teal 1 mm graph paper, slightly off the pattern.
    fn default() -> Self {
        GraphPaper {
            pitch_mm: 1.0,
            offset_mm: [0.37, -0.42],
            rotation_rad: 0.0,
            ink: [0.10, 0.42, 0.38],
        }
    }
}

/// A ruler taped to the screen parallel to the pattern axis.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Ruler {
    /// Y of the ticked edge (positive: below the pattern axis).
    pub offset_mm: f64,
    /// Tick spacing (every 5th and 10th tick longer, every 10th numbered).
    pub tick_m: f64,
    /// Length of the ticked scale, centred under the zero order plus `shift_mm`.
    pub length_mm: f64,
    /// Strip width.
    pub width_mm: f64,
    /// Shift of the ruler's centre along X from the zero order.
    pub shift_mm: f64,
}

impl Default for Ruler {
    /// A 200 mm scale in 1 mm ticks, 25 mm below the pattern.
    fn default() -> Self {
        Ruler {
            offset_mm: 25.0,
            tick_m: 1e-3,
            length_mm: 200.0,
            width_mm: 18.0,
            shift_mm: 0.0,
        }
    }
}

/// Room light on the screen and the lens's fall-off.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RoomLight {
    /// Linear signal of white paper at the screen origin, before vignetting (0..1).
    pub level: f64,
    /// Relative change of the light per 100 mm along X and Y.
    pub gradient_per_100mm: [f64; 2],
    /// Fractional darkening at the frame corners (cos⁴-like fall-off).
    pub vignetting: f64,
}

impl Default for RoomLight {
    fn default() -> Self {
        RoomLight {
            level: 0.45,
            gradient_per_100mm: [0.06, -0.04],
            vignetting: 0.25,
        }
    }
}

/// Distractors in the frame.
#[derive(Debug, Clone, Copy, PartialEq, Default, Serialize, Deserialize)]
pub struct Clutter {
    /// A dark table with objects in the lower part of the frame.
    pub table: bool,
    /// A window's soft reflection in a top corner.
    pub window: bool,
    /// A bright glint off the pattern's line.
    pub glint: bool,
    /// Laser light scattered around the brightest spot and along the pattern.
    pub stray_light: bool,
    /// Pencil strokes on the screen across and along the pattern (hand marks of fringes,
    /// not where the fringes are).
    #[serde(default)]
    pub pencil: bool,
    /// A soft shadow of the room light over about half of the frame (the laser light is not
    /// shadowed).
    #[serde(default)]
    pub shadow: bool,
}

impl Clutter {
    /// The table, the window, the glint and stray light.
    pub fn all() -> Self {
        Clutter {
            table: true,
            window: true,
            glint: true,
            stray_light: true,
            pencil: false,
            shadow: false,
        }
    }

    /// Everything: [`Clutter::all`] plus pencil marks and a shadow over half the frame.
    pub fn everything() -> Self {
        Clutter {
            pencil: true,
            shadow: true,
            ..Clutter::all()
        }
    }
}

/// Everything in front of the camera apart from the laser light.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Scene {
    /// Screen surface.
    pub surface: Surface,
    /// Graph paper on the paper, if any.
    pub graph_paper: Option<GraphPaper>,
    /// Ruler, if any.
    pub ruler: Option<Ruler>,
    /// Room light.
    pub room_light: RoomLight,
    /// Distractors.
    pub clutter: Clutter,
}

impl Default for Scene {
    /// Plain paper, a ruler, ordinary room light, no clutter.
    fn default() -> Self {
        Scene {
            surface: Surface::Paper,
            graph_paper: None,
            ruler: Some(Ruler::default()),
            room_light: RoomLight::default(),
            clutter: Clutter::default(),
        }
    }
}

impl Scene {
    /// Checks the scene inputs.
    pub fn validate(&self) -> Result<(), SimError> {
        let bad = |name, value: f64, expected| {
            Err(SimError::BadInput {
                name,
                value,
                expected,
            })
        };
        if let Surface::Sheet {
            width_mm,
            height_mm,
            centre_mm,
            rotation_rad,
        } = self.surface
        {
            for (name, v) in [("sheet width_mm", width_mm), ("sheet height_mm", height_mm)] {
                if !(v.is_finite() && v >= 10.0) {
                    return bad(name, v, "a sheet side of at least 10 mm");
                }
            }
            if !(centre_mm.iter().all(|v| v.is_finite()) && rotation_rad.is_finite()) {
                return bad(
                    "sheet centre_mm",
                    centre_mm[0],
                    "a finite position and angle",
                );
            }
        }
        if let Some(g) = self.graph_paper {
            if !(g.pitch_mm.is_finite() && (0.2..=50.0).contains(&g.pitch_mm)) {
                return bad(
                    "grid pitch_mm",
                    g.pitch_mm,
                    "a grid pitch from 0.2 to 50 mm",
                );
            }
            if !(g.offset_mm.iter().all(|v| v.is_finite()) && g.rotation_rad.is_finite()) {
                return bad(
                    "grid offset_mm",
                    g.offset_mm[0],
                    "a finite offset and angle",
                );
            }
        }
        if let Some(r) = self.ruler {
            if !(r.tick_m.is_finite() && (0.2e-3..=20e-3).contains(&r.tick_m)) {
                return bad("ruler tick_m", r.tick_m, "a tick spacing from 0.2 to 20 mm");
            }
            if !(r.length_mm.is_finite() && r.length_mm >= 10.0 * r.tick_m * 1e3) {
                return bad("ruler length_mm", r.length_mm, "at least ten ticks long");
            }
            if r.length_mm > 5000.0 {
                return bad("ruler length_mm", r.length_mm, "at most 5 m long");
            }
            if !(r.width_mm.is_finite() && (5.0..=200.0).contains(&r.width_mm)) {
                return bad("ruler width_mm", r.width_mm, "a strip 5 to 200 mm wide");
            }
            if !(r.offset_mm.is_finite() && r.shift_mm.is_finite()) {
                return bad("ruler offset_mm", r.offset_mm, "a finite position");
            }
        }
        let l = self.room_light;
        if !(l.level.is_finite() && (0.0..=1.0).contains(&l.level)) {
            return bad("room light level", l.level, "a linear level from 0 to 1");
        }
        if !(l.vignetting.is_finite() && (0.0..0.9).contains(&l.vignetting)) {
            return bad("vignetting", l.vignetting, "a fall-off from 0 to 0.9");
        }
        if !l
            .gradient_per_100mm
            .iter()
            .all(|g| g.is_finite() && g.abs() <= 1.0)
        {
            return bad(
                "room light gradient",
                l.gradient_per_100mm[0],
                "at most ±1 per 100 mm",
            );
        }
        Ok(())
    }
}
