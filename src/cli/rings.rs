//! `fringegauge pinhole`: a pinhole's diameter from the radial profile of its Airy rings.
//! The ring-pattern stages shared with `particles` (centre, scale, radial profile) live in
//! [`measure_rings`].

use super::args::{LASER_CAUTION, OutputArgs, PhotoArgs, ScaleArgs};
use super::fringes::{FringeInputArgs, fit_entry, mc_note, monte_carlo, start};
use super::grating::pattern_channel;
use super::inputs::InputBook;
use super::output::{self, Clock};
use crate::find::FindError;
use crate::find::rings::{
    Annulus, RadialCells, RadialOptions, RadialProfile, RingCentre, core_radius_px, glow,
    refine_centre, start_centre,
};
use crate::optics::airy::AiryModel;
use crate::optics::pinhole::{self, PinholeInputs, RadialData};
use crate::optics::profile::FringeProfile;
use crate::photo::{Channel, Photo};
use crate::quantity;
use crate::record::overlay::Mark;
use crate::record::plot::ProfilePlot;
use crate::record::{Ellipse, Feature, Record, ResultEntry};
use crate::scale::ScreenMap;
use crate::uncertainty;
use crate::{Error, ExitCode};
use clap::Args;
use nalgebra::Vector2;
use std::f64::consts::PI;

/// Arguments of `fringegauge pinhole`.
#[derive(Debug, Clone, Args)]
#[command(after_long_help = LASER_CAUTION)]
pub struct PinholeArgs {
    /// The photo and how to read it.
    #[command(flatten)]
    pub photo: PhotoArgs,
    /// Wavelength, distance, plot.
    #[command(flatten)]
    pub physics: FringeInputArgs,
    /// The scale.
    #[command(flatten)]
    pub scale: ScaleArgs,
    /// What to write.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// What the photo gave a ring kind: the scale, the centre and the radial profile.
pub(super) struct RingsMeasured {
    pub photo: Photo,
    pub bytes: Vec<u8>,
    pub channel_note: String,
    pub map: ScreenMap,
    pub centre: RingCentre,
    pub cells: RadialCells,
    pub radial: RadialProfile,
    /// The radial profile as profile samples (x = radius, mm).
    pub profile: FringeProfile,
    /// The same from the two halves of the sectors (left and right of the centre).
    pub halves: [FringeProfile; 2],
}

/// Pixels the radial profile reads at most (a stride thins larger photos).
const PROFILE_PIXELS: f64 = 3.5e6;

/// Share of the frame's larger side within which the centre's gradients are read.
const START_REACH: f64 = 0.3;

/// Where a ring kind's scale comes from.
pub(super) enum MapSource<'a> {
    /// Made from the scale flags (ruler, points, grid, mm per px).
    Flags(&'a ScaleArgs),
    /// Already known (e.g. a uniform px scale for a reciprocal-space image).
    Given(Box<ScreenMap>),
}

/// Decodes, picks the channel, finds the centre, makes the scale and tabulates the
/// radial profile in screen mm.
pub(super) fn measure_rings(
    photo_args: &PhotoArgs,
    scale: &ScaleArgs,
    book: &mut InputBook,
    wavelength_m: Option<f64>,
    clock: &mut Clock,
) -> Result<RingsMeasured, Error> {
    measure_rings_with(
        photo_args,
        MapSource::Flags(scale),
        CentreReach::Frame,
        book,
        wavelength_m,
        clock,
    )
}

/// How far out the centre refinement reads the rings.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) enum CentreReach {
    /// As far as the frame reaches.
    Frame,
    /// Only inside a lit screen's round outline where the profile shows one (a
    /// diffraction tube): the outline, the glass and the room beyond need not be
    /// concentric with the beam.
    InsideOutline,
}

/// [`measure_rings`] with the scale from `source` and the centre read within `reach`.
pub(super) fn measure_rings_with(
    photo_args: &PhotoArgs,
    source: MapSource,
    reach: CentreReach,
    book: &mut InputBook,
    wavelength_m: Option<f64>,
    clock: &mut Clock,
) -> Result<RingsMeasured, Error> {
    let (photo, bytes) = output::load_photo(&photo_args.photo)?;
    clock.lap("decode");
    let forced = output::forced_channel(photo_args.channel.as_deref())?;
    let (channel, channel_note, cmap) = pattern_channel(&photo, forced, wavelength_m);
    let plane = photo.plane(channel);
    let all_clipped = cmap
        .clipped
        .iter()
        .all(|&c| usize::from(c) >= cmap.block * cmap.block);
    if all_clipped {
        return Err(FindError::Unmeasurable(
            "the whole photo is saturated: take it with a shorter exposure, less gain or a \
             weaker beam"
                .into(),
        )
        .into());
    }
    let start_px = start_centre(&cmap, START_REACH)?;
    let (w, h) = (photo.width() as f64, photo.height() as f64);
    if !(start_px.x >= 0.0 && start_px.y >= 0.0 && start_px.x < w && start_px.y < h) {
        return Err(FindError::NoPattern(format!(
            "the rings' centre lies off the frame (near px {:.0}, {:.0}): frame the photo so \
             that the bright centre is in it",
            start_px.x, start_px.y
        ))
        .into());
    }
    clock.lap("centre start");
    let mut map = match source {
        MapSource::Flags(scale) => {
            let stretch = scale.grid.as_ref().map(|_| grid_stretch(start_px, w, h));
            output::screen_map(
                &photo.plane(scale_channel(wavelength_m)),
                scale,
                book,
                stretch,
                photo.info.exif.focal_length_35mm,
            )?
        }
        MapSource::Given(map) => *map,
    };
    clock.lap("scale");
    let start_mm = map.to_mm(start_px);
    let mm_px = map.mm_per_px_at(start_px);
    let outer_mm = frame_reach_mm(&map, start_mm, w, h);
    let core_mm = core_radius_px(&cmap, start_px) * mm_px;
    let mut annulus = Annulus {
        inner_mm: (1.1 * core_mm).max(3.0 * mm_px),
        outer_mm,
    };
    if reach == CentreReach::InsideOutline {
        annulus = inside_outline(&plane, &map, start_mm, annulus, mm_px);
    }
    let centre = refine_centre(&plane, &map, start_mm, annulus)?;
    clock.lap("centre");
    // Past some 3 megapixels every pixel adds little but time: the profile's bins hold
    // hundreds of pixels each already, so large photos are read on every other row and
    // column, with bins widened to match.
    let stride = ((w * h / PROFILE_PIXELS).sqrt().ceil() as usize).max(1);
    let opts = RadialOptions {
        sectors: 36,
        bin_mm: 0.5 * mm_px * stride as f64,
        r_max_mm: outer_mm,
        stride,
    };
    let cells = RadialCells::tabulate(&plane, &map, centre.mm, &opts);
    let radial = cells.profile(|_| true);
    let left = |s: usize| cells.sector_angle(s).cos() < 0.0;
    let halves = [
        as_profile(&cells.profile(left)),
        as_profile(&cells.profile(|s| !left(s))),
    ];
    let profile = as_profile(&radial);
    let sample: Vec<Vector2<f64>> = (0..16)
        .map(|k| {
            let a = k as f64 * PI / 8.0;
            map.to_px(centre.mm + Vector2::new(a.cos(), a.sin()) * 0.5 * outer_mm)
        })
        .collect();
    map.localize(&sample);
    clock.lap("profile");
    Ok(RingsMeasured {
        photo,
        bytes,
        channel_note,
        map,
        centre,
        cells,
        radial,
        profile,
        halves,
    })
}

/// The channel the scale is read in: the one the laser lights least, so that the
/// pattern's light and speckle over a ruler or grid do not break up its marks (a colour
/// camera's blue pixels barely see red light, its red pixels barely see green or blue;
/// the channel bands are common practice for Bayer sensors). Luma when the wavelength is
/// not known.
fn scale_channel(wavelength_m: Option<f64>) -> Channel {
    match wavelength_m.map(|w| w * 1e9) {
        Some(nm) if nm >= 570.0 => Channel::B,
        Some(nm) if nm > 0.0 => Channel::R,
        _ => Channel::Luma,
    }
}

/// The centre refinement's annulus kept inside a lit screen's outline, from a coarse
/// profile about the start (every few pixels, enough for the outline's step): out to the
/// outline less 5 % and ten pixels, from beyond the spot's flank.
fn inside_outline(
    plane: &dyn crate::raster::Raster,
    map: &ScreenMap,
    start_mm: Vector2<f64>,
    annulus: Annulus,
    mm_px: f64,
) -> Annulus {
    let area_px = PI * (annulus.outer_mm / mm_px).powi(2);
    let stride = (area_px / 1.0e6).sqrt().ceil().max(1.0) as usize;
    let opts = RadialOptions {
        sectors: 36,
        bin_mm: 0.5 * mm_px * stride as f64,
        r_max_mm: annulus.outer_mm,
        stride,
    };
    let coarse = RadialCells::tabulate(plane, map, start_mm, &opts).profile(|_| true);
    let px = mm_px * stride as f64;
    let spot = glow::spot_reach_mm(&coarse, px);
    match glow::tube_edge(&coarse, spot, px) {
        Some(edge) => {
            let outer = 0.95 * edge.radius_mm - 10.0 * mm_px;
            let inner = annulus.inner_mm.max(spot);
            if outer > inner + 40.0 * mm_px {
                Annulus {
                    inner_mm: inner,
                    outer_mm: outer,
                }
            } else {
                annulus
            }
        }
        None => annulus,
    }
}

fn as_profile(p: &RadialProfile) -> FringeProfile {
    FringeProfile {
        x_mm: p.r_mm.clone(),
        value: p
            .value
            .iter()
            .map(|v| if v.is_finite() { *v } else { 0.0 })
            .collect(),
        used: p.value.iter().map(|v| v.is_finite()).collect(),
        clipped: p.clipped.clone(),
    }
}

/// The farthest screen distance from the centre that is still inside the frame along the
/// image axes' directions, mm: the largest radius worth tabulating.
fn frame_reach_mm(map: &ScreenMap, c_mm: Vector2<f64>, w: f64, h: f64) -> f64 {
    [
        (0.0, 0.0),
        (w - 1.0, 0.0),
        (0.0, h - 1.0),
        (w - 1.0, h - 1.0),
    ]
    .iter()
    .map(|&(x, y)| (map.to_mm(Vector2::new(x, y)) - c_mm).norm())
    .fold(0.0, f64::max)
}

/// A stretch for counting graph-paper lines: horizontal, on the side of the centre with
/// more room, a third of the frame away (out of the bright centre and most of a halo's
/// speckle, whose grains break up the lines).
fn grid_stretch(c: Vector2<f64>, w: f64, h: f64) -> (Vector2<f64>, Vector2<f64>) {
    let dy = if c.y < 0.5 * h { h / 3.0 } else { -h / 3.0 };
    let y = (c.y + dy).clamp(1.0, h - 2.0);
    (Vector2::new(0.1 * w, y), Vector2::new(0.9 * w, y))
}

/// The record common to the ring kinds.
pub(super) fn base_record(kind: &str, m: &RingsMeasured, book: &InputBook) -> Record {
    base_record_with(
        kind,
        m,
        book,
        "screen flat and perpendicular to the beam; Fraunhofer (far-field) diffraction",
    )
}

/// [`base_record`] with the kind's own statement of the screen's geometry.
pub(super) fn base_record_with(
    kind: &str,
    m: &RingsMeasured,
    book: &InputBook,
    geometry: &str,
) -> Record {
    let mut record = Record::new(kind, m.photo.info.clone(), output::scale_info(&m.map));
    record.setup.inputs = book.record.clone();
    record.warnings.extend(m.map.warnings.iter().cloned());
    record.assumptions.extend(book.assumptions.iter().cloned());
    record.assumptions.extend(m.map.assumptions.iter().cloned());
    record.assumptions.push(format!(
        "radial profile in {:.4} mm bins over {} sectors (20 % trimmed mean across sectors; \
         cells cut by the frame left out); centre refined over {} sectors in {} passes",
        m.cells.bin_mm, m.cells.sectors, m.centre.sectors_used, m.centre.iterations
    ));
    record.assumptions.push(geometry.into());
    record
        .assumptions
        .push("camera lens distortion negligible over the pattern".into());
    record.assumptions.push(m.channel_note.clone());
    let c = &m.centre;
    record.features.push(Feature::point(
        "centre",
        [c.px.x, c.px.y],
        [c.u_px[0].max(1e-6), c.u_px[1].max(1e-6)],
        [c.mm.x, c.mm.y],
    ));
    record
}

/// A ring feature: its radius in mm and the ellipse it makes in the photo (the screen
/// circle mapped through the inverse homography, fitted by its principal axes).
pub(super) fn ring_feature(m: &RingsMeasured, label: &str, r_mm: f64, u_mm: f64) -> Feature {
    let ellipse = circle_in_photo(&m.map, m.centre.mm, r_mm);
    let mut f = Feature::point(
        label,
        [ellipse.cx, ellipse.cy],
        [u_mm / m.map.mm_per_px_at(m.centre.px); 2],
        [m.centre.mm.x, m.centre.mm.y],
    );
    f.radius_mm = Some(r_mm);
    f.radius_px = Some((ellipse.a * ellipse.b).sqrt());
    f.ellipse = Some(ellipse);
    f
}

/// The ellipse in the photo of the screen circle of `r_mm` about `c_mm`: the image of a
/// circle under a homography is a conic; its centre and axes come from the second
/// moments of 180 mapped points (exact for an ellipse sampled uniformly in its own
/// parameter, and within a part in 10⁴ for the mild perspective of a photographed screen).
pub(super) fn circle_in_photo(map: &ScreenMap, c_mm: Vector2<f64>, r_mm: f64) -> Ellipse {
    let pts: Vec<Vector2<f64>> = (0..180)
        .map(|k| {
            let a = k as f64 * 2.0 * PI / 180.0;
            map.to_px(c_mm + Vector2::new(a.cos(), a.sin()) * r_mm)
        })
        .collect();
    let n = pts.len() as f64;
    let mean = pts.iter().sum::<Vector2<f64>>() / n;
    let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
    for p in &pts {
        let d = p - mean;
        sxx += d.x * d.x;
        syy += d.y * d.y;
        sxy += d.x * d.y;
    }
    let (sxx, syy, sxy) = (sxx / n, syy / n, sxy / n);
    let tr = 0.5 * (sxx + syy);
    let det = ((0.5 * (sxx - syy)).powi(2) + sxy * sxy).sqrt();
    let angle = 0.5 * (2.0 * sxy).atan2(sxx - syy);
    // A uniformly sampled ellipse of semi-axes a, b has variances a²/2 and b²/2.
    Ellipse {
        cx: mean.x,
        cy: mean.y,
        a: (2.0 * (tr + det)).sqrt(),
        b: (2.0 * (tr - det).max(0.0)).sqrt(),
        angle,
    }
}

/// Runs `fringegauge pinhole`.
pub fn run_pinhole(args: &PinholeArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    let (mut book, wavelength, distance) = start(&args.physics, &args.output, &args.photo)?;
    let m = measure_rings(
        &args.photo,
        &args.scale,
        &mut book,
        Some(wavelength.value),
        &mut clock,
    )?;
    let inputs = PinholeInputs {
        wavelength,
        distance,
    };
    let data = RadialData {
        profile: &m.profile,
        std_error: &m.radial.std_error,
        halves: Some([&m.halves[0], &m.halves[1]]),
    };
    let sol = pinhole::solve(data, &m.map, &inputs, monte_carlo(&args.output))?;
    clock.lap("fit");
    let mut record = base_record("pinhole", &m, &book);
    record.fit = Some(fit_entry(
        "Airy: I = B + B′·u + B″·u² + I0·[2·J1(x)/x]², x = π D s/λ, u = r/L, s = r/√(r² + L²)",
        &AiryModel,
        &sol.fit,
    ));
    let k = uncertainty::K_95;
    record.results.push(
        ResultEntry::new("diameter", sol.diameter.value, sol.diameter.u, "m", k)
            .with_budget(output::budget_lines(&sol.diameter)),
    );
    for ring in &sol.rings {
        let label = format!(
            "{} ring {}",
            if ring.dark { "dark" } else { "bright" },
            ring.order
        );
        record
            .features
            .push(ring_feature(&m, &label, ring.radius.r_mm, ring.radius.u_mm));
    }
    if let Some(c) = &sol.cross_check {
        record.assumptions.push(format!(
            "diameter from the whole-profile Airy fit; cross-check from the radii of {} rings \
             (π·D·sin θ/λ at the zeros of J1 and J2): {}",
            sol.rings.len(),
            quantity::format_si(c.value, c.u, "m")
        ));
    }
    if let Some(id) = &sol.identification {
        record.assumptions.push(format!(
            "rings told apart by their radius ratios: the first visible dark ring is ring {} \
             (χ²/ν {:.3e}; next best, ring {}, χ²/ν {:.3e})",
            id.first_order,
            id.chi2,
            id.runner_up.map_or(0, |r| r.0),
            id.runner_up.map_or(f64::NAN, |r| r.1)
        ));
    }
    record.assumptions.push(format!(
        "saturated centre out to {:.3} mm, fitted as lower bounds; residual correlation \
         allowed over {} bins",
        sol.core_radius_mm, sol.fit.lags
    ));
    record.warnings.extend(sol.warnings.iter().cloned());
    mc_note(&mut record, &sol.monte_carlo);
    let caption = format!(
        "D {} (k = 2)",
        quantity::format_si(sol.diameter.value, 2.0 * sol.diameter.u, "m")
    );
    let markers: Vec<(f64, String)> = sol
        .rings
        .iter()
        .filter(|r| r.dark)
        .map(|r| (r.radius.r_mm, format!("{}", r.order)))
        .collect();
    finish_rings(
        &mut record,
        &m,
        RingPlot {
            model: &sol.model_values,
            fitted: &sol.fitted,
            markers,
            title: "pinhole: radial profile (log scale)".into(),
            caption,
            below: None,
        },
        &args.physics,
        &args.output,
        &mut clock,
    )
}

/// What the ring kinds plot.
pub(super) struct RingPlot<'a> {
    pub model: &'a [f64],
    pub fitted: &'a [bool],
    pub markers: Vec<(f64, String)>,
    pub title: String,
    pub caption: String,
    /// A second plot drawn under the profile in the `--plot` file (the size distribution).
    pub below: Option<ProfilePlot<'a>>,
}

/// Plot, overlay marks and outputs. The profile is plotted as log10 of the intensity:
/// the rings are a few per cent of the centre or less, invisible on a linear axis.
pub(super) fn finish_rings(
    record: &mut Record,
    m: &RingsMeasured,
    f: RingPlot,
    physics: &FringeInputArgs,
    out: &OutputArgs,
    clock: &mut Clock,
) -> Result<ExitCode, Error> {
    let floor = m
        .profile
        .value
        .iter()
        .copied()
        .filter(|v| *v > 0.0)
        .fold(f64::INFINITY, f64::min)
        .max(1e-6);
    let log = |v: &[f64]| -> Vec<f64> { v.iter().map(|x| x.max(floor).log10()).collect() };
    let (measured, model) = (log(&m.profile.value), log(f.model));
    let used: Vec<bool> = (0..f.fitted.len())
        .map(|i| f.fitted[i] && m.profile.exact(i))
        .collect();
    let plot = ProfilePlot {
        title: f.title,
        x_label: "radius on the screen (mm)".into(),
        y_label: "log10 intensity (linear light)".into(),
        x: &m.profile.x_mm,
        measured: &measured,
        used: &used,
        model: &model,
        markers: f.markers,
    };
    if let Some(path) = &physics.plot {
        match &f.below {
            None => crate::record::plot::write_plot(path, &plot, 1200, 700, out.force)?,
            Some(below) => {
                let top = crate::record::plot::render_profile(&plot, 1200, 700)?;
                let bottom = crate::record::plot::render_profile(below, 1200, 560)?;
                let mut both = image::RgbImage::new(1200, 700 + 560);
                image::imageops::replace(&mut both, &top, 0, 0);
                image::imageops::replace(&mut both, &bottom, 0, 700);
                let png = crate::record::encode_png(&both)?;
                crate::record::write_atomic(path, &png, out.force)?;
            }
        }
    }
    let mut marks = Vec::new();
    for feat in &record.features {
        match &feat.ellipse {
            Some(e) => marks.push(Mark::Ellipse {
                center: [e.cx, e.cy],
                a: e.a,
                b: e.b,
                angle: e.angle,
                label: feat.label.replace(" ring ", " "),
            }),
            None => marks.push(Mark::Spot {
                center: feat.px,
                radius: 6.0,
                label: feat.label.clone(),
            }),
        }
    }
    marks.extend(output::scale_marks(&m.map, f.caption));
    output::emit_with_plot(record, &m.photo, &m.bytes, &marks, Some(&plot), out, clock)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::scale::ScaleMethod;
    use nalgebra::Matrix3;

    #[test]
    fn a_circle_seen_square_on_is_a_circle_in_the_photo() {
        let map = ScreenMap::uniform(ScaleMethod::MmPerPx, 0.1).unwrap();
        let e = circle_in_photo(&map, Vector2::new(10.0, 8.0), 5.0);
        assert!(
            (e.a - 50.0).abs() < 1e-9 && (e.b - 50.0).abs() < 1e-9,
            "{e:?}"
        );
        assert!((e.cx - 100.0).abs() < 1e-9 && (e.cy - 80.0).abs() < 1e-9);
    }

    #[test]
    fn a_stretched_map_gives_the_stretched_ellipse() {
        // px → mm scales x by 0.1 and y by 0.2: a 5 mm circle is 50 × 25 px, major along x.
        let h = Matrix3::new(0.1, 0.0, 0.0, 0.0, 0.2, 0.0, 0.0, 0.0, 1.0);
        let map = ScreenMap::from_homography(ScaleMethod::Points, h, Vector2::zeros()).unwrap();
        let e = circle_in_photo(&map, Vector2::new(10.0, 8.0), 5.0);
        assert!(
            (e.a - 50.0).abs() < 1e-9 && (e.b - 25.0).abs() < 1e-9,
            "{e:?}"
        );
        assert!(e.angle.abs() < 1e-9);
    }
}
