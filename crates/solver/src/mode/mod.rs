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
//!
//! # Steps
//!
//! [`Mode::build`] runs them in this order, each in its own file, each
//! handing the next a named result:
//!
//! 1. [`topology`]: which branches conduct; floating groups (inductor
//!    cutsets, free groups), loops of capacitors and sources, shorts.
//! 2. [`network`]: modified nodal analysis of what remains, solved for
//!    every node voltage and voltage-branch current over `[z; λ; free]`;
//!    the state derivatives `D` in the same columns.
//! 3. [`constraints`]: the constraint rows, the multipliers (a
//!    pseudo-inverse where only part of them is fixed), the jump map, and
//!    `M` with the multipliers eliminated.
//! 4. [`outputs`]: the rows `C` (and `Cᵀ`), undetermined outputs, the
//!    compensators' rows of `M`.
//! 5. [`guards`]: diode guards, free-group balances, comparator guards.
//! 6. [`rate`]: the rate bound and the live rows of `M`.

mod constraints;
mod guards;
mod network;
mod outputs;
mod rate;
mod topology;

use nalgebra::{DMatrix, DVector};

use crate::compile::Compiled;
use crate::error::SolverError;

use constraints::Reduced;
use network::Network;
use outputs::{Outputs, Solved};
pub(crate) use rate::balanced_norm;
use topology::{Conduction, Topology};

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
    /// A comparator of a closed-loop gate.
    Comparator {
        /// The comparator's number.
        index: usize,
        /// True for its turn-off guard, false for its turn-on guard.
        turn_off: bool,
        /// True if it compares a current (else a voltage), which sets
        /// the unit of its zero floor.
        of_current: bool,
    },
}

impl GuardKind {
    /// Whether the guard's zero floor is a current's (else a voltage's;
    /// see `crossing::Scales::floor`).
    #[inline(always)]
    pub(crate) fn of_current(&self) -> bool {
        match self {
            GuardKind::DiodeCurrent(_) => true,
            GuardKind::Comparator { of_current, .. } => *of_current,
            GuardKind::DiodeVoltage(_) | GuardKind::DiodePair(..) => false,
        }
    }
}

/// A linear function of `z` that must stay ≥ 0 while the mode holds.
#[derive(Clone, Debug)]
pub(crate) struct Guard {
    pub kind: GuardKind,
    pub row: Vec<f64>,
    /// The guard's time derivative as a row: `row·M`.
    pub drow: Vec<f64>,
    /// `row`'s non-zero entries, for the products of every interval.
    pub srow: Sparse,
    /// `drow`'s non-zero entries.
    pub sdrow: Sparse,
}

impl Guard {
    /// A guard of `kind` on `row`, with its derivative `row·M` and both
    /// rows' non-zero entries.
    pub(crate) fn new(kind: GuardKind, row: Vec<f64>, m: &DMatrix<f64>) -> Guard {
        let drow: Vec<f64> = (m.transpose() * DVector::from_column_slice(&row))
            .iter()
            .copied()
            .collect();
        Guard {
            kind,
            srow: Sparse::of(&row),
            sdrow: Sparse::of(&drow),
            row,
            drow,
        }
    }
}

/// A row's non-zero entries in index order. A product over them is the
/// dense row's product to the bit, except for the sign of an exact zero:
/// a term with a zero coefficient adds a signed zero, which leaves any
/// non-zero partial sum as it is. A guard of a many-phase converter
/// touches two or three of its dozen states (its own inductor, the output,
/// the constant), so this is what the guard checks of every interval cost
/// instead of the whole state.
///
/// Up to [`INLINE`] entries (a converter's guard has one to three) are
/// held in the row itself, so that a mode's guards, one after another in
/// its list, are read without a pointer to follow each: a twelve-phase
/// buck cycles through twelve modes, and their scattered rows missed the
/// first-level cache at every interval.
#[derive(Clone, Debug)]
pub(crate) enum Sparse {
    Inline {
        n: u8,
        k: [u32; INLINE],
        a: [f64; INLINE],
    },
    Heap(Vec<(usize, f64)>),
}

/// Most entries a [`Sparse`] row holds in place.
const INLINE: usize = 4;

impl Default for Sparse {
    fn default() -> Sparse {
        Sparse::Heap(vec![])
    }
}

impl Sparse {
    /// The non-zero entries of `row`.
    pub(crate) fn of(row: &[f64]) -> Sparse {
        let entries: Vec<(usize, f64)> = row
            .iter()
            .enumerate()
            .filter(|(_, v)| **v != 0.0)
            .map(|(k, v)| (k, *v))
            .collect();
        if entries.len() <= INLINE && entries.iter().all(|&(k, _)| k <= u32::MAX as usize) {
            let mut k = [0u32; INLINE];
            let mut a = [0.0; INLINE];
            for (i, &(ki, ai)) in entries.iter().enumerate() {
                k[i] = ki as u32;
                a[i] = ai;
            }
            Sparse::Inline {
                n: entries.len() as u8,
                k,
                a,
            }
        } else {
            Sparse::Heap(entries)
        }
    }

    /// `f` applied to (index, value) of each entry in index order, from
    /// `init`: the one loop every product below goes through.
    #[inline(always)]
    fn fold<T>(&self, init: T, mut f: impl FnMut(T, usize, f64) -> T) -> T {
        let mut acc = init;
        match self {
            Sparse::Inline { n, k, a } => {
                for i in 0..*n as usize {
                    acc = f(acc, k[i] as usize, a[i]);
                }
            }
            Sparse::Heap(e) => {
                for &(k, a) in e {
                    acc = f(acc, k, a);
                }
            }
        }
        acc
    }

    /// The entries (index, value) in index order.
    pub(crate) fn entries(&self) -> Vec<(usize, f64)> {
        self.fold(vec![], |mut v, k, a| {
            v.push((k, a));
            v
        })
    }

    /// Σ rowₖ zₖ.
    #[inline(always)]
    pub(crate) fn dot(&self, z: &[f64]) -> f64 {
        self.fold(0.0, |v, k, a| v + a * z[k])
    }

    /// Σ |rowₖ|·mₖ: the magnitude of the row's terms where `m` bounds
    /// the magnitudes that went into each entry of the vector (see
    /// `propagate::abs_matvec`).
    #[inline(always)]
    pub(crate) fn abs_dot(&self, m: &[f64]) -> f64 {
        self.fold(0.0, |s, k, a| s + a.abs() * m[k])
    }

    /// (Σ rowₖ zₖ, Σ |rowₖ zₖ|).
    #[inline(always)]
    pub(crate) fn dot_and_magnitude(&self, z: &[f64]) -> (f64, f64) {
        self.fold((0.0, 0.0), |(v, s), k, a| {
            let p = a * z[k];
            (v + p, s + p.abs())
        })
    }
}

/// A guard's value row and derivative row ([`Guard::srow`],
/// [`Guard::sdrow`]) in one 64-byte cache line, with its floor's kind:
/// what the checks of every instant read of each guard (the value pass of
/// `run::checks::guards_hold` on entering a mode, the end-point checks of
/// `run::locate` on every interval). The products are those of the
/// [`Sparse`] rows, entry for entry in the same order, so the same bits.
/// A twelve-phase buck cycles through twelve modes of twelve guards each;
/// read from the guards themselves (dense rows beside the sparse ones, 184
/// bytes each), their lines left the first-level cache between one visit
/// of a mode and the next, and cost three misses a guard.
///
/// Rows with more than [`GuardLine::ENTRIES`] entries together (or an
/// index beyond `u16`) do not fit: the line is marked wide and the
/// guard's own rows serve.
#[derive(Clone, Copy, Debug)]
#[repr(C, align(64))]
pub(crate) struct GuardLine {
    /// The value row's entries, then the derivative row's.
    a: [f64; GuardLine::ENTRIES],
    /// Their indices in z.
    k: [u16; GuardLine::ENTRIES],
    /// How many entries the value row has.
    values: u8,
    /// How many entries there are in all; `u8::MAX` if the rows do not
    /// fit.
    all: u8,
    /// Whether the guard's zero floor is a current's
    /// ([`GuardKind::of_current`]).
    pub of_current: bool,
}

// One line, as the layout above intends.
const _: () = assert!(std::mem::size_of::<GuardLine>() == 64);

impl GuardLine {
    /// Entries a line holds, value and derivative rows together.
    pub(crate) const ENTRIES: usize = 6;
    /// `all` of a line whose rows do not fit.
    const WIDE: u8 = u8::MAX;

    /// The line of guard `g`.
    pub(crate) fn of(g: &Guard) -> GuardLine {
        let (value, slope) = (g.srow.entries(), g.sdrow.entries());
        let mut line = GuardLine {
            a: [0.0; Self::ENTRIES],
            k: [0; Self::ENTRIES],
            values: 0,
            all: Self::WIDE,
            of_current: g.kind.of_current(),
        };
        let n = value.len() + slope.len();
        if n > Self::ENTRIES
            || value
                .iter()
                .chain(&slope)
                .any(|&(k, _)| k > u16::MAX as usize)
        {
            return line;
        }
        for (i, &(k, a)) in value.iter().chain(&slope).enumerate() {
            line.k[i] = k as u16;
            line.a[i] = a;
        }
        line.values = value.len() as u8;
        line.all = n as u8;
        line
    }

    /// (Σ rowₖ zₖ, Σ |rowₖ zₖ|) of the value row: [`Sparse::dot_and_magnitude`]
    /// of the guard's `srow` (`guard` gives the line's guard, read only
    /// if the line is wide).
    #[inline(always)]
    pub(crate) fn value<'g>(&self, z: &[f64], guard: impl FnOnce() -> &'g Guard) -> (f64, f64) {
        if self.all == Self::WIDE {
            return guard().srow.dot_and_magnitude(z);
        }
        let (mut v, mut s) = (0.0, 0.0);
        for i in 0..self.values as usize {
            let p = self.a[i] * z[self.k[i] as usize];
            v += p;
            s += p.abs();
        }
        (v, s)
    }

    /// Σ drowₖ zₖ, the guard's time derivative: [`Sparse::dot`] of the
    /// guard's `sdrow` (`guard` as for [`GuardLine::value`]).
    #[inline(always)]
    pub(crate) fn slope<'g>(&self, z: &[f64], guard: impl FnOnce() -> &'g Guard) -> f64 {
        if self.all == Self::WIDE {
            return guard().sdrow.dot(z);
        }
        let mut v = 0.0;
        for i in self.values as usize..self.all as usize {
            v += self.a[i] * z[self.k[i] as usize];
        }
        v
    }
}

/// Rows' non-zero entries packed one after another in one array, each
/// row closed by an entry of index [`PackedRows::END`]: the same products
/// in the same order as each row's [`Sparse::dot`], so the same bits, in
/// one pass over one array instead of a vector per row. A replay checks
/// the cutset rows its transition remembered at every instant; each
/// behind its own pointer, they cost more in the loads than in the
/// products.
#[derive(Clone, Debug, Default)]
pub(crate) struct PackedRows {
    entries: Vec<(u32, f64)>,
    rows: usize,
}

impl PackedRows {
    /// The index that closes a row.
    const END: u32 = u32::MAX;

    /// The rows of `rows`, in order.
    pub(crate) fn of<'a>(rows: impl IntoIterator<Item = &'a Sparse>) -> PackedRows {
        let mut entries = vec![];
        let mut count = 0;
        for r in rows {
            entries.extend(r.entries().into_iter().map(|(k, a)| (k as u32, a)));
            entries.push((Self::END, 0.0));
            count += 1;
        }
        PackedRows {
            entries,
            rows: count,
        }
    }

    /// How many rows there are.
    pub(crate) fn len(&self) -> usize {
        self.rows
    }

    /// Calls `f(row, Σ rowₖ zₖ)` for each row in order (the sum of
    /// [`Sparse::dot`]) until it returns false; false if it did.
    #[inline(always)]
    pub(crate) fn all(&self, z: &[f64], mut f: impl FnMut(usize, f64) -> bool) -> bool {
        let mut v = 0.0;
        let mut row = 0;
        for &(k, c) in &self.entries {
            if k == Self::END {
                if !f(row, v) {
                    return false;
                }
                row += 1;
                v = 0.0;
                continue;
            }
            v += c * z[k as usize];
        }
        true
    }
}

/// What a multiplier constraint is about.
#[derive(Clone, Debug)]
pub(crate) enum ConstraintKind {
    /// Kirchhoff's current law on a floating group reached by windings.
    Cutset {
        windings: Vec<usize>,
        #[allow(dead_code)] // the node is named in future diagnostics
        node: usize,
        /// Names of the current sources that also feed the cut.
        sources: Vec<String>,
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
    /// Each guard's rows in one cache line, in the order of `guards`.
    pub guard_lines: Vec<GuardLine>,
    /// Constraint rows H (restricted to z) as columns (Hᵀ, so that each
    /// row is contiguous), and their kinds.
    pub ht: DMatrix<f64>,
    /// Each constraint row's non-zero entries (the replay check's and
    /// the jump checks' products at every instant).
    pub h_rows: Vec<Sparse>,
    pub constraints: Vec<ConstraintKind>,
    /// Jump map z⁺ = P z⁻ restoring the constraints.
    pub p: DMatrix<f64>,
    /// Gauge currents of free groups (must be zero): row, node, current sources.
    pub free_checks: Vec<(Vec<f64>, usize, Vec<String>)>,
    /// Rate bound (1/s) of the fastest dynamics, for sub-step sizes.
    pub rate: f64,
    /// The energy scale of each circuit state (√L for an inductor
    /// current, √C for a capacitor voltage, 1 otherwise), the first
    /// entries of z: Taylor series stop only where the states' terms,
    /// weighted by these, are negligible too (`propagate`), so currents
    /// 1e-12 of the voltages (impedances ×1e12) keep their digits.
    pub weight: Vec<f64>,
    /// A loop of closed switches and conducting diodes, some with
    /// resistance, across a voltage source or a capacitor: (devices,
    /// shorted element). Zero-resistance shorts are a `problem` instead.
    pub resistive_short: Option<(Vec<String>, Vec<String>)>,
    /// Guards of closed-loop gates, per comparator: [while on, while off].
    pub cmp_guards: Vec<[Option<Guard>; 2]>,
}

/// Why a step found no solution for a pattern's equations: the mode is
/// built invalid with this reason, unless the topology already named a
/// problem.
struct NoSolution(&'static str);

impl Mode {
    /// e^{Mτ}·z into `out` by Taylor sub-steps on this mode's rate bound,
    /// live rows and energy weights ([`crate::propagate::advance_into`]).
    #[inline]
    pub(crate) fn advance_into(
        &self,
        z: &[f64],
        tau: f64,
        out: &mut [f64],
        scratch: &mut crate::propagate::Scratch,
    ) {
        crate::propagate::advance_into(
            &self.m,
            (&self.weight, self.live),
            self.rate,
            z,
            tau,
            out,
            scratch,
        );
    }

    /// Derives the mode's matrices. Structural problems (a short, parallel
    /// ideal switches) are recorded in `problem`, not returned as errors,
    /// so that the diode pattern search can try other patterns.
    pub(crate) fn build(cc: &Compiled, key: ModeKey) -> Result<Mode, SolverError> {
        let on = Conduction(key);
        // 1. Which branches conduct: floating groups, loops, shorts.
        let mut topo = Topology::find(cc, on);
        let mut problem = topo.problem.take();
        let unsolvable = |problem: Option<ModeProblem>, why: NoSolution| {
            let reason = ModeProblem::Unsupported(why.0.to_string());
            Ok(Mode::invalid(cc, key, problem.unwrap_or(reason)))
        };
        // 2. The network and the state derivatives over [z; λ; free].
        let net = match Network::solve(cc, on, &topo) {
            Ok(net) => net,
            Err(why) => return unsolvable(problem, why),
        };
        let d = net.derivatives(cc, &topo);
        // 3. Multipliers eliminated: M, the jump map P.
        let red = match Reduced::new(cc, &topo, &net, &d) {
            Ok(red) => red,
            Err(why) => return unsolvable(problem, why),
        };
        let Reduced {
            mut m,
            p,
            hz,
            constraints,
            rows,
        } = red;
        let solved = Solved {
            net: &net,
            rows: &rows,
        };
        // 4. Outputs, then the compensators that read them.
        let outputs = Outputs::new(cc, on, solved, &m);
        outputs.compensator_rows(cc, &mut m, &mut problem);
        // 5. Guards.
        let guards = guards::diode_guards(cc, on, solved, &m);
        let free_checks = guards::free_checks(&topo, &net);
        let cmp_guards = guards::comparator_guards(cc, &outputs, &m, &mut problem);
        // 6. Rate: ∞-norm of the state block after diagonal balancing.
        let rate = balanced_norm(&m, cc.n_x, &cc.x_scale);
        let live = rate::live_rows(&m);
        Ok(Mode {
            key,
            problem,
            m,
            live,
            ct: outputs.c.transpose(),
            c: outputs.c,
            undetermined: outputs.undetermined,
            guard_lines: guards.iter().map(GuardLine::of).collect(),
            guards,
            h_rows: hz
                .row_iter()
                .map(|r| Sparse::of(&r.iter().copied().collect::<Vec<_>>()))
                .collect(),
            ht: hz.transpose(),
            constraints,
            p,
            free_checks,
            rate,
            weight: cc.energy_weights(),
            resistive_short: topo.resistive_short,
            cmp_guards,
        })
    }

    /// A mode that cannot be entered, for `problem`: no dynamics, every
    /// output undetermined, the identity jump.
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
            guard_lines: vec![],
            ht: DMatrix::zeros(nz, 0),
            h_rows: vec![],
            constraints: vec![],
            p: DMatrix::identity(nz, nz),
            free_checks: vec![],
            rate: 0.0,
            weight: vec![],
            resistive_short: None,
            cmp_guards: vec![],
        }
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

/// Fixtures of the steps' unit tests.
#[cfg(test)]
pub(super) mod testing {
    use fluxstep_netlist::Circuit;

    use super::{Mode, ModeKey};
    use crate::compile::Compiled;

    /// The mode of `circuit` with switch bits `switches` and diode bits
    /// `diodes` (no ramps), beside the compiled circuit.
    pub(crate) fn built(circuit: &Circuit, switches: u64, diodes: u64) -> (Compiled, Mode) {
        let cc = Compiled::compile(circuit).expect("compiles");
        let key = ModeKey {
            switches,
            diodes,
            ramps: 0,
        };
        let mode = Mode::build(&cc, key).expect("builds");
        (cc, mode)
    }

    /// The z index of the state called `name`.
    pub(crate) fn state(cc: &Compiled, name: &str) -> usize {
        cc.state_names
            .iter()
            .position(|s| s == name)
            .unwrap_or_else(|| panic!("no state {name}"))
    }

    /// The z index of the input that source `name` follows (a constant
    /// source is a piecewise-linear input of its own, set at run time).
    pub(crate) fn source_column(cc: &Compiled, name: &str) -> usize {
        let src = cc
            .sources
            .iter()
            .find(|s| s.name == name)
            .unwrap_or_else(|| panic!("no source {name}"));
        match src.terms[..] {
            [(col, 1.0)] => col,
            _ => panic!("{name} is not a plain input"),
        }
    }

    /// An asynchronous buck (demo values): 12 V in, ideal switch S1 and
    /// diode D1, L1 = 100 µH, C1 = 100 µF, R = 5 Ω.
    pub(crate) const BUCK: (f64, f64, f64, f64) = (12.0, 100e-6, 100e-6, 5.0);

    /// The buck of [`BUCK`].
    pub(crate) fn buck() -> Circuit {
        let (vin, l, c, r) = BUCK;
        Circuit::builder()
            .voltage_source("Vin", "in", "gnd", vin)
            .switch("S1", "in", "sw", "drive")
            .diode("D1", "gnd", "sw")
            .inductor("L1", "sw", "out", l)
            .capacitor("C1", "out", "gnd", c)
            .resistor("R", "out", "gnd", r)
            .pwm("drive", 100e3, 0.5)
            .build()
            .expect("valid")
    }

    /// Whether `a` and `b` agree to 1e-12 of `scale`.
    pub(crate) fn near(a: f64, b: f64, scale: f64) -> bool {
        (a - b).abs() <= 1e-12 * scale
    }
}

#[cfg(test)]
mod tests {
    use nalgebra::DMatrix;

    use super::{Guard, GuardKind, GuardLine, PackedRows, Sparse};

    /// A row of up to four entries is held in place, a longer one on the
    /// heap, and both give the products of their non-zero entries summed
    /// in index order, to the bit.
    #[test]
    fn sparse_rows_in_place_and_on_the_heap_sum_in_index_order() {
        let z = [0.3, -1.7e-3, 2.5e4, 1.0, -7.25, 0.5, 1e-300];
        for row in [
            vec![0.0, 2.0, 0.0, 0.0, -1.5, 0.0, 0.0],
            vec![1.0, 2.0, 3.0, 0.0, 0.0, 0.0, 4.0],
            vec![0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7],
            vec![0.0; 7],
        ] {
            let sp = Sparse::of(&row);
            let nonzero = row.iter().filter(|v| **v != 0.0).count();
            assert_eq!(matches!(sp, Sparse::Inline { .. }), nonzero <= 4);
            let (mut v, mut s, mut m) = (0.0, 0.0, 0.0);
            for (k, &a) in row.iter().enumerate().filter(|(_, a)| **a != 0.0) {
                let p = a * z[k];
                v += p;
                s += p.abs();
                m += a.abs() * z[k].abs();
            }
            let abs_z: Vec<f64> = z.iter().map(|x| x.abs()).collect();
            assert_eq!(sp.dot(&z).to_bits(), v.to_bits());
            let (dv, ds) = sp.dot_and_magnitude(&z);
            assert_eq!((dv.to_bits(), ds.to_bits()), (v.to_bits(), s.to_bits()));
            assert_eq!(sp.abs_dot(&abs_z).to_bits(), m.to_bits());
        }
    }

    /// Packed rows give each row's sum to the bit of its own `Sparse`
    /// (the same products in the same order), empty rows included, and
    /// stop where the callback says so.
    #[test]
    fn packed_rows_give_the_bits_of_each_sparse_row() {
        let z = [0.3, -1.7e-3, 2.5e4, 1.0, -7.25, 0.0, 1e-300];
        let dense = [
            vec![1.0, 0.0, 0.0, -2.0, 0.0, 0.0, 0.0],
            vec![0.0; 7],
            vec![0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7],
            vec![0.0, 0.0, 0.0, 0.0, 0.0, 0.0, -3.0],
        ];
        let rows: Vec<Sparse> = dense.iter().map(|r| Sparse::of(r)).collect();
        let packed = PackedRows::of(&rows);
        assert_eq!(packed.len(), 4);
        let mut seen = vec![];
        assert!(packed.all(&z, |r, v| {
            seen.push((r, v.to_bits()));
            true
        }));
        let want: Vec<_> = rows
            .iter()
            .enumerate()
            .map(|(r, row)| (r, row.dot(&z).to_bits()))
            .collect();
        assert_eq!(seen, want);
        let mut calls = 0;
        assert!(!packed.all(&z, |r, _| {
            calls += 1;
            r < 1
        }));
        assert_eq!(calls, 2, "stops at the first false");
    }

    /// A guard's line gives the value and derivative sums of its own
    /// sparse rows to the bit, and its floor's kind; a guard whose rows
    /// together have more entries than a line holds is read from its own
    /// rows.
    #[test]
    fn a_guard_line_gives_the_bits_of_its_guards_rows() {
        let z = [0.3, -1.7e-3, 2.5e4, 1.0, -7.25, 0.5, 1e-300];
        // M with a diagonal, so that drow = row·M keeps row's entries.
        let m = DMatrix::from_fn(7, 7, |i, j| match (i, j) {
            _ if i == j => -2.0 - i as f64,
            (0, 6) => 3.5,
            (2, 5) => 1e-3,
            _ => 0.0,
        });
        for (row, wide) in [
            (vec![0.0, 2.0, 0.0, 0.0, -1.5, 0.0, 0.0], false),
            (vec![1.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0], false),
            (vec![0.0, 0.0, 0.7, 0.0, 0.0, 0.0, 0.0], false),
            (vec![0.1, 0.2, 0.3, 0.4, 0.0, 0.0, 0.0], true),
            (vec![0.0; 7], false),
        ] {
            for kind in [GuardKind::DiodeCurrent(0), GuardKind::DiodeVoltage(1)] {
                let g = Guard::new(kind.clone(), row.clone(), &m);
                let line = GuardLine::of(&g);
                let entries = g.srow.entries().len() + g.sdrow.entries().len();
                assert_eq!(entries > GuardLine::ENTRIES, wide, "{row:?}");
                assert_eq!(line.all == GuardLine::WIDE, wide);
                assert_eq!(line.of_current, kind.of_current());
                for zs in [&z[..], &[1.0; 7][..]] {
                    let (v, s) = line.value(zs, || &g);
                    let (wv, ws) = g.srow.dot_and_magnitude(zs);
                    assert_eq!((v.to_bits(), s.to_bits()), (wv.to_bits(), ws.to_bits()));
                    let d = line.slope(zs, || &g);
                    assert_eq!(d.to_bits(), g.sdrow.dot(zs).to_bits());
                }
            }
        }
    }
}
