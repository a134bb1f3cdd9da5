//! Pinhole rings and particle halos against outside values, and whole photos of them.

use super::*;
use crate::simulate::particles;
use crate::simulate::pinhole::{self, Ring};

/// A beam a hundred times the hole: in effect a flat wave, as in the tabulated pattern.
fn flat(diameter_m: f64, wavelength_m: f64) -> PinholeSetup {
    PinholeSetup {
        diameter_m,
        wavelength_m,
        distance_m: 2.0,
        beam_diameter_m: 100.0 * diameter_m,
    }
}

fn rings(setup: &PinholeSetup) -> (Vec<Ring>, Vec<Ring>) {
    pinhole::far_field(setup).unwrap().rings()
}

#[test]
fn first_dark_ring_lies_at_sin_theta_1_2197_lambda_over_d() {
    // First zero of J1, 3.8317 (Abramowitz & Stegun, table 9.5), over π: sin θ = 1.2197 λ/D.
    for (d, lambda) in [(0.2e-3, 650e-9), (0.5e-3, 532e-9), (40e-6, 405e-9)] {
        let (dark, _) = rings(&flat(d, lambda));
        let expected = 3.8317 / std::f64::consts::PI * lambda / d;
        let got = dark[0].rho;
        assert!(
            (got - expected).abs() < 3e-3 * expected,
            "D {d}: {got} vs {expected}"
        );
    }
}

#[test]
fn ring_ratios_follow_the_zeros_of_j1_and_j2() {
    // Dark rings at the zeros of J1, 3.8317, 7.0156, 10.1735; bright rings at the maxima of
    // [2J1(x)/x]², the zeros of J2, 5.1356, 8.4172, 11.6198 (Abramowitz & Stegun, table 9.5).
    let setup = flat(0.2e-3, 650e-9);
    let (dark, bright) = rings(&setup);
    let x = |rho: f64| std::f64::consts::PI * setup.diameter_m * rho / setup.wavelength_m;
    let zeros = [3.8317, 7.0156, 10.1735];
    for k in 1..3 {
        let got = dark[k].rho / dark[0].rho;
        let expected = zeros[k] / zeros[0];
        assert!(
            (got - expected).abs() < 3e-3 * expected,
            "dark ring {}: ratio {got} vs {expected}",
            k + 1
        );
    }
    for (ring, expected) in bright.iter().zip([5.1356, 8.4172, 11.6198]) {
        let got = x(ring.rho);
        assert!(
            (got - expected).abs() < 3e-3 * expected,
            "bright ring {}: x = {got} vs {expected}",
            ring.index
        );
    }
    // First bright ring at 1.75 % of the centre: [2J1(x)/x]² at x = 5.1356 with
    // J1(5.1356) ≈ −0.3397 (interpolated in Abramowitz & Stegun, table 9.1).
    assert!((bright[0].relative - 0.0175).abs() < 0.0005, "{bright:?}");
    assert!(dark.iter().all(|r| r.relative < 1e-6));
}

#[test]
fn a_gaussian_beam_on_the_pinhole_pushes_the_rings_out_a_little() {
    // Apodizing the hole (a beam only 7.5 times wider) widens the pattern: the first dark
    // ring moves outward, by a fraction of a percent.
    let tight = PinholeSetup::default();
    let (dark_g, _) = rings(&tight);
    let (dark_f, _) = rings(&flat(tight.diameter_m, tight.wavelength_m));
    let shift = dark_g[0].rho / dark_f[0].rho - 1.0;
    assert!(shift > 0.0 && shift < 0.01, "{shift}");
}

fn small_pinhole_camera(yaw_deg: f64, pitch_deg: f64) -> CameraSpec {
    CameraSpec {
        width_px: 400,
        height_px: 300,
        focal_px: 400.0,
        yaw_rad: yaw_deg.to_radians(),
        pitch_rad: pitch_deg.to_radians(),
        roll_rad: 0.0,
        framing: Framing::Auto {
            max_order: 4,
            margin: 0.08,
        },
        supersample: 2,
    }
}

fn pixel(img: &image::RgbImage, p: [f64; 2]) -> [u8; 3] {
    img.get_pixel(p[0].round() as u32, p[1].round() as u32).0
}

#[test]
fn pinhole_photo_has_a_saturated_centre_and_dark_rings_where_the_truth_says() {
    let effects = Effects {
        overexposure: 3.0,
        ..Effects::default()
    };
    let photo = render_pinhole(
        &PinholeSetup::default(),
        &Scene::default(),
        &small_pinhole_camera(6.0, 0.0),
        &effects,
        5,
    )
    .unwrap();
    let t = &photo.truth;
    assert_eq!(t.kind, "pinhole");
    assert!(t.centre_in_frame);
    let c = t.centre_px.unwrap();
    assert_eq!(pixel(&photo.image, c)[0], 255, "centre not saturated");
    assert!(t.rings.centre_level > 50.0, "{}", t.rings.centre_level);
    // Along +X, the second dark ring is darker than the bright rings either side of it
    // (the means over a few pixels around each ring's point, so speckle averages out).
    let lum = luminance(&photo.image);
    let w = photo.image.width() as usize;
    let around = |p: [f64; 2]| {
        let (x, y) = (p[0].round() as usize, p[1].round() as usize);
        let mut s = 0.0;
        for dy in 0..5 {
            s += lum[(y + dy - 2) * w + x];
        }
        s / 5.0
    };
    let at = |r: &RingPoint| around(r.points_px[0].unwrap());
    let (d2, b1, b2) = (&t.rings.dark[1], &t.rings.bright[0], &t.rings.bright[1]);
    assert!(
        at(d2) < at(b1) && at(d2) < at(b2),
        "{} {} {}",
        at(d2),
        at(b1),
        at(b2)
    );
    assert!(d2.in_frame && d2.radius_px.unwrap() > 10.0);
    // The screen radius is where the rays at the ring's sin θ land: L tan θ.
    let theta = d2.sin_theta.asin();
    assert!((d2.radius_mm - 2500.0 * theta.tan()).abs() < 1e-6);
}

#[test]
fn a_tilted_camera_still_sees_the_rings() {
    let photo = render_pinhole(
        &PinholeSetup::default(),
        &Scene {
            graph_paper: Some(GraphPaper::default()),
            ..Scene::default()
        },
        &small_pinhole_camera(25.0, -12.0),
        &Effects {
            bloom: 1.0,
            ..Effects::default()
        },
        2,
    )
    .unwrap();
    let t = &photo.truth;
    assert!(t.centre_in_frame);
    for r in &t.rings.dark[..4] {
        assert!(r.in_frame, "dark ring {} out of frame", r.index);
    }
    // Perspective: the ring's image is not a circle centred on the centre's image.
    let d = &t.rings.dark[3];
    let c = t.centre_px.unwrap();
    let dist = |k: usize| {
        let p = d.points_px[k].unwrap();
        (p[0] - c[0]).hypot(p[1] - c[1])
    };
    assert!((dist(0) - dist(2)).abs() > 1.0, "{} {}", dist(0), dist(2));
}

#[test]
fn drawn_diameters_follow_the_asked_distribution() {
    // Sampling error of a mean, σ/√n, and of a standard deviation, about σ/√(2(n − 1))
    // (common practice for a normal sample); allow four of each.
    for (distribution, spread, seed) in [
        (SizeDistribution::Normal, 0.1, 1),
        (SizeDistribution::Normal, 0.3, 2),
        (SizeDistribution::Lognormal, 0.2, 3),
    ] {
        let setup = ParticleSetup {
            spread,
            distribution,
            count: 2000,
            beam_diameter_m: 1.5e-3,
            samples: 4096,
            ..ParticleSetup::default()
        };
        setup.validate().unwrap();
        let p = particles::draw(&setup, seed);
        let (mean, sd) = p.mean_sd();
        let n = p.diameters_m.len() as f64;
        let sigma = spread * setup.mean_diameter_m;
        assert!(
            (mean - setup.mean_diameter_m).abs() < 4.0 * sigma / n.sqrt(),
            "{distribution:?} {spread}: mean {mean}"
        );
        assert!(
            (sd - sigma).abs() < 4.0 * sigma / (2.0 * (n - 1.0)).sqrt(),
            "{distribution:?} {spread}: sd {sd} vs {sigma}"
        );
    }
}

fn small_particles() -> ParticleSetup {
    ParticleSetup {
        samples: 512,
        beam_diameter_m: 0.15e-3,
        count: 40,
        ..ParticleSetup::default()
    }
}

#[test]
fn one_disc_through_the_2d_transform_has_its_first_dark_ring_at_1_2197_lambda_over_d() {
    // The particle path on its own: one 8 µm disc, no spread. Its halo's azimuthal mean
    // has its first minimum at 3.8317/π · λ/D (Abramowitz & Stegun, table 9.5); the coarser
    // 2-D sampling is allowed 1.5 %.
    let setup = ParticleSetup {
        count: 1,
        spread: 0.0,
        ..small_particles()
    };
    let p = particles::draw(&setup, 4);
    let ff = particles::far_field(&setup, &p).unwrap();
    let scale = setup.wavelength_m / setup.mean_diameter_m;
    let (best, _) = (80..=160)
        .map(|k| {
            let rho = k as f64 * 0.01 * scale;
            (rho, ff.azimuthal_mean(rho, 0.6 * ff.dalpha))
        })
        .fold((0.0, f64::INFINITY), |a, b| if b.1 < a.1 { b } else { a });
    let expected = 3.8317 / std::f64::consts::PI * scale;
    assert!(
        (best - expected).abs() < 0.015 * expected,
        "{best} vs {expected}"
    );
}

#[test]
fn particle_photo_truth_and_saturated_beam() {
    let setup = small_particles();
    let photo = render_particles(
        &setup,
        &Scene::default(),
        &small_pinhole_camera(6.0, 0.0),
        &Effects::default(),
        8,
    )
    .unwrap();
    let t = &photo.truth;
    assert_eq!(t.kind, "particles");
    assert_eq!(t.particles.count, 40);
    assert_eq!(t.particles.diameters_m.len(), 40);
    let n = t.particles.count as f64;
    let mean = t.particles.diameters_m.iter().sum::<f64>() / n;
    assert!((mean - t.particles.mean_diameter_m).abs() < 1e-15);
    assert_eq!(t.distribution.sd_m, 0.1 * 8e-6);
    assert!(t.halo.blocked_fraction > 0.0 && t.halo.blocked_fraction < 0.4);
    let c = t.centre_px.unwrap();
    assert!(t.centre_in_frame);
    assert_eq!(pixel(&photo.image, c)[0], 255, "beam spot not saturated");
    // Laser off: the same scene without the halo, so the halo shows as added light near
    // the reference radius.
    let off = crate::simulate::ring_photo::render_particles(
        &setup,
        &Scene::default(),
        &small_pinhole_camera(6.0, 0.0),
        &Effects::clean(),
        8,
        false,
    )
    .unwrap();
    let on = crate::simulate::ring_photo::render_particles(
        &setup,
        &Scene::default(),
        &small_pinhole_camera(6.0, 0.0),
        &Effects::clean(),
        8,
        true,
    )
    .unwrap();
    let (lon, loff) = (luminance(&on.image), luminance(&off.image));
    let added: f64 = lon.iter().zip(&loff).map(|(a, b)| a - b).sum();
    assert!(added > 0.0);
}

#[test]
fn bad_inputs_are_errors_not_panics() {
    let scene = Scene::default();
    let cam = small_pinhole_camera(0.0, 0.0);
    let fx = Effects::default();
    let unresolved = ParticleSetup {
        mean_diameter_m: 1e-6,
        ..ParticleSetup::default()
    };
    assert!(matches!(
        render_particles(&unresolved, &scene, &cam, &fx, 1),
        Err(SimError::BadInput {
            name: "mean_diameter_m",
            ..
        })
    ));
    let nan = PinholeSetup {
        distance_m: f64::NAN,
        ..PinholeSetup::default()
    };
    assert!(matches!(
        render_pinhole(&nan, &scene, &cam, &fx, 1),
        Err(SimError::BadInput {
            name: "distance_m",
            ..
        })
    ));
}
