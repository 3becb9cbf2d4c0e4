//! A builder that reads like a converter schematic: one call per element
//! or gate, validated at the end.

use crate::circuit::{Circuit, RunSettings};
use crate::element::*;
use crate::error::NetlistError;
use crate::gate::{Gate, Transition};
use crate::stimulus::Stimulus;

impl Circuit {
    /// Starts a builder.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// // An asynchronous buck: 12 V in, 100 kHz, 40 % duty.
    /// let buck = Circuit::builder()
    ///     .voltage_source("Vin", "in", "gnd", 12.0)
    ///     .switch("S1", "in", "sw", "drive")
    ///     .diode("D1", "gnd", "sw")
    ///     .inductor("L1", "sw", "out", 22e-6)
    ///     .capacitor("C1", "out", "gnd", 100e-6)
    ///     .resistor("Rload", "out", "gnd", 2.0)
    ///     .pwm("drive", 100e3, 0.4)
    ///     .build()
    ///     .unwrap();
    /// assert_eq!(buck.elements.len(), 6);
    /// ```
    pub fn builder() -> CircuitBuilder {
        CircuitBuilder::default()
    }
}

/// Builds a [`Circuit`] element by element; [`CircuitBuilder::build`] validates.
#[derive(Clone, Debug, Default)]
pub struct CircuitBuilder {
    circuit: Circuit,
}

fn nodes(a: &str, b: &str) -> [String; 2] {
    [a.to_string(), b.to_string()]
}

impl CircuitBuilder {
    /// Adds any element.
    pub fn element(mut self, e: Element) -> Self {
        self.circuit.elements.push(e);
        self
    }

    /// Adds any gate.
    pub fn gate(mut self, g: Gate) -> Self {
        self.circuit.gates.push(g);
        self
    }

    /// Sets the description.
    pub fn description(mut self, text: &str) -> Self {
        self.circuit.description = text.to_string();
        self
    }

    /// Adds a resistor `a`–`b` of `ohms`.
    pub fn resistor(self, name: &str, a: &str, b: &str, ohms: f64) -> Self {
        self.element(Element::Resistor(Resistor {
            name: name.into(),
            nodes: nodes(a, b),
            resistance: ohms,
        }))
    }

    /// Adds an inductor `a`→`b` of `henries`, starting at zero current.
    pub fn inductor(self, name: &str, a: &str, b: &str, henries: f64) -> Self {
        self.element(Element::Inductor(Inductor {
            name: name.into(),
            nodes: nodes(a, b),
            inductance: henries,
            initial_current: None,
            winding_resistance: None,
            core: None,
        }))
    }

    /// Adds an inductor carrying `amps` (a → b) at t = 0.
    pub fn inductor_with_current(
        self,
        name: &str,
        a: &str,
        b: &str,
        henries: f64,
        amps: f64,
    ) -> Self {
        self.element(Element::Inductor(Inductor {
            name: name.into(),
            nodes: nodes(a, b),
            inductance: henries,
            initial_current: Some(amps),
            winding_resistance: None,
            core: None,
        }))
    }

    /// Adds a capacitor `a`–`b` of `farads`, starting discharged.
    pub fn capacitor(self, name: &str, a: &str, b: &str, farads: f64) -> Self {
        self.element(Element::Capacitor(Capacitor {
            name: name.into(),
            nodes: nodes(a, b),
            capacitance: farads,
            initial_voltage: None,
            esr: None,
        }))
    }

    /// Adds a capacitor charged to `volts` (v(a) − v(b)) at t = 0.
    pub fn capacitor_with_voltage(
        self,
        name: &str,
        a: &str,
        b: &str,
        farads: f64,
        volts: f64,
    ) -> Self {
        self.element(Element::Capacitor(Capacitor {
            name: name.into(),
            nodes: nodes(a, b),
            capacitance: farads,
            initial_voltage: Some(volts),
            esr: None,
        }))
    }

    /// Adds a constant voltage source, `plus` − `minus` = `volts`.
    pub fn voltage_source(self, name: &str, plus: &str, minus: &str, volts: f64) -> Self {
        self.voltage_waveform(name, plus, minus, Stimulus::constant(volts))
    }

    /// Adds a voltage source following `waveform`.
    pub fn voltage_waveform(self, name: &str, plus: &str, minus: &str, waveform: Stimulus) -> Self {
        self.element(Element::VoltageSource(VoltageSource {
            name: name.into(),
            nodes: nodes(plus, minus),
            waveform,
        }))
    }

    /// Adds a current source pushing `waveform` from `from` through itself to `to`.
    pub fn current_source(self, name: &str, from: &str, to: &str, waveform: Stimulus) -> Self {
        self.element(Element::CurrentSource(CurrentSource {
            name: name.into(),
            nodes: nodes(from, to),
            waveform,
        }))
    }

    /// Adds an ideal switch `a`–`b` driven by gate signal `gate`.
    pub fn switch(self, name: &str, a: &str, b: &str, gate: &str) -> Self {
        self.element(Element::Switch(Switch {
            name: name.into(),
            nodes: nodes(a, b),
            gate: gate.into(),
            on_resistance: None,
            body_diode: None,
            thermal: None,
            transition: None,
            switching_energy: None,
        }))
    }

    /// Adds an ideal switch `a`–`b` that is open at first and closes
    /// (`true`) or opens (`false`) at each of the given times (strictly
    /// increasing), driven by a gate of explicit transitions of the same
    /// name — the usual way to close a switch onto a charged capacitor or
    /// open one under inductor current at a chosen instant.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    ///
    /// let c = Circuit::builder()
    ///     .capacitor_with_voltage("C1", "a", "gnd", 1e-6, 10.0)
    ///     .capacitor("C2", "b", "gnd", 1e-6)
    ///     .timed_switch("S1", "a", "b", &[(1e-6, true), (5e-6, false)])
    ///     .build()
    ///     .unwrap();
    /// assert_eq!(c.gates[0].name(), "S1");
    /// ```
    pub fn timed_switch(self, name: &str, a: &str, b: &str, times: &[(f64, bool)]) -> Self {
        self.switch(name, a, b, name).gate(Gate::Transitions {
            name: name.into(),
            initial: false,
            transitions: times
                .iter()
                .map(|&(time, on)| Transition { time, on })
                .collect(),
            period: None,
        })
    }

    /// Adds a switch with an anti-parallel body diode (a transistor), drain
    /// `a`, source `b`; the body diode conducts from `b` to `a`.
    pub fn transistor(
        self,
        name: &str,
        a: &str,
        b: &str,
        gate: &str,
        on_resistance: f64,
        body: DiodeModel,
    ) -> Self {
        self.element(Element::Switch(Switch {
            name: name.into(),
            nodes: nodes(a, b),
            gate: gate.into(),
            on_resistance: (on_resistance != 0.0).then_some(on_resistance),
            body_diode: Some(body),
            thermal: None,
            transition: None,
            switching_energy: None,
        }))
    }

    /// Adds an ideal diode, `anode` → `cathode`.
    pub fn diode(self, name: &str, anode: &str, cathode: &str) -> Self {
        self.element(Element::Diode(Diode {
            name: name.into(),
            nodes: nodes(anode, cathode),
            model: DiodeModel::default(),
            thermal: None,
        }))
    }

    /// Adds a diode with a forward voltage and on-resistance.
    pub fn diode_model(self, name: &str, anode: &str, cathode: &str, model: DiodeModel) -> Self {
        self.element(Element::Diode(Diode {
            name: name.into(),
            nodes: nodes(anode, cathode),
            model,
            thermal: None,
        }))
    }

    /// Adds fixed-frequency PWM gate `name` (rising at k·T, duty in [0, 1]).
    pub fn pwm(self, name: &str, frequency: f64, duty: f64) -> Self {
        self.gate(Gate::Pwm {
            name: name.into(),
            frequency,
            duty,
            delay: 0.0,
            start: None,
            stop: None,
        })
    }

    /// Adds a complementary pair `name.high` / `name.low` with dead times.
    pub fn complementary_pwm(
        self,
        name: &str,
        frequency: f64,
        duty: f64,
        dead_time_high: f64,
        dead_time_low: f64,
    ) -> Self {
        self.gate(Gate::ComplementaryPwm {
            name: name.into(),
            frequency,
            duty,
            delay: 0.0,
            dead_time_high,
            dead_time_low,
            start: None,
            stop: None,
        })
    }

    /// Sets the default run settings.
    pub fn run(mut self, stop_time: f64, outputs: &[&str]) -> Self {
        self.circuit.run = Some(RunSettings {
            outputs: outputs.iter().map(|s| s.to_string()).collect(),
            ..RunSettings::default_for(stop_time)
        });
        self
    }

    /// Validates and returns the circuit.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Invalid`] listing every problem.
    pub fn build(self) -> Result<Circuit, NetlistError> {
        self.circuit.validate()?;
        Ok(self.circuit)
    }

    /// Returns the circuit without validating it (for tests of validation).
    pub fn build_unchecked(self) -> Circuit {
        self.circuit
    }
}
