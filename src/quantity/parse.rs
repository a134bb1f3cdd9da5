//! Reading values: `NUMBER[UNIT][±NUMBER[UNIT]]` and the GUM form `(NUMBER ± NUMBER) UNIT`
//! (JCGM 100:2008 §7.2.2).

use super::error::Expected;
use super::{Dimension, Quantity, QuantityError, Unit, case_hint, find_unit};

/// The accepted spellings of ±. None overlaps another, so each match is one separator.
const PM_SIGNS: [&str; 3] = ["±", "+/-", "+-"];

/// Parses `NUMBER[UNIT][±NUMBER[UNIT]]` for a value of the given dimension, returning it in
/// SI base units. `+-` and `+/-` may stand for `±`, with spaces around it; an uncertainty
/// without a unit takes the value's (`650nm±3` is 650 nm ± 3 nm) and a value without a unit
/// takes the uncertainty's (`650±3nm`). `(650 ± 3) nm` is read too. A unit is required unless
/// `dim` is [`Dimension::Dimensionless`].
pub fn parse(text: &str, dim: Dimension) -> Result<Quantity, QuantityError> {
    parse_as(text, dim, Expected::Value(dim))
}

/// The text being read and what it should be, for building errors.
pub(super) struct Ctx<'a> {
    pub(super) text: &'a str,
    pub(super) dim: Dimension,
    pub(super) expected: Expected,
}

impl Ctx<'_> {
    pub(super) fn text(&self) -> String {
        self.text.trim().to_string()
    }

    pub(super) fn malformed(&self, why: &str) -> QuantityError {
        QuantityError::Malformed(format!("`{}`: {why}", self.text.trim()))
    }

    fn bad_number(&self, part: &str) -> QuantityError {
        QuantityError::BadNumber {
            text: self.text(),
            part: part.to_string(),
            expected: self.expected,
        }
    }
}

#[derive(Clone, Copy)]
pub(super) enum Side {
    Value,
    Uncertainty,
}

pub(super) fn parse_as(
    text: &str,
    dim: Dimension,
    expected: Expected,
) -> Result<Quantity, QuantityError> {
    let ctx = Ctx {
        text,
        dim,
        expected,
    };
    let t = text.trim();
    if t.is_empty() {
        return Err(QuantityError::Empty { expected });
    }
    let (body, outer_unit) = split_parentheses(t, &ctx)?;
    let (value_part, unc_part) = split_pm(body, &ctx)?;
    let (value, value_text, value_unit) = number_and_unit(value_part, &ctx, Side::Value)?;
    let unc = match unc_part {
        Some(p) => Some(number_and_unit(p, &ctx, Side::Uncertainty)?),
        None => None,
    };
    let value_unit = resolve(value_unit, &ctx)?;
    let unc_unit = match unc {
        Some((_, _, unit)) => resolve(unit, &ctx)?,
        None => None,
    };
    let (vu, uu) = match outer_unit {
        Some(outer) => {
            if value_unit.is_some() || unc_unit.is_some() {
                return Err(ctx.malformed(
                    "give the unit either inside or after the parentheses, not both, \
                     e.g. (650 ± 3) nm",
                ));
            }
            let outer = resolve(outer, &ctx)?;
            (outer, outer)
        }
        None => match (value_unit, unc_unit) {
            (Some(a), Some(b)) => (Some(a), Some(b)),
            (Some(a), None) | (None, Some(a)) => (Some(a), Some(a)),
            (None, None) => (None, None),
        },
    };
    if vu.is_none() && dim != Dimension::Dimensionless {
        return Err(QuantityError::MissingUnit {
            text: ctx.text(),
            expected,
        });
    }
    let value_si = vu.map_or(value, |unit| unit.text_to_si(value_text, value));
    let u_si = match unc {
        Some((n, _, _)) if n < 0.0 => {
            return Err(QuantityError::NegativeUncertainty {
                text: ctx.text(),
                expected,
            });
        }
        // `abs` turns a written `-0` into +0.
        Some((n, text, _)) => Some(uu.map_or(n, |unit| unit.text_to_si(text, n)).abs()),
        None => None,
    };
    if !value_si.is_finite() || u_si.is_some_and(|u| !u.is_finite()) {
        return Err(QuantityError::NotFinite {
            text: ctx.text(),
            expected,
        });
    }
    Ok(Quantity {
        value: value_si,
        u: u_si,
        dim,
    })
}

/// Splits `(a ± b) unit` into `a ± b` and the unit; other text passes through.
fn split_parentheses<'a>(
    t: &'a str,
    ctx: &Ctx<'_>,
) -> Result<(&'a str, Option<&'a str>), QuantityError> {
    if let Some(rest) = t.strip_prefix('(') {
        let Some(close) = rest.rfind(')') else {
            return Err(ctx.malformed(
                "a parenthesis is opened but not closed; write (650 ± 3) nm or 650nm±3nm",
            ));
        };
        let inner = &rest[..close];
        let after = rest[close + 1..].trim();
        if inner.contains(['(', ')']) {
            return Err(ctx.malformed("nested parentheses are not understood"));
        }
        Ok((inner, Some(after)))
    } else if t.contains(['(', ')']) {
        Err(ctx
            .malformed("parentheses must enclose the value and its uncertainty, e.g. (650 ± 3) nm"))
    } else {
        Ok((t, None))
    }
}

/// Splits at the one ± (or `+-`, `+/-`), if there is one.
pub(super) fn split_pm<'a>(
    body: &'a str,
    ctx: &Ctx<'_>,
) -> Result<(&'a str, Option<&'a str>), QuantityError> {
    let mut hits: Vec<(usize, usize)> = PM_SIGNS
        .iter()
        .flat_map(|sign| body.match_indices(sign).map(|(pos, s)| (pos, s.len())))
        .collect();
    hits.sort_unstable();
    match hits.as_slice() {
        [] => Ok((body, None)),
        [(pos, len)] => Ok((&body[..*pos], Some(&body[pos + len..]))),
        _ => Err(ctx.malformed(&format!(
            "more than one ±; write one value and one standard uncertainty, e.g. {}",
            ctx.expected_example()
        ))),
    }
}

impl Ctx<'_> {
    fn expected_example(&self) -> &'static str {
        match self.expected {
            Expected::Value(d) => d.example(),
            Expected::Pitch => "600/mm±2/mm",
        }
    }
}

/// Reads a leading number and returns it, its text and the rest (the unit text, trimmed).
pub(super) fn number_and_unit<'a>(
    part: &'a str,
    ctx: &Ctx<'_>,
    side: Side,
) -> Result<(f64, &'a str, &'a str), QuantityError> {
    let s = part.trim();
    if s.is_empty() {
        return Err(match side {
            Side::Value => QuantityError::MissingValue {
                text: ctx.text(),
                expected: ctx.expected,
            },
            Side::Uncertainty => QuantityError::MissingUncertainty {
                text: ctx.text(),
                expected: ctx.expected,
            },
        });
    }
    let end = number_end(s);
    if end == 0 {
        let word = s.trim_start_matches(['+', '-']).to_ascii_lowercase();
        return Err(if word.starts_with("nan") || word.starts_with("inf") {
            QuantityError::NotFinite {
                text: ctx.text(),
                expected: ctx.expected,
            }
        } else {
            ctx.bad_number(s)
        });
    }
    let (num, rest) = s.split_at(end);
    let unit = rest.trim();
    // "1.5.3mm" or "1,5mm": the number goes on past what was read, so it is the number that
    // is wrong, not the unit.
    if unit.starts_with(|c: char| c.is_ascii_digit() || ".,+-".contains(c)) {
        return Err(ctx.bad_number(s));
    }
    let v: f64 = num.parse().map_err(|_| ctx.bad_number(s))?;
    if !v.is_finite() {
        return Err(QuantityError::NotFinite {
            text: ctx.text(),
            expected: ctx.expected,
        });
    }
    Ok((v, num, unit))
}

/// The byte length of the decimal number at the start of `s` (sign, digits, point,
/// exponent), or 0 when there is no digit. An `e` not followed by digits is left to the unit.
fn number_end(s: &str) -> usize {
    let b = s.as_bytes();
    let digits_from = |mut i: usize| {
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        i
    };
    let mut i = 0;
    if i < b.len() && (b[i] == b'+' || b[i] == b'-') {
        i += 1;
    }
    let int_end = digits_from(i);
    let mut digits = int_end - i;
    i = int_end;
    if i < b.len() && b[i] == b'.' {
        let frac_end = digits_from(i + 1);
        digits += frac_end - (i + 1);
        i = frac_end;
    }
    if digits == 0 {
        return 0;
    }
    if i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        let mut j = i + 1;
        if j < b.len() && (b[j] == b'+' || b[j] == b'-') {
            j += 1;
        }
        let exp_end = digits_from(j);
        if exp_end > j {
            i = exp_end;
        }
    }
    i
}

/// Looks a unit up for the expected dimension; `""` is no unit.
pub(super) fn resolve(unit: &str, ctx: &Ctx<'_>) -> Result<Option<&'static Unit>, QuantityError> {
    if unit.is_empty() {
        return Ok(None);
    }
    match find_unit(unit) {
        Some(u) if u.dim == ctx.dim => Ok(Some(u)),
        Some(u) => Err(QuantityError::WrongDimension {
            text: ctx.text(),
            unit: unit.to_string(),
            found: u.dim,
            expected: ctx.expected,
        }),
        None => Err(QuantityError::UnknownUnit {
            text: ctx.text(),
            unit: unit.to_string(),
            expected: ctx.expected,
            hint: case_hint(unit, ctx.dim),
        }),
    }
}
