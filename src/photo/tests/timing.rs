//! A by-hand timing, not run by default.

use super::*;

/// Prints the time of `decode` against the plain `image` decode of a synthetic 12 MP JPEG.
/// Run by hand in release: `cargo test --release --lib photo::tests::timing::time_12mp -- --ignored
/// --nocapture`. No timed assertions: the figures go into notes.
#[test]
#[ignore = "by-hand timing on a 12 MP photo"]
fn time_12mp() {
    use std::time::Instant;
    let (w, h) = (4000u32, 3000u32);
    let img = image::RgbImage::from_fn(w, h, |x, y| {
        let r2 = (f64::from(x) - 2600.0).powi(2) + (f64::from(y) - 1400.0).powi(2);
        let spot = 220.0 * (-r2 / 800.0).exp();
        // Per-pixel hashed noise (±12 codes) so the file compresses like a camera photo
        // (a few MB) rather than like a smooth drawing.
        let hash =
            (x.wrapping_mul(0x9E37_79B1) ^ y.wrapping_mul(0x85EB_CA77)).wrapping_mul(0xC2B2_AE3D);
        let noise = f64::from(hash >> 24) / 255.0 * 24.0 - 12.0;
        let v = (60.0 + noise + spot).clamp(0.0, 255.0) as u8;
        Rgb([v, v.saturating_sub(20), v / 2])
    });
    let jpeg = encode_jpeg(&img, 90);
    drop(img);
    let with_orientation = |o: u16| {
        insert_after_soi(
            &jpeg,
            &exif_app1(&ExifSpec {
                orientation: Some(o),
                ..ExifSpec::default()
            }),
        )
    };
    let (turned, upside_down) = (with_orientation(6), with_orientation(3));
    let best = |f: &dyn Fn()| {
        (0..7)
            .map(|_| {
                let t = Instant::now();
                f();
                t.elapsed().as_secs_f64() * 1e3
            })
            .fold(f64::INFINITY, f64::min)
    };
    // Peak resident memory of one load of the turned photo (the worst case: decoded
    // buffer plus the orientation copy), after resetting the high-water mark (Linux
    // /proc/PID/clear_refs, value 5).
    let status = |key: &str| -> Option<f64> {
        let text = std::fs::read_to_string("/proc/self/status").ok()?;
        let line = text.lines().find(|l| l.starts_with(key))?;
        let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
        Some(kb / 1024.0)
    };
    let reset = std::fs::write("/proc/self/clear_refs", "5").is_ok();
    let before = status("VmRSS:");
    let once = decode(&turned, "12mp.jpg", &Limits::default()).unwrap();
    drop(once);
    let peak = status("VmHWM:");
    println!(
        "peak RSS during one load (orientation 6): {peak:?} MiB, RSS before {before:?} MiB \
         (high-water mark reset: {reset})"
    );
    let plain = best(&|| {
        image::load_from_memory(&jpeg).unwrap();
    });
    let ours = best(&|| {
        decode(&jpeg, "12mp.jpg", &Limits::default()).unwrap();
    });
    let ours_6 = best(&|| {
        decode(&turned, "12mp.jpg", &Limits::default()).unwrap();
    });
    let ours_3 = best(&|| {
        decode(&upside_down, "12mp.jpg", &Limits::default()).unwrap();
    });
    let photo = decode(&jpeg, "12mp.jpg", &Limits::default()).unwrap();
    let choose = best(&|| {
        photo.choose_channel();
    });
    let preview = best(&|| {
        photo.preview_rgb8(1600);
    });
    // First touch of a fresh buffer the size of the decoded photo: page faults that
    // every new full-frame buffer pays.
    let touch = best(&|| {
        let mut v = vec![0u8; 36_000_000];
        v.iter_mut().step_by(4096).for_each(|b| *b = 1);
        std::hint::black_box(&v);
    });
    let hash = best(&|| {
        sha256_hex(&jpeg);
    });
    println!(
        "12 MP JPEG, {} bytes: image decode {plain:.1} ms; photo::decode {ours:.1} ms \
         ({:.2}×); with orientation 6 {ours_6:.1} ms, orientation 3 {ours_3:.1} ms; \
         sha256 {hash:.1} ms; first touch of 36 MB {touch:.1} ms; choose_channel \
         {choose:.1} ms; preview_rgb8(1600) {preview:.1} ms",
        jpeg.len(),
        ours / plain
    );
}
