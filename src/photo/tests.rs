//! Tests of `load` and `decode` end to end: formats and bit depths, orientation from EXIF
//! (in memory and with the committed fixtures), hashes, and every kind of bad input.

use super::test_support::*;
use super::*;
use image::{DynamicImage, ImageBuffer, ImageFormat, Luma, Rgb, Rgba};
use std::path::PathBuf;

fn fixture(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("fixtures/orientation")
        .join(name)
}

/// The orientation that undoes `o` (6 and 8 are each other's inverse, the rest their own).
fn inverse(o: u8) -> u8 {
    match o {
        6 => 8,
        8 => 6,
        other => other,
    }
}

/// `upright` stored so that a viewer applying EXIF orientation `o` shows it upright.
/// Made with the image crate's own transforms, independently of ours.
fn stored_for(upright: &DynamicImage, o: u8) -> DynamicImage {
    let mut stored = upright.clone();
    stored.apply_orientation(image::metadata::Orientation::from_exif(inverse(o)).unwrap());
    stored
}

fn codes(photo: &Photo) -> image::RgbImage {
    let (img, scale) = photo.preview_rgb8(u32::MAX);
    assert_eq!(scale, 1.0);
    img
}

fn mean_abs_diff(a: &image::RgbImage, b: &image::RgbImage) -> f64 {
    assert_eq!(a.dimensions(), b.dimensions());
    let total: u64 = a
        .as_raw()
        .iter()
        .zip(b.as_raw())
        .map(|(&p, &q)| u64::from(p.abs_diff(q)))
        .sum();
    total as f64 / a.as_raw().len() as f64
}

fn brightest(photo: &Photo) -> (usize, usize) {
    let p = photo.plane(Channel::Luma);
    let mut best = (0, 0, f32::MIN);
    for y in 0..p.height() {
        for x in 0..p.width() {
            if p.get(x, y) > best.2 {
                best = (x, y, p.get(x, y));
            }
        }
    }
    (best.0, best.1)
}

// ---------------------------------------------------------------- orientation

#[test]
fn all_eight_exif_orientations_come_out_upright_png() {
    // Lossless, so the upright pixels must match exactly. PNG carries EXIF in an eXIf
    // chunk (PNG specification, 3rd edition).
    let upright = DynamicImage::ImageRgb8(test_picture(24, 16));
    for o in 1..=8u8 {
        let png = encode(&stored_for(&upright, o), ImageFormat::Png);
        let spec = ExifSpec {
            orientation: Some(u16::from(o)),
            ..ExifSpec::default()
        };
        let png = insert_after_ihdr(&png, &png_chunk(b"eXIf", &exif_tiff(&spec)));
        let photo = decode(&png, "o.png", &Limits::default()).unwrap();
        assert_eq!(photo.info.orientation, u16::from(o));
        assert_eq!(
            (photo.info.width, photo.info.height),
            (24, 16),
            "orientation {o}"
        );
        assert_eq!(
            &codes(&photo),
            upright.as_rgb8().unwrap(),
            "orientation {o}"
        );
    }
}

#[test]
fn all_eight_exif_orientations_come_out_upright_jpeg() {
    let upright = DynamicImage::ImageRgb8(test_picture(96, 64));
    for o in 1..=8u8 {
        let jpeg = encode_jpeg(stored_for(&upright, o).as_rgb8().unwrap(), 95);
        let spec = ExifSpec {
            orientation: Some(u16::from(o)),
            ..ExifSpec::default()
        };
        let jpeg = insert_after_soi(&jpeg, &exif_app1(&spec));
        let photo = decode(&jpeg, "o.jpg", &Limits::default()).unwrap();
        assert_eq!(photo.info.orientation, u16::from(o));
        assert_eq!((photo.width(), photo.height()), (96, 64));
        let diff = mean_abs_diff(&codes(&photo), upright.as_rgb8().unwrap());
        assert!(diff < 3.0, "orientation {o}: mean difference {diff} codes");
        assert_eq!(brightest(&photo), (16, 13), "orientation {o}");
    }
}

#[test]
fn committed_orientation_fixtures_look_identical_upright() {
    let truth = test_picture(96, 64);
    let reference = load(&fixture("spot_o1.jpg"), &Limits::default()).unwrap();
    assert_eq!(reference.info.orientation, 1);
    for o in [1u16, 3, 6, 8] {
        let photo = load(&fixture(&format!("spot_o{o}.jpg")), &Limits::default()).unwrap();
        assert_eq!(photo.info.orientation, o);
        assert_eq!((photo.info.width, photo.info.height), (96, 64));
        assert_eq!(photo.info.exif.make.as_deref(), Some("fringegauge fixture"));
        // Within JPEG error of the truth and of each other.
        let to_truth = mean_abs_diff(&codes(&photo), &truth);
        let to_reference = mean_abs_diff(&codes(&photo), &codes(&reference));
        assert!(to_truth < 3.0, "o{o}: {to_truth} codes from the truth");
        assert!(to_reference < 3.0, "o{o}: {to_reference} codes from o1");
        assert_eq!(brightest(&photo), (16, 13), "o{o}");
    }
}

/// Rewrites `fixtures/orientation/` (run with `--ignored` after changing the picture).
#[test]
#[ignore = "regenerates the committed fixtures"]
fn regenerate_orientation_fixtures() {
    let dir = fixture("");
    std::fs::create_dir_all(&dir).unwrap();
    let upright = DynamicImage::ImageRgb8(test_picture(96, 64));
    for o in [1u8, 3, 6, 8] {
        let jpeg = encode_jpeg(stored_for(&upright, o).as_rgb8().unwrap(), 95);
        let spec = ExifSpec {
            orientation: Some(u16::from(o)),
            make: Some("fringegauge fixture".into()),
            ..ExifSpec::default()
        };
        let jpeg = insert_after_soi(&jpeg, &exif_app1(&spec));
        std::fs::write(dir.join(format!("spot_o{o}.jpg")), jpeg).unwrap();
    }
}

// ---------------------------------------------------------------- formats

#[test]
fn png_16_bit_round_trip_keeps_every_code() {
    let img = ImageBuffer::<Rgb<u16>, _>::from_fn(17, 9, |x, y| {
        Rgb([
            (x * 3851) as u16,
            (y * 7000 + 1) as u16,
            if x == 5 { 64225 } else { 64224 },
        ])
    });
    let bytes = encode(&DynamicImage::ImageRgb16(img.clone()), ImageFormat::Png);
    let photo = decode(&bytes, "sixteen.png", &Limits::default()).unwrap();
    assert_eq!((photo.bit_depth(), photo.channels()), (16, 3));
    for (x, y, px) in img.enumerate_pixels() {
        for (c, channel) in [Channel::R, Channel::G, Channel::B].into_iter().enumerate() {
            let expect = srgb_to_linear(f64::from(px.0[c]) / 65535.0) as f32;
            assert_eq!(photo.plane(channel).get(x as usize, y as usize), expect);
        }
        // Blue 64225 is the first clipped 16-bit code; 64224 is not.
        assert_eq!(photo.clipped(2, x as usize, y as usize), x == 5);
    }
}

#[test]
fn tiff_16_bit_and_grey_round_trips() {
    let rgb = ImageBuffer::<Rgb<u16>, _>::from_fn(8, 6, |x, y| {
        Rgb([(x * 8000) as u16, (y * 9000) as u16, 123])
    });
    let bytes = encode(&DynamicImage::ImageRgb16(rgb.clone()), ImageFormat::Tiff);
    let photo = decode(&bytes, "rgb16.tif", &Limits::default()).unwrap();
    assert_eq!(
        (
            photo.bit_depth(),
            photo.channels(),
            photo.width(),
            photo.height()
        ),
        (16, 3, 8, 6)
    );
    let g = photo.plane(Channel::G);
    assert_eq!(g.get(3, 5), srgb_to_linear(45000.0 / 65535.0) as f32);

    let grey =
        ImageBuffer::<Luma<u16>, _>::from_fn(5, 4, |x, y| Luma([(x * 10000 + y * 1000) as u16]));
    let bytes = encode(&DynamicImage::ImageLuma16(grey), ImageFormat::Tiff);
    let photo = decode(&bytes, "grey16.tif", &Limits::default()).unwrap();
    assert_eq!((photo.bit_depth(), photo.channels()), (16, 1));
    assert_eq!(
        photo.plane(Channel::R).get(4, 3),
        srgb_to_linear(43000.0 / 65535.0) as f32
    );

    let grey8 = ImageBuffer::<Luma<u8>, _>::from_fn(5, 4, |x, _| Luma([x as u8 * 60]));
    let bytes = encode(&DynamicImage::ImageLuma8(grey8), ImageFormat::Tiff);
    let photo = decode(&bytes, "grey8.tif", &Limits::default()).unwrap();
    assert_eq!((photo.bit_depth(), photo.channels()), (8, 1));
    assert!(!photo.clipped(0, 4, 0) && photo.plane(Channel::Luma).get(4, 0) > 0.8);
}

#[test]
fn grey_jpeg_and_png_with_alpha() {
    let grey = image::GrayImage::from_fn(32, 16, |x, _| Luma([(x * 8) as u8]));
    let jpeg = encode(&DynamicImage::ImageLuma8(grey), ImageFormat::Jpeg);
    let photo = decode(&jpeg, "grey.jpg", &Limits::default()).unwrap();
    assert_eq!((photo.channels(), photo.bit_depth()), (1, 8));
    let p = photo.plane(Channel::Luma);
    assert!(p.get(31, 8) > p.get(0, 8));

    let rgba =
        ImageBuffer::<Rgba<u8>, _>::from_fn(4, 3, |x, y| Rgba([x as u8 * 50, y as u8 * 80, 9, 17]));
    let png = encode(&DynamicImage::ImageRgba8(rgba), ImageFormat::Png);
    let photo = decode(&png, "alpha.png", &Limits::default()).unwrap();
    assert_eq!(photo.channels(), 3, "alpha is dropped");
    assert_eq!(
        photo.plane(Channel::G).get(2, 2),
        srgb_to_linear(160.0 / 255.0) as f32
    );
    assert_eq!(codes(&photo).get_pixel(3, 1).0, [150, 80, 9]);
}

#[test]
fn load_records_path_hash_and_exif() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("shot.jpg");
    let spec = ExifSpec {
        orientation: Some(1),
        model: Some("Bench Cam".into()),
        iso: Some(100),
        ..ExifSpec::default()
    };
    let bytes = insert_after_soi(&encode_jpeg(&test_picture(48, 32), 90), &exif_app1(&spec));
    std::fs::write(&path, &bytes).unwrap();
    let photo = load(&path, &Limits::default()).unwrap();
    assert_eq!(photo.info().path, path.display().to_string());
    assert_eq!(photo.info().sha256, sha256_hex(&bytes));
    assert_eq!(photo.info().exif.model.as_deref(), Some("Bench Cam"));
    assert_eq!(photo.info().exif.iso, Some(100));
    // The record shape: field names as in the design's `photo{...}`.
    let json = serde_json::to_value(photo.info()).unwrap();
    for key in ["path", "sha256", "width", "height", "orientation", "exif"] {
        assert!(json.get(key).is_some(), "{key}");
    }
    let back: PhotoInfo = serde_json::from_value(json).unwrap();
    assert_eq!(&back, photo.info());
}

#[test]
fn malformed_exif_does_not_fail_the_load() {
    // IFD0 claims 200 entries but the segment ends after the count.
    let mut app1 = vec![0xFF, 0xE1, 0, 18];
    app1.extend_from_slice(b"Exif\0\0MM\0*\0\0\0\x08\0\xC8");
    let jpeg = insert_after_soi(&encode_jpeg(&test_picture(32, 16), 90), &app1);
    let photo = decode(&jpeg, "badexif.jpg", &Limits::default()).unwrap();
    assert_eq!(photo.info.orientation, 1);
    assert_eq!(photo.info.exif, ExifInfo::default());
    assert_eq!((photo.width(), photo.height()), (32, 16));
}

// ---------------------------------------------------------------- hashes

#[test]
fn sha256_matches_fips_180_2_examples() {
    // FIPS 180-2, Appendix B.1 ("abc") and B.2 (the 448-bit two-block message).
    assert_eq!(
        sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    assert_eq!(
        sha256_hex(b"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"
    );
}

// ---------------------------------------------------------------- bad input

fn write_temp(name: &str, bytes: &[u8]) -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join(name);
    std::fs::write(&path, bytes).unwrap();
    (dir, path)
}

#[test]
fn missing_file_is_not_found() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("nowhere.jpg");
    let err = load(&path, &Limits::default()).err().unwrap();
    assert!(matches!(err, PhotoError::NotFound { .. }), "{err:?}");
    let message = err.to_string();
    assert!(
        message.contains("nowhere.jpg") && message.contains("check the path"),
        "{message}"
    );
}

#[test]
fn a_folder_is_unreadable() {
    let dir = tempfile::tempdir().unwrap();
    let err = load(dir.path(), &Limits::default()).err().unwrap();
    assert!(matches!(err, PhotoError::Unreadable { .. }), "{err:?}");
    assert!(err.to_string().contains("folder"));
}

#[test]
fn empty_file_is_empty() {
    let (_dir, path) = write_temp("empty.jpg", b"");
    let err = load(&path, &Limits::default()).err().unwrap();
    assert!(matches!(err, PhotoError::Empty { .. }), "{err:?}");
    assert!(err.to_string().contains("empty.jpg"));
}

#[test]
fn truncated_jpeg_is_a_clean_error() {
    let jpeg = encode_jpeg(&test_picture(96, 64), 90);
    let half = &jpeg[..jpeg.len() / 2];
    // The decoder alone (image 0.25.9 with zune-jpeg 0.5, lenient mode) accepts this cut
    // file and returns a full 96×64 image with the lost part filled in; the structure
    // check must refuse it.
    let err = decode(half, "cut.jpg", &Limits::default()).err().unwrap();
    match &err {
        PhotoError::Corrupt { detail, .. } => {
            assert!(detail.contains("end-of-image marker"), "{detail}");
        }
        other => panic!("expected Corrupt, got {other:?}"),
    }
    assert!(err.to_string().contains("cut.jpg"));
    // Cut inside the headers too.
    let err = decode(&jpeg[..40], "head.jpg", &Limits::default())
        .err()
        .unwrap();
    assert!(matches!(err, PhotoError::Corrupt { .. }), "{err:?}");
    // A whole file with bytes after EOI still loads.
    let mut padded = jpeg.clone();
    padded.extend_from_slice(&[0; 16]);
    assert!(decode(&padded, "padded.jpg", &Limits::default()).is_ok());
}

#[test]
fn truncated_png_and_tiff_are_clean_errors() {
    let img = DynamicImage::ImageRgb8(test_picture(64, 48));
    for format in [ImageFormat::Png, ImageFormat::Tiff] {
        let bytes = encode(&img, format);
        let err = decode(&bytes[..bytes.len() / 2], "cut", &Limits::default())
            .err()
            .unwrap();
        assert!(
            matches!(err, PhotoError::Corrupt { .. }),
            "{format:?}: {err:?}"
        );
    }
}

#[test]
fn text_named_jpg_is_not_an_image() {
    let (_dir, path) = write_temp("notes.jpg", b"Measured on Tuesday: 3 orders visible.\n");
    let err = load(&path, &Limits::default()).err().unwrap();
    match &err {
        PhotoError::NotAnImage { seen, .. } => {
            assert!(seen.contains(".jpg") && seen.contains("text"), "{seen}");
        }
        other => panic!("expected NotAnImage, got {other:?}"),
    }
    assert!(err.to_string().contains("give a JPEG, PNG or TIFF"));
}

#[test]
fn huge_declared_png_is_refused_before_decoding() {
    let png = png_header_only(100_000, 100_000);
    // The hand-made header is well formed: the png decoder reads it.
    let (w, h) = image::ImageReader::with_format(std::io::Cursor::new(&png), ImageFormat::Png)
        .into_dimensions()
        .unwrap();
    assert_eq!((w, h), (100_000, 100_000));
    let err = decode(&png, "bomb.png", &Limits::default()).err().unwrap();
    match &err {
        PhotoError::TooLarge { width, height, .. } => {
            assert_eq!((*width, *height), (100_000, 100_000))
        }
        other => panic!("expected TooLarge, got {other:?}"),
    }
    assert!(err.to_string().contains("100000×100000"));
    // The byte budget alone refuses it too (10^10 px × 3 bytes > 1 GiB).
    let limits = Limits {
        max_pixels: u64::MAX,
        ..Limits::default()
    };
    let err = decode(&png, "bomb.png", &limits).err().unwrap();
    assert!(
        matches!(&err, PhotoError::TooLarge { limit, .. } if limit.contains("MiB")),
        "{err:?}"
    );
}

#[test]
fn huge_declared_jpeg_is_refused() {
    let mut jpeg = encode_jpeg(&test_picture(16, 16), 90);
    // Patch the SOF0 frame header (ITU-T T.81 B.2.2): FFC0, length, precision, then
    // height and width as 16-bit big-endian.
    let sof = jpeg.windows(2).position(|w| w == [0xFF, 0xC0]).unwrap();
    jpeg[sof + 5..sof + 9].copy_from_slice(&[0xEA, 0x60, 0xEA, 0x60]); // 60000 × 60000
    let err = decode(&jpeg, "big.jpg", &Limits::default()).err().unwrap();
    assert!(
        matches!(
            err,
            PhotoError::TooLarge {
                width: 60000,
                height: 60000,
                ..
            }
        ),
        "{err:?}"
    );
}

#[test]
fn small_limits_refuse_an_ordinary_photo() {
    let png = encode(
        &DynamicImage::ImageRgb8(test_picture(40, 30)),
        ImageFormat::Png,
    );
    let limits = Limits {
        max_pixels: 1000,
        max_decoded_bytes: 1 << 30,
    };
    let err = decode(&png, "p.png", &limits).err().unwrap();
    assert!(
        matches!(
            err,
            PhotoError::TooLarge {
                width: 40,
                height: 30,
                ..
            }
        ),
        "{err:?}"
    );
}

#[test]
fn zero_size_images_are_refused() {
    let err = decode(&png_header_only(0, 64), "zero.png", &Limits::default())
        .err()
        .unwrap();
    assert!(
        matches!(
            err,
            PhotoError::ZeroSize {
                width: 0,
                height: 64,
                ..
            }
        ),
        "{err:?}"
    );
    let empty = DynamicImage::ImageRgb8(image::RgbImage::new(0, 0));
    assert!(matches!(
        Photo::from_image(empty, "none"),
        Err(PhotoError::ZeroSize { .. })
    ));
    // A JPEG whose frame header says zero lines: refused, whichever check sees it first.
    let mut jpeg = encode_jpeg(&test_picture(16, 16), 90);
    let sof = jpeg.windows(2).position(|w| w == [0xFF, 0xC0]).unwrap();
    jpeg[sof + 5..sof + 7].copy_from_slice(&[0, 0]);
    let err = decode(&jpeg, "zero.jpg", &Limits::default()).err().unwrap();
    assert!(
        matches!(
            err,
            PhotoError::ZeroSize { .. } | PhotoError::Corrupt { .. }
        ),
        "{err:?}"
    );
}

#[test]
fn heic_and_gif_are_unsupported_with_advice() {
    let heic = b"\0\0\0\x18ftypheic\0\0\0\0mif1heic\0\0\0\0";
    let err = decode(heic, "IMG_0042.HEIC", &Limits::default())
        .err()
        .unwrap();
    assert!(matches!(err, PhotoError::Unsupported { .. }), "{err:?}");
    assert!(err.to_string().contains("convert it to JPEG, PNG or TIFF"));
    let gif = b"GIF89a\x01\0\x01\0\x80\0\0\0\0\0\xff\xff\xff!\xf9\x04\x01\0\0\0\0,\0\0\0\0\x01\0\x01\0\0\x02\x02D\x01\0;";
    let err = decode(gif, "a.gif", &Limits::default()).err().unwrap();
    assert!(matches!(err, PhotoError::Unsupported { .. }), "{err:?}");
}

#[test]
fn oversized_file_is_refused_before_reading() {
    let (_dir, path) = write_temp("big.tif", b"II*\0");
    let limits = Limits {
        max_pixels: 10,
        max_decoded_bytes: 0,
    };
    assert_eq!(limits.max_file_bytes(), 64 << 20);
    // A sparse file one byte over the limit: it costs no disk and is never read.
    let f = std::fs::File::options().write(true).open(&path).unwrap();
    f.set_len((64 << 20) + 1).unwrap();
    let err = load(&path, &limits).err().unwrap();
    assert!(matches!(err, PhotoError::FileTooLarge { .. }), "{err:?}");
}

// ---------------------------------------------------------------- speed (by hand)

/// Prints the time of `decode` against the plain `image` decode of a synthetic 12 MP JPEG.
/// Run by hand in release: `cargo test --release --lib photo::tests::time_12mp -- --ignored
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
