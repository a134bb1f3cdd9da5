//! `--save-setup FILE.toml`: the calibrated bench written as a setup file, so that later
//! photos from the same tube are measured with `--setup FILE.toml`. The keys are the long
//! flag names (DESIGN §2): `kind`, `voltage`, `screen` and, for a flat screen,
//! `distance`. An existing file is only replaced with `--force`, and then its other keys
//! (a ruler stretch, a lattice) are kept.

use crate::Error;
use crate::cli::setup::read_setup;
use crate::optics::electron::{CameraCalibration, ScreenKind};
use crate::optics::lattice::Lattice;
use crate::photo::PhotoInfo;
use crate::record::RecordError;
use crate::record::atomic::write_atomic;
use std::path::Path;

/// Refuses up front to replace an existing setup file without `--force`.
pub(crate) fn check_target(path: &Path, force: bool) -> Result<(), Error> {
    if path.exists() && !force {
        return Err(RecordError::Exists(path.display().to_string()).into());
    }
    Ok(())
}

/// What the setup file records besides the calibration.
pub(crate) struct SavedBench<'a> {
    /// The voltage as it was given on the command line.
    pub voltage: &'a str,
    /// The film calibrated against.
    pub reference: &'a Lattice,
    /// The calibration photo.
    pub photo: &'a PhotoInfo,
    /// When the calibration was made (RFC 3339).
    pub created: &'a str,
}

/// The setup file's text.
pub(crate) fn setup_text(
    existing: Option<toml::Table>,
    cal: &CameraCalibration,
    bench: &SavedBench,
) -> Result<String, Error> {
    let mut table = existing.unwrap_or_default();
    if let Some(kind) = table.get("kind").and_then(|v| v.as_str()) {
        if kind != "electron" {
            return Err(Error::Usage(format!(
                "the setup file to update is for `{kind}`, not `electron`: choose another file"
            )));
        }
    }
    let length = super::physics::length_text(cal.length.value, cal.length.u);
    table.insert("kind".into(), "electron".into());
    table.insert("voltage".into(), bench.voltage.into());
    match cal.kind {
        ScreenKind::Flat => {
            table.insert("screen".into(), "flat".into());
            table.insert("distance".into(), length.into());
        }
        ScreenKind::Sphere => {
            table.insert("screen".into(), format!("sphere:{length}").into());
            table.remove("distance");
        }
    }
    // A film to calibrate against is not a bench input for the photos that follow.
    table.remove("calibrate-with");
    table.remove("save-setup");
    let name = Path::new(&bench.photo.path)
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let hash: String = bench.photo.sha256.chars().take(16).collect();
    let body = toml::to_string(&table)
        .map_err(|e| Error::Usage(format!("cannot write the setup file: {e}")))?;
    Ok(format!(
        "# fringegauge electron bench: {} calibrated against {} on {}\n\
         # from {name} (sha256 {hash}…); rings χ² = {:.2} for ν = {}\n\
         {body}",
        cal.kind.length_name(),
        bench.reference,
        bench.created,
        cal.chi2,
        cal.dof
    ))
}

/// Writes (or, with `force`, updates) the setup file atomically.
pub(crate) fn save(
    path: &Path,
    force: bool,
    cal: &CameraCalibration,
    bench: &SavedBench,
) -> Result<(), Error> {
    check_target(path, force)?;
    let existing = if path.exists() {
        Some(read_setup(path)?)
    } else {
        None
    };
    let text = setup_text(existing, cal, bench)?;
    write_atomic(path, text.as_bytes(), force)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::uncertainty::Estimate;

    fn calibration(kind: ScreenKind) -> CameraCalibration {
        let e = |v: f64, u: f64| Estimate {
            value: v,
            u,
            budget: vec![],
        };
        CameraCalibration {
            kind,
            length: e(0.131_05, 0.000_42),
            camera_constant: e(2.39e-12, 1e-14),
            wavelength: e(18.24e-12, 0.1e-12),
            chi2: 1.2,
            dof: 4,
            birge_ratio: 1.0,
            residuals_mm: vec![],
            warnings: vec![],
            assumptions: vec![],
        }
    }

    fn photo() -> PhotoInfo {
        PhotoInfo {
            path: "some/dir/gold.png".into(),
            sha256: "ab".repeat(32),
            width: 10,
            height: 10,
            orientation: 1,
            exif: Default::default(),
        }
    }

    #[test]
    fn the_saved_bench_reads_back_as_setup_keys() {
        let lattice: Lattice = "fcc:a=0.40782nm".parse().unwrap();
        let info = photo();
        let bench = SavedBench {
            voltage: "4.5kV±20V",
            reference: &lattice,
            photo: &info,
            created: "2024-01-01T00:00:00Z",
        };
        let mut old = toml::Table::new();
        old.insert("ruler".into(), "1,2,3,4".into());
        old.insert("distance".into(), "0.2m".into());
        let text = setup_text(Some(old), &calibration(ScreenKind::Flat), &bench).unwrap();
        let t: toml::Table = text.parse().unwrap();
        assert_eq!(t["kind"].as_str(), Some("electron"));
        assert_eq!(t["voltage"].as_str(), Some("4.5kV±20V"));
        assert_eq!(t["screen"].as_str(), Some("flat"));
        assert_eq!(t["ruler"].as_str(), Some("1,2,3,4"));
        let d = crate::quantity::parse(
            t["distance"].as_str().unwrap(),
            crate::quantity::Dimension::Length,
        )
        .unwrap();
        assert!((d.value - 0.131_05).abs() < 1e-9 && (d.u.unwrap() - 0.000_42).abs() < 1e-9);
        assert!(text.contains("gold.png") && !text.contains("some/dir"));
        let s = setup_text(None, &calibration(ScreenKind::Sphere), &bench).unwrap();
        let t: toml::Table = s.parse().unwrap();
        assert!(t["screen"].as_str().unwrap().starts_with("sphere:131.05"));
        assert!(t.get("distance").is_none());
    }

    #[test]
    fn a_setup_file_of_another_kind_is_not_updated() {
        let lattice: Lattice = "fcc:a=0.40782nm".parse().unwrap();
        let info = photo();
        let bench = SavedBench {
            voltage: "4.5kV",
            reference: &lattice,
            photo: &info,
            created: "now",
        };
        let mut old = toml::Table::new();
        old.insert("kind".into(), "grating".into());
        assert!(setup_text(Some(old), &calibration(ScreenKind::Flat), &bench).is_err());
    }
}
