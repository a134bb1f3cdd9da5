//! Setup files (`--setup FILE.toml`): a bench's fixed inputs, written with the long flag
//! names as keys and values as on the command line. They are merged into the argument
//! list before parsing, so a setup file can hold exactly what a command line can, and
//! flags given on the command line win.

use crate::Error;
use std::ffi::OsString;
use std::path::Path;

/// Hidden flag that carries the names of the inputs taken from the setup file, so the
/// record can mark their source as "setup-file".
pub const FROM_SETUP_FLAG: &str = "--from-setup";

/// Keys of a setup file that are not flags.
const NON_FLAG_KEYS: &[&str] = &["kind"];

/// Reads the `--setup` file named in `argv`, if any, and appends each of its keys that
/// the command line does not already give.
pub fn expand_setup_args(argv: Vec<OsString>) -> Result<Vec<OsString>, Error> {
    let strings: Vec<String> = argv
        .iter()
        .map(|a| a.to_string_lossy().into_owned())
        .collect();
    let Some(path) = setup_path(&strings) else {
        return Ok(argv);
    };
    let table = read_setup(Path::new(&path))?;
    let subcommand = strings.get(1).cloned().unwrap_or_default();
    if let Some(kind) = table.get("kind").and_then(|v| v.as_str()) {
        if kind != subcommand {
            return Err(Error::Usage(format!(
                "the setup file {path} is for `{kind}`, not `{subcommand}`"
            )));
        }
    }
    let mut out = argv;
    let mut taken = Vec::new();
    for (key, value) in &table {
        if NON_FLAG_KEYS.contains(&key.as_str()) || key == "photo" {
            continue;
        }
        let flag = format!("--{key}");
        let given = strings
            .iter()
            .any(|a| a == &flag || a.starts_with(&format!("{flag}=")));
        if given {
            continue;
        }
        match value {
            toml::Value::Boolean(true) => out.push(flag.into()),
            toml::Value::Boolean(false) => {}
            toml::Value::String(s) => {
                out.push(flag.into());
                out.push(s.into());
            }
            toml::Value::Integer(i) => {
                out.push(flag.into());
                out.push(i.to_string().into());
            }
            toml::Value::Float(f) => {
                out.push(flag.into());
                out.push(f.to_string().into());
            }
            other => {
                return Err(Error::Usage(format!(
                    "setup file {path}: `{key}` must be a string, number or true/false, got {}",
                    other.type_str()
                )));
            }
        }
        taken.push(key.clone());
    }
    if !taken.is_empty() {
        out.push(FROM_SETUP_FLAG.into());
        out.push(taken.join(",").into());
    }
    Ok(out)
}

fn setup_path(args: &[String]) -> Option<String> {
    let mut it = args.iter();
    while let Some(a) = it.next() {
        if a == "--setup" {
            return it.next().cloned();
        }
        if let Some(p) = a.strip_prefix("--setup=") {
            return Some(p.to_string());
        }
    }
    None
}

/// Reads a setup file as a TOML table.
pub fn read_setup(path: &Path) -> Result<toml::Table, Error> {
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        context: format!("cannot read setup file {}", path.display()),
        source,
    })?;
    text.parse::<toml::Table>().map_err(|e| {
        Error::Usage(format!(
            "setup file {} is not valid TOML: {e}",
            path.display()
        ))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn setup_keys_fill_in_only_what_the_command_line_lacks() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("bench.toml");
        std::fs::write(
            &path,
            "kind = \"grating\"\nwavelength = \"650nm±3nm\"\ndistance = \"1.25m\"\nreflect = true\n",
        )
        .unwrap();
        let argv: Vec<OsString> = [
            "fringegauge",
            "grating",
            "p.jpg",
            "--distance",
            "2m",
            "--setup",
        ]
        .iter()
        .map(OsString::from)
        .chain([path.clone().into_os_string()])
        .collect();
        let out: Vec<String> = expand_setup_args(argv)
            .unwrap()
            .iter()
            .map(|a| a.to_string_lossy().into_owned())
            .collect();
        assert!(
            out.windows(2)
                .any(|w| w[0] == "--wavelength" && w[1] == "650nm±3nm")
        );
        assert_eq!(out.iter().filter(|a| *a == "--distance").count(), 1);
        assert!(out.contains(&"--reflect".to_string()));
        let from = out.iter().position(|a| a == FROM_SETUP_FLAG).unwrap();
        assert_eq!(out[from + 1], "reflect,wavelength");
    }

    #[test]
    fn a_setup_for_another_kind_is_refused() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("s.toml");
        std::fs::write(&path, "kind = \"pinhole\"\n").unwrap();
        let argv = vec![
            OsString::from("fringegauge"),
            "grating".into(),
            "--setup".into(),
            path.into_os_string(),
        ];
        assert!(matches!(expand_setup_args(argv), Err(Error::Usage(_))));
    }
}
