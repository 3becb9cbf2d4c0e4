//! Step 2 of a mode: the resistive network that remains when
//! capacitors act as voltage sources and windings as current sources,
//! stamped by modified nodal analysis and solved for every node voltage and
//! voltage-branch current as a linear function of the columns
//! `[z; λ; free]`; then the state derivatives `D` in the same columns.

use nalgebra::{DMatrix, DVector, Dyn, FullPivLU};

use crate::compile::{BranchKind, Compiled};

use super::topology::{Conduction, Topology};
use super::NoSolution;

/// Where each unknown of the network sits: node voltages 1..nn first, then
/// voltage-branch currents, then gauge currents of floating groups.
pub(super) struct Unknowns {
    /// Unknown of each branch's current (`usize::MAX`: not an unknown).
    pub current: Vec<usize>,
    /// Unknown of each floating group's gauge current (`usize::MAX`: none).
    pub gauge: Vec<usize>,
    /// How many unknowns.
    pub count: usize,
}

/// The columns of the network's right-hand side: the extended state z,
/// then the multipliers λ (cutsets, then capacitor loops), then the free
/// gauges.
#[derive(Clone, Copy)]
pub(super) struct Columns {
    /// Entries of z.
    pub nz: usize,
    /// Multipliers: cutsets and capacitor loops.
    pub n_lam: usize,
    /// Free gauges of groups reached by nothing that fixes them.
    pub n_free: usize,
    /// All columns: nz + n_lam + n_free.
    pub total: usize,
}

impl Columns {
    /// The column of capacitor loop `li`'s multiplier.
    pub(super) fn loop_column(self, topo: &Topology, li: usize) -> usize {
        self.nz + topo.cut.len() + li
    }
}

/// The solved network.
pub(super) struct Network {
    /// Each unknown (row) as a linear function of the columns.
    pub y: DMatrix<f64>,
    /// Where the unknowns sit.
    pub unknowns: Unknowns,
    /// The column layout.
    pub cols: Columns,
}

impl Network {
    /// Stamps and solves the network of pattern `on`; `NoSolution` where
    /// its equations are singular.
    pub(super) fn solve(
        cc: &Compiled,
        on: Conduction,
        topo: &Topology,
    ) -> Result<Network, NoSolution> {
        let nz = cc.n_z();
        let unknowns = Unknowns::number(cc, on, topo);
        let n_lam = topo.cut.len() + topo.loops.len();
        let n_free = topo.free.len();
        let cols = Columns {
            nz,
            n_lam,
            n_free,
            total: nz + n_lam + n_free,
        };
        let (g, rhs) = stamp(cc, on, topo, &unknowns, cols);
        let y = solve_equilibrated(&g, &rhs, cols.total, cc.nodes.len() - 1)?;
        Ok(Network { y, unknowns, cols })
    }

    /// The voltage of node `n` as a row over the columns.
    pub(super) fn vrow(&self, n: usize) -> DVector<f64> {
        match nidx(n) {
            Some(i) => self.y.row(i).transpose(),
            None => DVector::zeros(self.cols.total),
        }
    }

    /// State derivatives as functions of `[z; λ; free]`: the windings'
    /// `L⁻¹ v`, the capacitors' `i / C` (or their loop multiplier), the
    /// oscillators and the slopes of piecewise-linear inputs.
    pub(super) fn derivatives(&self, cc: &Compiled, topo: &Topology) -> DMatrix<f64> {
        let (nz, ncol, nx) = (self.cols.nz, self.cols.total, cc.n_x);
        let mut d = DMatrix::<f64>::zeros(nz, ncol);
        for grp in &cc.groups {
            let vs: Vec<DVector<f64>> = grp
                .states
                .iter()
                .map(|&s| {
                    let br = cc
                        .branches
                        .iter()
                        .find(|b| matches!(b.kind, BranchKind::Winding { state } if state == s))
                        .expect("winding");
                    self.vrow(br.a) - self.vrow(br.b)
                })
                .collect();
            for (i, &s) in grp.states.iter().enumerate() {
                let mut row = DVector::zeros(ncol);
                for (j, v) in vs.iter().enumerate() {
                    row += v * grp.l_inv[(i, j)];
                }
                d.set_row(s, &row.transpose());
            }
        }
        for (bi, b) in cc.branches.iter().enumerate() {
            if let BranchKind::Capacitor { state, c } = b.kind {
                if let Some(li) = topo.loop_of(bi) {
                    d[(state, self.cols.loop_column(topo, li))] = 1.0 / c;
                } else {
                    let row = self.y.row(self.unknowns.current[bi]) / c;
                    d.set_row(state, &row);
                }
            }
        }
        for &(s, co, w) in &cc.oscillators {
            d[(s, co)] = w;
            d[(co, s)] = -w;
        }
        for (k, slope) in cc.slopes.iter().enumerate() {
            if let Some(s) = *slope {
                d[(nx + k, s)] = 1.0;
            }
        }
        d
    }
}

impl Unknowns {
    /// Numbers the unknowns of pattern `on`.
    fn number(cc: &Compiled, on: Conduction, topo: &Topology) -> Unknowns {
        let nn = cc.nodes.len();
        let mut current = vec![usize::MAX; cc.branches.len()];
        let mut count = nn - 1;
        for (bi, b) in cc.branches.iter().enumerate() {
            let needs = match &b.kind {
                BranchKind::VSource { .. } | BranchKind::Transformer { .. } => true,
                BranchKind::Capacitor { .. } => topo.loop_of(bi).is_none(),
                BranchKind::Switch { sw } => {
                    (on.sw_on(*sw) && cc.switches[*sw].r_on == 0.0) || on.ramp_v(*sw)
                }
                BranchKind::Diode { d } => on.d_on(*d),
                _ => false,
            };
            if needs {
                current[bi] = count;
                count += 1;
            }
        }
        let mut gauge = vec![usize::MAX; topo.floating.len()];
        for &c in topo.cut.iter().chain(topo.free.iter()) {
            gauge[c] = count;
            count += 1;
        }
        Unknowns {
            current,
            gauge,
            count,
        }
    }
}

/// The row of node `n`'s voltage among the unknowns (ground has none).
fn nidx(n: usize) -> Option<usize> {
    if n == 0 {
        None
    } else {
        Some(n - 1)
    }
}

/// A conductance `cond` between nodes a and b.
fn stamp_g(g: &mut DMatrix<f64>, a: usize, b: usize, cond: f64) {
    if let Some(i) = nidx(a) {
        g[(i, i)] += cond;
    }
    if let Some(j) = nidx(b) {
        g[(j, j)] += cond;
    }
    if let (Some(i), Some(j)) = (nidx(a), nidx(b)) {
        g[(i, j)] -= cond;
        g[(j, i)] -= cond;
    }
}

/// Current `k` (an unknown) leaves node a, enters node b, with factor f.
fn stamp_cur(g: &mut DMatrix<f64>, a: usize, b: usize, k: usize, f: f64) {
    if let Some(i) = nidx(a) {
        g[(i, k)] += f;
    }
    if let Some(j) = nidx(b) {
        g[(j, k)] -= f;
    }
}

/// Branch row k: v_a − v_b (times f) on the left. (Row r of the branch
/// equation of unknown k is k itself.)
fn stamp_v(g: &mut DMatrix<f64>, k: usize, a: usize, b: usize, f: f64) {
    if let Some(i) = nidx(a) {
        g[(k, i)] += f;
    }
    if let Some(j) = nidx(b) {
        g[(k, j)] -= f;
    }
}

/// Known current (a column combination) leaving a, entering b.
fn inject(rhs: &mut DMatrix<f64>, a: usize, b: usize, col: usize, f: f64) {
    if let Some(i) = nidx(a) {
        rhs[(i, col)] -= f;
    }
    if let Some(j) = nidx(b) {
        rhs[(j, col)] += f;
    }
}

/// A zero-volt-or-source branch whose current is unknown `k`: its current
/// in Kirchhoff's current law and its voltage in its own row.
fn stamp_voltage_branch(g: &mut DMatrix<f64>, a: usize, b: usize, k: usize) {
    stamp_cur(g, a, b, k, 1.0);
    stamp_v(g, k, a, b, 1.0);
}

/// The network matrix G and right-hand side (one column per entry of
/// `[z; λ; free]`) of pattern `on`.
fn stamp(
    cc: &Compiled,
    on: Conduction,
    topo: &Topology,
    unk: &Unknowns,
    cols: Columns,
) -> (DMatrix<f64>, DMatrix<f64>) {
    let one = cc.n_x; // z index of the constant input 1
    let cur_of = &unk.current;
    let mut g = DMatrix::<f64>::zeros(unk.count, unk.count);
    let mut rhs = DMatrix::<f64>::zeros(unk.count, cols.total);
    for (bi, b) in cc.branches.iter().enumerate() {
        let (a, bn) = (b.a, b.b);
        match &b.kind {
            BranchKind::Resistor { g: cond } => stamp_g(&mut g, a, bn, *cond),
            BranchKind::Winding { state } => inject(&mut rhs, a, bn, *state, 1.0),
            BranchKind::ISource { src } => {
                for &(col, f) in &cc.sources[*src].terms {
                    inject(&mut rhs, a, bn, col, f);
                }
            }
            BranchKind::Capacitor { state, .. } => {
                if let Some(li) = topo.loop_of(bi) {
                    inject(&mut rhs, a, bn, cols.loop_column(topo, li), 1.0);
                } else {
                    let k = cur_of[bi];
                    stamp_voltage_branch(&mut g, a, bn, k);
                    rhs[(k, *state)] = 1.0;
                }
            }
            BranchKind::VSource { src } => {
                let k = cur_of[bi];
                stamp_voltage_branch(&mut g, a, bn, k);
                for &(col, f) in &cc.sources[*src].terms {
                    rhs[(k, col)] += f;
                }
            }
            BranchKind::Switch { sw } => {
                let ramp = cc.switches[*sw].transition.as_ref();
                if on.ramp_v(*sw) {
                    let k = cur_of[bi];
                    stamp_voltage_branch(&mut g, a, bn, k);
                    rhs[(k, ramp.expect("a ramp has a model").value)] += 1.0;
                } else if on.ramp_i(*sw) {
                    let col = ramp.expect("a ramp has a model").value;
                    inject(&mut rhs, a, bn, col, 1.0);
                } else if on.sw_on(*sw) {
                    let r = cc.switches[*sw].r_on;
                    if r > 0.0 {
                        stamp_g(&mut g, a, bn, 1.0 / r);
                    } else {
                        stamp_voltage_branch(&mut g, a, bn, cur_of[bi]);
                    }
                }
            }
            BranchKind::Diode { d } => {
                if on.d_on(*d) {
                    let k = cur_of[bi];
                    let di = &cc.diodes[*d];
                    stamp_voltage_branch(&mut g, a, bn, k);
                    g[(k, k)] -= di.r_on;
                    rhs[(k, one)] += di.vf;
                }
            }
            BranchKind::Transformer { n, sec } => {
                let k = cur_of[bi];
                stamp_cur(&mut g, a, bn, k, 1.0);
                stamp_cur(&mut g, sec.0, sec.1, k, -n);
                stamp_v(&mut g, k, a, bn, 1.0);
                stamp_v(&mut g, k, sec.0, sec.1, -n);
            }
        }
    }
    // Gauges: a zero-ohm branch from each floating group's lowest node to
    // ground whose voltage is the group's multiplier (cutsets) or free
    // column (free groups).
    let gauges = topo.cut.iter().zip(cols.nz..);
    let free = topo.free.iter().zip(cols.nz + cols.n_lam..);
    for (&c, col) in gauges.chain(free) {
        let k = unk.gauge[c];
        let r = topo.rep(c);
        stamp_cur(&mut g, r, 0, k, 1.0);
        stamp_v(&mut g, k, r, 0, 1.0);
        rhs[(k, col)] = 1.0;
    }
    (g, rhs)
}

/// Solves `g·y = rhs` (`ncol` columns; the first `nv` unknowns are node
/// voltages, the others branch currents). Singular or not is judged on the
/// equilibrated matrix: the raw one mixes conductances (1/R) with the unit
/// entries of voltage branches, so an impedance scale far from 1 Ω (a
/// 0.1 µΩ load, or a whole circuit with R·k, L·k, C/k) would make the
/// pivot ratio fall below any fixed threshold although the network is
/// regular.
///
/// Equilibration by largest entries alone can leave a weak tie beside a
/// unit entry: a source whose island reaches ground only through 1 MΩ,
/// scaled by k = 1e9, has 1e-15 S in the row and column of the source's
/// unit entries, and no row or column factor lifts it (each already has
/// its largest entry at 1). Where the first test finds the matrix
/// singular, the branch-current unknowns and their equations are first
/// put in the units of the network's own conductances (their geometric
/// mean, a power of two), which makes the matrix the same at every
/// impedance scale, and the test is taken again there.
fn solve_equilibrated(
    g: &DMatrix<f64>,
    rhs: &DMatrix<f64>,
    ncol: usize,
    nv: usize,
) -> Result<DMatrix<f64>, NoSolution> {
    let n_unk = g.nrows();
    if n_unk == 0 {
        return Ok(DMatrix::zeros(0, ncol));
    }
    let (dr, dc) = equilibration(g);
    // One factorization of the equilibrated matrix serves the singularity
    // test and, where it is used, the solve.
    let lu = scaled(g, &dr, &dc).full_piv_lu();
    if singular_lu(&lu) {
        let (dr, dc) = in_conductance_units(g, nv).ok_or(SINGULAR)?;
        let lu = scaled(g, &dr, &dc).full_piv_lu();
        if singular_lu(&lu) {
            return Err(SINGULAR);
        }
        return Ok(solve_scaled(&lu, rhs, &dr, &dc));
    }
    // The equilibrated system is solved where the raw matrix spans more
    // than 2^20 in its entries' magnitudes (there the raw LU loses about as
    // many digits as that spread); an ordinary circuit keeps the raw solve
    // and its bits.
    Ok(if spread(g) > 1048576.0 {
        solve_scaled(&lu, rhs, &dr, &dc)
    } else {
        g.clone()
            .full_piv_lu()
            .solve(rhs)
            .expect("checked invertible")
    })
}

const SINGULAR: NoSolution = NoSolution("the network equations are singular");

/// diag(dr)·g·diag(dc).
fn scaled(g: &DMatrix<f64>, dr: &[f64], dc: &[f64]) -> DMatrix<f64> {
    let mut ge = g.clone();
    for (i, mut row) in ge.row_iter_mut().enumerate() {
        row *= dr[i];
    }
    for (j, mut col) in ge.column_iter_mut().enumerate() {
        col *= dc[j];
    }
    ge
}

/// y from the factors `lu` of diag(dr)·g·diag(dc): y = diag(dc)·(LU)⁻¹·
/// diag(dr)·rhs.
fn solve_scaled(
    lu: &FullPivLU<f64, Dyn, Dyn>,
    rhs: &DMatrix<f64>,
    dr: &[f64],
    dc: &[f64],
) -> DMatrix<f64> {
    let mut r = rhs.clone();
    for (i, mut row) in r.row_iter_mut().enumerate() {
        row *= dr[i];
    }
    let mut y = lu.solve(&r).expect("checked invertible");
    for (j, mut row) in y.row_iter_mut().enumerate() {
        row *= dc[j];
    }
    y
}

/// Row and column factors that first multiply the branch-current unknowns
/// (columns from `nv` on) and their equations (rows from `nv` on) by the
/// geometric mean of the node block's non-zero conductances (a power of
/// two), then equilibrate (see [`equilibration`]); `None` without a
/// conductance.
fn in_conductance_units(g: &DMatrix<f64>, nv: usize) -> Option<(Vec<f64>, Vec<f64>)> {
    let n = g.nrows();
    let (mut sum, mut count) = (0.0, 0u32);
    for j in 0..nv.min(n) {
        for i in 0..nv.min(n) {
            let v = g[(i, j)].abs();
            if v > 0.0 && v.is_finite() {
                sum += v.log2();
                count += 1;
            }
        }
    }
    if count == 0 {
        return None;
    }
    let f = 2f64.powi((sum / f64::from(count)).round() as i32);
    let pre: Vec<f64> = (0..n).map(|i| if i < nv { 1.0 } else { f }).collect();
    let (dr, dc) = equilibration(&scaled(g, &pre, &pre));
    Some((
        dr.iter().zip(&pre).map(|(a, b)| a * b).collect(),
        dc.iter().zip(&pre).map(|(a, b)| a * b).collect(),
    ))
}

/// Whether the square network matrix `g` (equilibrated, see
/// [`equilibration`]) is numerically singular (see [`singular_lu`]).
#[cfg(test)]
fn singular(g: &DMatrix<f64>) -> bool {
    singular_lu(&g.clone().full_piv_lu())
}

/// Whether the matrix factored as `lu` is numerically singular: its
/// smallest LU pivot below 1e-13 of its largest. NaN entries count as
/// singular.
fn singular_lu(lu: &FullPivLU<f64, Dyn, Dyn>) -> bool {
    let u = lu.u();
    let diag = (0..u.nrows().min(u.ncols())).map(|i| u[(i, i)].abs());
    let pmax = diag.clone().fold(0.0, f64::max);
    let pmin = diag.fold(f64::INFINITY, f64::min);
    // NaN pivots count as singular too, hence the negated comparison.
    pmin.is_nan() || pmin.partial_cmp(&(1e-13 * pmax)) != Some(std::cmp::Ordering::Greater)
}

/// Ratio of the largest to the smallest non-zero magnitude in `g` (1 for
/// a matrix without non-zero entries).
fn spread(g: &DMatrix<f64>) -> f64 {
    let (lo, hi) = g
        .iter()
        .map(|v| v.abs())
        .filter(|&v| v > 0.0)
        .fold((f64::INFINITY, 0.0f64), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if hi > 0.0 {
        hi / lo
    } else {
        1.0
    }
}

/// Row and column factors (powers of two, so scaling is exact) that bring
/// every row and column of `g` to a largest entry near 1 (D. Ruiz, "A
/// scaling algorithm to equilibrate both rows and columns norms in
/// matrices", RAL-TR-2001-034, 2001). Scaling every resistance by k
/// scales the conductance block by 1/k, which these factors undo, so the
/// circuit's impedance scale drops out of the singularity test and of the
/// solve.
#[allow(clippy::needless_range_loop)] // rows and columns of `a` by index, as the method reads
pub(super) fn equilibration(g: &DMatrix<f64>) -> (Vec<f64>, Vec<f64>) {
    let (n, m) = g.shape();
    let mut a = g.clone();
    let (mut dr, mut dc) = (vec![1.0; n], vec![1.0; m]);
    for _ in 0..40 {
        let mut moved = false;
        for i in 0..n {
            let r = a.row(i).amax();
            if r > 0.0 && r.is_finite() {
                let f = pow2_near(1.0 / r.sqrt());
                if f != 1.0 {
                    a.row_mut(i).scale_mut(f);
                    dr[i] *= f;
                    moved = true;
                }
            }
        }
        for j in 0..m {
            let c = a.column(j).amax();
            if c > 0.0 && c.is_finite() {
                let f = pow2_near(1.0 / c.sqrt());
                if f != 1.0 {
                    a.column_mut(j).scale_mut(f);
                    dc[j] *= f;
                    moved = true;
                }
            }
        }
        if !moved {
            break;
        }
    }
    (dr, dc)
}

/// The power of two nearest to `x` (> 0) in the logarithm, so scaling by it
/// is exact; 1 for values within a factor √2 of 1.
fn pow2_near(x: f64) -> f64 {
    let e = x.log2().round();
    if e == 0.0 {
        1.0
    } else {
        2f64.powi(e as i32)
    }
}

#[cfg(test)]
mod tests {
    use nalgebra::DMatrix;

    use super::{equilibration, pow2_near, singular};
    use crate::mode::testing::{buck, built, near, source_column, state, BUCK};

    /// The buck's state equations by hand (common practice: Kirchhoff's
    /// laws on the LC filter with its load): with the switch on,
    /// L di/dt = u − v (u: the input column the source follows); with the
    /// diode freewheeling, L di/dt = −v; in both, C dv/dt = i − v/R. Every
    /// other entry of the state rows is zero.
    #[test]
    fn buck_modes_give_the_hand_derived_state_equations() {
        let (_, l, c, r) = BUCK;
        for (switches, diodes, drive) in [(1, 0, 1.0), (0, 1, 0.0)] {
            let (cc, mode) = built(&buck(), switches, diodes);
            assert!(mode.problem.is_none());
            let (i, v) = (state(&cc, "L1.current"), state(&cc, "C1.voltage"));
            let u = source_column(&cc, "Vin");
            let mut want = DMatrix::<f64>::zeros(cc.n_z(), cc.n_z());
            want[(i, v)] = -1.0 / l;
            want[(i, u)] = drive / l;
            want[(v, i)] = 1.0 / c;
            want[(v, v)] = -1.0 / (r * c);
            for row in [i, v] {
                for col in 0..cc.n_z() {
                    let (got, exp) = (mode.m[(row, col)], want[(row, col)]);
                    assert!(
                        near(got, exp, 1.0 / l),
                        "mode {switches}/{diodes}: M[{row},{col}] = {got}, want {exp}"
                    );
                }
            }
            // No constraint: no jump.
            assert!(mode.constraints.is_empty());
            assert_eq!(mode.p, DMatrix::identity(cc.n_z(), cc.n_z()));
        }
    }

    /// The output at the switch node reads the source with the switch
    /// closed and zero with the diode conducting (ideal parts, common
    /// practice).
    #[test]
    fn buck_switch_node_output() {
        for (switches, diodes, want) in [(1, 0, 1.0), (0, 1, 0.0)] {
            let (cc, mode) = built(&buck(), switches, diodes);
            let sw = cc.output_index("sw").expect("node output");
            let u = source_column(&cc, "Vin");
            for col in 0..cc.n_z() {
                let exp = if col == u { want } else { 0.0 };
                assert!(near(mode.c[(sw, col)], exp, 1.0), "C[sw,{col}]");
            }
            assert!(!mode.undetermined[sw]);
            assert_eq!(mode.ct, mode.c.transpose());
        }
    }

    /// The rectifier's network with every diode off (the source floats on
    /// 0.5 Ω and two 1 MΩ ties to ground, the filter capacitor on 20 Ω), as
    /// stamped at impedance ×1 and ×1e9: the largest-entry equilibration
    /// leaves the 1e-15 S tie beside the source's unit entries and judged
    /// the ×1e9 matrix singular, which stopped the run at t = 0 with a
    /// false short. In the network's own conductance units both are
    /// regular, and the solutions scale exactly as the physics says:
    /// node voltages equal, branch currents ×1e-9 (Ohm's law; common
    /// practice), to 1e-9, and the source node at the divider's value
    /// (1 MΩ + 0.5 Ω)/(2 MΩ + 0.5 Ω) of the 1 V source. Both solves are
    /// within 5e-11 of it, the rounding of the weak tie's 1e-6 pivot.
    #[test]
    fn a_weak_tie_beside_a_source_is_regular_at_every_impedance_scale() {
        #[rustfmt::skip]
        let network = |k: f64| {
            let (gs, gt, gl) = (2.0 / k, 1e-6 / k, 0.05 / k);
            DMatrix::from_row_slice(6, 6, &[
                gs,  0.0, -gs,     0.0, 1.0,  0.0,
                0.0, gt,  0.0,     0.0, -1.0, 0.0,
                -gs, 0.0, gs + gt, 0.0, 0.0,  0.0,
                0.0, 0.0, 0.0,     gl,  0.0,  1.0,
                1.0, -1.0, 0.0,    0.0, 0.0,  0.0,
                0.0, 0.0, 0.0,     1.0, 0.0,  0.0,
            ])
        };
        let rhs = DMatrix::from_row_slice(
            6,
            2,
            &[0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 1.0],
        );
        let one = super::solve_equilibrated(&network(1.0), &rhs, 2, 4)
            .ok()
            .expect("regular");
        let (dr, dc) = equilibration(&network(1e9));
        let mut ge = network(1e9);
        for i in 0..6 {
            for j in 0..6 {
                ge[(i, j)] *= dr[i] * dc[j];
            }
        }
        assert!(singular(&ge), "the first test alone");
        let big = super::solve_equilibrated(&network(1e9), &rhs, 2, 4)
            .ok()
            .expect("regular");
        for i in 0..6 {
            // Rows 0..4 are node voltages, 4.. branch currents.
            let f = if i < 4 { 1.0 } else { 1e-9 };
            for j in 0..2 {
                let (a, b) = (one[(i, j)] * f, big[(i, j)]);
                assert!(
                    (a - b).abs() <= 1e-9 * a.abs().max(f),
                    "({i}, {j}): {a} vs {b}"
                );
            }
        }
        let divider = (1e6 + 0.5) / (2e6 + 0.5);
        for y in [&one, &big] {
            assert!(
                (y[(0, 0)] - divider).abs() <= 1e-10 * divider,
                "{}",
                y[(0, 0)]
            );
        }
    }

    /// Equilibration scales by powers of two only, and a diagonal network
    /// of 1e-14 S beside a unit entry, singular by the raw pivot ratio, is
    /// judged regular once equilibrated (from memory: a diagonal matrix
    /// with non-zero entries is regular whatever its scale).
    #[test]
    fn equilibration_is_exact_and_removes_the_impedance_scale() {
        assert_eq!(pow2_near(1.0), 1.0);
        assert_eq!(pow2_near(3.0), 4.0);
        assert_eq!(pow2_near(0.3), 0.25);
        let g = DMatrix::from_row_slice(2, 2, &[1e-14, 0.0, 0.0, 1.0]);
        assert!(singular(&g));
        let (dr, dc) = equilibration(&g);
        for f in dr.iter().chain(&dc) {
            assert_eq!(f.log2().fract(), 0.0, "{f} is not a power of two");
        }
        let mut ge = g.clone();
        for i in 0..2 {
            for j in 0..2 {
                ge[(i, j)] *= dr[i] * dc[j];
            }
        }
        assert!(!singular(&ge));
        assert!(singular(&DMatrix::from_row_slice(
            2,
            2,
            &[1.0, 2.0, 2.0, 4.0]
        )));
    }
}
