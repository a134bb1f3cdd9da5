use super::*;

fn line_plot<'a>(
    x: &'a [f64],
    measured: &'a [f64],
    used: &'a [bool],
    model: &'a [f64],
) -> ProfilePlot<'a> {
    ProfilePlot {
        title: "test profile".into(),
        x_label: "position on screen (mm)".into(),
        y_label: "intensity (a.u.)".into(),
        x,
        measured,
        used,
        model,
        markers: Vec::new(),
    }
}

/// The plot pixel at panel value (x, y).
fn pixel(img: &RgbImage, p: &Panel, x: f64, y: f64) -> Rgb<u8> {
    let [cx, cy] = p.at(x, y);
    *img.get_pixel(
        (p.x0 + cx.round() as i32) as u32,
        (p.y0 + cy.round() as i32) as u32,
    )
}

fn count(img: &RgbImage, colour: Rgb<u8>) -> usize {
    img.pixels().filter(|p| **p == colour).count()
}

#[test]
fn png_has_the_requested_size() {
    let x: Vec<f64> = (0..50).map(|i| i as f64).collect();
    let y: Vec<f64> = x.iter().map(|v| (v * 0.3).sin()).collect();
    let used = vec![true; 50];
    for (w, h) in [(640, 400), (200, 150), (1201, 777)] {
        let img = render_profile(&line_plot(&x, &y, &used, &y), w, h).unwrap();
        let png = encode_png(&img).unwrap();
        let back = image::load_from_memory(&png).unwrap();
        assert_eq!((back.width(), back.height()), (w, h));
    }
}

#[test]
fn model_and_residual_land_where_the_values_map() {
    // A known straight model and data a constant 0.1 above it: the model line must pass
    // through the mapped sample positions, the residual dots sit on the +0.1 row.
    let x: Vec<f64> = (0..21).map(|i| i as f64 * 0.5).collect();
    let model: Vec<f64> = x.iter().map(|v| 1.0 + 0.2 * v).collect();
    let measured: Vec<f64> = model.iter().map(|m| m + 0.1).collect();
    let used = vec![true; x.len()];
    let plot = line_plot(&x, &measured, &used, &model);
    let (w, h) = (600, 400);
    let img = render_profile(&plot, w, h).unwrap();
    let plan = Plan::new(&Data::new(&plot).unwrap(), w, h).unwrap();
    for i in [0, 3, 6, 9] {
        assert_eq!(
            pixel(&img, &plan.top, x[i], model[i]),
            MODEL,
            "model at x = {}",
            x[i]
        );
        assert_eq!(
            pixel(&img, &plan.top, x[i], measured[i]),
            DATA,
            "data at x = {}",
            x[i]
        );
        assert_eq!(
            pixel(&img, &plan.bottom, x[i], 0.1),
            DATA,
            "residual at {}",
            x[i]
        );
        // Well above the line there is only paper or grid, never the model's colour.
        assert_ne!(pixel(&img, &plan.top, x[i], model[i] + 0.3), MODEL);
    }
    // The data's range sits inside the top panel with a margin, the residual's likewise.
    let [_, top_px] = plan.top.at(0.0, measured[20]);
    assert!(top_px > 3.0, "{top_px}");
    let [_, r_px] = plan.bottom.at(0.0, 0.1);
    assert!(
        r_px > 1.0 && r_px < plan.bottom.height() as f64 / 2.0,
        "{r_px}"
    );
}

#[test]
fn left_out_samples_are_muted_and_markers_drawn() {
    let x: Vec<f64> = (0..11).map(|i| i as f64 - 5.0).collect();
    let model: Vec<f64> = x.iter().map(|v| 4.0 - v * v * 0.1).collect();
    let measured: Vec<f64> = model.iter().map(|m| m + 1.0).collect();
    let used: Vec<bool> = (0..11).map(|i| i != 5).collect();
    let mut plot = line_plot(&x, &measured, &used, &model);
    plot.markers = vec![
        (2.0, "-1".into()),
        (99.0, "off".into()),
        (f64::NAN, "?".into()),
    ];
    let (w, h) = (500, 360);
    let img = render_profile(&plot, w, h).unwrap();
    let plan = Plan::new(&Data::new(&plot).unwrap(), w, h).unwrap();
    // Sparse data: dots; the left-out one (the peak) grey, a used neighbour blue.
    assert_eq!(pixel(&img, &plan.top, x[5], measured[5]), LEFT_OUT);
    assert_eq!(pixel(&img, &plan.top, x[4], measured[4]), DATA);
    // The in-range marker is a dashed column in both panels; the others are left out.
    let col = (plan.top.x0 + plan.top.sx.px(2.0).round() as i32) as u32;
    let lit = |p: &Panel| {
        (p.y0..p.y0 + p.height() as i32)
            .filter(|y| *img.get_pixel(col, *y as u32) == MARKER)
            .count()
    };
    let (top, bottom) = (lit(&plan.top), lit(&plan.bottom));
    assert!(top > plan.top.height() as usize / 3, "{top}");
    assert!(bottom > plan.bottom.height() as usize / 3, "{bottom}");
    assert!(top < plan.top.height() as usize, "dashed, not solid");
    // Only the "-1" label's glyphs (and the dashes) are in the marker colour.
    let dashes = top + bottom;
    let label_bits: u32 = ['-', '1']
        .iter()
        .map(|c| {
            crate::record::overlay::paint::glyph(*c)
                .iter()
                .map(|b| b.count_ones())
                .sum::<u32>()
        })
        .sum();
    assert_eq!(
        count(&img, MARKER),
        dashes + (label_bits * plan.g * plan.g) as usize
    );
}

#[test]
fn empty_nan_flat_and_single_inputs_give_sane_images() {
    let none: [f64; 0] = [];
    let img = render_profile(&line_plot(&none, &none, &[], &none), 400, 300).unwrap();
    assert_eq!(img.dimensions(), (400, 300));
    assert_eq!(count(&img, MODEL) + count(&img, DATA), 0);
    assert!(count(&img, INK) > 0, "the note and the labels are written");

    let nan = [f64::NAN; 4];
    let img = render_profile(
        &line_plot(&[0.0, 1.0, 2.0, 3.0], &nan, &[true; 4], &nan),
        400,
        300,
    )
    .unwrap();
    assert_eq!(count(&img, MODEL) + count(&img, DATA), 0);

    // NaN in the middle: skipped, the rest drawn.
    let x = [0.0, 1.0, f64::NAN, 3.0, 4.0];
    let m = [1.0, 2.0, 3.0, f64::NAN, 5.0];
    let img = render_profile(&line_plot(&x, &m, &[true; 5], &m), 400, 300).unwrap();
    assert!(count(&img, MODEL) > 10);

    // Flat data: the model runs across the middle of the top panel, the residual is zero.
    let x: Vec<f64> = (0..30).map(|i| i as f64).collect();
    let flat = vec![3.0; 30];
    let plot = line_plot(&x, &flat, &[true; 30], &flat);
    let img = render_profile(&plot, 400, 300).unwrap();
    let plan = Plan::new(&Data::new(&plot).unwrap(), 400, 300).unwrap();
    let mid = plan.top.y0 + plan.top.height() as i32 / 2;
    assert_eq!(*img.get_pixel(plan.top.x0 as u32 + 20, mid as u32), MODEL);

    // A single point: a dot in the middle of both axes.
    let plot = line_plot(&[2.0], &[7.0], &[true], &[7.0]);
    let img = render_profile(&plot, 400, 300).unwrap();
    let plan = Plan::new(&Data::new(&plot).unwrap(), 400, 300).unwrap();
    assert_eq!(pixel(&img, &plan.top, 2.0, 7.0), MODEL);
    let [cx, _] = plan.top.at(2.0, 7.0);
    assert!(
        (cx - (plan.top.width() - 1) as f64 / 2.0).abs() < 1.0,
        "{cx}"
    );
}

#[test]
fn unequal_lengths_and_tiny_sizes_are_errors() {
    let x = [0.0, 1.0, 2.0];
    let err = render_profile(&line_plot(&x, &[1.0, 2.0], &[true; 3], &x), 400, 300).unwrap_err();
    assert!(matches!(err, RecordError::Plot(_)), "{err}");
    assert!(
        err.to_string().contains("3 positions but 2 measured"),
        "{err}"
    );
    let err = render_profile(&line_plot(&x, &x, &[true; 2], &x), 400, 300).unwrap_err();
    assert!(err.to_string().contains("used"), "{err}");
    let err = render_profile(&line_plot(&x, &x, &[true; 3], &x), 120, 300).unwrap_err();
    assert!(err.to_string().contains("at least 200×150"), "{err}");
    assert!(render_profile(&line_plot(&x, &x, &[true; 3], &x), 100_000, 100_000).is_err());
}

#[test]
fn plots_attach_below_or_beside_and_write_atomically() {
    let x: Vec<f64> = (0..40).map(|i| i as f64).collect();
    let plot = line_plot(&x, &x, &[true; 40], &x);
    let wide = RgbImage::from_pixel(800, 500, Rgb([1, 2, 3]));
    assert_eq!(Side::auto(&wide), Side::Below);
    let both = attach_plot(&wide, &plot, Side::Below).unwrap();
    assert_eq!(both.dimensions(), (800, 500 + 360));
    assert_eq!(*both.get_pixel(799, 499), Rgb([1, 2, 3]));
    assert_eq!(*both.get_pixel(0, 500), PAPER);

    let tall = RgbImage::from_pixel(300, 600, Rgb([1, 2, 3]));
    assert_eq!(Side::auto(&tall), Side::Right);
    let both = attach_plot(&tall, &plot, Side::Right).unwrap();
    assert_eq!(both.dimensions(), (300 + 800, 600));
    assert_eq!(*both.get_pixel(300, 0), PAPER);

    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("profile.png");
    write_plot(&path, &plot, 300, 200, false).unwrap();
    let first = std::fs::read(&path).unwrap();
    assert_eq!(image::load_from_memory(&first).unwrap().width(), 300);
    let err = write_plot(&path, &plot, 400, 200, false).unwrap_err();
    assert!(matches!(err, RecordError::Exists(_)), "{err}");
    assert_eq!(
        std::fs::read(&path).unwrap(),
        first,
        "untouched without force"
    );
    write_plot(&path, &plot, 400, 200, true).unwrap();
    assert_ne!(std::fs::read(&path).unwrap(), first);
}
