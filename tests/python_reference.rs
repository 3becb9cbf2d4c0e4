//! Reference results of the Rust API for the Python bindings' tests: the
//! pytest suite (`crates/python/tests/test_reference.py`) checks that the
//! `fluxstep` Python package gives these very bits. This test recomputes
//! them with the plain Rust calls (`simulate` in one call, `measure`,
//! `Waveform::values`, `vertices`, `steady::find`, `frequency_response`) and
//! compares them with the committed files, so neither side can drift.
//! `UPDATE_GOLDEN=1 cargo test --test python_reference` rewrites them.

use fluxstep::analysis::response::{frequency_response, Input};
use fluxstep::analysis::steady::{find, SteadyOptions};
use fluxstep::netlist::Circuit;
use fluxstep::solver::measure::measure;
use fluxstep::solver::{simulate, Options, Record, Side};
use serde_json::{json, Value};

/// The example circuits compared: continuous conduction with a located
/// diode turn-off (discontinuous), a synchronous buck with dead times
/// (two gate signals with their own phases) and a peak-current-mode buck
/// (comparator events, no lane).
const CIRCUITS: [&str; 3] = ["buck_dcm", "sync_buck", "peak_current_buck"];

fn root() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Every number a Python run must reproduce, for one example circuit.
fn reference(name: &str) -> Value {
    let path = root().join(format!("examples/circuits/{name}.json"));
    let c = Circuit::from_file(&path).expect("example circuit is valid");
    let cfg = c.run.clone().expect("examples carry run settings");
    let stop = cfg.stop_time;
    let from = cfg.record_from.expect("examples record a window");
    let run = simulate(
        &c,
        stop,
        Options {
            record: Record::Window { from, to: stop },
            ..Options::default()
        },
    )
    .expect("the example runs");
    let w = &run.waveform;
    let (a, b) = w.span().expect("a window was recorded");
    let n = 1001;
    let mut times: Vec<f64> = (0..n)
        .map(|k| a + (b - a) * k as f64 / (n - 1) as f64)
        .collect();
    times.extend(w.event_times(a, b));
    // Instants outside the record give no value (NaN in Python).
    times.extend([a - 1e-9, b + 1e-9]);
    let mut values = serde_json::Map::new();
    let mut measurements = vec![];
    for o in &cfg.outputs {
        let id = w.output(o).expect("example outputs exist");
        let v: Vec<Value> = w
            .values(id, &times, Side::After)
            .expect("an output of this waveform")
            .into_iter()
            .map(|x| if x.is_nan() { Value::Null } else { json!(x) })
            .collect();
        values.insert(o.clone(), Value::Array(v));
        measurements.push(serde_json::to_value(measure(w, id, a, b).expect("measurable")).unwrap());
    }
    let first = w.output(&cfg.outputs[0]).unwrap();
    let (vt, vv): (Vec<f64>, Vec<f64>) = w.vertices(first, a, b, 2).into_iter().unzip();
    let events: Value = serde_json::from_str(&run.events.to_json()).unwrap();
    json!({
        "circuit": format!("examples/circuits/{name}.json"),
        "stop": stop,
        "record_from": from,
        "outputs": cfg.outputs,
        "times": times,
        "values": values,
        "vertices": {"output": cfg.outputs[0], "interior": 2, "t": vt, "v": vv},
        "measurements": measurements,
        "events": events,
        "stats": {
            "scheduled_events": run.stats.scheduled_events,
            "state_events": run.stats.state_events,
            "modes": run.stats.modes,
        },
    })
}

/// Steady state and duty-to-output response of the discontinuous buck.
fn analyses() -> Value {
    let c = Circuit::from_file(root().join("examples/circuits/buck_dcm.json")).unwrap();
    let ss = find(&c, &SteadyOptions::default()).expect("steady state");
    let freqs = [100.0, 1e3, 1e4, 3e4];
    let r = frequency_response(
        &c,
        &Input::parse("drive.duty"),
        "out",
        &freqs,
        &SteadyOptions::default(),
    )
    .expect("response");
    json!({
        "circuit": "examples/circuits/buck_dcm.json",
        "steady": {
            "period": ss.period,
            "start_time": ss.start_time,
            "state": ss.state,
            "residual": ss.residual,
            "multipliers": ss.multipliers,
            "iterations": ss.iterations,
        },
        "response": {"input": "drive.duty", "output": "out", "frequencies": freqs, "points": r.points},
    })
}

fn check(file: &str, value: Value) {
    let path = root().join("crates/python/tests/reference").join(file);
    let text = serde_json::to_string(&value).unwrap() + "\n";
    if std::env::var_os("UPDATE_GOLDEN").is_some() {
        std::fs::write(&path, &text).unwrap();
        return;
    }
    let old = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("{}: {e} (UPDATE_GOLDEN=1 writes it)", path.display()));
    assert!(
        old == text,
        "{} differs from the Rust API's results (UPDATE_GOLDEN=1 rewrites it)",
        path.display()
    );
}

/// Contract: the committed references are what the Rust API computes now.
#[test]
fn python_references_are_the_rust_results() {
    for name in CIRCUITS {
        check(&format!("{name}.json"), reference(name));
    }
    check("analyses.json", analyses());
}
