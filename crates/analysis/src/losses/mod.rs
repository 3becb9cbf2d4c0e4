//! Losses, efficiency and junction temperature from the exact solution.
//!
//! Every figure here is an exact integral of the piecewise solution (see
//! [`fluxstep_solver::measure`]) or an exact sum over logged events, never
//! a sampled one:
//!
//! - **conduction** loss of every dissipative part: resistors that are not
//!   loads, a switch's on-resistance (R·i²), a diode's or body diode's
//!   forward drop and resistance (Vf·i + R·i²), a capacitor's expanded
//!   `esr` and an inductor's expanded `winding_resistance` — each ∫v·i dt
//!   over the window;
//! - **jump** loss: the energy a charge-sharing or flux-conserving jump
//!   dissipates at its instant (logged with the event);
//! - **switching** energies of each hard edge from a switch's datasheet
//!   tables (`switching_energy`), **recovery** energy Qrr·Vr of each forced
//!   diode turn-off (`recovered_charge`) ([`switching`]) and the **core**
//!   loss of an inductor with a `core` by the iGSE ([`core`]): evaluated
//!   on the exact solution beside the simulated (ideal or transition-model)
//!   switching, so not part of the energy balance; the efficiency counts
//!   them as drawn from the input;
//! - the **energy balance**: energy delivered by the sources equals the
//!   energy absorbed by the loads, plus every loss, plus the change of
//!   stored energy (½·C·v², ½·iᵀ·L·i) — a check of the whole chain;
//! - junction temperature from Foster networks driven by a part's loss
//!   ([`thermal`]).
//!
//! # Window convention
//!
//! As [`fluxstep_solver::measure`]: the integrals see the open interval
//! (t0, t1). A jump exactly at `t0` counts, one exactly at `t1` does not,
//! and the stored energy at `t0` is taken before any jump there and at `t1`
//! before any jump there, so windows of whole periods tile: each jump is
//! counted in exactly one of them.

pub mod core;
pub mod switching;
pub mod thermal;

use serde::{Deserialize, Serialize};

use fluxstep_netlist::{is_ground, Circuit, Element};
use fluxstep_solver::measure::{element_energy, part_energy};
use fluxstep_solver::{EventKind, EventLog, Waveform};

use crate::AnalysisError;

/// The mechanism of a loss.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LossKind {
    /// ∫v·i of a dissipative part: resistance, forward drop.
    Conduction,
    /// Energy dissipated by a charge-sharing or flux-conserving jump.
    Jump,
    /// Turn-on and turn-off energy of a switch, from tables (added beside
    /// the simulation).
    Switching,
    /// Turn-on and turn-off energy of a switch with a transition model:
    /// the exact ∫v·i over its simulated transitions (part of the energy
    /// balance; counted with `switching` in [`KindTotals`]).
    Transition,
    /// Reverse-recovery energy of a diode.
    Recovery,
    /// Magnetic core loss of an inductor.
    Core,
}

/// The loss of one part over the window.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PartLoss {
    /// The part: an element (`R1`, `Q1`), an expanded part (`C1.esr`,
    /// `L1.winding`, `Q1.body_diode`), or for a jump the elements it
    /// involved (comma-separated, as in the event log).
    pub name: String,
    /// What dissipates it.
    pub kind: LossKind,
    /// Energy over the window (J).
    pub energy: f64,
    /// Average power over the window (W): `energy / (t1 − t0)`.
    pub power: f64,
}

/// Average loss power of each mechanism (W).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct KindTotals {
    /// Conduction (resistive and forward-drop) loss.
    pub conduction: f64,
    /// Jump loss.
    pub jump: f64,
    /// Switching loss.
    pub switching: f64,
    /// Reverse-recovery loss.
    pub recovery: f64,
    /// Core loss.
    pub core: f64,
}

/// Which elements are the converter's output.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct LossOptions {
    /// Default none. Elements whose absorbed power is the output power
    /// (load resistors, a current sink, a battery's voltage source). They
    /// are not counted as losses or as inputs; with none named, output
    /// power is zero and the efficiency is not defined.
    pub loads: Vec<String>,
}

/// Input, output, losses, stored energy and efficiency over a window.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LossReport {
    /// Start of the window (s).
    pub t0: f64,
    /// End of the window (s).
    pub t1: f64,
    /// Net energy delivered by the sources that are not loads (J).
    pub input_energy: f64,
    /// Energy absorbed by the loads (J).
    pub output_energy: f64,
    /// Stored energy at `t0` and `t1` (J): ½·C·v² of every capacitance and
    /// ½·iᵀ·L·i of every inductor and set of coupled windings.
    pub stored: (f64, f64),
    /// Every loss, in circuit order, jumps and added losses last.
    pub parts: Vec<PartLoss>,
    /// Switch edges outside their switching-energy tables (not counted).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub outside_tables: Vec<switching::OutsideTable>,
}

impl LossReport {
    /// Window length (s).
    pub fn duration(&self) -> f64 {
        self.t1 - self.t0
    }

    /// Average input power (W).
    pub fn input_power(&self) -> f64 {
        self.input_energy / self.duration()
    }

    /// Average output power (W).
    pub fn output_power(&self) -> f64 {
        self.output_energy / self.duration()
    }

    /// Sum of every loss, as average power (W).
    pub fn total_loss(&self) -> f64 {
        self.parts.iter().map(|p| p.energy).sum::<f64>() / self.duration()
    }

    /// Loss power per mechanism (W).
    pub fn by_kind(&self) -> KindTotals {
        let mut k = KindTotals::default();
        for p in &self.parts {
            let slot = match p.kind {
                LossKind::Conduction => &mut k.conduction,
                LossKind::Jump => &mut k.jump,
                LossKind::Switching | LossKind::Transition => &mut k.switching,
                LossKind::Recovery => &mut k.recovery,
                LossKind::Core => &mut k.core,
            };
            *slot += p.energy;
        }
        let d = self.duration();
        for v in [
            &mut k.conduction,
            &mut k.jump,
            &mut k.switching,
            &mut k.recovery,
            &mut k.core,
        ] {
            *v /= d;
        }
        k
    }

    /// Total loss of one element (W): its own entries and those of its
    /// parts (`Q1` sums `Q1` and `Q1.body_diode`).
    pub fn element_loss(&self, element: &str) -> f64 {
        let prefix = format!("{element}.");
        self.parts
            .iter()
            .filter(|p| p.name == element || p.name.starts_with(&prefix))
            .map(|p| p.energy)
            .sum::<f64>()
            / self.duration()
    }

    /// Output over input power; `None` without loads or without net input.
    ///
    /// Losses added with [`LossReport::add`] (switching, recovery, core)
    /// are not drawn from the simulated sources, so the input is taken to
    /// supply them as well: the efficiency is `P_out / (P_in + P_added)`,
    /// which in steady state is `P_out / (P_out + every loss)`.
    pub fn efficiency(&self) -> Option<f64> {
        (self.output_energy != 0.0 && self.input_energy > 0.0)
            .then(|| self.output_energy / (self.input_energy + self.added_energy()))
    }

    /// Energy of the losses added beside the simulation (J).
    fn added_energy(&self) -> f64 {
        self.parts
            .iter()
            .filter(|p| {
                !matches!(
                    p.kind,
                    LossKind::Conduction | LossKind::Jump | LossKind::Transition
                )
            })
            .map(|p| p.energy)
            .sum()
    }

    /// Input − output − simulated losses − change of stored energy (J):
    /// zero up to rounding for an exact solution. Losses added with
    /// [`LossReport::add`] are estimates beside the simulation and are not
    /// part of this balance.
    pub fn balance_residual(&self) -> f64 {
        let simulated: f64 = self
            .parts
            .iter()
            .filter(|p| {
                matches!(
                    p.kind,
                    LossKind::Conduction | LossKind::Jump | LossKind::Transition
                )
            })
            .map(|p| p.energy)
            .sum();
        self.input_energy - self.output_energy - simulated - (self.stored.1 - self.stored.0)
    }

    /// [`LossReport::balance_residual`] relative to the largest energy in
    /// the balance (input, output plus losses, either stored energy).
    pub fn balance_error(&self) -> f64 {
        let losses: f64 = self.parts.iter().map(|p| p.energy.abs()).sum();
        let scale = self
            .input_energy
            .abs()
            .max(self.output_energy.abs() + losses)
            .max(self.stored.0.abs())
            .max(self.stored.1.abs());
        if scale == 0.0 {
            0.0
        } else {
            self.balance_residual().abs() / scale
        }
    }

    /// Adds a loss computed beside the simulation (switching, recovery or
    /// core loss) as energy over this report's window.
    pub fn add(&mut self, name: &str, kind: LossKind, energy: f64) {
        self.parts.push(PartLoss {
            name: name.into(),
            kind,
            energy,
            power: energy / self.duration(),
        });
    }
}

/// One part's average loss by mechanism, for a chart or a table.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PartTotals {
    /// The part, as in [`PartLoss::name`].
    pub part: String,
    /// `(mechanism, W)`: `conduction`, `switching` (tables and transition
    /// models together), `recovery`, `core`, `jump`, each present once at
    /// most, in that order.
    pub by_kind: Vec<(String, f64)>,
    /// The sum (W).
    pub total: f64,
}

impl LossReport {
    /// Average loss of each part by mechanism, largest total first (ties
    /// by name).
    pub fn by_part(&self) -> Vec<PartTotals> {
        const ORDER: [&str; 5] = ["conduction", "switching", "recovery", "core", "jump"];
        let mut out: Vec<PartTotals> = vec![];
        for p in &self.parts {
            let kind = match p.kind {
                LossKind::Conduction => "conduction",
                LossKind::Switching | LossKind::Transition => "switching",
                LossKind::Recovery => "recovery",
                LossKind::Core => "core",
                LossKind::Jump => "jump",
            };
            let at = match out.iter().position(|t| t.part == p.name) {
                Some(k) => k,
                None => {
                    out.push(PartTotals {
                        part: p.name.clone(),
                        by_kind: vec![],
                        total: 0.0,
                    });
                    out.len() - 1
                }
            };
            let t = &mut out[at];
            match t.by_kind.iter_mut().find(|k| k.0 == kind) {
                Some(k) => k.1 += p.power,
                None => t.by_kind.push((kind.into(), p.power)),
            }
            t.total += p.power;
        }
        for t in &mut out {
            t.by_kind
                .sort_by_key(|k| ORDER.iter().position(|o| *o == k.0));
        }
        out.sort_by(|x, y| y.total.total_cmp(&x.total).then(x.part.cmp(&y.part)));
        out
    }
}

/// The converter's loads for the efficiency: the file's `run.loads` when
/// it names any, else the resistors from the output node (`out`, or the
/// ripple output of the file's design limits) to ground, and those reached
/// from it through one switch (a switched load step).
pub fn loads(c: &Circuit) -> Vec<String> {
    if let Some(run) = c.run.as_ref().filter(|r| !r.loads.is_empty()) {
        return run.loads.clone();
    }
    let node = c
        .run
        .as_ref()
        .and_then(|r| r.limits.as_ref())
        .map(|l| l.ripple_output().to_string())
        .unwrap_or_else(|| "out".into());
    let mut load_nodes = vec![node.clone()];
    for e in &c.elements {
        if let Element::Switch(s) = e {
            if s.nodes[0] == node && !is_ground(&s.nodes[1]) {
                load_nodes.push(s.nodes[1].clone());
            } else if s.nodes[1] == node && !is_ground(&s.nodes[0]) {
                load_nodes.push(s.nodes[0].clone());
            }
        }
    }
    let on_load = |n: &str| load_nodes.iter().any(|x| x == n);
    c.elements
        .iter()
        .filter_map(|e| match e {
            Element::Resistor(r)
                if (on_load(&r.nodes[0]) && is_ground(&r.nodes[1]))
                    || (on_load(&r.nodes[1]) && is_ground(&r.nodes[0])) =>
            {
                Some(r.name.clone())
            }
            _ => None,
        })
        .collect()
}

/// Whether a part of the circuit dissipates or has loss data: a field
/// that models a loss (on-resistance, forward drop, ESR, winding
/// resistance, switching-energy tables, recovered charge, a core, a
/// transition model) or a resistor that is not one of `loads`.
pub fn has_loss_data(c: &Circuit, loads: &[String]) -> bool {
    let some = |v: Option<f64>| v.is_some_and(|x| x != 0.0);
    let diode = |d: &fluxstep_netlist::DiodeModel| {
        some(d.forward_voltage) || some(d.on_resistance) || some(d.recovered_charge)
    };
    c.elements.iter().any(|e| match e {
        Element::Resistor(r) => !loads.contains(&r.name),
        Element::Switch(s) => {
            some(s.on_resistance)
                || s.switching_energy.is_some()
                || s.transition.is_some()
                || s.body_diode.as_ref().is_some_and(diode)
        }
        Element::Diode(d) => diode(&d.model),
        Element::Capacitor(x) => some(x.esr),
        Element::Inductor(l) => some(l.winding_resistance) || l.core.is_some(),
        _ => false,
    })
}

/// The loss breakdown of a run over `[t0, t1]`.
///
/// # Errors
///
/// - [`AnalysisError::UnknownLoad`] for a load that is not an element;
/// - [`AnalysisError::Measure`] when the window is not inside the record
///   or a part floats while it carries current;
/// - [`AnalysisError::UnknownOutput`] when a state needed for the stored
///   energy was not recorded.
///
/// # Example
///
/// ```
/// use fluxstep_analysis::losses::{breakdown, LossOptions};
/// use fluxstep_netlist::{Circuit, Element, Switch};
/// use fluxstep_solver::{simulate, Options};
///
/// // 10 V through a 1 Ω switch into 9 Ω, on half the time: 1 A while on.
/// let s1 = Switch {
///     name: "S1".into(),
///     nodes: ["in".into(), "out".into()],
///     gate: "g".into(),
///     on_resistance: Some(1.0),
///     body_diode: None,
///     thermal: None,
///     transition: None,
///     switching_energy: None,
/// };
/// let c = Circuit::builder()
///     .voltage_source("V1", "in", "gnd", 10.0)
///     .element(Element::Switch(s1))
///     .resistor("Rload", "out", "gnd", 9.0)
///     .pwm("g", 100e3, 0.5)
///     .build()
///     .unwrap();
/// let run = simulate(&c, 100e-6, Options::default()).unwrap();
/// let opts = LossOptions { loads: vec!["Rload".into()] };
/// let r = breakdown(&c, &run.waveform, &run.events, 0.0, 100e-6, &opts).unwrap();
/// assert!((r.element_loss("S1") - 0.5).abs() < 1e-12); // R·I²·D
/// assert!((r.output_power() - 4.5).abs() < 1e-12);
/// assert!((r.efficiency().unwrap() - 0.9).abs() < 1e-12);
/// ```
pub fn breakdown(
    circuit: &Circuit,
    waveform: &Waveform,
    events: &EventLog,
    t0: f64,
    t1: f64,
    opts: &LossOptions,
) -> Result<LossReport, AnalysisError> {
    for l in &opts.loads {
        if !circuit.elements.iter().any(|e| e.name() == l) {
            return Err(AnalysisError::UnknownLoad {
                name: l.clone(),
                valid: circuit
                    .elements
                    .iter()
                    .map(|e| e.name().to_string())
                    .collect(),
            });
        }
    }
    let is_load = |n: &str| opts.loads.iter().any(|l| l == n);
    let mut report = LossReport {
        t0,
        t1,
        input_energy: 0.0,
        output_energy: 0.0,
        stored: (0.0, 0.0),
        parts: vec![],
        outside_tables: vec![],
    };
    let conduction = |report: &mut LossReport, part: &str| -> Result<(), AnalysisError> {
        let energy = part_energy(waveform, part, t0, t1)?;
        report.add(part, LossKind::Conduction, energy);
        Ok(())
    };
    for e in &circuit.elements {
        let name = e.name();
        if is_load(name) {
            report.output_energy += element_energy(waveform, name, t0, t1)?;
            continue;
        }
        match e {
            Element::VoltageSource(_) | Element::CurrentSource(_) => {
                report.input_energy -= element_energy(waveform, name, t0, t1)?;
            }
            Element::Resistor(_) | Element::Diode(_) => conduction(&mut report, name)?,
            Element::Switch(s) => {
                if s.transition.is_some() {
                    // The channel's ∫v·i split at the transitions' ends:
                    // inside them switching, outside conduction.
                    let total = part_energy(waveform, name, t0, t1)?;
                    let mut switching = 0.0;
                    for span in waveform.transition_spans(name) {
                        let (a, b) = (span.t0.max(t0), span.t1.min(t1));
                        if b > a {
                            switching += part_energy(waveform, name, a, b)?;
                        }
                    }
                    report.add(name, LossKind::Conduction, total - switching);
                    report.add(name, LossKind::Transition, switching);
                } else {
                    conduction(&mut report, name)?;
                }
                if s.body_diode.is_some() {
                    conduction(&mut report, &format!("{name}.body_diode"))?;
                }
            }
            Element::Capacitor(c) => {
                if c.esr.is_some_and(|r| r > 0.0) {
                    conduction(&mut report, &format!("{name}.esr"))?;
                }
            }
            Element::Inductor(l) => {
                if l.winding_resistance.is_some_and(|r| r > 0.0) {
                    conduction(&mut report, &format!("{name}.winding"))?;
                }
            }
            // Ideal: they store (coupled windings) or pass (transformer)
            // energy, and the balance checks that they dissipate none.
            Element::CoupledInductors(_) | Element::IdealTransformer(_) => {}
        }
    }
    // Jumps in [t0, t1): see the module notes on the window convention.
    let mut jump_at_t0 = 0.0;
    for ev in events.iter() {
        if !(matches!(ev.kind, EventKind::ChargeJump | EventKind::FluxJump)
            && ev.time >= t0
            && ev.time < t1)
        {
            continue;
        }
        let energy = ev.energy.unwrap_or(0.0);
        if ev.time == t0 {
            jump_at_t0 += energy;
        }
        match report
            .parts
            .iter_mut()
            .find(|p| p.kind == LossKind::Jump && p.name == ev.element)
        {
            Some(p) => {
                p.energy += energy;
                p.power = p.energy / (t1 - t0);
            }
            None => report.add(ev.element, LossKind::Jump, energy),
        }
    }
    // Losses evaluated beside the simulation, from the parts' data.
    for e in &circuit.elements {
        match e {
            Element::Switch(s) if !is_load(&s.name) => {
                if let Some(model) = &s.switching_energy {
                    let l = switching::switching_loss(&s.name, model, waveform, events, t0, t1)?;
                    report.add(&s.name, LossKind::Switching, l.turn_on + l.turn_off);
                    report.outside_tables.extend(l.outside);
                }
                if let Some(q) = s.body_diode.as_ref().and_then(|d| d.recovered_charge) {
                    let d = format!("{}.body_diode", s.name);
                    let l = switching::recovery_loss(&d, q, waveform, events, t0, t1)?;
                    report.add(&d, LossKind::Recovery, l.energy);
                }
            }
            Element::Diode(d) if !is_load(&d.name) => {
                if let Some(q) = d.model.recovered_charge {
                    let l = switching::recovery_loss(&d.name, q, waveform, events, t0, t1)?;
                    report.add(&d.name, LossKind::Recovery, l.energy);
                }
            }
            Element::Inductor(l) if !is_load(&l.name) => {
                if let Some(c) = &l.core {
                    let x = core::core_loss(&l.name, l.inductance, c, waveform, t0, t1)?;
                    report.add(&format!("{}.core", l.name), LossKind::Core, x.energy);
                }
            }
            _ => {}
        }
    }
    // The recorded value at t0 is the one after any jump there; the jump's
    // logged energy is exactly what it took out of storage.
    let after_t0 = stored_energy(circuit, waveform, t0, false)?;
    report.stored = (
        after_t0 + jump_at_t0,
        stored_energy(circuit, waveform, t1, true)?,
    );
    Ok(report)
}

/// ½·C·v² + ½·iᵀ·L·i at `t` (just before it when `before`, else just after).
fn stored_energy(
    circuit: &Circuit,
    waveform: &Waveform,
    t: f64,
    before: bool,
) -> Result<f64, AnalysisError> {
    let value = |name: &str| -> Result<f64, AnalysisError> {
        let id = waveform
            .output(name)
            .map_err(|_| AnalysisError::UnknownOutput {
                name: name.into(),
                valid: waveform.output_names().to_vec(),
            })?;
        let v = if before {
            waveform.value_before(id, t)
        } else {
            waveform.value(id, t)
        };
        v.map_err(|_| {
            AnalysisError::Measure(fluxstep_solver::measure::MeasureError::Undetermined {
                subject: name.into(),
                time: t,
            })
        })
    };
    let mut e = 0.0;
    for el in &circuit.elements {
        match el {
            Element::Capacitor(c) => {
                let v = value(&format!("{}.voltage", c.name))?;
                e += 0.5 * c.capacitance * v * v;
            }
            Element::Inductor(l) => {
                let i = value(&format!("{}.current", l.name))?;
                e += 0.5 * l.inductance * i * i;
            }
            Element::CoupledInductors(k) => {
                let m = k.inductance_matrix();
                let i = k
                    .windings
                    .iter()
                    .map(|w| value(&format!("{}.{}.current", k.name, w.name)))
                    .collect::<Result<Vec<_>, _>>()?;
                for (a, ia) in i.iter().enumerate() {
                    for (b, ib) in i.iter().enumerate() {
                        e += 0.5 * m[a][b] * ia * ib;
                    }
                }
            }
            _ => {}
        }
    }
    Ok(e)
}
