//! Sweeps over operating points and part tolerances, in parallel on one
//! machine and in deterministic shards for a cluster.
//!
//! A [`Sweep`] is built from a [`SweepSpec`] (the `*.sweep.json` format,
//! documented in docs/sweeps.md with a JSON Schema from [`json_schema`])
//! and a base circuit. Its points are every combination of the parameters'
//! values, each run once per Monte Carlo sample. At each point the base
//! circuit's JSON form gets the point's values at the parameter paths and
//! is read and validated again, so every corner passes the circuit's own
//! rules; the transient is then run and the figures measured on the exact
//! solution over the window. A point that fails (a value its validation
//! rejects, a run stopped by a diagnostic, a figure that cannot be
//! measured) is recorded in its row with the message, and the sweep goes
//! on.
//!
//! Determinism: a point's result depends only on the sweep and the point's
//! index — Monte Carlo draws come from the point's own stream
//! ([`rng`](self) notes) — so the [`Table`] is the same in every bit
//! whatever the thread count, and a sharded run ([`Shard`]) followed by
//! [`Table::merge`] gives the table a single run gives.
//!
//! Memory: a point keeps only the recorded window of its run while its
//! figures are measured; the table holds one row per point.
//!
//! # Example
//!
//! ```
//! use fluxstep_analysis::sweep::{RunOptions, Sweep, SweepSpec};
//! use fluxstep_netlist::Circuit;
//!
//! let buck = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 12.0)
//!     .switch("S1", "in", "sw", "drive")
//!     .diode("D1", "gnd", "sw")
//!     .inductor("L1", "sw", "out", 47e-6)
//!     .capacitor("C1", "out", "gnd", 10e-6)
//!     .resistor("Rload", "out", "gnd", 2.0)
//!     .pwm("drive", 100e3, 0.4)
//!     .build()
//!     .unwrap();
//! let spec: SweepSpec = serde_json::from_str(r#"{
//!     "circuit": "(built in code)",
//!     "simulation": {"periods": 400, "window": {"kind": "last_periods", "count": 10}},
//!     "parameters": [{"path": "drive.duty", "values": {"kind": "list", "values": [0.25, 0.5]}}],
//!     "figures": [{"kind": "window", "name": "vout", "of": "out", "measure": "average"}]
//! }"#).unwrap();
//! let table = Sweep::new(spec, &buck).unwrap().run(&RunOptions::default()).unwrap();
//! let vout = table.figure("vout").unwrap();
//! assert!((vout[0].unwrap() - 3.0).abs() < 0.05); // D·Vin in continuous conduction
//! assert!((vout[1].unwrap() - 6.0).abs() < 0.05);
//! ```

mod checks;
mod error;
mod path;
mod point;
mod rng;
mod spec;
mod summary;
mod table;

use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

use rayon::prelude::*;
use serde_json::Value;

use fluxstep_netlist::Circuit;

pub use error::SweepError;
pub use spec::{
    json_schema, Distribution, Figure, LoopFigure, Margin, Measure, MonteCarlo, Parameter,
    PlotSpec, Simulation, SweepSpec, Tolerance, Values, Window, WindowFigure, Worst,
};
pub use summary::{FigureSummary, Percentiles, PointRef, Summary};
pub use table::{Column, Row, Status, Table, TableMeta};

use path::Resolved;

/// Default measurement window: the last this many switching periods.
const DEFAULT_WINDOW_PERIODS: u64 = 10;

/// Which part of the points a run computes: those whose index `p` has
/// `p % count == index`. Round robin rather than contiguous blocks, so
/// every shard gets its share of the slow corners of a grid.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Shard {
    /// This shard, from 0 to `count − 1`.
    pub index: u64,
    /// Number of shards, at least 1.
    pub count: u64,
}

impl Shard {
    /// Reads `I/N` as written on a command line.
    ///
    /// # Errors
    ///
    /// [`SweepError::Invalid`] for text that is not `I/N`, [`SweepError::Shard`]
    /// for an index outside `0..N`.
    pub fn parse(text: &str) -> Result<Shard, SweepError> {
        let bad = || SweepError::Invalid {
            field: "--shard".into(),
            message: format!("expected INDEX/COUNT such as 0/4, got {text:?}"),
        };
        let (i, n) = text.split_once('/').ok_or_else(bad)?;
        let index = i.trim().parse().map_err(|_| bad())?;
        let count = n.trim().parse().map_err(|_| bad())?;
        let s = Shard { index, count };
        s.check()?;
        Ok(s)
    }

    fn check(&self) -> Result<(), SweepError> {
        if self.count == 0 || self.index >= self.count {
            return Err(SweepError::Shard {
                index: self.index,
                count: self.count,
            });
        }
        Ok(())
    }
}

/// Progress of a running sweep, as handed to [`RunOptions::progress`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Progress {
    /// Points finished.
    pub done: usize,
    /// Of those, points whose row records a failure.
    pub failed: usize,
    /// Points this run computes.
    pub total: usize,
}

/// How a sweep is run. The result does not depend on any of these except
/// the shard.
#[derive(Default)]
pub struct RunOptions<'a> {
    /// Default `None`: rayon's global pool (one thread per core). `Some(n)`:
    /// a pool of `n` threads for this run.
    pub threads: Option<usize>,
    /// Default `None`: every point. `Some`: one shard of the points.
    pub shard: Option<Shard>,
    /// Default `None`. Called after each point from the worker threads.
    pub progress: Option<&'a (dyn Fn(Progress) + Sync)>,
}

/// Run length of every point.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Length {
    Periods(u64),
    Stop(f64),
}

/// A parameter with its values.
#[derive(Clone, Debug)]
struct GridParam {
    path: Resolved,
    values: Vec<f64>,
}

/// A tolerance, checked.
#[derive(Clone, Debug)]
struct Tol {
    path: Resolved,
    distribution: Distribution,
    absolute: bool,
}

/// What a figure is computed from.
#[derive(Clone, Debug)]
pub(crate) enum FigureKind {
    /// The transient window.
    Window,
    /// One period of the periodic steady state.
    Steady,
    /// A loop gain's crossover or margin.
    Loop(spec::LoopFigure),
}

/// A sweep ready to run: paths resolved, values expanded, figures checked.
#[derive(Clone, Debug)]
pub struct Sweep {
    spec: SweepSpec,
    base: Value,
    grid: Vec<GridParam>,
    tolerances: Vec<Tol>,
    samples: u64,
    seed: u64,
    /// Paths shown as columns: grid parameters, then tolerance paths not
    /// already among them.
    columns: Vec<Resolved>,
    figures: Vec<WindowFigure>,
    /// What each figure is computed from, in `figures` order.
    kinds: Vec<FigureKind>,
    length: Length,
    window: Window,
    meta: TableMeta,
}

impl Sweep {
    /// Reads a sweep file and its base circuit (relative to the sweep
    /// file's folder).
    ///
    /// # Errors
    ///
    /// [`SweepError::Io`] or [`SweepError::Json`] for the sweep file,
    /// [`SweepError::Circuit`] for the circuit, otherwise as [`Sweep::new`].
    pub fn from_file(path: impl AsRef<Path>) -> Result<Sweep, SweepError> {
        let path = path.as_ref();
        let text = std::fs::read_to_string(path).map_err(|source| SweepError::Io {
            action: "read",
            path: path.display().to_string(),
            source,
        })?;
        let spec = SweepSpec::from_json(&text)?;
        let circuit_path = path
            .parent()
            .unwrap_or_else(|| Path::new(""))
            .join(&spec.circuit);
        let circuit = Circuit::from_file(&circuit_path).map_err(|source| SweepError::Circuit {
            path: circuit_path.display().to_string(),
            source,
        })?;
        Sweep::new(spec, &circuit)
    }

    /// Checks a sweep against its base circuit (the spec's `circuit` field
    /// is then only a label).
    ///
    /// # Errors
    ///
    /// [`SweepError::UnknownPath`] listing the valid paths,
    /// [`SweepError::Invalid`] naming the field (an empty range, a negative
    /// count, σ < 0, …), [`SweepError::NotAvailable`] for `steady` and
    /// `loop` figures, [`SweepError::Compile`] when the base circuit does
    /// not compile.
    pub fn new(spec: SweepSpec, circuit: &Circuit) -> Result<Sweep, SweepError> {
        let base = serde_json::to_value(circuit).expect("a circuit always serializes");
        let invalid = |field: String, message: String| SweepError::Invalid { field, message };

        let grid = checks::grid(&spec, &base)?;
        let (tolerances, samples, seed) = checks::tolerances(&spec, &base)?;
        let mut columns: Vec<Resolved> = grid.iter().map(|g| g.path.clone()).collect();
        for t in &tolerances {
            if !columns.iter().any(|c| c.text == t.path.text) {
                columns.push(t.path.clone());
            }
        }

        let (figures, kinds) = checks::figures(&spec, circuit, &columns)?;
        let (length, window) = checks::length_and_window(&spec, circuit)?;
        let n_grid = grid
            .iter()
            .try_fold(1u64, |n, g| n.checked_mul(g.values.len() as u64));
        let points = n_grid
            .and_then(|n| n.checked_mul(samples))
            .filter(|&n| n <= usize::MAX as u64 / 2)
            .ok_or_else(|| invalid("parameters".into(), "too many points".into()))?;

        checks::plots(&spec, &figures, &columns)?;
        let meta = checks::table_meta(&spec, &base, points, &columns, &figures, &kinds);
        Ok(Sweep {
            spec,
            base,
            grid,
            tolerances,
            samples,
            seed,
            columns,
            figures,
            kinds,
            length,
            window,
            meta,
        })
    }

    /// The sweep as read.
    pub fn spec(&self) -> &SweepSpec {
        &self.spec
    }

    /// Number of points (grid combinations × Monte Carlo samples).
    pub fn points(&self) -> u64 {
        self.meta.points
    }

    /// What every table of this sweep holds besides its rows.
    pub fn meta(&self) -> &TableMeta {
        &self.meta
    }

    /// The values of the parameter columns at point `p` (grid values with
    /// the point's Monte Carlo draws applied), in column order.
    pub fn point_values(&self, p: u64) -> Vec<f64> {
        let (doc, _) = self.point_doc(p);
        self.columns
            .iter()
            .map(|c| c.get(&doc).expect("resolved paths end at a number"))
            .collect()
    }

    /// Runs the sweep's points (or one shard of them).
    ///
    /// # Errors
    ///
    /// [`SweepError::Shard`] for a shard out of range,
    /// [`SweepError::Threads`] when the pool cannot start. A failing point
    /// is not an error: its row says why.
    pub fn run(&self, opts: &RunOptions<'_>) -> Result<Table, SweepError> {
        let shard = opts.shard.unwrap_or(Shard { index: 0, count: 1 });
        shard.check()?;
        let total = self.meta.points;
        let mine: usize = if shard.index < total {
            ((total - shard.index - 1) / shard.count + 1) as usize
        } else {
            0
        };
        let done = AtomicUsize::new(0);
        let failed = AtomicUsize::new(0);
        let work = || -> Vec<Row> {
            (0..mine)
                .into_par_iter()
                .map_init(
                    || None,
                    |old, k| {
                        let p = shard.index + k as u64 * shard.count;
                        let row = self.run_point(p, old);
                        let f = if row.status == Status::Ok {
                            failed.load(Ordering::Relaxed)
                        } else {
                            failed.fetch_add(1, Ordering::Relaxed) + 1
                        };
                        let d = done.fetch_add(1, Ordering::Relaxed) + 1;
                        if let Some(cb) = opts.progress {
                            cb(Progress {
                                done: d,
                                failed: f,
                                total: mine,
                            });
                        }
                        row
                    },
                )
                .collect()
        };
        let rows = match opts.threads {
            None => work(),
            Some(n) => rayon::ThreadPoolBuilder::new()
                .num_threads(n)
                .build()
                .map_err(|e| SweepError::Threads {
                    threads: n,
                    message: e.to_string(),
                })?
                .install(work),
        };
        Ok(Table {
            meta: self.meta.clone(),
            rows,
        })
    }

    /// The circuit's JSON form at point `p`, and the failure of a draw if any.
    fn point_doc(&self, p: u64) -> (Value, Option<String>) {
        let mut doc = self.base.clone();
        let mut g = p / self.samples;
        for param in self.grid.iter().rev() {
            let n = param.values.len() as u64;
            param.path.set(&mut doc, param.values[(g % n) as usize]);
            g /= n;
        }
        let mut fail = None;
        if !self.tolerances.is_empty() {
            let mut rng = rng::SplitMix64::for_sample(self.seed, p % self.samples);
            for t in &self.tolerances {
                let v = t.path.get(&doc).expect("resolved paths end at a number");
                match point::draw(&t.distribution, &mut rng) {
                    Ok(x) => t
                        .path
                        .set(&mut doc, if t.absolute { v + x } else { v * (1.0 + x) }),
                    Err(m) => {
                        fail.get_or_insert(format!("{}: {m}", t.path.text));
                    }
                }
            }
        }
        (doc, fail)
    }
}

impl SweepSpec {
    /// Reads a sweep description from JSON text (format only; the
    /// semantic checks happen in [`Sweep::new`]).
    ///
    /// # Errors
    ///
    /// [`SweepError::Json`] naming the path of the malformed field.
    pub fn from_json(text: &str) -> Result<SweepSpec, SweepError> {
        let de = &mut serde_json::Deserializer::from_str(text);
        serde_path_to_error::deserialize(de).map_err(|e| {
            let path = e.path().to_string();
            let inner = e.into_inner();
            let path = if path.is_empty() || path == "." {
                format!("line {} column {}", inner.line(), inner.column())
            } else {
                path
            };
            SweepError::Json {
                path,
                message: inner.to_string(),
            }
        })
    }
}

/// The values of a parameter, in order.
fn expand(v: &Values, nominal: f64) -> Result<Vec<f64>, String> {
    let count_ok = |count: i64| {
        if count < 1 {
            Err(format!(
                "count must be at least 1, got {count} (an empty range)"
            ))
        } else if count > 1_000_000 {
            Err(format!("count {count} is more than 1,000,000"))
        } else {
            Ok(count as usize)
        }
    };
    let out = match *v {
        Values::List { ref values } => {
            if values.is_empty() {
                return Err("the list is empty".into());
            }
            values.clone()
        }
        Values::Linear { from, to, count } => {
            let n = count_ok(count)?;
            // The last value is `to` itself, not from + (to − from)·1.
            (0..n)
                .map(|k| {
                    if k + 1 == n && n > 1 {
                        to
                    } else if k == 0 {
                        from
                    } else {
                        from + (to - from) * (k as f64 / (n - 1) as f64)
                    }
                })
                .collect()
        }
        Values::Log { from, to, count } => {
            let n = count_ok(count)?;
            if !(from > 0.0 && to > 0.0) {
                return Err(format!(
                    "a logarithmic range needs positive ends, got {from} and {to}"
                ));
            }
            let (a, b) = (from.ln(), to.ln());
            (0..n)
                .map(|k| {
                    if k + 1 == n && n > 1 {
                        to
                    } else if k == 0 {
                        from
                    } else {
                        (a + (b - a) * (k as f64 / (n - 1) as f64)).exp()
                    }
                })
                .collect()
        }
        Values::Corners {
            min,
            nominal: nom,
            max,
        } => {
            let nom = nom.unwrap_or(nominal);
            if !(min <= nom && nom <= max) {
                return Err(format!(
                    "corners must satisfy min <= nominal <= max, got {min}, {nom}, {max}"
                ));
            }
            vec![min, nom, max]
        }
        Values::Tolerance { minus, plus } => {
            if !(minus >= 0.0 && plus >= 0.0) {
                return Err(format!(
                    "minus and plus are fractions, not negative; got {minus} and {plus}"
                ));
            }
            vec![nominal * (1.0 - minus), nominal, nominal * (1.0 + plus)]
        }
    };
    if let Some(bad) = out.iter().find(|x| !x.is_finite()) {
        return Err(format!("value {bad} is not finite"));
    }
    Ok(out)
}

/// The unit of a figure's values.
fn figure_unit(f: &WindowFigure) -> &'static str {
    if f.measure == Measure::Power {
        "W"
    } else if f.of.ends_with(".current") {
        "A"
    } else if f.of.ends_with(".output") {
        ""
    } else {
        "V"
    }
}

/// FNV-1a (64 bits) of the sweep and the circuit as JSON text: shards of
/// one sweep carry the same fingerprint, so a merge can refuse a mix.
fn fingerprint(spec: &SweepSpec, base: &Value) -> String {
    let text = serde_json::to_string(spec).expect("a spec always serializes")
        + &serde_json::to_string(base).expect("a value always serializes");
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in text.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    format!("{h:016x}")
}
