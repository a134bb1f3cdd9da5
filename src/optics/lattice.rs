//! Crystal lattices for ring patterns: the families a polycrystalline film is described by,
//! their allowed reflections, and the spacing of each.
//!
//! Spacings: cubic 1/d² = (h²+k²+l²)/a²; hexagonal 1/d² = 4/3·(h²+hk+k²)/a² + l²/c²
//! (International Tables for Crystallography, vol. A). Extinctions (kinematic structure
//! factors of the conventional cells):
//! - sc: none;
//! - fcc: h, k, l all even or all odd;
//! - bcc: h + k + l even;
//! - diamond: fcc, and all odd or h + k + l ≡ 0 (mod 4);
//! - hex with c: h − k ≡ 0 (mod 3) with l odd is absent. This is the rule of both the
//!   hexagonal close-packed metals and graphite (atoms on 2b and 2c of P6₃/mmc): their
//!   structure factors vanish there, and it contains the space group's own 00.l, l odd;
//! - hex without c: only the hk.0 reflections, all allowed. A turbostratic carbon film (the
//!   usual electron-diffraction tube target) has no order along c and shows hk.0 rings only.
//!
//! Rings are indexed by the ratios of their spacings ([`index_rings`]), which the camera
//! length does not change, and a lattice constant is refined over all indexed rings with
//! their shared inputs in its budget ([`refine_constant`]).

mod chi2;
mod index;
mod refine;

pub use chi2::chi2_survival;
pub use index::{Assignment, Indexing, MeasuredSpacing, index_rings};
pub use refine::{Comparison, JointSpacings, Refinement, refine_constant};

use super::OpticsError;
use crate::quantity::{self, Dimension};
use std::fmt;
use std::str::FromStr;

/// A lattice family.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    /// Simple cubic.
    Sc,
    /// Face-centred cubic (gold, aluminium, copper).
    Fcc,
    /// Body-centred cubic (iron, tungsten).
    Bcc,
    /// Diamond cubic (silicon, germanium, diamond).
    Diamond,
    /// Hexagonal (graphite, close-packed metals).
    Hex,
}

impl Family {
    /// Every family, in the order they are listed in messages.
    pub const ALL: [Family; 5] = [
        Family::Sc,
        Family::Fcc,
        Family::Bcc,
        Family::Diamond,
        Family::Hex,
    ];

    /// The name used on the command line and in the record.
    pub fn name(self) -> &'static str {
        match self {
            Family::Sc => "sc",
            Family::Fcc => "fcc",
            Family::Bcc => "bcc",
            Family::Diamond => "diamond",
            Family::Hex => "hex",
        }
    }

    /// Whether the family is cubic (one constant, a).
    pub fn is_cubic(self) -> bool {
        self != Family::Hex
    }

    /// Whether reflection (h, k, l) is allowed by the family's extinction rules (module
    /// docs); for [`Family::Hex`] this is the rule with c.
    pub fn allows(self, h: i32, k: i32, l: i32) -> bool {
        if h == 0 && k == 0 && l == 0 {
            return false;
        }
        let odd = |x: i32| x.rem_euclid(2) == 1;
        let unmixed = (odd(h) && odd(k) && odd(l)) || (!odd(h) && !odd(k) && !odd(l));
        match self {
            Family::Sc => true,
            Family::Fcc => unmixed,
            Family::Bcc => (h + k + l).rem_euclid(2) == 0,
            Family::Diamond => {
                unmixed && ((odd(h) && odd(k) && odd(l)) || (h + k + l).rem_euclid(4) == 0)
            }
            Family::Hex => !((h - k).rem_euclid(3) == 0 && odd(l)),
        }
    }
}

impl fmt::Display for Family {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Family {
    type Err = OpticsError;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let t = s.trim().to_ascii_lowercase();
        Family::ALL
            .into_iter()
            .find(|f| f.name() == t)
            .ok_or_else(|| {
                OpticsError::BadInput(format!(
                    "unknown lattice family `{}`: use one of sc, fcc, bcc, diamond, hex",
                    s.trim()
                ))
            })
    }
}

/// A lattice: its family and, where given, its constants (a prior to compare with or a
/// reference to calibrate against, never a measured result). `Display` writes it back as
/// `fcc:a=0.40782nm`, without the uncertainties.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Lattice {
    /// The family.
    pub family: Family,
    /// Lattice constant a, m.
    pub a_m: Option<f64>,
    /// Lattice constant c, m (hexagonal only).
    pub c_m: Option<f64>,
    /// Standard uncertainty of a, m, where it was given with `±`.
    pub u_a_m: Option<f64>,
    /// Standard uncertainty of c, m, where it was given with `±`.
    pub u_c_m: Option<f64>,
}

impl Lattice {
    /// A family without constants.
    pub fn family(family: Family) -> Self {
        Lattice {
            family,
            a_m: None,
            c_m: None,
            u_a_m: None,
            u_c_m: None,
        }
    }

    /// c/a, for a hexagonal lattice with both constants.
    pub fn c_over_a(&self) -> Option<f64> {
        match (self.family, self.a_m, self.c_m) {
            (Family::Hex, Some(a), Some(c)) => Some(c / a),
            _ => None,
        }
    }

    /// The reflections indexing uses: for a hexagonal lattice without c, hk.0 only.
    pub fn reflections(&self, q_max: f64) -> Vec<Reflection> {
        reflections(self.family, self.c_over_a(), q_max)
    }

    /// Spacing of a reflection from the given constants, m; `None` when a constant it needs
    /// is missing.
    pub fn d_m(&self, r: &Reflection) -> Option<f64> {
        let a = self.a_m?;
        let c = if r.l == 0 { None } else { Some(self.c_m?) };
        Some(r.d_m(self.family, a, c))
    }
}

impl fmt::Display for Lattice {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.family.name())?;
        let mut sep = ':';
        for (name, v) in [("a", self.a_m), ("c", self.c_m)] {
            if let Some(v) = v {
                // Rounded to 1 fm so that the shortest repr carries no binary noise.
                write!(f, "{sep}{name}={}nm", (v * 1e15).round() / 1e6)?;
                sep = ',';
            }
        }
        Ok(())
    }
}

impl FromStr for Lattice {
    type Err = OpticsError;

    /// Reads `FAMILY[:a=VALUE[,c=VALUE]]`, e.g. `fcc`, `fcc:a=0.40782nm`,
    /// `hex:a=0.2461nm,c=0.6708nm`; a value may carry `±u`.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = |why: String| OpticsError::BadInput(format!("lattice `{}`: {why}", s.trim()));
        let (family_text, constants) = match s.split_once(':') {
            Some((f, rest)) => (f, Some(rest)),
            None => (s, None),
        };
        let family: Family = family_text
            .parse()
            .map_err(|e: OpticsError| bad(e.to_string()))?;
        let mut lattice = Lattice::family(family);
        let Some(constants) = constants else {
            return Ok(lattice);
        };
        if constants.trim().is_empty() {
            return Err(bad(
                "nothing after `:`; write the constants as `a=0.40782nm` (hex also \
                 `,c=0.6708nm`) or leave out the `:`"
                    .into(),
            ));
        }
        for part in constants.split(',') {
            let Some((key, value)) = part.split_once('=') else {
                return Err(bad(format!(
                    "`{}` is not `NAME=VALUE`; write e.g. `a=0.40782nm`",
                    part.trim()
                )));
            };
            let key = key.trim().to_ascii_lowercase();
            let q = quantity::parse(value, Dimension::Length)
                .and_then(|q| quantity::require_positive(q, &key))
                .map_err(|e| bad(e.to_string()))?;
            let (slot, u_slot) = match key.as_str() {
                "a" => (&mut lattice.a_m, &mut lattice.u_a_m),
                "c" if family == Family::Hex => (&mut lattice.c_m, &mut lattice.u_c_m),
                "c" => {
                    return Err(bad(format!(
                        "a cubic lattice ({family}) has one constant, a; c is for hex"
                    )));
                }
                other => {
                    return Err(bad(format!(
                        "unknown constant `{other}`: the constants are a and (hex) c"
                    )));
                }
            };
            if slot.is_some() {
                return Err(bad(format!("{key} is given twice")));
            }
            *slot = Some(q.value);
            *u_slot = q.u;
        }
        if lattice.c_m.is_some() && lattice.a_m.is_none() {
            return Err(bad(
                "c without a: indexing hk.l rings needs c/a, so give a as well".into(),
            ));
        }
        Ok(lattice)
    }
}

/// A ring's reflection: every set of Miller indices (h, k, l) with the same spacing.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Reflection {
    /// The index sets, each with h ≥ k ≥ l ≥ 0 (cubic) or h ≥ k ≥ 0, l ≥ 0 (hexagonal), the
    /// largest h first. Cubic sets with equal h²+k²+l² (221 and 300) coincide and are one
    /// ring; so do hexagonal sets with equal h²+hk+k² and l.
    pub hkl: Vec<[u32; 3]>,
    /// Cubic: h²+k²+l²; hexagonal: h²+hk+k².
    pub m: u32,
    /// Hexagonal: l (0 for cubic).
    pub l: u32,
    /// The ring's name: "111", "220" (cubic), "10.0", "00.2" (hexagonal hk.l); coinciding
    /// sets joined by "/" ("300/221"); indices of 10 or more separated by spaces.
    pub label: String,
}

impl Reflection {
    /// (a/d)²: the reflection's 1/d² at a = 1, with `c_over_a` for hexagonal l ≠ 0.
    pub fn q(&self, family: Family, c_over_a: Option<f64>) -> f64 {
        if family.is_cubic() {
            self.m as f64
        } else {
            let l_term = match c_over_a {
                Some(r) => (self.l as f64 / r).powi(2),
                None => 0.0,
            };
            4.0 / 3.0 * self.m as f64 + l_term
        }
    }

    /// Spacing, m, for constants a and (hexagonal, l ≠ 0) c.
    pub fn d_m(&self, family: Family, a_m: f64, c_m: Option<f64>) -> f64 {
        a_m / self.q(family, c_m.map(|c| c / a_m)).sqrt()
    }
}

fn index_label(family: Family, [h, k, l]: [u32; 3]) -> String {
    let wide = h >= 10 || k >= 10 || l >= 10;
    match (family.is_cubic(), wide) {
        (true, false) => format!("{h}{k}{l}"),
        (true, true) => format!("{h} {k} {l}"),
        (false, false) => format!("{h}{k}.{l}"),
        (false, true) => format!("{h} {k}.{l}"),
    }
}

/// The allowed reflections of a family with (a/d)² ≤ `q_max` (see [`Reflection::q`]),
/// largest spacing first. For [`Family::Hex`] with `c_over_a` the general hk.l, without it
/// hk.0 only.
pub fn reflections(family: Family, c_over_a: Option<f64>, q_max: f64) -> Vec<Reflection> {
    let mut sets: Vec<([u32; 3], u32, u32)> = Vec::new();
    if !(q_max > 0.0) {
        return Vec::new();
    }
    let hmax = q_max.sqrt().floor() as u32;
    if family.is_cubic() {
        for h in 0..=hmax {
            for k in 0..=h {
                for l in 0..=k {
                    let n = h * h + k * k + l * l;
                    if (n as f64) <= q_max && family.allows(h as i32, k as i32, l as i32) {
                        sets.push(([h, k, l], n, 0));
                    }
                }
            }
        }
    } else {
        // 4/3·(h²+hk+k²) ≥ h² for h ≥ k ≥ 0, so h ≤ √q_max bounds the search.
        // l is bounded by q too, and capped so that an absurd c/a cannot run away.
        let lmax = c_over_a.map_or(0, |r| (q_max.sqrt() * r).floor().min(500.0) as u32);
        for h in 0..=hmax {
            for k in 0..=h {
                let m = h * h + h * k + k * k;
                for l in 0..=lmax {
                    let r = Reflection {
                        hkl: vec![],
                        m,
                        l,
                        label: String::new(),
                    };
                    if r.q(family, c_over_a) <= q_max && family.allows(h as i32, k as i32, l as i32)
                    {
                        sets.push(([h, k, l], m, l));
                    }
                }
            }
        }
    }
    // Group coinciding sets (same m and l), the largest h first within a group.
    sets.sort_by(|a, b| {
        (a.1, a.2, std::cmp::Reverse(a.0)).cmp(&(b.1, b.2, std::cmp::Reverse(b.0)))
    });
    let mut out: Vec<Reflection> = Vec::new();
    for (hkl, m, l) in sets {
        match out.last_mut() {
            Some(r) if r.m == m && r.l == l => {
                r.hkl.push(hkl);
                r.label = format!("{}/{}", r.label, index_label(family, hkl));
            }
            _ => out.push(Reflection {
                hkl: vec![hkl],
                m,
                l,
                label: index_label(family, hkl),
            }),
        }
    }
    out.sort_by(|a, b| a.q(family, c_over_a).total_cmp(&b.q(family, c_over_a)));
    out
}

#[cfg(test)]
mod tests;
