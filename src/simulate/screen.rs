//! What the screen looks like, as linear RGB reflectance over screen millimetres: paper or
//! a paper sheet on a wall with a faint fibre texture (hashed value noise), optional graph
//! paper, a ruler taped parallel to the pattern, and the beam's hole in reflection. Thin
//! lines and edges are box-filtered analytically over each sample's footprint on the screen
//! (the exact integral of a line's indicator over the footprint), so they do not alias.

use super::scene::{GraphPaper, Ruler, Scene, Surface};

/// Where the ruler lies on the screen once placed under the zero order.
#[derive(Debug, Clone, Copy)]
pub(crate) struct PlacedRuler {
    pub ruler: Ruler,
    /// X of the first and last tick.
    pub start_x_mm: f64,
    pub end_x_mm: f64,
    pub tick_mm: f64,
}

impl PlacedRuler {
    pub fn new(ruler: Ruler, zero_x_mm: f64) -> Self {
        let tick_mm = ruler.tick_m * 1e3;
        let half = 0.5 * (ruler.length_mm / tick_mm).floor() * tick_mm;
        let centre = zero_x_mm + ruler.shift_mm;
        PlacedRuler {
            ruler,
            start_x_mm: centre - half,
            end_x_mm: centre + half,
            tick_mm,
        }
    }
    /// Tick length by class: every 10th, every 5th, the rest.
    fn tick_len_mm(&self, k: i64) -> f64 {
        let base = 3.0 * (self.tick_mm / 1.0).clamp(0.5, 2.0);
        if k % 10 == 0 {
            2.0 * base
        } else if k % 5 == 0 {
            1.5 * base
        } else {
            base
        }
    }
    /// Y of the line through the middles of the shortest ticks.
    pub fn tick_line_y_mm(&self) -> f64 {
        self.ruler.offset_mm + 0.5 * self.tick_len_mm(1)
    }
    /// The strip's corners, for framing.
    pub fn corners_mm(&self) -> [[f64; 2]; 4] {
        let (x0, x1) = (self.start_x_mm - 5.0, self.end_x_mm + 5.0);
        let (y0, y1) = (
            self.ruler.offset_mm,
            self.ruler.offset_mm + self.ruler.width_mm,
        );
        [[x0, y0], [x1, y0], [x0, y1], [x1, y1]]
    }
}

/// The screen's reflectance, ready to sample.
pub(crate) struct Screen {
    pub scene: Scene,
    pub ruler: Option<PlacedRuler>,
    pub hole: Option<([f64; 2], f64)>,
    seed: u64,
    /// (sin, cos) of the grid's and the sheet's rotations, kept out of the inner loop.
    grid_turn: (f64, f64),
    sheet_turn: (f64, f64),
    /// Pencil strokes on the paper.
    pub marks: Vec<Stroke>,
}

/// A pencil stroke: a straight line of graphite from `a` to `b`, mm.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Stroke {
    pub a: [f64; 2],
    pub b: [f64; 2],
    pub half_width_mm: f64,
    /// Fraction of the paper's reflectance the graphite takes away.
    pub darkness: f32,
}

impl Stroke {
    /// Cover of the footprint half-width `h` around (x, y) by the stroke.
    fn cover(&self, x: f64, y: f64, h: f64) -> f64 {
        let reach = self.half_width_mm + h;
        if x < self.a[0].min(self.b[0]) - reach
            || x > self.a[0].max(self.b[0]) + reach
            || y < self.a[1].min(self.b[1]) - reach
            || y > self.a[1].max(self.b[1]) + reach
        {
            return 0.0;
        }
        let (ux, uy) = (self.b[0] - self.a[0], self.b[1] - self.a[1]);
        let len2 = (ux * ux + uy * uy).max(1e-12);
        let t = (((x - self.a[0]) * ux + (y - self.a[1]) * uy) / len2).clamp(0.0, 1.0);
        let d = (x - self.a[0] - t * ux).hypot(y - self.a[1] - t * uy);
        box_cover(d, h, -self.half_width_mm, self.half_width_mm)
    }
}

/// A sample's footprint half-widths on the screen, mm, along X and Y.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Footprint {
    pub hx: f64,
    pub hy: f64,
}

const PAPER: [f32; 3] = [0.84, 0.83, 0.80];
const WALL: [f32; 3] = [0.52, 0.47, 0.40];
const RULER: [f32; 3] = [0.90, 0.89, 0.84];
const INK_BLACK: f32 = 0.04;

impl Screen {
    pub fn new(scene: Scene, zero_x_mm: f64, hole: Option<([f64; 2], f64)>, seed: u64) -> Self {
        Screen {
            scene,
            ruler: scene.ruler.map(|r| PlacedRuler::new(r, zero_x_mm)),
            hole,
            seed,
            grid_turn: scene
                .graph_paper
                .map_or((0.0, 1.0), |g| g.rotation_rad.sin_cos()),
            sheet_turn: match scene.surface {
                Surface::Sheet { rotation_rad, .. } => rotation_rad.sin_cos(),
                Surface::Paper => (0.0, 1.0),
            },
            marks: Vec::new(),
        }
    }

    /// Pencil marks like a hand's: short strokes across the pattern axis at random places
    /// within `reach_mm` of `centre_x_mm` (not at the fringes) and a line drawn along the
    /// pattern above it.
    pub fn add_pencil_marks(&mut self, centre_x_mm: f64, reach_mm: f64, seed: u64) {
        use rand::{RngExt, SeedableRng, rngs::StdRng};
        let mut rng = StdRng::seed_from_u64(seed ^ 0x7065_6e63_696c);
        let reach = reach_mm.max(10.0);
        let count = rng.random_range(6..10);
        for _ in 0..count {
            let x = centre_x_mm + rng.random_range(-reach..reach);
            let slant: f64 = rng.random_range(-0.12..0.12);
            let (top, bottom) = (rng.random_range(-14.0..-6.0), rng.random_range(3.0..8.0));
            self.marks.push(Stroke {
                a: [x + slant * top, top],
                b: [x + slant * bottom, bottom],
                half_width_mm: rng.random_range(0.12..0.22),
                darkness: rng.random_range(0.35..0.6),
            });
        }
        let y = rng.random_range(-11.0..-7.0);
        let tilt: f64 = rng.random_range(-0.01..0.01);
        self.marks.push(Stroke {
            a: [centre_x_mm - 0.8 * reach, y - 0.8 * reach * tilt],
            b: [centre_x_mm + 0.8 * reach, y + 0.8 * reach * tilt],
            half_width_mm: 0.15,
            darkness: 0.4,
        });
    }

    /// Nominal paper albedo (brightest channel), for setting the exposure.
    pub fn paper_albedo() -> f64 {
        PAPER[0] as f64
    }

    /// The paper's fibre texture, a factor near 1 (smooth at 0.3 mm, so one value serves a
    /// whole pixel).
    pub fn grain(&self, x: f64, y: f64) -> f64 {
        1.0 + 0.022 * value_noise(x / 1.3, y / 1.3, self.seed)
            + 0.012 * value_noise(x / 0.31, y / 0.31, self.seed ^ 0x9e37_79b9)
    }

    /// Linear RGB reflectance at (x, y) mm, averaged over the footprint, with the paper
    /// texture factor `grain` from [`Screen::grain`].
    pub fn reflectance(&self, x: f64, y: f64, fp: Footprint, grain: f64) -> [f32; 3] {
        let mut paper = PAPER.map(|c| c * grain as f32);
        if let Some(g) = self.scene.graph_paper {
            let ink = grid_ink(g, self.grid_turn, x, y, fp);
            for (p, i) in paper.iter_mut().zip(g.ink) {
                *p *= 1.0 - ink * (1.0 - i);
            }
        }
        if !self.marks.is_empty() {
            let h = fp.hx.max(fp.hy);
            let graphite: f32 = self
                .marks
                .iter()
                .map(|m| m.cover(x, y, h) as f32 * m.darkness)
                .fold(0.0, f32::max);
            if graphite > 0.0 {
                // Graphite is a neutral grey.
                paper = paper.map(|c| c * (1.0 - graphite));
            }
        }
        let mut out = match self.scene.surface {
            Surface::Paper => paper,
            Surface::Sheet {
                width_mm,
                height_mm,
                centre_mm,
                ..
            } => {
                let (s, c) = self.sheet_turn;
                let (dx, dy) = (x - centre_mm[0], y - centre_mm[1]);
                let (u, v) = (c * dx + s * dy, -s * dx + c * dy);
                let h = fp.hx.max(fp.hy);
                let cover = box_cover(u, h, -0.5 * width_mm, 0.5 * width_mm)
                    * box_cover(v, h, -0.5 * height_mm, 0.5 * height_mm);
                let wall = WALL.map(|w| w * (1.0 + 0.5 * (grain as f32 - 1.0)));
                mix(wall, paper, cover as f32)
            }
        };
        if let Some(r) = &self.ruler {
            out = self.ruler_over(r, out, x, y, fp);
        }
        if let Some((c, radius)) = self.hole {
            let d = (x - c[0]).hypot(y - c[1]);
            let cover = box_cover(d, fp.hx.max(fp.hy), -radius, radius);
            out = mix(out, [0.01, 0.01, 0.012], cover as f32);
        }
        out
    }

    pub(crate) fn ruler_over(
        &self,
        r: &PlacedRuler,
        under: [f32; 3],
        x: f64,
        y: f64,
        fp: Footprint,
    ) -> [f32; 3] {
        let top = r.ruler.offset_mm;
        let bottom = top + r.ruler.width_mm;
        let (x0, x1) = (r.start_x_mm - 5.0, r.end_x_mm + 5.0);
        // Soft shadow under the strip's lower edge.
        let mut under = under;
        if y > bottom && y < bottom + 2.0 && x > x0 && x < x1 {
            let s = 1.0 - 0.35 * (1.0 - (y - bottom) / 2.0) as f32;
            under = under.map(|c| c * s);
        }
        let strip = box_cover(x, fp.hx, x0, x1) * box_cover(y, fp.hy, top, bottom);
        if strip <= 0.0 {
            return under;
        }
        let mut ink = 0.0f64;
        let width = 0.15;
        let tk = r.tick_mm;
        let k_lo = fast_floor((x - fp.hx - width - r.start_x_mm) / tk) as i64;
        let k_hi = ((x + fp.hx + width - r.start_x_mm) / tk).ceil() as i64;
        let n_ticks = ((r.end_x_mm - r.start_x_mm) / tk).round() as i64;
        if k_hi - k_lo <= 64 {
            for k in k_lo.max(0)..=k_hi.min(n_ticks) {
                let c = r.start_x_mm + k as f64 * tk;
                let len = r.tick_len_mm(k);
                ink += box_cover(x, fp.hx, c - 0.5 * width, c + 0.5 * width)
                    * box_cover(y, fp.hy, top, top + len);
            }
        } else {
            // Far too small to resolve: the ticks' mean darkness.
            ink = (width / tk) * box_cover(y, fp.hy, top, top + r.tick_len_mm(1));
        }
        // Numbers under every 10th tick, in centimetre-like counts.
        let digit_h = 2.8 * (tk / 1.0).clamp(0.5, 2.0);
        let digit_top = top + r.tick_len_mm(0) + 1.0;
        if y >= digit_top && y < digit_top + digit_h {
            let k10 = ((x - r.start_x_mm) / (10.0 * tk)).round() as i64;
            if (0..=n_ticks / 10).contains(&k10) {
                let digits = if k10 >= 100 {
                    3
                } else if k10 >= 10 {
                    2
                } else {
                    1
                };
                let cell = digit_h / 8.0;
                let width_mm = cell * 8.0 * digits as f64;
                let left = r.start_x_mm + k10 as f64 * 10.0 * tk - 0.5 * width_mm;
                let col = fast_floor((x - left) / cell);
                let row = fast_floor((y - digit_top) / cell) as usize;
                if col >= 0.0 && (col as usize) < 8 * digits {
                    let place = digits - 1 - col as usize / 8;
                    let digit = (k10 / 10i64.pow(place as u32)) % 10;
                    let glyph = font8x8::legacy::BASIC_LEGACY[b'0' as usize + digit as usize];
                    if glyph[row.min(7)] >> (col as usize % 8) & 1 == 1 {
                        ink += 1.0;
                    }
                }
            }
        }
        let ink = ink.min(1.0) as f32;
        let face = RULER.map(|c| c * (1.0 - ink) + INK_BLACK * ink);
        mix(under, face, strip as f32)
    }
}

fn mix(a: [f32; 3], b: [f32; 3], t: f32) -> [f32; 3] {
    [
        a[0] + (b[0] - a[0]) * t,
        a[1] + (b[1] - a[1]) * t,
        a[2] + (b[2] - a[2]) * t,
    ]
}

/// Fraction of the box [u − h, u + h] inside [a, b].
pub(crate) fn box_cover(u: f64, h: f64, a: f64, b: f64) -> f64 {
    let h = h.max(1e-9);
    ((u + h).min(b) - (u - h).max(a)).max(0.0) / (2.0 * h)
}

/// Fraction of the box [u − h, u + h] covered by lines of width `w` centred on multiples of
/// `period`: the difference of the cumulative inked length, exact for any footprint.
fn periodic_cover(u: f64, h: f64, period: f64, w: f64) -> f64 {
    let h = h.max(1e-9);
    let inked = |t: f64| {
        let s = t + 0.5 * w;
        let k = fast_floor(s / period);
        k * w + (s - k * period).min(w)
    };
    ((inked(u + h) - inked(u - h)) / (2.0 * h)).clamp(0.0, 1.0)
}

/// Ink cover of graph paper at (x, y).
fn grid_ink(g: GraphPaper, (s, c): (f64, f64), x: f64, y: f64, fp: Footprint) -> f32 {
    let (dx, dy) = (x - g.offset_mm[0], y - g.offset_mm[1]);
    let (u, v) = (c * dx + s * dy, -s * dx + c * dy);
    let (hu, hv) = (
        c.abs() * fp.hx + s.abs() * fp.hy,
        s.abs() * fp.hx + c.abs() * fp.hy,
    );
    let p = g.pitch_mm;
    let one_dir = |t: f64, h: f64| {
        // Most samples are clear of every line (all lines sit on multiples of p and are at
        // most 0.18 p wide): skip the six integrals there.
        let off = (t - p * fast_floor(t / p + 0.5)).abs();
        if off > h + 0.09 * p && 2.0 * h < p {
            return 0.0;
        }
        let thin = 0.45 * periodic_cover(t, h, p, 0.07 * p);
        let mid = 0.70 * periodic_cover(t, h, 5.0 * p, 0.11 * p);
        let thick = 0.90 * periodic_cover(t, h, 10.0 * p, 0.18 * p);
        thin.max(mid).max(thick)
    };
    let (a, b) = (one_dir(u, hu), one_dir(v, hv));
    (1.0 - (1.0 - a) * (1.0 - b)) as f32
}

/// `x.floor()` without the library call the baseline target makes of it (it dominated the
/// inner loop); exact for |x| < 2⁶³.
#[inline]
pub(crate) fn fast_floor(x: f64) -> f64 {
    let t = x as i64 as f64;
    if t > x { t - 1.0 } else { t }
}

/// Smooth value noise in [−1, 1] on a unit lattice (hashed corners, smoothstep blend).
pub(crate) fn value_noise(x: f64, y: f64, seed: u64) -> f64 {
    let (xf, yf) = (fast_floor(x), fast_floor(y));
    let (tx, ty) = (x - xf, y - yf);
    let (ix, iy) = (xf as i64, yf as i64);
    let corner = |i: i64, j: i64| unit_hash(seed, i as u64, j as u64) * 2.0 - 1.0;
    let sx = tx * tx * (3.0 - 2.0 * tx);
    let sy = ty * ty * (3.0 - 2.0 * ty);
    let top = corner(ix, iy) + (corner(ix + 1, iy) - corner(ix, iy)) * sx;
    let bottom = corner(ix, iy + 1) + (corner(ix + 1, iy + 1) - corner(ix, iy + 1)) * sx;
    top + (bottom - top) * sy
}

/// A hash of three words to [0, 1) (SplitMix64 finalizer, Steele et al. 2014).
pub(crate) fn unit_hash(a: u64, b: u64, c: u64) -> f64 {
    let mut z = a
        .wrapping_mul(0x9e37_79b9_7f4a_7c15)
        .wrapping_add(b.wrapping_mul(0xc2b2_ae3d_27d4_eb4f))
        .wrapping_add(c.wrapping_mul(0x1656_67b1_9e37_79f9));
    z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
    z ^= z >> 31;
    (z >> 11) as f64 / (1u64 << 53) as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn periodic_cover_is_the_exact_box_integral() {
        // Lines 0.1 wide every 1: a footprint covering whole periods sees 10 % ink.
        assert!((periodic_cover(0.3, 1.5, 1.0, 0.1) - 0.1).abs() < 1e-12);
        // Centred on a line with a footprint narrower than it: full ink.
        assert!((periodic_cover(3.0, 0.02, 1.0, 0.1) - 1.0).abs() < 1e-12);
        // Half of a 0.1 line inside a 0.2 wide box starting at its centre.
        assert!((periodic_cover(0.1, 0.1, 1.0, 0.1) - 0.25).abs() < 1e-12);
        assert!(periodic_cover(0.5, 0.1, 1.0, 0.1).abs() < 1e-12);
        assert!((box_cover(0.0, 1.0, 0.5, 5.0) - 0.25).abs() < 1e-12);
        for x in [-2.5, -2.0, -0.3, 0.0, 0.7, 3.0, 1e12 + 0.5] {
            assert_eq!(fast_floor(x), x.floor());
        }
    }

    #[test]
    fn ruler_ticks_are_dark_and_the_gaps_light() {
        let screen = Screen::new(Scene::default(), 0.0, None, 1);
        let r = screen.ruler.unwrap();
        let fp = Footprint { hx: 0.02, hy: 0.02 };
        let y = r.tick_line_y_mm();
        let on = screen.reflectance(r.start_x_mm + 3.0, y, fp, 1.0);
        let off = screen.reflectance(r.start_x_mm + 3.5, y, fp, 1.0);
        assert!(on[0] < 0.1 && off[0] > 0.8, "{on:?} {off:?}");
        assert!((r.end_x_mm - r.start_x_mm - 200.0).abs() < 1e-9);
    }

    #[test]
    fn noise_is_deterministic_and_bounded() {
        let a = value_noise(3.7, -2.2, 5);
        assert_eq!(a, value_noise(3.7, -2.2, 5));
        assert_ne!(a, value_noise(3.7, -2.2, 6));
        for i in 0..1000 {
            let v = value_noise(i as f64 * 0.37, i as f64 * -0.11, 9);
            assert!((-1.0..=1.0).contains(&v));
        }
    }
}
