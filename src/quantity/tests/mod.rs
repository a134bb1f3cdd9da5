//! Tests of value reading and writing: `parse` every unit, syntax form and malformed input,
//! `pitch` the grating pitch forms, `format` the GUM §7.2.6 display and its round trip.

use super::*;

mod format;
mod parse;
mod pitch;

fn len(text: &str) -> Quantity {
    parse(text, Dimension::Length).unwrap_or_else(|e| panic!("{text}: {e}"))
}

fn err(text: &str, dim: Dimension) -> QuantityError {
    match parse(text, dim) {
        Ok(q) => panic!("{text} parsed as {q:?}"),
        Err(e) => e,
    }
}
