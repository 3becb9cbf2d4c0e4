//! Step 4 of a mode: the output rows `y = C z` of every compiled output
//! (with the outputs that depend on a free gauge marked undetermined), and
//! the compensators' rows of `M`, which read their inputs from those rows.

use nalgebra::{DMatrix, DVector};

use crate::compile::{BranchKind, Compiled, OutputDef};

use super::constraints::UnknownRows;
use super::network::Network;
use super::topology::Conduction;
use super::ModeProblem;

/// A linear function of z and its dependence on the free gauges.
type Row = (DVector<f64>, DVector<f64>);

/// Node voltages and branch currents of the reduced system, as rows over z
/// and over the free gauges.
#[derive(Clone, Copy)]
pub(super) struct Solved<'a> {
    /// The network, for where each current sits.
    pub net: &'a Network,
    /// The unknowns with the multipliers eliminated.
    pub rows: &'a UnknownRows,
}

impl Solved<'_> {
    /// The voltage of node `n`.
    pub(super) fn node(self, n: usize) -> Row {
        if n == 0 {
            (
                DVector::zeros(self.net.cols.nz),
                DVector::zeros(self.rows.n_free),
            )
        } else {
            (
                self.rows.yz.row(n - 1).transpose(),
                self.rows.yf.row(n - 1).transpose(),
            )
        }
    }

    /// The current of branch `bi` (an unknown of the network).
    pub(super) fn current(self, bi: usize) -> Row {
        let k = self.net.unknowns.current[bi];
        (
            self.rows.yz.row(k).transpose(),
            self.rows.yf.row(k).transpose(),
        )
    }

    /// The voltage between nodes `a` and `b`.
    pub(super) fn between(self, a: usize, b: usize) -> Row {
        let (a1, a2) = self.node(a);
        let (b1, b2) = self.node(b);
        (a1 - b1, a2 - b2)
    }

    /// Zero in z and in the free gauges.
    fn zero(self) -> Row {
        (
            DVector::zeros(self.net.cols.nz),
            DVector::zeros(self.rows.n_free),
        )
    }

    /// `r` in z, independent of the free gauges.
    fn fixed(self, r: DVector<f64>) -> Row {
        (r, DVector::zeros(self.rows.n_free))
    }
}

/// The output rows of a pattern.
pub(super) struct Outputs {
    /// Outputs y = C z, one row per compiled output.
    pub c: DMatrix<f64>,
    /// Output rows that depend on a free gauge.
    pub undetermined: Vec<bool>,
}

impl Outputs {
    /// The rows of every compiled output; `m` is the reduced system's M
    /// (a capacitor's current is C times its voltage's derivative).
    pub(super) fn new(cc: &Compiled, on: Conduction, s: Solved, m: &DMatrix<f64>) -> Outputs {
        let nz = s.net.cols.nz;
        let n_out = cc.outputs.len();
        let mut cm = DMatrix::<f64>::zeros(n_out, nz);
        let mut undetermined = vec![false; n_out];
        for (oi, (_, def)) in cc.outputs.iter().enumerate() {
            let (row, free): Row = match def {
                OutputDef::Compensator(k) => {
                    // u = C·x + D·(reference − input); the input's row is
                    // already known (compensator outputs come last).
                    let comp = &cc.compensators[*k];
                    let mut r = DVector::zeros(nz);
                    for (j, &st) in comp.states.iter().enumerate() {
                        r[st] += comp.c[j];
                    }
                    r[comp.reference_z] += comp.d;
                    r -= cm.row(comp.input).transpose() * comp.d;
                    let f = if undetermined[comp.input] {
                        DVector::from_element(1, 1.0)
                    } else {
                        DVector::zeros(1)
                    };
                    (r, f)
                }
                OutputDef::Node(n) => s.node(*n),
                OutputDef::BranchVoltage(bi) => {
                    let b = &cc.branches[*bi];
                    s.between(b.a, b.b)
                }
                OutputDef::SecondaryVoltage(bi) => {
                    let BranchKind::Transformer { sec, .. } = cc.branches[*bi].kind else {
                        unreachable!()
                    };
                    s.between(sec.0, sec.1)
                }
                OutputDef::SecondaryCurrent(bi) => {
                    let BranchKind::Transformer { n, .. } = cc.branches[*bi].kind else {
                        unreachable!()
                    };
                    let (r, f) = s.current(*bi);
                    (r * -n, f * -n)
                }
                OutputDef::BranchCurrent(bi) => branch_current(cc, on, s, m, *bi),
            };
            cm.set_row(oi, &row.transpose());
            undetermined[oi] = free.iter().any(|v| v.abs() > 1e-9);
        }
        Outputs {
            c: cm,
            undetermined,
        }
    }

    /// Compensator dynamics: x_c' = A·x_c + B·(reference − input), written
    /// into the compensator states' rows of `m`. A compensator whose input
    /// is undetermined in this pattern makes it unsupported (`problem`,
    /// unless one is named already).
    pub(super) fn compensator_rows(
        &self,
        cc: &Compiled,
        m: &mut DMatrix<f64>,
        problem: &mut Option<ModeProblem>,
    ) {
        for comp in &cc.compensators {
            if self.undetermined[comp.input] && problem.is_none() {
                *problem = Some(ModeProblem::Unsupported(format!(
                    "compensator {} measures {}, which is undetermined in this mode",
                    comp.name, cc.outputs[comp.input].0
                )));
            }
            let input_row = self.c.row(comp.input).into_owned();
            for (i, &si) in comp.states.iter().enumerate() {
                let mut r = input_row.clone() * -comp.b[i];
                r[comp.reference_z] += comp.b[i];
                for (j, &sj) in comp.states.iter().enumerate() {
                    r[sj] += comp.a[(i, j)];
                }
                m.set_row(si, &r);
            }
        }
    }
}

/// The current of branch `bi` (a → b through it).
fn branch_current(cc: &Compiled, on: Conduction, s: Solved, m: &DMatrix<f64>, bi: usize) -> Row {
    let nz = s.net.cols.nz;
    let b = &cc.branches[bi];
    match &b.kind {
        BranchKind::Resistor { g: cond } => {
            let (a1, a2) = s.node(b.a);
            let (b1, b2) = s.node(b.b);
            ((a1 - b1) * *cond, (a2 - b2) * *cond)
        }
        BranchKind::Winding { state } => {
            let mut r = DVector::zeros(nz);
            r[*state] = 1.0;
            s.fixed(r)
        }
        BranchKind::Capacitor { state, c } => s.fixed(m.row(*state).transpose() * *c),
        BranchKind::ISource { src } => {
            let mut r = DVector::zeros(nz);
            for &(col, f) in &cc.sources[*src].terms {
                r[col] += f;
            }
            s.fixed(r)
        }
        BranchKind::VSource { .. } | BranchKind::Transformer { .. } => s.current(bi),
        BranchKind::Switch { sw } if on.ramp_v(*sw) => s.current(bi),
        BranchKind::Switch { sw } if on.ramp_i(*sw) => {
            let mut r = DVector::zeros(nz);
            r[cc.switches[*sw]
                .transition
                .as_ref()
                .expect("a ramp has a model")
                .value] = 1.0;
            s.fixed(r)
        }
        BranchKind::Switch { sw } => {
            if !on.sw_on(*sw) {
                s.zero()
            } else if cc.switches[*sw].r_on > 0.0 {
                let gsw = 1.0 / cc.switches[*sw].r_on;
                let (a1, a2) = s.node(b.a);
                let (b1, b2) = s.node(b.b);
                ((a1 - b1) * gsw, (a2 - b2) * gsw)
            } else {
                s.current(bi)
            }
        }
        BranchKind::Diode { d } => {
            if on.d_on(*d) {
                s.current(bi)
            } else {
                s.zero()
            }
        }
    }
}
