//! The HTML report: one self-contained file (inline CSS, the overlay embedded as a base64
//! PNG data URI, RFC 2397) with the same content as the terminal report and the full JSON
//! record in a collapsible block. Every piece of text from the record is escaped.

use super::text::{display_prefix, file_name, ms_text, sig2, trim_number, unit_only};
use super::{InputSource, Record, ResultEntry};
use crate::quantity::format_si;
use base64::Engine;
use std::fmt::Write;

const STYLE: &str = "
:root { --ink: #1d2327; --soft: #5b6770; --line: #d5dade; --accent: #2f6f73; --warn: #8a4b00; }
* { box-sizing: border-box; }
body { font: 15px/1.45 system-ui, -apple-system, 'Segoe UI', Roboto, sans-serif; color: var(--ink);
  max-width: 62rem; margin: 1.5rem auto; padding: 0 1rem; background: #fff; }
h1 { font-size: 1.45rem; margin: 0 0 .2rem; }
h2 { font-size: 1.05rem; margin: 1.6rem 0 .4rem; border-bottom: 2px solid var(--accent);
  padding-bottom: .15rem; text-transform: uppercase; letter-spacing: .04em; }
.meta { color: var(--soft); margin: .1rem 0; }
.result { border: 1px solid var(--line); border-left: 5px solid var(--accent);
  padding: .6rem .9rem; margin: .7rem 0; break-inside: avoid; }
.result .name { font-weight: 600; }
.result .value { font-size: 1.35rem; font-variant-numeric: tabular-nums; margin: .1rem 0; }
table { border-collapse: collapse; width: 100%; font-variant-numeric: tabular-nums; }
th, td { text-align: left; padding: .2rem .5rem; border-bottom: 1px solid var(--line); }
th { color: var(--soft); font-weight: 500; font-size: .85rem; }
td.num, th.num { text-align: right; white-space: nowrap; }
.barcell { width: 30%; }
.bar { display: block; height: .7rem; background: var(--accent); min-width: 1px; }
ul.warn li { color: var(--warn); }
figure { margin: 1rem 0; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--line); }
details { margin-top: 1.5rem; }
summary { cursor: pointer; color: var(--accent); }
pre { background: #f4f6f7; padding: .8rem; overflow-x: auto; font-size: .8rem; }
code { font-size: .9em; }
@media print { body { margin: 0; max-width: none; } details { display: none; } }
";

/// The report as a self-contained HTML page; `overlay_png` is embedded when given.
pub fn render_html(record: &Record, overlay_png: Option<&[u8]>) -> String {
    let r = record;
    let mut h = String::new();
    let title = format!(
        "{} measurement · {}",
        r.setup.kind,
        file_name(&r.photo.path)
    );
    let _ = write!(
        h,
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n\
         <title>{}</title>\n<style>{STYLE}</style>\n</head>\n<body>\n",
        esc(&title)
    );
    let _ = writeln!(h, "<h1>{}</h1>", esc(&title));
    let camera: Vec<&str> = [&r.photo.exif.make, &r.photo.exif.model]
        .iter()
        .filter_map(|s| s.as_deref())
        .collect();
    let _ = writeln!(
        h,
        "<p class=\"meta\">Photo <code>{}</code>, {} × {} px{}; SHA-256 <code>{}</code></p>",
        esc(&r.photo.path),
        r.photo.width,
        r.photo.height,
        if camera.is_empty() {
            String::new()
        } else {
            format!(", {}", esc(&camera.join(" ")))
        },
        esc(&r.photo.sha256)
    );
    let _ = writeln!(
        h,
        "<p class=\"meta\">Made {} by {} {}</p>",
        esc(&r.created),
        esc(&r.tool.name),
        esc(&r.tool.version)
    );

    let _ = writeln!(h, "<h2>Results</h2>");
    if r.results.is_empty() {
        let _ = writeln!(h, "<p>None.</p>");
    }
    for res in &r.results {
        result(&mut h, res);
    }

    if let Some(png) = overlay_png {
        let data = base64::engine::general_purpose::STANDARD.encode(png);
        let _ = writeln!(
            h,
            "<figure><img src=\"data:image/png;base64,{data}\" alt=\"photo with the features \
             found marked\"><figcaption class=\"meta\">Features found, drawn on the photo.\
             </figcaption></figure>"
        );
    }

    notes(&mut h, "Warnings", &r.warnings, true);
    notes(&mut h, "Assumptions", &r.assumptions, false);
    inputs_and_scale(&mut h, r);
    features(&mut h, r);
    fit(&mut h, r);

    if !r.timings_ms.is_empty() {
        let parts: Vec<String> = r
            .timings_ms
            .iter()
            .map(|(s, ms)| format!("{} {}", esc(s), ms_text(ms)))
            .collect();
        let _ = writeln!(h, "<p class=\"meta\">Timings: {}</p>", parts.join(" · "));
    }

    let json = serde_json::to_string_pretty(r)
        .unwrap_or_else(|e| format!("the record cannot be shown as JSON: {e}"));
    let _ = writeln!(
        h,
        "<details><summary>Full JSON record ({})</summary><pre>{}</pre></details>",
        esc(&r.schema),
        esc(&json)
    );
    h.push_str("</body>\n</html>\n");
    h
}

fn result(h: &mut String, res: &ResultEntry) {
    let _ = writeln!(
        h,
        "<div class=\"result\"><div class=\"name\">{}</div>\
         <div class=\"value\">{}</div>\
         <div class=\"meta\">expanded uncertainty U = {} (k = {})</div>",
        esc(&res.display_name()),
        esc(&format_si(res.value, res.u, &res.unit)),
        esc(unit_only(&format_si(res.value, res.expanded, &res.unit))),
        esc(&trim_number(res.k))
    );
    if !res.budget.is_empty() {
        let (factor, prefix) = display_prefix(res.value, &res.unit);
        let _ = writeln!(
            h,
            "<table><tr><th>input</th><th class=\"num\">sensitivity</th>\
             <th class=\"num\">contribution</th><th class=\"num\">share of u²</th>\
             <th class=\"barcell\"></th></tr>"
        );
        let ranked = res.ranked_budget();
        for (line, share) in &ranked {
            let sens = line
                .sensitivity
                .map(|c| format!("{c:.3e}"))
                .unwrap_or_default();
            let _ = writeln!(
                h,
                "<tr><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{} {}{}</td>\
                 <td class=\"num\">{share:.1} %</td><td class=\"barcell\">\
                 <span class=\"bar\" style=\"width:{:.1}%\"></span></td></tr>",
                esc(&line.input),
                esc(&sens),
                esc(&sig2(line.contribution / factor)),
                prefix,
                esc(&res.unit),
                share.clamp(0.0, 100.0),
            );
        }
        let total: f64 = ranked.iter().map(|(_, s)| s).sum();
        h.push_str("</table>\n");
        if (total - 100.0).abs() > 1.0 {
            let _ = writeln!(
                h,
                "<p class=\"meta\">The shares add up to {total:.1} %: the inputs are \
                 correlated or the model is not linear over u.</p>"
            );
        }
    }
    h.push_str("</div>\n");
}

fn notes(h: &mut String, title: &str, items: &[String], warn: bool) {
    let _ = writeln!(h, "<h2>{title}</h2>");
    if items.is_empty() {
        let _ = writeln!(h, "<p>None.</p>");
        return;
    }
    let _ = writeln!(h, "<ul{}>", if warn { " class=\"warn\"" } else { "" });
    for item in items {
        let _ = writeln!(h, "<li>{}</li>", esc(item));
    }
    h.push_str("</ul>\n");
}

fn inputs_and_scale(h: &mut String, r: &Record) {
    let _ = writeln!(h, "<h2>Inputs and scale</h2>\n<table>");
    let _ = writeln!(
        h,
        "<tr><th>input</th><th class=\"num\">value</th><th>source</th></tr>"
    );
    for (name, input) in &r.setup.inputs {
        let mut value = format_si(input.value, input.u, &input.unit);
        if input.unit == "rad" {
            let deg = format_si(input.value.to_degrees(), input.u.to_degrees(), "");
            value = format!("{value} ({deg}°)");
        }
        let source = match input.source {
            InputSource::Given => "given",
            InputSource::Assumed => "assumed",
            InputSource::SetupFile => "setup file",
        };
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td class=\"num\">{}</td><td>{source}</td></tr>",
            esc(name),
            esc(&value)
        );
    }
    let s = &r.scale;
    let mut scale = format!("{} mm/px", format_si(s.mm_per_px.value, s.mm_per_px.u, ""));
    if let Some(res) = s.residual_px {
        let _ = write!(scale, ", residual {} px", sig2(res));
    }
    if s.homography.is_some() {
        scale.push_str(", view corrected (homography)");
    }
    let _ = writeln!(
        h,
        "<tr><td>scale ({})</td><td class=\"num\">{}</td><td></td></tr>\n</table>",
        esc(&s.method),
        esc(&scale)
    );
}

fn features(h: &mut String, r: &Record) {
    if r.features.is_empty() {
        return;
    }
    let rings = r.features.iter().any(|f| f.radius_px.is_some());
    let _ = writeln!(h, "<h2>Features ({})</h2>\n<table>", r.features.len());
    let _ = write!(
        h,
        "<tr><th>label</th><th class=\"num\">x px</th><th class=\"num\">y px</th>\
         <th class=\"num\">X mm</th><th class=\"num\">Y mm</th>"
    );
    if rings {
        h.push_str("<th class=\"num\">r px</th><th class=\"num\">r mm</th>");
    }
    h.push_str("</tr>\n");
    for f in &r.features {
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td>\
             <td class=\"num\">{:.3}</td><td class=\"num\">{:.3}</td>",
            esc(&f.label),
            esc(&format_si(f.px[0], f.px_u[0], "")),
            esc(&format_si(f.px[1], f.px_u[1], "")),
            f.screen_mm[0],
            f.screen_mm[1]
        );
        if rings {
            let px = f.radius_px.map(|v| format!("{v:.2}")).unwrap_or_default();
            let mm = f.radius_mm.map(|v| format!("{v:.3}")).unwrap_or_default();
            let _ = write!(h, "<td class=\"num\">{px}</td><td class=\"num\">{mm}</td>");
        }
        h.push_str("</tr>\n");
    }
    h.push_str("</table>\n");
}

fn fit(h: &mut String, r: &Record) {
    let Some(fit) = &r.fit else { return };
    let _ = writeln!(
        h,
        "<h2>Fit</h2>\n<p><code>{}</code>: {} points, rms residual {}</p>\n<table>",
        esc(&fit.model),
        fit.points,
        esc(&sig2(fit.rms_residual))
    );
    for p in &fit.parameters {
        let _ = writeln!(
            h,
            "<tr><td>{}</td><td class=\"num\">{}</td></tr>",
            esc(&p.name),
            esc(&format_si(p.value, p.u, ""))
        );
    }
    h.push_str("</table>\n");
}

/// Escapes text for HTML element content and quoted attribute values.
pub(crate) fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::record::fixture;

    #[test]
    fn text_from_the_record_is_escaped() {
        let mut r = fixture::grating_record();
        r.warn("<script>alert('x')</script> & more");
        r.photo.path = "dir/\"quoted\" <b>.jpg".into();
        let html = render_html(&r, None);
        assert!(!html.to_lowercase().contains("<script"), "{html}");
        assert!(!html.contains("<b>"), "{html}");
        assert!(html.contains("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &amp; more"));
        // The JSON block is escaped too: the quote of the JSON string becomes &quot;.
        assert!(html.contains("&quot;schema&quot;: &quot;fringegauge.record/1&quot;"));
    }

    #[test]
    fn page_is_self_contained_with_the_overlay_embedded() {
        let r = fixture::grating_record();
        let mut img = image::RgbImage::new(4, 3);
        img.put_pixel(1, 1, image::Rgb([200, 10, 10]));
        let png = crate::record::encode_png(&img).unwrap();
        let html = render_html(&r, Some(&png));
        let start = html.find("data:image/png;base64,").unwrap() + 22;
        let end = start + html[start..].find('"').unwrap();
        let decoded = base64::engine::general_purpose::STANDARD
            .decode(&html[start..end])
            .unwrap();
        assert_eq!(decoded, png);
        // Nothing is fetched from elsewhere.
        for outside in ["http://", "https://", "<link", "<script", "src=\"/"] {
            assert!(!html.contains(outside), "{outside}");
        }
        assert!(html.starts_with("<!DOCTYPE html>") && html.ends_with("</html>\n"));
        assert!(!render_html(&r, None).contains("<img"));
    }

    #[test]
    fn page_has_the_report_content() {
        let r = fixture::grating_record();
        let html = render_html(&r, None);
        let pitch = r.result("pitch").unwrap();
        for needle in [
            format_si(pitch.value, pitch.u, "m"),
            "wavelength".into(),
            "setup file".into(),
            "m=+1".into(),
            "order m=+2 is off the frame".into(),
            "residual 0.12 px".into(),
        ] {
            assert!(html.contains(&esc(&needle)), "missing {needle}");
        }
        assert!(html.contains("<details><summary>Full JSON record"));
        // One budget row per line, widths given as percentages adding to ~100.
        let widths: f64 = html
            .split("style=\"width:")
            .skip(1)
            .filter_map(|s| s.split('%').next()?.parse::<f64>().ok())
            .sum();
        assert!((widths - 100.0).abs() < 0.3, "{widths}");
    }
}
