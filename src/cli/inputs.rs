//! Physics inputs from the command line: parsed values with units, the stated defaults
//! for values given without an uncertainty (listed as assumptions, never a silent zero),
//! and where each came from, for the record.

use crate::Error;
use crate::quantity::{self, Dimension, Quantity};
use crate::record::{Input as RecordInput, InputSource};
use crate::uncertainty::Input;
use std::collections::{BTreeMap, BTreeSet};

/// Parses the value of `--flag`, naming the flag in any error.
pub fn parse_flag(flag: &str, text: &str, dim: Dimension) -> Result<Quantity, Error> {
    quantity::parse(text, dim).map_err(|e| Error::Usage(format!("--{flag}: {e}")))
}

/// Parses the value of `--flag` and requires it to be positive, naming the flag in any error.
pub fn positive_flag(flag: &str, text: &str, dim: Dimension) -> Result<Quantity, Error> {
    let q = parse_flag(flag, text, dim)?;
    quantity::require_positive(q, &format!("--{flag}")).map_err(|e| Error::Usage(e.to_string()))
}

/// The uncertainty a value takes when none is given.
#[derive(Debug, Clone, Copy)]
pub enum DefaultU {
    /// A rectangular distribution of this half-width, in SI units.
    HalfWidth(f64),
    /// A rectangular distribution of this half-width relative to the value.
    RelativeHalfWidth(f64),
}

/// Collects the inputs of one measurement.
#[derive(Debug, Default)]
pub struct InputBook {
    /// Inputs for the record, by name.
    pub record: BTreeMap<String, RecordInput>,
    /// Defaults that were assumed, in words.
    pub assumptions: Vec<String>,
    from_setup: BTreeSet<String>,
}

/// SI unit symbol of a dimension, for the record.
fn si_unit(dim: Dimension) -> &'static str {
    match dim {
        Dimension::Length => "m",
        Dimension::Angle => "rad",
        Dimension::Voltage => "V",
        Dimension::Dimensionless => "1",
    }
}

/// Display unit for the assumption text.
fn display_unit(dim: Dimension, value: f64) -> &'static str {
    match dim {
        Dimension::Length if value < 1e-6 => "nm",
        Dimension::Length if value < 1e-3 => "µm",
        Dimension::Length if value < 1.0 => "mm",
        Dimension::Length => "m",
        Dimension::Angle => "deg",
        Dimension::Voltage => "kV",
        Dimension::Dimensionless => "",
    }
}

impl InputBook {
    /// A book that knows which flags came from the setup file (comma-separated names).
    pub fn new(from_setup: Option<&str>) -> Self {
        InputBook {
            from_setup: from_setup
                .map(|s| s.split(',').map(|k| k.trim().to_string()).collect())
                .unwrap_or_default(),
            ..Default::default()
        }
    }

    /// Parses `text` for `--flag` and returns it as a budget input named `name`, with
    /// `default_u` (and `why`, for the assumption) when no uncertainty was given.
    pub fn value(
        &mut self,
        name: &str,
        flag: &str,
        text: &str,
        dim: Dimension,
        default_u: DefaultU,
        why: &str,
    ) -> Result<Input, Error> {
        let q = parse_flag(flag, text, dim)?;
        self.add(name, flag, q, default_u, why)
    }

    /// Like [`value`](Self::value) for an already parsed quantity.
    pub fn add(
        &mut self,
        name: &str,
        flag: &str,
        q: Quantity,
        default_u: DefaultU,
        why: &str,
    ) -> Result<Input, Error> {
        let source = if self.from_setup.contains(flag) {
            InputSource::SetupFile
        } else {
            InputSource::Given
        };
        let unit = si_unit(q.dim);
        let input = match q.u {
            Some(u) => Input::normal(name, q.value, u),
            None => {
                let half = match default_u {
                    DefaultU::HalfWidth(h) => h,
                    DefaultU::RelativeHalfWidth(r) => r * q.value.abs(),
                };
                let input = Input::rectangular(name, q.value, half);
                let du = display_unit(q.dim, q.value);
                self.assumptions.push(format!(
                    "{name} given without uncertainty: taken as {} ± {} {du} (rectangular, u = {}); {why}",
                    show(q.value, q.dim, du),
                    show(half, q.dim, du),
                    show(input.u, q.dim, du),
                ));
                input
            }
        };
        let record_source = if q.u.is_none() {
            InputSource::Assumed
        } else {
            source
        };
        self.record.insert(
            name.to_string(),
            RecordInput::new(q.value, input.u, unit, record_source),
        );
        Ok(input)
    }

    /// Records an input the user did not give at all, with its assumed value.
    pub fn assumed(&mut self, input: &Input, dim: Dimension, why: &str) {
        let du = display_unit(dim, input.value);
        self.assumptions.push(format!(
            "{} not given: taken as {} {du} with u = {} {du}; {why}",
            input.name,
            show(input.value, dim, du),
            show(input.u, dim, du)
        ));
        self.record.insert(
            input.name.clone(),
            RecordInput::new(input.value, input.u, si_unit(dim), InputSource::Assumed),
        );
    }
}

fn show(v: f64, dim: Dimension, unit: &str) -> String {
    let f = match (dim, unit) {
        (Dimension::Length, "nm") => 1e9,
        (Dimension::Length, "µm") => 1e6,
        (Dimension::Length, "mm") => 1e3,
        (Dimension::Angle, "deg") => 180.0 / std::f64::consts::PI,
        (Dimension::Voltage, "kV") => 1e-3,
        _ => 1.0,
    };
    let x = v * f;
    // Four significant digits is plenty for a statement of what was assumed.
    if x == 0.0 {
        "0".into()
    } else {
        let digits = (3 - x.abs().log10().floor() as i32).max(0) as usize;
        format!("{x:.digits$}")
    }
}
