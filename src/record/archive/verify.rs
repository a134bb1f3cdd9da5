//! `archive verify`: every archived photo re-hashed (SHA-256, FIPS 180-4) against the hash
//! its record was made from, and the index checked against the entries.

use super::index::{INDEX, read_index};
use super::{RECORD, hash_prefix, photo_files, sha256_file, sub_folders};
use crate::record::{Record, RecordError};
use std::fmt;
use std::path::{Path, PathBuf};

/// A photo whose bytes no longer hash to what its record says.
#[derive(Debug, Clone, PartialEq)]
pub struct Mismatch {
    /// The photo file.
    pub file: PathBuf,
    /// The hash in the record.
    pub record_sha256: String,
    /// The hash of the file now.
    pub file_sha256: String,
}

/// What [`verify`] found.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct VerifyReport {
    /// Entries whose photo matches its record.
    pub ok: Vec<PathBuf>,
    /// Photos that changed.
    pub mismatched: Vec<Mismatch>,
    /// Entries whose photo is gone.
    pub missing_photo: Vec<PathBuf>,
    /// Entries whose record is missing or cannot be read, with the reason.
    pub unreadable_record: Vec<(PathBuf, String)>,
    /// Disagreements between `index.json` and the entries.
    pub index_problems: Vec<String>,
}

impl VerifyReport {
    /// Whether every entry checked out.
    pub fn is_clean(&self) -> bool {
        self.mismatched.is_empty()
            && self.missing_photo.is_empty()
            && self.unreadable_record.is_empty()
            && self.index_problems.is_empty()
    }
}

impl fmt::Display for VerifyReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "{} entr{} verified",
            self.ok.len(),
            plural_y(self.ok.len())
        )?;
        for m in &self.mismatched {
            writeln!(
                f,
                "CHANGED  {}: record says sha256 {}, the file hashes to {}",
                m.file.display(),
                m.record_sha256,
                m.file_sha256
            )?;
        }
        for p in &self.missing_photo {
            writeln!(f, "MISSING  {}: no photo.* file", p.display())?;
        }
        for (p, why) in &self.unreadable_record {
            writeln!(f, "BROKEN   {}: {why}", p.display())?;
        }
        for problem in &self.index_problems {
            writeln!(f, "INDEX    {problem}")?;
        }
        Ok(())
    }
}

fn plural_y(n: usize) -> &'static str {
    if n == 1 { "y" } else { "ies" }
}

/// Re-hashes every archived photo against its record and checks the index against the
/// entries.
pub fn verify(dir: &Path) -> Result<VerifyReport, RecordError> {
    let mut report = VerifyReport::default();
    let mut seen = Vec::new();
    for folder in sub_folders(dir)? {
        let name = folder
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_default();
        let record_path = folder.join(RECORD);
        let record = match std::fs::read_to_string(&record_path) {
            Ok(text) => Record::from_json_at(&text, &record_path.display().to_string()),
            Err(e) => Err(RecordError::io(&record_path, e)),
        };
        let record = match record {
            Ok(r) => r,
            Err(e) => {
                report
                    .unreadable_record
                    .push((folder.clone(), e.to_string()));
                continue;
            }
        };
        seen.push((name.clone(), record.photo.sha256.clone()));
        if !name.ends_with(&format!("-{}", hash_prefix(&record.photo.sha256))) {
            report.index_problems.push(format!(
                "{name}: the folder name does not end in the record's photo hash {}",
                hash_prefix(&record.photo.sha256)
            ));
        }
        let photos = photo_files(&folder)?;
        if photos.is_empty() {
            report.missing_photo.push(folder.clone());
            continue;
        }
        let mut all_match = true;
        for photo in photos {
            let file_sha = sha256_file(&photo)?;
            if file_sha != record.photo.sha256 {
                all_match = false;
                report.mismatched.push(Mismatch {
                    file: photo,
                    record_sha256: record.photo.sha256.clone(),
                    file_sha256: file_sha,
                });
            }
        }
        if all_match {
            report.ok.push(folder);
        }
    }
    check_index(dir, &seen, &mut report)?;
    Ok(report)
}

fn check_index(
    dir: &Path,
    seen: &[(String, String)],
    report: &mut VerifyReport,
) -> Result<(), RecordError> {
    let path = dir.join(INDEX);
    if !path.exists() {
        if seen.is_empty() && report.unreadable_record.is_empty() {
            return Err(RecordError::NotArchive(dir.display().to_string()));
        }
        report.index_problems.push(format!(
            "{INDEX} is missing; the next archived measurement rebuilds it"
        ));
        return Ok(());
    }
    let index = match read_index(&path) {
        Ok(i) => i,
        Err(e) => {
            report.index_problems.push(e.to_string());
            return Ok(());
        }
    };
    for e in &index.entries {
        match seen.iter().find(|(name, _)| *name == e.folder) {
            None => report
                .index_problems
                .push(format!("{} is listed but has no readable record", e.folder)),
            Some((_, sha)) if *sha != e.photo_sha256 => report.index_problems.push(format!(
                "{}: the index lists photo sha256 {}, the record says {sha}",
                e.folder, e.photo_sha256
            )),
            Some(_) => {}
        }
    }
    for (name, _) in seen {
        if !index.entries.iter().any(|e| e.folder == *name) {
            report
                .index_problems
                .push(format!("{name} is not listed in {INDEX}"));
        }
    }
    Ok(())
}
