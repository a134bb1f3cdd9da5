//! Atomic file writes (DESIGN §7): the bytes go to a temporary file in the target's folder,
//! are flushed to disk, and only then renamed over the target, so that a crash or a full
//! disk leaves either the old file or the new one, never half of one. Without `force` the
//! rename refuses an existing target in the same system call (`renameat2` with
//! `RENAME_NOREPLACE`, or link-then-unlink where that is missing, as `tempfile` does), so
//! two writers cannot both win.

use super::RecordError;
use std::io::Write;
use std::path::Path;

/// Writes `bytes` to `path` atomically. Without `force` an existing `path` is refused with
/// [`RecordError::Exists`]; on any error the target is left as it was and no temporary file
/// remains.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<(), RecordError> {
    if !force && path.exists() {
        return Err(RecordError::Exists(path.display().to_string()));
    }
    let dir = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    let mut builder = tempfile::Builder::new();
    builder.prefix(".fringegauge-").suffix(".tmp");
    // Plain file permissions (less the umask) rather than the owner-only ones of a
    // temporary file: records in a shared archive are meant to be read by colleagues.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    let mut tmp = builder
        .tempfile_in(dir)
        .map_err(|e| RecordError::io(dir, e))?;
    tmp.write_all(bytes)
        .and_then(|()| tmp.as_file().sync_all())
        .map_err(|e| RecordError::io(path, e))?;
    let persisted = if force {
        tmp.persist(path)
    } else {
        tmp.persist_noclobber(path)
    };
    // On failure the temporary file comes back in the error and is deleted when dropped.
    persisted.map_err(|e| {
        if !force && e.error.kind() == std::io::ErrorKind::AlreadyExists {
            RecordError::Exists(path.display().to_string())
        } else {
            RecordError::io(path, e.error)
        }
    })?;
    sync_dir(dir);
    Ok(())
}

/// Flushes the folder entry of the rename to disk. Best effort: some file systems refuse
/// to open or sync a folder, and the file's own data is already on disk.
fn sync_dir(dir: &Path) {
    #[cfg(unix)]
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    #[cfg(not(unix))]
    let _ = dir;
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn refuses_without_force_and_replaces_with_it() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("record.json");
        write_atomic(&target, b"first", false).unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"first");

        let err = write_atomic(&target, b"second", false).unwrap_err();
        assert!(matches!(err, RecordError::Exists(_)), "{err}");
        assert_eq!(std::fs::read(&target).unwrap(), b"first", "untouched");

        write_atomic(&target, b"second", true).unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"second");
        assert_eq!(
            names(dir.path()),
            vec!["record.json"],
            "no temporary file left"
        );
    }

    #[test]
    fn failures_leave_nothing_behind() {
        let dir = tempfile::tempdir().unwrap();
        // The folder does not exist: an I/O error naming it, and nothing created.
        let missing = dir.path().join("nope").join("record.json");
        let err = write_atomic(&missing, b"x", false).unwrap_err();
        assert!(matches!(err, RecordError::Io { .. }), "{err}");
        assert!(err.to_string().contains("nope"), "{err}");
        // The target is a folder: the rename fails, the folder stays, no temporary file.
        let sub = dir.path().join("sub");
        std::fs::create_dir(&sub).unwrap();
        std::fs::write(sub.join("keep"), b"k").unwrap();
        assert!(write_atomic(&sub, b"x", true).is_err());
        assert_eq!(std::fs::read(sub.join("keep")).unwrap(), b"k");
        assert_eq!(names(dir.path()), vec!["sub"]);
    }

    #[test]
    fn racing_writers_cannot_both_create() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("index.json");
        let wins: usize = std::thread::scope(|s| {
            let handles: Vec<_> = (0..8)
                .map(|i| {
                    let target = &target;
                    s.spawn(move || write_atomic(target, format!("{i}").as_bytes(), false))
                })
                .collect();
            handles
                .into_iter()
                .map(|h| h.join().map(|r| r.is_ok()).unwrap_or(false) as usize)
                .sum()
        });
        assert_eq!(wins, 1);
        assert_eq!(names(dir.path()), vec!["index.json"]);
    }
}
