//! Writing a synthetic photo and its truth: JPEG or PNG by the file's extension, and
//! `PHOTO.truth.json` beside it. Each file is written to a temporary name in the same folder
//! and then moved into place, so a reader never sees half a file; without `force` the move
//! is a hard link that fails if the target exists, so nothing is overwritten even in a race.

use super::{SimError, SimPhoto};
use image::ImageEncoder;
use image::codecs::{jpeg::JpegEncoder, png::PngEncoder};
use std::fs;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

/// The truth file written beside `photo`: the photo's full name plus `.truth.json`.
pub fn truth_path(photo: &Path) -> PathBuf {
    let mut name = photo.as_os_str().to_owned();
    name.push(".truth.json");
    PathBuf::from(name)
}

enum Format {
    Jpeg,
    Png,
}

fn format_of(path: &Path) -> Result<Format, SimError> {
    let ext = path
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase)
        .unwrap_or_default();
    match ext.as_str() {
        "jpg" | "jpeg" => Ok(Format::Jpeg),
        "png" => Ok(Format::Png),
        _ => Err(SimError::Extension(ext)),
    }
}

/// `PATH.tmp`, created exclusively, so two writers of one path cannot mix their bytes.
fn temp_path(path: &Path) -> PathBuf {
    let mut name = path.as_os_str().to_owned();
    name.push(".tmp");
    PathBuf::from(name)
}

fn io<'a>(context: &'static str, path: &'a Path) -> impl FnOnce(std::io::Error) -> SimError + 'a {
    move |source| SimError::Io {
        context,
        path: path.to_path_buf(),
        source,
    }
}

/// Writes `bytes_of` into a temporary file beside `path`, then moves it into place.
fn write_atomic(
    path: &Path,
    force: bool,
    bytes_of: impl FnOnce(&mut BufWriter<fs::File>) -> Result<(), SimError>,
) -> Result<(), SimError> {
    let tmp = temp_path(path);
    let result = (|| {
        let file = fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map_err(io("creating", &tmp))?;
        let mut w = BufWriter::new(file);
        bytes_of(&mut w)?;
        w.flush().map_err(io("writing", &tmp))?;
        w.get_ref().sync_all().map_err(io("syncing", &tmp))?;
        drop(w);
        if force {
            fs::rename(&tmp, path).map_err(io("moving into place", path))
        } else {
            match fs::hard_link(&tmp, path) {
                Ok(()) => fs::remove_file(&tmp).map_err(io("removing", &tmp)),
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => Err(SimError::Exists {
                    path: path.to_path_buf(),
                }),
                Err(e) => Err(io("moving into place", path)(e)),
            }
        }
    })();
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
}

impl<T: serde::Serialize> SimPhoto<T> {
    /// Saves the photo (JPEG at `jpeg_quality`, 1–100, or PNG, by extension) and its truth
    /// beside it. Refuses to overwrite either file unless `force`.
    pub fn write(&self, path: &Path, jpeg_quality: u8, force: bool) -> Result<(), SimError> {
        let format = format_of(path)?;
        let truth = truth_path(path);
        if !force {
            for p in [path, truth.as_path()] {
                if p.exists() {
                    return Err(SimError::Exists {
                        path: p.to_path_buf(),
                    });
                }
            }
        }
        let json = serde_json::to_vec_pretty(&self.truth).map_err(SimError::Json)?;
        let (w, h) = self.image.dimensions();
        write_atomic(path, force, |out| {
            let encoded = match format {
                Format::Jpeg => JpegEncoder::new_with_quality(out, jpeg_quality.clamp(1, 100))
                    .write_image(self.image.as_raw(), w, h, image::ExtendedColorType::Rgb8),
                Format::Png => PngEncoder::new(out).write_image(
                    self.image.as_raw(),
                    w,
                    h,
                    image::ExtendedColorType::Rgb8,
                ),
            };
            encoded.map_err(|source| SimError::Encode {
                path: path.to_path_buf(),
                source,
            })
        })?;
        let written = write_atomic(&truth, force, |out| {
            out.write_all(&json).map_err(io("writing", &truth))?;
            out.write_all(b"\n").map_err(io("writing", &truth))
        });
        if written.is_err() && !force {
            // Do not leave a photo without its truth.
            let _ = fs::remove_file(path);
        }
        written
    }
}
