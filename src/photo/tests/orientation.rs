//! EXIF orientation end to end, in memory and with the committed fixtures.

use super::*;

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
