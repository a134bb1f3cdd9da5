//! `fringegauge grating`: the pitch of a grating from the positions of its orders, or the
//! wavelength of the laser given the pitch.

use super::args::{OutputArgs, PhotoArgs, ScaleArgs};
use super::inputs::{DefaultU, InputBook, parse_flag, positive_flag};
use super::output::{self, Clock};
use crate::find::axis::pattern_axis;
use crate::find::blobs::{Blob, CoarseMap, block_size_for, coarse_map, find_blobs};
use crate::find::colour::keep_laser_coloured;
use crate::find::spot::{self, Spot};
use crate::find::{FindError, trim_span};
use crate::optics::grating::{self, GratingInputs, GratingSolution, Known, Mode, OrderSpot};
use crate::photo::{Channel, Photo};
use crate::quantity::{self, Dimension};
use crate::raster::Raster;
use crate::record::overlay::Mark;
use crate::record::{Feature, Fit, FitParameter, Record, ResultEntry};
use crate::scale::{ScaleMethod, ScreenMap};
use crate::uncertainty::{self, Input};
use crate::{Error, ExitCode};
use clap::Args;
use nalgebra::Vector2;
use rayon::prelude::*;
use std::collections::HashMap;

/// Arguments of `fringegauge grating`.
#[derive(Debug, Clone, Args)]
#[command(group(clap::ArgGroup::new("known").required(true).args(["wavelength", "pitch"])))]
pub struct GratingArgs {
    /// The photo and how to read it.
    #[command(flatten)]
    pub photo: PhotoArgs,

    /// Laser wavelength (solves the pitch), e.g. 650nm±3nm
    #[arg(
        long,
        value_name = "LENGTH",
        long_help = "Laser wavelength, e.g. 650nm±3nm. With it the \
        grating's pitch is measured. Without an uncertainty, a diode pointer's usual ±10 nm is \
        assumed and stated."
    )]
    pub wavelength: Option<String>,

    /// Known grating pitch (solves the wavelength), e.g. 1/600mm, 600/mm or 1.6um
    #[arg(long, value_name = "PITCH")]
    pub pitch: Option<String>,

    /// Grating-to-screen distance along the beam, e.g. 1.250m±2mm
    #[arg(long, value_name = "LENGTH", required = true)]
    pub distance: Option<String>,

    /// Reflection grating (e.g. an optical disc): screen parallel to it, beam through a hole
    #[arg(long)]
    pub reflect: bool,

    /// Angle of incidence of the beam on the grating [default: 0deg, i.e. normal]
    #[arg(long, value_name = "ANGLE")]
    pub incidence: Option<String>,

    /// The scale.
    #[command(flatten)]
    pub scale: ScaleArgs,

    /// What to write.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Standard uncertainty of the incidence angle when the beam was set normal by eye, from
/// the back-reflection: about ±1° (common practice), taken as rectangular.
const INCIDENCE_HALF_WIDTH_RAD: f64 = 1.0 * std::f64::consts::PI / 180.0;

/// Runs `fringegauge grating`.
pub fn run(args: &GratingArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    output::check_outputs(&args.output)?;
    let mut book = InputBook::new(args.photo.from_setup.as_deref());
    let inputs = physics_inputs(args, &mut book)?;

    let (photo, bytes) = output::load_photo(&args.photo.photo)?;
    clock.lap("decode");
    let forced = output::forced_channel(args.photo.channel.as_deref())?;
    let by_wavelength = match &inputs.known {
        Known::Wavelength(w) => Some(w.value),
        Known::Pitch(_) => None,
    };
    let (channel, channel_note, cmap) = pattern_channel(&photo, forced, by_wavelength);
    let candidates = laser_candidates(&photo, channel, &cmap);
    clock.lap("channel");
    let stretch = match args.scale.grid {
        Some(_) => Some(grid_stretch(&candidates, photo.width(), photo.height())?),
        None => None,
    };
    // Ruler marks and grid lines are neutral grey: luma carries them at full resolution.
    let mut map = output::screen_map(
        &photo.plane(forced.unwrap_or(Channel::Luma)),
        &args.scale,
        &mut book,
        stretch,
        photo.info.exif.focal_length_35mm,
    )?;
    clock.lap("scale");
    let found = locate_orders(&photo, channel, candidates, &cmap, &map, &inputs)?;
    clock.lap("spots");
    let order_spots: Vec<OrderSpot> = found
        .spots
        .iter()
        .map(|(m, s)| OrderSpot {
            order: *m,
            px: s.px,
            px_u: s.px_u,
        })
        .collect();
    let at: Vec<Vector2<f64>> = order_spots.iter().map(|s| s.px).collect();
    map.localize(&at);
    let seed = 0x05ee_d0ff_1e1d;
    let mc = args.output.monte_carlo.map(|n| (n, seed));
    let solution = grating::solve(&order_spots, &map, &inputs, mc)?;
    clock.lap("solve");

    let mut record = build_record(
        &photo,
        &book,
        &map,
        &found,
        &solution,
        &inputs,
        channel_note,
    );
    let marks = overlay_marks(&map, &found, &solution);
    output::emit(
        &mut record,
        &photo,
        &bytes,
        &marks,
        &args.output,
        &mut clock,
    )
}

fn physics_inputs(args: &GratingArgs, book: &mut InputBook) -> Result<GratingInputs, Error> {
    let distance_text = args.distance.as_deref().unwrap_or_default();
    let distance_q = positive_flag("distance", distance_text, Dimension::Length)?;
    // A tape measure read to ±2 mm, plus the uncertainty of where the grating's plane and
    // the screen are: ±3 mm or 0.2 % (common practice).
    let distance = book.add(
        "distance",
        "distance",
        distance_q,
        DefaultU::HalfWidth((3e-3f64).max(0.002 * distance_q.value)),
        "a tape measure between grating and screen (common practice)",
    )?;
    let known = match (&args.wavelength, &args.pitch) {
        (Some(w), None) => {
            let q = positive_flag("wavelength", w, Dimension::Length)?;
            Known::Wavelength(book.add(
                "wavelength",
                "wavelength",
                q,
                DefaultU::HalfWidth(10e-9),
                "diode pointers are commonly sold as ±10 nm (from memory)",
            )?)
        }
        (None, Some(p)) => {
            let q = quantity::parse_pitch(p)
                .and_then(|q| quantity::require_positive(q, "--pitch"))
                .map_err(|e| Error::Usage(format!("--pitch: {e}")))?;
            Known::Pitch(book.add(
                "pitch",
                "pitch",
                q,
                DefaultU::RelativeHalfWidth(0.005),
                "a stock grating's ruling taken as good to ±0.5 % (common practice)",
            )?)
        }
        _ => {
            return Err(Error::Usage(
                "give exactly one of --wavelength and --pitch".into(),
            ));
        }
    };
    let incidence = match &args.incidence {
        Some(text) => {
            let q = parse_flag("incidence", text, Dimension::Angle)?;
            if !(q.value.abs() < 80f64.to_radians()) {
                return Err(Error::Usage(format!(
                    "--incidence must be between -80° and 80°, got {:.1}°",
                    q.value.to_degrees()
                )));
            }
            book.add(
                "incidence",
                "incidence",
                q,
                DefaultU::HalfWidth(0.5f64.to_radians()),
                "an angle set with a protractor (common practice)",
            )?
        }
        None => {
            let i = Input::rectangular("incidence", 0.0, INCIDENCE_HALF_WIDTH_RAD);
            book.assumed(&i, Dimension::Angle, "normal incidence set by eye from the back-reflection, ±1° rectangular (common practice)");
            i
        }
    };
    Ok(GratingInputs {
        mode: if args.reflect {
            Mode::Reflection
        } else {
            Mode::Transmission
        },
        known,
        distance,
        incidence,
    })
}

/// The spots of the pattern with their orders.
pub struct FoundOrders {
    /// (order, spot), sorted by order.
    pub spots: Vec<(i32, Spot)>,
    /// Candidates seen in the photo.
    pub candidates: usize,
    /// Warnings from finding.
    pub warnings: Vec<String>,
}

/// The channel the pattern stands out most in, with its coarse map: each colour channel's
/// brightest candidate is compared by its height over the background noise (a laser is
/// nearly monochromatic, so one channel usually carries most of its light).
/// With a known wavelength the channel is the camera filter that passes it (blue below
/// 490 nm, green to 580 nm, red above: common practice for Bayer sensors), so a white
/// glint or window cannot outshine the laser in the choice.
pub fn pattern_channel(
    photo: &Photo,
    forced: Option<Channel>,
    wavelength_m: Option<f64>,
) -> (Channel, String, CoarseMap) {
    let block = block_size_for(photo.width(), photo.height());
    if let Some(c) = forced {
        return (
            c,
            format!("channel {c} chosen with --channel"),
            coarse_map(&photo.plane(c), block),
        );
    }
    if photo.channels() == 1 {
        return (
            Channel::Luma,
            "grey photo: its one channel is used".into(),
            coarse_map(&photo.plane(Channel::Luma), block),
        );
    }
    if let Some(w) = wavelength_m {
        let c = if w < 490e-9 {
            Channel::B
        } else if w < 580e-9 {
            Channel::G
        } else {
            Channel::R
        };
        let note = format!(
            "channel {c} chosen: the camera's filter for {:.0} nm",
            w * 1e9
        );
        return (c, note, coarse_map(&photo.plane(c), block));
    }
    let mut scored: Vec<(Channel, f64, CoarseMap)> = [Channel::R, Channel::G, Channel::B]
        .into_par_iter()
        .map(|c| {
            let m = coarse_map(&photo.plane(c), block);
            let peak = find_blobs(&m, 8.0, 1).first().map_or(0.0, |b| b.peak);
            (c, peak / m.noise.max(1e-6), m)
        })
        .collect();
    scored.sort_by(|a, b| b.1.total_cmp(&a.1));
    let note = format!(
        "channel {} chosen: its brightest spot stands {:.0}× the background noise above the \
         background ({} {:.0}×, {} {:.0}×)",
        scored[0].0, scored[0].1, scored[1].0, scored[1].1, scored[2].0, scored[2].1
    );
    let (c, _, m) = scored.swap_remove(0);
    (c, note, m)
}

/// The stretch of graph paper a `--grid` scale is counted along: the pattern's own line
/// through its spots, shifted to one side by three spot radii so their glare stays out of
/// the band, reaching a tenth of its length beyond the outermost spots. The scale is then
/// measured where the orders are, and its perspective along their line is the one that
/// matters.
fn grid_stretch(
    blobs: &[Blob],
    width: usize,
    height: usize,
) -> Result<(Vector2<f64>, Vector2<f64>), Error> {
    let brightest = (0..blobs.len())
        .max_by(|&a, &b| blobs[a].peak.total_cmp(&blobs[b].peak))
        .ok_or_else(|| {
            FindError::NoPattern(
                "no bright spots to lay the --grid stretch along: nothing stands out from the \
                 background"
                    .into(),
            )
        })?;
    let axis = pattern_axis(blobs, Some(brightest), 16)?;
    let pts: Vec<Vector2<f64>> = axis.members.iter().map(|&i| blobs[i].centroid).collect();
    let line = crate::fit::line::tls_line(&pts, &vec![1.0; pts.len()]).map_err(|e| {
        FindError::NoPattern(format!("the pattern's spots do not lie on a line: {e}"))
    })?;
    let t: Vec<f64> = pts.iter().map(|p| line.along(*p)).collect();
    let (lo, hi) = t
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let margin = (0.1 * (hi - lo)).max(50.0);
    let radius = axis
        .members
        .iter()
        .map(|&i| blobs[i].radius_px)
        .fold(0.0, f64::max);
    let side = Vector2::new(-line.direction.y, line.direction.x) * (3.0 * radius + 15.0);
    let inside = |p: Vector2<f64>| {
        p.x >= 1.0 && p.y >= 1.0 && p.x <= width as f64 - 2.0 && p.y <= height as f64 - 2.0
    };
    // Clip the stretch to the frame along the line, on whichever side has room.
    for offset in [side, -side] {
        let at = |s: f64| line.point + line.direction * s + offset;
        let (a, b) = trim_span(lo - margin, hi + margin, |t| inside(at(t)));
        if b - a >= 0.5 * (hi - lo) && b - a >= 30.0 {
            return Ok((at(a), at(b)));
        }
    }
    Err(FindError::NoPattern(
        "the pattern's line leaves the photo too soon to count the grid along it".into(),
    )
    .into())
}

/// The spot candidates of the pattern channel's coarse map that are laser light.
/// Grey photos and `--channel luma` keep all candidates: there is no colour to judge by.
pub(crate) fn laser_candidates(photo: &Photo, channel: Channel, cmap: &CoarseMap) -> Vec<Blob> {
    let mut blobs = find_blobs(cmap, 8.0, 60);
    let others: &[Channel] = match channel {
        Channel::R => &[Channel::G, Channel::B],
        Channel::G => &[Channel::R, Channel::B],
        Channel::B => &[Channel::R, Channel::G],
        Channel::Luma => &[],
    };
    if photo.channels() >= 3 && !others.is_empty() {
        let own = photo.plane(channel);
        let planes: Vec<_> = others.iter().map(|&c| photo.plane(c)).collect();
        let rasters: Vec<&dyn Raster> = planes.iter().map(|p| p as &dyn Raster).collect();
        keep_laser_coloured(&own, &rasters, &mut blobs);
    }
    blobs
}

/// Locates the pattern line and the orders among the candidates, then refines the order
/// spots.
pub fn locate_orders(
    photo: &Photo,
    channel: Channel,
    mut blobs: Vec<Blob>,
    cmap: &CoarseMap,
    map: &ScreenMap,
    inputs: &GratingInputs,
) -> Result<FoundOrders, Error> {
    let block = cmap.block;
    let total_clipped: usize = cmap.clipped.iter().map(|&c| c as usize).sum();
    let frame = (cmap.size.0 * cmap.size.1 * block * block).max(1);
    if total_clipped as f64 > 0.5 * frame as f64 {
        return Err(FindError::NoPattern(format!(
            "{:.0} % of the photo is saturated: take it with a shorter exposure or less gain",
            100.0 * total_clipped as f64 / frame as f64
        ))
        .into());
    }
    let plane = photo.plane(channel);
    let raster: &dyn Raster = &plane;
    // The ruler's light strip and its marks are not spots.
    if let (ScaleMethod::Ruler, Some((a, b))) = (map.method, map.stretch_px) {
        let reach = 0.1 * (b - a).norm() + 10.0;
        blobs.retain(|bl| distance_to_segment(bl.centroid, a, b) > reach + bl.radius_px);
    }
    if blobs.is_empty() {
        return Err(FindError::NoPattern(format!(
            "no bright spots: nothing stands out from the background (noise {:.4} of full scale); \
             check the laser is on and the exposure shows the spots. A grating whose pitch is \
             shorter than the wavelength sends no first order to the screen at all \
             (sin θ1 = λ/d > 1), and a reflection grating's zero order goes back into the hole",
            cmap.noise
        ))
        .into());
    }
    let mm_per_px = map.mm_per_px();
    let distance_mm = inputs.distance.value * 1e3;
    let mut anchors: Vec<usize> = (0..blobs.len()).collect();
    anchors.sort_by(|&a, &b| {
        blobs[b]
            .peak
            .total_cmp(&blobs[a].peak)
            .then(blobs[b].flux.total_cmp(&blobs[a].flux))
    });
    anchors.truncate(3);
    let axes: Vec<(usize, Vec<usize>)> = anchors
        .iter()
        .filter_map(|&a| {
            pattern_axis(&blobs, Some(a), 16)
                .ok()
                .map(|ax| (a, ax.members))
        })
        .collect();
    // Every candidate on an axis is fitted once: the fitted flux 2π·A·σ₁·σ₂ judges which
    // spot is the zero order even where the cores are clipped, and the order spots reuse
    // the fits.
    let mut on_axis: Vec<usize> = axes.iter().flat_map(|(_, m)| m.iter().copied()).collect();
    on_axis.sort_unstable();
    on_axis.dedup();
    let fitted: HashMap<usize, Spot> = on_axis
        .par_iter()
        .filter_map(|&i| spot::refine(raster, &blobs[i]).ok().map(|s| (i, s)))
        .collect();
    let brightness = |i: usize| {
        fitted.get(&i).map_or(blobs[i].flux, |s| {
            2.0 * std::f64::consts::PI * s.amplitude * s.sigma_px.0 * s.sigma_px.1
        })
    };
    let mut best: Option<(usize, Vec<(usize, i32)>)> = None;
    for (_, members) in &axes {
        let mm: Vec<Vector2<f64>> = members
            .iter()
            .map(|&i| map.to_mm(blobs[i].centroid))
            .collect();
        let Ok(line) = crate::fit::line::tls_line(&mm, &vec![1.0; mm.len()]) else {
            continue;
        };
        let along: Vec<f64> = mm.iter().map(|p| line.along(*p)).collect();
        let size: Vec<f64> = members
            .iter()
            .map(|&i| blobs[i].radius_px * mm_per_px)
            .collect();
        let flux: Vec<f64> = members.iter().map(|&i| brightness(i)).collect();
        let Some((orders, _ratio)) = grating::index_orders(
            &along,
            &size,
            &flux,
            inputs.mode,
            inputs.incidence.value,
            distance_mm,
        ) else {
            continue;
        };
        let assigned: Vec<(usize, i32)> = members
            .iter()
            .zip(&orders)
            .filter_map(|(&i, o)| o.map(|m| (i, m)))
            .collect();
        if best.as_ref().is_none_or(|(n, _)| assigned.len() > *n) {
            best = Some((assigned.len(), assigned));
        }
    }
    let Some((_, assigned)) = best else {
        let brightest = &blobs[anchors[0]];
        return Err(FindError::NoPattern(format!(
            "only one spot of the pattern is visible (at {:.0}, {:.0} px), presumably the zero \
             order: no first order reaches the screen in the frame. If the pitch is shorter than \
             the wavelength there is no first order at all (sin θ1 = λ/d > 1: e.g. a 0.32 µm \
             Blu-ray track in visible light); otherwise widen the frame or bring the screen closer",
            brightest.centroid.x, brightest.centroid.y
        ))
        .into());
    };
    let mut warnings = Vec::new();
    let mut spots: Vec<(i32, Spot)> = assigned
        .iter()
        .filter_map(|&(i, m)| fitted.get(&i).map(|s| (m, s.clone())))
        .collect();
    if spots.len() < assigned.len() {
        warnings.push(format!(
            "{} of {} orders could not be located to sub-pixel precision and were left out",
            assigned.len() - spots.len(),
            assigned.len()
        ));
    }
    spots.sort_by_key(|(m, _)| *m);
    let distinct_nonzero = spots.iter().filter(|(m, _)| *m != 0).count();
    if distinct_nonzero == 0 || spots.len() < 2 {
        return Err(FindError::Unmeasurable(
            "the orders found could not be measured (too close to the edge or too faint)".into(),
        )
        .into());
    }
    let has_zero = spots.iter().any(|(m, _)| *m == 0);
    let both_sides = spots.iter().any(|(m, _)| *m < 0) && spots.iter().any(|(m, _)| *m > 0);
    if !has_zero && !both_sides {
        warnings.push(
            "no zero order and orders on one side only: the order numbers rest on the \
             nearest spots being the lowest orders; include the zero order to be sure"
                .into(),
        );
    }
    Ok(FoundOrders {
        spots,
        candidates: blobs.len(),
        warnings,
    })
}

fn distance_to_segment(p: Vector2<f64>, a: Vector2<f64>, b: Vector2<f64>) -> f64 {
    let d = b - a;
    let t = ((p - a).dot(&d) / d.norm_squared()).clamp(0.0, 1.0);
    (p - (a + d * t)).norm()
}

fn order_label(m: i32) -> String {
    if m == 0 {
        "order 0".into()
    } else {
        format!("order {m:+}")
    }
}

fn build_record(
    photo: &Photo,
    book: &InputBook,
    map: &ScreenMap,
    found: &FoundOrders,
    sol: &GratingSolution,
    inputs: &GratingInputs,
    channel_note: String,
) -> Record {
    let mut record = Record::new("grating", photo.info.clone(), output::scale_info(map));
    record.setup.inputs = book.record.clone();
    record.features = found
        .spots
        .iter()
        .zip(&sol.screen_mm)
        .map(|((m, s), mm)| {
            Feature::point(
                &order_label(*m),
                [s.px.x, s.px.y],
                [s.px_u.x, s.px_u.y],
                [mm.x, mm.y],
            )
        })
        .collect();
    let f = &sol.fit;
    let s = sol.birge_ratio;
    record.fit = Some(Fit {
        model: match inputs.mode {
            Mode::Transmission => {
                "grating, transmission: y_m = y_0 + L·tan(asin(sin θi + m·λ/d) − θi)"
            }
            Mode::Reflection => {
                "grating, reflection: y_m = y_0 + L·(tan asin(sin θi + m·λ/d) − tan θi)"
            }
        }
        .to_string(),
        parameters: vec![
            FitParameter {
                name: "zero_order_along_m".into(),
                value: f.centre_mm * 1e-3,
                u: f.covariance[0][0].sqrt() * s * 1e-3,
            },
            FitParameter {
                name: "lambda_over_d".into(),
                value: f.ratio,
                u: f.covariance[1][1].sqrt() * s,
            },
        ],
        covariance: vec![
            vec![
                f.covariance[0][0] * s * s * 1e-6,
                f.covariance[0][1] * s * s * 1e-3,
            ],
            vec![
                f.covariance[1][0] * s * s * 1e-3,
                f.covariance[1][1] * s * s,
            ],
        ],
        rms_residual: (f.residuals_mm.iter().map(|r| r * r).sum::<f64>()
            / f.residuals_mm.len() as f64)
            .sqrt()
            * 1e-3,
        points: f.residuals_mm.len(),
    });
    let k = uncertainty::K_95;
    record.results.push(
        ResultEntry::new(sol.measurand, sol.estimate.value, sol.estimate.u, "m", k)
            .with_budget(output::budget_lines(&sol.estimate)),
    );
    if sol.measurand == "pitch" {
        record.results.push(
            ResultEntry::new(
                "line_density",
                sol.line_density.value,
                sol.line_density.u,
                "1/m",
                k,
            )
            .with_budget(output::budget_lines(&sol.line_density)),
        );
    }
    record.warnings.extend(map.warnings.iter().cloned());
    record.warnings.extend(found.warnings.iter().cloned());
    record.warnings.extend(sol.warnings.iter().cloned());
    record.assumptions.extend(book.assumptions.iter().cloned());
    record.assumptions.extend(map.assumptions.iter().cloned());
    record.assumptions.push(match inputs.mode {
        Mode::Transmission => "screen flat and perpendicular to the incident beam".to_string(),
        Mode::Reflection => "screen flat and parallel to the grating".to_string(),
    });
    record
        .assumptions
        .push("camera lens distortion negligible over the pattern".to_string());
    record.assumptions.push(channel_note);
    if let Some((mc, v)) = &sol.monte_carlo {
        record.assumptions.push(output::monte_carlo_note("", mc, v));
    }
    if sol.small_angle_error.abs() > 1e-4 {
        record.assumptions.push(format!(
            "exact angles used; the small-angle shortcut d = mλL/y would be off by {:.2} % at the outermost order",
            100.0 * sol.small_angle_error.abs()
        ));
    }
    record
}

fn overlay_marks(map: &ScreenMap, found: &FoundOrders, sol: &GratingSolution) -> Vec<Mark> {
    let mut marks = Vec::new();
    if let (Some((_, first)), Some((_, last))) = (found.spots.first(), found.spots.last()) {
        let d = last.px - first.px;
        let ext = d * 0.08;
        let (a, b) = (first.px - ext, last.px + ext);
        marks.push(Mark::Line {
            from: [a.x, a.y],
            to: [b.x, b.y],
        });
    }
    for (m, s) in &found.spots {
        let radius = (2.5 * s.sigma_px.0).clamp(6.0, 200.0);
        marks.push(Mark::Spot {
            center: [s.px.x, s.px.y],
            radius,
            label: format!("{m:+}").replace("+0", "0"),
        });
    }
    marks.extend(output::scale_marks(
        map,
        format!(
            "{} {} (k = 2)",
            sol.measurand,
            quantity::format_si(sol.estimate.value, 2.0 * sol.estimate.u, "m"),
        ),
    ));
    marks
}
