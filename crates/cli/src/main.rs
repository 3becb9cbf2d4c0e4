//! `fluxstep`: the command-line front end of the fluxstep pipeline
//! (JSON circuit → netlist → solver → analysis → plot).
//!
//! The binary only wires the library crates together: each subcommand
//! lives in its own module with a clap `Args` struct and a `run` function,
//! and this file maps their results to exit codes. Library errors are
//! typed; only here are they turned into text (with `anyhow`).
//!
//! Exit status ([`EXIT_CODES`], also in `--help` and the README): 0 on
//! success; 1 when a simulation stopped on a diagnostic (the files are
//! still written, up to the fault), a timing rule was violated, a design
//! limit failed in a report, or compared event logs differ; 2 when the input cannot be used (a
//! usage error, an unreadable file, text that is not a circuit in JSON, or
//! a circuit that breaks the rules — every problem is then listed on
//! stderr, one per line); 3 when an output folder or file cannot be
//! created or written.

use std::process::ExitCode;

use clap::{Parser, Subcommand};
use fluxstep_netlist::NetlistError;

mod check;
mod compare;
mod input;
mod losses;
mod report;
mod response;
mod run;
mod steady;
mod sweep;

/// Exit status for input that cannot be used. clap uses the same status for
/// usage errors, so every "your input is wrong" case shares one code.
const EXIT_BAD_INPUT: u8 = 2;

/// Exit status when a simulation stopped on a diagnostic (an interrupted
/// inductor current, a shoot-through, chatter…), a timing rule was
/// violated, or event logs differ from their golden log.
const EXIT_STOPPED: u8 = 1;

/// Exit status when an output folder or file cannot be created or written:
/// not the input's fault, so not 2.
const EXIT_WRITE: u8 = 3;

/// The exit codes as `--help` and the README list them.
const EXIT_CODES: &str = "Exit codes:
  0  success
  1  the simulation stopped on a diagnostic (files are still written, up to the fault),
     a timing rule or design limit of the file was violated, or compared event logs differ
  2  invalid input: usage, unreadable file, not a circuit, or a circuit that breaks rules
  3  an output folder or file cannot be created or written";

/// Simulates switching power converters (ideal switches, diodes, R, L, C,
/// coupled inductors) exactly, from a JSON circuit file: checks the file,
/// runs the transient, and writes the waveform, events, measurements and a
/// figure.
#[derive(Debug, Parser)]
#[command(
    name = "fluxstep",
    version,
    about = "Exact simulation of switching power converters from a JSON circuit file: \
             check the circuit, run it, and write waveforms, events, measurements and a figure",
    long_about = None,
    after_help = EXIT_CODES
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

/// The subcommands. Each variant's `Args` lives in the module of the same
/// name, which also holds its `run`.
#[derive(Debug, Subcommand)]
enum Command {
    /// Read and validate a circuit file and print a short summary.
    #[command(after_help = EXIT_CODES)]
    Check(check::Args),
    /// Run the transient a circuit file describes; write waveform CSV,
    /// event log, measurement summary and figure into a folder.
    #[command(after_help = EXIT_CODES)]
    Run(run::Args),
    /// Find the periodic steady state by shooting (Newton on the exact
    /// period map) with its Floquet multipliers; write one period as CSV,
    /// the summary and a figure of two periods.
    Steady(steady::Args),
    /// Small-signal frequency response of the periodic steady state (an
    /// input to an output), or the loop gain of a closed loop with its
    /// crossover and margins; write CSV, JSON and a Bode figure.
    #[command(after_help = EXIT_CODES)]
    Response(response::Args),
    /// Run a sweep file (operating points, tolerance corners, Monte Carlo),
    /// or one shard of it; write the result table and summary.
    Sweep(sweep::Args),
    /// Combine the shard folders of a sweep into the files a single run writes.
    Merge(sweep::MergeArgs),
    /// Compare an events.json with a golden one: where they first differ,
    /// and counts of moved, added and missing events (exit 1 on a
    /// difference beyond the tolerance).
    #[command(after_help = EXIT_CODES)]
    Compare(compare::Args),
    /// Write the design-review report: one self-contained report.html
    /// (circuit, operating point, waveforms, stress, losses, loops, events,
    /// design limits) and the summary.json of its numbers (exit 1 when a
    /// design limit of the file fails).
    #[command(after_help = EXIT_CODES)]
    Report(report::Args),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match &cli.command {
        Command::Check(args) => check::run(args),
        Command::Run(args) => run::run(args),
        Command::Steady(args) => steady::run(args),
        Command::Response(args) => response::run(args),
        Command::Sweep(args) => sweep::run(args),
        Command::Merge(args) => sweep::merge(args),
        Command::Compare(args) => compare::run(args),
        Command::Report(args) => report::run(args),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(err)
            if err.downcast_ref::<run::Stopped>().is_some()
                || err.downcast_ref::<steady::NotFound>().is_some()
                || err.downcast_ref::<report::LimitsFailed>().is_some()
                || err.downcast_ref::<losses::BalanceFailed>().is_some() =>
        {
            eprintln!("error: {err}");
            ExitCode::from(EXIT_STOPPED)
        }
        Err(err) if err.downcast_ref::<compare::TimingFailed>().is_some() => {
            eprintln!("timing: {err}");
            ExitCode::from(EXIT_STOPPED)
        }
        Err(err) if err.downcast_ref::<run::WriteFailed>().is_some() => {
            eprintln!("error: {err}");
            ExitCode::from(EXIT_WRITE)
        }
        Err(err)
            if err
                .downcast_ref::<fluxstep_plot::PlotError>()
                .is_some_and(|e| matches!(e, fluxstep_plot::PlotError::Io { .. })) =>
        {
            eprintln!("error: {err:#}");
            ExitCode::from(EXIT_WRITE)
        }
        Err(err) => {
            eprint!("{}", report(&err));
            ExitCode::from(EXIT_BAD_INPUT)
        }
    }
}

/// How many problems of an invalid circuit are printed before the rest are
/// only counted: a broken generator can produce thousands, and the first
/// ones usually explain the others.
const PROBLEMS_SHOWN: usize = 100;

/// The text printed on stderr for an error: one line, or for a circuit
/// that breaks rules, a heading and then one line per problem.
fn report(err: &anyhow::Error) -> String {
    match err.downcast_ref::<NetlistError>() {
        Some(NetlistError::Invalid(problems)) => {
            let count = match problems.len() {
                1 => "1 problem".to_string(),
                n => format!("{n} problems"),
            };
            let mut text = format!("error: {err}: invalid circuit, {count}:\n");
            for p in problems.iter().take(PROBLEMS_SHOWN) {
                text.push_str(&format!("  {p}\n"));
            }
            if problems.len() > PROBLEMS_SHOWN {
                text.push_str(&format!(
                    "  … and {} more (fix these first)\n",
                    problems.len() - PROBLEMS_SHOWN
                ));
            }
            text
        }
        _ => format!("error: {err:#}\n"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use anyhow::Context;
    use fluxstep_netlist::Problem;

    #[test]
    fn invalid_circuits_list_one_problem_per_line() {
        let err = Err::<(), _>(NetlistError::Invalid(vec![
            Problem::field("L1", "inductance", "must be positive, got -1e-5"),
            Problem::field("R1", "nodes[1]", "node 'x' is dangling").at_node("x"),
        ]))
        .context("bad.json")
        .unwrap_err();
        assert_eq!(
            report(&err),
            "error: bad.json: invalid circuit, 2 problems:\n\
             \x20 L1.inductance: must be positive, got -1e-5\n\
             \x20 R1.nodes[1]: node 'x' is dangling\n"
        );
    }

    /// Issue 19: thousands of problems print the first 100 and a count.
    #[test]
    fn issue_19_a_long_list_of_problems_is_cut_with_a_count() {
        let problems = (0..2000)
            .map(|i| Problem::field(&format!("R{i}"), "resistance", "must be positive"))
            .collect();
        let err = Err::<(), _>(NetlistError::Invalid(problems))
            .context("bad.json")
            .unwrap_err();
        let text = report(&err);
        assert_eq!(text.lines().count(), 1 + 100 + 1, "{text}");
        assert!(text.contains("2000 problems"));
        assert!(text.contains("R99.resistance") && !text.contains("R100.resistance"));
        assert!(
            text.ends_with("  … and 1900 more (fix these first)\n"),
            "{text}"
        );
    }

    #[test]
    fn other_errors_are_one_line_with_their_cause() {
        let err = Err::<(), _>(NetlistError::Json {
            path: "elements[2].inductance".into(),
            message: "invalid value \"5x\"".into(),
        })
        .context("bad.json")
        .unwrap_err();
        assert_eq!(
            report(&err),
            "error: bad.json: elements[2].inductance: invalid value \"5x\"\n"
        );
    }

    #[test]
    fn the_command_line_is_well_formed() {
        use clap::CommandFactory;
        Cli::command().debug_assert();
    }
}
