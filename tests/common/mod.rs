//! Helpers for end-to-end tests: run the built binary in a temporary folder.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// A temporary working folder for one test.
pub struct Bench {
    pub dir: tempfile::TempDir,
}

/// What a run of the binary gave.
pub struct Run {
    pub code: i32,
    pub stdout: String,
    pub stderr: String,
}

impl Run {
    /// The JSON record on stdout.
    pub fn record(&self) -> serde_json::Value {
        serde_json::from_str(&self.stdout).unwrap_or_else(|e| {
            panic!(
                "stdout is not a JSON record ({e}):\n{}\nstderr:\n{}",
                self.stdout, self.stderr
            )
        })
    }

    /// The value and standard uncertainty of the named result.
    pub fn result(&self, name: &str) -> (f64, f64) {
        let rec = self.record();
        let r = rec["results"]
            .as_array()
            .and_then(|a| a.iter().find(|r| r["name"] == name))
            .unwrap_or_else(|| panic!("no result `{name}` in {}", self.stdout));
        (r["value"].as_f64().unwrap(), r["u"].as_f64().unwrap())
    }
}

impl Bench {
    pub fn new() -> Self {
        Bench {
            dir: tempfile::tempdir().expect("temporary folder"),
        }
    }

    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Runs `fringegauge ARGS` in the folder.
    pub fn run(&self, args: &[&str]) -> Run {
        let out: Output = Command::new(env!("CARGO_BIN_EXE_fringegauge"))
            .args(args)
            .current_dir(self.dir.path())
            .output()
            .expect("the binary runs");
        Run {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        }
    }

    /// Names of the files in the folder, sorted.
    pub fn files(&self) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(self.dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }
}

/// The fixtures folder of the repository.
pub fn fixtures() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/fixtures"))
}

/// Simulates `kind` with `args` into `name`, returns the truth.
pub fn simulate(b: &Bench, kind: &str, name: &str, args: &[&str]) -> serde_json::Value {
    let mut a = vec!["simulate", kind, "--out", name];
    a.extend_from_slice(args);
    let r = b.run(&a);
    assert_eq!(r.code, 0, "simulate failed: {}", r.stderr);
    let text = std::fs::read_to_string(b.path(&format!("{name}.truth.json"))).unwrap();
    serde_json::from_str(&text).unwrap()
}

/// The `--ruler` stretch the simulator printed: the truth ruler's ends, 5 % inward, as a
/// person would click them roughly.
pub fn ruler_flag(truth: &serde_json::Value) -> String {
    let r = &truth["ruler"];
    let (s, e) = (&r["start_px"], &r["end_px"]);
    let p = |f: f64, i: usize| {
        let a = s[i].as_f64().unwrap();
        a + f * (e[i].as_f64().unwrap() - a)
    };
    format!(
        "{:.0},{:.0},{:.0},{:.0}",
        p(0.05, 0),
        p(0.05, 1),
        p(0.95, 0),
        p(0.95, 1)
    )
}
