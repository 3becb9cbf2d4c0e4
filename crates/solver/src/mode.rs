//! Mode: one conduction pattern of all switches and diodes, turned into the
//! exact linear system `z' = M z`, the outputs `y = C z`, the diode guards
//! and the jump map that enforces conservation of charge and flux linkage.
//!
//! Method (modified nodal analysis with constraint multipliers):
//! capacitors act as voltage sources of their voltage and windings as
//! current sources of their current; the resistive network that remains is
//! solved for every node voltage and every voltage-branch current as a
//! linear function of `z`. Two structures make that network singular and are
//! handled on purpose, as in the normal-tree formulation of L. O. Chua &
//! P.-M. Lin, *Computer-Aided Analysis of Electronic Circuits* (1975):
//!
//! - **Inductor cutsets.** A group of nodes with no resistive or voltage path
//!   to ground but reached by windings (the switch node of a buck in its idle
//!   interval, the secondary of a flyback while its diode blocks) gets a
//!   *gauge*: a zero-ohm branch to ground whose voltage λ is a multiplier.
//!   Kirchhoff's current law on the group (the gauge current) is a constraint
//!   on the winding currents; λ is chosen so that the constraint's time
//!   derivative is zero. For a lone inductor with zero current this gives
//!   v_L = 0 (the switch node follows the output); for coupled windings it
//!   gives the reflected voltage.
//! - **Capacitor loops.** A capacitor that closes a loop of capacitors and
//!   voltage sources is replaced by an injected current ψ (a multiplier);
//!   its voltage must stay equal to the loop's, which fixes ψ.
//!
//! If the state violates a constraint when the mode is entered, the jump
//! `z⁺ = (I − D_λ S⁻¹ H) z⁻` is the impulsive multiplier that restores it:
//! charge is conserved across a capacitor loop and flux linkage across an
//! inductor cutset. Groups of nodes reached by nothing that fixes their
//! potential (the source side of a diode bridge with all diodes blocking)
//! get a free gauge; outputs that depend on it read as undetermined.

use nalgebra::{DMatrix, DVector};

use crate::compile::{BranchKind, Compiled, OutputDef};
use crate::error::SolverError;

/// A conduction pattern: bit i of `switches` is switch i on, bit j of
/// `diodes` is diode j conducting, bits 2i and 2i + 1 of `ramps` switch i
/// in a voltage or current ramp of its transition model.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct ModeKey {
    /// Bit i set: switch i is on.
    pub switches: u64,
    /// Bit j set: diode j conducts.
    pub diodes: u64,
    /// Bit 2i set: switch i is a voltage ramp (a source of the voltage at
    /// its transition input); bit 2i + 1: a current ramp. Either overrides
    /// its bit in `switches`. Zero for a switch without a transition model.
    pub ramps: u64,
}

/// The ramp bit of switch `i` in [`ModeKey::ramps`]: voltage or current.
#[inline(always)]
pub(crate) fn ramp_bit(i: usize, voltage: bool) -> u64 {
    1 << (2 * i + usize::from(!voltage))
}

/// What a guard watches.
#[derive(Clone, Debug, PartialEq)]
#[allow(clippy::enum_variant_names)] // every guard watches a diode; the prefix is the point
pub(crate) enum GuardKind {
    /// A conducting diode's current must stay ≥ 0.
    DiodeCurrent(usize),
    /// A blocking diode's voltage must stay ≤ Vf (guard = Vf − v ≥ 0).
    DiodeVoltage(usize),
    /// Two blocking diodes in a loop through floating nodes: the loop
    /// voltage must stay below their forward voltages.
    DiodePair(usize, usize),
    /// Comparator `ci` of a closed-loop gate; true for its turn-off guard;
    /// then true if it compares a current (else a voltage), which sets
    /// the unit of its zero floor.
    Comparator(usize, bool, bool),
}

/// A linear function of `z` that must stay ≥ 0 while the mode holds.
#[derive(Clone, Debug)]
pub(crate) struct Guard {
    pub kind: GuardKind,
    pub row: Vec<f64>,
    /// The guard's time derivative as a row: `row·M`.
    pub drow: Vec<f64>,
}

/// What a multiplier constraint is about.
#[derive(Clone, Debug)]
pub(crate) enum ConstraintKind {
    /// Kirchhoff's current law on a floating group reached by windings.
    Cutset {
        windings: Vec<usize>,
        #[allow(dead_code)] // the node is named in future diagnostics
        node: usize,
    },
    /// A capacitor voltage tied to a loop of capacitors and sources.
    Loop { caps: Vec<usize> },
}

/// A problem that makes the mode impossible to enter (reported only if no
/// other pattern is consistent).
#[derive(Clone, Debug)]
pub(crate) enum ModeProblem {
    Short {
        switches: Vec<String>,
        shorted: Vec<String>,
    },
    Unsupported(String),
}

/// A compiled mode.
#[derive(Clone, Debug)]
pub(crate) struct Mode {
    pub key: ModeKey,
    pub problem: Option<ModeProblem>,
    /// z' = M z.
    pub m: DMatrix<f64>,
    /// Rows of M that may be non-zero: all rows at or after `live` are zero
    /// (the slopes of piecewise-linear inputs are constant), so products
    /// with M skip them.
    pub live: usize,
    /// Outputs y = C z, one row per compiled output.
    pub c: DMatrix<f64>,
    /// Cᵀ: each output's row contiguous (a switch's current and voltage
    /// are read at each of its hard edges, `run/transition.rs`).
    pub ct: DMatrix<f64>,
    /// Output rows that depend on a free gauge.
    pub undetermined: Vec<bool>,
    pub guards: Vec<Guard>,
    /// Constraint rows H (restricted to z) as columns (Hᵀ, so that each
    /// row is contiguous), and their kinds.
    pub ht: DMatrix<f64>,
    pub constraints: Vec<ConstraintKind>,
    /// Jump map z⁺ = P z⁻ restoring the constraints.
    pub p: DMatrix<f64>,
    /// Gauge currents of free groups (must be zero): row, node, current sources.
    pub free_checks: Vec<(Vec<f64>, usize, Vec<String>)>,
    /// Rate bound (1/s) of the fastest dynamics, for sub-step sizes.
    pub rate: f64,
    /// A loop of closed switches and conducting diodes, some with
    /// resistance, across a voltage source or a capacitor: (devices,
    /// shorted element). Zero-resistance shorts are a `problem` instead.
    pub resistive_short: Option<(Vec<String>, Vec<String>)>,
    /// Guards of closed-loop gates, per comparator: [while on, while off].
    pub cmp_guards: Vec<[Option<Guard>; 2]>,
}

struct Dsu(Vec<usize>);
impl Dsu {
    fn new(n: usize) -> Self {
        Dsu((0..n).collect())
    }
    fn find(&mut self, i: usize) -> usize {
        let mut r = i;
        while self.0[r] != r {
            r = self.0[r];
        }
        let mut k = i;
        while self.0[k] != r {
            let nx = self.0[k];
            self.0[k] = r;
            k = nx;
        }
        r
    }
    fn union(&mut self, a: usize, b: usize) -> bool {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra == rb {
            return false;
        }
        self.0[ra.max(rb)] = ra.min(rb);
        true
    }
}

/// Path of branch indices between nodes `a` and `b` in a forest given as edges.
fn forest_path(edges: &[(usize, usize, usize)], a: usize, b: usize, n_nodes: usize) -> Vec<usize> {
    let mut prev: Vec<Option<(usize, usize)>> = vec![None; n_nodes];
    let mut seen = vec![false; n_nodes];
    let mut queue = std::collections::VecDeque::from([a]);
    seen[a] = true;
    while let Some(n) = queue.pop_front() {
        if n == b {
            break;
        }
        for &(x, y, br) in edges {
            let other = if x == n {
                y
            } else if y == n {
                x
            } else {
                continue;
            };
            if !seen[other] {
                seen[other] = true;
                prev[other] = Some((n, br));
                queue.push_back(other);
            }
        }
    }
    let mut path = vec![];
    let mut cur = b;
    while let Some((p, br)) = prev[cur] {
        path.push(br);
        cur = p;
    }
    path
}

impl Mode {
    /// Derives the mode's matrices. Structural problems (a short, parallel
    /// ideal switches) are recorded in `problem`, not returned as errors,
    /// so that the diode pattern search can try other patterns.
    pub(crate) fn build(cc: &Compiled, key: ModeKey) -> Result<Mode, SolverError> {
        let nn = cc.nodes.len();
        let nz = cc.n_z();
        let nx = cc.n_x;
        let one = nx; // z index of the constant input 1
        let ramp_v = |i: usize| key.ramps & ramp_bit(i, true) != 0;
        let ramp_i = |i: usize| key.ramps & ramp_bit(i, false) != 0;
        // Closed (a short or its on-resistance): on and in no ramp.
        let sw_on = |i: usize| key.switches >> i & 1 == 1 && key.ramps >> (2 * i) & 3 == 0;
        let d_on = |i: usize| key.diodes >> i & 1 == 1;
        let present_voltage = |k: &BranchKind| -> bool {
            match k {
                BranchKind::Resistor { .. }
                | BranchKind::VSource { .. }
                | BranchKind::Capacitor { .. } => true,
                BranchKind::Transformer { .. } => true,
                BranchKind::Switch { sw } => sw_on(*sw) || ramp_v(*sw),
                BranchKind::Diode { d } => d_on(*d),
                BranchKind::Winding { .. } | BranchKind::ISource { .. } => false,
            }
        };
        let mut problem: Option<ModeProblem> = None;

        // 1. Groups of nodes held together by resistive or voltage branches.
        let mut dsu = Dsu::new(nn);
        for b in &cc.branches {
            if present_voltage(&b.kind) {
                dsu.union(b.a, b.b);
                if let BranchKind::Transformer { sec, .. } = b.kind {
                    dsu.union(sec.0, sec.1);
                }
            }
        }
        let ground_root = dsu.find(0);
        let mut comps: Vec<usize> = vec![]; // root of each floating group
        let mut comp_of = vec![usize::MAX; nn];
        #[allow(clippy::needless_range_loop)] // n is a node number, not just an index
        for n in 1..nn {
            let r = dsu.find(n);
            if r != ground_root {
                let ci = match comps.iter().position(|&x| x == r) {
                    Some(i) => i,
                    None => {
                        comps.push(r);
                        comps.len() - 1
                    }
                };
                comp_of[n] = ci;
            }
        }
        // Classify floating groups: reached by a winding → cutset multiplier.
        let mut comp_windings: Vec<Vec<usize>> = vec![vec![]; comps.len()];
        let mut comp_sources: Vec<Vec<String>> = vec![vec![]; comps.len()];
        for (bi, b) in cc.branches.iter().enumerate() {
            let ca = comp_of[b.a];
            let cb = comp_of[b.b];
            if ca == cb {
                continue;
            }
            for c in [ca, cb] {
                if c == usize::MAX {
                    continue;
                }
                match b.kind {
                    BranchKind::Winding { .. } => comp_windings[c].push(bi),
                    BranchKind::ISource { .. } => comp_sources[c].push(b.name.clone()),
                    BranchKind::Switch { sw } if ramp_i(sw) => comp_sources[c].push(b.name.clone()),
                    _ => {}
                }
            }
        }
        let rep = |c: usize| {
            (1..nn)
                .find(|&n| comp_of[n] == c)
                .expect("a group has a node")
        };

        // 2. Loops of zero-resistance voltage branches; capacitors last.
        let mut dsu2 = Dsu::new(nn);
        let mut forest: Vec<(usize, usize, usize)> = vec![];
        let mut loop_caps: Vec<(usize, Vec<usize>)> = vec![]; // (cap branch, other caps in loop)
        let zero_r = |k: &BranchKind| -> Option<u8> {
            match k {
                BranchKind::VSource { .. } => Some(0),
                BranchKind::Switch { sw } if ramp_v(*sw) => Some(0),
                BranchKind::Switch { sw } if sw_on(*sw) && cc.switches[*sw].r_on == 0.0 => Some(1),
                BranchKind::Diode { d } if d_on(*d) && cc.diodes[*d].r_on == 0.0 => Some(1),
                BranchKind::Capacitor { .. } => Some(2),
                _ => None,
            }
        };
        for pass in 0..3u8 {
            for (bi, b) in cc.branches.iter().enumerate() {
                if zero_r(&b.kind) != Some(pass) {
                    continue;
                }
                if dsu2.union(b.a, b.b) {
                    forest.push((b.a, b.b, bi));
                    continue;
                }
                let path = forest_path(&forest, b.a, b.b, nn);
                let caps: Vec<usize> = path
                    .iter()
                    .copied()
                    .filter(|&p| matches!(cc.branches[p].kind, BranchKind::Capacitor { .. }))
                    .collect();
                let has_source = path
                    .iter()
                    .any(|&p| matches!(cc.branches[p].kind, BranchKind::VSource { .. }))
                    || matches!(b.kind, BranchKind::VSource { .. });
                let is_cap = matches!(b.kind, BranchKind::Capacitor { .. });
                if is_cap && (!caps.is_empty() || has_source) {
                    loop_caps.push((bi, caps));
                } else if problem.is_none() {
                    let mut all = path.clone();
                    all.push(bi);
                    let switches: Vec<String> = all
                        .iter()
                        .filter(|&&p| {
                            matches!(
                                cc.branches[p].kind,
                                BranchKind::Switch { .. } | BranchKind::Diode { .. }
                            )
                        })
                        .map(|&p| cc.branches[p].name.clone())
                        .collect();
                    let shorted: Vec<String> = all
                        .iter()
                        .filter(|&&p| {
                            matches!(
                                cc.branches[p].kind,
                                BranchKind::VSource { .. } | BranchKind::Capacitor { .. }
                            )
                        })
                        .map(|&p| cc.branches[p].name.clone())
                        .collect();
                    problem = Some(if shorted.is_empty() {
                        ModeProblem::Unsupported(format!(
                            "{} conduct in parallel with zero resistance, so their current split is undetermined; give one an on-resistance",
                            switches.join(", ")
                        ))
                    } else {
                        ModeProblem::Short { switches, shorted }
                    });
                }
            }
        }
        let is_loop_cap = |bi: usize| loop_caps.iter().any(|(c, _)| *c == bi);

        // Shoot-through through resistive devices: closed switches and
        // conducting diodes (any resistance) joining both terminals of a
        // voltage source, or of a capacitor through two or more devices (one
        // device across a capacitor is that device's own capacitance or
        // snubber being discharged, not a shorted leg).
        let mut resistive_short = None;
        if problem.is_none() {
            let mut dsu3 = Dsu::new(nn);
            let mut devices: Vec<(usize, usize, usize)> = vec![];
            for (bi, b) in cc.branches.iter().enumerate() {
                let on = match &b.kind {
                    BranchKind::Switch { sw } => sw_on(*sw),
                    BranchKind::Diode { d } => d_on(*d),
                    _ => false,
                };
                if on && dsu3.union(b.a, b.b) {
                    devices.push((b.a, b.b, bi));
                }
            }
            for b in &cc.branches {
                let min_devices = match b.kind {
                    BranchKind::VSource { .. } => 1,
                    BranchKind::Capacitor { .. } => 2,
                    _ => continue,
                };
                if b.a != b.b && dsu3.find(b.a) == dsu3.find(b.b) {
                    let path = forest_path(&devices, b.a, b.b, nn);
                    if path.len() >= min_devices {
                        let names = path.iter().map(|&p| cc.branches[p].name.clone()).collect();
                        resistive_short = Some((names, vec![b.name.clone()]));
                        break;
                    }
                }
            }
        }

        // 3. Unknowns: node voltages 1..nn, then voltage-branch currents, then gauge currents.
        let mut cur_of = vec![usize::MAX; cc.branches.len()];
        let mut n_unk = nn - 1;
        for (bi, b) in cc.branches.iter().enumerate() {
            let needs = match &b.kind {
                BranchKind::VSource { .. } | BranchKind::Transformer { .. } => true,
                BranchKind::Capacitor { .. } => !is_loop_cap(bi),
                BranchKind::Switch { sw } => {
                    (sw_on(*sw) && cc.switches[*sw].r_on == 0.0) || ramp_v(*sw)
                }
                BranchKind::Diode { d } => d_on(*d),
                _ => false,
            };
            if needs {
                cur_of[bi] = n_unk;
                n_unk += 1;
            }
        }
        let cut_comps: Vec<usize> = (0..comps.len())
            .filter(|&c| !comp_windings[c].is_empty())
            .collect();
        let free_comps: Vec<usize> = (0..comps.len())
            .filter(|&c| comp_windings[c].is_empty())
            .collect();
        let n_lam = cut_comps.len() + loop_caps.len();
        let n_free = free_comps.len();
        let ncol = nz + n_lam + n_free;
        let mut gauge_unk = vec![usize::MAX; comps.len()];
        for &c in cut_comps.iter().chain(free_comps.iter()) {
            gauge_unk[c] = n_unk;
            n_unk += 1;
        }
        let mut g = DMatrix::<f64>::zeros(n_unk, n_unk);
        let mut rhs = DMatrix::<f64>::zeros(n_unk, ncol);
        let nidx = |n: usize| if n == 0 { None } else { Some(n - 1) };
        // Row r of the branch equation of unknown k is k itself.
        let stamp_g = |g: &mut DMatrix<f64>, a: usize, b: usize, cond: f64| {
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
        };
        // Current `k` (an unknown) leaves node a, enters node b, with factor f.
        let stamp_cur = |g: &mut DMatrix<f64>, a: usize, b: usize, k: usize, f: f64| {
            if let Some(i) = nidx(a) {
                g[(i, k)] += f;
            }
            if let Some(j) = nidx(b) {
                g[(j, k)] -= f;
            }
        };
        // Branch row k: v_a − v_b (times f) on the left.
        let stamp_v = |g: &mut DMatrix<f64>, k: usize, a: usize, b: usize, f: f64| {
            if let Some(i) = nidx(a) {
                g[(k, i)] += f;
            }
            if let Some(j) = nidx(b) {
                g[(k, j)] -= f;
            }
        };
        // Known current (a column combination) leaving a, entering b.
        let inject = |rhs: &mut DMatrix<f64>, a: usize, b: usize, col: usize, f: f64| {
            if let Some(i) = nidx(a) {
                rhs[(i, col)] -= f;
            }
            if let Some(j) = nidx(b) {
                rhs[(j, col)] += f;
            }
        };
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
                    if let Some(li) = loop_caps.iter().position(|(c, _)| *c == bi) {
                        inject(&mut rhs, a, bn, nz + cut_comps.len() + li, 1.0);
                    } else {
                        let k = cur_of[bi];
                        stamp_cur(&mut g, a, bn, k, 1.0);
                        stamp_v(&mut g, k, a, bn, 1.0);
                        rhs[(k, *state)] = 1.0;
                    }
                }
                BranchKind::VSource { src } => {
                    let k = cur_of[bi];
                    stamp_cur(&mut g, a, bn, k, 1.0);
                    stamp_v(&mut g, k, a, bn, 1.0);
                    for &(col, f) in &cc.sources[*src].terms {
                        rhs[(k, col)] += f;
                    }
                }
                BranchKind::Switch { sw } => {
                    let ramp = cc.switches[*sw].transition.as_ref();
                    if ramp_v(*sw) {
                        let k = cur_of[bi];
                        stamp_cur(&mut g, a, bn, k, 1.0);
                        stamp_v(&mut g, k, a, bn, 1.0);
                        rhs[(k, ramp.expect("a ramp has a model").value)] += 1.0;
                    } else if ramp_i(*sw) {
                        inject(
                            &mut rhs,
                            a,
                            bn,
                            ramp.expect("a ramp has a model").value,
                            1.0,
                        );
                    } else if sw_on(*sw) {
                        let r = cc.switches[*sw].r_on;
                        if r > 0.0 {
                            stamp_g(&mut g, a, bn, 1.0 / r);
                        } else {
                            let k = cur_of[bi];
                            stamp_cur(&mut g, a, bn, k, 1.0);
                            stamp_v(&mut g, k, a, bn, 1.0);
                        }
                    }
                }
                BranchKind::Diode { d } => {
                    if d_on(*d) {
                        let k = cur_of[bi];
                        let di = &cc.diodes[*d];
                        stamp_cur(&mut g, a, bn, k, 1.0);
                        stamp_v(&mut g, k, a, bn, 1.0);
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
        for (ci, &c) in cut_comps.iter().enumerate() {
            let k = gauge_unk[c];
            let r = rep(c);
            stamp_cur(&mut g, r, 0, k, 1.0);
            stamp_v(&mut g, k, r, 0, 1.0);
            rhs[(k, nz + ci)] = 1.0;
        }
        for (fi, &c) in free_comps.iter().enumerate() {
            let k = gauge_unk[c];
            let r = rep(c);
            stamp_cur(&mut g, r, 0, k, 1.0);
            stamp_v(&mut g, k, r, 0, 1.0);
            rhs[(k, nz + n_lam + fi)] = 1.0;
        }

        // 4. Solve the network.
        // Singular or not is judged on the equilibrated matrix: the raw
        // one mixes conductances (1/R) with the unit entries of voltage
        // branches, so an impedance scale far from 1 Ω (a 0.1 µΩ load, or a
        // whole circuit with R·k, L·k, C/k) would make the pivot ratio
        // fall below any fixed threshold although the network is regular.
        let (dr, dc) = equilibration(&g);
        let mut ge = g.clone();
        for (i, mut row) in ge.row_iter_mut().enumerate() {
            row *= dr[i];
        }
        for (j, mut col) in ge.column_iter_mut().enumerate() {
            col *= dc[j];
        }
        if n_unk > 0 && singular(&ge) {
            let reason = "the network equations are singular".to_string();
            return Ok(Mode::invalid(
                cc,
                key,
                problem.unwrap_or(ModeProblem::Unsupported(reason)),
            ));
        }
        // The equilibrated system is solved where the raw matrix spans
        // more than 2^20 in its entries' magnitudes (there the raw LU
        // loses about as many digits as that spread); an ordinary circuit
        // keeps the raw solve and its bits.
        let y = if n_unk == 0 {
            DMatrix::zeros(0, ncol)
        } else if spread(&g) > 1048576.0 {
            let mut r = rhs.clone();
            for (i, mut row) in r.row_iter_mut().enumerate() {
                row *= dr[i];
            }
            let mut y = ge.full_piv_lu().solve(&r).expect("checked invertible");
            for (j, mut row) in y.row_iter_mut().enumerate() {
                row *= dc[j];
            }
            y
        } else {
            g.clone()
                .full_piv_lu()
                .solve(&rhs)
                .expect("checked invertible")
        };
        let vrow = |n: usize| -> DVector<f64> {
            match nidx(n) {
                Some(i) => y.row(i).transpose(),
                None => DVector::zeros(ncol),
            }
        };

        // 5. State derivatives as functions of [z; λ; free].
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
                    vrow(br.a) - vrow(br.b)
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
                if let Some(li) = loop_caps.iter().position(|(x, _)| *x == bi) {
                    d[(state, nz + cut_comps.len() + li)] = 1.0 / c;
                } else {
                    let row = y.row(cur_of[bi]) / c;
                    d.set_row(state, &row);
                }
            }
        }
        for &(s, co, w) in &cc.oscillators {
            d[(s, co)] = w;
            d[(co, s)] = -w;
        }
        for k in 0..cc.n_u {
            d[(nx + k, nx + cc.n_u + k)] = 1.0;
        }

        // 6. Constraints and multipliers.
        let mut h = DMatrix::<f64>::zeros(n_lam, ncol);
        let mut constraints = vec![];
        for (ci, &c) in cut_comps.iter().enumerate() {
            h.set_row(ci, &y.row(gauge_unk[c]));
            constraints.push(ConstraintKind::Cutset {
                windings: comp_windings[c].clone(),
                node: rep(c),
            });
        }
        for (li, (bi, caps)) in loop_caps.iter().enumerate() {
            let b = &cc.branches[*bi];
            let BranchKind::Capacitor { state, .. } = b.kind else {
                unreachable!("loop_caps holds capacitors")
            };
            let mut row = -(vrow(b.a) - vrow(b.b));
            row[state] += 1.0;
            h.set_row(cut_comps.len() + li, &row.transpose());
            let mut all = caps.clone();
            all.insert(0, *bi);
            constraints.push(ConstraintKind::Loop { caps: all });
        }
        let hz = h.columns(0, nz).into_owned();
        let dz = d.columns(0, nz).into_owned();
        let dl = d.columns(nz, n_lam).into_owned();
        // Multipliers λ make the constraints' time derivatives vanish:
        // S·λ = −H·D_z·z with S = H·D_λ. S may be singular when two floating
        // groups are joined only by a winding (a transformer secondary
        // feeding a blocked bridge): only their potential difference is
        // fixed. The pseudo-inverse picks the determined part; the null
        // directions of S are free gauges like those of groups reached by
        // nothing, provided they move no state (checked).
        let mut null_dirs = DMatrix::<f64>::zeros(n_lam, 0);
        let (lam, p, made_of) = if n_lam > 0 {
            let s = &hz * &dl;
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
                let reason = "a set of windings or capacitors whose constraint cannot be resolved"
                    .to_string();
                return Ok(Mode::invalid(
                    cc,
                    key,
                    problem.unwrap_or(ModeProblem::Unsupported(reason)),
                ));
            }
            if !nulls.is_empty() {
                null_dirs = DMatrix::from_columns(&nulls);
                // A free direction must not move any state, or the mode's
                // dynamics would be undetermined.
                let moved = &dl * &null_dirs;
                let scale = dl.amax().max(f64::MIN_POSITIVE);
                if moved.amax() > 1e-9 * scale {
                    let reason =
                        "a set of windings or capacitors whose constraint cannot be resolved"
                            .to_string();
                    return Ok(Mode::invalid(
                        cc,
                        key,
                        problem.unwrap_or(ModeProblem::Unsupported(reason)),
                    ));
                }
            }
            let lam = -&s_pinv * (&hz * &dz);
            let p = DMatrix::identity(nz, nz) - &dl * &s_pinv * &hz;
            // What each entry of D_λ·λ is made of, in magnitude: the
            // scale of the rounding left where M cancels (see below, where
            // M is formed).
            let made_of = dl.abs() * (s_pinv.abs() * (hz.abs() * dz.abs()));
            (lam, p, made_of)
        } else {
            (
                DMatrix::zeros(0, nz),
                DMatrix::identity(nz, nz),
                DMatrix::zeros(nz, nz),
            )
        };
        let yz = y.columns(0, nz).into_owned() + y.columns(nz, n_lam) * &lam;
        let n_null = null_dirs.ncols();
        let n_free = n_free + n_null;
        let mut yf = DMatrix::<f64>::zeros(n_unk, n_free);
        yf.columns_mut(0, n_free - n_null)
            .copy_from(&y.columns(nz + n_lam, n_free - n_null));
        if n_null > 0 {
            yf.columns_mut(n_free - n_null, n_null)
                .copy_from(&(y.columns(nz, n_lam) * &null_dirs));
        }
        let mut m = &dz + &dl * &lam;
        // The multipliers cancel the dynamics a cut or loop forbids (a cut
        // inductor's v/L) exactly in theory, but only to rounding of the
        // terms in f64: 1/L·ε for an inductance L. With L = 1e-300 H that
        // residue (1e284 /s) coupled to a capacitor is a fake oscillation
        // of 1e144 rad/s, and the run refused an ordinary dead time. An
        // entry within a few rounding errors of the terms it was summed
        // from is zero (the usual error bound of a sum and a product,
        // n·ε·Σ|terms|: N. J. Higham, *Accuracy and Stability of Numerical
        // Algorithms*, 2nd ed., 2002, §3.1; from memory).
        if n_lam > 0 {
            let floor = CANCELLATION_ULPS * f64::EPSILON;
            for (v, (a, b)) in m.iter_mut().zip(dz.iter().zip(made_of.iter())) {
                if v.abs() <= floor * (a.abs() + b) {
                    *v = 0.0;
                }
            }
        }

        // 7. Outputs.
        let n_out = cc.outputs.len();
        let mut cm = DMatrix::<f64>::zeros(n_out, nz);
        let mut undetermined = vec![false; n_out];
        let vz = |n: usize| -> (DVector<f64>, DVector<f64>) {
            match nidx(n) {
                Some(i) => (yz.row(i).transpose(), yf.row(i).transpose()),
                None => (DVector::zeros(nz), DVector::zeros(n_free)),
            }
        };
        let curz = |bi: usize| -> (DVector<f64>, DVector<f64>) {
            (
                yz.row(cur_of[bi]).transpose(),
                yf.row(cur_of[bi]).transpose(),
            )
        };
        for (oi, (_, def)) in cc.outputs.iter().enumerate() {
            let (row, free): (DVector<f64>, DVector<f64>) = match def {
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
                OutputDef::Node(n) => vz(*n),
                OutputDef::BranchVoltage(bi) => {
                    let b = &cc.branches[*bi];
                    let (a1, a2) = vz(b.a);
                    let (b1, b2) = vz(b.b);
                    (a1 - b1, a2 - b2)
                }
                OutputDef::SecondaryVoltage(bi) => {
                    let BranchKind::Transformer { sec, .. } = cc.branches[*bi].kind else {
                        unreachable!()
                    };
                    let (a1, a2) = vz(sec.0);
                    let (b1, b2) = vz(sec.1);
                    (a1 - b1, a2 - b2)
                }
                OutputDef::SecondaryCurrent(bi) => {
                    let BranchKind::Transformer { n, .. } = cc.branches[*bi].kind else {
                        unreachable!()
                    };
                    let (r, f) = curz(*bi);
                    (r * -n, f * -n)
                }
                OutputDef::BranchCurrent(bi) => {
                    let b = &cc.branches[*bi];
                    let zero = (DVector::zeros(nz), DVector::zeros(n_free));
                    match &b.kind {
                        BranchKind::Resistor { g: cond } => {
                            let (a1, a2) = vz(b.a);
                            let (b1, b2) = vz(b.b);
                            ((a1 - b1) * *cond, (a2 - b2) * *cond)
                        }
                        BranchKind::Winding { state } => {
                            let mut r = DVector::zeros(nz);
                            r[*state] = 1.0;
                            (r, DVector::zeros(n_free))
                        }
                        BranchKind::Capacitor { state, c } => {
                            (m.row(*state).transpose() * *c, DVector::zeros(n_free))
                        }
                        BranchKind::ISource { src } => {
                            let mut r = DVector::zeros(nz);
                            for &(col, f) in &cc.sources[*src].terms {
                                r[col] += f;
                            }
                            (r, DVector::zeros(n_free))
                        }
                        BranchKind::VSource { .. } | BranchKind::Transformer { .. } => curz(*bi),
                        BranchKind::Switch { sw } if ramp_v(*sw) => curz(*bi),
                        BranchKind::Switch { sw } if ramp_i(*sw) => {
                            let mut r = DVector::zeros(nz);
                            r[cc.switches[*sw]
                                .transition
                                .as_ref()
                                .expect("a ramp has a model")
                                .value] = 1.0;
                            (r, DVector::zeros(n_free))
                        }
                        BranchKind::Switch { sw } => {
                            if !sw_on(*sw) {
                                zero
                            } else if cc.switches[*sw].r_on > 0.0 {
                                let gsw = 1.0 / cc.switches[*sw].r_on;
                                let (a1, a2) = vz(b.a);
                                let (b1, b2) = vz(b.b);
                                ((a1 - b1) * gsw, (a2 - b2) * gsw)
                            } else {
                                curz(*bi)
                            }
                        }
                        BranchKind::Diode { d } => {
                            if d_on(*d) {
                                curz(*bi)
                            } else {
                                zero
                            }
                        }
                    }
                }
            };
            cm.set_row(oi, &row.transpose());
            undetermined[oi] = free.iter().any(|v| v.abs() > 1e-9);
        }

        // 7b. Compensator dynamics: x_c' = A·x_c + B·(reference − input).
        for comp in &cc.compensators {
            if undetermined[comp.input] && problem.is_none() {
                problem = Some(ModeProblem::Unsupported(format!(
                    "compensator {} measures {}, which is undetermined in this mode",
                    comp.name, cc.outputs[comp.input].0
                )));
            }
            let input_row = cm.row(comp.input).into_owned();
            for (i, &si) in comp.states.iter().enumerate() {
                let mut r = input_row.clone() * -comp.b[i];
                r[comp.reference_z] += comp.b[i];
                for (j, &sj) in comp.states.iter().enumerate() {
                    r[sj] += comp.a[(i, j)];
                }
                m.set_row(si, &r);
            }
        }

        // 8. Guards.
        let mut guards = vec![];
        let mut free_dep: Vec<(usize, Vec<f64>, DVector<f64>)> = vec![];
        for (di, dinfo) in cc.diodes.iter().enumerate() {
            let b = &cc.branches[dinfo.branch];
            if d_on(di) {
                let (r, _) = curz(dinfo.branch);
                guards.push(Guard {
                    kind: GuardKind::DiodeCurrent(di),
                    row: r.iter().copied().collect(),
                    drow: vec![],
                });
            } else {
                let (a1, a2) = vz(b.a);
                let (b1, b2) = vz(b.b);
                let mut row = -(a1 - b1);
                row[one] += dinfo.vf;
                let dep = -(a2 - b2);
                if dep.iter().all(|v| v.abs() < 1e-9) {
                    guards.push(Guard {
                        kind: GuardKind::DiodeVoltage(di),
                        row: row.iter().copied().collect(),
                        drow: vec![],
                    });
                } else {
                    free_dep.push((di, row.iter().copied().collect(), dep));
                }
            }
        }
        // Pair diodes whose voltages move oppositely with the same free gauge
        // (Fourier–Motzkin elimination of that gauge).
        for i in 0..free_dep.len() {
            for j in i + 1..free_dep.len() {
                let (di, ri, ei) = &free_dep[i];
                let (dj, rj, ej) = &free_dep[j];
                let sum = ei + ej;
                if sum.iter().all(|v| v.abs() < 1e-9) {
                    let row: Vec<f64> = ri.iter().zip(rj).map(|(a, b)| a + b).collect();
                    guards.push(Guard {
                        kind: GuardKind::DiodePair(*di, *dj),
                        row,
                        drow: vec![],
                    });
                }
            }
        }
        for g in &mut guards {
            let r = DVector::from_column_slice(&g.row);
            g.drow = (m.transpose() * r).iter().copied().collect();
        }
        // 9. Free groups with current sources must balance.
        let mut free_checks = vec![];
        for &c in &free_comps {
            if !comp_sources[c].is_empty() {
                free_checks.push((
                    y.row(gauge_unk[c]).columns(0, nz).iter().copied().collect(),
                    rep(c),
                    comp_sources[c].clone(),
                ));
            }
        }
        // 9b. Comparator guards: [0] while on (turn off when met), [1] while
        // off (turn on when met); each stays positive until its comparison
        // is met.
        let mut cmp_guards = vec![];
        for (ci, cmp) in cc.comparators.iter().enumerate() {
            let sense = cm.row(cmp.sense).into_owned();
            let current = matches!(
                cc.outputs[cmp.sense].1,
                OutputDef::BranchCurrent(_) | OutputDef::SecondaryCurrent(_)
            );
            let make = |c: &Option<crate::compile::CompiledComparison>, off: bool| {
                c.as_ref().map(|c| {
                    let thr = DVector::from_column_slice(&c.threshold);
                    let row: DVector<f64> = if c.above {
                        thr - sense.transpose()
                    } else {
                        sense.transpose() - thr
                    };
                    let drow = m.transpose() * &row;
                    Guard {
                        kind: GuardKind::Comparator(ci, off, current),
                        row: row.iter().copied().collect(),
                        drow: drow.iter().copied().collect(),
                    }
                })
            };
            if undetermined[cmp.sense] && problem.is_none() {
                problem = Some(ModeProblem::Unsupported(format!(
                    "gate {} compares {}, which is undetermined in this mode",
                    cc.signals[cmp.signal].0, cc.outputs[cmp.sense].0
                )));
            }
            cmp_guards.push([make(&cmp.turn_off, true), make(&cmp.turn_on, false)]);
        }
        // 10. Rate: ∞-norm of the state block after diagonal balancing.
        let rate = balanced_norm(&m, nx, &cc.x_scale);
        let live = (0..m.nrows())
            .rev()
            .find(|&i| m.row(i).iter().any(|v| *v != 0.0))
            .map_or(0, |i| i + 1);
        Ok(Mode {
            key,
            problem,
            m,
            live,
            ct: cm.transpose(),
            c: cm,
            undetermined,
            guards,
            ht: hz.transpose(),
            constraints,
            p,
            free_checks,
            rate,
            resistive_short,
            cmp_guards,
        })
    }

    fn invalid(cc: &Compiled, key: ModeKey, problem: ModeProblem) -> Mode {
        let nz = cc.n_z();
        Mode {
            key,
            problem: Some(problem),
            m: DMatrix::zeros(nz, nz),
            live: 0,
            c: DMatrix::zeros(cc.outputs.len(), nz),
            ct: DMatrix::zeros(nz, cc.outputs.len()),
            undetermined: vec![true; cc.outputs.len()],
            guards: vec![],
            ht: DMatrix::zeros(nz, 0),
            constraints: vec![],
            p: DMatrix::identity(nz, nz),
            free_checks: vec![],
            rate: 0.0,
            resistive_short: None,
            cmp_guards: vec![],
        }
    }
}

/// Whether the square network matrix `g` (equilibrated, see
/// [`equilibration`]) is numerically singular: its smallest LU pivot
/// below 1e-13 of its largest. NaN entries count as singular.
fn singular(g: &DMatrix<f64>) -> bool {
    let u = g.clone().full_piv_lu();
    let u = u.u();
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
fn equilibration(g: &DMatrix<f64>) -> (Vec<f64>, Vec<f64>) {
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

/// Rounding errors (in units of ε) within which an entry of a mode's M
/// formed by a multiplier's cancellation counts as zero: the sums and
/// products that form it have a few dozen terms at most in the circuits
/// fluxstep handles, and a genuine entry that small next to the terms
/// it cancels would be below what the run could resolve anyway.
const CANCELLATION_ULPS: f64 = 64.0;

/// Fastest dynamics a conduction pattern may have, 1e150 /s (the rate
/// bound [`Mode::rate`]). The eigenvalue iteration and the matrix
/// exponential multiply entries of M with each other; below this bound
/// such a product stays within f64 (1.8e308), above it they overflow and
/// the run would hang or answer garbage. Only values far outside any
/// hardware get there (an inductance or capacitance of 1e-150 or less
/// next to ordinary resistances: a time constant shorter than 1e-150 s,
/// which 64-bit time cannot place anywhere in a run).
pub(crate) const MAX_RATE: f64 = 1e150;

impl Mode {
    /// Why the run cannot use this pattern because its dynamics are faster
    /// than [`MAX_RATE`], naming the state with the smallest energy scale
    /// (√L or √C, the smallest inductance or capacitance that takes part),
    /// whose value makes it so; `None` within the bound.
    pub(crate) fn too_fast(&self, cc: &Compiled) -> Option<String> {
        // A NaN rate is left to the run's own checks of non-finite values.
        if self.rate <= MAX_RATE || self.rate.is_nan() {
            return None;
        }
        let who = (0..cc.n_x.min(cc.x_scale.len()).min(self.m.nrows()))
            .filter(|&i| self.m.row(i).iter().any(|v| *v != 0.0))
            .min_by(|&a, &b| cc.x_scale[a].total_cmp(&cc.x_scale[b]))
            .and_then(|i| cc.state_names.get(i).cloned())
            .unwrap_or_else(|| "a state".into());
        Some(format!(
            "its dynamics are faster than {MAX_RATE:e} /s (rate bound {:.3e} /s), beyond what \
             64-bit arithmetic can follow; the fastest state is {who}: check its value and the \
             resistances around it",
            self.rate
        ))
    }
}

/// The pattern as text: `S1 on, D1 blocking`.
pub(crate) fn pattern_text(cc: &Compiled, key: ModeKey) -> String {
    let mut parts = vec![];
    for (i, s) in cc.switches.iter().enumerate() {
        parts.push(format!(
            "{} {}",
            s.name,
            if key.ramps & ramp_bit(i, true) != 0 {
                "in a voltage ramp"
            } else if key.ramps & ramp_bit(i, false) != 0 {
                "in a current ramp"
            } else if key.switches >> i & 1 == 1 {
                "on"
            } else {
                "off"
            }
        ));
    }
    for (i, d) in cc.diodes.iter().enumerate() {
        parts.push(format!(
            "{} {}",
            d.name,
            if key.diodes >> i & 1 == 1 {
                "conducting"
            } else {
                "blocking"
            }
        ));
    }
    if parts.is_empty() {
        "no switches or diodes".into()
    } else {
        parts.join(", ")
    }
}

/// ∞-norm of the top-left `n × n` block of `m` after diagonal balancing,
/// a bound on how fast the state can change that does not depend on units.
///
/// Starts from the energy scaling of the states (√L for currents, √C for
/// voltages, which already balances an L–C pair) and refines it with
/// Osborne's iteration (E. E. Osborne, "On pre-conditioning of matrices",
/// J. ACM 1960): each state is rescaled so that the couplings into it and
/// out of it weigh the same. One-way couplings — a compensator measuring
/// the circuit, a cascade of filter sections — then stop inflating the
/// bound, which sets how many Taylor sub-steps an interval needs.
pub(crate) fn balanced_norm(m: &DMatrix<f64>, n: usize, scale: &[f64]) -> f64 {
    let mut a = DMatrix::from_fn(n, n, |i, j| (m[(i, j)] * scale[i] / scale[j]).abs());
    let mut d = vec![1.0f64; n];
    for _ in 0..20 {
        let mut changed = false;
        for i in 0..n {
            let c: f64 = (0..n).filter(|&j| j != i).map(|j| a[(j, i)]).sum();
            let r: f64 = (0..n).filter(|&j| j != i).map(|j| a[(i, j)]).sum();
            if !c.is_finite() || !r.is_finite() || (c == 0.0 && r == 0.0) {
                continue;
            }
            // A state only driven (no coupling out of it, c = 0) or only
            // driving (r = 0) can be scaled as far as the range allows:
            // that is how a one-way chain is balanced. The range keeps the
            // total scaling from overflowing.
            let f = if c == 0.0 {
                1e4
            } else if r == 0.0 {
                1e-4
            } else {
                (r / c).sqrt().clamp(1e-4, 1e4)
            };
            if !(0.5..=2.0).contains(&f) || (f - 1.0).abs() > 1e-3 {
                let f = if (d[i] * f).abs() > 1e12 || (d[i] * f).abs() < 1e-12 {
                    1.0
                } else {
                    f
                };
                if f != 1.0 {
                    d[i] *= f;
                    for j in 0..n {
                        a[(j, i)] *= f;
                        a[(i, j)] /= f;
                    }
                    changed = true;
                }
            }
        }
        if !changed {
            break;
        }
    }
    (0..n)
        .map(|i| (0..n).map(|j| a[(i, j)]).sum::<f64>())
        .fold(0.0, f64::max)
}
