//! The `electron` command's physics: its inputs as the command line gives them, and the
//! three ways the rings become results (spacings on a tube, the camera length from a known
//! film, spacings from a reciprocal-space image), each with the indexing and refinement
//! the lattice flags ask for.

use super::ElectronArgs;
use crate::Error;
use crate::cli::inputs::{DefaultU, InputBook, positive_flag};
use crate::cli::output;
use crate::optics::OpticsError;
use crate::optics::electron::{
    CameraCalibration, RingRadius, Screen, ScreenKind, index_and_calibrate, solve_rings,
};
use crate::optics::lattice::{
    Indexing, JointSpacings, Lattice, Refinement, index_rings, refine_constant,
};
use crate::quantity::Quantity;
use crate::quantity::{self, Dimension};
use crate::record::ResultEntry;
use crate::scale::ScaleComponent;
use crate::uncertainty::{self, Estimate, Input};

/// How the rings become spacings.
#[derive(Debug, Clone)]
pub(super) enum Mode {
    /// A tube: the voltage and the screen's geometry.
    Tube {
        voltage: Input,
        kind: ScreenKind,
        /// Distance (flat) or bulb radius (sphere); None when it is to be calibrated and
        /// was not given.
        length: Option<Input>,
        /// Calibrate the camera length against this film.
        calibrate: Option<Lattice>,
    },
    /// An image whose scale is already reciprocal: `per_px` is 1/d per px, 1/m.
    Reciprocal { per_px: Input },
}

/// A tube supply's voltage given without uncertainty: its panel meter read to about
/// ±1 % (rectangular; common practice for the meters fitted to teaching supplies).
const VOLTAGE_HALF_WIDTH: f64 = 0.01;
/// A film-to-screen distance given without uncertainty: the tube maker's drawing, ±1 mm
/// (rectangular; common practice).
const LENGTH_HALF_WIDTH_M: f64 = 1e-3;
/// A reciprocal scale given without uncertainty: a calibration carried over, ±0.5 %
/// (rectangular; common practice, as for --mm-per-px).
const RECIPROCAL_HALF_WIDTH: f64 = 0.005;

/// Reads the physics flags into a [`Mode`] and the lattice to index against.
pub(super) fn read_inputs(
    args: &ElectronArgs,
    book: &mut InputBook,
) -> Result<(Mode, Option<Lattice>), Error> {
    let lattice = args
        .lattice
        .as_deref()
        .map(|t| parse_lattice("lattice", t))
        .transpose()?;
    if let Some(text) = &args.reciprocal_per_px {
        let q = reciprocal(text)?;
        let per_px = book.add(
            "reciprocal-per-px",
            "reciprocal-per-px",
            q,
            DefaultU::RelativeHalfWidth(RECIPROCAL_HALF_WIDTH),
            "a reciprocal-space scale carried over from its calibration (common practice)",
        )?;
        // The book states a length; this is its reciprocal.
        if let Some(entry) = book.record.get_mut("reciprocal-per-px") {
            entry.unit = "1/m".into();
        }
        return Ok((Mode::Reciprocal { per_px }, lattice));
    }
    let voltage_text = args.voltage.as_deref().ok_or_else(|| {
        Error::Usage(
            "--voltage is needed: the accelerating voltage sets the electrons' wavelength \
             (or give --reciprocal-per-px for an image already scaled in reciprocal space)"
                .into(),
        )
    })?;
    let v = positive_flag("voltage", voltage_text, Dimension::Voltage)?;
    let voltage = book.add(
        "voltage",
        "voltage",
        v,
        DefaultU::RelativeHalfWidth(VOLTAGE_HALF_WIDTH),
        "a supply's panel meter (common practice)",
    )?;
    let calibrate = args
        .calibrate_with
        .as_deref()
        .map(|t| parse_lattice("calibrate-with", t))
        .transpose()?;
    if let Some(reference) = &calibrate {
        if reference.a_m.is_none() {
            return Err(Error::Usage(format!(
                "--calibrate-with needs the film's constant, e.g. `{}:a=0.40782nm`",
                reference.family
            )));
        }
    }
    let (kind, sphere_radius) = screen(args.screen.as_deref().unwrap_or("flat"))?;
    let length = match (kind, sphere_radius, &args.distance) {
        (ScreenKind::Sphere, Some(q), _) => Some(book.add(
            "sphere radius",
            "screen",
            q,
            DefaultU::HalfWidth(LENGTH_HALF_WIDTH_M),
            "the bulb's radius from the tube maker's data (common practice)",
        )?),
        (ScreenKind::Flat, _, Some(text)) => {
            let q = positive_flag("distance", text, Dimension::Length)?;
            Some(book.add(
                "distance",
                "distance",
                q,
                DefaultU::HalfWidth(LENGTH_HALF_WIDTH_M),
                "film to screen from the tube maker's drawing (common practice)",
            )?)
        }
        (ScreenKind::Flat, _, None) if calibrate.is_some() => None,
        (ScreenKind::Flat, _, None) => {
            return Err(Error::Usage(
                "a flat screen needs --distance (film to screen along the beam), or \
                 --calibrate-with LATTICE to solve it from a known film"
                    .into(),
            ));
        }
        (ScreenKind::Sphere, None, _) => unreachable!("a sphere always has its radius"),
    };
    Ok((
        Mode::Tube {
            voltage,
            kind,
            length,
            calibrate,
        },
        lattice,
    ))
}

fn parse_lattice(flag: &str, text: &str) -> Result<Lattice, Error> {
    text.parse::<Lattice>()
        .map_err(|e| Error::Usage(format!("--{flag}: {e}")))
}

/// `flat` or `sphere:RADIUS`.
fn screen(text: &str) -> Result<(ScreenKind, Option<Quantity>), Error> {
    let (kind, rest) = text.split_once(':').unwrap_or((text, ""));
    match (kind.trim().to_ascii_lowercase().as_str(), rest.trim()) {
        ("flat", "") => Ok((ScreenKind::Flat, None)),
        ("sphere", r) if !r.is_empty() => Ok((
            ScreenKind::Sphere,
            Some(positive_flag("screen", r, Dimension::Length)?),
        )),
        _ => Err(Error::Usage(format!(
            "--screen {text:?}: write flat (with --distance) or sphere:RADIUS (e.g. sphere:65mm)"
        ))),
    }
}

/// `0.0123/nm`, `0.0123±0.0001/nm` or a bare number taken in 1/nm: a reciprocal length per
/// px, 1/m. Read as the pitch it is the inverse of, so that a ± carries over exactly as
/// for line densities.
fn reciprocal(text: &str) -> Result<Quantity, Error> {
    let t = text.trim();
    let with_unit = if t.contains('/') {
        t.to_string()
    } else {
        format!("{t}/nm")
    };
    let pitch = quantity::parse_pitch(&with_unit)
        .map_err(|e| Error::Usage(format!("--reciprocal-per-px: {e}")))?;
    Ok(Quantity {
        value: 1.0 / pitch.value,
        u: pitch.u.map(|u| u / (pitch.value * pitch.value)),
        dim: Dimension::Dimensionless,
    })
}

/// The screen geometry's statement for the record.
pub(super) fn geometry_note(mode: &Mode) -> String {
    match mode {
        Mode::Tube {
            kind: ScreenKind::Flat,
            ..
        } => "flat screen perpendicular to the beam: a ring of radius r lies at a deflection \
              2θ = atan(r/L); Bragg's law 2d·sin θ = λ, λ relativistic (CODATA 2018)"
            .into(),
        Mode::Tube {
            kind: ScreenKind::Sphere,
            ..
        } => "spherical bulb centred on the film, seen from the front from far away: \
              r = R·sin 2θ (a camera at distance D sees a ring z behind the bulb's front \
              smaller by z/(D + z): keep the camera far back); Bragg's law 2d·sin θ = λ, λ \
              relativistic (CODATA 2018)"
            .into(),
        Mode::Reciprocal { .. } => "image scaled in reciprocal space: a ring of radius r px \
                                     has d = 1/(r·k), k the given 1/d per px (not 2π/d)"
            .into(),
    }
}

/// A ring to solve: its label, radius (screen mm, or px for a reciprocal image) and u.
#[derive(Debug, Clone)]
pub(super) struct Ring {
    pub label: String,
    pub radius: f64,
    pub u: f64,
}

/// What the physics gave.
#[derive(Debug, Default)]
pub(super) struct Outcome {
    pub results: Vec<ResultEntry>,
    /// The index of each ring, where indexed.
    pub index: Vec<Option<String>>,
    pub warnings: Vec<String>,
    pub assumptions: Vec<String>,
    /// The calibration, in calibration mode.
    pub calibration: Option<CameraCalibration>,
    /// The reference film, in calibration mode.
    pub reference: Option<Lattice>,
}

/// Solves the rings for the mode (module docs).
pub(super) fn solve(
    mode: &Mode,
    lattice: Option<&Lattice>,
    rings: &[Ring],
    scale: &[ScaleComponent],
) -> Result<Outcome, Error> {
    let k = uncertainty::K_95;
    let mut out = Outcome {
        index: vec![None; rings.len()],
        ..Outcome::default()
    };
    let joint = match mode {
        Mode::Tube {
            voltage,
            kind,
            length,
            calibrate: Some(reference),
        } => {
            calibrate(
                &mut out,
                rings,
                voltage,
                *kind,
                length.as_ref(),
                reference,
                scale,
            )?;
            return Ok(out);
        }
        Mode::Tube {
            voltage,
            kind,
            length: Some(length),
            calibrate: None,
        } => {
            let radii: Vec<RingRadius> = rings
                .iter()
                .map(|r| RingRadius {
                    label: r.label.clone(),
                    radius_mm: r.radius,
                    u_mm: r.u,
                })
                .collect();
            let screen = Screen::new(*kind, length.value);
            let sol = solve_rings(&radii, voltage, screen, length.u, scale)?;
            out.warnings.extend(sol.warnings.iter().cloned());
            out.assumptions.push(format!(
                "electron wavelength {} from the voltage",
                quantity::format_si(sol.wavelength.value, sol.wavelength.u, "m")
            ));
            let worst = sol
                .rings
                .iter()
                .map(|r| r.small_angle_error.abs())
                .fold(0.0, f64::max);
            out.assumptions.push(format!(
                "the small-angle camera constant r·d = λL would be off by up to {:.2} % on \
                 these rings; the exact geometry is used",
                100.0 * worst
            ));
            for r in &sol.rings {
                out.results.push(
                    ResultEntry::new("d_spacing", r.d.value, r.d.u, "m", k)
                        .with_label(&r.label)
                        .with_budget(output::budget_lines(&r.d)),
                );
            }
            sol.joint
        }
        Mode::Tube { length: None, .. } => {
            return Err(Error::Usage(
                "a flat screen needs --distance, or --calibrate-with LATTICE".into(),
            ));
        }
        Mode::Reciprocal { per_px } => {
            let joint = reciprocal_spacings(rings, per_px)?;
            for (i, r) in rings.iter().enumerate() {
                let d = joint_estimate(&joint, i);
                out.results.push(
                    ResultEntry::new("d_spacing", d.value, d.u, "m", k)
                        .with_label(&r.label)
                        .with_budget(output::budget_lines(&d)),
                );
            }
            joint
        }
    };
    if let Some(lattice) = lattice {
        index_and_refine(&mut out, &joint, lattice)?;
    }
    Ok(out)
}

/// d = 1/(r·k) for every ring, propagated together over k and the radii (px).
fn reciprocal_spacings(rings: &[Ring], per_px: &Input) -> Result<JointSpacings, Error> {
    let mut inputs = vec![Input {
        name: "reciprocal per px".into(),
        ..per_px.clone()
    }];
    for r in rings {
        inputs.push(Input::normal(
            format!("{} radius (px)", r.label),
            r.radius,
            r.u,
        ));
    }
    let n = rings.len();
    let p = uncertainty::propagate(&inputs, &[], |x| {
        let k = x[0];
        x[1..]
            .iter()
            .map(|&r| {
                if r > 0.0 && k > 0.0 {
                    Ok(1.0 / (r * k))
                } else {
                    Err(OpticsError::BadInput(format!(
                        "a ring radius of {r} px and a scale of {k} /m give no spacing"
                    )))
                }
            })
            .collect::<Result<Vec<f64>, OpticsError>>()
    })?;
    Ok(JointSpacings {
        d_m: p.outputs.iter().map(|o| o.value).collect(),
        jacobian: p.jacobian.rows(0, n).into_owned(),
        inputs,
    })
}

/// Spacing `i` of a joint set as an estimate with its budget (own radius and shared inputs).
fn joint_estimate(joint: &JointSpacings, i: usize) -> Estimate {
    let budget: Vec<uncertainty::BudgetLine> = joint
        .inputs
        .iter()
        .enumerate()
        .filter(|(k, _)| joint.jacobian[(i, *k)] != 0.0)
        .map(|(k, input)| {
            let c = joint.jacobian[(i, k)];
            uncertainty::BudgetLine {
                input: input.name.clone(),
                sensitivity: Some(c),
                contribution: (c * input.u).abs(),
            }
        })
        .collect();
    let u = budget
        .iter()
        .map(|b| b.contribution * b.contribution)
        .sum::<f64>()
        .sqrt();
    Estimate {
        value: joint.d_m[i],
        u,
        budget,
    }
}

/// Indexes the spacings against the lattice by their ratios and, where that fits,
/// refines its constants; the given constants are only compared. Where no assignment fits
/// all rings, the ring farthest off the best one (in its own standard uncertainties) is
/// left out and the rest indexed again, up to a quarter of the rings and keeping three:
/// one ring can be two unresolved ones, or not the film's; it keeps its spacing, without
/// an index, and the warnings say so.
fn index_and_refine(
    out: &mut Outcome,
    joint: &JointSpacings,
    lattice: &Lattice,
) -> Result<(), Error> {
    let n = joint.d_m.len();
    let mut keep: Vec<usize> = (0..n).collect();
    let mut left_out: Vec<(usize, f64)> = Vec::new();
    let mut first: Option<Indexing> = None;
    let (indexing, sub) = loop {
        let sub = subset(joint, &keep);
        let spacings = sub.for_indexing();
        let ix = match index_rings(&spacings, lattice) {
            Ok(ix) => ix,
            Err(OpticsError::Unsolvable(why)) => {
                out.warnings
                    .push(format!("indexing as {} refused: {why}", lattice.family));
                return Ok(());
            }
            Err(e) => return Err(e.into()),
        };
        if !ix.poor_fit || keep.len() <= 3 || left_out.len() >= n / 4 {
            break (ix, sub);
        }
        let worst = (0..keep.len())
            .map(|i| {
                (
                    i,
                    ix.best.residuals_rel[i].abs() / (spacings[i].u_m / spacings[i].d_m),
                )
            })
            .max_by(|a, b| a.1.total_cmp(&b.1));
        let Some((i, z)) = worst else {
            break (ix, sub);
        };
        first.get_or_insert(ix);
        left_out.push((keep.remove(i), z));
    };
    // Where leaving rings out did not help, the verdict is on all of them.
    let (indexing, sub, keep) = match (indexing.poor_fit, first) {
        (true, Some(all)) => {
            left_out.clear();
            (all, joint.clone(), (0..n).collect())
        }
        _ => (indexing, sub, keep),
    };
    out.warnings.extend(indexing.warnings.iter().cloned());
    out.assumptions.extend(indexing.assumptions.iter().cloned());
    out.assumptions.push(indexing_note(&indexing));
    if indexing.poor_fit {
        return Ok(());
    }
    for (i, z) in &left_out {
        out.warnings.push(format!(
            "ring {} was left out of the indexing and the lattice constant: its spacing lies \
             {z:.1} standard uncertainties off the best assignment (two rings seen as one, \
             or light not of the film)",
            i + 1
        ));
    }
    for (j, refl) in indexing.best.reflections.iter().enumerate() {
        let i = keep[j];
        out.index[i] = Some(refl.label.clone());
        if let Some(r) = out.results.get_mut(i) {
            *r = r.clone().with_index(&refl.label);
        }
    }
    let refinement = refine_constant(&sub, &indexing, lattice)?;
    push_refinement(out, &refinement);
    Ok(())
}

/// The spacings `keep` of a joint set, with their rows of the Jacobian.
fn subset(joint: &JointSpacings, keep: &[usize]) -> JointSpacings {
    let cols = joint.jacobian.ncols();
    JointSpacings {
        d_m: keep.iter().map(|&i| joint.d_m[i]).collect(),
        inputs: joint.inputs.clone(),
        jacobian: nalgebra::DMatrix::from_fn(keep.len(), cols, |r, c| joint.jacobian[(keep[r], c)]),
    }
}

fn indexing_note(ix: &Indexing) -> String {
    let labels = |a: &crate::optics::lattice::Assignment| {
        a.reflections
            .iter()
            .map(|r| r.label.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut s = format!(
        "rings indexed as {} by their spacing ratios: {} (χ²/ν = {:.2}, p = {:.2}, {} \
         reflection(s) in range not seen)",
        ix.family,
        labels(&ix.best),
        ix.best.reduced_chi2(),
        ix.best.p_value,
        ix.best.missing
    );
    if let Some(r) = &ix.runner_up {
        s.push_str(&format!(
            "; next best {} (χ²/ν = {:.2}, {} not seen)",
            labels(r),
            r.reduced_chi2(),
            r.missing
        ));
    }
    s
}

fn push_refinement(out: &mut Outcome, refinement: &Refinement) {
    let k = uncertainty::K_95;
    let a = &refinement.a;
    out.results.push(
        ResultEntry::new("lattice_a", a.value, a.u, "m", k).with_budget(output::budget_lines(a)),
    );
    if let Some(c) = &refinement.c {
        out.results.push(
            ResultEntry::new("lattice_c", c.value, c.u, "m", k)
                .with_budget(output::budget_lines(c)),
        );
    }
    out.warnings.extend(refinement.warnings.iter().cloned());
    out.assumptions.push(format!(
        "lattice constant refined by least squares over all indexed rings, weighted by \
         their own radius uncertainties, with the voltage, distance and scale they share \
         carried in full (χ² = {:.2} for ν = {}; rings' own uncertainties enlarged ×{:.2})",
        refinement.chi2, refinement.dof, refinement.birge_ratio
    ));
    for c in &refinement.comparison {
        let given = quantity::format_si(c.given_m, c.given_u_m.unwrap_or(0.0), "m");
        let line = format!(
            "{} compared with the given {given}: difference {} ({:.1} combined standard \
             uncertainties)",
            c.name,
            quantity::format_si(c.difference_m, 0.0, "m"),
            c.z
        );
        if c.z.abs() > 3.0 {
            out.warnings.push(format!(
                "the measured {} differs from the given {given} by {:.1} standard \
                 uncertainties: a different film, a wrong voltage or distance, or a scale \
                 error",
                c.name, c.z
            ));
        }
        out.assumptions.push(line);
    }
}

/// Calibration mode: index against the known film, solve the camera length.
fn calibrate(
    out: &mut Outcome,
    rings: &[Ring],
    voltage: &Input,
    kind: ScreenKind,
    given: Option<&Input>,
    reference: &Lattice,
    scale: &[ScaleComponent],
) -> Result<(), Error> {
    let radii: Vec<RingRadius> = rings
        .iter()
        .map(|r| RingRadius {
            label: r.label.clone(),
            radius_mm: r.radius,
            u_mm: r.u,
        })
        .collect();
    if radii.len() < 2 {
        return Err(OpticsError::Unsolvable(format!(
            "calibration needs at least two rings to tell which reflection each is; {} found",
            radii.len()
        ))
        .into());
    }
    // As for indexing alone: where the known film does not fit all rings, the ring
    // farthest off the calibrated radii (in its own uncertainties) is left out, up to a
    // quarter of them, keeping three.
    let n = radii.len();
    let mut keep: Vec<usize> = (0..n).collect();
    let mut left_out: Vec<(usize, f64)> = Vec::new();
    let mut first = None;
    let (indexing, cal, keep) = loop {
        let sub: Vec<RingRadius> = keep.iter().map(|&i| radii[i].clone()).collect();
        let (indexing, cal) = index_and_calibrate(
            &sub,
            reference,
            voltage,
            kind,
            given.map(|g| g.value),
            scale,
        )?;
        if !indexing.poor_fit || keep.len() <= 3 || left_out.len() >= n / 4 {
            break (indexing, cal, keep);
        }
        let Some((j, z)) = (0..sub.len())
            .map(|j| (j, (cal.residuals_mm[j] / sub[j].u_mm).abs()))
            .max_by(|a, b| a.1.total_cmp(&b.1))
        else {
            break (indexing, cal, keep);
        };
        first.get_or_insert((indexing, cal, keep.clone()));
        left_out.push((keep.remove(j), z));
    };
    let (indexing, cal, keep) = match (indexing.poor_fit, first) {
        (true, Some(all)) => {
            left_out.clear();
            all
        }
        _ => (indexing, cal, keep),
    };
    out.warnings.extend(indexing.warnings.iter().cloned());
    out.warnings.extend(cal.warnings.iter().cloned());
    out.assumptions.extend(indexing.assumptions.iter().cloned());
    out.assumptions.extend(cal.assumptions.iter().cloned());
    out.assumptions.push(indexing_note(&indexing));
    for (i, z) in &left_out {
        out.warnings.push(format!(
            "ring {} was left out of the calibration: its radius lies {z:.1} standard \
             uncertainties off the known film's (two rings seen as one, or light not of the \
             film)",
            i + 1
        ));
    }
    for (j, refl) in indexing.best.reflections.iter().enumerate() {
        out.index[keep[j]] = Some(refl.label.clone());
    }
    let name = kind.length_name();
    let l = &cal.length;
    out.results.push(
        ResultEntry::new("camera_length", l.value, l.u, "m", uncertainty::K_95)
            .with_label(name)
            .with_budget(output::budget_lines(l)),
    );
    out.assumptions.push(format!(
        "camera length ({name}) calibrated against {reference}: camera constant λL = {}; \
         rings about r = L·g(2θ) with χ² = {:.2} for ν = {}",
        quantity::format_si(cal.camera_constant.value, cal.camera_constant.u, "m²"),
        cal.chi2,
        cal.dof
    ));
    if let Some(g) = given {
        let z = (l.value - g.value) / (l.u * l.u + g.u * g.u).sqrt();
        let line = format!(
            "the calibrated {name} {} against the given {}: {:.1} combined standard \
             uncertainties apart",
            quantity::format_si(l.value, l.u, "m"),
            quantity::format_si(g.value, g.u, "m"),
            z
        );
        if z.abs() > 3.0 {
            out.warnings.push(format!(
                "{line}: check the distance, the voltage and the scale"
            ));
        } else {
            out.assumptions.push(line);
        }
    }
    if indexing.poor_fit {
        out.warnings.push(format!(
            "the rings do not fit {reference} well: the camera length may be wrong"
        ));
    }
    out.calibration = Some(cal);
    out.reference = Some(*reference);
    Ok(())
}

/// The text of a length for a setup file: value and standard uncertainty in mm, to a
/// thousandth of the uncertainty.
pub(super) fn length_text(value_m: f64, u_m: f64) -> String {
    let (v, u) = (value_m * 1e3, u_m * 1e3);
    let digits = if u > 0.0 {
        (3 - u.log10().floor() as i32).clamp(1, 9) as usize
    } else {
        6
    };
    format!("{v:.digits$}mm±{u:.digits$}mm")
}
