//! Writing values with their uncertainty after JCGM 100:2008 §7.2.6: the standard uncertainty
//! is rounded to two significant digits and the value to the same decimal place, so that the
//! shown digits are the meaningful ones. Rounding is to nearest (§7.2.6 allows rounding up;
//! we keep the nearest value so that a shown result reads back unchanged).

use super::find_unit;

/// Decimal prefixes that [`format_si`] may choose, as powers of ten, ascending.
const PREFIXES: [(i32, &str); 8] = [
    (-12, "p"),
    (-9, "n"),
    (-6, "µ"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
];

/// Rounds `z` to `digits` significant digits (to nearest). Returns the rounded value and the
/// power of ten of its last kept digit: `round_significant(0.000354, 2) == Some((0.00035, -5))`.
/// `None` when `z` is zero, NaN or infinite, or `digits` is 0. This is the rounding of GUM
/// §7.2.6 and the `c × 10^ℓ` form behind the numerical tolerance of JCGM 101:2008 §7.9.2.
pub fn round_significant(z: f64, digits: usize) -> Option<(f64, i32)> {
    if z == 0.0 || !z.is_finite() || digits == 0 {
        return None;
    }
    // Rust's `{:e}` rounds the exact binary value correctly, so a value that rounds up to the
    // next decade (0.00996 → 1.0e-2) carries the new exponent with it.
    let text = format!("{:.*e}", digits - 1, z);
    let (_, exp) = text.split_once('e')?;
    let exp: i32 = exp.parse().ok()?;
    let rounded: f64 = text.parse().ok()?;
    Some((rounded, exp - (digits as i32 - 1)))
}

/// Formats a value and its standard uncertainty in `si_unit` (an unprefixed SI symbol such as
/// "m" or "V"; "rad" and "" for a pure number get no prefix) with a decimal prefix chosen for
/// the value (for the uncertainty when the value is 0), the uncertainty rounded to two
/// significant digits and the value to the same decimal place (GUM §7.2.6).
/// Example: `format_si(1.66667e-6, 2.1e-9, "m")` gives `"1.6667 ± 0.0021 µm"`.
/// A zero uncertainty shows the value to six significant digits with `± 0`; a NaN, infinite
/// or negative uncertainty says "uncertainty not available"; a non-finite value is shown as is.
pub fn format_si(value: f64, u: f64, si_unit: &str) -> String {
    let (exp, prefix) = prefix_for(value, u, si_unit);
    let unit = format!("{prefix}{si_unit}");
    format_scaled(scale_down(value, exp), scale_down(u, exp), &unit)
}

/// Formats like [`format_si`] but in an explicit unit ("nm", "mm", "deg", "kV", "" for a pure
/// number; "um" and "μm" are shown as "µm"). A unit that [`super::unit_factor`] does not
/// know leaves the numbers in SI base units and says so.
pub fn format_in(value: f64, u: f64, unit: &str) -> String {
    if unit.is_empty() {
        return format_scaled(value, u, "");
    }
    match find_unit(unit) {
        Some(def) => {
            let shown = if matches!(unit, "um" | "\u{3bc}m") {
                "µm"
            } else {
                unit
            };
            format_scaled(def.si_to_unit(value), def.si_to_unit(u), shown)
        }
        None => format!(
            "{} (SI base units; unknown unit `{unit}`)",
            format_scaled(value, u, "")
        ),
    }
}

/// A value alone, to six significant digits, with a prefix: for messages ("-1.2 m").
pub(super) fn show_value(value: f64, si_unit: &str) -> String {
    let (exp, prefix) = prefix_for(value, 0.0, si_unit);
    let sep = if si_unit.is_empty() { "" } else { " " };
    format!(
        "{}{sep}{prefix}{si_unit}",
        six_digits(scale_down(value, exp))
    )
}

/// `x / 10^exp`, as an exact division or multiplication by a power of ten.
fn scale_down(x: f64, exp: i32) -> f64 {
    if exp < 0 {
        x * 10f64.powi(-exp)
    } else {
        x / 10f64.powi(exp)
    }
}

/// The prefix for a value; for "m" and "V" only those that [`super::parse`] reads back
/// (pm to m, V and kV), so that what is shown can be pasted in again.
fn prefix_for(value: f64, u: f64, si_unit: &str) -> (i32, &'static str) {
    let allowed: &[(i32, &str)] = match si_unit {
        "" | "rad" => return (0, ""),
        "m" => &PREFIXES[..5],
        "V" => &PREFIXES[4..6],
        _ => &PREFIXES,
    };
    let magnitude = if !value.is_finite() {
        return (0, "");
    } else if value != 0.0 {
        value.abs()
    } else if u.is_finite() && u > 0.0 {
        u
    } else {
        return (0, "");
    };
    // The small slack keeps 1e-6 (not exactly representable) in µm rather than 1000 nm.
    allowed
        .iter()
        .rev()
        .find(|(exp, _)| magnitude >= 10f64.powi(*exp) * (1.0 - 1e-12))
        .or(allowed.first())
        .copied()
        .unwrap_or((0, ""))
}

fn format_scaled(v: f64, u: f64, unit: &str) -> String {
    let sep = if unit.is_empty() { "" } else { " " };
    if !v.is_finite() {
        return format!("{v}{sep}{unit}");
    }
    if u == 0.0 {
        return format!("{} ± 0{sep}{unit}", six_digits(v));
    }
    let Some((u_rounded, last)) = round_significant(u, 2).filter(|_| u > 0.0) else {
        return format!("{}{sep}{unit} (uncertainty not available)", six_digits(v));
    };
    let (vs, us) = if last >= 0 {
        let q = 10f64.powi(last);
        (
            format!("{:.0}", (v / q).round() * q),
            format!("{u_rounded:.0}"),
        )
    } else {
        let d = last.unsigned_abs() as usize;
        (format!("{v:.d$}"), format!("{u_rounded:.d$}"))
    };
    format!("{} ± {us}{sep}{unit}", without_negative_zero(vs))
}

/// Six significant digits without trailing zeros; exponent form far from 1.
fn six_digits(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let Some((rounded, _)) = round_significant(v, 6) else {
        return format!("{v}");
    };
    if (1e-4..1e9).contains(&rounded.abs()) {
        format!("{rounded}")
    } else {
        format!("{rounded:e}")
    }
}

/// "-0.000" → "0.000": a value that rounds to zero has no sign.
fn without_negative_zero(s: String) -> String {
    match s.strip_prefix('-') {
        Some(rest) if rest.chars().all(|c| c == '0' || c == '.') => rest.to_string(),
        _ => s,
    }
}
