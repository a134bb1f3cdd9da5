//! `fringegauge two-slit` and `fringegauge slit [--wire]`: slit separation and width, or
//! a wire's diameter, from the whole fringe profile along the pattern.

use super::args::{LASER_CAUTION, OutputArgs, PhotoArgs, ScaleArgs};
use super::grating::{laser_candidates, pattern_channel};
use super::inputs::{DefaultU, InputBook, positive_flag};
use super::output::{self, Clock};
use crate::find::fringes::{FringeBand, FringeTrack, fringe_band, fringe_track};
use crate::find::{FindError, trim_span};
use crate::optics::profile::{FringeProfile, IntensityModel, ProfileFit};
use crate::optics::slit::{self, Obstacle, SlitInputs, SlitModel};
use crate::optics::two_slit::{self, TwoSlitInputs, TwoSlitModel};
use crate::photo::{Channel, Photo};
use crate::quantity::{self, Dimension};
use crate::record::overlay::Mark;
use crate::record::plot::{ProfilePlot, write_plot};
use crate::record::{Feature, Fit, FitParameter, Record, RecordError, ResultEntry};
use crate::scale::ScreenMap;
use crate::uncertainty::{self, Input};
use crate::{Error, ExitCode};
use clap::Args;
use nalgebra::Vector2;
use std::path::PathBuf;

/// The physics inputs shared by the fringe kinds.
#[derive(Debug, Clone, Args)]
pub struct FringeInputArgs {
    /// Laser wavelength, e.g. 532nm±1nm
    #[arg(long, value_name = "LENGTH", required = true)]
    pub wavelength: Option<String>,

    /// Aperture-to-screen distance along the beam, e.g. 3.10m±3mm
    #[arg(long, value_name = "LENGTH", required = true)]
    pub distance: Option<String>,

    /// Write a plot of the measured profile, the fitted model and the residual
    #[arg(long, value_name = "FILE.png")]
    pub plot: Option<PathBuf>,
}

/// Arguments of `fringegauge two-slit`.
#[derive(Debug, Clone, Args)]
#[command(after_long_help = LASER_CAUTION)]
pub struct TwoSlitArgs {
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

/// Arguments of `fringegauge slit`.
#[derive(Debug, Clone, Args)]
#[command(after_long_help = LASER_CAUTION)]
pub struct SlitArgs {
    /// The photo and how to read it.
    #[command(flatten)]
    pub photo: PhotoArgs,
    /// A wire or fibre in the beam instead of a slit (Babinet): gives its diameter
    #[arg(long)]
    pub wire: bool,
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

/// Runs `fringegauge two-slit`.
pub fn run_two_slit(args: &TwoSlitArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    let (mut book, wavelength, distance) = start(&args.physics, &args.output, &args.photo)?;
    let m = measure_profile(
        &args.photo,
        &args.scale,
        &mut book,
        wavelength.value,
        &mut clock,
    )?;
    let inputs = TwoSlitInputs {
        wavelength,
        distance,
    };
    let sol = two_slit::solve(&m.profile, &m.map, &inputs, monte_carlo(&args.output))?;
    clock.lap("fit");
    let mut record = base_record("two-slit", &m, &book);
    record.fit = Some(fit_entry(
        "two slits: I = B + B′·u + B″·u² + I0·sinc²(π a s/λ)·(1 + V·cos(2π d s/λ + φ))/2, u = (x − x0)/L, s = sin atan u",
        &TwoSlitModel,
        &sol.fit,
    ));
    let k = uncertainty::K_95;
    for (name, e) in [
        ("separation", &sol.separation),
        ("width", &sol.width),
        ("fringe_period", &sol.fringe_period),
    ] {
        record.results.push(
            ResultEntry::new(name, e.value, e.u, "m", k).with_budget(output::budget_lines(e)),
        );
    }
    let x0 = sol.fit.params[two_slit::param::X0];
    record
        .features
        .push(centre_feature(&m, x0, sol.fit.u(two_slit::param::X0)));
    record.warnings.extend(sol.warnings.iter().cloned());
    record.assumptions.push(format!(
        "fringe visibility {:.2}, phase {:.2} rad; residual correlation allowed over {} samples",
        sol.fit.params[two_slit::param::VISIBILITY],
        sol.fit.params[two_slit::param::PHASE],
        sol.fit.lags
    ));
    mc_note(&mut record, &sol.monte_carlo);
    let fitted: Vec<bool> = (0..m.profile.x_mm.len())
        .map(|i| m.profile.exact(i))
        .collect();
    let caption = format!(
        "d {}  a {} (k = 2)",
        quantity::format_si(sol.separation.value, 2.0 * sol.separation.u, "m"),
        quantity::format_si(sol.width.value, 2.0 * sol.width.u, "m")
    );
    finish(
        &mut record,
        &m,
        Finish {
            x0,
            model: &sol.model_values,
            fitted: &fitted,
            markers: Vec::new(),
            title: "two-slit profile".into(),
            caption,
        },
        &args.physics,
        &args.output,
        &mut clock,
    )
}

/// Runs `fringegauge slit`.
pub fn run_slit(args: &SlitArgs) -> Result<ExitCode, Error> {
    let mut clock = Clock::default();
    let (mut book, wavelength, distance) = start(&args.physics, &args.output, &args.photo)?;
    let m = measure_profile(
        &args.photo,
        &args.scale,
        &mut book,
        wavelength.value,
        &mut clock,
    )?;
    let obstacle = if args.wire {
        Obstacle::Wire
    } else {
        Obstacle::Slit
    };
    let inputs = SlitInputs {
        obstacle,
        wavelength,
        distance,
    };
    let sol = slit::solve(&m.profile, &m.map, &inputs, monte_carlo(&args.output))?;
    clock.lap("fit");
    let mut record = base_record("slit", &m, &book);
    record.fit = Some(fit_entry(
        "slit: I = B + B′·u + B″·u² + I0·sinc²(π a s/λ), u = (x − x0)/L, s = sin atan u",
        &SlitModel,
        &sol.fit,
    ));
    let k = uncertainty::K_95;
    record.results.push(
        ResultEntry::new(sol.measurand, sol.estimate.value, sol.estimate.u, "m", k)
            .with_budget(output::budget_lines(&sol.estimate)),
    );
    let x0 = sol.fit.params[slit::param::X0];
    record
        .features
        .push(centre_feature(&m, x0, sol.fit.u(slit::param::X0)));
    for min in &sol.minima {
        let (px, dir) = m.position_at(min.sample);
        let u_px = min.u_mm / m.map.mm_per_px_at(px);
        let mm = m.map.to_mm(px);
        let u = dir.abs() * u_px;
        record.features.push(Feature::point(
            &format!("minimum {:+}", min.order),
            [px.x, px.y],
            [u.x.max(1e-6), u.y.max(1e-6)],
            [mm.x, mm.y],
        ));
    }
    let (check_from, primary_from) = match obstacle {
        Obstacle::Slit => (
            "the minima line x_m = x0 + L·tan(asin(mλ/a))",
            "the sinc² profile fit",
        ),
        Obstacle::Wire => (
            "the sinc² profile fit beyond the first minima",
            "the minima line x_m = x0 + L·tan(asin(mλ/w)), the beam's own spot left out",
        ),
    };
    if let Some(check) = &sol.cross_check {
        record.assumptions.push(format!(
            "{} from {primary_from}; cross-check from {check_from}: {}",
            sol.measurand,
            quantity::format_si(check.value, check.u, "m")
        ));
    }
    if obstacle == Obstacle::Wire {
        record
            .assumptions
            .push("Babinet's principle: the wire diffracts as a slit of its diameter outside the undiffracted beam".into());
    }
    record.warnings.extend(sol.warnings.iter().cloned());
    mc_note(&mut record, &sol.monte_carlo);
    let exact_fitted: Vec<bool> = (0..sol.fitted.len())
        .map(|i| sol.fitted[i] && m.profile.exact(i))
        .collect();
    let markers = sol
        .minima
        .iter()
        .map(|mn| (mn.x_mm - x0, format!("{:+}", mn.order)))
        .collect();
    let caption = format!(
        "{} {} (k = 2)",
        sol.measurand,
        quantity::format_si(sol.estimate.value, 2.0 * sol.estimate.u, "m")
    );
    finish(
        &mut record,
        &m,
        Finish {
            x0,
            model: &sol.model_values,
            fitted: &exact_fitted,
            markers,
            title: if args.wire {
                "wire profile".into()
            } else {
                "slit profile".into()
            },
            caption,
        },
        &args.physics,
        &args.output,
        &mut clock,
    )
}

pub(super) fn monte_carlo(out: &OutputArgs) -> Option<(usize, u64)> {
    out.monte_carlo.map(|n| (n, 0x05ee_d0ff_1e1d))
}

/// Output checks and the physics inputs, before the photo is read.
pub(super) fn start(
    physics: &FringeInputArgs,
    out: &OutputArgs,
    photo: &PhotoArgs,
) -> Result<(InputBook, Input, Input), Error> {
    output::check_outputs(out)?;
    if let Some(p) = &physics.plot {
        if p.exists() && !out.force {
            return Err(RecordError::Exists(p.display().to_string()).into());
        }
    }
    let mut book = InputBook::new(photo.from_setup.as_deref());
    let w = positive_flag(
        "wavelength",
        physics.wavelength.as_deref().unwrap_or_default(),
        Dimension::Length,
    )?;
    let wavelength = book.add(
        "wavelength",
        "wavelength",
        w,
        DefaultU::HalfWidth(10e-9),
        "diode lasers are commonly sold as ±10 nm (from memory)",
    )?;
    let d = positive_flag(
        "distance",
        physics.distance.as_deref().unwrap_or_default(),
        Dimension::Length,
    )?;
    let distance = book.add(
        "distance",
        "distance",
        d,
        DefaultU::HalfWidth((3e-3f64).max(0.002 * d.value)),
        "a tape measure between aperture and screen (common practice)",
    )?;
    Ok((book, wavelength, distance))
}

/// What the photo gave: the channel, the scale, the band and its profile.
struct Measured {
    photo: Photo,
    bytes: Vec<u8>,
    channel_note: String,
    map: ScreenMap,
    band: FringeBand,
    track: FringeTrack,
    profile: FringeProfile,
    /// Screen-mm origin and direction of the profile's x.
    mm_origin: Vector2<f64>,
    mm_direction: Vector2<f64>,
}

impl Measured {
    /// Photo position at fractional sample `i`, and the band's direction.
    fn position_at(&self, i: f64) -> (Vector2<f64>, Vector2<f64>) {
        let n = self.track.positions_px.len();
        let k = (i.floor().max(0.0) as usize).min(n.saturating_sub(2));
        let f = i - k as f64;
        let p = self.track.positions_px[k] * (1.0 - f) + self.track.positions_px[k + 1] * f;
        (p, self.band.direction)
    }

    /// Photo position of a profile x (mm), by the map's inverse.
    fn px_of_x(&self, x_mm: f64) -> Vector2<f64> {
        self.map.to_px(self.mm_origin + self.mm_direction * x_mm)
    }
}

fn measure_profile(
    photo_args: &PhotoArgs,
    scale: &ScaleArgs,
    book: &mut InputBook,
    wavelength_m: f64,
    clock: &mut Clock,
) -> Result<Measured, Error> {
    let (photo, bytes) = output::load_photo(&photo_args.photo)?;
    clock.lap("decode");
    let forced = output::forced_channel(photo_args.channel.as_deref())?;
    let (channel, channel_note, cmap) = pattern_channel(&photo, forced, Some(wavelength_m));
    let candidates = laser_candidates(&photo, channel, &cmap);
    let plane = photo.plane(channel);
    let band = fringe_band(&plane, &cmap, &candidates)?;
    clock.lap("band");
    let stretch = match scale.grid {
        Some(_) => Some(grid_stretch(&band, photo.width(), photo.height())?),
        None => None,
    };
    let mut map = output::screen_map(
        &photo.plane(forced.unwrap_or(Channel::Luma)),
        scale,
        book,
        stretch,
        photo.info.exif.focal_length_35mm,
    )?;
    clock.lap("scale");
    let track = fringe_track(&plane, &band);
    if track.values.len() < 30 {
        return Err(FindError::Unmeasurable(
            "the fringe band runs out of the photo within a few pixels".into(),
        )
        .into());
    }
    let clipped = track.clipped.iter().filter(|c| **c).count();
    if clipped == track.clipped.len() {
        return Err(FindError::Unmeasurable(
            "the whole fringe band is saturated: take the photo with a shorter exposure, less \
             gain or a weaker beam"
                .into(),
        )
        .into());
    }
    let step = (track.positions_px.len() / 64).max(1);
    let sparse: Vec<Vector2<f64>> = track.positions_px.iter().step_by(step).copied().collect();
    map.localize(&sparse);
    let mm: Vec<Vector2<f64>> = track.positions_px.iter().map(|p| map.to_mm(*p)).collect();
    let (first, last) = (mm[0], mm[mm.len() - 1]);
    let dir = (last - first).normalize();
    let profile = FringeProfile {
        x_mm: mm.iter().map(|p| (p - first).dot(&dir)).collect(),
        value: track.values.clone(),
        used: track.values.iter().map(|v| v.is_finite()).collect(),
        clipped: track.clipped.clone(),
    };
    clock.lap("profile");
    Ok(Measured {
        photo,
        bytes,
        channel_note,
        map,
        band,
        track,
        profile,
        mm_origin: first,
        mm_direction: dir,
    })
}

/// A stretch beside the band, clear of its light, for counting graph-paper lines.
fn grid_stretch(
    band: &FringeBand,
    width: usize,
    height: usize,
) -> Result<(Vector2<f64>, Vector2<f64>), Error> {
    let inside = |p: Vector2<f64>| {
        p.x >= 1.0 && p.y >= 1.0 && p.x <= width as f64 - 2.0 && p.y <= height as f64 - 2.0
    };
    let (lo, hi) = band.bright;
    let span = hi - lo;
    let offset = 4.0 * band.sigma_across_px + 15.0;
    for o in [offset, -offset] {
        let (a, b) = trim_span(lo - 0.5 * span, hi + 0.5 * span, |t| inside(band.at(t, o)));
        if b - a >= 0.5 * span && b - a >= 30.0 {
            return Ok((band.at(a, o), band.at(b, o)));
        }
    }
    Err(FindError::NoPattern(
        "the fringe band leaves the photo too soon to count the grid beside it".into(),
    )
    .into())
}

fn base_record(kind: &str, m: &Measured, book: &InputBook) -> Record {
    let mut record = Record::new(kind, m.photo.info.clone(), output::scale_info(&m.map));
    record.setup.inputs = book.record.clone();
    record.warnings.extend(m.map.warnings.iter().cloned());
    record.assumptions.extend(book.assumptions.iter().cloned());
    record.assumptions.extend(m.map.assumptions.iter().cloned());
    record.assumptions.push(format!(
        "profile averaged over {} rows across the band, {} samples ({} clipped, fitted as lower bounds)",
        2 * m.track.half_width_px + 1,
        m.profile.x_mm.len(),
        m.profile.clipped.iter().filter(|c| **c).count()
    ));
    record.assumptions.push(
        "screen flat and perpendicular to the beam; Fraunhofer (far-field) diffraction".into(),
    );
    record
        .assumptions
        .push("camera lens distortion negligible over the pattern".into());
    record.assumptions.push(m.channel_note.clone());
    record
}

/// The pattern's centre, with its uncertainty along the band from the fit (mm → px).
fn centre_feature(m: &Measured, x0: f64, u_x0_mm: f64) -> Feature {
    let px = m.px_of_x(x0);
    let mm = m.map.to_mm(px);
    let u = m.band.direction.abs() * (u_x0_mm / m.map.mm_per_px_at(px));
    Feature::point(
        "centre",
        [px.x, px.y],
        [u.x.max(1e-6), u.y.max(1e-6)],
        [mm.x, mm.y],
    )
}

/// The fit for the record, in SI: every profile model's parameter 0 is the centre in mm
/// (the [`IntensityModel`] convention); the others carry no length and stay as fitted.
pub(super) fn fit_entry<M: IntensityModel>(text: &str, model: &M, fit: &ProfileFit) -> Fit {
    let n = fit.params.len();
    let factor = |i: usize| if i == 0 { 1e-3 } else { 1.0 };
    Fit {
        model: text.to_string(),
        parameters: (0..n)
            .map(|i| FitParameter {
                name: model.names()[i].to_string(),
                value: fit.params[i] * factor(i),
                u: fit.u(i) * factor(i),
            })
            .collect(),
        covariance: (0..n)
            .map(|i| {
                (0..n)
                    .map(|j| fit.covariance[(i, j)] * factor(i) * factor(j))
                    .collect()
            })
            .collect(),
        rms_residual: fit.rms_residual,
        points: fit.points,
    }
}

pub(super) fn mc_note(
    record: &mut Record,
    mc: &Option<(uncertainty::McEstimate, uncertainty::Validation)>,
) {
    if let Some((mc, v)) = mc {
        record
            .assumptions
            .push(output::monte_carlo_note(" of the first result", mc, v));
    }
}

struct Finish<'a> {
    x0: f64,
    model: &'a [f64],
    fitted: &'a [bool],
    markers: Vec<(f64, String)>,
    title: String,
    caption: String,
}

fn finish(
    record: &mut Record,
    m: &Measured,
    f: Finish,
    physics: &FringeInputArgs,
    out: &OutputArgs,
    clock: &mut Clock,
) -> Result<ExitCode, Error> {
    let x: Vec<f64> = m.profile.x_mm.iter().map(|x| x - f.x0).collect();
    let plot = ProfilePlot {
        title: f.title,
        x_label: "screen position from the pattern centre (mm)".into(),
        y_label: "intensity (linear)".into(),
        x: &x,
        measured: &m.profile.value,
        used: f.fitted,
        model: f.model,
        markers: f.markers,
    };
    if let Some(path) = &physics.plot {
        write_plot(path, &plot, 1200, 700, out.force)?;
    }
    let (a, b) = (
        m.track.positions_px[0],
        m.track.positions_px[m.track.positions_px.len() - 1],
    );
    let mut marks = vec![Mark::Line {
        from: [a.x, a.y],
        to: [b.x, b.y],
    }];
    for feat in &record.features {
        marks.push(Mark::Spot {
            center: feat.px,
            radius: 6.0,
            label: feat.label.replace("minimum ", ""),
        });
    }
    marks.extend(output::scale_marks(&m.map, f.caption));
    output::emit_with_plot(record, &m.photo, &m.bytes, &marks, Some(&plot), out, clock)
}
