//! What every measuring subcommand shares: the stage clock, reading the photo, making the
//! scale from the scale flags, and writing the record, overlay, report and archive.

use super::args::{OutputArgs, ScaleArgs, parse_two_points};
use super::inputs::{InputBook, positive_flag};
use crate::photo::{self, Channel, Photo};
use crate::quantity::Dimension;
use crate::raster::Raster;
use crate::record::overlay::{self, Mark};
use crate::record::plot::{self, ProfilePlot};
use crate::record::{self, Record, RecordError};
use crate::scale::ruler::{self, Marks, RulerClass, RulerSpec};
use crate::scale::{ScaleMethod, ScreenMap, camera, points};
use crate::{Error, ExitCode};
use nalgebra::Vector2;
use std::path::Path;
use std::time::Instant;

/// Wall time per pipeline stage.
pub struct Clock {
    last: Instant,
    /// Stage names and milliseconds, in order.
    pub stages: Vec<(String, f64)>,
}

impl Default for Clock {
    fn default() -> Self {
        Clock {
            last: Instant::now(),
            stages: Vec::new(),
        }
    }
}

impl Clock {
    /// Ends the current stage under `name`.
    pub fn lap(&mut self, name: &str) {
        let now = Instant::now();
        self.stages
            .push((name.to_string(), (now - self.last).as_secs_f64() * 1e3));
        self.last = now;
    }
}

/// Refuses up front to overwrite output files, so no work is wasted and nothing is lost.
pub fn check_outputs(out: &OutputArgs) -> Result<(), Error> {
    if out.force {
        return Ok(());
    }
    for path in [&out.overlay, &out.report].into_iter().flatten() {
        if path.exists() {
            return Err(RecordError::Exists(path.display().to_string()).into());
        }
    }
    Ok(())
}

/// Reads and decodes the photo, keeping its bytes for the archive.
pub fn load_photo(path: &Path) -> Result<(Photo, Vec<u8>), Error> {
    let label = path.display().to_string();
    let limits = photo::Limits::default();
    let bytes = photo::read_file(path, &label, &limits)?;
    let photo = photo::decode(&bytes, &label, &limits)?;
    Ok((photo, bytes))
}

/// The channel named with `--channel`, if any.
pub fn forced_channel(flag: Option<&str>) -> Result<Option<Channel>, Error> {
    flag.map(|text| {
        text.parse::<Channel>()
            .map_err(|e: photo::ParseChannelError| Error::Usage(e.to_string()))
    })
    .transpose()
}

/// Makes the screen map from exactly one of the scale flags.
pub fn screen_map(
    raster: &dyn Raster,
    args: &ScaleArgs,
    book: &mut InputBook,
    pattern_stretch: Option<(Vector2<f64>, Vector2<f64>)>,
    focal_35mm: Option<f64>,
) -> Result<ScreenMap, Error> {
    let given = [
        args.ruler.is_some(),
        args.points.is_some(),
        args.mm_per_px.is_some(),
        args.grid.is_some(),
    ];
    match given.iter().filter(|g| **g).count() {
        0 => {
            return Err(Error::Usage(
                "no scale given: use one of --ruler X1,Y1,X2,Y2, --points X1,Y1,X2,Y2 --length L, \
                 --grid PITCH or --mm-per-px VALUE"
                    .into(),
            ));
        }
        1 => {}
        _ => {
            return Err(Error::Usage(
                "give exactly one scale: --ruler, --points, --grid or --mm-per-px".into(),
            ));
        }
    }
    if let Some(text) = &args.ruler {
        if text.trim() == "auto" {
            return Err(Error::Usage(
                "--ruler auto is not available yet: give the rough ends of the ruler stretch as \
                 --ruler X1,Y1,X2,Y2"
                    .into(),
            ));
        }
        let [x1, y1, x2, y2] = parse_two_points("ruler", text)?;
        let tick = positive_flag(
            "tick",
            args.tick.as_deref().unwrap_or("1mm"),
            Dimension::Length,
        )?;
        let class = match &args.ruler_class {
            Some(c) => RulerClass::parse(c).ok_or_else(|| {
                Error::Usage(format!("--ruler-class takes I, II or III, got `{c}`"))
            })?,
            None => {
                book.assumptions
                    .push("ruler accuracy class not given: class II assumed (MI-008)".to_string());
                RulerClass::II
            }
        };
        let spec = RulerSpec {
            from_px: Vector2::new(x1, y1),
            to_px: Vector2::new(x2, y2),
            tick_mm: tick.value * 1e3,
            tick_u_rel: tick.u.map(|u| u / tick.value),
            marks: Marks::Ruler(class),
        };
        let (map, _fit) = ruler::measure(raster, &spec)?;
        return Ok(squared(map, raster, focal_35mm));
    }
    if let Some(text) = &args.grid {
        let pitch = positive_flag("grid", text, Dimension::Length)?;
        let (from_px, to_px) = pattern_stretch.ok_or_else(|| {
            Error::Usage("--grid needs the pattern's spots to lay its stretch along".into())
        })?;
        let spec = RulerSpec {
            from_px,
            to_px,
            tick_mm: pitch.value * 1e3,
            tick_u_rel: pitch.u.map(|u| u / pitch.value),
            marks: Marks::Grid,
        };
        let (map, _fit) = ruler::measure(raster, &spec)?;
        return Ok(squared(map, raster, focal_35mm));
    }
    if let Some(text) = &args.points {
        let [x1, y1, x2, y2] = parse_two_points("points", text)?;
        let length = args
            .length
            .as_deref()
            .ok_or_else(|| Error::Usage("--points needs --length".into()))?;
        let q = positive_flag("length", length, Dimension::Length)?;
        let map = points::from_points(
            Vector2::new(x1, y1),
            Vector2::new(x2, y2),
            q.value * 1e3,
            q.u.map(|u| u / q.value),
        )?;
        return Ok(map);
    }
    let text = args.mm_per_px.as_deref().unwrap_or_default();
    let q = positive_flag("mm-per-px", text, Dimension::Dimensionless)?;
    let mut map = ScreenMap::uniform(ScaleMethod::MmPerPx, q.value)?;
    let u_rel = match q.u {
        Some(u) => u / q.value,
        None => {
            // Common practice: a scale carried over from an earlier calibration is good to
            // about half a per cent unless its own record says better.
            let half = 0.005;
            book.assumptions.push(format!(
                "--mm-per-px given without uncertainty: ±{:.1} % (rectangular) assumed",
                half * 100.0
            ));
            half / 3f64.sqrt()
        }
    };
    map = map.with_component("given mm per px", u_rel);
    Ok(map)
}

/// The map of a ruler or a row of grid lines with its across scale set by the camera's
/// geometry ([`camera::square_across`]), and a note of what that did.
fn squared(mut map: ScreenMap, raster: &dyn Raster, focal_35mm: Option<f64>) -> ScreenMap {
    let cam = camera::CameraGeometry::for_frame(
        raster.width() as f64,
        raster.height() as f64,
        focal_35mm,
    );
    let Some(c) = camera::square_across(&mut map, &cam) else {
        map.warnings.push(
            "the view is too oblique for the camera's geometry to set the scale across the \
             ruler; it is taken equal to the scale along it"
                .into(),
        );
        return map;
    };
    map.assumptions.push(format!(
        "scale across the ruler from the camera's geometry (pinhole camera, principal point \
         at the frame's centre; {}): {:.4}× the along scale's, screen axes at {:.1}° \
         through the camera",
        cam.source,
        1.0 / c.gamma,
        c.axes_angle.to_degrees()
    ));
    map.with_component("scale across the ruler (focal length)", c.u_rel)
}

/// Writes what the output flags ask for and prints the report. Returns the exit code.
pub fn emit(
    record: &mut Record,
    photo: &Photo,
    photo_bytes: &[u8],
    marks: &[Mark],
    out: &OutputArgs,
    clock: &mut Clock,
) -> Result<ExitCode, Error> {
    emit_with_plot(record, photo, photo_bytes, marks, None, out, clock)
}

/// As [`emit`], with the plot of a fitted profile in the overlay's margin (and so in the
/// report and the archive, which carry the overlay).
pub fn emit_with_plot(
    record: &mut Record,
    photo: &Photo,
    photo_bytes: &[u8],
    marks: &[Mark],
    profile: Option<&ProfilePlot>,
    out: &OutputArgs,
    clock: &mut Clock,
) -> Result<ExitCode, Error> {
    let wants_overlay = out.overlay.is_some() || out.report.is_some() || out.archive.is_some();
    let overlay_png = if wants_overlay {
        let (preview, factor) = photo.preview_rgb8(1600);
        let mut img = overlay::render_overlay(&preview, factor, marks);
        if let Some(profile) = profile {
            img = plot::attach_plot(&img, profile, plot::Side::auto(&img))?;
        }
        Some(overlay::encode_png(&img)?)
    } else {
        None
    };
    if let (Some(path), Some(png)) = (&out.overlay, &overlay_png) {
        record::atomic::write_atomic(path, png, out.force)?;
    }
    clock.lap("output");
    for (stage, ms) in &clock.stages {
        record.timings_ms.add(stage, *ms);
    }
    let html = out
        .report
        .as_ref()
        .map(|_| record::html::render_html(record, overlay_png.as_deref()));
    if let (Some(path), Some(html)) = (&out.report, &html) {
        record::atomic::write_atomic(path, html.as_bytes(), out.force)?;
    }
    if let Some(dir) = &out.archive {
        let name = Path::new(&record.photo.path)
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "photo".into());
        let entry = record::archive::ArchiveEntry {
            record,
            sample: out.sample.as_deref(),
            photo_bytes,
            photo_file_name: &name,
            overlay_png: overlay_png.as_deref(),
            report_html: html.as_deref(),
        };
        let at = record::archive::archive_measurement(dir, &entry, out.force)?;
        eprintln!("archived in {}", at.display());
    }
    let text = record::text::render_text(record);
    if out.json {
        eprint!("{text}");
        let json = serde_json::to_string_pretty(record)
            .map_err(|e| Error::Usage(format!("cannot serialise the record: {e}")))?;
        println!("{json}");
    } else {
        print!("{text}");
    }
    if out.timings {
        eprintln!("timings (ms):");
        for (stage, ms) in record.timings_ms.iter() {
            eprintln!("  {stage:<10} {ms:>9.1}");
        }
    }
    Ok(ExitCode::Measured)
}

/// The record's scale block: method, mm per px with its uncertainty, homography, residual.
pub fn scale_info(map: &ScreenMap) -> record::ScaleInfo {
    let h = map.homography();
    let mm_per_px = map.mm_per_px();
    let scale = record::ScaleInfo::new(map.method.name(), mm_per_px, mm_per_px * map.u_rel())
        .with_homography([
            [h[(0, 0)], h[(0, 1)], h[(0, 2)]],
            [h[(1, 0)], h[(1, 1)], h[(1, 2)]],
            [h[(2, 0)], h[(2, 1)], h[(2, 2)]],
        ]);
    match map.residual_px {
        Some(r) => scale.with_residual_px(r),
        None => scale,
    }
}

/// An estimate's budget as the record's lines.
pub fn budget_lines(e: &crate::uncertainty::Estimate) -> Vec<record::BudgetLine> {
    e.budget
        .iter()
        .map(|b| record::BudgetLine::new(&b.input, b.sensitivity, b.contribution))
        .collect()
}

/// The assumption line that reports a Monte Carlo check of `what`.
pub fn monte_carlo_note(
    what: &str,
    mc: &crate::uncertainty::McEstimate,
    v: &crate::uncertainty::Validation,
) -> String {
    format!(
        "Monte Carlo (JCGM 101) check{what}: mean {:.6e}, u {:.2e}, 95 % interval [{:.6e}, {:.6e}] m; {}",
        mc.mean,
        mc.u,
        mc.low,
        mc.high,
        if v.agrees {
            "agrees with the linear budget"
        } else {
            "differs from the linear budget"
        }
    )
}

/// The marks every overlay ends with: the scale's calibration stretch (where it has one),
/// a 10 mm scale bar and the caption.
pub fn scale_marks(map: &ScreenMap, caption: String) -> Vec<Mark> {
    let mut marks = Vec::with_capacity(3);
    if let Some((a, b)) = map.stretch_px {
        marks.push(Mark::Stretch {
            from: [a.x, a.y],
            to: [b.x, b.y],
            label: map.method.name().to_string(),
        });
    }
    marks.push(Mark::ScaleBar {
        mm_per_px: map.mm_per_px(),
        length_mm: 10.0,
    });
    marks.push(Mark::Caption(caption));
    marks
}
