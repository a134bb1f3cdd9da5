//! Errors of value parsing. Each message quotes the text seen, says what was expected and
//! shows a well-formed example, so that a user can fix a flag or a setup file line at once.

use std::fmt;

use super::Dimension;

/// What a piece of text was expected to be, for the wording of an error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Expected {
    /// A value of a dimension, read by [`super::parse`].
    Value(Dimension),
    /// A grating pitch, read by [`super::parse_pitch`].
    Pitch,
}

impl Expected {
    fn noun(self) -> &'static str {
        match self {
            Expected::Value(d) => d.noun(),
            Expected::Pitch => "a grating pitch",
        }
    }

    fn units(self) -> &'static str {
        match self {
            Expected::Value(d) => d.accepted_units(),
            Expected::Pitch => {
                "a length unit (m, cm, mm, um or µm, nm, pm) or a line density (/m, /cm, /mm, /um)"
            }
        }
    }

    fn example(self) -> &'static str {
        match self {
            Expected::Value(d) => d.example(),
            Expected::Pitch => "1.6um±0.1um, 1/600mm or 600/mm±2/mm",
        }
    }
}

/// A value that could not be read or is out of range.
#[derive(Debug, Clone, PartialEq)]
pub enum QuantityError {
    /// Nothing was given.
    Empty {
        /// What was expected.
        expected: Expected,
    },
    /// A number is malformed.
    BadNumber {
        /// The whole text.
        text: String,
        /// The part that is not a number.
        part: String,
        /// What was expected.
        expected: Expected,
    },
    /// Nothing stands before the ±.
    MissingValue {
        /// The whole text.
        text: String,
        /// What was expected.
        expected: Expected,
    },
    /// Nothing stands after the ±.
    MissingUncertainty {
        /// The whole text.
        text: String,
        /// What was expected.
        expected: Expected,
    },
    /// The unit is not one that is accepted.
    UnknownUnit {
        /// The whole text.
        text: String,
        /// The unit seen.
        unit: String,
        /// What was expected.
        expected: Expected,
        /// An accepted unit that differs only in letter case.
        hint: Option<&'static str>,
    },
    /// No unit was given where one is required.
    MissingUnit {
        /// The whole text.
        text: String,
        /// What was expected.
        expected: Expected,
    },
    /// The unit belongs to another dimension.
    WrongDimension {
        /// The whole text.
        text: String,
        /// The unit seen.
        unit: String,
        /// The dimension of that unit.
        found: Dimension,
        /// What was expected.
        expected: Expected,
    },
    /// A number is NaN or infinite.
    NotFinite {
        /// The whole text.
        text: String,
        /// What was expected.
        expected: Expected,
    },
    /// The standard uncertainty is negative.
    NegativeUncertainty {
        /// The whole text.
        text: String,
        /// What was expected.
        expected: Expected,
    },
    /// A quantity that must be strictly positive is not.
    NotPositive {
        /// What the quantity is ("distance").
        name: String,
        /// The value as shown to the user ("-1.2 m").
        shown: String,
    },
    /// Any other malformed text; the message is complete.
    Malformed(String),
}

const SYNTAX: &str = "NUMBER[UNIT][±NUMBER[UNIT]]";

impl fmt::Display for QuantityError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            QuantityError::Empty { expected } => write!(
                f,
                "no value given: expected {} as {SYNTAX}, e.g. {}",
                expected.noun(),
                expected.example()
            ),
            QuantityError::BadNumber {
                text,
                part,
                expected,
            } => {
                write!(
                    f,
                    "`{text}`: `{part}` is not a number; expected {} as {SYNTAX}, e.g. {}",
                    expected.noun(),
                    expected.example()
                )?;
                if part.contains(',') {
                    write!(f, " (write the decimal point as `.`, not `,`)")?;
                }
                Ok(())
            }
            QuantityError::MissingValue { text, expected } => write!(
                f,
                "`{text}` has no value before the ±: write the value first, e.g. {}",
                expected.example()
            ),
            QuantityError::MissingUncertainty { text, expected } => write!(
                f,
                "`{text}` has nothing after the ±: write the standard uncertainty, e.g. {}, \
                 or leave out the ± part",
                expected.example()
            ),
            QuantityError::UnknownUnit {
                text,
                unit,
                expected,
                hint,
            } => {
                write!(
                    f,
                    "`{text}`: unknown unit `{unit}`; {} takes {}, e.g. {}",
                    expected.noun(),
                    expected.units(),
                    expected.example()
                )?;
                if let Some(h) = hint {
                    write!(f, " (units are case-sensitive: did you mean `{h}`?)")?;
                }
                Ok(())
            }
            QuantityError::MissingUnit { text, expected } => write!(
                f,
                "`{text}` has no unit; {} needs one of {}, e.g. {}",
                expected.noun(),
                expected.units(),
                expected.example()
            ),
            QuantityError::WrongDimension {
                text,
                unit,
                found,
                expected,
            } => write!(
                f,
                "`{text}`: `{unit}` is a unit of {}, but {} is expected: use {}, e.g. {}",
                found_noun(*found),
                expected.noun(),
                expected.units(),
                expected.example()
            ),
            QuantityError::NotFinite { text, expected } => write!(
                f,
                "`{text}` is not a finite number; expected {} as {SYNTAX}, e.g. {}",
                expected.noun(),
                expected.example()
            ),
            QuantityError::NegativeUncertainty { text, expected } => write!(
                f,
                "`{text}`: the uncertainty is negative; a standard uncertainty is ≥ 0, e.g. {}",
                expected.example()
            ),
            QuantityError::NotPositive { name, shown } => {
                write!(f, "{name} must be > 0, got {shown}")
            }
            QuantityError::Malformed(message) => f.write_str(message),
        }
    }
}

fn found_noun(d: Dimension) -> &'static str {
    match d {
        Dimension::Length => "length",
        Dimension::Angle => "angle",
        Dimension::Voltage => "voltage",
        Dimension::Dimensionless => "a pure number",
    }
}

impl std::error::Error for QuantityError {}
