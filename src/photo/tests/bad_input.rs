//! Every kind of bad input gets a typed error that names the file.

use super::*;

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
