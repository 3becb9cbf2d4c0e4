//! The boost converter of examples/circuits/boost.json in steady state: prints
//! averages, extremes and ripple of its outputs and writes out/boost.svg.

mod common;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    common::run_and_report("boost", "boost converter", 5.0)?;
    Ok(())
}
