//! `octocut-demogen [DIR] [--check]`: writes the demo surfaces and case files into `DIR`
//! (default `demo-geometry`); with `--check`, only reports files that differ from a fresh run.

use std::path::PathBuf;
use std::process::ExitCode;

fn main() -> ExitCode {
    let mut dir = PathBuf::from("demo-geometry");
    let mut check = false;
    for a in std::env::args().skip(1) {
        match a.as_str() {
            "--check" => check = true,
            "-h" | "--help" => {
                println!("usage: octocut-demogen [DIR] [--check]\nwrites the demo surfaces and case files into DIR (default demo-geometry)");
                return ExitCode::SUCCESS;
            }
            _ => dir = PathBuf::from(a),
        }
    }
    let mut stale = 0;
    if !check {
        if let Err(e) = std::fs::create_dir_all(&dir) {
            eprintln!("error: cannot create {}: {e}", dir.display());
            return ExitCode::FAILURE;
        }
    }
    for (name, bytes) in octocut_demogen::scenarios::demo_files() {
        let path = dir.join(&name);
        if check {
            if std::fs::read(&path).ok().as_deref() != Some(bytes.as_slice()) {
                println!("stale: {}", path.display());
                stale += 1;
            }
        } else if let Err(e) = std::fs::write(&path, &bytes) {
            eprintln!("error: cannot write {}: {e}", path.display());
            return ExitCode::FAILURE;
        } else {
            println!("wrote {} ({} bytes)", path.display(), bytes.len());
        }
    }
    if stale > 0 {
        ExitCode::FAILURE
    } else {
        ExitCode::SUCCESS
    }
}

#[cfg(test)]
mod tests {
    /// The committed `demo-geometry/` files are what the generator writes now.
    #[test]
    fn committed_demo_files_are_up_to_date() {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../demo-geometry");
        for (name, bytes) in octocut_demogen::scenarios::demo_files() {
            let on_disk = std::fs::read(dir.join(&name)).unwrap_or_default();
            assert!(
                on_disk == bytes,
                "demo-geometry/{name} is stale: run `cargo run -p octocut-demogen`"
            );
        }
    }
}
