//! Signing off the demo buck (examples/circuits/buck.json, 24 V → 12 V at
//! 200 kHz) across its operating range: input 20–28 V, load 6–60 Ω and
//! inductance at its ±20 % corners (60 points, run in parallel), from the
//! sweep file examples/sweeps/buck_operating_range.sweep.json. Prints the
//! worst case of each figure with the point where it happens, and how many
//! points run in discontinuous conduction; writes
//! `out/sweep_buck/table.csv` and `summary.json`.
//!
//! Run with `cargo run --release --example sweep_buck`. Simulation results
//! do not replace measurement, local electrical codes or qualified review.

use fluxstep::analysis::sweep::{RunOptions, Summary, Sweep};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/examples/sweeps/buck_operating_range.sweep.json"
    );
    let sweep = Sweep::from_file(path)?;
    let started = std::time::Instant::now();
    let table = sweep.run(&RunOptions::default())?;
    let seconds = started.elapsed().as_secs_f64();
    let summary = Summary::of(&table);
    println!(
        "demo buck over its operating range: {} points ({} ok) in {:.2} s",
        summary.points, summary.ok, seconds
    );
    for f in &summary.figures {
        let Some(w) = &f.worst else { continue };
        let at: Vec<String> = w
            .parameters
            .iter()
            .map(|(p, v)| format!("{p} = {v:.4e}"))
            .collect();
        println!(
            "  {:<12} worst {:>10.4e} {:<2} (range {:.4e} … {:.4e}) at {}",
            f.name,
            w.value,
            f.unit,
            f.min.as_ref().map_or(f64::NAN, |p| p.value),
            f.max.as_ref().map_or(f64::NAN, |p| p.value),
            at.join(", ")
        );
    }
    // Conduction mode per point: the inductor current's valley is zero in
    // discontinuous conduction.
    let valley = table.figure("il_valley").ok_or("no il_valley figure")?;
    let dcm = valley
        .iter()
        .filter(|v| v.is_some_and(|v| v < 1e-9))
        .count();
    println!(
        "  discontinuous conduction at {dcm} of {} points",
        valley.len()
    );
    let dir = std::path::Path::new("out/sweep_buck");
    std::fs::create_dir_all(dir)?;
    std::fs::write(dir.join("table.csv"), table.to_csv())?;
    std::fs::write(dir.join("summary.json"), summary.to_json())?;
    println!("  written: out/sweep_buck/{{table.csv, summary.json}}");
    Ok(())
}
