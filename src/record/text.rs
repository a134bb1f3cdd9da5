//! The terminal report: what was measured, the scale, the features, the results with their
//! uncertainty budgets (GUM, JCGM 100:2008), warnings and assumptions. Plain text without
//! colours (it goes to stderr, which may be a file), at most [`WIDTH`] columns.

use super::{Record, ResultEntry};
use crate::quantity::format_si;
use std::fmt::Write;

/// Widest line of the report, in characters.
pub const WIDTH: usize = 100;
/// Features listed before the table is cut short.
const MAX_FEATURE_ROWS: usize = 40;
/// Width of the budget bar at 100 %.
const BAR_WIDTH: usize = 20;

/// The report as text, lines of at most [`WIDTH`] characters.
pub fn render_text(record: &Record) -> String {
    let mut out = String::new();
    head(&mut out, record);
    inputs(&mut out, record);
    scale(&mut out, record);
    features(&mut out, record);
    fit(&mut out, record);
    results(&mut out, record);
    distribution(&mut out, record);
    notes(&mut out, "WARNINGS", &record.warnings);
    notes(&mut out, "ASSUMPTIONS", &record.assumptions);
    if !record.timings_ms.is_empty() {
        let parts: Vec<String> = record
            .timings_ms
            .iter()
            .map(|(stage, ms)| format!("{stage} {}", ms_text(ms)))
            .collect();
        let _ = writeln!(out);
        wrap_into(&mut out, &format!("TIMINGS  {}", parts.join(" · ")), "  ");
    }
    out
}

fn head(out: &mut String, r: &Record) {
    let _ = writeln!(out, "FRINGEGAUGE · {} measurement", r.setup.kind);
    let p = &r.photo;
    let mut camera = [&p.exif.make, &p.exif.model]
        .iter()
        .filter_map(|s| s.as_deref())
        .collect::<Vec<_>>()
        .join(" ");
    if !camera.is_empty() {
        camera = format!("  ({camera})");
    }
    let hash: String = p.sha256.chars().take(12).collect();
    let line = format!(
        "  photo    {}  {} × {} px  sha256 {hash}…{camera}",
        clip(file_name(&p.path), 48),
        p.width,
        p.height,
    );
    let _ = writeln!(out, "{}", clip(&line, WIDTH));
    let _ = writeln!(
        out,
        "  made     {} by {} {}",
        clip(&r.created, 40),
        clip(&r.tool.name, 20),
        clip(&r.tool.version, 20)
    );
}

fn inputs(out: &mut String, r: &Record) {
    if r.setup.inputs.is_empty() {
        return;
    }
    let _ = writeln!(out, "\nINPUTS");
    for (name, input) in &r.setup.inputs {
        let mut value = format_si(input.value, input.u, &input.unit);
        if input.unit == "rad" {
            let deg = format_si(input.value.to_degrees(), input.u.to_degrees(), "");
            value = format!("{value} ({deg}°)");
        }
        let source = match input.source {
            super::InputSource::Given => "given",
            super::InputSource::Assumed => "assumed",
            super::InputSource::SetupFile => "setup file",
        };
        let line = format!("  {:<14} {:<44} {source}", clip(name, 14), value);
        let _ = writeln!(out, "{}", clip(&line, WIDTH));
    }
}

fn scale(out: &mut String, r: &Record) {
    let s = &r.scale;
    let _ = writeln!(out, "\nSCALE  {}", clip(&s.method, 40));
    let mut line = format!(
        "  {} mm/px",
        format_si(s.mm_per_px.value, s.mm_per_px.u, "")
    );
    if let Some(res) = s.residual_px {
        let _ = write!(line, "   residual {} px", sig2(res));
    }
    if s.homography.is_some() {
        line.push_str("   view corrected (homography)");
    }
    let _ = writeln!(out, "{}", clip(&line, WIDTH));
}

fn features(out: &mut String, r: &Record) {
    if r.features.is_empty() {
        return;
    }
    let rings = r.features.iter().any(|f| f.radius_px.is_some());
    let _ = writeln!(out, "\nFEATURES  {}", r.features.len());
    let mut header = format!(
        "  {:<12} {:>20} {:>20} {:>10} {:>10}",
        "label", "x px", "y px", "X mm", "Y mm"
    );
    if rings {
        let _ = write!(header, " {:>9} {:>9}", "r px", "r mm");
    }
    let _ = writeln!(out, "{header}");
    for f in r.features.iter().take(MAX_FEATURE_ROWS) {
        let mut line = format!(
            "  {:<12} {:>20} {:>20} {:>10.3} {:>10.3}",
            clip(&f.label, 12),
            format_si(f.px[0], f.px_u[0], ""),
            format_si(f.px[1], f.px_u[1], ""),
            f.screen_mm[0],
            f.screen_mm[1],
        );
        if rings {
            let px = f.radius_px.map(|v| format!("{v:.2}")).unwrap_or_default();
            let mm = f.radius_mm.map(|v| format!("{v:.3}")).unwrap_or_default();
            let _ = write!(line, " {px:>9} {mm:>9}");
        }
        let _ = writeln!(out, "{}", clip(line.trim_end(), WIDTH));
    }
    if r.features.len() > MAX_FEATURE_ROWS {
        let _ = writeln!(
            out,
            "  … and {} more (all of them are in the JSON record)",
            r.features.len() - MAX_FEATURE_ROWS
        );
    }
}

fn fit(out: &mut String, r: &Record) {
    let Some(fit) = &r.fit else { return };
    let _ = writeln!(out, "\nFIT  {}", clip(&fit.model, 60));
    let _ = writeln!(
        out,
        "  {} points, rms residual {}",
        fit.points,
        sig2(fit.rms_residual)
    );
    for p in &fit.parameters {
        let line = format!(
            "  {:<14} {}",
            clip(&p.name, 14),
            format_si(p.value, p.u, "")
        );
        let _ = writeln!(out, "{}", clip(&line, WIDTH));
    }
}

fn results(out: &mut String, r: &Record) {
    let _ = writeln!(out, "\nRESULTS");
    if r.results.is_empty() {
        let _ = writeln!(out, "  none");
    }
    for res in &r.results {
        result(out, res);
    }
}

fn result(out: &mut String, res: &ResultEntry) {
    let line = format!(
        "  {:<24} {}   U = {} (k = {})",
        clip(&res.display_name(), 24),
        format_si(res.value, res.u, &res.unit),
        unit_only(&format_si(res.value, res.expanded, &res.unit)),
        trim_number(res.k),
    );
    let _ = writeln!(out, "{}", clip(&line, WIDTH));
    if res.budget.is_empty() {
        return;
    }
    let (factor, prefix) = display_prefix(res.value, &res.unit);
    let _ = writeln!(
        out,
        "    {:<22} {:>14} {:>12} {:>7}",
        "input", "sensitivity", "contribution", "share"
    );
    let ranked = res.ranked_budget();
    for (line, share) in &ranked {
        let sens = line
            .sensitivity
            .map(|c| format!("{c:.3e}"))
            .unwrap_or_default();
        let contrib = format!("{} {prefix}{}", sig2(line.contribution / factor), res.unit);
        let text = format!(
            "    {:<22} {:>14} {:>12} {:>6.1} %  {}",
            clip(&line.input, 22),
            sens,
            contrib,
            share,
            bar(*share)
        );
        let _ = writeln!(out, "{}", clip(text.trim_end(), WIDTH));
    }
    let total: f64 = ranked.iter().map(|(_, s)| s).sum();
    if (total - 100.0).abs() > 1.0 {
        let _ = writeln!(
            out,
            "    (shares add up to {total:.1} %: inputs are correlated or the model is \
             not linear over u)"
        );
    }
}

/// The free size distribution as a table by number, with the fitted shape beside it;
/// bins holding under 0.2 % in both are left out.
fn distribution(out: &mut String, r: &Record) {
    let Some(d) = &r.distribution else { return };
    let (factor, prefix) = display_prefix(d.mean_m, "m");
    let _ = writeln!(
        out,
        "\nSIZES  by number, free (NNLS) beside the fitted {}; free mean {} {prefix}m, SD {} \
         {prefix}m",
        d.shape,
        sig3(d.mean_m / factor),
        sig3(d.sd_m / factor)
    );
    let _ = writeln!(
        out,
        "    {:>14} {:>8} {:<20} {:>8} {:>8}",
        "diameter", "number", "", "fitted", "volume"
    );
    for b in &d.bins {
        if b.number_fraction < 0.002 && b.parametric_fraction < 0.002 {
            continue;
        }
        let share = 100.0 * b.number_fraction;
        let line = format!(
            "    {:>11} {prefix}m {:>6.1} %  {:<20} {:>6.1} % {:>6.1} %",
            sig3(b.diameter_m / factor),
            share,
            bar(share * 100.0 / 25.0),
            100.0 * b.parametric_fraction,
            100.0 * b.volume_fraction
        );
        let _ = writeln!(out, "{}", clip(line.trim_end(), WIDTH));
    }
}

/// Three significant digits, for table columns.
fn sig3(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let digits = (2 - x.abs().log10().floor() as i32).max(0) as usize;
    format!("{x:.digits$}")
}

fn notes(out: &mut String, title: &str, items: &[String]) {
    let _ = writeln!(out, "\n{title}");
    if items.is_empty() {
        let _ = writeln!(out, "  none");
    }
    for item in items {
        wrap_into(out, &format!("  - {item}"), "    ");
    }
}

/// A bar of `#` proportional to a share in per cent.
pub(crate) fn bar(share: f64) -> String {
    let n = (share.clamp(0.0, 100.0) / 100.0 * BAR_WIDTH as f64).round() as usize;
    "#".repeat(n)
}

/// The decimal prefix and its factor that [`format_si`] chooses for `value` in `si_unit`,
/// so that budget lines are written in the same unit as their result.
pub(crate) fn display_prefix(value: f64, si_unit: &str) -> (f64, &'static str) {
    const PREFIXES: [(f64, &str); 6] = [
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "µ"),
        (1e-9, "n"),
        (1e-12, "p"),
        (1e3, "k"),
    ];
    if si_unit.is_empty() || si_unit == "rad" || value == 0.0 || !value.is_finite() {
        return (1.0, "");
    }
    let mag = value.abs();
    PREFIXES
        .iter()
        .filter(|(f, _)| mag >= *f * 0.999_999)
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .copied()
        .unwrap_or(PREFIXES[4])
}

/// `x` with two significant digits in plain decimals; numbers of 100 and more keep their
/// whole integer part, very small or large ones go to scientific notation.
pub(crate) fn sig2(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return format!("{x}");
    }
    let decimals = 1 - x.abs().log10().floor() as i32;
    if (0..=6).contains(&decimals) {
        format!("{x:.prec$}", prec = decimals as usize)
    } else if decimals < 0 && x.abs() < 1e6 {
        format!("{:.0}", x)
    } else {
        format!("{x:.1e}")
    }
}

/// A number without trailing zeros (for k).
pub(crate) fn trim_number(x: f64) -> String {
    let s = format!("{x:.3}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// Milliseconds, with a decimal only when they are few.
pub(crate) fn ms_text(ms: f64) -> String {
    if ms < 10.0 {
        format!("{ms:.1} ms")
    } else {
        format!("{ms:.0} ms")
    }
}

/// The part of "v ± u unit" after the ±.
pub(crate) fn unit_only(formatted: &str) -> &str {
    formatted
        .split_once("± ")
        .map(|(_, rest)| rest)
        .unwrap_or(formatted)
}

/// The last component of a path written with / or \.
pub(crate) fn file_name(path: &str) -> &str {
    path.rsplit(['/', '\\']).next().unwrap_or(path)
}

/// `s` cut to `max` characters, with … when cut.
fn clip(s: &str, max: usize) -> String {
    if s.chars().count() <= max {
        return s.to_string();
    }
    let mut t: String = s.chars().take(max.saturating_sub(1)).collect();
    t.push('…');
    t
}

/// Appends `text` wrapped at word boundaries to [`WIDTH`]; its leading spaces are kept and
/// continuation lines take `indent`.
fn wrap_into(out: &mut String, text: &str, indent: &str) {
    let body = text.trim_start_matches(' ');
    let mut line = text[..text.len() - body.len()].to_string();
    let mut fresh = true;
    for word in body.split(' ').filter(|w| !w.is_empty()) {
        let word = clip(word, WIDTH - indent.chars().count());
        if !fresh && line.chars().count() + 1 + word.chars().count() > WIDTH {
            let _ = writeln!(out, "{}", line.trim_end());
            line = indent.to_string();
            fresh = true;
        }
        if !fresh {
            line.push(' ');
        }
        line.push_str(&word);
        fresh = false;
    }
    let _ = writeln!(out, "{}", line.trim_end());
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::{BudgetLine, Input, ResultEntry, fixture};

    #[test]
    fn results_use_two_significant_digits_of_u() {
        let mut r = fixture::minimal_record();
        r.results.clear();
        // The example of quantity::format_si: 1.66667 µm ± 2.1 nm.
        r.push_result(ResultEntry::new("pitch", 1.66667e-6, 2.1e-9, "m", 2.0));
        let text = render_text(&r);
        assert!(text.contains("1.6667 ± 0.0021 µm"), "{text}");
        assert!(text.contains("U = 0.0042 µm (k = 2)"), "{text}");
    }

    #[test]
    fn budget_shares_add_up_to_100_percent_for_uncorrelated_inputs() {
        let r = fixture::grating_record();
        let text = render_text(&r);
        let shares: Vec<f64> = text
            .lines()
            .filter(|l| l.contains(" %") && !l.trim_start().starts_with('('))
            .filter_map(|l| {
                let before = l.split(" %").next()?;
                before.split_whitespace().last()?.parse().ok()
            })
            .collect();
        assert_eq!(shares.len(), 3, "{text}");
        let total: f64 = shares.iter().sum();
        assert!((total - 100.0).abs() < 0.2, "{total}\n{text}");
        // Largest first.
        assert!(shares.windows(2).all(|w| w[0] >= w[1]), "{shares:?}");
        assert!(!text.contains("shares add up"), "{text}");
    }

    #[test]
    fn correlated_budget_is_flagged() {
        let mut r = fixture::minimal_record();
        r.results[0] = ResultEntry::new("width", 1e-4, 1e-6, "m", 2.0).with_budget(vec![
            BudgetLine::new("a", None, 1e-6),
            BudgetLine::new("b", None, 1e-6),
        ]);
        let text = render_text(&r);
        assert!(text.contains("shares add up to 200.0 %"), "{text}");
    }

    #[test]
    fn report_shows_the_measurement_and_stays_narrow() {
        let mut r = fixture::grating_record();
        r.warn("a very long warning ".repeat(20));
        r.set_input("a-very-long-input-name-indeed", Input::given(1.0, 0.1, "m"));
        let text = render_text(&r);
        for needle in [
            "grating measurement",
            "grating-600.jpg",
            "4000 × 3000 px",
            "ruler",
            "0.05000 ± 0.00010 mm/px",
            "residual 0.12 px",
            "m=+1",
            "pitch",
            "wavelength",
            "650.0 ± 3.0 nm",
            "order m=+2 is off the frame",
            "incidence 0 ± 0.5° (not given)",
            "decode 210 ms",
        ] {
            assert!(text.contains(needle), "missing {needle:?}\n{text}");
        }
        for line in text.lines() {
            assert!(line.chars().count() <= WIDTH, "too wide: {line:?}");
            assert_eq!(line, line.trim_end(), "trailing spaces");
        }
    }

    #[test]
    fn budget_lines_use_the_result_prefix() {
        for (v, unit) in [
            (1.6e-6, "m"),
            (2.1e-10, "m"),
            (0.12, "m"),
            (3e3, "V"),
            (0.5, ""),
        ] {
            let (_, prefix) = display_prefix(v, unit);
            let shown = format_si(v, v * 0.01, unit);
            assert!(
                shown.ends_with(&format!(" {prefix}{unit}").trim_end().to_string()),
                "{shown}"
            );
        }
        assert_eq!(sig2(0.0283), "0.028");
        assert_eq!(sig2(12.34), "12");
        assert_eq!(sig2(1234.0), "1234");
        assert_eq!(bar(50.0).len(), BAR_WIDTH / 2);
    }
}
