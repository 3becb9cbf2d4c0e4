//! `fluxstep sweep SWEEP.json` and `fluxstep merge SHARD…`: run a sweep
//! (all points, or one shard for a batch scheduler's array job) and combine
//! shard outputs into exactly the files a single run writes.
//!
//! A whole run (or a merge) writes `table.csv` (one row per point),
//! `summary.json` (per figure: spread, percentiles, worst-case point) and
//! the sweep's plots (`plot-K-….svg`) into the output folder and prints a summary with units; a shard writes
//! `shard-I-of-N/table.csv` and `shard.json` there. Failing points are rows
//! of the table, not errors: the exit status is 0 when the sweep ran, 2
//! when its input cannot be used.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::Instant;

use anyhow::Context;
use fluxstep_analysis::sweep::{Progress, RunOptions, Shard, Summary, Sweep, Table};

use fluxstep_report::sweep_plots::{self, show};

/// Arguments of `fluxstep sweep`.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The sweep file (JSON, see docs/sweeps.md).
    pub file: PathBuf,
    /// Output folder; default `out/<file stem>`.
    #[arg(long)]
    pub dir: Option<PathBuf>,
    /// Worker threads; default one per core. The results do not depend on it.
    #[arg(long)]
    pub threads: Option<usize>,
    /// Run only shard INDEX of COUNT (`--shard 3/16`, INDEX from 0): the
    /// points p with p mod COUNT = INDEX, written to `shard-INDEX-of-COUNT/`.
    #[arg(long)]
    pub shard: Option<String>,
}

/// Arguments of `fluxstep merge`.
#[derive(Debug, clap::Args)]
pub struct MergeArgs {
    /// The shard folders (`shard-I-of-N`), all N of them, in any order.
    #[arg(required = true)]
    pub shards: Vec<PathBuf>,
    /// Output folder; default the folder holding the first shard folder.
    #[arg(long)]
    pub dir: Option<PathBuf>,
}

/// Runs a sweep or one shard of it.
///
/// # Errors
///
/// Input that cannot be used (the sweep or circuit file, a path, a range,
/// a shard): exit status 2.
pub fn run(args: &Args) -> anyhow::Result<()> {
    let shard = args.shard.as_deref().map(Shard::parse).transpose()?;
    let sweep = Sweep::from_file(&args.file).with_context(|| args.file.display().to_string())?;
    let dir = args.dir.clone().unwrap_or_else(|| {
        let stem = args
            .file
            .file_stem()
            .map(|s| s.to_string_lossy().into_owned())
            .unwrap_or_else(|| "sweep".into());
        PathBuf::from("out").join(stem.trim_end_matches(".sweep"))
    });
    let bar = std::io::stderr().is_terminal().then(|| {
        let b = indicatif::ProgressBar::new(0);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:40} {pos}/{len} points, {msg} failed, ETA {eta}",
            )
            .expect("valid template"),
        );
        b.set_message("0");
        b
    });
    let report = |p: Progress| {
        if let Some(b) = &bar {
            b.set_length(p.total as u64);
            b.set_position(p.done as u64);
            b.set_message(p.failed.to_string());
        }
    };
    let started = Instant::now();
    let table = sweep.run(&RunOptions {
        threads: args.threads,
        shard,
        progress: bar.as_ref().map(|_| &report as &(dyn Fn(Progress) + Sync)),
    })?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let seconds = started.elapsed().as_secs_f64();
    let name = args
        .file
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    match shard {
        Some(s) => {
            let sub = dir.join(format!("shard-{}-of-{}", s.index, s.count));
            table.write_shard(&sub, s)?;
            println!(
                "{name}: shard {}/{}: {} of {} points ({} failed) in {:.3} s; written: {}/{{table.csv, shard.json}}",
                s.index,
                s.count,
                table.rows.len(),
                table.meta.points,
                table.failures(),
                seconds,
                sub.display()
            );
        }
        None => {
            write_results(&dir, &table)?;
            print!("{}", people_summary(&name, &table, Some(seconds)));
            println!("  written: {}/{{table.csv, summary.json}}", dir.display());
        }
    }
    Ok(())
}

/// Merges shard folders into the files a single run writes.
///
/// # Errors
///
/// Unreadable shards, shards of different sweeps, a missing or repeated
/// shard: exit status 2.
pub fn merge(args: &MergeArgs) -> anyhow::Result<()> {
    let mut shards = vec![];
    for d in &args.shards {
        shards.push(Table::read_shard(d)?);
    }
    let table = Table::merge(shards)?;
    let dir = args.dir.clone().unwrap_or_else(|| {
        args.shards[0]
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_default()
    });
    write_results(&dir, &table)?;
    print!("{}", people_summary("merged sweep", &table, None));
    println!("  written: {}/{{table.csv, summary.json}}", dir.display());
    Ok(())
}

/// `table.csv`, `summary.json` and the plots: the same bytes from a run
/// and a merge.
fn write_results(dir: &Path, table: &Table) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    std::fs::write(dir.join("table.csv"), table.to_csv()).context("cannot write table.csv")?;
    std::fs::write(dir.join("summary.json"), Summary::of(table).to_json())
        .context("cannot write summary.json")?;
    for (name, figure) in sweep_plots::plots(table) {
        match figure {
            Some(f) => {
                let svg = fluxstep_plot::render_svg(&f)?;
                std::fs::write(dir.join(&name), svg)
                    .with_context(|| format!("cannot write {name}"))?;
            }
            None => eprintln!("note: {name} not drawn: too few points measured"),
        }
    }
    Ok(())
}

/// The summary printed after a run: points by status, then per figure its
/// range, mean and the worst-case point with its parameters.
fn people_summary(name: &str, table: &Table, seconds: Option<f64>) -> String {
    let s = Summary::of(table);
    let mut out = format!("{name}: {} points, {} ok", s.points, s.ok);
    for (n, what) in [
        (s.invalid, "invalid"),
        (s.stopped, "stopped"),
        (s.failed, "failed"),
    ] {
        if n > 0 {
            out.push_str(&format!(", {n} {what}"));
        }
    }
    if let Some(t) = seconds {
        out.push_str(&format!(
            " in {t:.3} s ({:.0} points/s)",
            s.points as f64 / t.max(1e-9)
        ));
    }
    out.push('\n');
    if let Some(f) = &s.first_failure {
        out.push_str(&format!("  first failure: {f}\n"));
    }
    out.push_str(&format!(
        "  {:<16} {:>12} {:>12} {:>12} {:>12}   worst case\n",
        "figure", "min", "mean", "max", "std dev"
    ));
    let units: Vec<&str> = table
        .meta
        .parameters
        .iter()
        .map(|c| c.unit.as_str())
        .collect();
    for f in &s.figures {
        let (Some(min), Some(max), Some(mean), Some(sd), Some(worst)) =
            (&f.min, &f.max, f.mean, f.std_dev, &f.worst)
        else {
            out.push_str(&format!("  {:<16} (not measured at any point)\n", f.name));
            continue;
        };
        let at: Vec<String> = worst
            .parameters
            .iter()
            .zip(&units)
            .map(|((p, v), u)| format!("{p} = {}", show(*v, u)))
            .collect();
        let at = if at.is_empty() {
            format!("point {}", worst.point)
        } else {
            format!("point {}: {}", worst.point, at.join(", "))
        };
        out.push_str(&format!(
            "  {:<16} {:>12} {:>12} {:>12} {:>12}   {} {} at {at}\n",
            f.name,
            show(min.value, &f.unit),
            show(mean, &f.unit),
            show(max.value, &f.unit),
            show(sd, &f.unit),
            match f.worst_is {
                fluxstep_analysis::sweep::Worst::Max => "max",
                fluxstep_analysis::sweep::Worst::Min => "min",
            },
            show(worst.value, &f.unit),
        ));
    }
    out
}
