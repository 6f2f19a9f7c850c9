//! `octocut`: the command-line front end. Thin: parses arguments, calls the library, reports.

use std::process::ExitCode;

fn main() -> ExitCode {
    eprintln!("octocut: no command yet");
    ExitCode::from(2)
}
