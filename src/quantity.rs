//! Values with units and a standard uncertainty, as written on the command line:
//! `NUMBER[UNIT][±NUMBER[UNIT]]`. API skeleton: the implementation lands next.

use thiserror::Error;

/// A value that could not be read or is out of range.
#[derive(Debug, Error, PartialEq)]
pub enum QuantityError {
    /// The text is not a value of the expected kind.
    #[error("{0}")]
    Malformed(String),
}

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

/// Parses `NUMBER[UNIT][±NUMBER[UNIT]]` for a value of the given dimension.
pub fn parse(text: &str, dim: Dimension) -> Result<Quantity, QuantityError> {
    let _ = (text, dim);
    Err(QuantityError::Malformed("not implemented yet".into()))
}

/// Formats a value and its standard uncertainty in `si_unit` ("m", "rad", "V", or "" for a
/// pure number) with a decimal prefix chosen for the value, the uncertainty rounded to two
/// significant digits and the value to the same decimal place (GUM 7.2.6).
/// Example: `format_si(1.66667e-6, 2.1e-9, "m")` gives `"1.6667 ± 0.0021 µm"`.
pub fn format_si(value: f64, u: f64, si_unit: &str) -> String {
    let prefixes: [(f64, &str); 6] = [
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "µ"),
        (1e-9, "n"),
        (1e-12, "p"),
        (1e3, "k"),
    ];
    let (factor, prefix) = if si_unit.is_empty() || si_unit == "rad" || value == 0.0 {
        (1.0, "")
    } else {
        let mag = value.abs();
        *prefixes
            .iter()
            .filter(|(f, _)| mag >= *f * 0.999_999)
            .max_by(|a, b| a.0.total_cmp(&b.0))
            .unwrap_or(&prefixes[4])
    };
    let (v, uu) = (value / factor, u / factor);
    let decimals = if uu > 0.0 && uu.is_finite() {
        (1 - uu.log10().floor() as i32).max(0) as usize
    } else {
        4
    };
    let space = if si_unit.is_empty() { "" } else { " " };
    format!("{v:.decimals$} ± {uu:.decimals$}{space}{prefix}{si_unit}")
}
