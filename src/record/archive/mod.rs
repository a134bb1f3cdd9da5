//! The archive folder (DESIGN §7): one sub-folder per measurement that keeps the photo's
//! original bytes beside its record, so that `archive verify` can show years later that the
//! record belongs to that very file (SHA-256, FIPS 180-4).
//!
//! ```text
//! DIR/
//!   index.json                 every entry, rewritten atomically under index.lock
//!   <sample>-<sha256[..8]>/    <sample> is the sample id, or the photo's file stem
//!     photo.<ext>              the photo, byte for byte, with its original extension
//!     record.json              written last: an entry without it is unfinished
//!     overlay.png              when made
//!     report.html              when made
//! ```

mod index;
mod verify;

pub use index::{INDEX_SCHEMA_ID, IndexEntry, ResultSummary, list};
pub use verify::{Mismatch, VerifyReport, verify};

use super::atomic::write_atomic;
use super::{Record, RecordError};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};

const RECORD: &str = "record.json";
const OVERLAY: &str = "overlay.png";
const REPORT: &str = "report.html";

/// One measurement to archive.
#[derive(Debug, Clone, Copy)]
pub struct ArchiveEntry<'a> {
    /// The record; its photo hash must be the hash of `photo_bytes`.
    pub record: &'a Record,
    /// Sample id; the photo's file stem names the entry when absent.
    pub sample: Option<&'a str>,
    /// The photo file's bytes, exactly as read.
    pub photo_bytes: &'a [u8],
    /// The photo's file name (its extension is kept).
    pub photo_file_name: &'a str,
    /// The overlay PNG, when made.
    pub overlay_png: Option<&'a [u8]>,
    /// The HTML report, when made.
    pub report_html: Option<&'a str>,
}

/// Archives one measurement under `dir` and returns its sub-folder. Refuses with
/// [`RecordError::Exists`] when that entry already has a record (or a leftover file of an
/// unfinished write), unless `force`.
pub fn archive_measurement(
    dir: &Path,
    entry: &ArchiveEntry,
    force: bool,
) -> Result<PathBuf, RecordError> {
    let record = entry.record;
    let sha = sha256_hex(entry.photo_bytes);
    if record.photo.sha256 != sha {
        return Err(RecordError::BadRecord {
            path: entry.photo_file_name.to_string(),
            reason: format!(
                "these photo bytes hash to {sha} but the record was made from {}; archive \
                 the file that was measured",
                record.photo.sha256
            ),
        });
    }
    let json = record.to_json()?;
    let sample = match entry.sample {
        Some(s) if !s.trim().is_empty() => s.trim().to_string(),
        _ => stem(entry.photo_file_name).to_string(),
    };
    let name = folder_name(&sample, &sha);
    let folder = dir.join(&name);
    let record_path = folder.join(RECORD);
    if !force && record_path.exists() {
        return Err(RecordError::Exists(record_path.display().to_string()));
    }
    std::fs::create_dir_all(&folder).map_err(|e| RecordError::io(&folder, e))?;

    let photo_file = photo_file_name(entry.photo_file_name);
    let photo_path = folder.join(&photo_file);
    let same_photo = std::fs::read(&photo_path)
        .map(|b| b == entry.photo_bytes)
        .unwrap_or(false);
    if !same_photo {
        write_atomic(&photo_path, entry.photo_bytes, force)?;
    }
    for (file, bytes) in [
        (OVERLAY, entry.overlay_png),
        (REPORT, entry.report_html.map(str::as_bytes)),
    ] {
        let path = folder.join(file);
        match bytes {
            Some(b) => write_atomic(&path, b, force)?,
            // A replaced entry must not keep the old entry's overlay or report.
            None if force && path.exists() => {
                std::fs::remove_file(&path).map_err(|e| RecordError::io(&path, e))?
            }
            None => {}
        }
    }
    write_atomic(&record_path, json.as_bytes(), force)?;

    index::update(dir, IndexEntry::new(name, sample, photo_file, record))?;
    Ok(folder)
}

/// Sub-folders of the archive, sorted, leaving out hidden ones.
pub(super) fn sub_folders(dir: &Path) -> Result<Vec<PathBuf>, RecordError> {
    let read = std::fs::read_dir(dir).map_err(|e| RecordError::io(dir, e))?;
    let mut out = Vec::new();
    for item in read {
        let item = item.map_err(|e| RecordError::io(dir, e))?;
        let hidden = item.file_name().to_string_lossy().starts_with('.');
        if !hidden && item.path().is_dir() {
            out.push(item.path());
        }
    }
    out.sort();
    Ok(out)
}

/// The `photo.*` files of an entry, sorted.
pub(super) fn photo_files(folder: &Path) -> Result<Vec<PathBuf>, RecordError> {
    let read = std::fs::read_dir(folder).map_err(|e| RecordError::io(folder, e))?;
    let mut out = Vec::new();
    for item in read {
        let item = item.map_err(|e| RecordError::io(folder, e))?;
        let name = item.file_name().to_string_lossy().into_owned();
        if (name == "photo" || name.starts_with("photo.")) && item.path().is_file() {
            out.push(item.path());
        }
    }
    out.sort();
    Ok(out)
}

/// `photo.<ext>` with the original extension, lower-cased, when it is a plain one.
fn photo_file_name(original: &str) -> String {
    let base = original.rsplit(['/', '\\']).next().unwrap_or(original);
    match base.rsplit_once('.') {
        Some((stem, ext))
            if !stem.is_empty()
                && (1..=8).contains(&ext.len())
                && ext.chars().all(|c| c.is_ascii_alphanumeric()) =>
        {
            format!("photo.{}", ext.to_ascii_lowercase())
        }
        _ => "photo".to_string(),
    }
}

/// The file name without folder and extension.
fn stem(file_name: &str) -> &str {
    let base = file_name.rsplit(['/', '\\']).next().unwrap_or(file_name);
    match base.rsplit_once('.') {
        Some((s, _)) if !s.is_empty() => s,
        _ => base,
    }
}

/// `<sample>-<hash8>`, the sample reduced to characters safe in any file system.
fn folder_name(sample: &str, sha: &str) -> String {
    let mut safe: String = sample
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' || c == '.' {
                c
            } else {
                '_'
            }
        })
        .take(64)
        .collect();
    // No leading dot (hidden, or "." and ".."), no trailing dot (refused on Windows).
    safe = safe.trim_matches('.').to_string();
    if safe.is_empty() {
        safe = "photo".into();
    }
    format!("{safe}-{}", hash_prefix(sha))
}

pub(super) fn hash_prefix(sha: &str) -> String {
    sha.chars().take(8).collect()
}

use crate::photo::sha256_hex;

pub(super) fn sha256_file(path: &Path) -> Result<String, RecordError> {
    let mut file = std::fs::File::open(path).map_err(|e| RecordError::io(path, e))?;
    let mut hasher = Sha256::new();
    std::io::copy(&mut file, &mut hasher).map_err(|e| RecordError::io(path, e))?;
    Ok(format!("{:x}", hasher.finalize()))
}

#[cfg(test)]
mod tests;
