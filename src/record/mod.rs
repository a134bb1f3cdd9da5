//! The record stage: what was measured, kept so that it can be checked later. It holds the
//! JSON record (schema `fringegauge.record/1`, described by a JSON Schema draft 2020-12 in
//! [`schema_json`]), the terminal and HTML reports, the overlay drawn on the photo, the plot
//! of a fitted profile, atomic file writes and the archive folder with its index.
//!
//! All values are in SI base units (metres, radians, volts); screen positions are in
//! millimetres and photo positions in pixels, as their field names say. Uncertainties are
//! standard uncertainties (k = 1) after the GUM (JCGM 100:2008); the expanded uncertainty is
//! U = k·u (GUM 6.2.1) and each budget line is a contribution |cᵢ|·u(xᵢ) (GUM 5.1.3).

pub mod archive;
pub mod atomic;
pub mod html;
mod json;
pub mod overlay;
pub mod plot;
pub mod schema;
pub mod text;
mod timings;
mod types;

#[cfg(test)]
pub(crate) mod fixture;

pub use archive::{
    ArchiveEntry, IndexEntry, Mismatch, ResultSummary, VerifyReport, archive_measurement, list,
    verify,
};
pub use atomic::write_atomic;
pub use html::render_html;
pub use overlay::{Mark, encode_png, render_overlay};
pub use plot::{ProfilePlot, Side, attach_plot, render_profile, write_plot};
pub use schema::schema_json;
pub use text::render_text;
pub use timings::Timings;
pub use types::{
    BudgetLine, Distribution, DistributionBin, Ellipse, Feature, Fit, FitParameter, Input,
    InputSource, Record, ResultEntry, SCHEMA_ID, ScaleInfo, Setup, Tool, ValueU,
};

use crate::ExitCode;
use thiserror::Error;

/// Why the record, overlay, report or archive could not be written or read.
#[derive(Debug, Error)]
pub enum RecordError {
    /// The target exists and `--force` was not given.
    #[error("{0} already exists; pass --force to overwrite it, or choose another path")]
    Exists(String),
    /// Reading or writing a file failed.
    #[error(
        "cannot read or write {path}: {source}; check that the folder exists, that it is \
         writable and that the disk is not full"
    )]
    Io {
        /// The path.
        path: String,
        /// The cause.
        source: std::io::Error,
    },
    /// A file that should hold a record (or an archive index) does not hold a usable one.
    #[error("{path} is not a usable fringegauge record: {reason}")]
    BadRecord {
        /// Where the record was read from.
        path: String,
        /// What is wrong with it.
        reason: String,
    },
    /// The text is not JSON of the record's shape.
    #[error(
        "{path} is not a fringegauge record: {source}; a record starts with \
         \"schema\": \"fringegauge.record/1\" (run `fringegauge schema` for its full shape)"
    )]
    Json {
        /// Where the text came from.
        path: String,
        /// The parser's complaint, with line and column.
        source: serde_json::Error,
    },
    /// The record is not complete enough to be written: no result, or a number that is not
    /// finite (JSON has no NaN or infinity).
    #[error("the record is incomplete: {0}")]
    Incomplete(String),
    /// The folder is not an archive.
    #[error("{0} holds no index.json; give a folder made with --archive")]
    NotArchive(String),
    /// Another writer holds the archive index.
    #[error(
        "{0} is held by another fringegauge writing to this archive; wait for it to finish, \
         or delete that file if no fringegauge is running"
    )]
    Locked(String),
    /// The overlay image could not be encoded.
    #[error("cannot encode the overlay as PNG: {0}")]
    Encode(String),
    /// The profile plot cannot be drawn from what it was given.
    #[error("cannot draw the profile plot: {0}")]
    Plot(String),
}

impl RecordError {
    /// Exit code of this error.
    ///
    /// An incomplete record means the photo was read but the measurement gave no usable
    /// value, which is exit 1 (DESIGN §2); everything else is about files and usage (an
    /// existing target without `--force`, an unwritable folder, a damaged record), exit 2.
    pub fn exit_code(&self) -> ExitCode {
        match self {
            RecordError::Incomplete(_) => ExitCode::NotMeasured,
            RecordError::Exists(_)
            | RecordError::Io { .. }
            | RecordError::BadRecord { .. }
            | RecordError::Json { .. }
            | RecordError::NotArchive(_)
            | RecordError::Locked(_)
            | RecordError::Encode(_)
            | RecordError::Plot(_) => ExitCode::BadInput,
        }
    }

    /// An I/O error on a path.
    pub(crate) fn io(path: &std::path::Path, source: std::io::Error) -> RecordError {
        RecordError::Io {
            path: path.display().to_string(),
            source,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exit_codes_follow_the_design() {
        assert_eq!(
            RecordError::Exists("a".into()).exit_code(),
            ExitCode::BadInput
        );
        assert_eq!(
            RecordError::Incomplete("no result".into()).exit_code(),
            ExitCode::NotMeasured
        );
        let msg = RecordError::Exists("out/record.json".into()).to_string();
        assert!(msg.contains("--force"), "{msg}");
    }
}
