//! End to end on simulated grating photos: the binary measures photos rendered from first
//! principles (FFT far field, rays to the screen, a pinhole camera) and must recover the
//! simulated pitch or wavelength within its own stated expanded uncertainty.

mod common;
use common::{Bench, Run};
use fringegauge::simulate::{
    self, CameraSpec, Clutter, Effects, Framing, GraphPaper, GratingSetup, Scene, Truth,
};

struct Case {
    setup: GratingSetup,
    scene: Scene,
    camera: CameraSpec,
    effects: Effects,
    seed: u64,
}

impl Case {
    fn new(wavelength_m: f64, pitch_m: f64, distance_m: f64) -> Self {
        Case {
            setup: GratingSetup {
                wavelength_m,
                pitch_m,
                distance_m,
                ..GratingSetup::default()
            },
            scene: Scene::default(),
            camera: CameraSpec::default(),
            effects: Effects::default(),
            seed: 11,
        }
    }

    /// A 4.3-megapixel camera framing the first orders: enough pixels per millimetre for
    /// the ruler's 1 mm ticks to be counted.
    fn sharp(mut self) -> Self {
        self.camera.width_px = 2400;
        self.camera.height_px = 1800;
        self.camera.framing = Framing::Auto {
            max_order: 1,
            margin: 0.08,
        };
        self
    }

    fn graph_paper(mut self) -> Self {
        self.scene.graph_paper = Some(GraphPaper::default());
        self
    }

    fn tilt(mut self, yaw_deg: f64, pitch_deg: f64) -> Self {
        self.camera.yaw_rad = yaw_deg.to_radians();
        self.camera.pitch_rad = pitch_deg.to_radians();
        self
    }

    fn render(&self, b: &Bench, name: &str) -> Truth {
        let photo = simulate::render_grating(
            &self.setup,
            &self.scene,
            &self.camera,
            &self.effects,
            self.seed,
        )
        .expect("simulated photo");
        photo
            .write(&b.path(name), 92, false)
            .expect("photo written");
        photo.truth
    }
}

/// `--ruler` from the truth's ruler ends, pulled 5 % inward as a person would click.
fn ruler_flag(t: &Truth) -> String {
    let r = t.ruler.expect("ruler in the scene");
    let (s, e) = (
        r.start_px.expect("ruler start in frame"),
        r.end_px.expect("ruler end in frame"),
    );
    let p = |f: f64| [s[0] + f * (e[0] - s[0]), s[1] + f * (e[1] - s[1])];
    let (a, b) = (p(0.05), p(0.95));
    format!("{:.1},{:.1},{:.1},{:.1}", a[0], a[1], b[0], b[1])
}

/// `--points X1,Y1,X2,Y2 --length L` from two graph-paper crossings in the truth.
fn points_flags(t: &Truth) -> [String; 4] {
    let g = t.grid.expect("graph paper in the scene");
    [
        "--points".into(),
        format!(
            "{:.2},{:.2},{:.2},{:.2}",
            g.points_px[0][0], g.points_px[0][1], g.points_px[1][0], g.points_px[1][1]
        ),
        "--length".into(),
        format!("{}mm", g.length_mm),
    ]
}

fn measure_pitch(b: &Bench, name: &str, t: &Truth, extra: &[&str]) -> Run {
    let wl = format!("{}nm±0.5nm", t.inputs.wavelength_m * 1e9);
    let dist = format!("{}m±1mm", t.inputs.distance_m);
    let scale: Vec<String> = if t.grid.is_some() {
        points_flags(t).to_vec()
    } else {
        vec!["--ruler".into(), ruler_flag(t)]
    };
    let mut args = vec![
        "grating",
        name,
        "--wavelength",
        &wl,
        "--distance",
        &dist,
        "--json",
    ];
    args.extend(scale.iter().map(String::as_str));
    args.extend_from_slice(extra);
    let run = b.run(&args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    run
}

/// |error| ≤ U (k = 2) of the result.
fn assert_within_expanded(run: &Run, name: &str, truth: f64) {
    let (v, u) = run.result(name);
    assert!(
        (v - truth).abs() <= 2.0 * u,
        "{name} {v:e} vs truth {truth:e}: error {:.3e} exceeds U = {:.3e}\n{}",
        (v - truth).abs(),
        2.0 * u,
        run.stderr
    );
    // A stated uncertainty that dwarfs the error is no use either: a few per cent at most.
    assert!(
        u / truth < 0.03,
        "u = {u:e} is {:.1} % of the value",
        100.0 * u / truth
    );
}

/// (wavelength, pitch, distance, camera yaw °, camera pitch °, graph paper for the scale)
type Geometry = (f64, f64, f64, f64, f64, bool);

/// Where the first orders spread too wide for 1 mm ticks to be resolved in the frame,
/// the screen is graph paper and two of its crossings give the scale.
const GEOMETRIES: [Geometry; 7] = [
    (650e-9, 1e-3 / 300.0, 2.0, 0.0, 0.0, true),
    (650e-9, 1e-3 / 300.0, 0.8, 12.0, 0.0, false),
    (650e-9, 1e-3 / 600.0, 0.5, 8.0, -3.0, false),
    (650e-9, 1e-3 / 1000.0, 0.5, 15.0, 0.0, true),
    (532e-9, 1e-3 / 300.0, 1.5, -10.0, 5.0, false),
    (532e-9, 1e-3 / 600.0, 0.8, 0.0, 12.0, false),
    (532e-9, 1e-3 / 1000.0, 0.6, -15.0, 0.0, true),
];

fn run_geometry(b: &Bench, i: usize) -> Result<(), String> {
    let (wl, d, l, yaw, pitch, grid) = GEOMETRIES[i];
    let name = format!("case{i}.jpg");
    let mut case = Case::new(wl, d, l).sharp().tilt(yaw, pitch);
    if grid {
        case = case.graph_paper();
    }
    case.seed = 100 + i as u64;
    let t = case.render(b, &name);
    let wl_flag = format!("{}nm±0.5nm", wl * 1e9);
    let dist = format!("{l}m±1mm");
    let scale: Vec<String> = if grid {
        points_flags(&t).to_vec()
    } else {
        vec!["--ruler".into(), ruler_flag(&t)]
    };
    let mut args = vec![
        "grating",
        name.as_str(),
        "--wavelength",
        &wl_flag,
        "--distance",
        &dist,
        "--json",
    ];
    args.extend(scale.iter().map(String::as_str));
    let run = b.run(&args);
    if run.code != 0 {
        return Err(format!(
            "case {i}: exit {}: {}",
            run.code,
            run.stderr.lines().last().unwrap_or("")
        ));
    }
    let (v, u) = run.result("pitch");
    if (v - d).abs() > 2.0 * u || u / d > 0.03 {
        return Err(format!("case {i}: pitch {v:e} ± {u:e} vs truth {d:e}"));
    }
    Ok(())
}

fn run_geometries(cases: &[usize]) {
    let b = Bench::new();
    let failures: Vec<String> = cases
        .iter()
        .filter_map(|&i| run_geometry(&b, i).err())
        .collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

#[test]
fn pitch_recovered_with_a_graph_paper_scale_at_two_metres() {
    run_geometries(&[0]);
}

/// The same photo scaled by counting the graph paper's lines along the pattern instead
/// of two given crossings. At about 2.5 px/mm the 1 mm lines do not resolve, and the
/// alternating 5 and 10 mm lines must be recognised as such.
#[test]
fn pitch_recovered_with_the_graph_paper_lines_counted() {
    let b = Bench::new();
    let (wl, d, l, _, _, grid) = GEOMETRIES[0];
    assert!(grid);
    let mut case = Case::new(wl, d, l).sharp().graph_paper();
    case.seed = 100;
    case.render(&b, "grid.jpg");
    let wl_flag = format!("{}nm±0.5nm", wl * 1e9);
    let dist = format!("{l}m±1mm");
    let run = b.run(&[
        "grating",
        "grid.jpg",
        "--wavelength",
        &wl_flag,
        "--distance",
        &dist,
        "--grid",
        "1mm",
        "--json",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_within_expanded(&run, "pitch", d);
    assert!(
        run.stdout.contains("\"grid\""),
        "scale method grid in the record"
    );
}

/// Ruler scales under camera yaw up to 12° and a few degrees of camera pitch: the
/// ruler's tick spacing corrects the perspective along it, the convergence of its ticks
/// the tilt about its line.
#[test]
fn pitch_recovered_with_a_ruler_under_camera_tilt() {
    run_geometries(&[1, 2, 4]);
}

/// Known failure, kept runnable with `cargo test --release -- --ignored`: with the
/// camera pitched 12° (case 5) the scale on the pattern line is 1.4 % larger than on the
/// ruler's line 27 mm below it. The convergence of the ticks corrects about two thirds of
/// that on these simulated ticks (4 px/mm, 0.15 mm wide): the slant they yield is low by
/// about a quarter of what the truth's homography gives, and the result lands 2.2 u off.
/// On a synthetic raster with smooth ticks the same code recovers the tilt to 2e-6
/// (`scale::ruler` unit tests), so the cause lies between the simulated ink and the slant
/// measurement, not yet found.
#[test]
#[ignore = "known failure: ticks' slant under a 12° camera pitch is underestimated on simulated photos"]
fn pitch_recovered_with_a_ruler_under_12_degrees_camera_pitch() {
    run_geometries(&[5]);
}

/// Known failure, kept runnable with `cargo test --release -- --ignored`: at 1000
/// lines/mm (cases 3, 6) the two graph-paper points give a similarity scale, blind to the
/// ±15° yaw: the first orders, about 430 mm either side, come out 1.44:1 uneven, no
/// assignment with −1, 0, +1 fits one λ/d, and an uneven one (−3, −2, 0) does; even
/// indexed right, the fit would be biased by about 2 %. Passing needs a perspective
/// scale from the graph paper itself (a grid fit), which two points cannot give.
#[test]
#[ignore = "known failure: two graph-paper points cannot correct a 15° yaw (needs a grid fit)"]
fn pitch_recovered_at_1000_per_mm_with_graph_paper_under_15_degrees_yaw() {
    run_geometries(&[3, 6]);
}

#[test]
fn clean_spots_land_within_a_tenth_of_a_pixel_of_truth() {
    let b = Bench::new();
    let mut case = Case::new(650e-9, 1e-3 / 600.0, 0.5).sharp().tilt(10.0, 0.0);
    case.effects = Effects::clean();
    let t = case.render(&b, "clean.png");
    let run = measure_pitch(&b, "clean.png", &t, &[]);
    let rec = run.record();
    let features = rec["features"].as_array().unwrap();
    assert!(features.len() >= 3, "{features:?}");
    for f in features {
        let label = f["label"].as_str().unwrap();
        let m: i32 = label.trim_start_matches("order ").parse().unwrap();
        let truth = t
            .orders
            .iter()
            .find(|o| o.order == m)
            .and_then(|o| o.px)
            .unwrap();
        let (x, y) = (f["px"][0].as_f64().unwrap(), f["px"][1].as_f64().unwrap());
        let err = ((x - truth[0]).powi(2) + (y - truth[1]).powi(2)).sqrt();
        assert!(
            err < 0.1,
            "{label}: ({x:.3}, {y:.3}) vs truth {truth:?}: {err:.3} px"
        );
    }
}

/// Known failure, kept runnable with `cargo test --release -- --ignored`. The clutter is
/// now told from the laser by colour and the three orders are found where the truth
/// puts them, but the two graph-paper points give a similarity scale blind to the 9° yaw
/// (the sides come out 568 and 459 mm), so no −1, 0, +1 assignment fits one λ/d; and at
/// about 2 px/mm the paper's lines are too fine for `--grid`.
#[test]
#[ignore = "known failure: two points cannot correct the 9° yaw, and at 2 px/mm --grid finds no lines"]
fn practitioner_photo_with_graph_paper_clutter_and_glints() {
    // Small saturated haloed spots on graph paper seen obliquely, a table with objects in
    // the lower part, a glint off the line and a window reflection in a corner; the
    // scale from two graph-paper crossings.
    let b = Bench::new();
    let mut case = Case::new(650e-9, 1e-3 / 600.0, 1.2)
        .sharp()
        .graph_paper()
        .tilt(9.0, -4.0);
    case.scene.clutter = Clutter::all();
    case.effects.overexposure = 8.0;
    case.seed = 5;
    let t = case.render(&b, "bench.jpg");
    let run = measure_pitch(&b, "bench.jpg", &t, &[]);
    assert_within_expanded(&run, "pitch", 1e-3 / 600.0);
}

#[test]
fn he_ne_wavelength_from_a_known_grating() {
    // He-Ne 632.8 nm in air (CIPM 2007 recommended radiation 632.9908 nm in vacuum,
    // n ≈ 1.000275), through a 600 lines/mm grating of known pitch.
    let b = Bench::new();
    let t = Case::new(632.816e-9, 1e-3 / 600.0, 0.5)
        .sharp()
        .tilt(5.0, 0.0)
        .render(&b, "hene.jpg");
    let ruler = ruler_flag(&t);
    let run = b.run(&[
        "grating",
        "hene.jpg",
        "--pitch",
        "1/600mm±0.0001um",
        "--distance",
        "0.5m±1mm",
        "--ruler",
        &ruler,
        "--json",
    ]);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_within_expanded(&run, "wavelength", 632.816e-9);
}

fn disc(b: &Bench, name: &str, pitch_m: f64, wavelength_m: f64, distance_m: f64) -> (Truth, Run) {
    disc_framed(b, name, pitch_m, wavelength_m, distance_m, None)
}

/// A disc photo; `framing` replaces the automatic one where that cannot hold the orders.
fn disc_framed(
    b: &Bench,
    name: &str,
    pitch_m: f64,
    wavelength_m: f64,
    distance_m: f64,
    framing: Option<Framing>,
) -> (Truth, Run) {
    let mut case = Case::new(wavelength_m, pitch_m, distance_m).sharp();
    case.setup.reflect = true;
    if let Some(f) = framing {
        case.camera.framing = f;
    }
    let t = case.render(b, name);
    let ruler = ruler_flag(&t);
    let wl = format!("{}nm±0.5nm", wavelength_m * 1e9);
    let dist = format!("{distance_m}m±0.5mm");
    let run = b.run(&[
        "grating",
        name,
        "--reflect",
        "--wavelength",
        &wl,
        "--distance",
        &dist,
        "--ruler",
        &ruler,
        "--json",
    ]);
    (t, run)
}

#[test]
fn cd_track_pitch_from_a_reflection_photo() {
    let b = Bench::new();
    // CD track pitch 1.6 µm (IEC 60908; ECMA-130 is the free equivalent).
    let (_, run) = disc(&b, "cd.jpg", 1.6e-6, 650e-9, 0.30);
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_within_expanded(&run, "pitch", 1.6e-6);
}

/// The automatic framing keeps orders within 1.5 distances of the zero order, but a DVD's
/// first orders land tan 61.45° = 1.84 distances out on a screen parallel to the disc,
/// and its zero order goes back into the hole: that photo holds no spot at all. A person
/// photographing the pattern frames both first orders, so the camera is aimed at the hole
/// from far enough back that they sit a fifth inside the frame's edges.
#[test]
fn dvd_track_pitch_from_a_reflection_photo() {
    let b = Bench::new();
    // DVD track pitch 0.74 µm (ECMA-267 §10.6.2); first order near 61° at 650 nm.
    let (pitch, wavelength, distance): (f64, f64, f64) = (0.74e-6, 650e-9, 0.08);
    // Where the first order lands on a screen parallel to the disc, L·tan θ1 with
    // sin θ1 = λ/d (REFERENCES: 61.45° computed for a DVD at 650 nm).
    let reach_mm = distance * 1e3 * (wavelength / pitch).asin().tan();
    assert!((reach_mm / (distance * 1e3) - 61.45f64.to_radians().tan()).abs() < 0.01);
    let camera = Case::new(wavelength, pitch, distance).sharp().camera;
    let half_width_px = 0.5 * camera.width_px as f64;
    let framing = Framing::Fixed {
        aim_mm: [0.0, 0.0],
        distance_mm: 1.25 * reach_mm * camera.focal_px / half_width_px,
    };
    let (t, run) = disc_framed(&b, "dvd.jpg", pitch, wavelength, distance, Some(framing));
    assert!(
        t.orders
            .iter()
            .filter(|o| o.order.abs() == 1)
            .all(|o| o.in_frame),
        "both first orders in the frame"
    );
    assert_eq!(run.code, 0, "{}", run.stderr);
    assert_within_expanded(&run, "pitch", pitch);
}

#[test]
fn blu_ray_pitch_gives_no_first_order() {
    // Blu-ray track pitch 0.32 µm: λ/d > 1 for λ ≥ 320 nm, so no first order exists at
    // normal incidence (REFERENCES: computed). The tool must say so, with exit 1.
    let b = Bench::new();
    let (t, run) = disc(&b, "bd.jpg", 0.32e-6, 650e-9, 0.10);
    assert!(t.only_zero_order);
    assert_eq!(run.code, 1, "{}", run.stderr);
    assert!(run.stderr.contains("first order"), "{}", run.stderr);
}

#[test]
fn overlay_report_and_archive_are_written_and_not_overwritten() {
    let b = Bench::new();
    let t = Case::new(650e-9, 1e-3 / 300.0, 0.6).render(&b, "g.jpg");
    let ruler = ruler_flag(&t);
    let base = [
        "grating",
        "g.jpg",
        "--wavelength",
        "650nm±1nm",
        "--distance",
        "0.6m±1mm",
        "--ruler",
        &ruler,
    ];
    let mut args = base.to_vec();
    args.extend_from_slice(&[
        "--overlay",
        "o.png",
        "--report",
        "r.html",
        "--archive",
        "arch",
        "--sample",
        "G1",
    ]);
    let run = b.run(&args);
    assert_eq!(run.code, 0, "{}", run.stderr);
    let overlay = std::fs::read(b.path("o.png")).unwrap();
    let report = std::fs::read(b.path("r.html")).unwrap();
    // Again without --force: refused, files untouched.
    let again = b.run(&args);
    assert_eq!(again.code, 2, "{}", again.stderr);
    assert_eq!(std::fs::read(b.path("o.png")).unwrap(), overlay);
    assert_eq!(std::fs::read(b.path("r.html")).unwrap(), report);
    let verify = b.run(&["archive", "verify", "arch"]);
    assert_eq!(verify.code, 0, "{}{}", verify.stdout, verify.stderr);
    let list = b.run(&["archive", "list", "arch"]);
    assert!(list.stdout.contains("G1"), "{}", list.stdout);
}
