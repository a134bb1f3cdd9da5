//! Bad input gets a clear message and the documented exit code (DESIGN §2, §7), never a
//! panic, and nothing is written.

mod common;
use common::Bench;

const GOOD_ARGS: [&str; 6] = [
    "--wavelength",
    "650nm±3nm",
    "--distance",
    "1.25m±2mm",
    "--mm-per-px",
    "0.1",
];

fn grating(b: &Bench, photo: &str, extra: &[&str]) -> common::Run {
    let mut args = vec!["grating", photo];
    args.extend_from_slice(extra);
    b.run(&args)
}

fn assert_clean_failure(run: &common::Run, code: i32, needle: &str) {
    assert_eq!(run.code, code, "stderr: {}", run.stderr);
    assert!(!run.stderr.contains("panicked"), "{}", run.stderr);
    assert!(
        run.stderr.to_lowercase().contains(&needle.to_lowercase()),
        "expected `{needle}` in: {}",
        run.stderr
    );
    assert!(run.stdout.is_empty() || !run.stdout.contains("\"results\""));
}

fn write_png(b: &Bench, name: &str, w: u32, h: u32, f: impl Fn(u32, u32) -> [u8; 3]) {
    let img = image::RgbImage::from_fn(w, h, |x, y| image::Rgb(f(x, y)));
    img.save(b.path(name)).unwrap();
}

#[test]
fn missing_file() {
    let b = Bench::new();
    let r = grating(&b, "nowhere.jpg", &GOOD_ARGS);
    assert_clean_failure(&r, 2, "nowhere.jpg");
}

#[test]
fn empty_file() {
    let b = Bench::new();
    std::fs::write(b.path("empty.jpg"), b"").unwrap();
    assert_clean_failure(&grating(&b, "empty.jpg", &GOOD_ARGS), 2, "empty");
}

#[test]
fn text_file_named_jpg() {
    let b = Bench::new();
    std::fs::write(b.path("notes.jpg"), b"grating 600/mm, bench 3\n").unwrap();
    assert_clean_failure(&grating(&b, "notes.jpg", &GOOD_ARGS), 2, "notes.jpg");
}

#[test]
fn truncated_jpeg() {
    let b = Bench::new();
    write_png(&b, "whole.png", 320, 240, |x, y| {
        [(x % 256) as u8, (y % 256) as u8, 90]
    });
    let img = image::open(b.path("whole.png")).unwrap();
    img.save(b.path("whole.jpg")).unwrap();
    let bytes = std::fs::read(b.path("whole.jpg")).unwrap();
    std::fs::write(b.path("cut.jpg"), &bytes[..bytes.len() / 2]).unwrap();
    let r = grating(&b, "cut.jpg", &GOOD_ARGS);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(!r.stderr.contains("panicked"));
}

/// A PNG whose header declares 100000 × 100000 pixels (10 gigapixels): it must be
/// refused from the header, before any pixel buffer is allocated.
#[test]
fn image_bomb_is_refused_from_its_header() {
    let b = Bench::new();
    let mut png = vec![0x89, b'P', b'N', b'G', 0x0D, 0x0A, 0x1A, 0x0A];
    let mut ihdr = Vec::new();
    ihdr.extend_from_slice(b"IHDR");
    ihdr.extend_from_slice(&100_000u32.to_be_bytes());
    ihdr.extend_from_slice(&100_000u32.to_be_bytes());
    ihdr.extend_from_slice(&[8, 2, 0, 0, 0]);
    png.extend_from_slice(&13u32.to_be_bytes());
    png.extend_from_slice(&ihdr);
    png.extend_from_slice(&crc32(&ihdr).to_be_bytes());
    std::fs::write(b.path("bomb.png"), &png).unwrap();
    assert_clean_failure(&grating(&b, "bomb.png", &GOOD_ARGS), 2, "100000");
}

/// CRC-32 (ISO 3309, as PNG uses), bitwise.
fn crc32(data: &[u8]) -> u32 {
    let mut c = 0xFFFF_FFFFu32;
    for &byte in data {
        c ^= byte as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xEDB8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    !c
}

#[test]
fn bad_physics_values_are_refused_before_the_photo_is_read() {
    let b = Bench::new();
    write_png(&b, "p.png", 64, 48, |_, _| [10, 10, 10]);
    for (flag, value, needle) in [
        ("--distance", "-1.2m", "distance"),
        ("--distance", "0m", "distance"),
        ("--distance", "NaN m", "distance"),
        ("--wavelength", "0nm", "wavelength"),
        ("--wavelength", "-650nm", "wavelength"),
        ("--wavelength", "650xm", "650xm"),
        ("--wavelength", "650nm±", "650nm±"),
    ] {
        let mut args: Vec<&str> = GOOD_ARGS.to_vec();
        let i = args.iter().position(|a| *a == flag).unwrap();
        args[i + 1] = value;
        let r = grating(&b, "p.png", &args);
        assert_clean_failure(&r, 2, needle);
    }
    assert_eq!(b.files(), vec!["p.png".to_string()]);
}

#[test]
fn no_scale_is_bad_usage() {
    let b = Bench::new();
    write_png(&b, "p.png", 64, 48, |_, _| [10, 10, 10]);
    let r = b.run(&[
        "grating",
        "p.png",
        "--wavelength",
        "650nm",
        "--distance",
        "1m",
    ]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains("--ruler") && r.stderr.contains("--mm-per-px"),
        "{}",
        r.stderr
    );
}

#[test]
fn dark_photo_is_not_measured() {
    let b = Bench::new();
    // A dark frame with sensor-like noise (deterministic) and no pattern.
    write_png(&b, "dark.png", 400, 300, |x, y| {
        let v = ((x * 7 + y * 13) % 5) as u8 + 8;
        [v, v, v]
    });
    let r = grating(&b, "dark.png", &GOOD_ARGS);
    assert_clean_failure(&r, 1, "no bright spots");
}

#[test]
fn both_wavelength_and_pitch_is_bad_usage() {
    let b = Bench::new();
    write_png(&b, "p.png", 64, 48, |_, _| [10, 10, 10]);
    let r = b.run(&[
        "grating",
        "p.png",
        "--wavelength",
        "650nm",
        "--pitch",
        "600/mm",
        "--distance",
        "1m",
        "--mm-per-px",
        "0.1",
    ]);
    assert_eq!(r.code, 2);
}
