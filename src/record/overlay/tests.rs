use super::paint::{Pen, glyph};
use super::*;

fn grey(w: u32, h: u32) -> RgbImage {
    RgbImage::from_pixel(w, h, Rgb([90, 90, 90]))
}

fn changed(a: &RgbImage, b: &RgbImage, x: u32, y: u32) -> bool {
    a.get_pixel(x, y) != b.get_pixel(x, y)
}

#[test]
fn spot_is_drawn_where_the_photo_pixel_lands() {
    let preview = grey(400, 300);
    let marks = [Mark::Spot {
        center: [200.0, 100.0],
        radius: 20.0,
        label: String::new(),
    }];
    let out = render_overlay(&preview, 0.5, &marks);
    // Photo (200, 100) lands at preview (99.75, 49.75); the ring has radius 10.
    let (cx, cy) = (99.75, 49.75);
    let mut on_ring = 0;
    let mut elsewhere = 0;
    for y in 0..300 {
        for x in 0..400 {
            if !changed(&preview, &out, x, y) {
                continue;
            }
            let d = (x as f64 - cx).hypot(y as f64 - cy);
            if (7.5..=12.5).contains(&d) {
                on_ring += 1;
            } else {
                elsewhere += 1;
            }
        }
    }
    assert!(on_ring > 50, "{on_ring}");
    assert_eq!(elsewhere, 0);
    assert!(!changed(&preview, &out, 100, 50), "the ring is hollow");
}

#[test]
fn labels_are_drawn_glyph_by_glyph() {
    let preview = grey(400, 300);
    let out = render_overlay(&preview, 1.0, &[Mark::Caption("AB".into())]);
    let pen = Pen::for_image(&preview);
    let lit: usize = out.pixels().filter(|p| **p == PLAIN).count();
    let bits: u32 = [glyph('A'), glyph('B')]
        .iter()
        .flatten()
        .map(|b| b.count_ones())
        .sum();
    assert_eq!(lit, (bits * pen.glyph * pen.glyph) as usize);
    // The band behind the caption is dark, below it the photo is untouched.
    let band = (pen.text_height() + 4 * pen.glyph as i32) as u32;
    assert!(out.get_pixel(300, band / 2)[0] < 50);
    assert!(!changed(&preview, &out, 300, band + 1));
    assert_ne!(glyph('µ'), glyph('?'));
    assert_ne!(glyph('λ'), glyph('?'));
    assert_eq!(glyph('€'), glyph('?'));
}

#[test]
fn scale_bar_has_the_right_length() {
    let preview = RgbImage::new(400, 300);
    // 10 mm at 0.1 mm/px is 100 photo px, 50 preview px at a factor of 0.5.
    let marks = [Mark::ScaleBar {
        mm_per_px: 0.1,
        length_mm: 10.0,
    }];
    let out = render_overlay(&preview, 0.5, &marks);
    // The bar is drawn with a pen of radius r + 1 around its ends 12 and 62.
    let expected = 50 + 1 + 2 * (Pen::for_image(&preview).radius + 1);
    let longest = (150..300)
        .map(|y| {
            let mut run = 0;
            let mut best = 0;
            for x in 0..400 {
                if *out.get_pixel(x, y) == PLAIN {
                    run += 1;
                    best = best.max(run);
                } else {
                    run = 0;
                }
            }
            best
        })
        .max()
        .unwrap_or(0);
    assert!(
        (longest - expected).abs() <= 1,
        "{longest} px, expected {expected}"
    );
}

#[test]
fn lines_stretches_and_ellipses_land_in_place() {
    let preview = grey(300, 200);
    let marks = [
        Mark::Line {
            from: [0.0, 100.0],
            to: [599.0, 100.0],
        },
        Mark::Ellipse {
            center: [300.0, 300.0],
            a: 100.0,
            b: 40.0,
            angle: std::f64::consts::FRAC_PI_2,
            label: String::new(),
        },
        Mark::Stretch {
            from: [40.0, 360.0],
            to: [240.0, 360.0],
            label: "50 mm".into(),
        },
    ];
    let out = render_overlay(&preview, 0.5, &marks);
    // The axis at photo y = 100 is preview row 49.75.
    assert_eq!(*out.get_pixel(250, 50), AXIS);
    // The ellipse's long axis points down (angle 90°): its ends are 50 px above and
    // below the centre (149.75, 149.75), its sides 20 px left and right.
    assert_eq!(*out.get_pixel(150, 100), RING);
    assert_eq!(*out.get_pixel(130, 150), RING);
    assert!(!changed(&preview, &out, 100, 140), "not 50 px to the side");
    // The stretch runs along preview row 179.75 from x 19.75 to 119.75.
    assert_eq!(*out.get_pixel(70, 180), STRETCH);
    assert_eq!(*out.get_pixel(20, 176), STRETCH, "end tick");
}

#[test]
fn bad_marks_are_left_out_and_far_marks_cost_nothing() {
    let preview = grey(200, 100);
    let marks = [
        Mark::Spot {
            center: [f64::NAN, 1.0],
            radius: 3.0,
            label: "x".into(),
        },
        Mark::Line {
            from: [-1e12, -1e12],
            to: [1e12, 1e12],
        },
        Mark::Ellipse {
            center: [1e9, 1e9],
            a: 1e15,
            b: 1e15,
            angle: 0.0,
            label: "far".into(),
        },
        Mark::ScaleBar {
            mm_per_px: 0.0,
            length_mm: 10.0,
        },
        Mark::Spot {
            center: [50.0, 50.0],
            radius: 1e300,
            label: "huge".into(),
        },
    ];
    let out = render_overlay(&preview, 1.0, &marks);
    assert_eq!(out.dimensions(), (200, 100));
    // The diagonal line crosses the image.
    assert!(changed(&preview, &out, 50, 50));
    // A zero or NaN factor leaves the preview as it was.
    assert_eq!(render_overlay(&preview, f64::NAN, &marks), preview);
    assert_eq!(render_overlay(&RgbImage::new(0, 0), 1.0, &marks).len(), 0);
}

#[test]
fn png_round_trips() {
    let mut img = grey(5, 4);
    img.put_pixel(2, 1, SPOT);
    let png = encode_png(&img).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");
    let back = image::load_from_memory(&png).unwrap().to_rgb8();
    assert_eq!(back, img);
}
