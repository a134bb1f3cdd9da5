//! The `fringegauge` binary: parses the command line, runs the library, maps errors to
//! the documented exit codes (0 measured, 1 not measured, 2 bad input, 3 batch failures).

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let argv = match fringegauge::cli::setup::expand_setup_args(std::env::args_os().collect()) {
        Ok(a) => a,
        Err(e) => {
            eprintln!("fringegauge: {e}");
            return ExitCode::from(fringegauge::ExitCode::BadInput as u8);
        }
    };
    let cli = match fringegauge::cli::Cli::try_parse_from(argv) {
        Ok(c) => c,
        Err(e) => {
            // clap prints help and version to stdout with success, usage errors with 2.
            let code = if e.use_stderr() {
                fringegauge::ExitCode::BadInput as u8
            } else {
                0
            };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match fringegauge::cli::run(cli) {
        Ok(code) => ExitCode::from(code as u8),
        Err(e) => {
            eprintln!("fringegauge: {e}");
            ExitCode::from(e.exit_code() as u8)
        }
    }
}
