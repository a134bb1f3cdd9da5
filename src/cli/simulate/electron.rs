//! `fringegauge simulate electron`: a photo of an electron-diffraction tube's rings, with
//! the flags only this kind takes.

use super::{SimulateArgs, angle, length, or};
use crate::quantity::{self, Dimension};
use crate::simulate::{
    self, CameraSpec, Effects, ElectronSetup, Framing, Lattice, LatticeFamily, TubeScene,
    TubeScreen,
};
use crate::{Error, ExitCode};
use clap::Args;

/// Caution shown with the electron kind's flags.
const TUBE_CAUTION: &str = "Electron-diffraction tubes run at kilovolts: use only the supply's \
own interlocked connections and follow local rules.";

/// Flags of `simulate electron`.
#[derive(Debug, Clone, Args)]
pub struct ElectronArgs {
    /// Accelerating voltage (electron)
    #[arg(long, value_name = "VOLTAGE", default_value = "4.5kV", long_help = TUBE_CAUTION)]
    pub voltage: String,

    /// The film (electron): FAMILY:a=LEN[,c=LEN][,z=Z], FAMILY one of sc fcc bcc diamond hex;
    /// hex without c is a turbostratic carbon film (hk.0 rings only)
    #[arg(long, value_name = "LATTICE", default_value = "fcc:a=0.40782nm")]
    pub lattice: String,

    /// The tube's screen (electron): flat[:DISC_RADIUS] at --distance (default 131mm), or
    /// sphere:RADIUS, a bulb centred on the film
    #[arg(long, value_name = "SCREEN", default_value = "flat")]
    pub screen: String,

    /// Crystallite size of the film, sets the rings' width (electron)
    #[arg(long, value_name = "LENGTH", default_value = "3nm")]
    pub grain: String,

    /// Beam divergence, FWHM (electron)
    #[arg(long, value_name = "ANGLE", default_value = "2mrad")]
    pub divergence: String,

    /// The most prominent ring's peak over the phosphor's local glow (electron)
    #[arg(
        long = "ring-contrast",
        value_name = "FRACTION",
        default_value_t = 0.06
    )]
    pub ring_contrast: f64,

    /// Peak of the lens ghost of the spot relative to saturation, 0 for none (electron)
    #[arg(long, value_name = "PEAK", default_value_t = 0.03)]
    pub ghost: f64,

    /// The tube with its beam off: no spot, glow or rings (electron)
    #[arg(long = "beam-off")]
    pub beam_off: bool,
}

/// Reads `FAMILY:a=LEN[,c=LEN][,z=Z]`.
pub fn parse_lattice(text: &str) -> Result<Lattice, Error> {
    let usage = |why: &str| {
        Error::Usage(format!(
            "--lattice {text:?}: {why}; write FAMILY:a=LEN[,c=LEN][,z=Z] with FAMILY one of sc, \
             fcc, bcc, diamond, hex (e.g. fcc:a=0.40782nm or hex:a=0.2461nm,c=0.6708nm)"
        ))
    };
    let (family, rest) = text.split_once(':').unwrap_or((text, ""));
    let family = match family.trim().to_ascii_lowercase().as_str() {
        "sc" => LatticeFamily::Sc,
        "fcc" => LatticeFamily::Fcc,
        "bcc" => LatticeFamily::Bcc,
        "diamond" => LatticeFamily::Diamond,
        "hex" => LatticeFamily::Hex,
        other => return Err(usage(&format!("unknown family {other:?}"))),
    };
    let (mut a, mut c, mut z) = (None, None, None);
    for part in rest.split(',').map(str::trim).filter(|p| !p.is_empty()) {
        let Some((key, value)) = part.split_once('=') else {
            return Err(usage(&format!("{part:?} is not KEY=VALUE")));
        };
        match key.trim().to_ascii_lowercase().as_str() {
            "a" => a = Some(length(value.trim(), "--lattice a")?),
            "c" => c = Some(length(value.trim(), "--lattice c")?),
            "z" => {
                z = Some(
                    value
                        .trim()
                        .parse::<u32>()
                        .map_err(|_| usage(&format!("z={value} is not an atomic number")))?,
                )
            }
            other => return Err(usage(&format!("unknown key {other:?}"))),
        }
    }
    let a_m = a.ok_or_else(|| usage("the simulator needs the constant a"))?;
    if c.is_some() && family != LatticeFamily::Hex {
        return Err(usage("c is for hex only"));
    }
    Ok(Lattice {
        family,
        a_m,
        c_m: c,
        atomic_number: z.unwrap_or_else(|| family.typical_atomic_number()),
    })
}

/// Reads `flat[:DISC_RADIUS]` or `sphere:RADIUS`.
pub fn parse_screen(text: &str, distance_m: f64) -> Result<TubeScreen, Error> {
    let (kind, radius) = text.split_once(':').unwrap_or((text, ""));
    match (kind.trim().to_ascii_lowercase().as_str(), radius.trim()) {
        ("flat", "") => Ok(TubeScreen::flat(distance_m)),
        ("flat", r) => Ok(TubeScreen::Flat {
            distance_m,
            radius_m: length(r, "--screen flat radius")?,
        }),
        ("sphere", r) if !r.is_empty() => Ok(TubeScreen::sphere(length(r, "--screen sphere")?)),
        _ => Err(Error::Usage(format!(
            "--screen {text:?}: write flat, flat:DISC_RADIUS or sphere:RADIUS (e.g. sphere:65mm)"
        ))),
    }
}

/// The electron photo's inputs from the arguments.
pub fn configure(
    a: &SimulateArgs,
) -> Result<(ElectronSetup, TubeScene, CameraSpec, Effects), Error> {
    let e = &a.electron;
    let distance_m = length(or(&a.distance, "131mm"), "--distance")?;
    let setup = ElectronSetup {
        voltage_v: quantity::require_positive(
            quantity::parse(&e.voltage, Dimension::Voltage)?,
            "--voltage",
        )?
        .value,
        lattice: parse_lattice(&e.lattice)?,
        screen: parse_screen(&e.screen, distance_m)?,
        grain_size_m: length(&e.grain, "--grain")?,
        divergence_rad: angle(&e.divergence)?,
        ring_contrast: e.ring_contrast,
        beam_on: !e.beam_off,
        ..ElectronSetup::default()
    };
    let mut scene = TubeScene {
        ghost: e.ghost,
        ..TubeScene::default()
    };
    if a.no_ruler {
        scene.ruler = None;
    } else if let Some(r) = scene.ruler.as_mut() {
        // The shared default (200 mm) is longer than a tube is wide.
        if a.ruler_length != "200mm" {
            r.length_mm = length(&a.ruler_length, "--ruler-length")? * 1e3;
        }
    }
    let camera = CameraSpec {
        width_px: a.width,
        height_px: a.height,
        yaw_rad: angle(or(&a.camera_yaw, "5deg"))?,
        pitch_rad: angle(&a.camera_pitch)?,
        roll_rad: angle(&a.camera_roll)?,
        framing: Framing::Auto {
            max_order: 0,
            margin: 0.06,
        },
        ..CameraSpec::default()
    };
    let mut effects = if a.clean {
        Effects::clean()
    } else {
        Effects::default()
    };
    if let Some(o) = a.overexposure {
        effects.overexposure = o;
    }
    effects.bloom = a.bloom;
    effects.flare = a.flare;
    Ok((setup, scene, camera, effects))
}

/// Runs `fringegauge simulate electron`.
pub fn run(a: &SimulateArgs) -> Result<ExitCode, Error> {
    let (setup, scene, camera, effects) = configure(a)?;
    let photo = simulate::render_electron(&setup, &scene, &camera, &effects, a.seed)?;
    photo.write(&a.out, a.quality, a.force)?;
    let t = &photo.truth;
    eprintln!(
        "wrote {} and {}",
        a.out.display(),
        simulate::truth_path(&a.out).display()
    );
    eprintln!(
        "λ = {:.4} pm; {} rings on the screen",
        t.wavelength_m * 1e12,
        t.rings.len()
    );
    if let Some(r) = &t.ruler {
        if let (Some(s), Some(e)) = (r.start_px, r.end_px) {
            eprintln!(
                "ruler stretch: --ruler {:.0},{:.0},{:.0},{:.0}",
                s[0], s[1], e[0], e[1]
            );
        }
    }
    for note in &t.notes {
        eprintln!("note: {note}");
    }
    Ok(ExitCode::Measured)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lattices_and_screens_parse() {
        let l = parse_lattice("hex:a=0.2461nm,c=0.6708nm").unwrap();
        assert_eq!(l.family, LatticeFamily::Hex);
        assert!((l.a_m - 0.2461e-9).abs() < 1e-20 && (l.c_m.unwrap() - 0.6708e-9).abs() < 1e-20);
        assert_eq!(l.atomic_number, 6);
        let l = parse_lattice("FCC:a=4.0782e-10m,z=13").unwrap();
        assert_eq!(
            (l.family, l.atomic_number, l.c_m),
            (LatticeFamily::Fcc, 13, None)
        );
        for bad in [
            "fcc",
            "fcc:a=0nm",
            "bcc:a=0.3nm,c=0.5nm",
            "tri:a=1nm",
            "sc:b=1nm",
        ] {
            assert!(parse_lattice(bad).is_err(), "{bad}");
        }
        assert_eq!(
            parse_screen("flat", 0.131).unwrap(),
            TubeScreen::flat(0.131)
        );
        assert_eq!(
            parse_screen("sphere:65mm", 0.131).unwrap(),
            TubeScreen::sphere(0.065)
        );
        assert!(parse_screen("sphere", 0.131).is_err());
        assert!(parse_screen("dome:5mm", 0.131).is_err());
    }
}
