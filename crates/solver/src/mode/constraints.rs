//! Step 3 of a mode: the constraints of inductor cutsets and capacitor
//! loops, the multipliers λ that keep them (a pseudo-inverse where only
//! part of them is fixed), the jump map `P` that restores them on entry,
//! and the reduced system: `M = D_z + D_λ·λ` and every unknown as a
//! function of z and the free gauges.

use nalgebra::DMatrix;

use crate::compile::{BranchKind, Compiled};

use super::network::Network;
use super::topology::Topology;
use super::{ConstraintKind, NoSolution};

/// Rounding errors (in units of ε) within which an entry of a mode's M
/// formed by a multiplier's cancellation counts as zero: the sums and
/// products that form it have a few dozen terms at most in the circuits
/// fluxstep handles, and a genuine entry that small next to the terms
/// it cancels would be below what the run could resolve anyway.
const CANCELLATION_ULPS: f64 = 64.0;

/// The system of a pattern with its multipliers eliminated.
pub(super) struct Reduced {
    /// z' = M z.
    pub m: DMatrix<f64>,
    /// Jump map z⁺ = P z⁻ restoring the constraints.
    pub p: DMatrix<f64>,
    /// Constraint rows H restricted to z.
    pub hz: DMatrix<f64>,
    /// What each row of H is about.
    pub constraints: Vec<ConstraintKind>,
    /// Every unknown of the network over z and the free gauges.
    pub rows: UnknownRows,
}

/// Every unknown of the network (node voltages, branch and gauge
/// currents) with the multipliers eliminated.
pub(super) struct UnknownRows {
    /// Each unknown as a function of z.
    pub yz: DMatrix<f64>,
    /// Each unknown's dependence on the free gauges (free groups first,
    /// then the null directions of the multipliers).
    pub yf: DMatrix<f64>,
    /// Columns of `yf`.
    pub n_free: usize,
}

/// The multipliers as functions of z, and what they leave free.
struct Multipliers {
    /// λ = lam·z.
    lam: DMatrix<f64>,
    /// The jump map.
    p: DMatrix<f64>,
    /// Magnitudes that make up each entry of D_λ·λ.
    made_of: DMatrix<f64>,
    /// Null directions of S (columns over λ): free gauges.
    null_dirs: DMatrix<f64>,
}

/// The reason given where a set of constraints has no usable solution.
const UNRESOLVED: NoSolution =
    NoSolution("a set of windings or capacitors whose constraint cannot be resolved");

impl Reduced {
    /// Eliminates the multipliers of `net` from the derivatives `d`.
    pub(super) fn new(
        cc: &Compiled,
        topo: &Topology,
        net: &Network,
        d: &DMatrix<f64>,
    ) -> Result<Reduced, NoSolution> {
        let cols = net.cols;
        let (nz, n_lam) = (cols.nz, cols.n_lam);
        let (h, constraints) = constraint_rows(cc, topo, net);
        let hz = h.columns(0, nz).into_owned();
        let dz = d.columns(0, nz).into_owned();
        let dl = d.columns(nz, n_lam).into_owned();
        let Multipliers {
            lam,
            p,
            made_of,
            null_dirs,
        } = if n_lam > 0 {
            multipliers(&hz, &dz, &dl)?
        } else {
            Multipliers {
                lam: DMatrix::zeros(0, nz),
                p: DMatrix::identity(nz, nz),
                made_of: DMatrix::zeros(nz, nz),
                null_dirs: DMatrix::<f64>::zeros(n_lam, 0),
            }
        };
        let y = &net.y;
        let n_unk = net.unknowns.count;
        let yz = y.columns(0, nz).into_owned() + y.columns(nz, n_lam) * &lam;
        let n_null = null_dirs.ncols();
        let n_free = cols.n_free + n_null;
        let mut yf = DMatrix::<f64>::zeros(n_unk, n_free);
        yf.columns_mut(0, n_free - n_null)
            .copy_from(&y.columns(nz + n_lam, n_free - n_null));
        if n_null > 0 {
            yf.columns_mut(n_free - n_null, n_null)
                .copy_from(&(y.columns(nz, n_lam) * &null_dirs));
        }
        let mut m = &dz + &dl * &lam;
        if n_lam > 0 {
            cancel(&mut m, &dz, &made_of);
        }
        Ok(Reduced {
            m,
            p,
            hz,
            constraints,
            rows: UnknownRows { yz, yf, n_free },
        })
    }
}

/// The constraint rows H over the columns (Kirchhoff's current law on each
/// cutset: its gauge current; each loop capacitor's voltage minus the
/// loop's) and their kinds.
fn constraint_rows(
    cc: &Compiled,
    topo: &Topology,
    net: &Network,
) -> (DMatrix<f64>, Vec<ConstraintKind>) {
    let mut h = DMatrix::<f64>::zeros(net.cols.n_lam, net.cols.total);
    let mut constraints = vec![];
    for (ci, &c) in topo.cut.iter().enumerate() {
        h.set_row(ci, &net.y.row(net.unknowns.gauge[c]));
        constraints.push(ConstraintKind::Cutset {
            windings: topo.floating[c].windings.clone(),
            node: topo.rep(c),
            sources: topo.floating[c].sources.clone(),
        });
    }
    for (li, lp) in topo.loops.iter().enumerate() {
        let b = &cc.branches[lp.cap];
        let BranchKind::Capacitor { state, .. } = b.kind else {
            unreachable!("loops are closed by capacitors")
        };
        let mut row = -(net.vrow(b.a) - net.vrow(b.b));
        row[state] += 1.0;
        h.set_row(topo.cut.len() + li, &row.transpose());
        let mut all = lp.others.clone();
        all.insert(0, lp.cap);
        constraints.push(ConstraintKind::Loop { caps: all });
    }
    (h, constraints)
}

/// Multipliers λ make the constraints' time derivatives vanish:
/// S·λ = −H·D_z·z with S = H·D_λ. S may be singular when two floating
/// groups are joined only by a winding (a transformer secondary feeding a
/// blocked bridge): only their potential difference is fixed. The
/// pseudo-inverse picks the determined part; the null directions of S are
/// free gauges like those of groups reached by nothing, provided they move
/// no state (checked).
///
/// If the state violates a constraint when the mode is entered, the jump
/// `z⁺ = (I − D_λ S⁺ H) z⁻` is the impulsive multiplier that restores it.
fn multipliers(
    hz: &DMatrix<f64>,
    dz: &DMatrix<f64>,
    dl: &DMatrix<f64>,
) -> Result<Multipliers, NoSolution> {
    let (nz, n_lam) = (hz.ncols(), hz.nrows());
    let mut null_dirs = DMatrix::<f64>::zeros(n_lam, 0);
    let s = hz * dl;
    // The decomposition panics on a NaN singular value: a constraint
    // matrix that overflowed (a diode's forward voltage of 1.8e308 V next
    // to ordinary values) has no multipliers to find.
    if !s.iter().all(|v| v.is_finite()) {
        return Err(UNRESOLVED);
    }
    let svd = s.clone().svd(true, true);
    let (u, vt) = (
        svd.u.as_ref().expect("asked for u"),
        svd.v_t.as_ref().expect("asked for v"),
    );
    let smax = svd.singular_values.iter().fold(0.0f64, |a, &b| a.max(b));
    let tol = 1e-10 * smax;
    let mut s_pinv = DMatrix::<f64>::zeros(n_lam, n_lam);
    let mut nulls = vec![];
    for (k, &sv) in svd.singular_values.iter().enumerate() {
        if sv.is_nan() {
            nulls.clear();
            break;
        }
        if sv > tol {
            s_pinv += vt.row(k).transpose() * u.column(k).transpose() / sv;
        } else {
            nulls.push(vt.row(k).transpose());
        }
    }
    if smax.is_nan() {
        return Err(UNRESOLVED);
    }
    if !nulls.is_empty() {
        null_dirs = DMatrix::from_columns(&nulls);
        // A free direction must not move any state, or the mode's
        // dynamics would be undetermined.
        let moved = dl * &null_dirs;
        let scale = dl.amax().max(f64::MIN_POSITIVE);
        if moved.amax() > 1e-9 * scale {
            return Err(UNRESOLVED);
        }
    }
    let lam = -&s_pinv * (hz * dz);
    let p = DMatrix::identity(nz, nz) - dl * &s_pinv * hz;
    // What each entry of D_λ·λ is made of, in magnitude: the scale of the
    // rounding left where M cancels (see `cancel`).
    let made_of = dl.abs() * (s_pinv.abs() * (hz.abs() * dz.abs()));
    Ok(Multipliers {
        lam,
        p,
        made_of,
        null_dirs,
    })
}

/// The multipliers cancel the dynamics a cut or loop forbids (a cut
/// inductor's v/L) exactly in theory, but only to rounding of the terms in
/// f64: 1/L·ε for an inductance L. With L = 1e-300 H that residue
/// (1e284 /s) coupled to a capacitor is a fake oscillation of 1e144 rad/s,
/// and the run refused an ordinary dead time. An entry of `m` within a few
/// rounding errors of the terms it was summed from (`dz` and `made_of`) is
/// zero (the usual error bound of a sum and a product, n·ε·Σ|terms|:
/// N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed.,
/// 2002, §3.1; from memory).
fn cancel(m: &mut DMatrix<f64>, dz: &DMatrix<f64>, made_of: &DMatrix<f64>) {
    let floor = CANCELLATION_ULPS * f64::EPSILON;
    for (v, (a, b)) in m.iter_mut().zip(dz.iter().zip(made_of.iter())) {
        if v.abs() <= floor * (a.abs() + b) {
            *v = 0.0;
        }
    }
}

#[cfg(test)]
mod tests {
    use fluxstep_netlist::{Circuit, Point, Stimulus};

    use crate::mode::testing::{buck, built, near, source_column, state};
    use crate::mode::ConstraintKind;

    /// Closing a switch from a source onto a capacitor: the loop fixes the
    /// capacitor at the source's voltage, so the jump sets it to the
    /// source's input whatever it held, and afterwards moves with the
    /// input's slope alone (common practice): none for a constant source,
    /// which has no slope entry in z, the ramp's for a ramping one.
    #[test]
    fn capacitor_loop_across_a_source_jumps_to_the_source_voltage() {
        let across = |source: Stimulus| {
            Circuit::builder()
                .voltage_waveform("Vin", "in", "gnd", source)
                .switch("S1", "in", "c", "drive")
                .capacitor("C1", "c", "gnd", 1e-6)
                .resistor("R", "c", "gnd", 1e3)
                .pwm("drive", 100e3, 0.5)
                .build()
                .expect("valid")
        };
        let c = across(Stimulus::constant(10.0));
        let (cc, mode) = built(&c, 1, 0);
        assert!(mode.problem.is_none());
        let (v, u) = (state(&cc, "C1.voltage"), source_column(&cc, "Vin"));
        assert!(
            matches!(&mode.constraints[..], [ConstraintKind::Loop { caps }] if caps.len() == 1)
        );
        for col in 0..cc.n_z() {
            let want = if col == u { 1.0 } else { 0.0 };
            assert!(near(mode.p[(v, col)], want, 1.0), "P[v,{col}]");
        }
        // A constant source has no slope entry in z: the capacitor holds.
        assert_eq!(cc.slopes[u - cc.n_x], None);
        assert_eq!(cc.n_z(), cc.n_x + cc.n_u);
        for col in 0..cc.n_z() {
            assert_eq!(mode.m[(v, col)], 0.0, "M[v,{col}]");
        }
        // A ramping one has: the capacitor follows its slope.
        let ramp = Stimulus::PiecewiseLinear {
            points: vec![
                Point {
                    time: 0.0,
                    value: 10.0,
                },
                Point {
                    time: 1e-3,
                    value: 12.0,
                },
            ],
            period: None,
        };
        let (cc2, ramped) = built(&across(ramp), 1, 0);
        let (v2, u2) = (state(&cc2, "C1.voltage"), source_column(&cc2, "Vin"));
        let slope = cc2.slopes[u2 - cc2.n_x].expect("a ramping source has a slope entry");
        assert_eq!(cc2.n_z(), cc2.n_x + cc2.n_u + 1);
        for col in 0..cc2.n_z() {
            let want = if col == slope { 1.0 } else { 0.0 };
            assert!(near(ramped.m[(v2, col)], want, 1.0), "M[v,{col}]");
        }
        // Open, the capacitor discharges into R alone: no constraint.
        let (_, open) = built(&c, 0, 0);
        assert!(open.constraints.is_empty());
        assert!(near(open.m[(v, v)], -1.0 / (1e3 * 1e-6), 1e3));
    }

    /// Two capacitors (1 µF, 3 µF) joined by a closing switch share their
    /// charge: both jump to (C1·v1 + C2·v2)/(C1 + C2) (conservation of
    /// charge; common practice).
    #[test]
    fn capacitor_loop_conserves_charge() {
        let c = Circuit::builder()
            .capacitor_with_voltage("C1", "a", "gnd", 1e-6, 10.0)
            .capacitor("C2", "b", "gnd", 3e-6)
            .timed_switch("S1", "a", "b", &[(1e-6, true)])
            .build()
            .expect("valid");
        let (cc, mode) = built(&c, 1, 0);
        assert!(mode.problem.is_none());
        let (v1, v2) = (state(&cc, "C1.voltage"), state(&cc, "C2.voltage"));
        for row in [v1, v2] {
            assert!(near(mode.p[(row, v1)], 0.25, 1.0), "{}", mode.p);
            assert!(near(mode.p[(row, v2)], 0.75, 1.0), "{}", mode.p);
        }
        // The charge after the jump equals the charge before.
        let z: Vec<f64> = (0..cc.n_z())
            .map(|k| match k {
                k if k == v1 => 10.0,
                k if k == v2 => 2.0,
                _ => 0.0,
            })
            .collect();
        let after = &mode.p * nalgebra::DVector::from_vec(z);
        let q = 1e-6 * after[v1] + 3e-6 * after[v2];
        assert!(near(q, 1e-6 * 10.0 + 3e-6 * 2.0, 1e-5));
        assert!(near(after[v1], after[v2], 10.0));
    }

    /// Two inductors (1 µH, 3 µH) in series whose middle node loses its
    /// switch to ground form a cutset: both currents jump to
    /// (L1·i1 + L2·i2)/(L1 + L2), which conserves the flux linkage
    /// L1·i1 + L2·i2 (common practice).
    #[test]
    fn inductor_cutset_conserves_flux_linkage() {
        let c = Circuit::builder()
            .resistor("R", "a", "gnd", 1.0)
            .inductor("L1", "a", "mid", 1e-6)
            .inductor("L2", "mid", "gnd", 3e-6)
            .switch("S1", "mid", "gnd", "drive")
            .pwm("drive", 100e3, 0.5)
            .build()
            .expect("valid");
        let (cc, mode) = built(&c, 0, 0);
        assert!(mode.problem.is_none());
        let (i1, i2) = (state(&cc, "L1.current"), state(&cc, "L2.current"));
        assert!(
            matches!(&mode.constraints[..], [ConstraintKind::Cutset { windings, .. }] if windings.len() == 2)
        );
        for row in [i1, i2] {
            assert!(near(mode.p[(row, i1)], 0.25, 1.0), "{}", mode.p);
            assert!(near(mode.p[(row, i2)], 0.75, 1.0), "{}", mode.p);
        }
        // Afterwards the two currents move together: (L1 + L2) di/dt = −R i.
        for row in [i1, i2] {
            let rate = mode.m[(row, i1)] + mode.m[(row, i2)];
            assert!(near(rate, -1.0 / 4e-6, 1e6), "{}", mode.m);
        }
        // Closed, the switch leaves no cutset.
        let (_, closed) = built(&c, 1, 0);
        assert!(closed.constraints.is_empty());
    }

    /// The buck's idle interval (switch and diode off) cuts its lone
    /// inductor: the jump takes its current to zero and its voltage is
    /// zero while the capacitor discharges into the load (common practice).
    #[test]
    fn lone_inductor_cutset_jumps_to_zero_current() {
        let (cc, mode) = built(&buck(), 0, 0);
        assert!(mode.problem.is_none());
        let (i, v) = (state(&cc, "L1.current"), state(&cc, "C1.voltage"));
        assert_eq!(mode.p[(i, i)], 0.0);
        assert_eq!(mode.p[(v, v)], 1.0);
        for col in 0..cc.n_z() {
            assert_eq!(mode.m[(i, col)], 0.0, "M[i,{col}]");
        }
        assert!(near(mode.m[(v, v)], -1.0 / (5.0 * 100e-6), 1e4));
    }
}
