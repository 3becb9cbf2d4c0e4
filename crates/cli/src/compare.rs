//! `fluxstep compare NEW GOLDEN`: compare two `events.json` files (a new
//! run against a golden one) and say, in a designer's words, where they
//! first differ; exit 1 on a difference beyond the tolerance. Also the
//! timing rules of `fluxstep run` (docs/timing.md): evaluated over the run,
//! written into the summary, and exit 1 on a violation.

use std::path::PathBuf;

use anyhow::Context;
use fluxstep_analysis::timing::{check, describe_comparison, TimingReport};
use fluxstep_netlist::Circuit;
use fluxstep_solver::{EventLog, RunResult, Tolerances};

/// Arguments of `fluxstep compare`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The new event log (`events.json` written by `fluxstep run`).
    pub new: PathBuf,
    /// The golden event log it must match.
    pub golden: PathBuf,
    /// Absolute time tolerance per event in seconds, SI prefixes allowed ("1n"); default 0.
    #[arg(long, value_name = "SECONDS")]
    pub tolerance: Option<String>,
    /// Tolerance as a fraction of the switching period ("1e-4"); default 0.
    #[arg(long, value_name = "FRACTION")]
    pub relative: Option<String>,
    /// The switching period in seconds ("5u"); default: estimated from the
    /// golden log (median interval between turn-ons of its busiest switch).
    #[arg(long, value_name = "SECONDS")]
    pub period: Option<String>,
}

/// Timing rules were violated, or event logs differ beyond tolerance
/// (exit status 1); the text is the designer's sentence.
#[derive(Debug)]
pub struct TimingFailed(pub String);

impl std::fmt::Display for TimingFailed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for TimingFailed {}

fn read_log(path: &PathBuf) -> anyhow::Result<EventLog> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    serde_json::from_str(&text).with_context(|| {
        format!(
            "{}: not an event log (events.json of fluxstep run)",
            path.display()
        )
    })
}

fn si_arg(text: &Option<String>, what: &str) -> anyhow::Result<f64> {
    match text {
        None => Ok(0.0),
        Some(t) => {
            let v = fluxstep_netlist::parse_si(t).with_context(|| format!("--{what}"))?;
            if !(v.is_finite() && v >= 0.0) {
                anyhow::bail!("--{what} must not be negative, got {t}");
            }
            Ok(v)
        }
    }
}

/// Compares the two files and prints the result.
///
/// # Errors
///
/// Unreadable files, bad tolerances or logs of different circuits: an
/// ordinary error (exit 2). A difference beyond tolerance:
/// [`TimingFailed`] (exit 1).
pub fn run(args: &Args) -> anyhow::Result<()> {
    let new = read_log(&args.new)?;
    let golden = read_log(&args.golden)?;
    let period = match &args.period {
        Some(_) => Some(si_arg(&args.period, "period")?).filter(|p| *p > 0.0),
        None => None,
    };
    let tol = Tolerances {
        absolute: si_arg(&args.tolerance, "tolerance")?,
        relative: si_arg(&args.relative, "relative")?,
        period,
    };
    let c = new.compare(&golden, &tol).with_context(|| {
        format!(
            "cannot compare {} with {}",
            args.new.display(),
            args.golden.display()
        )
    })?;
    let text = describe_comparison(&c);
    if c.is_equal() {
        println!("{text}");
        Ok(())
    } else {
        Err(anyhow::Error::new(TimingFailed(text)))
    }
}

/// The file's timing rules over a finished run: `rerun(from)` simulates
/// again recording from `from` when a rule watches time before the
/// recorded window (the run is deterministic, so the same run). Returns the
/// report (`None` without rules) for the summary.
pub(crate) fn timing_rules(
    circuit: &Circuit,
    result: &RunResult,
    period: Option<f64>,
    rerun: impl FnOnce(f64) -> anyhow::Result<RunResult>,
) -> anyhow::Result<Option<TimingReport>> {
    let Some(rules) = circuit
        .run
        .as_ref()
        .map(|r| &r.timing)
        .filter(|r| !r.is_empty())
    else {
        return Ok(None);
    };
    let start = rules
        .iter()
        .map(|r| r.from.unwrap_or(0.0))
        .fold(f64::INFINITY, f64::min);
    let recorded = result.waveform.span().map_or(f64::INFINITY, |s| s.0);
    let again;
    let result = if start < recorded {
        again = rerun(start)?;
        &again
    } else {
        result
    };
    Ok(Some(check(
        rules,
        &result.events,
        Some(&result.waveform),
        period,
    )?))
}

/// The summary entry and the exit error of a timing report.
pub(crate) fn timing_summary(report: &TimingReport) -> (serde_json::Value, Option<TimingFailed>) {
    let value = serde_json::json!({
        "passed": report.passed(),
        "rules": report.rules,
    });
    let failures: Vec<&str> = report.failures().map(|r| r.sentence.as_str()).collect();
    let err = (!failures.is_empty()).then(|| TimingFailed(failures.join("\n  ")));
    (value, err)
}
