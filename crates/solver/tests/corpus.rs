//! The checked case corpus: every file in `tests/data` is one circuit with
//! the quantities expected of it, each with its tolerance, the reason for
//! that tolerance and the source of the expected value. Adding a case means
//! adding a file, not code.
//!
//! Each case runs under every setting of the solver's shortcuts
//! ([`Shortcuts`]: all on, all off, and each one off alone); every
//! expectation is asserted under each, the event log and the recorded
//! states are compared with the all-on run (to the bit where the setting
//! promises bits, else within `STATE_AGREEMENT` of the states' scale and
//! 1e-12 of the run's length), and the all-on run is repeated to show that
//! the same input gives the same bits.
//!
//! # File format
//!
//! ```json
//! {
//!   "what": "one line: the circuit and what is checked",
//!   "circuit": "examples/circuits/buck.json",
//!   "run": { "stop_time": 5e-3, "record_from": 4.95e-3 },
//!   "expect": [
//!     {
//!       "quantity": "inductor ripple",
//!       "output": "L1.current",
//!       "measure": "peak_to_peak",
//!       "value": 1.3636363636,
//!       "tolerance": { "relative": 2e-3 },
//!       "tolerance_why": "the formula takes the output voltage as constant ...",
//!       "source": "R. W. Erickson & D. Maksimović, ..., ch. 2, ..."
//!     }
//!   ]
//! }
//! ```
//!
//! - `circuit`: the path of a circuit file from the repository root, or the
//!   circuit itself inline (an object in the netlist format).
//! - `run` (optional, default the circuit's own `run` settings):
//!   `stop_time` and `record_from` in seconds; [`record_from`,
//!   `stop_time`] is the window the expectations measure unless they give
//!   their own (the whole run when `record_from` is absent). The whole run
//!   is recorded, so that the settings are compared at every instant. What
//!   the run does on an interruption or a resistive shoot-through comes
//!   from the circuit's own `run` settings.
//! - `measure`: `average`, `rms`, `peak_to_peak`, `min`, `max` of `output`
//!   (by [`measure`]); `event_count` (events of `event` in [t0, t1)),
//!   `first_event` (seconds from t0 to the first event of `event` at or
//!   after t0) or `event_period` (the mean spacing of the events of
//!   `event` in [t0, t1]) or `event_energy` (the energy the jumps among
//!   them dissipate in [t0, t1], J), where `event` is
//!   `{ "kind": "diode_off", "element": "D1", "cause": "crossing" }`
//!   (element and cause may be left out; kinds and causes as in the event
//!   log's JSON).
//! - `window` (optional): `[t0, t1]` in seconds, inside [0, `stop_time`];
//!   default [`record_from`, `stop_time`].
//! - `tolerance`: `{ "relative": r }` or `{ "absolute": a }`, never both.
//! - `requires` (optional): `[{ "shortcut": "pivoting", "why": "..." }]`,
//!   the shortcuts (by [`Shortcuts::NAMES`]) without which the case cannot
//!   run; under a setting without one the run must stop with an error
//!   (so the entry goes once the general path can run the case).

use std::path::{Path, PathBuf};

use fluxstep_netlist::{Circuit, InterruptionPolicy, ShootThroughPolicy};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{
    Crossed, EventCause, EventKind, OnInterruption, OnShootThrough, Options, RunResult, Shortcuts,
    Simulator,
};
use serde::Deserialize;

/// One case file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Case {
    what: String,
    circuit: CircuitRef,
    #[serde(default)]
    run: Option<RunWindow>,
    #[serde(default)]
    requires: Vec<Required>,
    expect: Vec<Expect>,
}

/// A shortcut without which the case cannot run, and why.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Required {
    shortcut: String,
    why: String,
}

/// A circuit given by its path from the repository root, or inline.
#[derive(Debug, Deserialize)]
#[serde(untagged)]
enum CircuitRef {
    Path(String),
    Inline(serde_json::Value),
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RunWindow {
    stop_time: f64,
    #[serde(default)]
    record_from: Option<f64>,
}

/// One expected quantity.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Expect {
    quantity: String,
    #[serde(default)]
    output: Option<String>,
    measure: Measure,
    #[serde(default)]
    event: Option<EventFilter>,
    #[serde(default)]
    window: Option<[f64; 2]>,
    value: f64,
    tolerance: Tolerance,
    tolerance_why: String,
    source: String,
}

#[derive(Clone, Copy, Debug, PartialEq, Deserialize)]
#[serde(rename_all = "snake_case")]
enum Measure {
    Average,
    Rms,
    PeakToPeak,
    Min,
    Max,
    EventCount,
    FirstEvent,
    EventPeriod,
    EventEnergy,
}

impl Measure {
    fn of_events(self) -> bool {
        matches!(
            self,
            Measure::EventCount | Measure::FirstEvent | Measure::EventPeriod | Measure::EventEnergy
        )
    }
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct EventFilter {
    kind: EventKind,
    #[serde(default)]
    element: Option<String>,
    #[serde(default)]
    cause: Option<EventCause>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct Tolerance {
    #[serde(default)]
    relative: Option<f64>,
    #[serde(default)]
    absolute: Option<f64>,
}

/// A case ready to run: its file name, its circuit and the checked fields.
struct Loaded {
    file: String,
    case: Case,
    circuit: Circuit,
    stop: f64,
    from: Option<f64>,
}

fn root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../..")
}

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data")
}

/// Reads and checks one case; the error names the file and the field.
fn load(file: &str, text: &str) -> Result<Loaded, String> {
    let de = &mut serde_json::Deserializer::from_str(text);
    let case: Case = serde_path_to_error::deserialize(de).map_err(|e| {
        let path = e.path().to_string();
        format!("{file}: {path}: {}", e.inner())
    })?;
    let circuit = match &case.circuit {
        CircuitRef::Path(p) => {
            Circuit::from_file(root().join(p)).map_err(|e| format!("{file}: circuit: {p}: {e}"))?
        }
        CircuitRef::Inline(v) => {
            Circuit::from_json(&v.to_string()).map_err(|e| format!("{file}: circuit: {e}"))?
        }
    };
    let (stop, from) = match (&case.run, &circuit.run) {
        (Some(r), _) => (r.stop_time, r.record_from),
        (None, Some(r)) => (r.stop_time, r.record_from),
        (None, None) => return Err(format!("{file}: run: missing, and the circuit has none")),
    };
    if !(stop.is_finite() && stop > 0.0) {
        return Err(format!(
            "{file}: run.stop_time: {stop} is not a positive time"
        ));
    }
    if let Some(f) = from {
        if !(f.is_finite() && f >= 0.0 && f < stop) {
            return Err(format!(
                "{file}: run.record_from: {f} is not in [0, {stop})"
            ));
        }
    }
    if case.what.trim().is_empty() {
        return Err(format!("{file}: what: empty"));
    }
    if case.expect.is_empty() {
        return Err(format!("{file}: expect: no expectations"));
    }
    for (i, r) in case.requires.iter().enumerate() {
        if Shortcuts::all_but(&r.shortcut).is_none() {
            return Err(format!(
                "{file}: requires[{i}].shortcut: {:?} is none of {:?}",
                r.shortcut,
                Shortcuts::NAMES
            ));
        }
        if r.why.trim().is_empty() {
            return Err(format!("{file}: requires[{i}].why: empty"));
        }
    }
    for (i, x) in case.expect.iter().enumerate() {
        let at = |field: &str| format!("{file}: expect[{i}].{field}");
        for (field, text) in [
            ("quantity", &x.quantity),
            ("tolerance_why", &x.tolerance_why),
            ("source", &x.source),
        ] {
            if text.trim().is_empty() {
                return Err(format!("{}: empty", at(field)));
            }
        }
        if !x.value.is_finite() {
            return Err(format!("{}: {} is not finite", at("value"), x.value));
        }
        match (x.tolerance.relative, x.tolerance.absolute) {
            (Some(t), None) | (None, Some(t)) if t.is_finite() && t > 0.0 => {}
            _ => {
                return Err(format!(
                    "{}: give one of relative or absolute, positive and finite",
                    at("tolerance")
                ))
            }
        }
        if x.measure.of_events() {
            if x.event.is_none() {
                return Err(format!("{}: missing for {:?}", at("event"), x.measure));
            }
            if x.output.is_some() {
                return Err(format!("{}: not used by {:?}", at("output"), x.measure));
            }
        } else {
            if x.output.is_none() {
                return Err(format!("{}: missing for {:?}", at("output"), x.measure));
            }
            if x.event.is_some() {
                return Err(format!("{}: not used by {:?}", at("event"), x.measure));
            }
        }
        if let Some([t0, t1]) = x.window {
            if !(t0.is_finite() && t1.is_finite() && 0.0 <= t0 && t0 < t1 && t1 <= stop) {
                return Err(format!(
                    "{}: [{t0}, {t1}] is not a window inside the run [0, {stop}]",
                    at("window")
                ));
            }
        }
    }
    Ok(Loaded {
        file: file.to_string(),
        case,
        circuit,
        stop,
        from,
    })
}

/// Every case file in `tests/data`, in name order.
fn load_all() -> Vec<Loaded> {
    let mut files: Vec<PathBuf> = std::fs::read_dir(data_dir())
        .expect("tests/data exists")
        .map(|e| e.expect("a directory entry").path())
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    files.sort();
    files
        .iter()
        .map(|p| {
            let name = p
                .file_name()
                .expect("a file")
                .to_string_lossy()
                .into_owned();
            let text = std::fs::read_to_string(p).unwrap_or_else(|e| panic!("{name}: {e}"));
            load(&name, &text).unwrap_or_else(|e| panic!("{e}"))
        })
        .collect()
}

/// The run of a case under one setting, with the state it ended in.
struct Ran {
    result: RunResult,
    end_state: Vec<f64>,
}

fn run(c: &Loaded, s: Shortcuts) -> Ran {
    try_run(c, s).unwrap_or_else(|e| panic!("{}: {s:?}: the run stops: {e}", c.file))
}

/// Whether settings `s` lack a shortcut the case requires.
fn lacks_required(c: &Loaded, s: Shortcuts) -> bool {
    c.case.requires.iter().any(|r| !match r.shortcut.as_str() {
        "plain_instants" => s.plain_instants,
        "replay" => s.replay,
        "repeated_lengths" => s.repeated_lengths,
        "guard_polynomials" => s.guard_polynomials,
        "nearby_lengths" => s.nearby_lengths,
        "pivoting" => s.pivoting,
        other => unreachable!("{other}: checked by load"),
    })
}

/// The run of a case under one setting, or the solver's error.
fn try_run(c: &Loaded, s: Shortcuts) -> Result<Ran, fluxstep_solver::SolverError> {
    // The whole run is recorded, so that the comparison between settings
    // covers every instant (and the states' scale is the run's, as in the
    // unit tests of `run/mod.rs`); `record_from` only sets the default
    // window of the expectations. What to do on an interruption or a
    // resistive shoot-through comes from the circuit's run settings.
    let mut opts = Options::default();
    if let Some(r) = &c.circuit.run {
        if r.on_interruption == InterruptionPolicy::ConserveFlux {
            opts.on_interruption = OnInterruption::ConserveFlux;
        }
        if r.on_shoot_through == ShootThroughPolicy::Record {
            opts.on_shoot_through = OnShootThrough::Record;
        }
    }
    let mut sim = Simulator::new(&c.circuit, opts)
        .unwrap_or_else(|e| panic!("{}: the circuit does not compile: {e}", c.file));
    sim.set_shortcuts(s);
    sim.advance_to(c.stop)?;
    let end_state = sim.state().to_vec();
    Ok(Ran {
        result: sim.finish(),
        end_state,
    })
}

/// The measured value of expectation `x` in run `r`.
fn measured(c: &Loaded, i: usize, x: &Expect, r: &RunResult) -> f64 {
    let [t0, t1] = x.window.unwrap_or([c.from.unwrap_or(0.0), c.stop]);
    if let Some(ev) = &x.event {
        let times: Vec<f64> = r
            .events
            .iter()
            .filter(|e| e.kind == ev.kind)
            .filter(|e| ev.element.as_deref().is_none_or(|n| n == e.element))
            .filter(|e| ev.cause.is_none_or(|c| c == e.cause))
            .map(|e| e.time)
            .collect();
        return match x.measure {
            Measure::EventEnergy => r
                .events
                .iter()
                .filter(|e| e.kind == ev.kind && t0 <= e.time && e.time <= t1)
                .filter(|e| ev.element.as_deref().is_none_or(|n| n == e.element))
                .filter(|e| ev.cause.is_none_or(|c| c == e.cause))
                .filter_map(|e| e.energy)
                .sum(),
            Measure::EventCount => times.iter().filter(|&&t| t0 <= t && t < t1).count() as f64,
            Measure::FirstEvent => match times.iter().find(|&&t| t >= t0) {
                Some(t) => t - t0,
                None => panic!("{}: expect[{i}]: no {:?} event after {t0}", c.file, ev),
            },
            Measure::EventPeriod => {
                let inside: Vec<f64> = times.into_iter().filter(|&t| t0 <= t && t <= t1).collect();
                assert!(
                    inside.len() >= 2,
                    "{}: expect[{i}]: fewer than two {ev:?} events in [{t0}, {t1}]",
                    c.file
                );
                (inside[inside.len() - 1] - inside[0]) / (inside.len() - 1) as f64
            }
            _ => unreachable!("checked by load"),
        };
    }
    let name = x.output.as_deref().expect("checked by load");
    let id = r
        .waveform
        .output(name)
        .unwrap_or_else(|e| panic!("{}: expect[{i}].output: {e}", c.file));
    let m =
        measure(&r.waveform, id, t0, t1).unwrap_or_else(|e| panic!("{}: expect[{i}]: {e}", c.file));
    match x.measure {
        Measure::Average => m.average,
        Measure::Rms => m.rms,
        Measure::PeakToPeak => m.peak_to_peak,
        Measure::Min => m.min,
        Measure::Max => m.max,
        _ => unreachable!("checked by load"),
    }
}

/// Asserts every expectation of `c` on run `r` (made under `s`). With
/// `CORPUS_PRINT` set, prints every value measured under all shortcuts
/// first (for writing a new case).
fn check_expectations(c: &Loaded, r: &RunResult, s: Shortcuts) {
    let got: Vec<f64> = (c.case.expect.iter().enumerate())
        .map(|(i, x)| measured(c, i, x, r))
        .collect();
    for (x, &got) in c.case.expect.iter().zip(&got) {
        let allowed = match (x.tolerance.relative, x.tolerance.absolute) {
            (Some(rel), _) => rel * x.value.abs(),
            (_, Some(abs)) => abs,
            _ => unreachable!("checked by load"),
        };
        let err = (got - x.value).abs();
        if std::env::var_os("CORPUS_PRINT").is_some() && s == Shortcuts::ALL {
            eprintln!(
                "{}: {}: got {got:.12e}, expected {:.12e}, error {err:.2e} ({:.2e} relative), {allowed:.2e} allowed",
                c.file, x.quantity, x.value, err / x.value.abs()
            );
        }
    }
    for (x, &got) in c.case.expect.iter().zip(&got) {
        let allowed = match (x.tolerance.relative, x.tolerance.absolute) {
            (Some(rel), _) => rel * x.value.abs(),
            (_, Some(abs)) => abs,
            _ => unreachable!("checked by load"),
        };
        assert!(
            (got - x.value).abs() <= allowed,
            "{}: {} ({}): got {got:.12e}, expected {:.12e} ± {allowed:.3e} ({}); \
             shortcuts {s:?}",
            c.file,
            x.quantity,
            c.case.what,
            x.value,
            x.source
        );
    }
}

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// Per recorded segment: the bits of its start, end and mode matrix M,
/// and what it ended at. Modes are compared by their matrices, not by
/// their numbers: the numbers follow the order in which a run first met
/// each conduction pattern, which the search for a pattern may change
/// (pivoting off builds candidates in another order) without changing a
/// single state.
fn segment_bits(r: &RunResult) -> Vec<(u64, u64, Vec<u64>, Option<Crossed>)> {
    let w = &r.waveform;
    (0..w.segments().len())
        .map(|i| {
            let d = w.segment_dynamics(i).expect("a recorded segment");
            (
                d.t0.to_bits(),
                d.t1.to_bits(),
                bits(d.matrix.as_slice()),
                d.crossed,
            )
        })
        .collect()
}

/// The states at every recorded segment's start, one after another.
fn segment_states(r: &RunResult) -> Vec<f64> {
    r.waveform
        .segments()
        .iter()
        .flat_map(|s| r.waveform.state(s.t0).expect("inside the record"))
        .collect()
}

/// Asserts run `b` (under `s`) agrees with run `a` (all shortcuts on): to
/// the bit where `s` promises bits, else the same events, modes and
/// causes with times within 1e-12 of the run's length and states within
/// `STATE_AGREEMENT` of their scale (the caches are exact to rounding).
fn compare(c: &Loaded, a: &Ran, b: &Ran, s: Shortcuts) {
    let f = &c.file;
    if s.promises_bits() {
        assert_eq!(
            a.result.events.to_json(),
            b.result.events.to_json(),
            "{f}: {s:?}: event logs differ"
        );
        assert_eq!(
            segment_bits(&a.result),
            segment_bits(&b.result),
            "{f}: {s:?}: segments differ"
        );
        assert_eq!(
            bits(&segment_states(&a.result)),
            bits(&segment_states(&b.result)),
            "{f}: {s:?}: segment states differ"
        );
        assert_eq!(
            bits(&a.end_state),
            bits(&b.end_state),
            "{f}: {s:?}: end states differ"
        );
        return;
    }
    let (sa, sb) = (segment_states(&a.result), segment_states(&b.result));
    let scale = sa
        .iter()
        .chain(&a.end_state)
        .fold(0.0f64, |m, v| m.max(v.abs()));
    // The worst deviations, as fractions of the states' scale and of the
    // run's length, with where they were found.
    let mut state_dev = (0.0f64, 0.0f64);
    let mut time_dev = (0.0f64, 0.0f64);
    let mut state = |p: f64, q: f64, t: f64| {
        let d = (p - q).abs() / scale;
        if d > state_dev.0 {
            state_dev = (d, t);
        }
    };
    let mut time = |x: f64, y: f64| {
        let d = (x - y).abs() / c.stop;
        if d > time_dev.0 {
            time_dev = (d, x);
        }
    };
    let (ea, eb) = (&a.result.events, &b.result.events);
    assert_eq!(ea.len(), eb.len(), "{f}: {s:?}: event counts differ");
    for (x, y) in ea.iter().zip(eb.iter()) {
        assert_eq!(
            (x.kind, x.cause, x.element),
            (y.kind, y.cause, y.element),
            "{f}: {s:?}: events at {} and {} differ",
            x.time,
            y.time
        );
        time(x.time, y.time);
        for (p, q) in x
            .before
            .iter()
            .zip(y.before)
            .chain(x.after.iter().zip(y.after))
        {
            state(*p, *q, x.time);
        }
    }
    let (ga, gb) = (a.result.waveform.segments(), b.result.waveform.segments());
    assert_eq!(ga.len(), gb.len(), "{f}: {s:?}: segment counts differ");
    for (x, y) in ga.iter().zip(gb) {
        time(x.t0, y.t0);
        time(x.t1, y.t1);
    }
    let (ma, mb) = (segment_bits(&a.result), segment_bits(&b.result));
    for (x, y) in ma.iter().zip(&mb) {
        assert_eq!((&x.2, x.3), (&y.2, y.3), "{f}: {s:?}: segment modes differ");
    }
    assert_eq!(sa.len(), sb.len(), "{f}: {s:?}");
    for (p, q) in sa.iter().zip(&sb) {
        state(*p, *q, f64::NAN);
    }
    for (p, q) in a.end_state.iter().zip(&b.end_state) {
        state(*p, *q, c.stop);
    }
    if std::env::var_os("CORPUS_PRINT").is_some() {
        eprintln!(
            "{f}: {s:?}: states within {:.1e} of their scale (worst at t = {:e}), times within {:.1e} of the run (worst at {:e})",
            state_dev.0, state_dev.1, time_dev.0, time_dev.1
        );
    }
    assert!(
        state_dev.0 <= STATE_AGREEMENT,
        "{f}: {s:?}: states differ by {:.2e} of their scale {scale:e} at t = {:e}",
        state_dev.0,
        state_dev.1
    );
    assert!(
        time_dev.0 <= 1e-12,
        "{f}: {s:?}: instants differ by {:.2e} of the run at t = {:e}",
        time_dev.0,
        time_dev.1
    );
}

/// How closely the states of a run with a cache off agree with the
/// all-on run, as a fraction of the largest state of the run. The caches
/// and the Taylor path are both exact to rounding, and the unit tests of
/// `run/mod.rs` hold them to 1e-12 on the recorded segment starts; here
/// the event snapshots and every instant of the start-up are compared
/// too, and the closed-loop voltage-mode buck, whose compensator feeds a
/// rounding difference back into the duty cycle, reaches 1.2e-12 early in
/// its start-up with nearby lengths off (every other case stays below
/// 3e-14). Twice the unit tests' bound covers it.
const STATE_AGREEMENT: f64 = 2e-12;

/// Every shortcut setting the corpus runs: all on, all off, each off alone.
fn settings() -> Vec<Shortcuts> {
    let mut v = vec![Shortcuts::ALL, Shortcuts::NONE];
    v.extend(
        Shortcuts::NAMES
            .iter()
            .map(|n| Shortcuts::all_but(n).expect("a known name")),
    );
    v
}

/// Every case, under every setting: the expectations hold, the records
/// agree with the all-on run, and the all-on run repeats bit for bit.
#[test]
fn every_case_holds_under_every_shortcut_setting() {
    let cases = load_all();
    assert!(cases.len() >= 12, "only {} cases", cases.len());
    for c in &cases {
        let a = run(c, Shortcuts::ALL);
        assert!(
            a.result.events.len() > 1,
            "{}: too few events to compare",
            c.file
        );
        check_expectations(c, &a.result, Shortcuts::ALL);
        // Determinism: the same input gives the same bits.
        let again = run(c, Shortcuts::ALL);
        compare(c, &a, &again, Shortcuts::ALL);
        for s in settings().into_iter().skip(1) {
            if lacks_required(c, s) {
                // The limit is checked too: once the general path can run
                // the case, this fails and the requirement goes.
                assert!(
                    try_run(c, s).is_err(),
                    "{}: runs under {s:?}, though it requires a shortcut that is off",
                    c.file
                );
                continue;
            }
            let b = run(c, s);
            check_expectations(c, &b.result, s);
            compare(c, &a, &b, s);
        }
    }
}

/// Every expectation names its source: a book with its chapter or
/// equation, common practice, or from memory.
#[test]
fn every_case_names_its_sources() {
    for c in load_all() {
        for x in &c.case.expect {
            let s = x.source.to_lowercase();
            assert!(
                s.contains("common practice")
                    || s.contains("from memory")
                    || s.contains("ch.")
                    || s.contains("eq."),
                "{}: {}: a source is a book and equation, common practice or from memory",
                c.file,
                x.quantity
            );
        }
    }
}

/// A malformed case fails with a message naming the file and the field.
#[test]
fn a_malformed_case_names_the_file_and_the_field() {
    let good = r#"{
        "what": "a resistor divider",
        "circuit": "examples/circuits/buck.json",
        "run": { "stop_time": 1e-5 },
        "expect": [{
            "quantity": "output", "output": "out", "measure": "average",
            "value": 1.0, "tolerance": { "relative": 0.1 },
            "tolerance_why": "demo", "source": "from memory"
        }]
    }"#;
    assert!(load("good.json", good).is_ok());
    let cases = [
        (r#""value": 1.0"#, r#""value": "one""#, "expect[0].value"),
        (
            r#""measure": "average""#,
            r#""measure": "mean""#,
            "expect[0].measure",
        ),
        (
            r#""relative": 0.1"#,
            r#""relative": -0.1"#,
            "expect[0].tolerance",
        ),
        (
            r#""relative": 0.1"#,
            r#""relative": 0.1, "absolute": 1"#,
            "expect[0].tolerance",
        ),
        (r#""output": "out", "#, "", "expect[0].output"),
        (
            r#""source": "from memory""#,
            r#""source": "from memory", "sauce": 1"#,
            "expect[0]",
        ),
        (
            r#""stop_time": 1e-5"#,
            r#""stop_time": -1"#,
            "run.stop_time",
        ),
        (
            r#""output": "out", "#,
            r#""output": "out", "window": [0.0, 1.0], "#,
            "expect[0].window",
        ),
        ("circuits/buck.json", "circuits/no_such.json", "circuit"),
        (
            r#""run": {"#,
            r#""requires": [{ "shortcut": "warp", "why": "x" }], "run": {"#,
            "requires[0].shortcut",
        ),
        (r#""what": "a resistor divider""#, r#""what": """#, "what"),
    ];
    for (from, to, field) in cases {
        let bad = good.replacen(from, to, 1);
        assert_ne!(bad, good, "{from}");
        let err = load("bad.json", &bad)
            .err()
            .unwrap_or_else(|| panic!("{to}: accepted"));
        assert!(
            err.starts_with("bad.json: ") && err.contains(field),
            "{to}: {err}"
        );
    }
}

/// An expectation that does not hold fails the check: the corpus can fail.
#[test]
#[should_panic(expected = "got")]
fn a_wrong_expectation_fails() {
    let mut c = load_all()
        .into_iter()
        .find(|c| c.file == "buck_ccm.json")
        .expect("the buck case");
    c.case.expect.truncate(1);
    c.case.expect[0].value *= 1.01;
    let r = run(&c, Shortcuts::ALL);
    check_expectations(&c, &r.result, Shortcuts::ALL);
}
