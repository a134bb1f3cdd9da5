//! Distractors that live in the image rather than on the screen: a dark table with objects
//! across the lower part of the frame, a window's soft reflection in a top corner, and a
//! bright glint off the pattern's line. All edges are anti-aliased through a clamped signed
//! distance in pixels (a one-pixel box filter across the edge).

use super::screen::value_noise;
use rand::{RngExt, SeedableRng, rngs::StdRng};

/// A filled shape on the table.
#[derive(Debug, Clone)]
struct Object {
    centre: [f64; 2],
    half: [f64; 2],
    angle: f64,
    ellipse: bool,
    colour: [f32; 3],
}

impl Object {
    fn cover(&self, x: f64, y: f64) -> f32 {
        let (s, c) = self.angle.sin_cos();
        let (dx, dy) = (x - self.centre[0], y - self.centre[1]);
        let (u, v) = (c * dx + s * dy, -s * dx + c * dy);
        let sd = if self.ellipse {
            let rho = ((u / self.half[0]).powi(2) + (v / self.half[1]).powi(2)).sqrt();
            (rho - 1.0) * self.half[0].min(self.half[1])
        } else {
            (u.abs() - self.half[0]).max(v.abs() - self.half[1])
        };
        (0.5 - sd).clamp(0.0, 1.0) as f32
    }
}

#[derive(Debug, Clone)]
struct Table {
    /// Edge: y = top + slope·(x − centre_x).
    top: f64,
    slope: f64,
    centre_x: f64,
    objects: Vec<Object>,
}

#[derive(Debug, Clone)]
struct Window {
    /// Each edge as a point and its outward unit normal.
    edges: [[f64; 4]; 4],
    soft_px: f64,
    level: f32,
}

#[derive(Debug, Clone)]
struct Glint {
    centre: [f64; 2],
    sigma_px: f64,
    peak: f32,
}

/// A soft shadow edge: the side where `normal` points is shaded.
#[derive(Debug, Clone)]
pub(crate) struct Shade {
    /// A point on the edge and the unit normal into the shadow, px.
    pub point: [f64; 2],
    pub normal: [f64; 2],
    /// Width of the penumbra, px.
    pub soft_px: f64,
    /// Fraction of the room light left in the shadow.
    pub depth: f32,
}

/// Where the distractors are, in pixels.
#[derive(Debug, Clone, Default)]
pub(crate) struct ClutterLayout {
    table: Option<Table>,
    window: Option<Window>,
    glint: Option<Glint>,
    pub shade: Option<Shade>,
    room_level: f32,
    seed: u64,
}

/// What the layout must keep clear, in pixels.
pub(crate) struct Keep {
    /// The zero order (or the pattern's middle) and the pattern's direction.
    pub pattern_px: [f64; 2],
    pub pattern_dir: [f64; 2],
    /// Lowest image row used by the pattern, ruler and sheet.
    pub lowest_px: f64,
}

impl Keep {
    /// The pattern's centre if it lies on the sensor.
    pub fn pattern_px_in_frame(&self, width: u32, height: u32) -> Option<[f64; 2]> {
        let [x, y] = self.pattern_px;
        (x >= 0.0 && y >= 0.0 && x < width as f64 && y < height as f64).then_some([x, y])
    }
}

impl ClutterLayout {
    pub fn new(
        clutter: super::scene::Clutter,
        width: u32,
        height: u32,
        keep: &Keep,
        room_level: f64,
        seed: u64,
    ) -> Self {
        let (w, h) = (width as f64, height as f64);
        let mut rng = StdRng::seed_from_u64(seed ^ 0x0063_6c75_7474_6572);
        let scale = w / 1600.0;
        let mut out = ClutterLayout {
            room_level: room_level as f32,
            seed,
            ..ClutterLayout::default()
        };
        let top = keep.lowest_px + 0.04 * h;
        if clutter.table && top < 0.92 * h {
            let objects = (0..rng.random_range(3..7))
                .map(|_| {
                    let grey: f32 = rng.random_range(0.05..0.5);
                    Object {
                        centre: [
                            rng.random_range(0.0..w),
                            rng.random_range(top + 30.0 * scale..h + 40.0),
                        ],
                        half: [
                            rng.random_range(20.0..130.0) * scale,
                            rng.random_range(15.0..80.0) * scale,
                        ],
                        angle: rng.random_range(-0.4..0.4),
                        ellipse: rng.random_bool(0.5),
                        colour: [
                            grey * rng.random_range(0.6..1.4),
                            grey * rng.random_range(0.6..1.4),
                            grey * rng.random_range(0.6..1.4),
                        ],
                    }
                })
                .collect();
            out.table = Some(Table {
                top,
                slope: rng.random_range(-0.03..0.03),
                centre_x: 0.5 * w,
                objects,
            });
        }
        // Signed distance of a point from the pattern line (positive on the ruler's side).
        let normal = [-keep.pattern_dir[1], keep.pattern_dir[0]];
        let side = |p: [f64; 2]| {
            (p[0] - keep.pattern_px[0]) * normal[0] + (p[1] - keep.pattern_px[1]) * normal[1]
        };
        if clutter.window {
            let left = side([0.0, 0.0]).abs() > side([w, 0.0]).abs();
            let (x0, x1) = if left {
                (0.02 * w, 0.2 * w)
            } else {
                (0.8 * w, 0.98 * w)
            };
            let skew = rng.random_range(-0.03..0.03) * w;
            let corners = [
                [x0 + skew, 0.03 * h],
                [x1 + skew, 0.05 * h],
                [x1, 0.25 * h],
                [x0, 0.23 * h],
            ];
            out.window = Some(Window {
                edges: [0, 1, 2, 3].map(|i| {
                    let (a, b) = (corners[i], corners[(i + 1) % 4]);
                    let (ex, ey) = (b[0] - a[0], b[1] - a[1]);
                    let len = ex.hypot(ey);
                    [a[0], a[1], ey / len, -ex / len]
                }),
                soft_px: 20.0 * scale,
                level: 0.35,
            });
        }
        if clutter.glint {
            // Off the line, on the side away from the ruler, at 15 % of the height.
            let away = if side([keep.pattern_px[0], keep.pattern_px[1] + 1.0]) > 0.0 {
                -0.15 * h
            } else {
                0.15 * h
            };
            let along = rng.random_range(-0.25..0.25) * w;
            let p = [
                keep.pattern_px[0] + along * keep.pattern_dir[0] + away * normal[0],
                keep.pattern_px[1] + along * keep.pattern_dir[1] + away * normal[1],
            ];
            if p[0] > 0.0 && p[0] < w && p[1] > 0.0 && p[1] < h {
                out.glint = Some(Glint {
                    centre: p,
                    sigma_px: 2.5 * scale.max(0.5),
                    peak: 4.0,
                });
            }
        }
        if clutter.shadow {
            // An edge near the middle, tilted up to 15°, shading one side (the shadow of
            // something between the room lamp and the screen).
            let tilt: f64 = rng.random_range(-15f64..15.0).to_radians();
            let x = w * rng.random_range(0.42..0.58);
            let sign = if rng.random_bool(0.5) { 1.0 } else { -1.0 };
            out.shade = Some(Shade {
                point: [x, 0.5 * h],
                normal: [sign * tilt.cos(), sign * tilt.sin()],
                soft_px: 0.03 * w,
                depth: 0.12,
            });
        }
        out
    }

    /// Factor on the room light at a pixel (1 outside any shadow).
    pub fn room_shade(&self, x: f64, y: f64) -> f32 {
        let Some(s) = &self.shade else {
            return 1.0;
        };
        let d = (x - s.point[0]) * s.normal[0] + (y - s.point[1]) * s.normal[1];
        let t = (0.5 + d / s.soft_px).clamp(0.0, 1.0) as f32;
        let t = t * t * (3.0 - 2.0 * t);
        1.0 - (1.0 - s.depth) * t
    }

    /// Composites the distractors over a pixel's linear RGB.
    pub fn apply(&self, x: f64, y: f64, rgb: &mut [f32; 3], vignette: f32) {
        if let Some(t) = &self.table {
            let edge = t.top + t.slope * (x - t.centre_x);
            let cover =
                ((y - edge) / (1.0 + t.slope * t.slope).sqrt() + 0.5).clamp(0.0, 1.0) as f32;
            if cover > 0.0 {
                let streak = 1.0 + 0.2 * value_noise(x / 140.0, y / 9.0, self.seed) as f32;
                let wood = [0.09 * streak, 0.06 * streak, 0.04 * streak];
                let mut c = wood.map(|v| v * self.room_level * vignette);
                for o in &t.objects {
                    let a = o.cover(x, y);
                    if a > 0.0 {
                        for (ci, oi) in c.iter_mut().zip(o.colour) {
                            *ci += (oi * self.room_level * vignette - *ci) * a;
                        }
                    }
                }
                for (p, ci) in rgb.iter_mut().zip(c) {
                    *p += (ci - *p) * cover;
                }
            }
        }
        if let Some(wd) = &self.window {
            // Convex quad: the largest signed distance to its edges (inside negative).
            let sd = wd
                .edges
                .iter()
                .map(|&[ax, ay, nx, ny]| (x - ax) * nx + (y - ay) * ny)
                .fold(f64::NEG_INFINITY, f64::max);
            let t = (0.5 - sd / wd.soft_px).clamp(0.0, 1.0) as f32;
            let glow = wd.level * t * t * (3.0 - 2.0 * t);
            for p in rgb.iter_mut() {
                *p += glow;
            }
        }
        if let Some(g) = &self.glint {
            let r2 = (x - g.centre[0]).powi(2) + (y - g.centre[1]).powi(2);
            if r2 > 64.0 * g.sigma_px * g.sigma_px {
                return;
            }
            let v = g.peak * (-0.5 * r2 / (g.sigma_px * g.sigma_px)).exp() as f32;
            for p in rgb.iter_mut() {
                *p += v;
            }
        }
    }

    /// Glint position, for the truth notes.
    pub fn glint_px(&self) -> Option<[f64; 2]> {
        self.glint.as_ref().map(|g| g.centre)
    }

    /// Top of the table at the frame's centre, for the truth notes.
    pub fn table_top_px(&self) -> Option<f64> {
        self.table.as_ref().map(|t| t.top)
    }
}
