//! Electron-diffraction photos: the wavelength, the rings' geometry, the photo against its
//! truth, and bad input.

use super::{apply, decode};
use crate::simulate::*;

fn small_camera(yaw_deg: f64) -> CameraSpec {
    CameraSpec {
        width_px: 800,
        height_px: 600,
        focal_px: 750.0,
        yaw_rad: yaw_deg.to_radians(),
        framing: Framing::Auto {
            max_order: 0,
            margin: 0.06,
        },
        ..CameraSpec::default()
    }
}

fn render(setup: &ElectronSetup, cam: &CameraSpec, effects: &Effects) -> SimPhoto<ElectronTruth> {
    render_electron(setup, &TubeScene::default(), cam, effects, 5).unwrap()
}

/// Mean linear green in 0.05 mm bins of distance from the axis on a flat screen, through the
/// inverse of the truth's homography.
fn radial_profile(photo: &SimPhoto<ElectronTruth>, max_mm: f64) -> Vec<f64> {
    let h = photo.truth.homography;
    let m = nalgebra::Matrix3::from_fn(|r, c| h[r][c])
        .try_inverse()
        .unwrap();
    let hi = [0, 1, 2].map(|r| [0, 1, 2].map(|c| m[(r, c)]));
    let bins = (max_mm / 0.05) as usize;
    let (mut sum, mut n) = (vec![0.0; bins], vec![0usize; bins]);
    for (x, y, p) in photo.image.enumerate_pixels() {
        let q = apply(&hi, [x as f64, y as f64]);
        let b = (q[0].hypot(q[1]) / 0.05) as usize;
        if b < bins {
            sum[b] += decode(p.0[1]);
            n[b] += 1;
        }
    }
    sum.iter()
        .zip(&n)
        .map(|(s, &k)| s / k.max(1) as f64)
        .collect()
}

#[test]
fn wavelength_matches_the_computed_reference_values() {
    // REFERENCES.md, "Electron diffraction": computed with CODATA 2018, 100 kV 3.7014 pm,
    // 200 kV 2.5079 pm (also 5 kV 17.302 pm, 10 kV 12.205 pm, 300 kV 1.9687 pm).
    for (kv, pm) in [
        (100.0, 3.7014),
        (200.0, 2.5079),
        (5.0, 17.302),
        (10.0, 12.205),
        (300.0, 1.9687),
    ] {
        let got = electron_wavelength_m(kv * 1e3) * 1e12;
        // Half a unit in the last quoted digit.
        let tol = if pm < 10.0 { 5e-5 } else { 5e-4 };
        assert!((got - pm).abs() <= tol, "{kv} kV: {got} pm vs {pm} pm");
    }
    // The non-relativistic shortcut is too long by about 0.049 % per kV (REFERENCES.md,
    // common practice): at 5 kV about 0.24 %.
    let v: f64 = 5000.0;
    let classic = (1.50412e-18 / v).sqrt();
    let excess = classic / electron_wavelength_m(v) - 1.0;
    assert!((excess - 0.0024).abs() < 0.0002, "{excess}");
}

#[test]
fn fcc_rings_follow_the_cubic_sequence_in_the_small_angle_limit() {
    // REFERENCES.md, cubic ring sequences: fcc r² ∝ 3, 4, 8, 11, 12, 16, 19, 20.
    let setup = ElectronSetup {
        voltage_v: 200e3,
        ..ElectronSetup::default()
    };
    let photo = render(&setup, &small_camera(0.0), &Effects::clean());
    let rings = &photo.truth.rings;
    let labels: Vec<&str> = rings.iter().take(8).map(|r| r.label.as_str()).collect();
    assert_eq!(
        labels,
        ["111", "200", "220", "311", "222", "400", "331", "420"]
    );
    for (r, n) in rings
        .iter()
        .zip([3.0, 4.0, 8.0, 11.0, 12.0, 16.0, 19.0, 20.0])
    {
        let ratio = r.radius_mm / rings[0].radius_mm;
        // tan 2θ against 2 sin θ differs by about (2θ)²/3 relative: under 3e-4 here.
        assert!(
            (ratio / (n / 3.0f64).sqrt() - 1.0).abs() < 5e-4,
            "{}: {ratio}",
            r.label
        );
    }
    // Multiplicities of the cubic forms {111}, {200}, {220}, {311}: 8, 6, 12, 24.
    let m: Vec<u32> = rings.iter().take(4).map(|r| r.multiplicity).collect();
    assert_eq!(m, [8, 6, 12, 24]);
    // Flat screen: r = L tan 2θ, 2d sin θ = λ.
    for r in rings {
        let two_theta = 2.0 * (photo.truth.wavelength_m / (2.0 * r.d_m)).asin();
        assert!((r.two_theta_rad - two_theta).abs() < 1e-12);
        assert!((r.radius_mm - 131.0 * two_theta.tan()).abs() < 1e-9);
    }
}

#[test]
fn bcc_and_diamond_extinctions_come_from_the_basis() {
    // REFERENCES.md: bcc r² ∝ 2, 4, 6, 8; diamond 3, 8, 11, 16, 19, 24.
    for (family, seq) in [
        (LatticeFamily::Bcc, vec![2.0, 4.0, 6.0, 8.0, 10.0]),
        (
            LatticeFamily::Diamond,
            vec![3.0, 8.0, 11.0, 16.0, 19.0, 24.0],
        ),
    ] {
        let setup = ElectronSetup {
            voltage_v: 200e3,
            lattice: Lattice {
                family,
                a_m: 0.5431e-9,
                c_m: None,
                atomic_number: 14,
            },
            ..ElectronSetup::default()
        };
        let photo = render(&setup, &small_camera(0.0), &Effects::clean());
        let rings = &photo.truth.rings;
        let d0 = rings[0].d_m;
        for (r, n) in rings.iter().zip(&seq) {
            let n_got = seq[0] * (d0 / r.d_m).powi(2);
            assert!((n_got - n).abs() < 1e-9, "{family:?} {}: {n_got}", r.label);
        }
    }
}

#[test]
fn turbostratic_carbon_gives_hk0_rings_in_the_ratio_root_three() {
    // REFERENCES.md: d(10.0) = a√3/2, d(11.0) = a/2, ratio √3.
    let setup = ElectronSetup {
        lattice: Lattice::carbon_film(),
        ..ElectronSetup::default()
    };
    let photo = render(&setup, &small_camera(0.0), &Effects::clean());
    let rings = &photo.truth.rings;
    assert_eq!(rings[0].label, "10.0");
    assert_eq!(rings[1].label, "11.0");
    assert!(rings.iter().all(|r| r.hkl[2] == 0));
    let a = 0.2461e-9;
    assert!((rings[0].d_m - a * 3f64.sqrt() / 2.0).abs() < 1e-18);
    assert!((rings[1].d_m - a / 2.0).abs() < 1e-18);
    assert!((rings[0].d_m / rings[1].d_m - 3f64.sqrt()).abs() < 1e-12);
    // With c, graphite's stacking adds 00.2 (d = c/2) and forbids 00.1.
    let graphite = ElectronSetup {
        lattice: Lattice {
            c_m: Some(0.6708e-9),
            ..Lattice::carbon_film()
        },
        ..ElectronSetup::default()
    };
    let photo = render(&graphite, &small_camera(0.0), &Effects::clean());
    let first = &photo.truth.rings[0];
    assert_eq!(first.label, "00.2");
    assert!((first.d_m - 0.3354e-9).abs() < 1e-15);
    assert!(photo.truth.rings.iter().all(|r| r.label != "00.1"));
}

#[test]
fn a_bulb_puts_rings_at_r_sin_2theta_and_the_ellipses_hold_the_ring_points() {
    let setup = ElectronSetup {
        screen: TubeScreen::sphere(0.065),
        ..ElectronSetup::default()
    };
    let photo = render(&setup, &small_camera(8.0), &Effects::clean());
    let t = &photo.truth;
    assert!(t.rings.len() >= 4);
    let h = t.homography;
    let c = t.camera.centre_mm;
    for r in &t.rings {
        let two_theta = 2.0 * (t.wavelength_m / (2.0 * r.d_m)).asin();
        assert!(
            (r.radius_mm - 65.0 * two_theta.sin()).abs() < 1e-9,
            "{}",
            r.label
        );
        assert!((r.depth_mm - 65.0 * (1.0 - two_theta.cos())).abs() < 1e-9);
        // Points of the ring in 3-D, carried along the camera's rays to the front plane and
        // through its homography, lie on the truth's ellipse.
        let e = r.ellipse.unwrap();
        let (s, co) = e.angle_rad.sin_cos();
        for k in 0..12 {
            let phi = k as f64 * std::f64::consts::FRAC_PI_6;
            let p = [r.radius_mm * phi.cos(), r.radius_mm * phi.sin(), r.depth_mm];
            let t_ray = -c[2] / (p[2] - c[2]);
            let q = [c[0] + t_ray * (p[0] - c[0]), c[1] + t_ray * (p[1] - c[1])];
            let px = apply(&h, q);
            let (dx, dy) = (px[0] - e.centre_px[0], px[1] - e.centre_px[1]);
            let (u, v) = (co * dx + s * dy, -s * dx + co * dy);
            let level = (u / e.semi_axes_px[0]).powi(2) + (v / e.semi_axes_px[1]).powi(2);
            assert!((level - 1.0).abs() < 1e-9, "{}: {level}", r.label);
        }
        // The turned camera sees each ring wider than tall.
        assert!(r.radius_px[0] < r.radius_px[1] || (r.radius_px[0] - r.radius_px[1]).abs() < 1e-6);
    }
}

#[test]
fn the_photo_shows_the_rings_where_the_truth_puts_them() {
    let setup = ElectronSetup {
        ring_contrast: 0.3,
        ..ElectronSetup::default()
    };
    let cam = CameraSpec {
        focal_px: 1500.0,
        ..small_camera(0.0)
    };
    let effects = Effects {
        blur_px: 0.7,
        ..Effects::clean()
    };
    let photo = render(&setup, &cam, &effects);
    let profile = radial_profile(&photo, 40.0);
    // Over a running mean 1.5 mm wide, each of the two inner rings peaks within a bin of
    // its truth radius.
    let half = 15usize;
    let detrended: Vec<f64> = (0..profile.len())
        .map(|i| {
            let (a, b) = (i.saturating_sub(half), (i + half + 1).min(profile.len()));
            profile[i] / (profile[a..b].iter().sum::<f64>() / (b - a) as f64) - 1.0
        })
        .collect();
    for r in photo.truth.rings.iter().take(2) {
        let centre = (r.radius_mm / 0.05) as usize;
        let best = (centre - 8..=centre + 8)
            .max_by(|&a, &b| detrended[a].total_cmp(&detrended[b]))
            .unwrap();
        assert!(
            (best as f64 + 0.5 - r.radius_mm / 0.05).abs() <= 1.5,
            "{}: peak at {} mm, truth {} mm",
            r.label,
            (best as f64 + 0.5) * 0.05,
            r.radius_mm
        );
        assert!(detrended[best] > 0.03, "{}: {}", r.label, detrended[best]);
    }
}

#[test]
fn the_centre_is_saturated_and_the_rings_are_faint() {
    let photo = render(
        &ElectronSetup::default(),
        &small_camera(5.0),
        &Effects::default(),
    );
    let t = &photo.truth;
    let c = t.centre_px.unwrap();
    let p = photo
        .image
        .get_pixel(c[0].round() as u32, c[1].round() as u32);
    assert_eq!(p.0, [255, 255, 255], "centre {p:?}");
    assert!(t.rings.iter().all(|r| r.peak_over_glow <= 0.08 + 1e-12));
    assert!(t.rings.iter().filter(|r| r.peak_over_glow > 0.02).count() >= 2);
    assert_eq!(t.rings[0].relative_intensity, 1.0);
    assert!(t.ghost_px.is_some() && t.ruler.is_some());
    // Away from the spot the disc glows green, and falls off outwards.
    let at = |mm: f64| {
        let q = apply(&t.homography, [mm, 0.0]);
        let p = photo
            .image
            .get_pixel(q[0].round() as u32, q[1].round() as u32)
            .0;
        (decode(p[0]), decode(p[1]))
    };
    let (r8, g8) = at(8.0);
    let (_, g40) = at(40.0);
    assert!(g8 > 2.0 * r8 && g8 > 3.0 * g40, "{r8} {g8} {g40}");
}

#[test]
fn beam_off_shows_the_tube_with_no_rings_or_spot() {
    let setup = ElectronSetup {
        beam_on: false,
        ..ElectronSetup::default()
    };
    let photo = render(&setup, &small_camera(5.0), &Effects::default());
    assert!(photo.truth.rings.is_empty() && photo.truth.ghost_px.is_none());
    assert!(photo.image.pixels().all(|p| p.0.iter().all(|&c| c < 200)));
    let c = photo.truth.centre_px.unwrap();
    let g = decode(photo.image.get_pixel(c[0] as u32, c[1] as u32).0[1]);
    assert!(g < 0.1, "{g}");
}

#[test]
fn bad_tube_inputs_are_refused() {
    let bad = |setup: ElectronSetup| {
        render_electron(
            &setup,
            &TubeScene::default(),
            &small_camera(0.0),
            &Effects::clean(),
            1,
        )
    };
    for setup in [
        ElectronSetup {
            voltage_v: f64::NAN,
            ..ElectronSetup::default()
        },
        ElectronSetup {
            voltage_v: -4500.0,
            ..ElectronSetup::default()
        },
        ElectronSetup {
            lattice: Lattice {
                a_m: 0.0,
                ..Lattice::gold()
            },
            ..ElectronSetup::default()
        },
        ElectronSetup {
            lattice: Lattice {
                c_m: Some(0.5e-9),
                ..Lattice::gold()
            },
            ..ElectronSetup::default()
        },
        ElectronSetup {
            screen: TubeScreen::flat(-0.1),
            ..ElectronSetup::default()
        },
        ElectronSetup {
            grain_size_m: 0.0,
            ..ElectronSetup::default()
        },
    ] {
        assert!(
            matches!(bad(setup), Err(SimError::BadInput { .. })),
            "{setup:?}"
        );
    }
    // 150 V: λ = 0.1 nm, so gold's first ring (2θ ≈ 25°) misses a small screen far away.
    let miss = ElectronSetup {
        voltage_v: 150.0,
        screen: TubeScreen::Flat {
            distance_m: 0.5,
            radius_m: 0.05,
        },
        ..ElectronSetup::default()
    };
    assert!(matches!(bad(miss), Err(SimError::NoOrderReachesScreen(_))));
}
