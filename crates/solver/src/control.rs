//! Sampled (digital) control: a [`Controller`] you write in Rust is called
//! at its own sample instants with the measured outputs, and answers with
//! [`Commands`] — new duty cycles, phases, references or explicit gate
//! edges — applied after a computation delay, at the next period start or
//! at once. PWM edges stay exact (`k·T + phase`).
//!
//! # Example
//!
//! ```
//! use fluxstep_netlist::Circuit;
//! use fluxstep_solver::control::{Apply, Commands, Sampling};
//! use fluxstep_solver::{Options, Simulator};
//!
//! let buck = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 12.0)
//!     .switch("S1", "in", "sw", "drive")
//!     .diode("D1", "gnd", "sw")
//!     .inductor("L1", "sw", "out", 47e-6)
//!     .capacitor("C1", "out", "gnd", 100e-6)
//!     .resistor("Rload", "out", "gnd", 2.0)
//!     .pwm("drive", 100e3, 0.3)
//!     .build()
//!     .unwrap();
//! let mut sim = Simulator::new(&buck, Options::default()).unwrap();
//! // An integral controller sampling the output once per period.
//! let mut integral = 0.3;
//! let controller = move |_t: f64, y: &[Option<f64>], cmd: &mut Commands| {
//!     integral += 0.002 * (5.0 - y[0].unwrap_or(0.0));
//!     cmd.set_duty("drive", integral.clamp(0.0, 0.9));
//! };
//! let sampling = Sampling { inputs: vec!["out".into()], period: 10e-6, ..Sampling::default() };
//! sim.add_controller(sampling, Box::new(controller)).unwrap();
//! sim.advance_to(20e-3).unwrap();
//! let out = sim.output_value("out").unwrap();
//! assert!((out - 5.0).abs() < 0.1, "{out}");
//! ```

/// When a command takes effect, once its computation delay has passed.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Apply {
    /// Default. At the next start of the gate's period (the usual
    /// double-update of a digital PWM): the running pulse is untouched.
    #[default]
    NextPeriod,
    /// At once: a running pulse is shortened or lengthened (a gate that
    /// should already be off turns off at that instant).
    Immediately,
}

/// When a controller samples, what it reads and how its answers apply.
#[derive(Clone, Debug, PartialEq)]
pub struct Sampling {
    /// Default empty. Outputs read at each sample (node names,
    /// `ELEMENT.current`, …), in the order the controller receives them.
    pub inputs: Vec<String>,
    /// Default 10 µs. Sample period (s); samples fall at `k·period + offset`.
    pub period: f64,
    /// Default 0. Sample offset (s) within the period.
    pub offset: f64,
    /// Default 0. Computation delay (s) between a sample and its commands.
    pub delay: f64,
    /// Default `NextPeriod`. When commands take effect after the delay.
    pub apply: Apply,
}

impl Default for Sampling {
    fn default() -> Self {
        Sampling {
            inputs: vec![],
            period: 10e-6,
            offset: 0.0,
            delay: 0.0,
            apply: Apply::NextPeriod,
        }
    }
}

/// One request of a controller.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum Command {
    Duty(String, f64),
    Frequency(String, f64),
    Delay(String, f64),
    Reference(String, f64),
    Edge(String, f64, bool),
}

/// What a controller asks for at one sample.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Commands {
    pub(crate) list: Vec<Command>,
}

impl Commands {
    /// New duty cycle of a `pwm` or `complementary_pwm` gate (by gate name).
    pub fn set_duty(&mut self, gate: &str, duty: f64) {
        self.list.push(Command::Duty(gate.into(), duty));
    }

    /// New switching frequency (Hz) of a `pwm` or `complementary_pwm` gate;
    /// the new period starts when the command applies (at the next period
    /// start, or at once).
    pub fn set_frequency(&mut self, gate: &str, frequency: f64) {
        self.list.push(Command::Frequency(gate.into(), frequency));
    }

    /// New delay (phase, s) of a `pwm` or `complementary_pwm` gate.
    pub fn set_delay(&mut self, gate: &str, delay: f64) {
        self.list.push(Command::Delay(gate.into(), delay));
    }

    /// New reference of a peak- or valley-current gate, or new set-point of
    /// a compensator (by name).
    pub fn set_reference(&mut self, name: &str, value: f64) {
        self.list.push(Command::Reference(name.into(), value));
    }

    /// An explicit edge of a `transitions` gate signal at `time` (not
    /// before the command applies).
    pub fn schedule_edge(&mut self, signal: &str, time: f64, on: bool) {
        self.list.push(Command::Edge(signal.into(), time, on));
    }
}

/// A sampled controller: called at each sample with the time and the
/// measured inputs (`None` where an output is undetermined).
pub trait Controller {
    /// One sample: read `inputs`, push requests into `commands`.
    fn sample(&mut self, t: f64, inputs: &[Option<f64>], commands: &mut Commands);
}

impl<F: FnMut(f64, &[Option<f64>], &mut Commands)> Controller for F {
    fn sample(&mut self, t: f64, inputs: &[Option<f64>], commands: &mut Commands) {
        self(t, inputs, commands)
    }
}
