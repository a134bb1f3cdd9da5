//! Formats and bit depths, the record fields, EXIF in a full load, and hashes.

use super::*;

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
