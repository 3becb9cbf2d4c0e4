//! The sweep file format: the types a `*.sweep.json` file is read into,
//! from which its JSON Schema (`docs/sweep.schema.json`) is generated.
//!
//! Every value that is a circuit quantity may be a plain number or a string
//! with an SI prefix ("22u", "200k"), as in circuit files.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use fluxstep_netlist::si;

/// JSON Schema stand-in for an SI value: a number or a prefixed string.
#[derive(JsonSchema)]
#[serde(untagged)]
#[allow(dead_code)]
enum SiValue {
    /// A plain number in SI units.
    Number(f64),
    /// A number with an optional SI prefix, e.g. "22u", "4.7n", "1M".
    Text(String),
}

/// A sweep: one base circuit, the parameters to vary, optional Monte Carlo
/// tolerances, and the figures to compute at every point.
///
/// The points are every combination of the parameters' values (the last
/// parameter varies fastest), each repeated for every Monte Carlo sample.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct SweepSpec {
    /// Free text describing the sweep (optional).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub description: String,
    /// The base circuit file, relative to the sweep file's folder.
    pub circuit: String,
    /// How long each point is simulated and which window the figures see.
    #[serde(default)]
    pub simulation: Simulation,
    /// Parameters set at each point (a grid: every combination).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub parameters: Vec<Parameter>,
    /// Random part tolerances applied on top of the grid (optional).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub monte_carlo: Option<MonteCarlo>,
    /// The figures computed at every point; at least one.
    pub figures: Vec<Figure>,
    /// Plots to draw from the result table (optional).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub plots: Vec<PlotSpec>,
}

/// Run length and measurement window of every point.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Simulation {
    /// Run length in switching periods of the circuit's first periodic gate
    /// (the period of each point, so a frequency sweep runs the same number
    /// of cycles at every point). Give this or `stop_time`; without either,
    /// the circuit's `run.stop_time` is used.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub periods: Option<u64>,
    /// Run length in seconds.
    #[serde(
        default,
        deserialize_with = "si::de_opt",
        skip_serializing_if = "Option::is_none"
    )]
    #[schemars(with = "Option<SiValue>")]
    pub stop_time: Option<f64>,
    /// The window the figures measure (default: the last 10 periods).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub window: Option<Window>,
}

/// A measurement window, tagged by `kind`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Window {
    /// The last `count` switching periods of the run.
    LastPeriods {
        /// Number of periods, at least 1.
        count: u64,
    },
    /// A fixed span of time `[from, to]` in seconds; `to` must not exceed
    /// the run length.
    Span {
        /// Start (s).
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        from: f64,
        /// End (s).
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        to: f64,
    },
}

/// One swept parameter: a path into the circuit and its values.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Parameter {
    /// Path of a number in the circuit: `NAME.field[.field…]`, e.g.
    /// `L1.inductance`, `Vin.waveform.value`, `drive.duty` (see docs/sweeps.md).
    pub path: String,
    /// The values it takes.
    pub values: Values,
}

/// The values of a swept parameter, tagged by `kind`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Values {
    /// An explicit list, in order.
    List {
        /// The values; at least one.
        #[schemars(with = "Vec<SiValue>")]
        #[serde(deserialize_with = "si_list")]
        values: Vec<f64>,
    },
    /// `count` evenly spaced values from `from` to `to`, both included.
    Linear {
        /// First value.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        from: f64,
        /// Last value.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        to: f64,
        /// Number of values, at least 1 (1: `from` alone).
        count: i64,
    },
    /// `count` values evenly spaced in logarithm from `from` to `to` (both
    /// positive, both included).
    Log {
        /// First value, positive.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        from: f64,
        /// Last value, positive.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        to: f64,
        /// Number of values, at least 1.
        count: i64,
    },
    /// Three corners `min`, `nominal`, `max` (in that order); `nominal`
    /// defaults to the base circuit's value.
    Corners {
        /// Low corner.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        min: f64,
        /// Nominal value (default: the base circuit's).
        #[serde(
            default,
            deserialize_with = "si::de_opt",
            skip_serializing_if = "Option::is_none"
        )]
        #[schemars(with = "Option<SiValue>")]
        nominal: Option<f64>,
        /// High corner.
        #[serde(deserialize_with = "si::de", serialize_with = "si::ser")]
        #[schemars(with = "SiValue")]
        max: f64,
    },
    /// Three corners from the base circuit's value v: v·(1 − minus), v,
    /// v·(1 + plus); e.g. capacitance −20/+80 % is `minus: 0.2, plus: 0.8`.
    Tolerance {
        /// Fraction below nominal, not negative.
        minus: f64,
        /// Fraction above nominal, not negative.
        plus: f64,
    },
}

fn si_list<'de, D: serde::Deserializer<'de>>(d: D) -> Result<Vec<f64>, D::Error> {
    #[derive(Deserialize)]
    struct One(#[serde(deserialize_with = "si::de")] f64);
    Ok(Vec::<One>::deserialize(d)?
        .into_iter()
        .map(|o| o.0)
        .collect())
}

/// Monte Carlo: random part values drawn per sample on top of each grid point.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct MonteCarlo {
    /// Number of samples, at least 1. Every grid point is run with every sample.
    pub samples: i64,
    /// Seed of the random generator (SplitMix64, see docs/sweeps.md): the
    /// same seed gives the same samples in every version and on every
    /// thread count or shard.
    pub seed: u64,
    /// The tolerances, drawn in this order for each sample.
    pub tolerances: Vec<Tolerance>,
}

/// One random tolerance.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct Tolerance {
    /// Path of a number in the circuit, as for parameters.
    pub path: String,
    /// The distribution of the deviation x.
    pub distribution: Distribution,
    /// Default false: the value becomes v·(1 + x) (x a fraction). True: v + x
    /// (x in the quantity's own unit, e.g. a duty-cycle offset).
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub absolute: bool,
}

/// The distribution of a deviation, tagged by `kind`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Distribution {
    /// Uniform on `[low, high]`, e.g. ±20 % is `low: -0.2, high: 0.2`.
    Uniform {
        /// Lower end.
        low: f64,
        /// Upper end; at least `low`.
        high: f64,
    },
    /// Normal with mean 0 and standard deviation `sigma`, optionally
    /// truncated to `[limits[0], limits[1]]` (draws outside are redrawn).
    Normal {
        /// Standard deviation, not negative.
        sigma: f64,
        /// Truncation limits `[low, high]` (optional).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        limits: Option<[f64; 2]>,
    },
}

/// A figure computed at every point, tagged by `kind`.
///
/// `window` figures are transient measurements; `steady` figures measure
/// one period of the periodic steady state (found by shooting, see
/// [`crate::steady`]); `loop` figures are a loop gain's crossover or
/// margins (see [`crate::response::loop_gain`]).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Figure {
    /// A measurement over the simulation window.
    Window(WindowFigure),
    /// A measurement over one period of the periodic steady state.
    Steady(WindowFigure),
    /// A crossover or margin of a loop gain.
    Loop(LoopFigure),
}

impl Figure {
    /// The figure's name (its column in the table).
    pub fn name(&self) -> &str {
        match self {
            Figure::Window(f) => &f.name,
            Figure::Steady(f) => &f.name,
            Figure::Loop(f) => &f.name,
        }
    }
}

/// A transient-window figure: one measurement of one output or element.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct WindowFigure {
    /// Column name in the table; unique among figures and parameters.
    pub name: String,
    /// The output measured (`NODE`, `ELEMENT.current`, `ELEMENT.voltage`,
    /// `COMPENSATOR.output`); for `power`, the element instead.
    pub of: String,
    /// What is measured.
    pub measure: Measure,
    /// Default `max`. Which end of the figure's spread is the worst case
    /// the summary names.
    #[serde(default, skip_serializing_if = "Worst::is_max")]
    pub worst: Worst,
}

/// A loop-gain figure: the loop broken at a closed-loop gate's sense input
/// or a compensator's input, evaluated at `points` log-spaced frequencies
/// from `from` to half the switching frequency, crossovers refined on the
/// exact loop gain.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
pub struct LoopFigure {
    /// Column name in the table; unique among figures and parameters.
    pub name: String,
    /// The break point: a closed-loop gate or a compensator, by name.
    pub at: String,
    /// Which margin.
    pub margin: Margin,
    /// Default 10 Hz. Lowest frequency of the grid.
    #[serde(
        default = "ten_hz",
        deserialize_with = "si::de",
        serialize_with = "si::ser"
    )]
    #[schemars(with = "SiValue")]
    pub from: f64,
    /// Default 100. Frequencies of the grid.
    #[serde(default = "hundred")]
    pub points: usize,
    /// Default `min` for margins. Which end of the spread is the worst case.
    #[serde(default = "worst_min")]
    pub worst: Worst,
}

fn ten_hz() -> f64 {
    10.0
}

fn hundred() -> usize {
    100
}

fn worst_min() -> Worst {
    Worst::Min
}

/// A loop-gain figure's quantity.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Margin {
    /// Crossover frequency (Hz), where |T| falls through 1.
    CrossoverHz,
    /// Phase margin (degrees) at the crossover.
    PhaseMarginDeg,
    /// Gain margin (dB) where ∠T passes −180°.
    GainMarginDb,
}

/// A transient measurement over the window.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Measure {
    /// Time average.
    Average,
    /// Root mean square.
    Rms,
    /// Smallest value.
    Min,
    /// Largest value.
    Max,
    /// Largest minus smallest value (the ripple over whole periods).
    PeakToPeak,
    /// Average power absorbed by the element named in `of` (W), with the
    /// element's sign convention (a source delivering power absorbs a
    /// negative power).
    Power,
}

impl Measure {
    /// The name as written in JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Measure::Average => "average",
            Measure::Rms => "rms",
            Measure::Min => "min",
            Measure::Max => "max",
            Measure::PeakToPeak => "peak_to_peak",
            Measure::Power => "power",
        }
    }
}

/// Which end of a figure's spread is the worst case.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize, JsonSchema)]
#[serde(rename_all = "snake_case")]
pub enum Worst {
    /// The largest value (peak current, ripple, stress).
    #[default]
    Max,
    /// The smallest value (output voltage at low line, efficiency, margin).
    Min,
}

impl Worst {
    fn is_max(&self) -> bool {
        *self == Worst::Max
    }
}

/// A plot drawn from the result table, tagged by `kind`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, JsonSchema)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum PlotSpec {
    /// A figure against a swept parameter, one line per value of a second
    /// parameter (optional).
    Lines {
        /// The figure on the vertical axis.
        figure: String,
        /// The parameter on the horizontal axis.
        x: String,
        /// The parameter that tells the lines apart (optional).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        lines: Option<String>,
    },
    /// A histogram of a figure over all points (for Monte Carlo).
    Histogram {
        /// The figure.
        figure: String,
        /// Number of bins (default 20).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        bins: Option<u32>,
    },
}

/// The JSON Schema of the sweep format, as pretty JSON text.
pub fn json_schema() -> String {
    let schema = schemars::schema_for!(SweepSpec);
    serde_json::to_string_pretty(&schema).expect("a schema always serializes") + "\n"
}
