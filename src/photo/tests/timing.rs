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
        let texture = f64::from((x * 7 + y * 13) % 9);
        let v = (20.0 + texture + spot).min(255.0) as u8;
        Rgb([v, v / 2, v / 3])
    });
    let jpeg = encode_jpeg(&img, 90);
    drop(img);
    let rotated = insert_after_soi(
        &jpeg,
        &exif_app1(&ExifSpec {
            orientation: Some(6),
            ..ExifSpec::default()
        }),
    );
    let best = |f: &dyn Fn()| {
        (0..7)
            .map(|_| {
                let t = Instant::now();
                f();
                t.elapsed().as_secs_f64() * 1e3
            })
            .fold(f64::INFINITY, f64::min)
    };
    let plain = best(&|| {
        image::load_from_memory(&jpeg).unwrap();
    });
    let ours = best(&|| {
        decode(&jpeg, "12mp.jpg", &Limits::default()).unwrap();
    });
    let ours_rotated = best(&|| {
        decode(&rotated, "12mp.jpg", &Limits::default()).unwrap();
    });
    let photo = decode(&jpeg, "12mp.jpg", &Limits::default()).unwrap();
    let choose = best(&|| {
        photo.choose_channel();
    });
    let preview = best(&|| {
        photo.preview_rgb8(1600);
    });
    let hash = best(&|| {
        sha256_hex(&jpeg);
    });
    println!(
        "12 MP JPEG, {} bytes: image decode {plain:.1} ms; photo::decode {ours:.1} ms \
         ({:.2}×); with orientation 6 {ours_rotated:.1} ms; sha256 {hash:.1} ms; \
         choose_channel {choose:.1} ms; preview_rgb8(1600) {preview:.1} ms",
        jpeg.len(),
        ours / plain
    );
}
