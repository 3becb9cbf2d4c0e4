//! Circuit rules: every problem is collected, none stops the search.
//!
//! The checks run in a fixed order (names, values, gates, gate references,
//! topology, run settings) so the list of problems is deterministic and
//! reads in the order of the file. Each [`Problem`] names the element (or
//! gate) by its name — or by its position, `elements[3]`, when the name
//! itself is unusable — the field as written in JSON, and the node where a
//! node is involved.
//!
//! # Topology
//!
//! The element graph has the nodes as vertices and, as edges, every pair of
//! terminals that an element joins electrically: the two terminals of a
//! two-terminal element, each winding of a set of coupled inductors, and
//! the primary and the secondary of an ideal transformer **separately**.
//! Magnetic coupling carries no direct current and fixes no potential
//! between windings, so a winding's side of the circuit with no galvanic
//! path to ground has undetermined node voltages (its nodal equations are
//! singular). Each side of a transformer or of coupled inductors therefore
//! needs its own path to ground. To model an isolated secondary, tie its
//! return to `gnd` directly (the usual choice in simulation: with a single
//! return point no current flows through the tie) or through a large
//! resistor.
//!
//! On that graph:
//!
//! - a node reached by only one terminal is dangling;
//! - every connected component must contain ground;
//! - voltage sources alone must not close a loop (union-find over the
//!   voltage-source edges in element order: the source that closes a cycle
//!   is named, with the sources already joining its nodes);
//! - current sources alone must not form a cut: in the graph without the
//!   current-source edges, a component without ground that current sources
//!   join to ground is a set of nodes whose voltages no element fixes.
//!
//! Loops of capacitors and voltage sources, and cuts of inductors and
//! current sources, are allowed: the solver reduces them (see DESIGN.md).

use std::collections::{HashMap, HashSet, VecDeque};

use crate::circuit::{is_ground, Circuit, OutputName, GROUND};
use crate::element::*;
use crate::error::{NetlistError, Problem};
use crate::gate::Gate;
use crate::graph::UnionFind;
use crate::limits::DesignLimits;
use crate::loss_data::CoreModel;
use crate::timing::TimingCheck;
use crate::waveform::Waveform;

/// Every rule the circuit breaks, each naming its element and field.
pub fn problems(circuit: &Circuit) -> Vec<Problem> {
    let mut c = Checker {
        circuit,
        labels: circuit
            .elements
            .iter()
            .enumerate()
            .map(|(i, e)| label(e.name(), "elements", i))
            .collect(),
        out: Vec::new(),
        nodes: std::cell::OnceCell::new(),
    };
    c.element_names();
    c.node_names();
    for i in 0..circuit.elements.len() {
        c.element_values(i);
    }
    c.gates();
    c.gate_references();
    c.topology();
    c.run_settings();
    c.compensators();
    c.out.extend(circuit.size_problems());
    if let Some(run) = &circuit.run {
        // Other rules (positive, finite) speak for a bad stop time itself.
        c.out
            .extend(circuit.time_resolution_problems(run.stop_time));
    }
    c.out
}

impl Circuit {
    /// Checks every rule and returns all problems at once.
    ///
    /// # Errors
    ///
    /// [`NetlistError::Invalid`] with one [`Problem`] per broken rule.
    pub fn validate(&self) -> Result<(), NetlistError> {
        let problems = crate::validate::problems(self);
        if problems.is_empty() {
            Ok(())
        } else {
            Err(NetlistError::Invalid(problems))
        }
    }
}

impl DesignLimits {
    /// Every problem of these limits within `circuit`, each naming its
    /// field under `run.limits`: values must be positive and finite, the
    /// derating factor in (0, 1], a phase margin below 180°, saturation
    /// currents must name inductors and voltage ratings switches or
    /// diodes, and the ripple output a node.
    pub fn problems(&self, circuit: &Circuit) -> Vec<Problem> {
        let mut out = Vec::new();
        let mut push = |field: String, message: String| {
            out.push(Problem {
                element: None,
                field: Some(field),
                node: None,
                message,
            })
        };
        let positive = |v: f64| v.is_finite() && v > 0.0;
        if let Some(node) = &self.output {
            if !circuit.nodes().iter().any(|n| n == node) {
                push(
                    "run.limits.output".into(),
                    format!("no node is named '{node}'"),
                );
            }
        }
        if let Some(v) = self.max_output_ripple.filter(|v| !positive(*v)) {
            push(
                "run.limits.max_output_ripple".into(),
                format!("must be a positive voltage in volts, got {v}"),
            );
        }
        if let Some(v) = self
            .derating
            .filter(|v| !(v.is_finite() && *v > 0.0 && *v <= 1.0))
        {
            push(
                "run.limits.derating".into(),
                format!("must lie in (0, 1], got {v}"),
            );
        }
        if let Some(v) = self
            .min_phase_margin
            .filter(|v| !(v.is_finite() && *v > 0.0 && *v < 180.0))
        {
            push(
                "run.limits.min_phase_margin".into(),
                format!("must lie in (0, 180) degrees, got {v}"),
            );
        }
        if let Some(v) = self.max_junction_temperature.filter(|v| !v.is_finite()) {
            push(
                "run.limits.max_junction_temperature".into(),
                format!("must be a finite temperature in °C, got {v}"),
            );
        }
        for (list, name, wants) in [
            (
                &self.saturation_current,
                "saturation_current",
                "an inductor",
            ),
            (&self.voltage_rating, "voltage_rating", "a switch or diode"),
        ] {
            for (i, p) in list.iter().enumerate() {
                let at = |f: &str| format!("run.limits.{name}[{i}].{f}");
                let fits = match circuit.element(&p.element) {
                    Some(Element::Inductor(_)) => name == "saturation_current",
                    Some(Element::Switch(_) | Element::Diode(_)) => name == "voltage_rating",
                    Some(_) => false,
                    None => {
                        push(
                            at("element"),
                            format!("no element is named '{}'", p.element),
                        );
                        continue;
                    }
                };
                if !fits {
                    push(at("element"), format!("'{}' is not {wants}", p.element));
                }
                if !positive(p.value) {
                    push(
                        at("value"),
                        format!("must be positive and finite, got {}", p.value),
                    );
                }
            }
        }
        out
    }
}

/// How an element is named in problems: its name, or its position when the
/// name is empty.
fn label(name: &str, list: &str, index: usize) -> String {
    if name.is_empty() {
        format!("{list}[{index}]")
    } else {
        name.to_string()
    }
}

/// Why a name (element, gate, winding or node) cannot be used, if it cannot.
fn name_rule(name: &str) -> Option<&'static str> {
    if name.is_empty() {
        Some("is empty")
    } else if name.contains('.') {
        // Outputs and gate signals use '.' to name a part: `L1.current`,
        // `X1.primary.current`, `hb.high`.
        Some("must not contain '.'")
    } else if name.chars().any(char::is_whitespace) {
        Some("must not contain whitespace")
    } else {
        None
    }
}

/// A value as it appears in messages: plain for everyday magnitudes,
/// scientific otherwise (`1e-5` reads better than `0.00001`).
fn num(v: f64) -> String {
    let a = v.abs();
    if v == 0.0 || !v.is_finite() || (1e-3..1e6).contains(&a) {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

/// The node name every other check uses: `0` becomes `gnd`.
fn canonical(node: &str) -> &str {
    if is_ground(node) {
        GROUND
    } else {
        node
    }
}

/// How many names a problem lists before it only counts the rest: a
/// message naming all of 2,000 signals helps nobody.
const NAMES_SHOWN: usize = 12;

fn quoted(names: &[&str]) -> String {
    let mut text = names
        .iter()
        .take(NAMES_SHOWN)
        .map(|n| format!("'{n}'"))
        .collect::<Vec<_>>()
        .join(", ");
    if names.len() > NAMES_SHOWN {
        text.push_str(&format!(" and {} more", names.len() - NAMES_SHOWN));
    }
    text
}

/// Whether a symmetric matrix is positive definite, by Cholesky
/// factorisation.
///
/// A pivot below 1e-12 of its diagonal entry counts as zero: it is rounding
/// noise (k = 1 exactly leaves a pivot of a few ulps), and a matrix that
/// close to singular would make the solver's state equations meaningless.
fn positive_definite(m: &[Vec<f64>]) -> bool {
    let n = m.len();
    let mut l = vec![vec![0.0; n]; n];
    for j in 0..n {
        let d = m[j][j] - (0..j).map(|k| l[j][k] * l[j][k]).sum::<f64>();
        if d.is_nan() || d <= 1e-12 * m[j][j] {
            return false;
        }
        let d = d.sqrt();
        l[j][j] = d;
        for i in j + 1..n {
            l[i][j] = (m[i][j] - (0..j).map(|k| l[i][k] * l[j][k]).sum::<f64>()) / d;
        }
    }
    true
}

/// The terminal pairs an element joins electrically, as (field, how
/// messages call it, the two nodes, whether it is a magnetic winding).
fn pairs<'c>(e: &'c Element, label: &str) -> Vec<(String, String, &'c [String; 2], bool)> {
    match e {
        Element::IdealTransformer(t) => vec![
            (
                "primary".into(),
                format!("{label}.primary"),
                &t.primary,
                true,
            ),
            (
                "secondary".into(),
                format!("{label}.secondary"),
                &t.secondary,
                true,
            ),
        ],
        Element::CoupledInductors(c) => c
            .windings
            .iter()
            .enumerate()
            .map(|(k, w)| {
                (
                    format!("windings[{k}].nodes"),
                    format!("{label}.{}", w.name),
                    &w.nodes,
                    true,
                )
            })
            .collect(),
        Element::Resistor(Resistor { nodes, .. })
        | Element::Inductor(Inductor { nodes, .. })
        | Element::Capacitor(Capacitor { nodes, .. })
        | Element::VoltageSource(VoltageSource { nodes, .. })
        | Element::CurrentSource(CurrentSource { nodes, .. })
        | Element::Switch(Switch { nodes, .. })
        | Element::Diode(Diode { nodes, .. }) => {
            vec![("nodes".into(), label.to_string(), nodes, false)]
        }
    }
}

/// Node names numbered in order of first use, ground under its canonical name.
#[derive(Default)]
struct NodeIndex<'c> {
    index: HashMap<&'c str, usize>,
    names: Vec<&'c str>,
}

impl<'c> NodeIndex<'c> {
    fn get(&mut self, node: &'c str) -> usize {
        let node = canonical(node);
        if let Some(&i) = self.index.get(node) {
            return i;
        }
        self.names.push(node);
        self.index.insert(node, self.names.len() - 1);
        self.names.len() - 1
    }
}

/// An electrical connection made by an element between two nodes.
struct Branch {
    element: usize,
    /// The field that holds the two terminals: `nodes`, `primary`,
    /// `secondary` or `windings[i].nodes`.
    field: String,
    /// What messages call this branch: the element, or `X1.primary`.
    part: String,
    a: usize,
    b: usize,
    /// A transformer side or a coupled winding: magnetically linked to
    /// other branches but not galvanically.
    magnetic: bool,
}

struct Checker<'a> {
    circuit: &'a Circuit,
    labels: Vec<String>,
    out: Vec<Problem>,
    /// The circuit's node names, built on first use: looking an output up
    /// in [`Circuit::nodes`] each time made checking thousands of outputs
    /// on thousands of nodes take seconds.
    nodes: std::cell::OnceCell<std::collections::HashSet<String>>,
}

impl Checker<'_> {
    fn field(&mut self, element: &str, field: &str, message: String) {
        self.out.push(Problem::field(element, field, message));
    }

    /// Reports every time in `times` that does not follow its predecessor
    /// (`what`: "point" or "transition"; `field` names entry i).
    fn strictly_increasing(
        &mut self,
        element: &str,
        times: &[f64],
        what: &str,
        field: impl Fn(usize) -> String,
    ) {
        for i in 1..times.len() {
            let (a, b) = (times[i - 1], times[i]);
            if b <= a {
                self.field(
                    element,
                    &field(i),
                    format!(
                        "{what} times must be strictly increasing: {} follows {}",
                        num(b),
                        num(a)
                    ),
                );
            }
        }
    }

    /// Reports a non-finite value; true if the value is finite.
    fn finite(&mut self, element: &str, field: &str, v: f64) -> bool {
        if v.is_finite() {
            true
        } else {
            self.field(element, field, format!("must be a finite number, got {v}"));
            false
        }
    }

    /// Reports a value that is not finite and positive; true if it is.
    /// Reports a frequency that is not positive, or so small that its
    /// period 1/f is not a finite number of seconds (below about 5.6e-309
    /// Hz: a schedule of k·T would be ∞ or NaN); true if it is fine.
    fn frequency(&mut self, element: &str, field: &str, f: f64) -> bool {
        if !self.positive(element, field, f) {
            return false;
        }
        if !(1.0 / f).is_finite() {
            self.field(
                element,
                field,
                format!(
                    "must exceed about {} Hz (its period 1/f must be a finite number of seconds), got {}",
                    num(1.0 / f64::MAX),
                    num(f)
                ),
            );
            return false;
        }
        true
    }

    /// Reports a positive value whose reciprocal is not finite (below
    /// about 5.6e-309): the inverse inductance matrix of coupled windings
    /// would not exist in f64. True if it is fine.
    fn invertible(&mut self, element: &str, field: &str, v: f64) -> bool {
        if (1.0 / v).is_finite() {
            return true;
        }
        self.field(
            element,
            field,
            format!(
                "must exceed about {} (its reciprocal must be a finite number), got {}",
                num(1.0 / f64::MAX),
                num(v)
            ),
        );
        false
    }

    fn positive(&mut self, element: &str, field: &str, v: f64) -> bool {
        if !self.finite(element, field, v) {
            return false;
        }
        if v <= 0.0 {
            self.field(element, field, format!("must be positive, got {}", num(v)));
            return false;
        }
        true
    }

    /// Reports a value that is not finite or is negative; true if it is fine.
    fn non_negative(&mut self, element: &str, field: &str, v: f64) -> bool {
        if !self.finite(element, field, v) {
            return false;
        }
        if v < 0.0 {
            self.field(
                element,
                field,
                format!("must not be negative, got {}", num(v)),
            );
            return false;
        }
        true
    }

    fn optional_finite(&mut self, element: &str, field: &str, v: Option<f64>) {
        if let Some(v) = v {
            self.finite(element, field, v);
        }
    }

    fn optional_non_negative(&mut self, element: &str, field: &str, v: Option<f64>) {
        if let Some(v) = v {
            self.non_negative(element, field, v);
        }
    }

    // ----- names -----------------------------------------------------------

    fn element_names(&mut self) {
        let mut first: HashMap<&str, usize> = HashMap::new();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            let name = e.name();
            if let Some(why) = name_rule(name) {
                let label = self.labels[i].clone();
                self.field(&label, "name", format!("element name {name:?} {why}"));
            }
            if !name.is_empty() {
                match first.get(name) {
                    Some(&j) => self.field(
                        name,
                        "name",
                        format!(
                            "duplicate element name '{name}': elements[{j}] and elements[{i}] both use it"
                        ),
                    ),
                    None => {
                        first.insert(name, i);
                    }
                }
            }
            if let Element::CoupledInductors(c) = e {
                let name = self.labels[i].clone();
                let name = name.as_str();
                let mut seen: HashMap<&str, usize> = HashMap::new();
                for (k, w) in c.windings.iter().enumerate() {
                    let field = format!("windings[{k}].name");
                    if let Some(why) = name_rule(&w.name) {
                        self.field(name, &field, format!("winding name {:?} {why}", w.name));
                    } else if let Some(&j) = seen.get(w.name.as_str()) {
                        self.field(
                            name,
                            &field,
                            format!(
                                "duplicate winding name '{}': windings[{j}] and windings[{k}] both use it",
                                w.name
                            ),
                        );
                    } else {
                        seen.insert(&w.name, k);
                    }
                }
            }
        }
    }

    /// Node names follow the element-name rules ('.' would make an output
    /// such as `a.b` ambiguous); each bad name is reported once, where it is
    /// first used.
    fn node_names(&mut self) {
        let mut reported: HashSet<&str> = HashSet::new();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            for (field, node) in e.terminals() {
                if let Some(why) = name_rule(node) {
                    if reported.insert(node) {
                        let p = Problem::field(
                            &self.labels[i],
                            &field,
                            format!("node name {node:?} {why}"),
                        )
                        .at_node(node);
                        self.out.push(p);
                    }
                }
            }
        }
    }

    // ----- values ----------------------------------------------------------

    fn element_values(&mut self, i: usize) {
        let label = self.labels[i].clone();
        let l = label.as_str();
        match &self.circuit.elements[i] {
            Element::Resistor(r) => {
                self.positive(l, "resistance", r.resistance);
            }
            Element::Inductor(x) => {
                self.positive(l, "inductance", x.inductance);
                self.optional_finite(l, "initial_current", x.initial_current);
                self.optional_non_negative(l, "winding_resistance", x.winding_resistance);
                if let Some(c) = &x.core {
                    self.core(l, c);
                }
            }
            Element::Capacitor(x) => {
                self.positive(l, "capacitance", x.capacitance);
                self.optional_finite(l, "initial_voltage", x.initial_voltage);
                self.optional_non_negative(l, "esr", x.esr);
            }
            Element::CoupledInductors(x) => self.coupled(l, x),
            Element::IdealTransformer(x) => {
                self.positive(l, "turns_ratio", x.turns_ratio);
            }
            Element::VoltageSource(x) => self.waveform(l, &x.waveform),
            Element::CurrentSource(x) => self.waveform(l, &x.waveform),
            Element::Switch(x) => {
                self.optional_non_negative(l, "on_resistance", x.on_resistance);
                if let Some(d) = &x.body_diode {
                    self.optional_non_negative(l, "body_diode.forward_voltage", d.forward_voltage);
                    self.optional_non_negative(l, "body_diode.on_resistance", d.on_resistance);
                    self.optional_non_negative(
                        l,
                        "body_diode.recovered_charge",
                        d.recovered_charge,
                    );
                }
                if let Some(e) = &x.switching_energy {
                    for (edge, t) in [("turn_on", &e.turn_on), ("turn_off", &e.turn_off)] {
                        if let Some((at, why)) = t.problem() {
                            self.field(l, &format!("switching_energy.{edge}.{at}"), why);
                        }
                    }
                }
                if let Some(t) = &x.thermal {
                    self.thermal(l, t);
                }
                if let Some(t) = &x.transition {
                    for (edge, r) in [("turn_off", &t.turn_off), ("turn_on", &t.turn_on)] {
                        self.positive(
                            l,
                            &format!("transition.{edge}.voltage_rate"),
                            r.voltage_rate,
                        );
                        self.positive(
                            l,
                            &format!("transition.{edge}.current_rate"),
                            r.current_rate,
                        );
                    }
                }
            }
            Element::Diode(x) => {
                self.optional_non_negative(l, "forward_voltage", x.model.forward_voltage);
                self.optional_non_negative(l, "on_resistance", x.model.on_resistance);
                self.optional_non_negative(l, "recovered_charge", x.model.recovered_charge);
                if let Some(t) = &x.thermal {
                    self.thermal(l, t);
                }
            }
        }
    }

    /// Core-loss parameters: k, N, A and volume positive; α and β inside
    /// [`CoreModel::ALPHA`] and [`CoreModel::BETA`].
    fn core(&mut self, l: &str, c: &CoreModel) {
        self.positive(l, "core.k", c.k);
        self.positive(l, "core.turns", c.turns);
        self.positive(l, "core.area", c.area);
        self.positive(l, "core.volume", c.volume);
        for (field, v, (lo, hi)) in [
            ("core.alpha", c.alpha, CoreModel::ALPHA),
            ("core.beta", c.beta, CoreModel::BETA),
        ] {
            if self.finite(l, field, v) && !(lo..=hi).contains(&v) {
                self.field(
                    l,
                    field,
                    format!(
                        "must be between {} and {} (where published Steinmetz fits lie), got {}",
                        num(lo),
                        num(hi),
                        num(v)
                    ),
                );
            }
        }
    }

    /// A thermal network: at least one junction–case stage, every R and τ
    /// positive, temperatures finite.
    fn thermal(&mut self, l: &str, t: &ThermalNetwork) {
        if t.junction_case.is_empty() {
            self.field(
                l,
                "thermal.junction_case",
                "needs at least one Foster stage (resistance and time_constant)".into(),
            );
        }
        for (list, stages) in [
            ("junction_case", &t.junction_case),
            ("case_ambient", &t.case_ambient),
        ] {
            for (k, p) in stages.iter().enumerate() {
                self.positive(l, &format!("thermal.{list}[{k}].resistance"), p.resistance);
                self.positive(
                    l,
                    &format!("thermal.{list}[{k}].time_constant"),
                    p.time_constant,
                );
            }
        }
        self.optional_finite(l, "thermal.ambient", t.ambient);
        self.optional_finite(l, "thermal.max_junction", t.max_junction);
    }

    fn coupled(&mut self, l: &str, x: &CoupledInductors) {
        let mut ok = true;
        if x.windings.len() < 2 {
            self.field(
                l,
                "windings",
                format!(
                    "coupled inductors need at least two windings, got {} (use an inductor for one)",
                    x.windings.len()
                ),
            );
            ok = false;
        }
        for (k, w) in x.windings.iter().enumerate() {
            let field = format!("windings[{k}].inductance");
            ok &=
                self.positive(l, &field, w.inductance) && self.invertible(l, &field, w.inductance);
            self.optional_finite(
                l,
                &format!("windings[{k}].initial_current"),
                w.initial_current,
            );
        }
        let names: Vec<&str> = x.windings.iter().map(|w| w.name.as_str()).collect();
        let mut pairs: HashMap<(usize, usize), usize> = HashMap::new();
        for (j, c) in x.couplings.iter().enumerate() {
            let f = format!("couplings[{j}]");
            let mut idx = [None, None];
            for (m, wname) in c.windings.iter().enumerate() {
                idx[m] = names.iter().position(|n| n == wname);
                if idx[m].is_none() {
                    self.field(
                        l,
                        &format!("{f}.windings[{m}]"),
                        format!("unknown winding '{wname}' (windings: {})", quoted(&names)),
                    );
                    ok = false;
                }
            }
            if let [Some(a), Some(b)] = idx {
                if a == b {
                    self.field(
                        l,
                        &format!("{f}.windings"),
                        format!("couples winding '{}' with itself", names[a]),
                    );
                    ok = false;
                } else if let Some(prev) = pairs.insert((a.min(b), a.max(b)), j) {
                    self.field(
                        l,
                        &format!("{f}.windings"),
                        format!(
                            "windings '{}' and '{}' are already coupled by couplings[{prev}]",
                            names[a], names[b]
                        ),
                    );
                    ok = false;
                }
            }
            match (c.k, c.mutual) {
                (Some(_), Some(_)) => {
                    self.field(l, &f, "give either k or mutual, not both".into());
                    ok = false;
                }
                (None, None) => {
                    self.field(l, &f, "give the coupling as k or as mutual".into());
                    ok = false;
                }
                (Some(k), None) => {
                    let kf = format!("{f}.k");
                    if !self.finite(l, &kf, k) {
                        ok = false;
                    } else if k.abs() > 1.0 {
                        self.field(
                            l,
                            &kf,
                            format!("coupling coefficient must lie in [-1, 1], got {}", num(k)),
                        );
                        ok = false;
                    }
                }
                (None, Some(m)) => ok &= self.finite(l, &format!("{f}.mutual"), m),
            }
        }
        // The matrix test only means something once every entry is sound;
        // otherwise it would repeat the problems above in other words.
        if ok && !positive_definite(&x.inductance_matrix()) {
            self.field(
                l,
                "couplings",
                "inductance matrix is not positive definite: the couplings are too strong \
                 (|k| must stay below 1, and |M| below the square root of the two self \
                 inductances; leakage is what k < 1 leaves)"
                    .into(),
            );
        }
    }

    fn waveform(&mut self, l: &str, w: &Waveform) {
        match w {
            Waveform::Constant { value } => {
                self.finite(l, "waveform.value", *value);
            }
            Waveform::PiecewiseLinear { points, period } => {
                if points.is_empty() {
                    self.field(
                        l,
                        "waveform.points",
                        "a piecewise-linear waveform needs at least one point".into(),
                    );
                }
                let mut times_ok = true;
                for (i, p) in points.iter().enumerate() {
                    times_ok &= self.finite(l, &format!("waveform.points[{i}].time"), p.time);
                    self.finite(l, &format!("waveform.points[{i}].value"), p.value);
                }
                if times_ok {
                    let times: Vec<f64> = points.iter().map(|p| p.time).collect();
                    self.strictly_increasing(l, &times, "point", |i| {
                        format!("waveform.points[{i}].time")
                    });
                }
                if let Some(p) = *period {
                    if self.positive(l, "waveform.period", p) && times_ok {
                        for (i, pt) in points.iter().enumerate() {
                            if !(0.0..=p).contains(&pt.time) {
                                self.field(
                                    l,
                                    &format!("waveform.points[{i}].time"),
                                    format!(
                                        "time {} lies outside one period [0, {}] of a repeating waveform",
                                        num(pt.time),
                                        num(p)
                                    ),
                                );
                            }
                        }
                    }
                }
            }
            Waveform::Sine {
                offset,
                amplitude,
                frequency,
                phase,
            } => {
                self.finite(l, "waveform.offset", *offset);
                self.finite(l, "waveform.amplitude", *amplitude);
                self.frequency(l, "waveform.frequency", *frequency);
                self.finite(l, "waveform.phase", *phase);
            }
        }
    }

    // ----- gates -----------------------------------------------------------

    fn gates(&mut self) {
        let mut first: HashMap<&str, usize> = HashMap::new();
        for (i, g) in self.circuit.gates.iter().enumerate() {
            let name = g.name();
            let l = label(name, "gates", i);
            if let Some(why) = name_rule(name) {
                self.field(&l, "name", format!("gate name {name:?} {why}"));
            }
            // Signal names derive from gate names (`NAME`, or `NAME.high` and
            // `NAME.low`), and gate names cannot contain '.', so unique gate
            // names give unique signal names.
            if !name.is_empty() {
                match first.get(name) {
                    Some(&j) => self.field(
                        name,
                        "name",
                        format!(
                            "duplicate gate name '{name}': gates[{j}] and gates[{i}] both use it"
                        ),
                    ),
                    None => {
                        first.insert(name, i);
                    }
                }
            }
            self.gate_values(&l, g);
        }
    }

    fn gate_values(&mut self, l: &str, g: &Gate) {
        if let Some(spec) = g.comparator() {
            self.comparator_values(l, g, &spec);
            return;
        }
        match g {
            Gate::Pwm {
                frequency,
                duty,
                delay,
                start,
                stop,
                ..
            } => {
                self.pwm_timing(l, *frequency, *duty, *delay);
                self.window(l, *start, *stop);
            }
            Gate::ComplementaryPwm {
                frequency,
                duty,
                delay,
                dead_time_high,
                dead_time_low,
                start,
                stop,
                ..
            } => {
                let period = self.pwm_timing(l, *frequency, *duty, *delay);
                let hi_ok = self.non_negative(l, "dead_time_high", *dead_time_high);
                let lo_ok = self.non_negative(l, "dead_time_low", *dead_time_low);
                if let Some((t, duty)) = period {
                    let on = duty * t;
                    let off = t - on;
                    if hi_ok && *dead_time_high > on {
                        self.field(
                            l,
                            "dead_time_high",
                            format!(
                                "dead time {} s does not fit in the high part of the period, duty·T = {} s",
                                num(*dead_time_high),
                                num(on)
                            ),
                        );
                    }
                    if lo_ok && *dead_time_low > off {
                        self.field(
                            l,
                            "dead_time_low",
                            format!(
                                "dead time {} s does not fit in the low part of the period, (1 − duty)·T = {} s",
                                num(*dead_time_low),
                                num(off)
                            ),
                        );
                    }
                }
                self.window(l, *start, *stop);
            }
            Gate::Transitions {
                transitions,
                period,
                ..
            } => {
                let mut times_ok = true;
                for (i, t) in transitions.iter().enumerate() {
                    times_ok &= self.finite(l, &format!("transitions[{i}].time"), t.time);
                }
                if times_ok {
                    let times: Vec<f64> = transitions.iter().map(|t| t.time).collect();
                    self.strictly_increasing(l, &times, "transition", |i| {
                        format!("transitions[{i}].time")
                    });
                }
                if let Some(p) = *period {
                    if self.positive(l, "period", p) && times_ok {
                        for (i, t) in transitions.iter().enumerate() {
                            if !(0.0..p).contains(&t.time) {
                                self.field(
                                    l,
                                    &format!("transitions[{i}].time"),
                                    format!(
                                        "time {} lies outside one period [0, {}) of a repeating signal",
                                        num(t.time),
                                        num(p)
                                    ),
                                );
                            }
                        }
                    }
                }
            }
            // Closed-loop gates were checked by `comparator_values`.
            Gate::PeakCurrent { .. }
            | Gate::ValleyCurrent { .. }
            | Gate::Hysteretic { .. }
            | Gate::VoltageMode { .. } => {}
        }
    }

    /// Closed-loop gates: a clock frequency, thresholds, duty limits and the
    /// output they compare.
    fn comparator_values(&mut self, l: &str, g: &Gate, spec: &crate::ComparatorSpec) {
        match g {
            Gate::PeakCurrent {
                frequency,
                reference,
                slope,
                max_duty,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                self.finite(l, "reference", *reference);
                self.non_negative(l, "slope", *slope);
                if self.finite(l, "max_duty", *max_duty) && !(*max_duty > 0.0 && *max_duty <= 1.0) {
                    self.field(
                        l,
                        "max_duty",
                        format!("must lie in (0, 1], got {}", num(*max_duty)),
                    );
                }
            }
            Gate::ValleyCurrent {
                frequency,
                reference,
                slope,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                self.finite(l, "reference", *reference);
                self.non_negative(l, "slope", *slope);
            }
            Gate::Hysteretic { low, high, .. } => {
                // Both are checked for finiteness, then compared.
                let ok = [self.finite(l, "low", *low), self.finite(l, "high", *high)];
                if ok == [true, true] && low >= high {
                    self.field(
                        l,
                        "high",
                        format!("must exceed low = {}, got {}", num(*low), num(*high)),
                    );
                }
            }
            Gate::VoltageMode {
                frequency,
                ramp_low,
                ramp_high,
                min_duty,
                max_duty,
                ..
            } => {
                self.frequency(l, "frequency", *frequency);
                // Both are checked for finiteness (`&&` would skip the
                // second when the first fails), then compared.
                let ok = [
                    self.finite(l, "ramp_low", *ramp_low),
                    self.finite(l, "ramp_high", *ramp_high),
                ];
                if ok == [true, true] && ramp_low >= ramp_high {
                    self.field(
                        l,
                        "ramp_high",
                        format!(
                            "must exceed ramp_low = {}, got {}",
                            num(*ramp_low),
                            num(*ramp_high)
                        ),
                    );
                }
                let lo_ok = self.finite(l, "min_duty", *min_duty);
                let hi_ok = self.finite(l, "max_duty", *max_duty);
                if hi_ok && !(*max_duty > 0.0 && *max_duty <= 1.0) {
                    self.field(
                        l,
                        "max_duty",
                        format!("must lie in (0, 1], got {}", num(*max_duty)),
                    );
                } else if lo_ok && hi_ok && !(*min_duty >= 0.0 && min_duty < max_duty) {
                    self.field(
                        l,
                        "min_duty",
                        format!(
                            "must lie in [0, max_duty = {}), got {}",
                            num(*max_duty),
                            num(*min_duty)
                        ),
                    );
                }
            }
            _ => {}
        }
        let field = if matches!(g, Gate::VoltageMode { .. }) {
            "control"
        } else {
            "sense"
        };
        if let Some(why) = self.output_problem(&spec.sense) {
            self.field(l, field, why);
        }
    }

    /// Compensators: unique names, a measured output that exists, a law
    /// that can be realised.
    fn compensators(&mut self) {
        let mut seen: HashMap<&str, usize> = HashMap::new();
        for (i, k) in self.circuit.compensators.iter().enumerate() {
            let l = label(&k.name, "compensators", i);
            if let Some(why) = name_rule(&k.name) {
                self.field(&l, "name", format!("compensator name {:?} {why}", k.name));
            }
            // As for elements and gates: an empty name is reported once
            // (above), and a duplicate names the first user of the name.
            if !k.name.is_empty() {
                match seen.get(k.name.as_str()) {
                    Some(&j) => self.field(
                        &l,
                        "name",
                        format!(
                            "duplicate compensator name '{}': compensators[{j}] and compensators[{i}] both use it",
                            k.name
                        ),
                    ),
                    None => {
                        seen.insert(&k.name, i);
                    }
                }
            }
            self.finite(&l, "reference", k.reference);
            if let Some(why) = self.output_problem(&k.input) {
                self.field(&l, "input", why);
            }
            if k.input.ends_with(".output") {
                self.field(
                    &l,
                    "input",
                    "a compensator measures a circuit output, not another compensator".into(),
                );
            }
            match &k.law {
                crate::CompensatorLaw::Pi { kp, ki } => {
                    self.finite(&l, "law.kp", *kp);
                    self.finite(&l, "law.ki", *ki);
                }
                crate::CompensatorLaw::PolesZeros {
                    gain,
                    integrator,
                    zeros_hz,
                    poles_hz,
                } => {
                    self.finite(&l, "law.gain", *gain);
                    for (j, z) in zeros_hz.iter().enumerate() {
                        self.positive(&l, &format!("law.zeros_hz[{j}]"), *z);
                    }
                    for (j, p) in poles_hz.iter().enumerate() {
                        self.positive(&l, &format!("law.poles_hz[{j}]"), *p);
                    }
                    let den = poles_hz.len() + usize::from(*integrator);
                    if zeros_hz.len() > den {
                        self.field(
                            &l,
                            "law.zeros_hz",
                            format!(
                                "{} zeros but only {den} poles: the law would not be proper",
                                zeros_hz.len()
                            ),
                        );
                    }
                    if den == 0 {
                        self.field(
                            &l,
                            "law.poles_hz",
                            "a compensator needs at least one pole or the integrator".into(),
                        );
                    }
                }
                crate::CompensatorLaw::StateSpace { a, b, c, d } => {
                    let n = a.len();
                    if n == 0 || a.iter().any(|r| r.len() != n) {
                        self.field(
                            &l,
                            "law.a",
                            "must be a square matrix with at least one row".into(),
                        );
                    }
                    if b.len() != n {
                        self.field(
                            &l,
                            "law.b",
                            format!("must have {n} entries, has {}", b.len()),
                        );
                    }
                    if c.len() != n {
                        self.field(
                            &l,
                            "law.c",
                            format!("must have {n} entries, has {}", c.len()),
                        );
                    }
                    let all = a
                        .iter()
                        .flatten()
                        .chain(b)
                        .chain(c)
                        .chain(std::iter::once(d));
                    if all.into_iter().any(|v| !v.is_finite()) {
                        self.field(&l, "law", "every entry must be a finite number".into());
                    }
                }
            }
        }
    }

    /// Why an output name is unusable, if it is.
    fn output_problem(&self, text: &str) -> Option<String> {
        match OutputName::parse(text) {
            Err(p) => Some(p.message),
            Ok(OutputName::Node(n)) => (!self
                .nodes
                .get_or_init(|| self.circuit.nodes().into_iter().collect())
                .contains(&n))
            .then(|| format!("output {text:?} names no node of the circuit")),
            Ok(OutputName::Current(e)) | Ok(OutputName::Voltage(e)) => self
                .output_target(&e)
                .err()
                .map(|why| format!("output {text:?}: {why}")),
            Ok(OutputName::Signal(e)) => (!self.circuit.compensators.iter().any(|k| k.name == e))
                .then(|| format!("output {text:?}: no compensator is named '{e}'")),
        }
    }

    /// Checks frequency, duty and delay of a PWM; returns (period, duty)
    /// when both are usable for further checks.
    fn pwm_timing(&mut self, l: &str, frequency: f64, duty: f64, delay: f64) -> Option<(f64, f64)> {
        let f_ok = self.frequency(l, "frequency", frequency);
        let mut d_ok = self.finite(l, "duty", duty);
        if d_ok && !(0.0..=1.0).contains(&duty) {
            self.field(
                l,
                "duty",
                format!("duty cycle must lie in [0, 1], got {}", num(duty)),
            );
            d_ok = false;
        }
        if self.finite(l, "delay", delay) && f_ok {
            let t = 1.0 / frequency;
            // Edges are placed at k·T + (delay mod T) for every k ≥ 0, so a
            // delay of a period or more would not postpone the first edge as
            // its name promises; `start` holds a signal off for longer.
            if !(0.0..t).contains(&delay) {
                self.field(
                    l,
                    "delay",
                    format!(
                        "delay must lie in [0, period) = [0, {}) s, got {} s (use start to hold the signal off longer)",
                        num(t),
                        num(delay)
                    ),
                );
            }
        }
        (f_ok && d_ok).then(|| (1.0 / frequency, duty))
    }

    fn window(&mut self, l: &str, start: Option<f64>, stop: Option<f64>) {
        let start_ok = start.is_none_or(|s| self.finite(l, "start", s));
        let stop_ok = stop.is_none_or(|s| self.finite(l, "stop", s));
        if let (Some(a), Some(b), true, true) = (start, stop, start_ok, stop_ok) {
            if a >= b {
                self.field(
                    l,
                    "stop",
                    format!(
                        "stop time {} s must come after start time {} s",
                        num(b),
                        num(a)
                    ),
                );
            }
        }
    }

    fn gate_references(&mut self) {
        let signals: Vec<String> = self
            .circuit
            .gates
            .iter()
            .flat_map(|g| match g {
                Gate::ComplementaryPwm { name, .. } => {
                    vec![format!("{name}.high"), format!("{name}.low")]
                }
                _ => vec![g.name().to_string()],
            })
            .collect();
        for (i, e) in self.circuit.elements.iter().enumerate() {
            let Element::Switch(s) = e else { continue };
            if signals.contains(&s.gate) {
                continue;
            }
            let pair = self
                .circuit
                .gates
                .iter()
                .any(|g| matches!(g, Gate::ComplementaryPwm { name, .. } if *name == s.gate));
            let hint = if pair {
                format!(
                    " (the complementary pair '{0}' provides '{0}.high' and '{0}.low')",
                    s.gate
                )
            } else if signals.is_empty() {
                " (no gates are defined)".to_string()
            } else {
                let names: Vec<&str> = signals.iter().map(String::as_str).collect();
                format!(" (gate signals: {})", quoted(&names))
            };
            let label = self.labels[i].clone();
            self.field(
                &label,
                "gate",
                format!("unknown gate signal '{}'{hint}", s.gate),
            );
        }
    }

    // ----- topology --------------------------------------------------------

    fn topology(&mut self) {
        let circuit = self.circuit;
        if circuit.elements.is_empty() {
            self.out.push(Problem {
                element: None,
                field: Some("elements".into()),
                node: None,
                message: "the circuit has no elements".into(),
            });
            return;
        }

        // Nodes in order of first use.
        let mut index = NodeIndex::default();
        // Terminals as (element, field, node) and branches.
        let mut terminals: Vec<(usize, String, usize)> = Vec::new();
        let mut branches: Vec<Branch> = Vec::new();
        for (i, e) in circuit.elements.iter().enumerate() {
            for (field, n) in e.terminals() {
                terminals.push((i, field, index.get(n)));
            }
            for (field, part, pair, magnetic) in pairs(e, &self.labels[i]) {
                branches.push(Branch {
                    element: i,
                    field,
                    part,
                    a: index.get(&pair[0]),
                    b: index.get(&pair[1]),
                    magnetic,
                });
            }
        }
        let ground = index.index.get(GROUND).copied();
        let names = index.names;
        let n = names.len();

        // An element whose terminals are one node.
        for b in &branches {
            if b.a == b.b {
                let p = Problem::field(
                    &self.labels[b.element],
                    &b.field,
                    format!("both terminals are node '{}'", names[b.a]),
                )
                .at_node(names[b.a]);
                self.out.push(p);
            }
        }

        // Dangling nodes.
        let mut count = vec![0usize; n];
        for t in &terminals {
            count[t.2] += 1;
        }
        for (i, field, nd) in &terminals {
            if count[*nd] == 1 {
                let p = Problem::field(
                    &self.labels[*i],
                    field,
                    format!(
                        "node '{}' is reached by only this terminal (a dangling node: connect it or remove it)",
                        names[*nd]
                    ),
                )
                .at_node(names[*nd]);
                self.out.push(p);
            }
        }

        // Loops made only of voltage sources.
        self.voltage_source_loops(&branches, &names);

        let Some(ground) = ground else {
            self.out.push(Problem::circuit(
                "no element touches ground: connect the reference node 'gnd' (or its alias '0')",
            ));
            // Without ground every part is "floating"; saying so again for
            // each part would bury the one problem that matters.
            return;
        };

        // Parts with no connection to ground.
        let mut all = UnionFind::new(n);
        for b in &branches {
            all.union(b.a, b.b);
        }
        let root_g = all.find(ground);
        let mut reported: HashSet<usize> = HashSet::new();
        for v in 0..n {
            let r = all.find(v);
            if r == root_g || !reported.insert(r) {
                continue;
            }
            let nodes: Vec<&str> = (0..n)
                .filter(|&u| all.find(u) == r)
                .map(|u| names[u])
                .collect();
            let part: Vec<&Branch> = branches.iter().filter(|b| all.find(b.a) == r).collect();
            let parts: Vec<&str> = part.iter().map(|b| b.part.as_str()).collect();
            let first = part
                .first()
                .expect("every node is a terminal of some branch");
            let mut message = format!(
                "part of the circuit with node(s) {} has no connection to ground (it holds {})",
                quoted(&nodes),
                parts.join(", ")
            );
            if part.iter().any(|b| b.magnetic) {
                message.push_str(
                    "; a transformer or coupled winding does not connect its windings \
                     electrically, so give each side its own path to ground",
                );
            }
            let p = Problem::field(&self.labels[first.element], &first.field, message)
                .at_node(nodes[0]);
            self.out.push(p);
        }

        self.current_source_cuts(&branches, &names, ground, &mut all);
    }

    fn voltage_source_loops(&mut self, branches: &[Branch], names: &[&str]) {
        let n = names.len();
        let mut sets = UnionFind::new(n);
        // The forest of accepted sources, to name the loop a source closes.
        let mut adjacent: Vec<Vec<(usize, usize)>> = vec![Vec::new(); n];
        for b in branches {
            let is_vs = matches!(self.circuit.elements[b.element], Element::VoltageSource(_));
            if !is_vs || b.a == b.b {
                continue;
            }
            if sets.union(b.a, b.b) {
                adjacent[b.a].push((b.b, b.element));
                adjacent[b.b].push((b.a, b.element));
                continue;
            }
            let others: Vec<&str> = forest_path(&adjacent, b.a, b.b)
                .into_iter()
                .map(|e| self.labels[e].as_str())
                .collect();
            let p = Problem::field(
                &self.labels[b.element],
                &b.field,
                format!(
                    "voltage source between nodes '{}' and '{}' closes a loop made only of voltage sources (with {})",
                    names[b.a],
                    names[b.b],
                    others.join(", ")
                ),
            )
            .at_node(names[b.a]);
            self.out.push(p);
        }
    }

    fn current_source_cuts(
        &mut self,
        branches: &[Branch],
        names: &[&str],
        ground: usize,
        all: &mut UnionFind,
    ) {
        let n = names.len();
        let circuit = self.circuit;
        let is_cs = |b: &Branch| matches!(circuit.elements[b.element], Element::CurrentSource(_));
        let mut rest = UnionFind::new(n);
        for b in branches.iter().filter(|b| !is_cs(b)) {
            rest.union(b.a, b.b);
        }
        let root_g = rest.find(ground);
        let root_all = all.find(ground);
        let mut reported: HashSet<usize> = HashSet::new();
        for v in 0..n {
            let r = rest.find(v);
            // Parts that are not joined to ground at all were reported as
            // floating above.
            if r == root_g || all.find(v) != root_all || !reported.insert(r) {
                continue;
            }
            let nodes: Vec<&str> = (0..n)
                .filter(|&u| rest.find(u) == r)
                .map(|u| names[u])
                .collect();
            // The sources that cross the cut: one terminal inside, one outside.
            let sources: Vec<usize> = branches
                .iter()
                .filter(|b| is_cs(b) && ((rest.find(b.a) == r) != (rest.find(b.b) == r)))
                .map(|b| b.element)
                .collect();
            let source_names: Vec<&str> =
                sources.iter().map(|&e| self.labels[e].as_str()).collect();
            let p = Problem::field(
                &self.labels[*sources.first().expect(
                    "a part joined to ground only through current sources is crossed by one",
                )],
                "nodes",
                format!(
                    "node(s) {} connect to the rest of the circuit only through current source(s) {} \
                     (a cut made only of current sources leaves their voltages undetermined)",
                    quoted(&nodes),
                    source_names.join(", ")
                ),
            )
            .at_node(nodes[0]);
            self.out.push(p);
        }
    }

    // ----- run settings ----------------------------------------------------

    fn run_problem(&mut self, field: &str, message: String) {
        self.out.push(Problem {
            element: None,
            field: Some(field.into()),
            node: None,
            message,
        });
    }

    fn run_settings(&mut self) {
        let Some(run) = &self.circuit.run else { return };
        let stop = run.stop_time;
        let stop_ok = if !stop.is_finite() {
            self.run_problem(
                "run.stop_time",
                format!("must be a finite number, got {stop}"),
            );
            false
        } else if stop <= 0.0 {
            self.run_problem(
                "run.stop_time",
                format!("must be positive, got {}", num(stop)),
            );
            false
        } else {
            true
        };
        if let Some(r) = run.record_from {
            if !r.is_finite() {
                self.run_problem(
                    "run.record_from",
                    format!("must be a finite number, got {r}"),
                );
            } else if stop_ok && !(0.0..stop).contains(&r) {
                self.run_problem(
                    "run.record_from",
                    format!(
                        "must lie in [0, stop_time) = [0, {}) s, got {} s",
                        num(stop),
                        num(r)
                    ),
                );
            }
        }
        self.timing_rules();
        let Some(run) = &self.circuit.run else { return };
        if let Some(limits) = &run.limits {
            self.out.extend(limits.problems(self.circuit));
        }
        for (i, load) in run.loads.iter().enumerate() {
            if !self.circuit.elements.iter().any(|e| e.name() == load) {
                self.run_problem(
                    &format!("run.loads[{i}]"),
                    format!("{load:?} is not an element of the circuit"),
                );
            }
        }
        for (i, text) in run.outputs.iter().enumerate() {
            let field = format!("run.outputs[{i}]");
            let message = self.output_problem(text);
            if let Some(m) = message {
                let mut p = Problem {
                    element: None,
                    field: Some(field),
                    node: None,
                    message: m,
                };
                if let Ok(OutputName::Node(n)) = OutputName::parse(text) {
                    p = p.at_node(&n);
                }
                self.out.push(p);
            }
        }
    }

    /// The timing rules: each names switches where it needs switches,
    /// diodes (or body diodes) where it needs diodes, and positive finite
    /// limits. Each problem names the rule and its field.
    fn timing_rules(&mut self) {
        let Some(run) = &self.circuit.run else { return };
        let stop = run.stop_time;
        for (i, rule) in run.timing.iter().enumerate() {
            let rule_name = rule.display_name();
            let at = |f: &str| format!("run.timing[{i}].{f}");
            let mut out: Vec<(String, String)> = Vec::new();
            let limit = |field: &str, v: f64, out: &mut Vec<(String, String)>| {
                if !v.is_finite() || v <= 0.0 {
                    out.push((
                        at(field),
                        format!("must be a positive time in seconds, got {}", num(v)),
                    ));
                }
            };
            let switch = |name: &str, field: &str, out: &mut Vec<(String, String)>| match self
                .circuit
                .element(name)
            {
                Some(Element::Switch(_)) => {}
                Some(e) => out.push((
                    at(field),
                    format!(
                        "'{name}' is a {}; this field needs a switch",
                        e.kind_name().replace('_', " ")
                    ),
                )),
                None => out.push((at(field), format!("no element is named '{name}'"))),
            };
            let diode = |name: &str, field: &str, out: &mut Vec<(String, String)>| {
                let (base, part) = match name.split_once('.') {
                    Some((b, p)) => (b, Some(p)),
                    None => (name, None),
                };
                match (self.circuit.element(base), part) {
                    (Some(Element::Diode(_)), None) => {}
                    (Some(Element::Switch(s)), Some("body_diode")) if s.body_diode.is_some() => {}
                    (Some(Element::Switch(_)), Some("body_diode")) => {
                        out.push((at(field), format!("switch '{base}' has no body_diode")))
                    }
                    (Some(Element::Switch(_)), None) => out.push((
                        at(field),
                        format!(
                            "'{name}' is a switch; this field needs a diode (a switch's body \
                             diode is '{name}.body_diode')"
                        ),
                    )),
                    (Some(e), _) => out.push((
                        at(field),
                        format!(
                            "'{name}' is not a diode (it names a {}); this field needs a diode \
                             or SWITCH.body_diode",
                            e.kind_name().replace('_', " ")
                        ),
                    )),
                    (None, _) => out.push((at(field), format!("no element is named '{base}'"))),
                }
            };
            let range = |min: Option<f64>, max: Option<f64>, out: &mut Vec<(String, String)>| {
                if min.is_none() && max.is_none() {
                    out.push((at("min"), "give min, max or both".into()));
                }
                if let (Some(a), Some(b)) = (min, max) {
                    if a > b {
                        out.push((
                            at("max"),
                            format!("must not be below min = {}, got {}", num(a), num(b)),
                        ));
                    }
                }
            };
            match &rule.check {
                TimingCheck::DeadTime { switches, min } => {
                    switch(&switches[0], "switches[0]", &mut out);
                    switch(&switches[1], "switches[1]", &mut out);
                    if switches[0] == switches[1] {
                        out.push((at("switches"), "names the same switch twice".into()));
                    }
                    limit("min", *min, &mut out);
                }
                TimingCheck::OnTime {
                    switch: s,
                    min,
                    max,
                }
                | TimingCheck::OffTime {
                    switch: s,
                    min,
                    max,
                }
                | TimingCheck::SwitchingPeriod {
                    switch: s,
                    min,
                    max,
                } => {
                    switch(s, "switch", &mut out);
                    if let Some(v) = min {
                        limit("min", *v, &mut out);
                    }
                    if let Some(v) = max {
                        limit("max", *v, &mut out);
                    }
                    range(*min, *max, &mut out);
                }
                TimingCheck::NoOverlap { switches } => {
                    if switches.len() < 2 {
                        out.push((at("switches"), "name two or more switches".into()));
                    }
                    for (k, s) in switches.iter().enumerate() {
                        switch(s, &format!("switches[{k}]"), &mut out);
                    }
                }
                TimingCheck::DiodeConduction { diode: d, max } => {
                    diode(d, "diode", &mut out);
                    limit("max", *max, &mut out);
                }
                TimingCheck::HardTurnOn {
                    switch: s,
                    diode: d,
                    ..
                } => {
                    switch(s, "switch", &mut out);
                    diode(d, "diode", &mut out);
                }
                TimingCheck::EdgeDelay { switch: s, max, .. } => {
                    switch(s, "switch", &mut out);
                    limit("max", *max, &mut out);
                }
                TimingCheck::Band { output, min, max } => {
                    if let Some(m) = self.output_problem(output) {
                        out.push((at("output"), m));
                    }
                    if !min.is_finite() || !max.is_finite() || min > max {
                        out.push((
                            at("max"),
                            format!(
                                "the band needs finite min <= max, got [{}, {}]",
                                num(*min),
                                num(*max)
                            ),
                        ));
                    }
                }
            }
            for (field, v) in [("from", rule.from), ("to", rule.to)] {
                if let Some(v) = v {
                    if !v.is_finite() || v < 0.0 {
                        out.push((at(field), format!("must be a time >= 0 s, got {}", num(v))));
                    } else if stop.is_finite() && v > stop {
                        out.push((
                            at(field),
                            format!("lies after the stop time {} s, got {} s", num(stop), num(v)),
                        ));
                    }
                }
            }
            if let (Some(a), Some(b)) = (rule.from, rule.to) {
                if a >= b {
                    out.push((
                        at("to"),
                        format!("must be after from = {} s, got {} s", num(a), num(b)),
                    ));
                }
            }
            for (field, message) in out {
                self.run_problem(&field, format!("rule '{rule_name}': {message}"));
            }
        }
    }

    /// Whether `target` (the part before `.current` / `.voltage`) names
    /// something with a current and a voltage.
    fn output_target(&self, target: &str) -> Result<(), String> {
        let (name, part) = match target.split_once('.') {
            Some((e, p)) => (e, Some(p)),
            None => (target, None),
        };
        let Some(e) = self.circuit.element(name) else {
            return Err(format!("no element is named '{name}'"));
        };
        match (e, part) {
            (Element::CoupledInductors(c), Some(w)) => {
                if c.windings.iter().any(|x| x.name == w) {
                    Ok(())
                } else {
                    Err(format!("coupled inductors '{name}' have no winding '{w}'"))
                }
            }
            (Element::CoupledInductors(c), None) => {
                let w = c.windings.first().map(|w| w.name.as_str()).unwrap_or("WINDING");
                Err(format!(
                    "coupled inductors have one current per winding: name one, e.g. '{name}.{w}.current'"
                ))
            }
            (Element::IdealTransformer(_), Some("primary" | "secondary")) => Ok(()),
            (Element::IdealTransformer(_), _) => Err(format!(
                "an ideal transformer has a primary and a secondary: use '{name}.primary.current' or '{name}.secondary.current'"
            )),
            (Element::Switch(s), Some("body_diode")) => {
                if s.body_diode.is_some() {
                    Ok(())
                } else {
                    Err(format!("switch '{name}' has no body_diode"))
                }
            }
            (_, None) => Ok(()),
            (_, Some(p)) => Err(format!(
                "{} '{name}' has no part '{p}'",
                e.kind_name().replace('_', " ")
            )),
        }
    }
}

/// The elements on the path from `from` to `to` in a forest given as
/// adjacency lists of (node, element); empty if there is none.
fn forest_path(adjacent: &[Vec<(usize, usize)>], from: usize, to: usize) -> Vec<usize> {
    let mut came: Vec<Option<(usize, usize)>> = vec![None; adjacent.len()];
    let mut seen = vec![false; adjacent.len()];
    let mut queue = VecDeque::from([from]);
    seen[from] = true;
    while let Some(v) = queue.pop_front() {
        if v == to {
            let mut path = Vec::new();
            let mut x = to;
            while let Some((prev, e)) = came[x] {
                path.push(e);
                x = prev;
            }
            path.reverse();
            return path;
        }
        for &(w, e) in &adjacent[v] {
            if !seen[w] {
                seen[w] = true;
                came[w] = Some((v, e));
                queue.push_back(w);
            }
        }
    }
    Vec::new()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_accepts_leakage_and_rejects_perfect_coupling() {
        let m = |k: f64| vec![vec![1e-3, k * 1e-3 * 2.0], vec![k * 1e-3 * 2.0, 4e-3]];
        assert!(positive_definite(&m(0.99)));
        assert!(positive_definite(&m(-0.5)));
        assert!(!positive_definite(&m(1.0)));
        assert!(!positive_definite(&m(-1.0)));
        assert!(!positive_definite(&[vec![f64::NAN]]));
    }

    #[test]
    fn three_windings_each_below_one_can_still_be_unrealisable() {
        // k12 = k13 = 0.9 force windings 2 and 3 to be strongly alike;
        // k23 = −0.9 says they are opposite: no real core does both.
        let k = [[1.0, 0.9, 0.9], [0.9, 1.0, -0.9], [0.9, -0.9, 1.0]];
        let m: Vec<Vec<f64>> = k
            .iter()
            .map(|r| r.iter().map(|x| x * 1e-3).collect())
            .collect();
        assert!(!positive_definite(&m));
    }

    #[test]
    fn forest_path_names_the_sources_between_two_nodes() {
        // 0 -a- 1 -b- 2, 3 alone.
        let adj = vec![vec![(1, 10)], vec![(0, 10), (2, 11)], vec![(1, 11)], vec![]];
        assert_eq!(forest_path(&adj, 0, 2), vec![10, 11]);
        assert!(forest_path(&adj, 0, 3).is_empty());
    }
}
