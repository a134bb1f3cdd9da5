//! Grating pitches as written by users: a length, a fraction of a length, or a line density
//! (lines per unit length), which is converted to the pitch with its uncertainty propagated.

use super::parse::{Ctx, Side, number_and_unit, parse_as, resolve, split_pm};
use super::{Dimension, Expected, Quantity, QuantityError, Unit, require_positive};

/// Words that may stand between a count and `/unit` in a line density ("600 lines/mm").
const LINE_WORDS: [&str; 4] = ["lines", "line", "lp", "l"];

/// Parses a grating pitch: a length (`1.6um`, `1.6um±0.1um`), a fraction of a length
/// (`1/600mm` is 1/600 mm; a ± part is the pitch's own uncertainty, in the same unit unless
/// one is given) or a line density (`600/mm`, `600 lines/mm`, `600/mm±2/mm`, `600±2/mm`,
/// `6000/cm`). A density n ± u(n) becomes the pitch 1/n with u = u(n)/n² (first order,
/// JCGM 100:2008 eq. 10). The pitch must be > 0.
pub fn parse_pitch(text: &str) -> Result<Quantity, QuantityError> {
    let ctx = Ctx {
        text,
        dim: Dimension::Length,
        expected: Expected::Pitch,
    };
    let t = text.trim();
    if t.is_empty() {
        return Err(QuantityError::Empty {
            expected: ctx.expected,
        });
    }
    let (value_part, unc_part) = split_pm(t, &ctx)?;
    let q = if let Some((num, rest)) = value_part.split_once('/') {
        if rest
            .trim_start()
            .starts_with(|c: char| c.is_ascii_digit() || c == '.')
        {
            fraction(num, rest, unc_part, &ctx)?
        } else {
            density(num, Some(rest), unc_part, value_part, &ctx)?
        }
    } else if unc_part.is_some_and(|u| u.contains('/')) {
        density(value_part, None, unc_part, value_part, &ctx)?
    } else {
        parse_as(t, Dimension::Length, Expected::Pitch)?
    };
    require_positive(q, "pitch")
}

/// A length unit that must be present (the denominator of `600/mm`, the unit of `1/600mm`).
fn required_length_unit(unit: &str, ctx: &Ctx<'_>) -> Result<&'static Unit, QuantityError> {
    resolve(unit.trim(), ctx)?.ok_or_else(|| QuantityError::MissingUnit {
        text: ctx.text(),
        expected: ctx.expected,
    })
}

/// `1/600mm`: the pitch is numerator/denominator in the unit.
fn fraction(
    numerator: &str,
    denominator: &str,
    unc: Option<&str>,
    ctx: &Ctx<'_>,
) -> Result<Quantity, QuantityError> {
    let (top, _, top_unit) = number_and_unit(numerator, ctx, Side::Value)?;
    if !top_unit.is_empty() {
        return Err(ctx.malformed(
            "in a fractional pitch only the denominator carries the unit, e.g. 1/600mm",
        ));
    }
    let (bottom, _, bottom_unit) = number_and_unit(denominator, ctx, Side::Value)?;
    let unit = required_length_unit(bottom_unit, ctx)?;
    if bottom == 0.0 {
        return Err(QuantityError::NotPositive {
            name: "pitch".into(),
            shown: ctx.text(),
        });
    }
    let u = match unc {
        None => None,
        Some(s) => {
            let (x, x_text, x_unit) = number_and_unit(s, ctx, Side::Uncertainty)?;
            let x_unit = if x_unit.is_empty() {
                unit
            } else {
                required_length_unit(x_unit, ctx)?
            };
            if x < 0.0 {
                return Err(QuantityError::NegativeUncertainty {
                    text: ctx.text(),
                    expected: ctx.expected,
                });
            }
            Some(x_unit.text_to_si(x_text, x).abs())
        }
    };
    Ok(Quantity {
        value: unit.to_si(top / bottom),
        u,
        dim: Dimension::Length,
    })
}

/// A count before `/unit`, optionally followed by a word such as `lines`.
fn density_count(s: &str, ctx: &Ctx<'_>, side: Side) -> Result<f64, QuantityError> {
    let (n, _, word) = number_and_unit(s, ctx, side)?;
    if word.is_empty() || LINE_WORDS.contains(&word) {
        Ok(n)
    } else {
        Err(ctx.malformed(&format!(
            "`{word}` before the / is not understood; write a line density as 600/mm, \
             600 lines/mm or 600/mm±2/mm"
        )))
    }
}

/// `600/mm±2/mm` (and `600±2/mm`, `600/mm±2`): a line density, returned as the pitch.
fn density(
    count: &str,
    per_unit: Option<&str>,
    unc: Option<&str>,
    value_text: &str,
    ctx: &Ctx<'_>,
) -> Result<Quantity, QuantityError> {
    let n = density_count(count, ctx, Side::Value)?;
    let unit = per_unit.map(|u| required_length_unit(u, ctx)).transpose()?;
    let un = match unc {
        None => None,
        Some(s) => {
            let (c, u) = match s.split_once('/') {
                Some((c, u)) => (c, Some(required_length_unit(u, ctx)?)),
                None => (s, None),
            };
            let x = match density_count(c, ctx, Side::Uncertainty) {
                Err(QuantityError::Malformed(_)) => {
                    return Err(ctx.malformed(
                        "the uncertainty of a line density is a line density too, \
                         e.g. 600/mm±2/mm or 600/mm±2",
                    ));
                }
                other => other?,
            };
            Some((x, u))
        }
    };
    let unc_unit = un.and_then(|(_, u)| u);
    let Some(unit) = unit.or(unc_unit) else {
        return Err(QuantityError::MissingUnit {
            text: ctx.text(),
            expected: ctx.expected,
        });
    };
    let n_per_m = unit.per_si(n);
    if !(n_per_m > 0.0 && n_per_m.is_finite()) {
        return Err(QuantityError::NotPositive {
            name: "line density".into(),
            shown: value_text.trim().to_string(),
        });
    }
    let u = match un {
        None => None,
        Some((x, _)) if x < 0.0 => {
            return Err(QuantityError::NegativeUncertainty {
                text: ctx.text(),
                expected: ctx.expected,
            });
        }
        Some((x, u)) => {
            let u_n_per_m = u.unwrap_or(unit).per_si(x).abs();
            // d = 1/n, so u(d) = |∂d/∂n|·u(n) = u(n)/n² (JCGM 100:2008 eq. 10).
            Some(u_n_per_m / (n_per_m * n_per_m))
        }
    };
    Ok(Quantity {
        value: 1.0 / n_per_m,
        u,
        dim: Dimension::Length,
    })
}
