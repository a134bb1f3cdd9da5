//! The archive's `index.json`: one line per entry for listing without opening every
//! record, rewritten atomically under `index.lock` and rebuilt from the entries when lost.

use super::super::atomic::write_atomic;
use super::{RECORD, hash_prefix, photo_files, sub_folders};
use crate::record::{Record, RecordError};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Schema id of `index.json`.
pub const INDEX_SCHEMA_ID: &str = "fringegauge.archive-index/1";
pub(super) const INDEX: &str = "index.json";
const LOCK: &str = "index.lock";
/// How long to wait for another writer's index lock before giving up.
const LOCK_WAIT: Duration = Duration::from_secs(10);
/// A lock older than this was left by a writer that died: index updates take milliseconds.
const LOCK_STALE: Duration = Duration::from_secs(60);

/// A result as listed in the index.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ResultSummary {
    /// Result name.
    pub name: String,
    /// Label, when the result has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label: Option<String>,
    /// Miller index, when the result has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub index: Option<String>,
    /// Value, SI base units.
    pub value: f64,
    /// Standard uncertainty.
    pub u: f64,
    /// SI unit symbol.
    pub unit: String,
}

/// One entry of `index.json`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IndexEntry {
    /// Sub-folder name.
    pub folder: String,
    /// Sample id (or the photo's stem).
    pub sample: String,
    /// Measurement kind.
    pub kind: String,
    /// When the record was made.
    pub created: String,
    /// The archived photo's file name in the sub-folder.
    pub photo_file: String,
    /// SHA-256 of the photo.
    pub photo_sha256: String,
    /// The results.
    pub results: Vec<ResultSummary>,
}

impl IndexEntry {
    pub(super) fn new(
        folder: String,
        sample: String,
        photo_file: String,
        record: &Record,
    ) -> IndexEntry {
        IndexEntry {
            folder,
            sample,
            kind: record.setup.kind.clone(),
            created: record.created.clone(),
            photo_file,
            photo_sha256: record.photo.sha256.clone(),
            results: record
                .results
                .iter()
                .map(|r| ResultSummary {
                    name: r.name.clone(),
                    label: r.label.clone(),
                    index: r.index.clone(),
                    value: r.value,
                    u: r.u,
                    unit: r.unit.clone(),
                })
                .collect(),
        }
    }
}

#[derive(Debug, Serialize, Deserialize)]
pub(super) struct Index {
    schema: String,
    pub(super) entries: Vec<IndexEntry>,
}

/// The entries of the archive's index, oldest first.
pub fn list(dir: &Path) -> Result<Vec<IndexEntry>, RecordError> {
    let path = dir.join(INDEX);
    if !path.exists() {
        if !dir.is_dir() {
            return Err(RecordError::io(
                dir,
                std::io::Error::new(std::io::ErrorKind::NotFound, "no such folder"),
            ));
        }
        return Err(RecordError::NotArchive(dir.display().to_string()));
    }
    Ok(read_index(&path)?.entries)
}

/// Adds or replaces one entry in the index, under the lock.
pub(super) fn update(dir: &Path, entry: IndexEntry) -> Result<(), RecordError> {
    let _lock = IndexLock::take(dir)?;
    let path = dir.join(INDEX);
    let mut index = if path.exists() {
        read_index(&path).map_err(|e| RecordError::BadRecord {
            path: path.display().to_string(),
            reason: format!(
                "{e}; move it aside and archive again, and the index is rebuilt from the \
                 entries"
            ),
        })?
    } else {
        rebuild_index(dir)?
    };
    index.entries.retain(|e| e.folder != entry.folder);
    index.entries.push(entry);
    index
        .entries
        .sort_by(|a, b| (&a.created, &a.folder).cmp(&(&b.created, &b.folder)));
    let text = serde_json::to_string_pretty(&index).map_err(|e| RecordError::BadRecord {
        path: path.display().to_string(),
        reason: e.to_string(),
    })?;
    write_atomic(&path, text.as_bytes(), true)
}

/// An index made from the entries' records (for a new archive or a lost index).
fn rebuild_index(dir: &Path) -> Result<Index, RecordError> {
    let mut entries = Vec::new();
    for folder in sub_folders(dir)? {
        let Ok(text) = std::fs::read_to_string(folder.join(RECORD)) else {
            continue;
        };
        let Ok(record) = Record::from_json(&text) else {
            continue;
        };
        let folder_name = folder
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let photo_file = photo_files(&folder)?
            .first()
            .and_then(|p| p.file_name())
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let suffix = format!("-{}", hash_prefix(&record.photo.sha256));
        let sample = folder_name
            .strip_suffix(&suffix)
            .unwrap_or(&folder_name)
            .to_string();
        entries.push(IndexEntry::new(folder_name, sample, photo_file, &record));
    }
    Ok(Index {
        schema: INDEX_SCHEMA_ID.to_string(),
        entries,
    })
}

pub(super) fn read_index(path: &Path) -> Result<Index, RecordError> {
    let text = std::fs::read_to_string(path).map_err(|e| RecordError::io(path, e))?;
    let index: Index = serde_json::from_str(&text).map_err(|e| RecordError::BadRecord {
        path: path.display().to_string(),
        reason: format!("it is not an archive index: {e}"),
    })?;
    if index.schema != INDEX_SCHEMA_ID {
        return Err(RecordError::BadRecord {
            path: path.display().to_string(),
            reason: format!(
                "its schema is \"{}\", this fringegauge reads \"{INDEX_SCHEMA_ID}\"",
                index.schema
            ),
        });
    }
    Ok(index)
}

/// Holds `index.lock` while the index is rewritten, so that parallel writers (a batch on
/// several threads, or two processes) do not lose each other's entries.
struct IndexLock(PathBuf);

impl IndexLock {
    fn take(dir: &Path) -> Result<IndexLock, RecordError> {
        let path = dir.join(LOCK);
        let start = Instant::now();
        let mut pause = Duration::from_millis(2);
        loop {
            match std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&path)
            {
                Ok(_) => return Ok(IndexLock(path)),
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                    let stale = std::fs::metadata(&path)
                        .and_then(|m| m.modified())
                        .ok()
                        .and_then(|t| t.elapsed().ok())
                        .is_some_and(|age| age > LOCK_STALE);
                    if stale {
                        let _ = std::fs::remove_file(&path);
                        continue;
                    }
                    if start.elapsed() > LOCK_WAIT {
                        return Err(RecordError::Locked(path.display().to_string()));
                    }
                    std::thread::sleep(pause);
                    pause = (pause * 2).min(Duration::from_millis(50));
                }
                Err(e) => return Err(RecordError::io(&path, e)),
            }
        }
    }
}

impl Drop for IndexLock {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.0);
    }
}
