//! The design-review report: the last stage of the fluxstep pipeline
//! beside the command line (netlist → solver → analysis → plot →
//! **report**). It runs the analyses a design review asks for and lays
//! their results out as one self-contained HTML page — no external
//! scripts, fonts, styles or images; figures inline as SVG — with a
//! `summary.json` beside it that holds every number the page shows.
//!
//! The report computes no circuit quantity of its own: the periodic steady
//! state, measurements, losses, junction temperatures and loop gains come
//! from `fluxstep-analysis` and `fluxstep-solver`, the figures from
//! `fluxstep-plot`. It only chooses what to ask, checks the file's design
//! limits against the answers, and writes the page.
//!
//! # Brief overview
//!
//! - [`build`]: a circuit → a [`Report`] (the page, the summary JSON, the
//!   failed limits), in memory.
//! - [`write`]: the same, written as `report.html` and `summary.json` into
//!   a folder.
//! - [`ReportOptions`]: the file's name and bytes (for the certificate's
//!   hash), an optional sweep, the number of loop-gain frequencies.
//! - [`ReportError`]: every failure, naming what it concerns.
//!
//! Every number on the page is a `<span class="v" data-key="/json/pointer"
//! data-value="…">` whose pointer names its place in `summary.json`, so a
//! test (or a reviewer) can compare the two.
//!
//! # Example
//!
//! ```
//! use fluxstep_netlist::Circuit;
//! use fluxstep_report::{build, ReportOptions};
//!
//! let buck = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 24.0)
//!     .switch("S1", "in", "sw", "drive")
//!     .diode("D1", "gnd", "sw")
//!     .inductor("L1", "sw", "out", 22e-6)
//!     .capacitor("C1", "out", "gnd", 47e-6)
//!     .resistor("Rload", "out", "gnd", 6.0)
//!     .pwm("drive", 200e3, 0.5)
//!     .build()
//!     .unwrap();
//! let report = build(&buck, &ReportOptions::named("buck")).unwrap();
//! assert!(report.html.contains("id=\"operating-point\""));
//! let vout = report.summary.pointer("/operating_point/outputs/out/average").unwrap();
//! assert!((vout.as_f64().unwrap() - 12.0).abs() < 0.1);
//! assert!(report.failed.is_empty());
//! ```

// Every public item is part of the embedding API.
#![deny(missing_docs)]

mod gather;
mod page;
mod sheet;
pub mod sweep_plots;

use std::path::{Path, PathBuf};

use fluxstep_netlist::Circuit;

/// The page's sections in order, as (element id, heading): every report
/// has each of them, saying plainly when its analysis does not apply.
pub use page::SECTIONS;

/// What a report needs besides the circuit.
#[derive(Clone, Debug, Default)]
pub struct ReportOptions {
    /// The report's title, usually the circuit file's stem.
    pub name: String,
    /// Default none. The circuit file's bytes: the certificate shows their
    /// SHA-256 so a reviewer can check the file is the one reported.
    pub input: Option<Vec<u8>>,
    /// Default none. The circuit file's path as the user gave it (shown).
    pub file: Option<String>,
    /// Default none. A sweep file (docs/sweeps.md) over this circuit: its
    /// worst cases join the report.
    pub sweep: Option<PathBuf>,
    /// Default 0, meaning 80. Frequencies of each loop gain, log-spaced
    /// from 10 Hz to half the switching frequency; fewer are faster.
    pub loop_points: usize,
}

impl ReportOptions {
    /// Options with a title and nothing else.
    pub fn named(name: &str) -> ReportOptions {
        ReportOptions {
            name: name.into(),
            ..ReportOptions::default()
        }
    }
}

/// A finished report.
#[derive(Clone, Debug)]
pub struct Report {
    /// The page: one self-contained HTML document.
    pub html: String,
    /// Every number the page shows, under the JSON pointers its
    /// `data-key` attributes name.
    pub summary: serde_json::Value,
    /// One sentence per design limit that failed (empty: all met or none
    /// given).
    pub failed: Vec<String>,
}

/// Everything that can stop a report.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// An analysis failed in a way the page cannot present.
    #[error(transparent)]
    Analysis(#[from] fluxstep_analysis::AnalysisError),
    /// The transient failed before recording anything.
    #[error(transparent)]
    Solver(#[from] fluxstep_solver::SolverError),
    /// A figure could not be drawn.
    #[error(transparent)]
    Plot(#[from] fluxstep_plot::PlotError),
    /// Neither a steady state nor a transient window could be found: the
    /// reason.
    #[error("nothing to report: {0}")]
    Nothing(String),
    /// A file could not be written.
    #[error("cannot write {}: {source}", path.display())]
    Io {
        /// The folder or file.
        path: PathBuf,
        /// The cause.
        source: std::io::Error,
    },
}

/// Runs the analyses of `circuit` and lays them out as a page.
///
/// # Errors
///
/// [`ReportError::Nothing`] when the circuit has neither a periodic steady
/// state nor run settings for a transient; [`ReportError::Plot`] when a
/// figure cannot be drawn. Findings about the circuit (a diagnostic, no
/// convergence, an unstable loop) are not errors: the page reports them.
pub fn build(circuit: &Circuit, opts: &ReportOptions) -> Result<Report, ReportError> {
    let facts = gather::gather(circuit, opts)?;
    Ok(page::render(circuit, opts, &facts)?)
}

/// [`build`], then writes `report.html` and `summary.json` into `dir`
/// (created if missing).
///
/// # Errors
///
/// As [`build`]; [`ReportError::Io`] when a file cannot be written.
pub fn write(circuit: &Circuit, opts: &ReportOptions, dir: &Path) -> Result<Report, ReportError> {
    let report = build(circuit, opts)?;
    let io = |path: &Path| {
        let path = path.to_path_buf();
        move |source| ReportError::Io { path, source }
    };
    std::fs::create_dir_all(dir).map_err(io(dir))?;
    let html = dir.join("report.html");
    std::fs::write(&html, &report.html).map_err(io(&html))?;
    let json = dir.join("summary.json");
    let text = serde_json::to_string_pretty(&report.summary).expect("a JSON value serializes");
    std::fs::write(&json, text + "\n").map_err(io(&json))?;
    Ok(report)
}
