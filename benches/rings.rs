//! Speed of the ring kinds, `pinhole` and `particles`, end to end on 12-megapixel JPEGs,
//! against the floor they are judged by: decoding the same file alone (DESIGN §6: ring
//! kinds within 2× the decode). The photos are simulated once into a temporary folder.

use clap::Parser;
use criterion::{Criterion, criterion_group, criterion_main};
use fringegauge::cli::{Cli, run};
use fringegauge::simulate::{
    self, CameraSpec, Effects, Framing, ParticleSetup, PinholeSetup, RulerTruth, Scene,
};
use std::hint::black_box;
use std::path::Path;

/// The 12 MP camera, 6° off square, aimed to keep `max_order` rings (or multiples of
/// λ/D) in the frame.
fn camera(max_order: u32) -> CameraSpec {
    CameraSpec {
        yaw_rad: 6f64.to_radians(),
        framing: Framing::Auto {
            max_order,
            margin: 0.08,
        },
        ..CameraSpec::twelve_megapixel()
    }
}

/// The `--ruler` flag a person would give: the true ruler's ends pulled 5 % inward.
fn ruler_flag(r: RulerTruth) -> String {
    let (s, e) = (r.start_px.expect("start"), r.end_px.expect("end"));
    let p = |f: f64| [s[0] + f * (e[0] - s[0]), s[1] + f * (e[1] - s[1])];
    let (a, b) = (p(0.05), p(0.95));
    format!("{:.0},{:.0},{:.0},{:.0}", a[0], a[1], b[0], b[1])
}

fn measure(c: &mut Criterion, kind: &str, path: &Path, ruler: &str, distance: &str) {
    let bytes = std::fs::read(path).expect("read");
    let mut group = c.benchmark_group(format!("12MP {kind}"));
    group.sample_size(10);
    group.bench_function("decode alone (image crate)", |b| {
        b.iter(|| black_box(image::load_from_memory(black_box(&bytes)).expect("decodes")))
    });
    let path = path.display().to_string();
    group.bench_function(format!("{kind} end to end"), |b| {
        b.iter(|| {
            let cli = Cli::parse_from([
                "fringegauge",
                kind,
                &path,
                "--wavelength",
                "650nm±1nm",
                "--distance",
                distance,
                "--ruler",
                ruler,
                "--json",
            ]);
            black_box(run(cli).expect("measured"))
        })
    });
    group.finish();
}

fn benches(c: &mut Criterion) {
    let dir = tempfile::tempdir().expect("temporary folder");
    let pinhole = dir.path().join("pinhole-12mp.jpg");
    let setup = PinholeSetup::default();
    let sim = simulate::render_pinhole(
        &setup,
        &Scene::default(),
        &camera(6),
        &Effects::default(),
        12,
    )
    .expect("12 MP photo");
    sim.write(&pinhole, 92, true).expect("written");
    let ruler = ruler_flag(sim.truth.ruler.expect("ruler"));
    let distance = format!("{}m±2mm", setup.distance_m);
    measure(c, "pinhole", &pinhole, &ruler, &distance);

    let particles = dir.path().join("particles-12mp.jpg");
    let setup = ParticleSetup::default();
    let sim = simulate::render_particles(
        &setup,
        &Scene::default(),
        &camera(2),
        &Effects::default(),
        12,
    )
    .expect("12 MP photo");
    sim.write(&particles, 92, true).expect("written");
    let ruler = ruler_flag(sim.truth.ruler.expect("ruler"));
    let distance = format!("{}m±2mm", setup.distance_m);
    measure(c, "particles", &particles, &ruler, &distance);
}

criterion_group!(rings, benches);
criterion_main!(rings);
