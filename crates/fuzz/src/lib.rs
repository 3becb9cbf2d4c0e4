//! Structure-aware fuzzing of fluxstep on stable Rust: the last stage of
//! no pipeline, a test tool beside it.
//!
//! [`Mutator`] takes a circuit file (parsed as a JSON value) and changes it
//! the way a careless or hostile user would — deletes, duplicates and swaps
//! keys and array items, puts extreme numbers and values of the wrong type
//! in, renames kinds, flips bytes of the text — and [`run_case`] reads the
//! result as `fluxstep check` does and, when it is a valid circuit, runs
//! it briefly in-process with a bounded event count, memory budget and
//! deadline. A panic anywhere is a bug: the driver (`fluxstep-fuzz`)
//! catches it with `catch_unwind`, counts it and saves the input.
//!
//! Everything is deterministic from the seed ([`Rng`]), so a reported case
//! is reproduced by its seed and number, or by the saved file.
//!
//! # Example
//!
//! ```
//! use fluxstep_fuzz::{run_case, Limits, Mutator, Rng};
//! let seed = std::fs::read_to_string(concat!(
//!     env!("CARGO_MANIFEST_DIR"),
//!     "/../../examples/circuits/buck.json"
//! ))
//! .unwrap();
//! let mut m = Mutator::new(Rng::new(7));
//! let text = m.mutate(&seed);
//! let outcome = run_case(&text, &Limits::default());
//! assert!(!outcome.timed_out);
//! ```

// Public items are documented: the harness is run by people who did not
// write it.
#![deny(missing_docs)]

use std::time::{Duration, Instant};

use fluxstep_netlist::Circuit;
use fluxstep_solver::{Options, Record, Simulator};
use serde_json::{Map, Number, Value};

/// A small deterministic generator (SplitMix64: S. Vigna's public-domain
/// reference, common practice for seeding and fuzzing).
#[derive(Clone, Debug)]
pub struct Rng(u64);

impl Rng {
    /// A generator started from `seed`.
    pub fn new(seed: u64) -> Self {
        Rng(seed)
    }

    /// The next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// A number in `0..n` (`n` > 0).
    pub fn below(&mut self, n: usize) -> usize {
        (self.next_u64() % n as u64) as usize
    }

    /// True with probability `1/n`.
    pub fn one_in(&mut self, n: usize) -> bool {
        self.below(n) == 0
    }
}

/// Numbers at the edges of what `f64`, time and the SI parser handle.
const EXTREME_NUMBERS: &[f64] = &[
    0.0,
    -0.0,
    -1.0,
    1.0,
    0.5,
    1e-300,
    5e-324,
    1e-15,
    1e-12,
    1e12,
    1e100,
    1e300,
    f64::MAX,
    f64::MIN_POSITIVE,
    -1e300,
    4294967296.0,
    18446744073709551615.0,
];

/// Text that looks like a value and may not be one.
const EXTREME_TEXT: &[&str] = &[
    "", "nan", "NaN", "inf", "-inf", "1e400", "1e-400", "22µ", "22u", "1M", "1m", "5x", "--1",
    "1e", "0x10", " 1", "1k2", "∞", "1e308k", "gnd", "0", "out", "sw", "in", "drive", "a.b",
];

/// Kinds of elements, gates, waveforms and laws the format knows, so that a
/// renamed kind is often another valid kind with the wrong fields.
const KINDS: &[&str] = &[
    "resistor",
    "inductor",
    "capacitor",
    "voltage_source",
    "current_source",
    "switch",
    "diode",
    "coupled_inductors",
    "transformer",
    "pwm",
    "complementary_pwm",
    "piecewise_linear",
    "constant",
    "sine",
    "peak_current",
    "hysteretic",
    "voltage_mode",
    "pi",
    "state_space",
    "poles_zeros",
];

/// Changes circuit files the way a hostile user would, deterministically
/// from its [`Rng`].
#[derive(Clone, Debug)]
pub struct Mutator {
    rng: Rng,
}

impl Mutator {
    /// A mutator drawing from `rng`.
    pub fn new(rng: Rng) -> Self {
        Mutator { rng }
    }

    /// The generator, to draw other choices from the same stream.
    pub fn rng(&mut self) -> &mut Rng {
        &mut self.rng
    }

    /// One to four structural changes of the JSON of `text` (or, one time
    /// in eight, byte flips of the text itself), as text.
    pub fn mutate(&mut self, text: &str) -> String {
        if self.rng.one_in(8) {
            return self.flip_bytes(text);
        }
        let Ok(mut v) = serde_json::from_str::<Value>(text) else {
            return self.flip_bytes(text);
        };
        let n = 1 + self.rng.below(4);
        for _ in 0..n {
            self.mutate_value(&mut v);
        }
        if self.rng.one_in(2) {
            v.to_string()
        } else {
            serde_json::to_string_pretty(&v).expect("a JSON value serializes")
        }
    }

    /// Flips, deletes or inserts a few bytes (the result may not be UTF-8;
    /// it is read lossily, as a file would be refused or read).
    fn flip_bytes(&mut self, text: &str) -> String {
        let mut bytes = text.as_bytes().to_vec();
        for _ in 0..1 + self.rng.below(4) {
            if bytes.is_empty() {
                break;
            }
            let i = self.rng.below(bytes.len());
            match self.rng.below(4) {
                0 => bytes[i] ^= 1 << self.rng.below(8),
                1 => {
                    bytes.remove(i);
                }
                2 => bytes.insert(i, b"{}[]\",:0-e.\\"[self.rng.below(12)]),
                _ => bytes.truncate(i),
            }
        }
        String::from_utf8_lossy(&bytes).into_owned()
    }

    /// Picks a random place in the tree and changes it.
    fn mutate_value(&mut self, root: &mut Value) {
        // Walk down a random path, stopping early now and then.
        let mut v = root;
        loop {
            let children = match v {
                Value::Object(m) => m.len(),
                Value::Array(a) => a.len(),
                _ => 0,
            };
            if children == 0 || self.rng.one_in(4) {
                break;
            }
            let k = self.rng.below(children);
            v = match v {
                Value::Object(m) => m.values_mut().nth(k).expect("k < len"),
                Value::Array(a) => &mut a[k],
                _ => unreachable!("only containers have children"),
            };
        }
        self.change(v);
    }

    /// One change of `v` in place.
    fn change(&mut self, v: &mut Value) {
        match self.rng.below(10) {
            // Delete a key or item.
            0 => match v {
                Value::Object(m) if !m.is_empty() => {
                    let k = m
                        .keys()
                        .nth(self.rng.below(m.len()))
                        .cloned()
                        .expect("k < len");
                    m.remove(&k);
                }
                Value::Array(a) if !a.is_empty() => {
                    a.remove(self.rng.below(a.len()));
                }
                _ => *v = Value::Null,
            },
            // Duplicate an item (same names twice), or many times.
            1 => {
                if let Value::Array(a) = v {
                    if !a.is_empty() {
                        let item = a[self.rng.below(a.len())].clone();
                        let copies = if self.rng.one_in(8) { 40 } else { 1 };
                        for _ in 0..copies {
                            a.push(item.clone());
                        }
                    }
                }
            }
            // Swap the values of two keys, or two items.
            2 => match v {
                Value::Object(m) if m.len() >= 2 => {
                    let keys: Vec<String> = m.keys().cloned().collect();
                    let (i, j) = (self.rng.below(keys.len()), self.rng.below(keys.len()));
                    let a = m.get(&keys[i]).cloned().expect("a key of m");
                    let b = m.insert(keys[j].clone(), a).expect("a key of m");
                    m.insert(keys[i].clone(), b);
                }
                Value::Array(a) if a.len() >= 2 => {
                    let (i, j) = (self.rng.below(a.len()), self.rng.below(a.len()));
                    a.swap(i, j);
                }
                _ => {}
            },
            // An extreme number.
            3 | 4 => {
                let x = EXTREME_NUMBERS[self.rng.below(EXTREME_NUMBERS.len())];
                let x = if self.rng.one_in(3) {
                    // Or a scaled copy of the present number.
                    v.as_f64().unwrap_or(1.0) * [1e-12, 1e12, -1.0, 1e-300][self.rng.below(4)]
                } else {
                    x
                };
                *v = Number::from_f64(x)
                    .map(Value::Number)
                    .unwrap_or(Value::Null);
            }
            // Extreme text.
            5 => *v = Value::String(EXTREME_TEXT[self.rng.below(EXTREME_TEXT.len())].into()),
            // A value of the wrong type.
            6 => {
                *v = match self.rng.below(6) {
                    0 => Value::Null,
                    1 => Value::Bool(true),
                    2 => Value::Array(vec![v.clone()]),
                    3 => Value::Object(Map::new()),
                    4 => Value::Array(vec![]),
                    _ => Value::from(u64::MAX),
                }
            }
            // Another kind.
            7 => {
                if let Value::Object(m) = v {
                    if m.contains_key("kind") {
                        let k = KINDS[self.rng.below(KINDS.len())];
                        m.insert("kind".into(), Value::String(k.into()));
                    }
                }
            }
            // Rename a key (an unknown field, or a known one moved).
            8 => {
                if let Value::Object(m) = v {
                    if !m.is_empty() {
                        let k = m
                            .keys()
                            .nth(self.rng.below(m.len()))
                            .cloned()
                            .expect("k < len");
                        let x = m.remove(&k).expect("a key of m");
                        let keys = ["name", "nodes", "kind", "value", "time", "period", "gate"];
                        m.insert(keys[self.rng.below(keys.len())].into(), x);
                    }
                }
            }
            // A node renamed (a dangling node, a short to ground).
            _ => {
                if let Value::String(s) = v {
                    *s = ["gnd", "0", "sw", "x", "out", "in"][self.rng.below(6)].into();
                }
            }
        }
    }
}

/// Bounds of one case: the run stops at whichever comes first.
#[derive(Clone, Debug)]
pub struct Limits {
    /// Default 2,000. Events before the run is cut (the solver's event
    /// limit): enough for the start-up and a few hundred periods of every
    /// example, small enough for millions of cases in an hour.
    pub max_events: usize,
    /// Default 64 MiB. The record's memory budget.
    pub memory_budget: usize,
    /// Default 2 s. A case still running after this counts as over time (it
    /// is stopped at the next slice boundary, so it is not killed).
    pub deadline: Duration,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_events: 2_000,
            memory_budget: 64 << 20,
            deadline: Duration::from_secs(2),
        }
    }
}

/// What one case did.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Outcome {
    /// The text was a valid circuit.
    pub valid: bool,
    /// The run reached its stop time (or its event limit) without a
    /// diagnostic.
    pub ran: bool,
    /// The case was still running at its deadline.
    pub timed_out: bool,
}

/// Reads `text` as `fluxstep check` does and, if it is a valid circuit
/// with run settings, runs it in 64 slices up to its stop time within
/// `limits`. Errors of the circuit or the run are expected outcomes; only
/// a panic (which this function does not catch) is a bug.
pub fn run_case(text: &str, limits: &Limits) -> Outcome {
    let start = Instant::now();
    let mut out = Outcome::default();
    let circuit = match Circuit::from_json(text) {
        Ok(c) => c,
        Err(e) => {
            // Formatting the error is part of what `check` does.
            let _ = e.to_string();
            return out;
        }
    };
    out.valid = true;
    let _ = circuit.to_json();
    let _ = circuit.nodes();
    let stop = circuit.run.as_ref().map_or(1e-3, |r| r.stop_time);
    let opts = Options {
        record: Record::All,
        max_events: limits.max_events,
        memory_budget: limits.memory_budget,
        ..Options::default()
    };
    let mut sim = match Simulator::new(&circuit, opts) {
        Ok(s) => s,
        Err(e) => {
            let _ = e.to_string();
            return out;
        }
    };
    for k in 1..=64u32 {
        let t = if k == 64 {
            stop
        } else {
            stop * f64::from(k) / 64.0
        };
        if let Err(e) = sim.advance_to(t) {
            let _ = e.to_string();
            let _ = e.time();
            break;
        }
        if k == 64 {
            out.ran = true;
        }
        if start.elapsed() > limits.deadline {
            out.timed_out = true;
            break;
        }
    }
    let result = sim.finish();
    // Reading the record back is part of every use of a run; writing a
    // long log costs most of a case, so only short ones are written.
    if result.events.len() <= 256 {
        let _ = result.events.to_json();
    }
    // Measurements over the last 64th of the record (a few periods), where
    // a designer's window usually is.
    if let Some((a, b)) = result.waveform.span() {
        let a = a.max(b - (b - a) / 64.0);
        for name in result.waveform.output_names().iter().take(4) {
            if let Ok(id) = result.waveform.output(name) {
                let _ = fluxstep_solver::measure::measure(&result.waveform, id, a, b);
            }
        }
    }
    if start.elapsed() > limits.deadline {
        out.timed_out = true;
    }
    out
}
