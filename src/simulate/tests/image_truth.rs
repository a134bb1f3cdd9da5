//! Truth against pixels: spot centroids, ruler ticks, grid crossings.

use super::*;
use crate::simulate::*;

#[test]
fn spot_centroids_in_the_image_match_truth_px() {
    for (yaw, roll) in [(0.0, 0.0), (10.0, 4.0)] {
        // The 8-bit steps of a faint spot scatter its centroid, so make the orders bright:
        // a sinusoidal phase grating near J0 = J1 (φ ≈ 1.43 rad) and dim room light, with
        // the zero order's peak still below saturation.
        let scene = Scene {
            ruler: None,
            room_light: RoomLight {
                level: 0.2,
                ..RoomLight::default()
            },
            ..Scene::default()
        };
        let setup = GratingSetup {
            profile: GratingProfile::SinusoidalPhase {
                amplitude_rad: 1.43,
            },
            ..green_600()
        };
        let fx = Effects {
            overexposure: 0.75,
            ..Effects::clean()
        };
        let cam = CameraSpec {
            width_px: 480,
            height_px: 360,
            focal_px: 480.0,
            ..small_camera(yaw, roll)
        };
        let on = render(&setup, &scene, &cam, &fx, 11, true).unwrap();
        let off = render(&setup, &scene, &cam, &fx, 11, false).unwrap();
        let (a, b) = (luminance(&on.image), luminance(&off.image));
        let w = on.image.width() as i64;
        let h = on.image.height() as i64;
        let mut checked = 0;
        for o in on.truth.orders.iter().filter(|o| o.in_frame) {
            let [tx, ty] = o.px.unwrap();
            let half = 14;
            let (mut sx, mut sy, mut s) = (0.0, 0.0, 0.0);
            for y in (ty.round() as i64 - half)..=(ty.round() as i64 + half) {
                for x in (tx.round() as i64 - half)..=(tx.round() as i64 + half) {
                    if x < 0 || y < 0 || x >= w || y >= h {
                        continue;
                    }
                    let i = (y * w + x) as usize;
                    let v = a[i] - b[i];
                    sx += v * x as f64;
                    sy += v * y as f64;
                    s += v;
                }
            }
            assert!(s > 0.0);
            let (cx, cy) = (sx / s, sy / s);
            let err = (cx - tx).hypot(cy - ty);
            assert!(
                err < 0.03,
                "yaw {yaw}° roll {roll}°, order {}: image ({cx:.3}, {cy:.3}) vs truth ({tx:.3}, {ty:.3})",
                o.order
            );
            checked += 1;
        }
        assert_eq!(checked, 3, "orders −1, 0, 1 should be in frame");
    }
}

#[test]
fn ruler_ticks_are_the_pixel_integrals_of_ticks_where_the_homography_says() {
    // A yawed camera keeps the ticks vertical in the image, so each row crosses a tick as
    // the image interval [x(X − ½w), x(X + ½w)] of its ends under the truth homography. The
    // discrete centroid of that interval's pixel integrals is computed exactly here and
    // compared with the rendered linear image (before 8-bit steps), row by row.
    let lin = photo::render_linear(
        &green_600(),
        &Scene::default(),
        &ruler_close_up(12.0, 0.0, 0.0),
        &Effects::clean(),
        5,
        false,
    )
    .unwrap();
    let t = &lin.truth;
    let r = t.ruler.unwrap();
    let w = lin.width as usize;
    let green = |x: usize, y: usize| lin.rgb[(y * w + x) * 3 + 1] as f64;
    let half_width_mm = 0.075; // the renderer's 0.15 mm ticks
    let tick = r.tick_m * 1e3;
    let y_mm = r.edge_y_mm + 1.5;
    let row = apply(&t.homography, [0.0, y_mm])[1].round() as usize;
    let (mut worst, mut count) = (0.0f64, 0);
    for k in 0..=((r.end_mm[0] - r.start_mm[0]) / tick).round() as usize {
        let x_mm = r.start_mm[0] + k as f64 * tick;
        let centre = apply(&t.homography, [x_mm, y_mm]);
        if centre[0] < 6.0 || centre[0] > w as f64 - 7.0 || (centre[1] - row as f64).abs() > 20.0 {
            continue;
        }
        let xa = apply(&t.homography, [x_mm - half_width_mm, y_mm])[0];
        let xb = apply(&t.homography, [x_mm + half_width_mm, y_mm])[0];
        let c = centre[0].round() as usize;
        // Vignetting tilts the background: take it as the line through c ± 5.
        let (bl, br) = (green(c - 5, row), green(c + 5, row));
        let (mut m, mut mx, mut e, mut ex) = (0.0, 0.0, 0.0, 0.0);
        for x in c - 3..=c + 3 {
            let bg = bl + (br - bl) * (x + 5 - c) as f64 / 10.0;
            let d = bg - green(x, row);
            m += d;
            mx += d * x as f64;
            let cover = ((x as f64 + 0.5).min(xb) - (x as f64 - 0.5).max(xa)).max(0.0);
            e += cover;
            ex += cover * x as f64;
        }
        let err = (mx / m - ex / e).abs();
        worst = worst.max(err);
        count += 1;
    }
    assert!(count >= 40, "only {count} ticks");
    assert!(
        worst < 0.002,
        "worst tick centroid differs by {worst:.4} px from the expected"
    );
}

#[test]
fn ruler_ticks_in_a_tilted_8bit_photo_sit_on_the_homography() {
    let fx = Effects {
        blur_px: 1.0,
        ..Effects::clean()
    };
    let photo = render(
        &green_600(),
        &Scene::default(),
        &ruler_close_up(10.0, 3.0, -7.0),
        &fx,
        5,
        false,
    )
    .unwrap();
    let lum = luminance(&photo.image);
    let (w, h) = (photo.image.width() as f64, photo.image.height() as f64);
    let t = &photo.truth;
    let r = t.ruler.unwrap();
    let tick = r.tick_m * 1e3;
    let n = ((r.end_mm[0] - r.start_mm[0]) / tick).round() as usize;
    let inside = |p: [f64; 2]| p[0] > 3.0 && p[1] > 3.0 && p[0] < w - 4.0 && p[1] < h - 4.0;
    // Signed offsets along the ruler, against position along it.
    let mut offsets: Vec<(f64, f64)> = Vec::new();
    for k in 0..=n {
        let x = r.start_mm[0] + k as f64 * tick;
        let mut offset = 0.0;
        let mut lines = 0;
        for j in 0..=20 {
            let y = r.edge_y_mm + 0.5 + 0.1 * j as f64;
            let a = apply(&t.homography, [x - 0.45 * tick, y]);
            let b = apply(&t.homography, [x + 0.45 * tick, y]);
            if !(inside(a) && inside(b)) {
                continue;
            }
            let c = dark_centroid(&lum, w as usize, a, b);
            let truth_px = apply(&t.homography, [x, y]);
            let dir = [b[0] - a[0], b[1] - a[1]];
            let len = dir[0].hypot(dir[1]);
            offset += ((c[0] - truth_px[0]) * dir[0] + (c[1] - truth_px[1]) * dir[1]) / len;
            lines += 1;
        }
        if lines == 21 {
            let p = apply(&t.homography, [x, r.edge_y_mm + 1.5]);
            offsets.push((p[0], offset / 21.0));
        }
    }
    assert!(offsets.len() >= 40, "only {} ticks", offsets.len());
    // A tick under two pixels wide is located with a "pixel-locking" error that depends on
    // its phase against the pixel grid (the blur here is applied to the sampled image and
    // cannot remove it): up to about 0.07 px for a 1.4 px tick. It averages out over ticks,
    // and must show neither an offset (a wrong pixel convention) nor a trend (a wrong scale
    // or perspective).
    let n = offsets.len() as f64;
    let mean = offsets.iter().map(|o| o.1).sum::<f64>() / n;
    let mx = offsets.iter().map(|o| o.0).sum::<f64>() / n;
    let slope = offsets
        .iter()
        .map(|o| (o.0 - mx) * (o.1 - mean))
        .sum::<f64>()
        / offsets.iter().map(|o| (o.0 - mx).powi(2)).sum::<f64>();
    let worst = offsets.iter().map(|o| o.1.abs()).fold(0.0, f64::max);
    // Pixel locking scatters a tick by about 0.04 px rms, so over ~50 ticks the mean has a
    // σ of about 0.006 px and the trend across the frame about 0.02 px; a half-pixel
    // convention slip or a 0.05 % scale error would stand far outside these bounds.
    assert!(mean.abs() < 0.025, "mean offset {mean:.4} px");
    assert!(
        slope.abs() * w < 0.1,
        "offset trend {:.4} px over the frame",
        slope * w
    );
    assert!(worst < 0.1, "worst tick {worst:.3} px");
    // The truth scale agrees with the tick spacing in the image near the zero order.
    let y = r.start_mm[1];
    let mm_per_px = r.mm_per_px_near_zero.unwrap();
    let p0 = apply(&t.homography, [-1.0, y]);
    let p1 = apply(&t.homography, [1.0, y]);
    let local = 2.0 / (p1[0] - p0[0]).hypot(p1[1] - p0[1]);
    assert!((mm_per_px - local).abs() < 1e-3 * local);
}

#[test]
fn graph_paper_truth_crossings_are_on_ink() {
    let scene = Scene {
        graph_paper: Some(GraphPaper::default()),
        ..short_ruler_scene()
    };
    let cam = CameraSpec {
        width_px: 480,
        height_px: 360,
        focal_px: 480.0,
        ..small_camera(4.0, 0.0)
    };
    let photo = render(&green_600(), &scene, &cam, &Effects::clean(), 3, false).unwrap();
    let g = photo.truth.grid.unwrap();
    let d = (g.points_mm[1][0] - g.points_mm[0][0]).hypot(g.points_mm[1][1] - g.points_mm[0][1]);
    assert!((d - g.length_mm).abs() < 1e-9 && g.length_mm >= 20.0);
    let lum = luminance(&photo.image);
    let w = photo.image.width() as usize;
    for (mm, px) in g.points_mm.iter().zip(g.points_px) {
        let on = bilinear(&lum, w, px);
        let off = bilinear(
            &lum,
            w,
            apply(&photo.truth.homography, [mm[0] + 0.5, mm[1] + 0.5]),
        );
        assert!(on < 0.8 * off, "crossing {on} vs paper {off}");
    }
}
