use super::*;
use crate::record::fixture;

/// Invented photo bytes and a record made from them.
fn measured(seed: u8) -> (Vec<u8>, Record) {
    let bytes: Vec<u8> = (0..2000u32).map(|i| (i as u8).wrapping_mul(seed)).collect();
    let mut record = fixture::grating_record();
    record.photo.sha256 = sha256_hex(&bytes);
    (bytes, record)
}

fn entry<'a>(record: &'a Record, bytes: &'a [u8], sample: Option<&'a str>) -> ArchiveEntry<'a> {
    ArchiveEntry {
        record,
        sample,
        photo_bytes: bytes,
        photo_file_name: "shots/grating-600.JPG",
        overlay_png: Some(b"not really a png"),
        report_html: Some("<p>report</p>"),
    }
}

fn names(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn sha256_matches_the_standard_example() {
    // FIPS 180-2, appendix B.1: SHA-256("abc").
    assert_eq!(
        sha256_hex(b"abc"),
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    );
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("abc");
    std::fs::write(&p, b"abc").unwrap();
    assert_eq!(sha256_file(&p).unwrap(), sha256_hex(b"abc"));
}

#[test]
fn an_entry_keeps_photo_record_overlay_and_report() {
    let dir = tempfile::tempdir().unwrap();
    let (bytes, record) = measured(7);
    let folder = archive_measurement(dir.path(), &entry(&record, &bytes, None), false).unwrap();
    let name = folder.file_name().unwrap().to_string_lossy().into_owned();
    assert_eq!(name, format!("grating-600-{}", &record.photo.sha256[..8]));
    assert_eq!(
        names(&folder),
        vec!["overlay.png", "photo.jpg", "record.json", "report.html"]
    );
    assert_eq!(std::fs::read(folder.join("photo.jpg")).unwrap(), bytes);
    let text = std::fs::read_to_string(folder.join("record.json")).unwrap();
    fixture::assert_same(&Record::from_json(&text).unwrap(), &record);
    assert_eq!(names(dir.path()), vec![name.clone(), "index.json".into()]);

    let listed = list(dir.path()).unwrap();
    assert_eq!(listed.len(), 1);
    let e = &listed[0];
    assert_eq!(
        (e.folder.as_str(), e.sample.as_str(), e.kind.as_str()),
        (name.as_str(), "grating-600", "grating")
    );
    assert_eq!(e.photo_file, "photo.jpg");
    assert_eq!(e.photo_sha256, record.photo.sha256);
    assert_eq!(e.results[0].name, "pitch");
    assert_eq!(e.results[0].value, record.results[0].value);
}

#[test]
fn second_write_is_refused_unless_forced() {
    let dir = tempfile::tempdir().unwrap();
    let (bytes, record) = measured(3);
    let first =
        archive_measurement(dir.path(), &entry(&record, &bytes, Some("S-1")), false).unwrap();
    let before = std::fs::read(first.join("record.json")).unwrap();

    let mut again = record.clone();
    again.warn("measured a second time");
    let err =
        archive_measurement(dir.path(), &entry(&again, &bytes, Some("S-1")), false).unwrap_err();
    assert!(matches!(err, RecordError::Exists(_)), "{err}");
    assert_eq!(err.exit_code(), crate::ExitCode::BadInput);
    assert_eq!(std::fs::read(first.join("record.json")).unwrap(), before);

    // Forced: replaced, and the overlay the new entry does not have is gone.
    let mut forced = entry(&again, &bytes, Some("S-1"));
    forced.overlay_png = None;
    let second = archive_measurement(dir.path(), &forced, true).unwrap();
    assert_eq!(second, first);
    let text = std::fs::read_to_string(second.join("record.json")).unwrap();
    assert!(
        Record::from_json(&text)
            .unwrap()
            .warnings
            .contains(&"measured a second time".into())
    );
    assert!(!second.join("overlay.png").exists());
    assert_eq!(list(dir.path()).unwrap().len(), 1, "replaced, not added");
    // No temporary or lock file anywhere.
    assert_eq!(
        names(&second),
        vec!["photo.jpg", "record.json", "report.html"]
    );
    assert_eq!(names(dir.path()).len(), 2);
}

#[test]
fn photo_bytes_must_be_those_measured() {
    let dir = tempfile::tempdir().unwrap();
    let (bytes, record) = measured(5);
    let other = vec![1u8; 10];
    let err = archive_measurement(dir.path(), &entry(&record, &other, None), false).unwrap_err();
    assert!(matches!(err, RecordError::BadRecord { .. }), "{err}");
    assert!(names(dir.path()).is_empty(), "nothing written");
    archive_measurement(dir.path(), &entry(&record, &bytes, None), false).unwrap();
}

#[test]
fn verify_finds_changed_missing_and_broken_entries() {
    let dir = tempfile::tempdir().unwrap();
    let mut folders = Vec::new();
    for (seed, sample) in [(11, "a"), (13, "b"), (17, "c"), (19, "d")] {
        let (bytes, record) = measured(seed);
        folders.push(
            archive_measurement(dir.path(), &entry(&record, &bytes, Some(sample)), false).unwrap(),
        );
    }
    let clean = verify(dir.path()).unwrap();
    assert!(clean.is_clean(), "{clean}");
    assert_eq!(clean.ok.len(), 4);

    // One byte of b's photo changed, c's photo gone, d's record damaged.
    let b_photo = folders[1].join("photo.jpg");
    let mut bytes = std::fs::read(&b_photo).unwrap();
    bytes[100] ^= 1;
    std::fs::write(&b_photo, &bytes).unwrap();
    std::fs::remove_file(folders[2].join("photo.jpg")).unwrap();
    std::fs::write(folders[3].join("record.json"), "{ truncated").unwrap();

    let report = verify(dir.path()).unwrap();
    assert!(!report.is_clean());
    assert_eq!(report.ok, vec![folders[0].clone()]);
    assert_eq!(report.mismatched.len(), 1);
    assert_eq!(report.mismatched[0].file, b_photo);
    assert_eq!(report.mismatched[0].file_sha256, sha256_hex(&bytes));
    assert_eq!(report.missing_photo, vec![folders[2].clone()]);
    assert_eq!(report.unreadable_record.len(), 1);
    assert_eq!(report.unreadable_record[0].0, folders[3]);
    // d is still in the index but its record cannot be read.
    assert_eq!(report.index_problems.len(), 1, "{report}");
    let shown = report.to_string();
    assert!(shown.contains("CHANGED") && shown.contains("MISSING") && shown.contains("BROKEN"));
}

#[test]
fn a_lost_index_is_reported_and_rebuilt() {
    let dir = tempfile::tempdir().unwrap();
    let (b1, r1) = measured(23);
    let (b2, r2) = measured(29);
    archive_measurement(dir.path(), &entry(&r1, &b1, Some("one")), false).unwrap();
    std::fs::remove_file(dir.path().join("index.json")).unwrap();
    let report = verify(dir.path()).unwrap();
    assert_eq!(report.ok.len(), 1);
    assert!(!report.is_clean());
    assert!(matches!(list(dir.path()), Err(RecordError::NotArchive(_))));

    archive_measurement(dir.path(), &entry(&r2, &b2, Some("two")), false).unwrap();
    let samples: Vec<String> = list(dir.path())
        .unwrap()
        .into_iter()
        .map(|e| e.sample)
        .collect();
    assert_eq!(samples.len(), 2);
    assert!(samples.contains(&"one".into()) && samples.contains(&"two".into()));
    assert!(verify(dir.path()).unwrap().is_clean());
}

#[test]
fn a_damaged_index_is_not_overwritten() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("index.json"), "[1, 2").unwrap();
    let (bytes, record) = measured(31);
    let err = archive_measurement(dir.path(), &entry(&record, &bytes, None), false).unwrap_err();
    assert!(err.to_string().contains("move it aside"), "{err}");
    assert_eq!(
        std::fs::read_to_string(dir.path().join("index.json")).unwrap(),
        "[1, 2"
    );
    assert!(matches!(
        list(dir.path()),
        Err(RecordError::BadRecord { .. })
    ));
}

#[test]
fn parallel_writers_keep_every_index_entry() {
    let dir = tempfile::tempdir().unwrap();
    let made: Vec<(Vec<u8>, Record)> = (0..8).map(|i| measured(37 + 2 * i)).collect();
    std::thread::scope(|s| {
        for (i, (bytes, record)) in made.iter().enumerate() {
            let dir = dir.path();
            s.spawn(move || {
                let sample = format!("p{i}");
                archive_measurement(dir, &entry(record, bytes, Some(&sample)), false)
            });
        }
    });
    assert_eq!(list(dir.path()).unwrap().len(), 8);
    assert!(!dir.path().join("index.lock").exists());
}

#[test]
fn list_and_verify_need_an_archive() {
    let dir = tempfile::tempdir().unwrap();
    assert!(matches!(list(dir.path()), Err(RecordError::NotArchive(_))));
    assert!(matches!(
        verify(dir.path()),
        Err(RecordError::NotArchive(_))
    ));
    let gone = dir.path().join("gone");
    assert!(matches!(list(&gone), Err(RecordError::Io { .. })));
    assert!(matches!(verify(&gone), Err(RecordError::Io { .. })));
}

#[test]
fn names_are_safe() {
    let sha = "0123456789abcdef";
    assert_eq!(folder_name("../etc/passwd", sha), "_etc_passwd-01234567");
    assert_eq!(folder_name("..", sha), "photo-01234567");
    assert_eq!(folder_name("Probe 7/α", sha), "Probe_7__-01234567");
    assert_eq!(folder_name(&"x".repeat(300), sha).len(), 64 + 9);
    assert_eq!(photo_file_name("a/b/IMG_1.JPG"), "photo.jpg");
    assert_eq!(photo_file_name("noext"), "photo");
    assert_eq!(photo_file_name(".hidden"), "photo");
    assert_eq!(photo_file_name("x.tar/../y"), "photo");
    assert_eq!(stem("dir\\shot.01.png"), "shot.01");
}
