//! Speed of the whole `grating` and `two-slit` measurements against the floor they are
//! judged by: decoding the same 12-megapixel JPEG alone (DESIGN §6 and the fringe kinds'
//! budget: the whole within 1.5× the decode). The photos are simulated once into a
//! temporary folder.

use clap::Parser;
use criterion::{Criterion, criterion_group, criterion_main};
use fringegauge::cli::{Cli, run};
use fringegauge::simulate::{
    self, ApertureSetup, CameraSpec, Effects, Framing, GratingSetup, Scene,
};
use std::hint::black_box;
use std::path::PathBuf;

struct Photo12 {
    _dir: tempfile::TempDir,
    path: PathBuf,
    ruler: String,
}

fn photo_12mp() -> Photo12 {
    let dir = tempfile::tempdir().expect("temporary folder");
    let path = dir.path().join("grating-12mp.jpg");
    let setup = GratingSetup {
        pitch_m: 1e-3 / 600.0,
        distance_m: 1.25,
        ..GratingSetup::default()
    };
    let camera = CameraSpec {
        yaw_rad: 6f64.to_radians(),
        framing: Framing::Auto {
            max_order: 2,
            margin: 0.06,
        },
        ..CameraSpec::twelve_megapixel()
    };
    let sim = simulate::render_grating(&setup, &Scene::default(), &camera, &Effects::default(), 12)
        .expect("12 MP photo");
    sim.write(&path, 92, true).expect("written");
    let ruler = ruler_flag(sim.truth.ruler.expect("ruler"));
    Photo12 {
        _dir: dir,
        path,
        ruler,
    }
}

/// A 12 MP two-slit photo (0.25 mm, 0.05 mm, 2.5 m) and its ruler flag.
fn two_slit_12mp(dir: &std::path::Path) -> (PathBuf, String) {
    let path = dir.join("two-slit-12mp.jpg");
    let camera = CameraSpec {
        yaw_rad: 6f64.to_radians(),
        framing: Framing::Auto {
            max_order: 10,
            margin: 0.06,
        },
        ..CameraSpec::twelve_megapixel()
    };
    let sim = simulate::render_aperture(
        &ApertureSetup::two_slit(),
        &Scene::default(),
        &camera,
        &Effects::default(),
        12,
    )
    .expect("12 MP photo");
    sim.write(&path, 92, true).expect("written");
    (path, ruler_flag(sim.truth.ruler.expect("ruler")))
}

/// The `--ruler` flag a person would give: the true ruler's ends pulled 5 % inward.
fn ruler_flag(r: simulate::RulerTruth) -> String {
    let (s, e) = (r.start_px.expect("start"), r.end_px.expect("end"));
    let p = |f: f64| [s[0] + f * (e[0] - s[0]), s[1] + f * (e[1] - s[1])];
    let (a, b) = (p(0.05), p(0.95));
    format!("{:.0},{:.0},{:.0},{:.0}", a[0], a[1], b[0], b[1])
}

fn benches(c: &mut Criterion) {
    let photo = photo_12mp();
    let bytes = std::fs::read(&photo.path).expect("read");
    let mut group = c.benchmark_group("12MP");
    group.sample_size(20);
    group.bench_function("decode alone (image crate)", |b| {
        b.iter(|| black_box(image::load_from_memory(black_box(&bytes)).expect("decodes")))
    });
    group.bench_function("fringegauge load", |b| {
        b.iter(|| {
            black_box(
                fringegauge::photo::decode(&bytes, "bench", &fringegauge::photo::Limits::default())
                    .expect("decodes"),
            )
        })
    });
    let path = photo.path.display().to_string();
    group.bench_function("grating end to end", |b| {
        b.iter(|| {
            let cli = Cli::parse_from([
                "fringegauge",
                "grating",
                &path,
                "--wavelength",
                "650nm±3nm",
                "--distance",
                "1.25m±2mm",
                "--ruler",
                &photo.ruler,
                "--json",
            ]);
            black_box(run(cli).expect("measured"))
        })
    });
    let (fringe_path, fringe_ruler) = two_slit_12mp(photo._dir.path());
    let fringe_bytes = std::fs::read(&fringe_path).expect("read");
    group.bench_function("two-slit photo: decode alone (image crate)", |b| {
        b.iter(|| black_box(image::load_from_memory(black_box(&fringe_bytes)).expect("decodes")))
    });
    let fringe_path = fringe_path.display().to_string();
    group.bench_function("two-slit end to end", |b| {
        b.iter(|| {
            let cli = Cli::parse_from([
                "fringegauge",
                "two-slit",
                &fringe_path,
                "--wavelength",
                "532nm±1nm",
                "--distance",
                "2.5m±2mm",
                "--ruler",
                &fringe_ruler,
                "--json",
            ]);
            black_box(run(cli).expect("measured"))
        })
    });
    group.finish();
}

criterion_group!(pipeline, benches);
criterion_main!(pipeline);
