//! Values with units and a standard uncertainty, as written on the command line and in setup
//! files: `NUMBER[UNIT][±NUMBER[UNIT]]` (the ± part is a standard uncertainty, k = 1), plus the
//! GUM's own form `(NUMBER ± NUMBER) UNIT` (JCGM 100:2008 §7.2.2). Values are held in SI base
//! units (m, rad, V). Results are shown with the uncertainty rounded to two significant digits
//! and the value to the same decimal place (JCGM 100:2008 §7.2.6).
//!
//! [`parse`] reads a value of a known [`Dimension`], [`parse_pitch`] a grating pitch that may
//! also be written as a line density, [`format_si`] and [`format_in`] write a value back.

mod error;
mod format;
mod parse;
mod pitch;

pub use error::{Expected, QuantityError};
pub use format::{format_in, format_si, round_significant};
pub use parse::parse;
pub use pitch::parse_pitch;

/// The physical dimension a value must have; values are stored in SI base units.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dimension {
    /// Metres.
    Length,
    /// Radians.
    Angle,
    /// Volts.
    Voltage,
    /// A pure number.
    Dimensionless,
}

impl Dimension {
    /// What a value of this dimension is called in messages ("a length").
    pub fn noun(self) -> &'static str {
        match self {
            Dimension::Length => "a length",
            Dimension::Angle => "an angle",
            Dimension::Voltage => "a voltage",
            Dimension::Dimensionless => "a pure number",
        }
    }

    /// The units accepted for this dimension, for messages.
    pub fn accepted_units(self) -> &'static str {
        match self {
            Dimension::Length => "m, cm, mm, um (or µm), nm, pm",
            Dimension::Angle => "deg (or °), rad, mrad",
            Dimension::Voltage => "V, kV",
            Dimension::Dimensionless => "no unit",
        }
    }

    /// A well-formed example value of this dimension, for messages.
    pub fn example(self) -> &'static str {
        match self {
            Dimension::Length => "650nm±3nm",
            Dimension::Angle => "12.5deg±0.1deg",
            Dimension::Voltage => "5kV±20V",
            Dimension::Dimensionless => "1.5±0.1",
        }
    }

    /// The SI base unit values of this dimension are stored in ("" for a pure number).
    pub fn si_unit(self) -> &'static str {
        match self {
            Dimension::Length => "m",
            Dimension::Angle => "rad",
            Dimension::Voltage => "V",
            Dimension::Dimensionless => "",
        }
    }
}

/// A value in SI base units with an optional standard uncertainty (k = 1).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Quantity {
    /// Value in SI base units.
    pub value: f64,
    /// Standard uncertainty in SI base units, when given.
    pub u: Option<f64>,
    /// Dimension.
    pub dim: Dimension,
}

/// How a unit relates to the SI base unit.
#[derive(Clone, Copy)]
enum Scale {
    /// The unit is 10^p base units (nm: p = −9).
    Pow10(i32),
    /// Degrees of arc, π/180 rad.
    Degree,
}

/// One accepted unit.
struct Unit {
    symbol: &'static str,
    dim: Dimension,
    scale: Scale,
}

/// `x · 10^p`, as one exact multiplication or division by a power of ten (10^p is exact in
/// f64 for |p| ≤ 22), so that 650 nm → 650 / 1e9 m is correctly rounded where 650 · 1e-9
/// (1e-9 being inexact) need not be.
fn times_pow10(x: f64, p: i32) -> f64 {
    if p < 0 {
        x / 10f64.powi(-p)
    } else {
        x * 10f64.powi(p)
    }
}

impl Unit {
    /// The factor to SI base units.
    fn factor(&self) -> f64 {
        match self.scale {
            Scale::Pow10(p) => times_pow10(1.0, p),
            Scale::Degree => std::f64::consts::PI / 180.0,
        }
    }

    /// A number in this unit as SI base units.
    fn to_si(&self, number: f64) -> f64 {
        match self.scale {
            Scale::Pow10(p) => times_pow10(number, p),
            Scale::Degree => number.to_radians(),
        }
    }

    /// A number as written (`1.6`, `1.5e-3`) in this unit as SI base units. A decimal prefix
    /// shifts the written exponent, so `1.6um` reads as the literal `1.6e-6` (one rounding),
    /// not as 1.6 rounded and then divided by 1e6 (two roundings).
    fn text_to_si(&self, text: &str, number: f64) -> f64 {
        if let Scale::Pow10(p) = self.scale {
            let (mantissa, exp) = match text.find(['e', 'E']) {
                Some(i) => (&text[..i], text[i + 1..].parse::<i64>().ok()),
                None => (text, Some(0)),
            };
            if let Some(v) =
                exp.and_then(|e| format!("{mantissa}e{}", e + i64::from(p)).parse().ok())
            {
                return v;
            }
        }
        self.to_si(number)
    }

    /// A count per this unit as a count per SI base unit (600 per mm → 6e5 per m).
    fn per_si(&self, count: f64) -> f64 {
        match self.scale {
            Scale::Pow10(p) => times_pow10(count, -p),
            Scale::Degree => count / self.factor(),
        }
    }

    /// A value in SI base units expressed in this unit.
    fn si_to_unit(&self, si: f64) -> f64 {
        match self.scale {
            Scale::Pow10(p) => times_pow10(si, -p),
            Scale::Degree => si.to_degrees(),
        }
    }
}

#[rustfmt::skip]
const UNITS: &[Unit] = &[
    Unit { symbol: "m", dim: Dimension::Length, scale: Scale::Pow10(0) },
    Unit { symbol: "cm", dim: Dimension::Length, scale: Scale::Pow10(-2) },
    Unit { symbol: "mm", dim: Dimension::Length, scale: Scale::Pow10(-3) },
    Unit { symbol: "um", dim: Dimension::Length, scale: Scale::Pow10(-6) },
    // U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU: keyboards produce either.
    Unit { symbol: "\u{b5}m", dim: Dimension::Length, scale: Scale::Pow10(-6) },
    Unit { symbol: "\u{3bc}m", dim: Dimension::Length, scale: Scale::Pow10(-6) },
    Unit { symbol: "nm", dim: Dimension::Length, scale: Scale::Pow10(-9) },
    Unit { symbol: "pm", dim: Dimension::Length, scale: Scale::Pow10(-12) },
    Unit { symbol: "deg", dim: Dimension::Angle, scale: Scale::Degree },
    Unit { symbol: "°", dim: Dimension::Angle, scale: Scale::Degree },
    Unit { symbol: "rad", dim: Dimension::Angle, scale: Scale::Pow10(0) },
    Unit { symbol: "mrad", dim: Dimension::Angle, scale: Scale::Pow10(-3) },
    Unit { symbol: "V", dim: Dimension::Voltage, scale: Scale::Pow10(0) },
    Unit { symbol: "kV", dim: Dimension::Voltage, scale: Scale::Pow10(3) },
];

fn find_unit(symbol: &str) -> Option<&'static Unit> {
    UNITS.iter().find(|u| u.symbol == symbol)
}

/// The accepted unit of `dim` that `symbol` differs from only in letter case, if any: units
/// are case-sensitive ("mm" is not "Mm"), but a message can point at the likely intent.
fn case_hint(symbol: &str, dim: Dimension) -> Option<&'static str> {
    UNITS
        .iter()
        .find(|u| u.dim == dim && u.symbol.eq_ignore_ascii_case(symbol))
        .map(|u| u.symbol)
}

/// The factor that converts a value in `unit` to SI base units, and the unit's dimension:
/// `unit_factor("nm") == Some((1e-9, Dimension::Length))`; `""` is a pure number.
pub fn unit_factor(unit: &str) -> Option<(f64, Dimension)> {
    if unit.is_empty() {
        return Some((1.0, Dimension::Dimensionless));
    }
    find_unit(unit).map(|u| (u.factor(), u.dim))
}

/// Checks that a quantity is strictly positive (a distance, a wavelength, a pitch), naming it
/// in the error: `distance must be > 0, got -1.2 m`.
pub fn require_positive(q: Quantity, name: &str) -> Result<Quantity, QuantityError> {
    if q.value > 0.0 && q.value.is_finite() {
        Ok(q)
    } else {
        Err(QuantityError::NotPositive {
            name: name.to_string(),
            shown: format::show_value(q.value, q.dim.si_unit()),
        })
    }
}

#[cfg(test)]
mod tests;
