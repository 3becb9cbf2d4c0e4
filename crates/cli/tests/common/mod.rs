//! Helpers shared by the analysis subcommands' tests: run the binary,
//! find an example circuit, make a fresh scratch folder.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Runs `fluxstep` with `args`.
pub fn fluxstep(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fluxstep"))
        .args(args)
        .output()
        .expect("the fluxstep binary runs")
}

/// The path of an example circuit, as text for the command line.
pub fn example(name: &str) -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/circuits")
        .join(name)
        .to_string_lossy()
        .into_owned()
}

/// A scratch folder under the target directory, removed if it exists.
pub fn scratch_dir(name: &str) -> PathBuf {
    let d = Path::new(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&d);
    d
}
