//! The flyback converter of examples/circuits/flyback.json in steady state: prints
//! averages, extremes and ripple of its outputs and writes out/flyback.svg.

mod common;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    common::run_and_report("flyback", "flyback converter", 5.0)?;
    Ok(())
}
