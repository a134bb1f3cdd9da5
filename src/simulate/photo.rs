//! The pipeline behind [`super::render_grating`] and [`super::render_aperture`]: far field,
//! landing on the screen, camera placement, exposure, the pixel loop, the camera's effects
//! and the truth.

use super::camera::{Camera, CameraSpec, Framing};
use super::clutter;
use super::effects::{self, Effects};
use super::farfield::GratingSetup;
use super::glare;
use super::render::{self, DrawnSpot, Frame, Stray};
use super::scene::{Scene, Surface};
use super::screen::Screen;
use super::spots::{self, OrderSpot, ScreenLight};
use super::truth::{self, TruthParts};
use super::{SimError, Truth};

/// A rendered photo in linear light, before noise and encoding.
pub(crate) struct LinearPhoto {
    /// Interleaved linear RGB, row-major.
    pub rgb: Vec<f32>,
    pub width: u32,
    pub height: u32,
    pub truth: Truth,
}

/// The light source of a photo, whatever made it: the spots on the screen and what the
/// camera placement and exposure need to know about them.
pub(crate) struct Bench<'a> {
    pub spots: &'a [OrderSpot],
    pub wavelength_m: f64,
    /// Beam hole in the screen (reflection), centre and radius, mm.
    pub hole: Option<([f64; 2], f64)>,
    /// Where the pattern's centre is on the screen (X), mm: the ruler goes under it.
    pub zero_x: f64,
    /// Points of the pattern that automatic framing keeps in view, mm.
    pub frame_points: Vec<[f64; 2]>,
    /// What the exposure is set on.
    pub reference: Option<Reference>,
    /// Half-length along X of the pattern's useful part, mm (for pencil marks).
    pub reach_mm: f64,
}

/// The light the exposure is set on.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Reference {
    pub centre_mm: [f64; 2],
    /// Peak irradiance, power fraction per mm².
    pub peak_per_mm2: f64,
    /// Its width along X and Y, mm (lowers the peak in the image through pixels and blur).
    pub sigma_mm: [f64; 2],
}

impl Reference {
    fn of(s: &OrderSpot) -> Self {
        Reference {
            centre_mm: s.centroid_mm,
            peak_per_mm2: s.peak_per_mm2,
            sigma_mm: [s.sigma_x_mm, s.sigma_y_mm],
        }
    }
}

/// A bench rendered in linear light, with what its truth needs.
pub(crate) struct Rendered {
    pub rgb: Vec<f32>,
    pub camera: Camera,
    pub screen: Screen,
    pub clutter: clutter::ClutterLayout,
    /// Lens flare streak through the reference, if drawn: image point and angle.
    pub flare: Option<([f64; 2], f64)>,
}

/// Places the camera, sets the exposure and renders `bench` in linear light.
pub(crate) fn render_bench(
    bench: &Bench,
    scene: &Scene,
    camera_spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<Rendered, SimError> {
    let mut screen = Screen::new(*scene, bench.zero_x, bench.hole, seed);
    if scene.clutter.pencil {
        screen.add_pencil_marks(bench.zero_x, bench.reach_mm, seed);
    }
    let camera = place_camera(camera_spec, bench, &screen)?;
    if let Surface::Sheet { .. } = scene.surface {
        let corners = sheet_corners(scene);
        let seen = (0..=8).any(|i| {
            (0..=8).any(|j| {
                let (a, b) = (i as f64 / 8.0, j as f64 / 8.0);
                let p = [
                    corners[0][0]
                        + a * (corners[1][0] - corners[0][0])
                        + b * (corners[3][0] - corners[0][0]),
                    corners[0][1]
                        + a * (corners[1][1] - corners[0][1])
                        + b * (corners[3][1] - corners[0][1]),
                ];
                camera.project(p).is_some_and(|q| camera.in_frame(q))
            })
        });
        if !seen {
            return Err(SimError::CameraSeesNoScreen(
                "the paper sheet is outside the frame; aim the camera at it".into(),
            ));
        }
    }

    let reference = bench.reference;
    let laser_gain = reference.map_or(0.0, |r| {
        let spread = image_peak_factor(&camera, &r, effects.blur_px);
        effects.overexposure / (r.peak_per_mm2 * Screen::paper_albedo() * spread)
    });

    let spots: Vec<DrawnSpot> = bench
        .spots
        .iter()
        .filter_map(|s| {
            render::spot_rect(&camera, s).map(|rect| DrawnSpot {
                spot: s,
                rect,
                speckle: None,
            })
        })
        .collect();
    let (w, h) = (camera_spec.width_px, camera_spec.height_px);
    let pattern_mm = reference.map_or([bench.zero_x, 0.0], |r| r.centre_mm);
    let keep = clutter_keep(&camera, &screen, &spots, pattern_mm);
    let mut frame = Frame {
        camera: &camera,
        screen: &screen,
        spots,
        stray: (scene.clutter.stray_light)
            .then_some(())
            .and(reference)
            .map(|r| Stray {
                centre_mm: r.centre_mm,
                peak_per_mm2: r.peak_per_mm2,
            }),
        laser_rgb: effects::laser_rgb(bench.wavelength_m),
        laser_gain,
        room: scene.room_light,
        clutter: clutter::ClutterLayout::new(
            scene.clutter,
            w,
            h,
            &keep,
            scene.room_light.level,
            seed,
        ),
    };
    frame.add_speckle(effects, seed);
    let mut linear = frame.render(laser_on);
    let flare = if laser_on && effects.flare > 0.0 {
        keep.pattern_px_in_frame(w, h).map(|p| {
            let angle = glare::flare_angle(keep.pattern_dir, seed);
            glare::add_flare(
                &mut linear,
                w as usize,
                h as usize,
                p,
                angle,
                effects.flare,
                effects::laser_rgb(bench.wavelength_m),
            );
            (p, angle)
        })
    } else {
        None
    };
    effects::blur(&mut linear, w as usize, h as usize, 3, effects.blur_px);
    if effects.bloom > 0.0 {
        glare::bloom(&mut linear, w as usize, h as usize, effects.bloom);
    }
    let clutter = frame.clutter;
    Ok(Rendered {
        rgb: linear,
        camera,
        screen,
        clutter,
        flare,
    })
}

/// Renders a grating in linear light with the laser on or off.
pub(crate) fn render_linear(
    setup: &GratingSetup,
    scene: &Scene,
    camera_spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<LinearPhoto, SimError> {
    setup.validate()?;
    scene.validate()?;
    camera_spec.validate()?;
    effects.validate()?;
    let (spectrum, light) = spots::compute(setup)?;
    if light.spots.is_empty() {
        return Err(SimError::NoOrderReachesScreen(format!(
            "orders {:?} propagate but none meets the screen plane at {} m; reduce the \
             incidence angle",
            light.unreached, setup.distance_m
        )));
    }
    let hole = spots::hole(setup);
    let in_hole = |s: &OrderSpot| {
        hole.is_some_and(|(c, r)| (s.centroid_mm[0] - c[0]).hypot(s.centroid_mm[1] - c[1]) < r)
    };
    let zero_x = light
        .spots
        .iter()
        .find(|s| s.order == 0)
        .map_or(0.0, |s| s.centroid_mm[0]);

    // Exposure: the zero order, or the brightest order not lost in the hole.
    let visible: Vec<&OrderSpot> = light.spots.iter().filter(|s| !in_hole(s)).collect();
    let reference = visible
        .iter()
        .find(|s| s.order == 0)
        .or_else(|| {
            visible
                .iter()
                .max_by(|a, b| a.peak_per_mm2.total_cmp(&b.peak_per_mm2))
        })
        .copied();
    let frame_points = grating_frame_points(setup, camera_spec, &light, zero_x);
    let reach_mm = frame_points
        .iter()
        .map(|p| (p[0] - zero_x).abs())
        .fold(30.0, f64::max);
    let bench = Bench {
        spots: &light.spots,
        wavelength_m: setup.wavelength_m,
        hole,
        zero_x,
        frame_points,
        reference: reference.map(Reference::of),
        reach_mm,
    };
    let r = render_bench(&bench, scene, camera_spec, effects, seed, laser_on)?;
    let mut truth = truth::build(TruthParts {
        setup,
        scene,
        effects,
        seed,
        camera: &r.camera,
        screen: &r.screen,
        light: &light,
        spectrum: &spectrum,
        in_hole: &in_hole,
        reference: reference.map(|r| r.order),
        clutter: &r.clutter,
    });
    truth.notes.extend(truth::effect_notes(&r));
    let (w, h) = (camera_spec.width_px, camera_spec.height_px);
    Ok(LinearPhoto {
        rgb: r.rgb,
        width: w,
        height: h,
        truth,
    })
}

/// Renders with the laser on or off (off: the same scene and camera, for background
/// subtraction in tests), through noise and sRGB encoding.
pub(crate) fn render(
    setup: &GratingSetup,
    scene: &Scene,
    camera_spec: &CameraSpec,
    effects: &Effects,
    seed: u64,
    laser_on: bool,
) -> Result<super::SimPhoto, SimError> {
    let lin = render_linear(setup, scene, camera_spec, effects, seed, laser_on)?;
    let bytes = effects::to_srgb8(&lin.rgb, lin.width as usize, effects, seed);
    drop(lin.rgb);
    let image = image::RgbImage::from_raw(lin.width, lin.height, bytes).ok_or_else(|| {
        SimError::CameraSeesNoScreen("internal: image buffer size mismatch".into())
    })?;
    Ok(super::SimPhoto {
        image,
        truth: lin.truth,
    })
}

/// The grating's orders up to the framing's highest order (within 1.5 distances of the
/// zero order), or the lowest order if none is.
fn grating_frame_points(
    setup: &GratingSetup,
    spec: &CameraSpec,
    light: &ScreenLight,
    zero_x: f64,
) -> Vec<[f64; 2]> {
    let Framing::Auto { max_order, .. } = spec.framing else {
        return Vec::new();
    };
    let reach = 1.5 * setup.distance_m * 1e3;
    let mut pts: Vec<[f64; 2]> = Vec::new();
    for s in &light.spots {
        let [x, y] = s.centroid_mm;
        if s.order.unsigned_abs() <= max_order && (x - zero_x).abs() <= reach {
            pts.push([x, y - 3.0 * s.sigma_y_mm]);
            pts.push([x, y + 3.0 * s.sigma_y_mm]);
        }
    }
    if pts.is_empty() {
        if let Some(s) = light.spots.iter().min_by_key(|s| s.order.unsigned_abs()) {
            pts.push(s.centroid_mm);
        }
    }
    pts
}

fn place_camera(spec: &CameraSpec, bench: &Bench, screen: &Screen) -> Result<Camera, SimError> {
    match spec.framing {
        Framing::Fixed {
            aim_mm,
            distance_mm,
        } => Camera::new(*spec, aim_mm, distance_mm),
        Framing::Auto { margin, .. } => {
            let mut pts = bench.frame_points.clone();
            if let Some(r) = &screen.ruler {
                pts.extend(r.corners_mm());
            }
            if let Surface::Sheet { .. } = screen.scene.surface {
                pts.extend(sheet_corners(&screen.scene));
            }
            if let Some((c, r)) = screen.hole {
                pts.extend([[c[0] - r, c[1] - r], [c[0] + r, c[1] + r]]);
            }
            let (lo, hi) =
                pts.iter()
                    .fold(([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]), |(l, h), p| {
                        (
                            [l[0].min(p[0]), l[1].min(p[1])],
                            [h[0].max(p[0]), h[1].max(p[1])],
                        )
                    });
            // Never closer than a 60 mm wide view.
            let (cx, cy) = (0.5 * (lo[0] + hi[0]), 0.5 * (lo[1] + hi[1]));
            pts.extend([[cx - 30.0, cy], [cx + 30.0, cy]]);
            Camera::frame(*spec, &pts, margin)
        }
    }
}

/// How much pixel area and blur lower a spot's peak in the image: a Gaussian spot of σ_px
/// becomes one of √(σ_px² + 1/12 + σ_blur²) (the pixel box's variance is 1/12).
fn image_peak_factor(camera: &Camera, spot: &Reference, blur_px: f64) -> f64 {
    let axis = |sigma_mm: f64, dir: [f64; 2]| {
        camera
            .mm_per_px_along(spot.centre_mm, dir)
            .map_or(1.0, |mm_per_px| {
                let s2 = (sigma_mm / mm_per_px).powi(2);
                (s2 / (s2 + 1.0 / 12.0 + blur_px * blur_px)).sqrt()
            })
    };
    axis(spot.sigma_mm[0], [1.0, 0.0]) * axis(spot.sigma_mm[1], [0.0, 1.0])
}

pub(crate) fn sheet_corners(scene: &Scene) -> [[f64; 2]; 4] {
    match scene.surface {
        Surface::Paper => [[0.0; 2]; 4],
        Surface::Sheet {
            width_mm,
            height_mm,
            centre_mm,
            rotation_rad,
        } => {
            let (s, c) = rotation_rad.sin_cos();
            let local = [[-0.5, -0.5], [0.5, -0.5], [0.5, 0.5], [-0.5, 0.5]];
            local.map(|[a, b]| {
                let (u, v) = (a * width_mm, b * height_mm);
                [centre_mm[0] + c * u - s * v, centre_mm[1] + s * u + c * v]
            })
        }
    }
}

fn clutter_keep(
    camera: &Camera,
    screen: &Screen,
    spots: &[DrawnSpot],
    pattern_mm: [f64; 2],
) -> clutter::Keep {
    let h = camera.spec.height_px as f64;
    let centre = [0.5 * camera.spec.width_px as f64, 0.5 * h];
    let p0 = camera.project(pattern_mm).unwrap_or(centre);
    let p1 = camera
        .project([pattern_mm[0] + 1.0, pattern_mm[1]])
        .unwrap_or([p0[0] + 1.0, p0[1]]);
    let len = (p1[0] - p0[0]).hypot(p1[1] - p0[1]).max(1e-12);
    let mut lowest = spots.iter().map(|d| d.rect[3] as f64).fold(p0[1], f64::max);
    let mut extra: Vec<[f64; 2]> = Vec::new();
    if let Some(r) = &screen.ruler {
        extra.extend(r.corners_mm());
    }
    if let Surface::Sheet { .. } = screen.scene.surface {
        extra.extend(sheet_corners(&screen.scene));
    }
    for p in extra {
        if let Some(q) = camera.project(p) {
            lowest = lowest.max(q[1].min(h));
        }
    }
    clutter::Keep {
        pattern_px: p0,
        pattern_dir: [(p1[0] - p0[0]) / len, (p1[1] - p0[1]) / len],
        lowest_px: lowest,
    }
}
