use super::*;
use crate::uncertainty::Input;
use nalgebra::DMatrix;

const NM: f64 = 1e-9;

fn ms(list: &[Reflection]) -> Vec<u32> {
    list.iter().map(|r| r.m).collect()
}

fn labels(list: &[Reflection]) -> Vec<&str> {
    list.iter().map(|r| r.label.as_str()).collect()
}

/// Spacings a·/√q of the given (m, l) reflections of a cubic or hk.0 lattice, each moved by
/// `noise[i]` relative standard uncertainties of `u_rel`.
fn spacings(d: &[f64], u_rel: f64, noise: &[f64]) -> Vec<MeasuredSpacing> {
    d.iter()
        .zip(noise.iter().chain(std::iter::repeat(&0.0)))
        .map(|(&d, &z)| MeasuredSpacing {
            d_m: d * (1.0 + z * u_rel),
            u_m: d * u_rel,
        })
        .collect()
}

/// A joint set with one common relative scale input (what voltage, distance and scale do
/// to every ring alike) and one own input per ring.
fn joint(measured: &[MeasuredSpacing], common_u_rel: f64) -> JointSpacings {
    let n = measured.len();
    let mut inputs = vec![Input::normal("common scale", 1.0, common_u_rel)];
    for (i, m) in measured.iter().enumerate() {
        inputs.push(Input::normal(
            format!("ring {} radius", i + 1),
            m.d_m,
            m.u_m,
        ));
    }
    let jacobian = DMatrix::from_fn(n, n + 1, |i, k| {
        if k == 0 {
            measured[i].d_m
        } else if k == i + 1 {
            1.0
        } else {
            0.0
        }
    });
    JointSpacings {
        d_m: measured.iter().map(|m| m.d_m).collect(),
        inputs,
        jacobian,
    }
}

#[test]
fn lattice_strings_parse_with_units_and_uncertainty() {
    let l: Lattice = "fcc".parse().unwrap();
    assert_eq!((l.family, l.a_m, l.c_m), (Family::Fcc, None, None));
    let l: Lattice = "fcc:a=0.40782nm".parse().unwrap();
    assert!((l.a_m.unwrap() - 0.40782 * NM).abs() < 1e-22);
    assert_eq!(l.u_a_m, None);
    let l: Lattice = "hex:a=0.2461nm,c=0.6708nm".parse().unwrap();
    assert_eq!(l.family, Family::Hex);
    assert!((l.c_m.unwrap() - 0.6708 * NM).abs() < 1e-22);
    assert!((l.c_over_a().unwrap() - 0.6708 / 0.2461).abs() < 1e-12);
    let l: Lattice = " Diamond:a=0.54310nm±0.00002nm".parse().unwrap();
    assert_eq!(l.family, Family::Diamond);
    assert!((l.u_a_m.unwrap() - 2e-14).abs() < 1e-24);
    assert_eq!(
        "hex:a=0.2461nm,c=0.6708nm"
            .parse::<Lattice>()
            .unwrap()
            .to_string(),
        "hex:a=0.2461nm,c=0.6708nm"
    );
    let l: Lattice = "bcc:a=2.8665e-10m".parse().unwrap();
    assert!((l.a_m.unwrap() - 0.28665 * NM).abs() < 1e-22);
}

#[test]
fn bad_lattice_strings_say_what_is_wrong() {
    for (text, says) in [
        ("fcx", "unknown lattice family"),
        ("fcc:", "nothing after"),
        ("fcc:a", "NAME=VALUE"),
        ("fcc:a=-0.4nm", "> 0"),
        ("fcc:a=0.4kV", "length"),
        ("fcc:a=0.4", "has no unit"),
        ("fcc:c=0.4nm", "one constant"),
        ("fcc:b=0.4nm", "unknown constant `b`"),
        ("fcc:a=0.4nm,a=0.5nm", "given twice"),
        ("hex:c=0.67nm", "c without a"),
    ] {
        let e = text.parse::<Lattice>().unwrap_err().to_string();
        assert!(e.contains(says), "{text}: {e}");
    }
}

#[test]
fn cubic_sequences_follow_the_extinction_rules() {
    // r² ∝ h²+k²+l²: fcc 3, 4, 8, 11, 12, 16, 19, 20; bcc 2, 4, 6, 8; diamond 3, 8, 11, 16,
    // 19, 24 (REFERENCES.md, electron diffraction; the standard powder-ring sequences).
    let fcc = reflections(Family::Fcc, None, 20.0);
    assert_eq!(ms(&fcc), [3, 4, 8, 11, 12, 16, 19, 20]);
    assert_eq!(
        labels(&fcc),
        ["111", "200", "220", "311", "222", "400", "331", "420"]
    );
    let bcc = reflections(Family::Bcc, None, 8.0);
    assert_eq!(ms(&bcc), [2, 4, 6, 8]);
    assert_eq!(labels(&bcc), ["110", "200", "211", "220"]);
    let diamond = reflections(Family::Diamond, None, 24.0);
    assert_eq!(ms(&diamond), [3, 8, 11, 16, 19, 24]);
    assert_eq!(labels(&diamond), ["111", "220", "311", "400", "331", "422"]);
    // Simple cubic has no extinctions, but no integer square sum is 7; 221 and 300 coincide.
    let sc = reflections(Family::Sc, None, 9.0);
    assert_eq!(ms(&sc), [1, 2, 3, 4, 5, 6, 8, 9]);
    assert_eq!(sc.last().unwrap().label, "300/221");
    assert!(!Family::Diamond.allows(2, 2, 2) && Family::Fcc.allows(2, 2, 2));
    assert!(!Family::Fcc.allows(2, 1, 0) && Family::Bcc.allows(2, 1, 1));
}

#[test]
fn graphite_spacings_from_a() {
    // d(10.0) = a√3/2 and d(11.0) = a/2, ratio √3; a = 0.2461 nm (Trucano & Chen, Nature
    // 258:136, 1975 give a = 2.464 Å): about 0.2131 nm and 0.12305 nm.
    let a = 0.2461 * NM;
    let hk0 = reflections(Family::Hex, None, 7.0 * 4.0 / 3.0);
    assert_eq!(labels(&hk0), ["10.0", "11.0", "20.0", "21.0"]);
    let d10 = hk0[0].d_m(Family::Hex, a, None);
    let d11 = hk0[1].d_m(Family::Hex, a, None);
    assert!((d10 - 0.21313 * NM).abs() < 1e-5 * NM, "{d10}");
    assert!((d11 - 0.12305 * NM).abs() < 1e-6 * NM, "{d11}");
    assert!((d10 / d11 - 3f64.sqrt()).abs() < 1e-12);
    // With c: 00.1 and 11.1 vanish (h − k ≡ 0 mod 3, l odd), 00.2 = c/2 leads, 10.1 stays.
    let c = 0.6708 * NM;
    let hkl = reflections(Family::Hex, Some(c / a), 5.0);
    let names = labels(&hkl);
    assert_eq!(&names[..4], ["00.2", "10.0", "10.1", "10.2"]);
    assert!(!names.contains(&"00.1") && !names.contains(&"11.1"));
    assert!(names.contains(&"11.0") && names.contains(&"00.4"));
    assert!((hkl[0].d_m(Family::Hex, a, Some(c)) - c / 2.0).abs() < 1e-22);
}

#[test]
fn gold_rings_with_noise_index_as_fcc_and_refine_a() {
    // Gold, fcc, a = 0.40782 nm (REFERENCES.md, a common value): rings in the ratio
    // √3 : √4 : √8 : √11 : √12, indexed 111, 200, 220, 311, 222.
    let a = 0.40782 * NM;
    let d: Vec<f64> = [3.0f64, 4.0, 8.0, 11.0, 12.0]
        .iter()
        .map(|n| a / n.sqrt())
        .collect();
    let measured = spacings(&d, 3e-3, &[0.9, -0.7, 0.4, -1.0, 0.2]);
    let lattice: Lattice = "fcc:a=0.40782nm".parse().unwrap();
    let ix = index_rings(&measured, &lattice).unwrap();
    assert_eq!(
        labels(&ix.best.reflections),
        ["111", "200", "220", "311", "222"]
    );
    assert!(ix.best.fits() && !ix.poor_fit, "{:?}", ix.best);
    assert_eq!(ix.best.missing, 0);
    assert!(ix.warnings.is_empty(), "{:?}", ix.warnings);
    let runner = ix.runner_up.as_ref().unwrap();
    assert!(runner.missing > 0 || !runner.fits(), "{runner:?}");
    // The ratio fit alone already implies a.
    assert!((ix.best.scale_m / a - 1.0).abs() < 3e-3);

    let set = joint(&measured, 2e-3);
    let refined = refine_constant(&set, &ix, &lattice).unwrap();
    assert!(
        (refined.a.value - a).abs() <= 2.0 * refined.a.u,
        "{} ± {}",
        refined.a.value,
        refined.a.u
    );
    // The common scale cannot average out over rings.
    assert!(
        refined.a.u >= 2e-3 * a && refined.a.u < 3e-3 * a,
        "{}",
        refined.a.u
    );
    assert_eq!(refined.dof, 4);
    assert_eq!(refined.comparison.len(), 1);
    assert!(refined.comparison[0].z.abs() < 2.0);
    // The budget accounts for the whole uncertainty (independent inputs).
    let rss: f64 = refined
        .a
        .budget
        .iter()
        .map(|l| l.contribution.powi(2))
        .sum::<f64>()
        .sqrt();
    assert!((rss / refined.a.u - 1.0).abs() < 1e-9);
    let common = &refined.a.budget[0];
    assert_eq!(common.input, "common scale");
    assert!((common.contribution / (2e-3 * refined.a.value) - 1.0).abs() < 1e-6);
}

#[test]
fn the_given_constant_is_compared_never_copied() {
    let a = 0.40782 * NM;
    let d: Vec<f64> = [3.0f64, 4.0, 8.0].iter().map(|n| a / n.sqrt()).collect();
    // The film measures 1 % larger than the prior says.
    let measured = spacings(&d.iter().map(|d| d * 1.01).collect::<Vec<_>>(), 1e-3, &[]);
    let prior: Lattice = "fcc:a=0.40782nm".parse().unwrap();
    let ix = index_rings(&measured, &prior).unwrap();
    let refined = refine_constant(&joint(&measured, 1e-3), &ix, &prior).unwrap();
    assert!((refined.a.value / (1.01 * a) - 1.0).abs() < 1e-9);
    let cmp = &refined.comparison[0];
    assert!((cmp.difference_m / (0.01 * a) - 1.0).abs() < 1e-6);
    assert!(cmp.z > 5.0);
}

#[test]
fn bcc_and_diamond_sequences_are_indexed() {
    // REFERENCES.md: bcc 2, 4, 6, 8; diamond 3, 8, 11, 16, 19, 24.
    let a = 0.28665 * NM;
    let d: Vec<f64> = [2.0f64, 4.0, 6.0, 8.0]
        .iter()
        .map(|n| a / n.sqrt())
        .collect();
    let ix = index_rings(&spacings(&d, 1e-3, &[]), &Lattice::family(Family::Bcc)).unwrap();
    assert_eq!(labels(&ix.best.reflections), ["110", "200", "211", "220"]);
    assert!(ix.best.fits());
    let a = 0.54310 * NM;
    let d: Vec<f64> = [3.0f64, 8.0, 11.0, 16.0, 19.0, 24.0]
        .iter()
        .map(|n| a / n.sqrt())
        .collect();
    let ix = index_rings(
        &spacings(&d, 2e-3, &[0.5, -0.3, 0.8, -0.6, 0.1, 0.4]),
        &Lattice::family(Family::Diamond),
    )
    .unwrap();
    assert_eq!(
        labels(&ix.best.reflections),
        ["111", "220", "311", "400", "331", "422"]
    );
    assert!((ix.best.scale_m / a - 1.0).abs() < 2e-3);
}

#[test]
fn rings_given_in_any_order_keep_their_order() {
    let a = 0.40782 * NM;
    let d: Vec<f64> = [8.0f64, 3.0, 12.0, 4.0]
        .iter()
        .map(|n| a / n.sqrt())
        .collect();
    let ix = index_rings(&spacings(&d, 1e-3, &[]), &Lattice::family(Family::Fcc)).unwrap();
    assert_eq!(labels(&ix.best.reflections), ["220", "111", "222", "200"]);
}

#[test]
fn carbon_film_rings_index_as_hk0_and_say_so() {
    let a = 0.2461 * NM;
    let d: Vec<f64> = [1.0f64, 3.0, 4.0, 7.0]
        .iter()
        .map(|m| a / (4.0 / 3.0 * m).sqrt())
        .collect();
    let measured = spacings(&d, 2e-3, &[0.5, -0.8, 0.3, 0.6]);
    let lattice = Lattice::family(Family::Hex);
    let ix = index_rings(&measured, &lattice).unwrap();
    assert_eq!(
        labels(&ix.best.reflections),
        ["10.0", "11.0", "20.0", "21.0"]
    );
    assert!(ix.assumptions.iter().any(|s| s.contains("hk.0")));
    let refined = refine_constant(&joint(&measured, 1e-3), &ix, &lattice).unwrap();
    assert!(refined.c.is_none());
    assert!((refined.a.value - a).abs() <= 2.0 * refined.a.u);
}

#[test]
fn graphite_with_c_refines_a_and_c() {
    // Graphite a = 2.464 Å, c = 6.711 Å (Trucano & Chen, Nature 258:136, 1975).
    let (a, c) = (0.2464 * NM, 0.6711 * NM);
    let lattice: Lattice = "hex:a=0.2461nm,c=0.6708nm".parse().unwrap();
    let table = lattice.reflections(6.0);
    let pick = ["00.2", "10.0", "10.1", "10.2", "00.4", "11.0"];
    let refl: Vec<&Reflection> = pick
        .iter()
        .map(|p| table.iter().find(|r| r.label == *p).unwrap())
        .collect();
    let d: Vec<f64> = refl
        .iter()
        .map(|r| r.d_m(Family::Hex, a, Some(c)))
        .collect();
    let measured = spacings(&d, 5e-4, &[]);
    let ix = index_rings(&measured, &lattice).unwrap();
    assert_eq!(labels(&ix.best.reflections), pick);
    let refined = refine_constant(&joint(&measured, 1e-3), &ix, &lattice).unwrap();
    let rc = refined.c.as_ref().unwrap();
    assert!(
        (refined.a.value / a - 1.0).abs() < 1e-9,
        "{}",
        refined.a.value
    );
    assert!((rc.value / c - 1.0).abs() < 1e-9, "{}", rc.value);
    // A common scale moves a and c together.
    assert!(refined.correlation_ac.unwrap() > 0.5);
    assert_eq!(refined.comparison.len(), 2);
}

#[test]
fn rings_that_fit_no_lattice_raise_the_flag() {
    let d: Vec<f64> = [0.300, 0.271, 0.2, 0.181, 0.137]
        .iter()
        .map(|d| d * NM)
        .collect();
    let ix = index_rings(&spacings(&d, 1e-3, &[]), &Lattice::family(Family::Bcc)).unwrap();
    assert!(ix.poor_fit);
    assert!(ix.warnings.iter().any(|w| w.contains("no indexing")));
}

#[test]
fn too_few_or_unweighable_rings_are_refused() {
    let one = [MeasuredSpacing {
        d_m: 0.2 * NM,
        u_m: 1e-3 * NM,
    }];
    let e = index_rings(&one, &Lattice::family(Family::Fcc)).unwrap_err();
    assert!(e.to_string().contains("at least two rings"), "{e}");
    let zero_u = [
        one[0],
        MeasuredSpacing {
            d_m: 0.1 * NM,
            u_m: 0.0,
        },
    ];
    assert!(index_rings(&zero_u, &Lattice::family(Family::Fcc)).is_err());
    let negative = [
        one[0],
        MeasuredSpacing {
            d_m: -0.1 * NM,
            u_m: 1e-12,
        },
    ];
    assert!(index_rings(&negative, &Lattice::family(Family::Fcc)).is_err());
}
