//! The film: its crystal family, lattice constants and basis. The structure factor of the
//! basis decides which reflections have light, so the extinction rules of fcc, bcc, diamond
//! and graphite follow from the atoms' positions rather than from a table.

use super::SimError;
use serde::{Deserialize, Serialize};

/// The film's crystal family.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LatticeFamily {
    /// Simple cubic, one atom per cell.
    Sc,
    /// Face-centred cubic (gold, aluminium).
    Fcc,
    /// Body-centred cubic (iron, tungsten).
    Bcc,
    /// Diamond cubic (silicon, diamond).
    Diamond,
    /// Hexagonal: with `c`, graphite's AB-stacked basis (P6₃/mmc, four atoms); without it,
    /// a turbostratic carbon film whose layers are uncorrelated, giving hk.0 rings only.
    Hex,
}

impl LatticeFamily {
    /// The name used on the command line.
    pub fn name(self) -> &'static str {
        match self {
            LatticeFamily::Sc => "sc",
            LatticeFamily::Fcc => "fcc",
            LatticeFamily::Bcc => "bcc",
            LatticeFamily::Diamond => "diamond",
            LatticeFamily::Hex => "hex",
        }
    }

    /// A typical element of the family, for the atomic scattering amplitude: gold (fcc),
    /// iron (bcc), carbon (diamond, hex), polonium (sc, the one simple-cubic element).
    pub fn typical_atomic_number(self) -> u32 {
        match self {
            LatticeFamily::Fcc => 79,
            LatticeFamily::Bcc => 26,
            LatticeFamily::Diamond | LatticeFamily::Hex => 6,
            LatticeFamily::Sc => 84,
        }
    }

    /// Atom positions in the conventional cell, fractional coordinates.
    fn basis(self, stacked: bool) -> Vec<[f64; 3]> {
        let fcc = vec![
            [0.0, 0.0, 0.0],
            [0.5, 0.5, 0.0],
            [0.5, 0.0, 0.5],
            [0.0, 0.5, 0.5],
        ];
        match self {
            LatticeFamily::Sc => vec![[0.0; 3]],
            LatticeFamily::Bcc => vec![[0.0; 3], [0.5; 3]],
            LatticeFamily::Fcc => fcc,
            LatticeFamily::Diamond => fcc
                .iter()
                .flat_map(|p| [*p, [p[0] + 0.25, p[1] + 0.25, p[2] + 0.25]])
                .collect(),
            LatticeFamily::Hex if stacked => vec![
                [0.0, 0.0, 0.25],
                [0.0, 0.0, 0.75],
                [1.0 / 3.0, 2.0 / 3.0, 0.25],
                [2.0 / 3.0, 1.0 / 3.0, 0.75],
            ],
            // One graphene layer.
            LatticeFamily::Hex => vec![[0.0; 3], [1.0 / 3.0, 2.0 / 3.0, 0.0]],
        }
    }
}

/// The film's lattice.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Lattice {
    /// Crystal family.
    pub family: LatticeFamily,
    /// Lattice constant a, m.
    pub a_m: f64,
    /// Lattice constant c (hexagonal only), m; `None` for a turbostratic film.
    pub c_m: Option<f64>,
    /// Atomic number, for the atomic scattering amplitude's screening radius.
    pub atomic_number: u32,
}

impl Lattice {
    /// Gold, a = 0.40782 nm (REFERENCES.md: "4.0782 Å is also common").
    pub fn gold() -> Self {
        Lattice {
            family: LatticeFamily::Fcc,
            a_m: 0.40782e-9,
            c_m: None,
            atomic_number: 79,
        }
    }

    /// A turbostratic carbon film, a = 0.2461 nm: hk.0 rings only.
    pub fn carbon_film() -> Self {
        Lattice {
            family: LatticeFamily::Hex,
            a_m: 0.2461e-9,
            c_m: None,
            atomic_number: 6,
        }
    }

    /// Interplanar spacing of (h k l), m: cubic 1/d² = (h²+k²+l²)/a²; hexagonal
    /// 1/d² = 4/3·(h²+hk+k²)/a² + l²/c².
    pub(crate) fn d_spacing(&self, [h, k, l]: [i32; 3]) -> f64 {
        let (h, k, l) = (h as f64, k as f64, l as f64);
        let inv_d2 = match self.family {
            LatticeFamily::Hex => {
                let c_term = self.c_m.map_or(0.0, |c| l * l / (c * c));
                4.0 / 3.0 * (h * h + h * k + k * k) / (self.a_m * self.a_m) + c_term
            }
            _ => (h * h + k * k + l * l) / (self.a_m * self.a_m),
        };
        1.0 / inv_d2.sqrt()
    }

    /// |S|² of (h k l) for the family's basis of identical atoms.
    pub(crate) fn structure_factor_sq(&self, hkl: [i32; 3]) -> f64 {
        let (re, im) =
            self.family
                .basis(self.c_m.is_some())
                .iter()
                .fold((0.0, 0.0), |(re, im), p| {
                    let phase = 2.0
                        * std::f64::consts::PI
                        * (hkl[0] as f64 * p[0] + hkl[1] as f64 * p[1] + hkl[2] as f64 * p[2]);
                    (re + phase.cos(), im + phase.sin())
                });
        re * re + im * im
    }

    /// The ring label of a representative (h k l): "111" for cubic, "10.0" for hexagonal
    /// (Miller–Bravais hk.l with the redundant i left out); indices above 9 are separated by
    /// commas, "10,0,0".
    pub(crate) fn label(&self, [h, k, l]: [i32; 3]) -> String {
        let big = [h, k, l].iter().any(|v| v.abs() > 9);
        let s = |v: i32| v.to_string();
        match (self.family, big) {
            (LatticeFamily::Hex, false) => format!("{h}{k}.{l}"),
            (LatticeFamily::Hex, true) => format!("{h},{k}.{l}"),
            (_, false) => format!("{}{}{}", s(h), s(k), s(l)),
            (_, true) => format!("{h},{k},{l}"),
        }
    }

    /// Checks the lattice.
    pub fn validate(&self) -> Result<(), SimError> {
        let ok = |v: f64| v.is_finite() && (0.05e-9..=5e-9).contains(&v);
        if !ok(self.a_m) {
            return Err(SimError::BadInput {
                name: "lattice a",
                value: self.a_m,
                expected: "a lattice constant from 0.05 to 5 nm",
            });
        }
        if let Some(c) = self.c_m {
            if self.family != LatticeFamily::Hex {
                return Err(SimError::BadInput {
                    name: "lattice c",
                    value: c,
                    expected: "no c for a cubic lattice (c is for hex only)",
                });
            }
            if !ok(c) {
                return Err(SimError::BadInput {
                    name: "lattice c",
                    value: c,
                    expected: "a lattice constant from 0.05 to 5 nm",
                });
            }
        }
        if !(1..=103).contains(&self.atomic_number) {
            return Err(SimError::BadInput {
                name: "atomic number",
                value: self.atomic_number.into(),
                expected: "an atomic number from 1 to 103",
            });
        }
        Ok(())
    }
}
