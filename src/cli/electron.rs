//! `fringegauge electron`: lattice spacings from the rings of a polycrystalline film in an
//! electron-diffraction tube. The centre, scale and radial profile are the ring kinds'
//! ([`super::rings`]); the rings are found as peaks on the phosphor's glow
//! ([`crate::find::rings::peaks`]), their ellipses in the photo from their ridges
//! ([`crate::find::rings::ridge`]); the physics is [`crate::optics::electron`] and
//! [`crate::optics::lattice`], assembled in [`physics`].

mod physics;
mod plot;
mod setup_file;

use super::args::{OutputArgs, PhotoArgs, ScaleArgs};
use super::inputs::InputBook;
use super::output::{self, Clock};
use super::rings::{
    CentreReach, MapSource, RingsMeasured, base_record_with, measure_rings_with, ring_feature,
};
use crate::find::FindError;
use crate::find::rings::peaks::{
    MAX_FWHM_SHARE, MIN_FWHM_PX, MIN_SIGNIFICANCE, PeakOptions, RingPeak, RingSearch,
    find_ring_peaks,
};
use crate::find::rings::ridge::{RingEllipse, ring_ellipse};
use crate::quantity;
use crate::record::overlay::Mark;
use crate::record::{Ellipse, Fit, FitParameter, Record, RecordError, ScaleInfo};
use crate::scale::{ScaleMethod, ScreenMap};
use crate::{Error, ExitCode};
use clap::Args;
use physics::{Mode, Ring};
use std::path::PathBuf;

/// Kilovolt caution shown in the help of `electron` (DESIGN §8).
pub const TUBE_CAUTION: &str = "\
CAUTION: electron-diffraction tubes run at kilovolts. Connect them only with the supply's own \
interlocked leads, keep the beam current within the tube maker's limit, and follow local \
electrical-safety rules. This tool measures; it does not certify: defer to local codes and \
licensed practice.";

/// Arguments of `fringegauge electron`.
#[derive(Debug, Clone, Args)]
#[command(after_long_help = TUBE_CAUTION)]
pub struct ElectronArgs {
    /// The photo and how to read it.
    #[command(flatten)]
    pub photo: PhotoArgs,

    /// Accelerating voltage, e.g. 4.5kV±20V
    #[arg(
        long,
        value_name = "VOLTAGE",
        required_unless_present = "reciprocal_per_px",
        long_help = "Accelerating voltage, e.g. 4.5kV±20V; it sets the electrons' \
                     (relativistic) wavelength. Without an uncertainty a panel meter's ±1 % \
                     is assumed and stated. Tubes run at kilovolts: use only the supply's \
                     own interlocked leads."
    )]
    pub voltage: Option<String>,

    /// Film-to-screen distance along the beam (flat screen), e.g. 131mm±1mm
    #[arg(long, value_name = "LENGTH")]
    pub distance: Option<String>,

    /// The screen: flat (at --distance) or sphere:RADIUS (a bulb centred on the film)
    #[arg(
        long,
        value_name = "SCREEN",
        long_help = "The tube's screen: flat, perpendicular to the beam at --distance \
                     (r = L·tan 2θ), or sphere:RADIUS, a bulb centred on the film seen from \
                     the front (r = R·sin 2θ), e.g. sphere:65mm±0.5mm [default: flat]"
    )]
    pub screen: Option<String>,

    /// Index the rings against a family by their ratios: FAMILY[:a=..[,c=..]]
    #[arg(
        long,
        value_name = "LATTICE",
        conflicts_with = "calibrate_with",
        long_help = "Index the rings against a lattice family by the ratios of their \
                     spacings and refine its constant(s): FAMILY[:a=LEN[,c=LEN]] with FAMILY \
                     one of sc, fcc, bcc, diamond, hex (hex without c: hk.0 rings only, as \
                     for turbostratic carbon). Constants, where given, are only compared \
                     with the measured ones, never copied into the result."
    )]
    pub lattice: Option<String>,

    /// Solve the camera length from a film of known lattice, e.g. fcc:a=0.40782nm
    #[arg(
        long = "calibrate-with",
        value_name = "LATTICE",
        long_help = "Solve the camera length (flat screen) or bulb radius (sphere) from a \
                     film of known lattice, e.g. fcc:a=0.40782nm for gold. --distance, if \
                     given, is the start and a check. With --save-setup the result is \
                     written as a setup file for the photos that follow."
    )]
    pub calibrate_with: Option<String>,

    /// Write the calibrated bench as a setup file for later photos (with --calibrate-with)
    #[arg(
        long = "save-setup",
        value_name = "FILE.toml",
        requires = "calibrate_with"
    )]
    pub save_setup: Option<PathBuf>,

    /// The image's scale is reciprocal already: 1/d per px, e.g. 0.0125/nm
    #[arg(
        long = "reciprocal-per-px",
        value_name = "VALUE",
        conflicts_with_all = ["voltage", "distance", "screen", "calibrate_with", "ruler", "points", "grid", "mm_per_px"],
        long_help = "The image is scaled in reciprocal space already (a microscope's \
                     diffraction image): VALUE is 1/d per px (not 2π/d), e.g. 0.0125/nm or \
                     0.0125±0.0001/nm (a bare number is in 1/nm). Each ring gives \
                     d = 1/(r·VALUE); no voltage, distance or scale is needed."
    )]
    pub reciprocal_per_px: Option<String>,

    /// Write the radial profile with the glow and the fitted rings
    #[arg(long, value_name = "FILE.png")]
    pub plot: Option<PathBuf>,

    /// The scale.
    #[command(flatten)]
    pub scale: ScaleArgs,

    /// What to write.
    #[command(flatten)]
    pub output: OutputArgs,
}

/// Runs `fringegauge electron`.
pub fn run(args: &ElectronArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    output::check_outputs(&args.output)?;
    for path in [&args.plot, &args.save_setup].into_iter().flatten() {
        if path.exists() && !args.output.force {
            return Err(RecordError::Exists(path.display().to_string()).into());
        }
    }
    let mut book = InputBook::new(args.photo.from_setup.as_deref());
    let (mode, lattice) = physics::read_inputs(args, &mut book)?;
    let reciprocal = matches!(mode, Mode::Reciprocal { .. });
    let source = if reciprocal {
        // Radii in px: the "screen" is the image itself.
        MapSource::Given(Box::new(ScreenMap::uniform(ScaleMethod::MmPerPx, 1.0)?))
    } else {
        MapSource::Flags(&args.scale)
    };
    let m = measure_rings_with(
        &args.photo,
        source,
        CentreReach::InsideOutline,
        &mut book,
        None,
        &mut clock,
    )?;
    let px_mm = m.map.mm_per_px_at(m.centre.px);
    beam_on(&m.radial, px_mm)?;
    let search = find_ring_peaks(
        &m.radial,
        &PeakOptions {
            px_mm,
            core_mm: 0.0,
        },
        &m.cells,
    )?;
    clock.lap("rings");
    if search.peaks.is_empty() {
        return Err(no_rings(&search, reciprocal).into());
    }
    let ellipses: Vec<Option<RingEllipse>> = search
        .peaks
        .iter()
        .map(|p| ring_ellipse(&m.cells, &m.map, &search.glow, p))
        .collect();
    clock.lap("ellipses");
    let rings: Vec<Ring> = search
        .peaks
        .iter()
        .enumerate()
        .map(|(i, p)| Ring {
            label: format!("ring {}", i + 1),
            radius: p.radius_mm,
            u: p.u_radius_mm,
        })
        .collect();
    let outcome = physics::solve(&mode, lattice.as_ref(), &rings, &m.map.components)?;
    clock.lap("solve");

    let mut record = base_record_with("electron", &m, &book, &physics::geometry_note(&mode));
    if reciprocal {
        reciprocal_scale(&mut record, &mode);
    }
    let unit = if reciprocal { "px" } else { "mm" };
    for (i, peak) in search.peaks.iter().enumerate() {
        let label = match &outcome.index[i] {
            Some(ix) => format!("ring {} ({ix})", i + 1),
            None => format!("ring {}", i + 1),
        };
        record
            .features
            .push(feature(&m, &label, peak, ellipses[i].as_ref(), reciprocal));
    }
    record.fit = Some(fit_entry(&search, px_mm, reciprocal));
    record.results.extend(outcome.results.iter().cloned());
    record.warnings.extend(outcome.warnings.iter().cloned());
    record.warnings.extend(frame_warnings(&m, &search, unit));
    record.warnings.extend(ellipse_warnings(&ellipses));
    record
        .assumptions
        .extend(outcome.assumptions.iter().cloned());
    record.assumptions.extend(search_notes(&search, unit));
    if let (Some(cal), Some(path)) = (&outcome.calibration, &args.save_setup) {
        if let Some(w) = outcome.warnings.iter().find(|w| w.contains("do not fit")) {
            return Err(FindError::Unmeasurable(format!(
                "{w}; the setup file {} was not written",
                path.display()
            ))
            .into());
        }
        let reference = outcome
            .reference
            .as_ref()
            .ok_or_else(|| Error::Usage("a calibration without its reference film".into()))?;
        setup_file::save(
            path,
            args.output.force,
            cal,
            &setup_file::SavedBench {
                voltage: args.voltage.as_deref().unwrap_or_default(),
                reference,
                photo: &m.photo.info,
                created: &record.created,
            },
        )?;
        record.assumptions.push(format!(
            "the calibrated bench was written to {} for use with --setup",
            path.display()
        ));
    }
    finish(&mut record, &m, &search, &outcome, args, unit, &mut clock)
}

/// The record's scale block for a reciprocal image: radii in px, the scale among the
/// inputs.
fn reciprocal_scale(record: &mut Record, mode: &Mode) {
    record.scale = ScaleInfo::new("reciprocal-per-px", 1.0, 0.0);
    if let Mode::Reciprocal { per_px } = mode {
        record.assumptions.push(format!(
            "the image is scaled in reciprocal space at {} per px (the input \
             reciprocal-per-px); radii are in px and the scale block's mm per px is 1",
            quantity::format_in(per_px.value * 1e-9, per_px.u * 1e-9, "")
                .trim()
                .to_string()
                + " nm⁻¹"
        ));
    }
}

/// The undiffracted beam's spot outshines everything else on a tube's screen: where the
/// centre found is neither saturated nor five times brighter than the profile's median, no
/// beam reaches the screen.
fn beam_on(profile: &crate::find::rings::RadialProfile, px_mm: f64) -> Result<(), FindError> {
    let near: Vec<f64> = (0..profile.r_mm.len())
        .filter(|&i| profile.r_mm[i] <= 5.0 * px_mm && profile.has(i))
        .map(|i| profile.value[i])
        .collect();
    let clipped =
        (0..profile.r_mm.len()).any(|i| profile.r_mm[i] <= 5.0 * px_mm && profile.clipped[i]);
    let mut all: Vec<f64> = profile
        .value
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    all.sort_unstable_by(f64::total_cmp);
    let median = all.get(all.len() / 2).copied().unwrap_or(0.0);
    let peak = near.iter().copied().fold(0.0, f64::max);
    if clipped || (median > 0.0 && peak > 5.0 * median) {
        Ok(())
    } else {
        Err(FindError::NoPattern(format!(
            "no beam spot: the brightest place in the photo is only {:.1}× the light around \
             it, where the undiffracted beam's spot would outshine everything: the beam \
             looks off or blocked. Check the heater and anode supplies and that the tube \
             is aimed at the camera (kilovolts: only through the supply's interlocked leads)",
            if median > 0.0 { peak / median } else { 0.0 }
        )))
    }
}

/// What a photo without rings showed, and what to try.
fn no_rings(search: &RingSearch, reciprocal: bool) -> FindError {
    let unit = if reciprocal { "px" } else { "mm" };
    let (lo, hi) = search.range_mm;
    let seen = if search.rejected.is_empty() {
        "nothing stood out of the glow at all".to_string()
    } else {
        let mut listed: Vec<&crate::find::rings::peaks::Rejected> =
            search.rejected.iter().collect();
        listed.sort_by(|a, b| a.radius_mm.total_cmp(&b.radius_mm));
        format!(
            "{} candidate(s) did not count: {}",
            listed.len(),
            listed
                .iter()
                .take(4)
                .map(|r| format!("at {:.2} {unit}, {}", r.radius_mm, r.why))
                .collect::<Vec<_>>()
                .join("; ")
        )
    };
    let edge = if search.edge.is_some() {
        "the tube's edge"
    } else {
        "the end of the profile"
    };
    FindError::NoPattern(format!(
        "no ring stands out of the glow between the spot and {edge} ({lo:.2}–{hi:.2} \
         {unit}): {seen}. Check that the film is in the beam, darken the room, expose \
         longer (the spot may saturate) or raise the voltage for sharper rings"
    ))
}

/// A ring's feature: radius from the profile, the ellipse fitted to its ridge in the
/// photo (or the screen circle mapped into it where too few sectors see the ridge).
fn feature(
    m: &RingsMeasured,
    label: &str,
    peak: &RingPeak,
    ellipse: Option<&RingEllipse>,
    reciprocal: bool,
) -> crate::record::Feature {
    let mut f = ring_feature(m, label, peak.radius_mm, peak.u_radius_mm);
    if let Some(e) = ellipse {
        let p = &e.photo;
        f.ellipse = Some(Ellipse {
            cx: p.centre[0],
            cy: p.centre[1],
            a: p.semi_major,
            b: p.semi_minor,
            angle: p.angle_rad,
        });
        f.px = p.centre;
        f.radius_px = Some((p.semi_major * p.semi_minor).sqrt());
    }
    if reciprocal {
        f.radius_mm = None;
    }
    f
}

/// The rings' peak fits for the record (SI: radii and widths in m, or px for a
/// reciprocal image). Each ring is fitted in its own window, so the covariance across rings
/// is not estimated and is given as zero.
fn fit_entry(search: &RingSearch, px_mm: f64, reciprocal: bool) -> Fit {
    let to_si = if reciprocal { 1.0 } else { 1e-3 };
    let mut parameters = Vec::new();
    for (i, p) in search.peaks.iter().enumerate() {
        let n = i + 1;
        parameters.push(FitParameter {
            name: format!("ring {n} radius"),
            value: p.radius_mm * to_si,
            u: p.u_radius_mm * to_si,
        });
        parameters.push(FitParameter {
            name: format!("ring {n} fwhm"),
            value: p.fwhm_mm * to_si,
            u: p.u_fwhm_mm * to_si,
        });
        parameters.push(FitParameter {
            name: format!("ring {n} height over glow"),
            value: p.contrast,
            u: p.u_contrast,
        });
    }
    let k = parameters.len();
    let covariance = (0..k)
        .map(|i| {
            (0..k)
                .map(|j| if i == j { parameters[i].u.powi(2) } else { 0.0 })
                .collect()
        })
        .collect();
    let (lo, hi) = search.range_mm;
    let points = ((hi - lo) / (0.5 * px_mm)).round().max(0.0) as usize;
    Fit {
        model: "rings on the glow: I = G(r)·(1 + p0 + p1·x + p2·x²) + Σ a·G(rk)·(rk/r)·\
                exp(−(r − rk)²/2σ²), G = exp(Chebyshev polynomial in ln r); each ring in its \
                own window (covariance across rings not estimated)"
            .into(),
        parameters,
        covariance,
        rms_residual: search.glow.scatter,
        points,
    }
}

/// Rings the frame cuts, and a pattern cut short by the frame.
fn frame_warnings(m: &RingsMeasured, search: &RingSearch, unit: &str) -> Vec<String> {
    let mut out = Vec::new();
    let (w, h) = (m.photo.width() as f64, m.photo.height() as f64);
    for (i, p) in search.peaks.iter().enumerate() {
        // The share of the ring's circle that falls in the frame.
        let n = 360;
        let inside = (0..n)
            .filter(|&k| {
                let a = k as f64 * std::f64::consts::TAU / n as f64;
                let q = m
                    .map
                    .to_px(m.centre.mm + nalgebra::Vector2::new(a.cos(), a.sin()) * p.radius_mm);
                q.x >= 0.0 && q.y >= 0.0 && q.x <= w - 1.0 && q.y <= h - 1.0
            })
            .count();
        if inside < n {
            out.push(format!(
                "ring {} (r = {:.2} {unit}) runs off the frame: {:.0} % of it is in the \
                 photo, and its radius rests on that part",
                i + 1,
                p.radius_mm,
                100.0 * inside as f64 / n as f64
            ));
        }
    }
    if let Some(cut) = search.frame_cut_mm {
        out.push(match search.edge {
            Some(_) => format!(
                "the frame cuts the pattern at r = {cut:.2} {unit} before the tube's edge: \
                 rings beyond it are off the frame and not measured; frame the whole screen"
            ),
            None => format!(
                "the pattern runs off the frame beyond r = {cut:.2} {unit} (no tube outline \
                 in the photo): rings beyond it are not measured"
            ),
        });
    }
    out
}

/// Rings that are not round on the screen, though the scale should have made them so. A
/// camera tilt the scale has not undone flattens every ring alike: the rings' flattening
/// as a vector (f·cos 2α, f·sin 2α), α the major axis, is averaged over the rings with
/// their weights, and a mean beyond three of its standard deviations and half a per cent
/// is reported once.
fn ellipse_warnings(ellipses: &[Option<RingEllipse>]) -> Vec<String> {
    let (mut sx, mut sy, mut sw) = (0.0, 0.0, 0.0);
    for e in ellipses.iter().flatten() {
        if e.u_screen_flattening > 0.0 {
            let w = e.u_screen_flattening.powi(-2);
            let a = 2.0 * e.screen_angle_rad;
            sx += w * e.screen_flattening * a.cos();
            sy += w * e.screen_flattening * a.sin();
            sw += w;
        }
    }
    if sw == 0.0 {
        return Vec::new();
    }
    let (mx, my) = (sx / sw, sy / sw);
    let f = mx.hypot(my);
    let u = 1.0 / sw.sqrt();
    if f > 3.0 * u && f > 0.005 {
        vec![format!(
            "the rings are flattened by {:.1} % on the screen, all along {:.0}° ({:.1} times \
             what their scatter allows): the scale may not undo the camera's tilt (a ruler \
             alone fixes the scale along it; graph paper fixes the perspective), or the \
             screen is not square to the beam",
            100.0 * f,
            (0.5 * my.atan2(mx)).to_degrees(),
            f / u
        )]
    } else {
        Vec::new()
    }
}

/// How the rings were found, for the assumptions.
fn search_notes(search: &RingSearch, unit: &str) -> Vec<String> {
    let (lo, hi) = search.range_mm;
    let mut notes = vec![format!(
        "rings searched between the beam's spot and {} ({lo:.2}–{hi:.2} {unit}); the glow \
         there fitted as a degree-{} Chebyshev polynomial in ln r by biweight-robust least \
         squares; a ring counts when it stands at least {MIN_SIGNIFICANCE} standard \
         uncertainties over the glow, is {MIN_FWHM_PX} px to {:.0} % of its radius wide at \
         half height, and its fit settles; uncertainties allow for the residuals' \
         correlation over {} bins",
        match (search.edge, search.frame_cut_mm) {
            (Some(e), _) => format!("the tube's edge at {:.2} {unit}", e.radius_mm),
            (None, Some(_)) => "where the frame cuts the pattern".to_string(),
            (None, None) => "the end of the profile".to_string(),
        },
        search.glow.degree(),
        100.0 * MAX_FWHM_SHARE,
        search.peaks.first().map_or(0, |p| p.lags)
    )];
    if !search.rejected.is_empty() {
        let listed: Vec<String> = search
            .rejected
            .iter()
            .take(6)
            .map(|r| format!("{:.2} {unit} ({})", r.radius_mm, r.why))
            .collect();
        notes.push(format!(
            "{} candidate(s) did not count as rings: {}{}",
            search.rejected.len(),
            listed.join("; "),
            if search.rejected.len() > 6 {
                "; …"
            } else {
                ""
            }
        ));
    }
    notes
}

/// Plot, overlay marks and outputs.
fn finish(
    record: &mut Record,
    m: &RingsMeasured,
    search: &RingSearch,
    outcome: &physics::Outcome,
    args: &ElectronArgs,
    unit: &str,
    clock: &mut Clock,
) -> Result<ExitCode, Error> {
    let short = |i: usize| {
        outcome.index[i]
            .clone()
            .unwrap_or_else(|| format!("{}", i + 1))
    };
    let markers: Vec<(f64, String)> = search
        .peaks
        .iter()
        .enumerate()
        .map(|(i, p)| (p.radius_mm, short(i)))
        .collect();
    let panels = plot::Panels::new(&m.radial, search, markers, unit);
    if let Some(path) = &args.plot {
        panels.write(path, args.output.force)?;
    }
    let mut marks = Vec::new();
    let mut ring = 0;
    for feat in &record.features {
        match &feat.ellipse {
            Some(e) => {
                marks.push(Mark::Ellipse {
                    center: [e.cx, e.cy],
                    a: e.a,
                    b: e.b,
                    angle: e.angle,
                    label: short(ring),
                });
                ring += 1;
            }
            None => marks.push(Mark::Spot {
                center: feat.px,
                radius: 6.0,
                label: feat.label.clone(),
            }),
        }
    }
    let caption = caption(record);
    marks.extend(output::scale_marks(&m.map, caption));
    let contrast = panels.contrast_plot();
    output::emit_with_plot(
        record,
        &m.photo,
        &m.bytes,
        &marks,
        Some(&contrast),
        &args.output,
        clock,
    )
}

/// The overlay's caption: the lattice constant or camera length where measured, else the
/// first spacings.
fn caption(record: &Record) -> String {
    let k = crate::uncertainty::K_95;
    for name in ["lattice_a", "camera_length"] {
        if let Some(r) = record.result(name) {
            return format!(
                "{name} {} (k = 2)",
                quantity::format_si(r.value, k * r.u, "m")
            );
        }
    }
    let parts: Vec<String> = record
        .results
        .iter()
        .filter(|r| r.name == "d_spacing")
        .take(3)
        .map(|r| quantity::format_si(r.value, k * r.u, "m"))
        .collect();
    format!("d {} (k = 2)", parts.join(", "))
}
