//! Pass two of compiling: numbered nodes and one branch (or more) per
//! element, in element order, with the inductor groups, capacitors,
//! switches and diodes the modes read.

use nalgebra::DMatrix;

use fluxstep_netlist::{
    is_ground, Capacitor, Circuit, CoupledInductors, Diode, Element, IdealTransformer, Inductor,
    SignalShape, Switch,
};

use super::{Branch, BranchKind, DiodeInfo, InductorGroup, SwitchInfo, TransitionInfo};
use crate::error::SolverError;

/// The circuit as numbered nodes and branches.
pub(super) struct Network {
    /// Node names by number (`gnd` is 0).
    pub nodes: Vec<String>,
    pub branches: Vec<Branch>,
    pub groups: Vec<InductorGroup>,
    /// (state index, capacitance) of every capacitor.
    pub caps: Vec<(usize, f64)>,
    pub switches: Vec<SwitchInfo>,
    pub diodes: Vec<DiodeInfo>,
}

/// Node numbers in order of first mention; every ground name is 0.
struct NodeNumbers {
    names: Vec<String>,
}

impl NodeNumbers {
    fn number(&mut self, n: &str) -> usize {
        if is_ground(n) {
            return 0;
        }
        match self.names.iter().position(|x| x == n) {
            Some(i) => i,
            None => {
                self.names.push(n.to_string());
                self.names.len() - 1
            }
        }
    }
}

/// The builder of pass two: the network so far and the running counters.
struct Builder<'a> {
    nodes: NodeNumbers,
    net: Network,
    /// Next state index (windings and capacitors, in element order).
    state: usize,
    /// Next source entry (the circuit's sources, in element order).
    src: usize,
    signals: &'a [(String, SignalShape)],
    /// Ramp inputs of the switches still to come.
    ramps: std::vec::IntoIter<Option<usize>>,
    n_x: usize,
    /// Per input, the z index of its slope (`Compiled::slopes`).
    slopes: &'a [Option<usize>],
}

/// Numbers the nodes and builds the branches of every element.
///
/// `ramps` holds one entry per switch in circuit order (its ramp input, if
/// it has a transition model); `n_x` is the final count of states and
/// `slopes` the z indices of the inputs' slopes (`Compiled::slopes`).
///
/// # Errors
///
/// [`SolverError::Unsupported`] for coupled windings whose inductance
/// matrix has no finite inverse.
pub(super) fn branches(
    circuit: &Circuit,
    signals: &[(String, SignalShape)],
    ramps: Vec<Option<usize>>,
    n_x: usize,
    slopes: &[Option<usize>],
) -> Result<Network, SolverError> {
    let mut b = Builder {
        nodes: NodeNumbers {
            names: vec!["gnd".into()],
        },
        net: Network {
            nodes: vec![],
            branches: vec![],
            groups: vec![],
            caps: vec![],
            switches: vec![],
            diodes: vec![],
        },
        state: 0,
        src: 0,
        signals,
        ramps: ramps.into_iter(),
        n_x,
        slopes,
    };
    for e in &circuit.elements {
        match e {
            Element::Resistor(r) => {
                let (a, bn) = (b.node(&r.nodes[0]), b.node(&r.nodes[1]));
                b.net.branches.push(Branch {
                    name: r.name.clone(),
                    a,
                    b: bn,
                    kind: BranchKind::Resistor {
                        g: 1.0 / r.resistance,
                    },
                });
            }
            Element::Inductor(l) => b.inductor(l),
            Element::CoupledInductors(k) => b.coupled(k)?,
            Element::Capacitor(cap) => b.capacitor(cap),
            Element::VoltageSource(s) => {
                let kind = BranchKind::VSource { src: b.src };
                b.source(&s.name, &s.nodes, kind);
            }
            Element::CurrentSource(s) => {
                let kind = BranchKind::ISource { src: b.src };
                b.source(&s.name, &s.nodes, kind);
            }
            Element::Switch(s) => b.switch(s),
            Element::Diode(d) => b.diode(d),
            Element::IdealTransformer(t) => b.transformer(t),
        }
    }
    b.net.nodes = b.nodes.names;
    Ok(b.net)
}

impl Builder<'_> {
    fn node(&mut self, n: &str) -> usize {
        self.nodes.number(n)
    }

    fn inductor(&mut self, l: &Inductor) {
        let (a, b) = (self.node(&l.nodes[0]), self.node(&l.nodes[1]));
        let (b, series) = series_part(&mut self.nodes, &l.name, "winding", b, l.winding_resistance);
        let state = self.state;
        self.net.branches.push(Branch {
            name: l.name.clone(),
            a,
            b,
            kind: BranchKind::Winding { state },
        });
        self.net.branches.extend(series);
        let m = DMatrix::from_element(1, 1, l.inductance);
        self.net.groups.push(InductorGroup {
            states: vec![state],
            l_inv: DMatrix::from_element(1, 1, 1.0 / l.inductance),
            l: m,
        });
        self.state += 1;
    }

    fn coupled(&mut self, k: &CoupledInductors) -> Result<(), SolverError> {
        let lm = k.inductance_matrix();
        let n = lm.len();
        let l = DMatrix::from_fn(n, n, |i, j| lm[i][j]);
        // Where the general inverse fails (its determinant underflows for
        // tiny inductances: two windings of 1e-200 H give det ≈ 1e-402 →
        // 0), by Cholesky: validation proved L positive definite, and the
        // factor keeps the scales apart. Ordinary windings keep the
        // general inverse and its bits.
        let finite = |m: &DMatrix<f64>| m.iter().all(|v| v.is_finite());
        let l_inv = l
            .clone()
            .try_inverse()
            .filter(finite)
            .or_else(|| l.clone().cholesky().map(|ch| ch.inverse()))
            .filter(finite)
            .ok_or_else(|| SolverError::Unsupported {
                time: 0.0,
                pattern: "every pattern".into(),
                reason: format!(
                    "the inductance matrix of {} has no finite inverse in 64-bit \
                     arithmetic: check the windings' inductances",
                    k.name
                ),
            })?;
        let mut states = vec![];
        for w in &k.windings {
            let (a, b) = (self.node(&w.nodes[0]), self.node(&w.nodes[1]));
            self.net.branches.push(Branch {
                name: format!("{}.{}", k.name, w.name),
                a,
                b,
                kind: BranchKind::Winding { state: self.state },
            });
            states.push(self.state);
            self.state += 1;
        }
        self.net.groups.push(InductorGroup { states, l, l_inv });
        Ok(())
    }

    fn capacitor(&mut self, cap: &Capacitor) {
        let (a, b) = (self.node(&cap.nodes[0]), self.node(&cap.nodes[1]));
        let (b, series) = series_part(&mut self.nodes, &cap.name, "esr", b, cap.esr);
        self.net.branches.push(Branch {
            name: cap.name.clone(),
            a,
            b,
            kind: BranchKind::Capacitor {
                state: self.state,
                c: cap.capacitance,
            },
        });
        self.net.branches.extend(series);
        self.net.caps.push((self.state, cap.capacitance));
        self.state += 1;
    }

    /// A voltage or current source: one branch reading source entry `src`.
    fn source(&mut self, name: &str, nodes: &[String; 2], kind: BranchKind) {
        let (a, b) = (self.node(&nodes[0]), self.node(&nodes[1]));
        self.net.branches.push(Branch {
            name: name.to_string(),
            a,
            b,
            kind,
        });
        self.src += 1;
    }

    /// A switch, its transition model's inputs and its body diode (a
    /// diode branch from `b` to `a`).
    fn switch(&mut self, s: &Switch) {
        let (a, b) = (self.node(&s.nodes[0]), self.node(&s.nodes[1]));
        let input = self.ramps.next().expect("one entry per switch");
        let transition = match (&s.transition, input) {
            (Some(t), Some(k)) => Some(TransitionInfo {
                value: self.n_x + k,
                slope: self.slopes[k].expect("a ramp input has a slope entry"),
                off: (t.turn_off.voltage_rate, t.turn_off.current_rate),
                on: (t.turn_on.voltage_rate, t.turn_on.current_rate),
                current_out: usize::MAX,
                voltage_out: usize::MAX,
                body_diode: s.body_diode.as_ref().map(|_| self.net.diodes.len()),
            }),
            _ => None,
        };
        let signal = self
            .signals
            .iter()
            .position(|(n, _)| *n == s.gate)
            .expect("validated gate reference");
        self.net.switches.push(SwitchInfo {
            name: s.name.clone(),
            r_on: s.on_resistance.unwrap_or(0.0),
            signal,
            transition,
        });
        self.net.branches.push(Branch {
            name: s.name.clone(),
            a,
            b,
            kind: BranchKind::Switch {
                sw: self.net.switches.len() - 1,
            },
        });
        if let Some(m) = &s.body_diode {
            let name = format!("{}.body_diode", s.name);
            self.net.diodes.push(DiodeInfo {
                name: name.clone(),
                branch: self.net.branches.len(),
                vf: m.forward_voltage.unwrap_or(0.0),
                r_on: m.on_resistance.unwrap_or(0.0),
            });
            self.net.branches.push(Branch {
                name,
                a: b,
                b: a,
                kind: BranchKind::Diode {
                    d: self.net.diodes.len() - 1,
                },
            });
        }
    }

    fn diode(&mut self, d: &Diode) {
        self.net.diodes.push(DiodeInfo {
            name: d.name.clone(),
            branch: self.net.branches.len(),
            vf: d.model.forward_voltage.unwrap_or(0.0),
            r_on: d.model.on_resistance.unwrap_or(0.0),
        });
        let (a, b) = (self.node(&d.nodes[0]), self.node(&d.nodes[1]));
        self.net.branches.push(Branch {
            name: d.name.clone(),
            a,
            b,
            kind: BranchKind::Diode {
                d: self.net.diodes.len() - 1,
            },
        });
    }

    fn transformer(&mut self, t: &IdealTransformer) {
        // The secondary's nodes are numbered before the primary's.
        let sec = (self.node(&t.secondary[0]), self.node(&t.secondary[1]));
        let (a, b) = (self.node(&t.primary[0]), self.node(&t.primary[1]));
        self.net.branches.push(Branch {
            name: t.name.clone(),
            a,
            b,
            kind: BranchKind::Transformer {
                n: t.turns_ratio,
                sec,
            },
        });
    }
}

/// The series resistance `ohms` of an inductor or capacitor `name`, expanded
/// into a resistor branch `NAME.PART` from a new internal node `NAME.PART`
/// to `b`: returns the node the element itself now ends at, and the
/// resistor branch (none for no or zero resistance, which is a plain short).
fn series_part(
    nodes: &mut NodeNumbers,
    name: &str,
    part: &str,
    b: usize,
    ohms: Option<f64>,
) -> (usize, Option<Branch>) {
    match ohms {
        Some(r) if r > 0.0 => {
            let inner = nodes.number(&format!("{name}.{part}"));
            let branch = Branch {
                name: format!("{name}.{part}"),
                a: inner,
                b,
                kind: BranchKind::Resistor { g: 1.0 / r },
            };
            (inner, Some(branch))
        }
        _ => (b, None),
    }
}
