//! Step 5 of a mode: what must stay true while it holds — the diode guards
//! (a conducting diode's current, a blocking diode's voltage, pairs of
//! blocking diodes around a free gauge), the balance of free groups fed by
//! current sources, and the comparator guards of closed-loop gates.

use nalgebra::{DMatrix, DVector};

use crate::compile::{Compiled, CompiledComparison, OutputDef};

use super::network::Network;
use super::outputs::{Outputs, Solved};
use super::topology::{Conduction, Topology};
use super::{Guard, GuardKind, ModeProblem};

/// A blocking diode whose voltage moves with a free gauge.
struct FreeDependent {
    /// The diode.
    diode: usize,
    /// Its guard row over z (Vf − v).
    row: Vec<f64>,
    /// The row's dependence on the free gauges.
    dep: DVector<f64>,
}

/// The diode guards of pattern `on`, with their derivatives `row·M`.
pub(super) fn diode_guards(
    cc: &Compiled,
    on: Conduction,
    s: Solved,
    m: &DMatrix<f64>,
) -> Vec<Guard> {
    let one = cc.n_x; // z index of the constant input 1
    let mut guards = vec![];
    let mut free_dep: Vec<FreeDependent> = vec![];
    for (di, dinfo) in cc.diodes.iter().enumerate() {
        let b = &cc.branches[dinfo.branch];
        if on.d_on(di) {
            let (r, _) = s.current(dinfo.branch);
            guards.push(Guard::new(
                GuardKind::DiodeCurrent(di),
                r.iter().copied().collect(),
                m,
            ));
        } else {
            let (a1, a2) = s.node(b.a);
            let (b1, b2) = s.node(b.b);
            let mut row = -(a1 - b1);
            row[one] += dinfo.vf;
            let dep = -(a2 - b2);
            if dep.iter().all(|v| v.abs() < 1e-9) {
                guards.push(Guard::new(
                    GuardKind::DiodeVoltage(di),
                    row.iter().copied().collect(),
                    m,
                ));
            } else {
                free_dep.push(FreeDependent {
                    diode: di,
                    row: row.iter().copied().collect(),
                    dep,
                });
            }
        }
    }
    // Pair diodes whose voltages move oppositely with the same free gauge
    // (Fourier–Motzkin elimination of that gauge).
    for i in 0..free_dep.len() {
        for j in i + 1..free_dep.len() {
            let (fi, fj) = (&free_dep[i], &free_dep[j]);
            let sum = &fi.dep + &fj.dep;
            if sum.iter().all(|v| v.abs() < 1e-9) {
                let row: Vec<f64> = fi.row.iter().zip(&fj.row).map(|(a, b)| a + b).collect();
                guards.push(Guard::new(GuardKind::DiodePair(fi.diode, fj.diode), row, m));
            }
        }
    }
    guards
}

/// Gauge currents of free groups with current sources, which must be zero:
/// (row over z, the group's lowest node, the sources' names).
pub(super) fn free_checks(topo: &Topology, net: &Network) -> Vec<(Vec<f64>, usize, Vec<String>)> {
    let mut checks = vec![];
    for &c in &topo.free {
        if !topo.floating[c].sources.is_empty() {
            checks.push((
                net.y
                    .row(net.unknowns.gauge[c])
                    .columns(0, net.cols.nz)
                    .iter()
                    .copied()
                    .collect(),
                topo.rep(c),
                topo.floating[c].sources.clone(),
            ));
        }
    }
    checks
}

/// Comparator guards, per comparator: `[0]` while on (turn off when met),
/// `[1]` while off (turn on when met); each stays positive until its
/// comparison is met. A comparator of an undetermined output makes the
/// pattern unsupported (`problem`, unless one is named already).
pub(super) fn comparator_guards(
    cc: &Compiled,
    outputs: &Outputs,
    m: &DMatrix<f64>,
    problem: &mut Option<ModeProblem>,
) -> Vec<[Option<Guard>; 2]> {
    let mut cmp_guards = vec![];
    for (ci, cmp) in cc.comparators.iter().enumerate() {
        let sense = outputs.c.row(cmp.sense).into_owned();
        let current = matches!(
            cc.outputs[cmp.sense].1,
            OutputDef::BranchCurrent(_) | OutputDef::SecondaryCurrent(_)
        );
        let make = |c: &Option<CompiledComparison>, off: bool| {
            c.as_ref().map(|c| {
                let thr = DVector::from_column_slice(&c.threshold);
                let row: DVector<f64> = if c.above {
                    thr - sense.transpose()
                } else {
                    sense.transpose() - thr
                };
                let kind = GuardKind::Comparator {
                    index: ci,
                    turn_off: off,
                    of_current: current,
                };
                Guard::new(kind, row.iter().copied().collect(), m)
            })
        };
        if outputs.undetermined[cmp.sense] && problem.is_none() {
            *problem = Some(ModeProblem::Unsupported(format!(
                "gate {} compares {}, which is undetermined in this mode",
                cc.signals[cmp.signal].0, cc.outputs[cmp.sense].0
            )));
        }
        cmp_guards.push([make(&cmp.turn_off, true), make(&cmp.turn_on, false)]);
    }
    cmp_guards
}

#[cfg(test)]
mod tests {
    use crate::mode::testing::{buck, built, near, source_column, state};
    use crate::mode::GuardKind;

    /// The buck's diode guards (common practice for an ideal diode): while
    /// it blocks with the switch on, Vf − v_D is the source's input (Vf is
    /// zero and its cathode sits at the source); while it freewheels, its current is the inductor's. Each
    /// guard's derivative row is row·M.
    #[test]
    fn buck_diode_guards() {
        let (cc, on) = built(&buck(), 1, 0);
        let u = source_column(&cc, "Vin");
        let [g] = &on.guards[..] else {
            panic!("one guard: {:?}", on.guards)
        };
        assert_eq!(g.kind, GuardKind::DiodeVoltage(0));
        for (k, &v) in g.row.iter().enumerate() {
            assert!(near(v, if k == u { 1.0 } else { 0.0 }, 1.0), "{:?}", g.row);
        }
        let (cc, free) = built(&buck(), 0, 1);
        let i = state(&cc, "L1.current");
        let [g] = &free.guards[..] else {
            panic!("one guard: {:?}", free.guards)
        };
        assert_eq!(g.kind, GuardKind::DiodeCurrent(0));
        for (k, &v) in g.row.iter().enumerate() {
            assert!(near(v, if k == i { 1.0 } else { 0.0 }, 1.0), "{:?}", g.row);
        }
        for (k, &d) in g.drow.iter().enumerate() {
            let want: f64 = (0..cc.n_z()).map(|j| g.row[j] * free.m[(j, k)]).sum();
            assert!(near(d, want, 1e4), "drow[{k}] = {d}, want {want}");
        }
        assert!(free.free_checks.is_empty());
        assert!(free.cmp_guards.is_empty());
    }
}
