//! `fluxstep report FILE`: the design-review report of a circuit — one
//! self-contained `report.html` and the `summary.json` of every number it
//! shows (see docs/report.md). Exit status 1 when a design limit of the
//! file fails, after both files are written.

use std::path::PathBuf;

use anyhow::Context;
use fluxstep_report::{write, ReportError, ReportOptions};

use crate::run::WriteFailed;

/// Arguments of `fluxstep report`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The circuit file (JSON, see docs/netlist.md).
    pub file: PathBuf,
    /// Output folder; default `out/<file stem>-report`.
    #[arg(long, value_name = "FOLDER")]
    pub dir: Option<PathBuf>,
    /// A sweep file over this circuit (docs/sweeps.md): its worst cases
    /// join the report.
    #[arg(long, value_name = "SWEEP")]
    pub sweep: Option<PathBuf>,
    /// Frequencies of each loop gain (log-spaced, 10 Hz to half the
    /// switching frequency).
    #[arg(long, default_value_t = 80, value_name = "POINTS")]
    pub loop_points: usize,
}

/// One or more design limits of the file failed (exit status 1).
#[derive(Debug)]
pub struct LimitsFailed(pub Vec<String>);

impl std::fmt::Display for LimitsFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} design limit(s) failed", self.0.len())?;
        for x in &self.0 {
            write!(f, "\n  {x}")?;
        }
        Ok(())
    }
}

impl std::error::Error for LimitsFailed {}

/// Writes the report.
///
/// # Errors
///
/// Bad input: an ordinary error (exit 2); a folder or file that cannot be
/// written: [`WriteFailed`] (exit 3); a failed design limit:
/// [`LimitsFailed`] (exit 1) once both files are written.
pub fn run(args: &Args) -> anyhow::Result<()> {
    let circuit = crate::input::read_circuit(&args.file)?;
    let bytes = std::fs::read(&args.file)
        .with_context(|| format!("cannot read {}", args.file.display()))?;
    let stem = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "circuit".into());
    let dir = args
        .dir
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(format!("{stem}-report")));
    let opts = ReportOptions {
        name: stem,
        input: Some(bytes),
        file: Some(args.file.display().to_string()),
        sweep: args.sweep.clone(),
        loop_points: args.loop_points,
    };
    let report = match write(&circuit, &opts, &dir) {
        Ok(r) => r,
        Err(ReportError::Io { path, source }) => {
            return Err(anyhow::Error::new(WriteFailed { path, source }))
        }
        Err(e) => return Err(e.into()),
    };
    println!(
        "{}: design review written to {}/{{report.html, summary.json}}",
        opts.name,
        dir.display()
    );
    if report.failed.is_empty() {
        Ok(())
    } else {
        Err(anyhow::Error::new(LimitsFailed(report.failed)))
    }
}
