//! Stage 5, after the loop: the run's energy certificate. At the end of
//! every [`Simulator::advance_to`] the segments recorded since the last
//! check are taken in order, and the energy balance
//!
//! delivered by the sources = dissipated + lost in jumps + change of stored energy
//!
//! is brought up to date; a residual beyond the tolerance of
//! [`crate::Options::energy_tolerance`] stops the run with
//! [`SolverError::EnergyBalance`] instead of handing back the numbers.
//!
//! Each term is exact: the power of a part is v·i with v and i rows of the
//! mode's outputs over z, so over a segment of mode M and length h that
//! starts in z the energy is zᵀ·G·z with the Gramian
//! G(h) = ∫₀ʰ e^{Mᵀs}·Q·e^{Ms} ds (Q the symmetric form of the parts' v·i).
//! Three forms per mode: power delivered by the sources, power absorbed by
//! the other parts, and the stored energy ½·zᵀWz, whose time average is the
//! balance's scale where the net flows are nil. G is computed on the
//! balanced D⁻¹MD, on a step δ = h/2ʲ with ‖D⁻¹MD‖₁·δ ≤ ½, by the Taylor
//! series of its integrand, whose derivatives Tₖ₊₁ = MᵀTₖ + TₖM follow from
//! the Lyapunov form of d/ds e^{Mᵀs}Qe^{Ms} (the series of C. F. Van Loan,
//! "Computing integrals involving the matrix exponential", IEEE Trans.
//! Automatic Control, 1978, without its block exponential), then doubled j
//! times, G(2δ) = G(δ) + e^{Mᵀδ}·G(δ)·e^{Mδ}. Gramians are cached per (mode,
//! length bucket), like the run's exponentials: a segment of a length that
//! came back only adds z·zᵀ to a sum traced once per check (see
//! [`Certifier::segment`]). The stored energy ½·iᵀ·L·i + ½·C·v² is taken at
//! the ends of each stretch of contiguous checked segments, the state at
//! its end from the same Gramians' e^{Mh}, and the jump losses from the
//! event log.
//!
//! The check is independent of how the run advanced: the segments' start
//! states come from the run, the energies from the Gramians of the modes'
//! own equations; a state that drifted from the exact solution, a jump whose
//! loss was misreported, or a mode whose equations break Tellegen's theorem
//! shows as a residual.
//!
//! What is not recorded is not checked (`Record::Window` before its start,
//! `Record::Nothing`, segments sent to a sink), nor a stiff segment (one the
//! run advanced by a single exponential, `propagate::STIFF_SUBSTEPS`: a
//! decay far faster than the segment, as in the 24-diode multiplier or a
//! 1 fH inductor), nor a segment of a circuit with more than [`MAX_DIM`]
//! entries of z: there a Gramian per new length would cost more than the
//! run. The certificate counts that time as unchecked
//! ([`EnergyCertificate::unchecked_time`]).

use std::cmp::Ordering::{Equal, Less};
use std::collections::HashMap;

use nalgebra::DMatrix;

use super::Simulator;
use crate::compile::{BranchKind, Compiled, OutputDef};
use crate::error::SolverError;
use crate::mode::Mode;
use crate::propagate;
use crate::propagate::norm1;

/// The quadratic forms each segment is integrated against: power
/// delivered, power dissipated, stored energy.
const FORMS: usize = 3;

/// Largest extended state z whose segments are checked.
pub const MAX_DIM: usize = 24;

/// Most cached Gramians before the cache starts afresh.
const MAX_GRAMS: usize = 4096;

/// Most doublings of a Gramian: ‖M‖₁·h up to 2^200 (a segment longer
/// than that is counted as unchecked).
const MAX_DOUBLINGS: u32 = 200;

/// The energy balance of a run so far, over the recorded segments it
/// checked (see [`Simulator::certificate`] and
/// [`crate::Options::energy_tolerance`]).
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::{simulate, Options};
///
/// // 1 V into 1 Ω and 1 mH: after 1 ms the inductor holds ½·L·i²,
/// // the resistor has taken the rest of what the source delivered.
/// let c = Circuit::builder()
///     .voltage_source("V1", "in", "gnd", 1.0)
///     .resistor("R1", "in", "a", 1.0)
///     .inductor("L1", "a", "gnd", 1e-3)
///     .build()
///     .unwrap();
/// let run = simulate(&c, 1e-3, Options::default()).unwrap();
/// let cert = run.certificate;
/// let i = 1.0 - (-1.0f64).exp();
/// assert!((cert.stored_change - 0.5e-3 * i * i).abs() < 1e-15);
/// assert!(cert.relative_residual() < 1e-12);
/// ```
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct EnergyCertificate {
    /// Energy delivered by the voltage and current sources (J).
    pub delivered: f64,
    /// Energy absorbed by resistors, diodes, switches (transitions
    /// included) and ideal transformers (J).
    pub dissipated: f64,
    /// Energy lost in charge-sharing and flux-conserving jumps (J).
    pub jumps: f64,
    /// Change of the stored energy ½·iᵀ·L·i + ½·C·v² (J).
    pub stored_change: f64,
    /// Largest stored energy seen at the ends of the checked stretches (J).
    pub stored_peak: f64,
    /// Time average of the stored energy over the checked segments (J):
    /// the scale of a circuit whose net flows are nil (an inductor across
    /// a sine source over whole periods, a source feeding another).
    pub stored_mean: f64,
    /// delivered − dissipated − jumps − stored change (J).
    pub residual: f64,
    /// Segments checked.
    pub checked_segments: usize,
    /// Time checked (s): the sum of the checked segments' lengths.
    pub checked_time: f64,
    /// Time recorded but not checked (s); see the module notes.
    pub unchecked_time: f64,
}

impl EnergyCertificate {
    /// The largest term of the balance (J): the energy delivered, dissipated
    /// or lost in jumps, the largest stored energy at the stretches' ends,
    /// or the mean stored energy.
    pub fn scale(&self) -> f64 {
        self.delivered
            .abs()
            .max(self.dissipated.abs())
            .max(self.jumps.abs())
            .max(self.stored_peak)
            .max(self.stored_mean)
    }

    /// |residual| relative to [`EnergyCertificate::scale`] (0 when nothing
    /// was exchanged).
    pub fn relative_residual(&self) -> f64 {
        let s = self.scale();
        if s > 0.0 {
            self.residual.abs() / s
        } else {
            0.0
        }
    }
}

/// A part of the circuit that exchanges energy: its voltage and current
/// outputs, and whether it is a source.
#[derive(Clone, Copy)]
struct Part {
    v: usize,
    i: usize,
    source: bool,
}

/// A mode's quadratic forms over z: power delivered by the sources and
/// power absorbed by the other parts.
struct Forms {
    /// Power delivered by the sources, power absorbed by the other parts,
    /// and the stored energy ½W, as quadratic forms over z.
    q: [DMatrix<f64>; FORMS],
    /// The balanced D⁻¹MD and D's diagonal, for every Gramian of the mode.
    balanced: (DMatrix<f64>, Vec<f64>),
    /// ‖D⁻¹MD‖₁ of the balanced M.
    norm: f64,
}

/// The Gramians of one (mode, length h₀), e^{Mh₀}, and the sum of z₀·z₀ᵀ
/// over the segments of exactly that length since the last flush.
struct Gram {
    h0: f64,
    phi: DMatrix<f64>,
    /// G of the three forms: power delivered, power dissipated, stored
    /// energy (whose integral over a segment is its time average times h).
    g: [DMatrix<f64>; FORMS],
    /// Σ z₀·z₀ᵀ (its upper triangle, column by column): the energies of
    /// all those segments are traces against it, taken once per check.
    acc: Vec<f64>,
    /// Σ Δ·z₀·z₀ᵀ over segments of length h₀ + Δ with ‖M‖₁·|Δ| within
    /// [`NEAR`]: the first-order change of their energies is the
    /// trace against e^{Mᵀh₀}·Q·e^{Mh₀} (`ends`).
    acc1: Vec<f64>,
    /// Σ Δ²·z₀·z₀ᵀ over the same segments: the second-order change is the
    /// trace against ½·e^{Mᵀh₀}·(MᵀQ + QM)·e^{Mh₀} (`bends`).
    acc2: Vec<f64>,
    /// e^{Mᵀh₀}·Q·e^{Mh₀} of the three forms: the power at the end.
    ends: [DMatrix<f64>; FORMS],
    /// ½·e^{Mᵀh₀}·(MᵀQ + QM)·e^{Mh₀}: half the end power's derivative.
    bends: [DMatrix<f64>; FORMS],
    /// Start states of segments of exactly h₀ not yet in `acc`, one
    /// column of n per segment, at most [`BATCH`] (circuits of at least
    /// [`BATCH_FROM`] entries of z; see [`Gram::accumulate`]).
    batch: Vec<f64>,
    /// In the list of Gramians with something in `acc`.
    dirty: bool,
    /// Segments that took the series of [`energies`] since h₀ was set.
    misses: u32,
    /// Segments summed to second order since h₀ was set.
    seconds: u32,
}

impl Gram {
    /// Adds z·zᵀ to `acc` (and Δ·z·zᵀ to `acc1` where Δ ≠ 0, Δ²·z·zᵀ to
    /// `acc2` where `second`): independent products, no chain of sums, in
    /// a kernel of the dimension's own size.
    ///
    /// A Δ within rounding of h₀ (|Δ|·(1/h₀ + ‖M‖₁) ≤ [`SAME_LENGTH`],
    /// `norm` the balanced ‖M‖₁) counts as 0: the lengths of an
    /// interleaved converter's edges, T/N apart, differ in their last bits
    /// only, and the first-order sum would add a change of the segment's
    /// energy below 8ε of it (the end power over Δ, against the mean power
    /// over h₀ and growth within e^{‖M‖₁h₀}), under the rounding of the
    /// sum itself, for half the work of a segment.
    ///
    /// From [`BATCH_FROM`] entries of z, segments of exactly h₀ (the
    /// common case) are only copied into a batch, and each full batch is
    /// added to the triangle column by column (`drain`): each sum stays
    /// in registers over the batch instead of a load and a store per
    /// segment. Every entry of `acc` receives the same products in the
    /// same order as from a triangle per segment, so the same bits.
    #[inline]
    fn accumulate(&mut self, z: &[f64], d: f64, second: bool, norm: f64) {
        let d = if d != 0.0 && d.abs() * (1.0 / self.h0 + norm) <= SAME_LENGTH {
            0.0
        } else {
            d
        };
        let n = z.len();
        if d == 0.0 && n >= BATCH_FROM {
            self.batch.extend_from_slice(z);
            if self.batch.len() >= BATCH * n {
                self.drain();
            }
            return;
        }
        // A length to the bit with a few entries: the plain sums inline
        // (`outer_add`'s own for these sizes).
        if d == 0.0 {
            let acc = &mut self.acc;
            match n {
                3 => return outer_add_n::<3>(acc, &mut [], &mut [], z, (d, false)),
                4 => return outer_add_n::<4>(acc, &mut [], &mut [], z, (d, false)),
                5 => return outer_add_n::<5>(acc, &mut [], &mut [], z, (d, false)),
                6 => return outer_add_n::<6>(acc, &mut [], &mut [], z, (d, false)),
                _ => {}
            }
        }
        outer_add(
            &mut self.acc,
            &mut self.acc1,
            &mut self.acc2,
            z,
            (d, second),
        );
    }

    /// [`Gram::accumulate`] to second order, out of line (the common
    /// case inline stays small).
    #[inline(never)]
    fn accumulate_second(&mut self, z: &[f64], d: f64, norm: f64) {
        // A few entries: the unrolled sums at once, without the test of
        // sparsity first (the same bits: see `outer_add_sparse`). Beyond
        // [`FIRST_ORDER`], Δ is never within [`SAME_LENGTH`] of h₀.
        debug_assert!(d.abs() * norm > FIRST_ORDER);
        let n = z.len();
        if (3..=6).contains(&n) {
            let (acc, acc1, acc2) = (&mut self.acc, &mut self.acc1, &mut self.acc2);
            match n {
                3 => outer_add_n::<3>(acc, acc1, acc2, z, (d, true)),
                4 => outer_add_n::<4>(acc, acc1, acc2, z, (d, true)),
                5 => outer_add_n::<5>(acc, acc1, acc2, z, (d, true)),
                _ => outer_add_n::<6>(acc, acc1, acc2, z, (d, true)),
            }
            return;
        }
        self.accumulate(z, d, true, norm);
    }

    /// Notes that these Gramians (number `gi`) hold sums not yet flushed:
    /// in `dirty` once.
    #[inline(always)]
    fn mark_dirty(&mut self, gi: usize, dirty: &mut Vec<usize>) {
        if !self.dirty {
            self.dirty = true;
            dirty.push(gi);
        }
    }

    /// Σ z₀ᵀG z₀ of the three forms from `acc` and `acc1`, which it
    /// empties.
    fn flush(&mut self) -> [f64; FORMS] {
        self.drain();
        // Σ_ij G_ij·S_ij: the trace of G·S, S symmetric and kept as its
        // upper triangle.
        let n = self.g[0].nrows();
        let trace = |g: &DMatrix<f64>, acc: &[f64]| -> f64 {
            let mut s = 0.0;
            let mut k = 0;
            for j in 0..n {
                for i in 0..j {
                    s += (g[(i, j)] + g[(j, i)]) * acc[k];
                    k += 1;
                }
                s += g[(j, j)] * acc[k];
                k += 1;
            }
            s
        };
        let out = std::array::from_fn(|f| {
            trace(&self.g[f], &self.acc)
                + trace(&self.ends[f], &self.acc1)
                + trace(&self.bends[f], &self.acc2)
        });
        self.acc.iter_mut().for_each(|a| *a = 0.0);
        self.acc1.iter_mut().for_each(|a| *a = 0.0);
        self.acc2.iter_mut().for_each(|a| *a = 0.0);
        self.dirty = false;
        out
    }

    /// Adds the batch's Σ z·zᵀ to `acc` ([`add_batch`]) and empties the
    /// batch.
    fn drain(&mut self) {
        if self.batch.is_empty() {
            return;
        }
        add_batch(&mut self.acc, &self.batch, self.g[0].nrows());
        self.batch.clear();
    }
}

/// Adds Σ z·zᵀ over the states of `batch` (one after another, `n`
/// entries each) to the packed upper triangle `acc`; from 12 to 20
/// entries column by column (other sizes state by state, [`outer_add`]):
/// each column of the triangle is taken into registers, every state of
/// the batch adds its products in the batch's order, and the column goes
/// back. Each entry thus receives the same products in the same order as
/// from [`outer_add`] state by state, so the same bits: a state whose
/// entry j is zero adds nothing to column j (signed zeros, as
/// [`outer_add`] skips them), and the rows below the diagonal that the
/// vector loop also computes are dropped. On a processor with AVX the
/// same loop runs four rows to an instruction (multiplications and
/// additions, never fused, as in `propagate::columns`).
fn add_batch(acc: &mut [f64], batch: &[f64], n: usize) {
    macro_rules! fixed {
        ($($n:literal)*) => {
            match n {
                $($n => return add_batch_fixed::<$n>(acc, batch),)*
                _ => {}
            }
        };
    }
    fixed!(12 13 14 15 16 17 18 19 20);
    // Other sizes: the triangle state by state, by definition the bits.
    for z in batch.chunks_exact(n) {
        outer_add(acc, &mut [], &mut [], z, (0.0, false));
    }
}

/// [`add_batch`] for `N` entries, on AVX where the processor has it.
fn add_batch_fixed<const N: usize>(acc: &mut [f64], batch: &[f64]) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx") {
        // SAFETY: `add_batch_avx` needs AVX alone, which the processor
        // was just found to have.
        return unsafe { add_batch_avx::<N>(acc, batch) };
    }
    add_batch_plain::<N>(acc, batch)
}

/// [`add_batch_plain`] compiled for AVX (no fused multiply–add, so the
/// operations and their rounding are those of the plain build).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx")]
fn add_batch_avx<const N: usize>(acc: &mut [f64], batch: &[f64]) {
    add_batch_plain::<N>(acc, batch)
}

/// The loop of [`add_batch`] for `N` entries (at most 20): column j of
/// the triangle in the fewest whole vectors of four rows that hold it
/// ([`add_batch_column`]).
#[inline(always)]
fn add_batch_plain<const N: usize>(acc: &mut [f64], batch: &[f64]) {
    let mut k = 0;
    for j in 0..N {
        let col = &mut acc[k..=k + j];
        match j / 4 {
            0 => add_batch_column::<N, 4>(col, batch, j),
            1 => add_batch_column::<N, 8>(col, batch, j),
            2 => add_batch_column::<N, 12>(col, batch, j),
            3 => add_batch_column::<N, 16>(col, batch, j),
            _ => add_batch_column::<N, 20>(col, batch, j),
        }
        k += j + 1;
    }
}

/// Column j of [`add_batch_plain`]: its j + 1 sums (`col`) and the rows
/// below them up to `R` (at least j + 1) in registers over the batch;
/// the rows below are dropped.
#[inline(always)]
fn add_batch_column<const N: usize, const R: usize>(col: &mut [f64], batch: &[f64], j: usize) {
    let mut sums = [0.0f64; R];
    for (s, &a) in sums.iter_mut().zip(col.iter()) {
        *s = a;
    }
    // The rows of the states that exist (R may pass N by up to three).
    let rows = R.min(N);
    for z in batch.chunks_exact(N) {
        let z: &[f64; N] = z.try_into().expect("chunks of N");
        let zj = z[j];
        if zj != 0.0 {
            for i in 0..rows {
                sums[i] += z[i] * zj;
            }
        }
    }
    for (a, &s) in col.iter_mut().zip(sums.iter()) {
        *a = s;
    }
}

/// Segments per batch of [`Gram::accumulate`]: 16 ran the twelve-phase
/// bench 2 % faster than 32 (a batch per mode and length, twelve of them
/// in turn, stays in the first-level cache).
const BATCH: usize = 16;

/// Fewest entries of z for which [`Gram::accumulate`] batches segments
/// (below, a triangle per segment is a handful of products, kept inline
/// in kernels of their own size).
const BATCH_FROM: usize = 12;

/// Lengths with the same sign and binary exponent (within a factor of two)
/// share a cached Gramian (see [`Certifier::segment`]). Narrower buckets
/// (8 bits of mantissa, 0.4 %) made a converter that settles over hundreds
/// of periods cross a new bucket every few periods: 759 Gramians for the
/// start-up of the transitions bench, against 119 with these.
const BUCKET_BITS: u32 = 52;

/// A hasher for the cache's (mode, length bucket) keys: one multiply per
/// word (the keys are not chosen by anyone, so no defence against crafted
/// collisions is needed).
#[derive(Default, Clone, Copy)]
struct KeyHasher(u64);

impl std::hash::Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(u64::from(b));
        }
    }
    fn write_u32(&mut self, x: u32) {
        self.write_u64(u64::from(x));
    }
    fn write_u64(&mut self, x: u64) {
        self.0 = (self.0.rotate_left(5) ^ x).wrapping_mul(0x51_7c_c1_b7_27_22_0a_95);
    }
}

type Keys = std::hash::BuildHasherDefault<KeyHasher>;

/// What the certificate stage keeps between checks.
pub(super) struct Certifier {
    parts: Vec<Part>,
    /// ½W: the stored energy is ½·zᵀ·W·z.
    half_w: DMatrix<f64>,
    forms: Vec<Option<Forms>>,
    grams: Vec<Gram>,
    /// Where each (mode, length bucket) has its Gramians in `grams`.
    index: HashMap<(u32, u64), usize, Keys>,
    /// Per mode: the bucket and the Gramians of its last segment, so that
    /// a length that came back skips the lookup (u64::MAX: none).
    last: Vec<(u64, usize)>,
    /// Keys of the Gramians with segments in their `acc`.
    dirty: Vec<usize>,
    /// The next segment to check.
    next: usize,
    /// The next jump of the event log to count.
    jump: usize,
    /// The stretch of contiguous checked segments that is still open: the
    /// stored energy at its start, its end time, and its last segment
    /// (number, mode, length).
    open: Option<Stretch>,
    /// Stored energy gained over the stretches already closed (J).
    closed: f64,
    /// ∫ stored energy dt over the checked segments (J·s).
    stored_integral: f64,
    /// Scratch of the series for a length near a cached one.
    shift: Shift,
    pub(super) cert: EnergyCertificate,
}

/// See [`Certifier::open`].
#[derive(Clone, Copy)]
struct Stretch {
    start: f64,
    t1: f64,
    last: usize,
}

impl Certifier {
    /// The parts of `cc` that exchange energy with the stored energy:
    /// every branch but inductor windings and capacitors.
    pub(super) fn new(cc: &Compiled) -> Certifier {
        let find = |want: &dyn Fn(&OutputDef) -> bool| cc.outputs.iter().position(|(_, d)| want(d));
        let mut parts = vec![];
        for (b, br) in cc.branches.iter().enumerate() {
            let source = match br.kind {
                BranchKind::Winding { .. } | BranchKind::Capacitor { .. } => continue,
                BranchKind::VSource { .. } | BranchKind::ISource { .. } => true,
                _ => false,
            };
            let v = find(&|d| matches!(d, OutputDef::BranchVoltage(x) if *x == b));
            let i = find(&|d| matches!(d, OutputDef::BranchCurrent(x) if *x == b));
            if let (Some(v), Some(i)) = (v, i) {
                parts.push(Part { v, i, source });
            }
            if let BranchKind::Transformer { .. } = br.kind {
                let v = find(&|d| matches!(d, OutputDef::SecondaryVoltage(x) if *x == b));
                let i = find(&|d| matches!(d, OutputDef::SecondaryCurrent(x) if *x == b));
                if let (Some(v), Some(i)) = (v, i) {
                    parts.push(Part { v, i, source });
                }
            }
        }
        let n = cc.n_z();
        let mut half_w = DMatrix::zeros(n, n);
        for g in &cc.groups {
            for (i, &si) in g.states.iter().enumerate() {
                for (j, &sj) in g.states.iter().enumerate() {
                    half_w[(si, sj)] += 0.5 * g.l[(i, j)];
                }
            }
        }
        for &(st, cap) in &cc.caps {
            half_w[(st, st)] += 0.5 * cap;
        }
        Certifier {
            parts,
            half_w,
            forms: vec![],
            grams: vec![],
            index: HashMap::default(),
            last: vec![],
            dirty: vec![],
            next: 0,
            jump: 0,
            open: None,
            closed: 0.0,
            stored_integral: 0.0,
            shift: Shift::default(),
            cert: EnergyCertificate::default(),
        }
    }

    /// Adds the energies of the segments summed in the Gramians since the
    /// last flush.
    fn flush(&mut self) {
        for gi in std::mem::take(&mut self.dirty) {
            if let Some(g) = self.grams.get_mut(gi) {
                let e = g.flush();
                self.add(e);
            }
        }
    }

    /// Adds the three energies of some segments to the totals.
    fn add(&mut self, [d, s, e]: [f64; FORMS]) {
        self.cert.delivered += d;
        self.cert.dissipated += s;
        self.stored_integral += e;
    }

    /// Closes the open stretch: its stored energy gain is final, and the
    /// next segment starts a new one (also when the state was set from
    /// outside).
    pub(super) fn close(&mut self, wave: &crate::waveform::Waveform) {
        if let Some(s) = self.open.take() {
            let end = self.end_energy(wave, s.last);
            self.closed += end - s.start;
            self.cert.stored_peak = self.cert.stored_peak.max(end.abs());
        }
    }

    /// The stored energy at the end of recorded segment `i` (checked, so
    /// its Gramian is cached).
    fn end_energy(&mut self, wave: &crate::waveform::Waveform, i: usize) -> f64 {
        let seg = &wave.segments[i];
        let n = wave.n_z;
        let z0 = &wave.states[i * n..(i + 1) * n];
        let mode = &wave.modes[seg.mode as usize];
        match self.segment(seg.mode, mode, seg.len, z0, false) {
            Some(e) => e[4],
            None => f64::NAN,
        }
    }

    /// The quadratic forms of mode `k`.
    fn forms(&mut self, k: usize, mode: &Mode) -> &Forms {
        if self.forms.len() <= k {
            self.forms.resize_with(k + 1, || None);
        }
        let parts = &self.parts;
        let half_w = &self.half_w;
        self.forms[k].get_or_insert_with(|| {
            let n = mode.m.nrows();
            let mut delivered = DMatrix::zeros(n, n);
            let mut dissipated = DMatrix::zeros(n, n);
            for p in parts {
                // A floating part carries no current (its power is 0).
                if mode.undetermined[p.v] || mode.undetermined[p.i] {
                    continue;
                }
                let (cv, ci) = (mode.c.row(p.v), mode.c.row(p.i));
                let outer = 0.5 * (cv.transpose() * ci + ci.transpose() * cv);
                if p.source {
                    delivered -= outer;
                } else {
                    dissipated += outer;
                }
            }
            let balanced = crate::propagate::balancing(&mode.m);
            // Of the balanced M: what the series in Δ converges with.
            let norm = norm1(&balanced.0);
            Forms {
                q: [delivered, dissipated, half_w.clone()],
                balanced,
                norm,
            }
        })
    }

    /// Energy delivered and dissipated over a segment of `mode` (number
    /// `k`) and length `h` from `z0`, the integral of the stored energy
    /// over it, and the stored energy at its start and at its end; `None`
    /// where the Gramians cannot be had (see [`gramians`]). With
    /// `accumulate`, a segment of exactly the cached
    /// length is only added to the Gramian's sum (its energies come at the
    /// flush, and the five numbers returned are NaN).
    ///
    /// Lengths of one bucket (see [`BUCKET_BITS`]) share the Gramians of
    /// a length h₀ met before, as long as ‖D⁻¹MD‖₁·|h − h₀| ≤ 1/8 (else, or
    /// after [`REANCHOR`] lengths in the series, the length gets Gramians
    /// of its own, which replace h₀'s): a located
    /// instant of a settled converter comes back within a few units in the
    /// last place, a converter that is still settling moves it a little
    /// each period, and a Gramian per length would cost more than the run.
    /// The energies then come from the series of [`energies`].
    #[inline(always)]
    fn segment(
        &mut self,
        k: u32,
        mode: &Mode,
        h: f64,
        z0: &[f64],
        accumulate: bool,
    ) -> Option<[f64; 5]> {
        // The common case first, inline in the loop over segments: the
        // bucket of this mode's last segment, and a length within
        // [`NEAR`] of its Gramians' (what the general path would do with
        // it, without the lookups).
        if accumulate {
            if let (Some(&(b, gi)), Some(Some(f))) =
                (self.last.get(k as usize), self.forms.get(k as usize))
            {
                let g = &mut self.grams[gi];
                let d = h - g.h0;
                let q = d.abs() * f.norm;
                // To second order while the Gramians have not summed
                // [`RESETTLE`] such segments (past that, the general path
                // makes the length's own).
                let second = q > FIRST_ORDER;
                if b == h.to_bits() >> BUCKET_BITS && q <= NEAR && (!second || g.seconds < RESETTLE)
                {
                    if second {
                        g.seconds += 1;
                        g.accumulate_second(z0, d, f.norm);
                    } else {
                        g.accumulate(z0, d, false, f.norm);
                    }
                    g.mark_dirty(gi, &mut self.dirty);
                    return Some([f64::NAN; 5]);
                }
            }
        }
        self.segment_general(k, mode, h, z0, accumulate)
    }

    /// [`Certifier::segment`] past its common case, out of line.
    #[inline(never)]
    fn segment_general(
        &mut self,
        k: u32,
        mode: &Mode,
        h: f64,
        z0: &[f64],
        accumulate: bool,
    ) -> Option<[f64; 5]> {
        let bucket = h.to_bits() >> BUCKET_BITS;
        let key = (k, bucket);
        let forms = self.forms(k as usize, mode);
        let norm = forms.norm;
        let reach = 0.125 / norm;
        let fresh = match self.index.get(&key).map(|&gi| &self.grams[gi]) {
            Some(g) => {
                let d = (h - g.h0).abs();
                // A NaN distance is out of reach too.
                let within = matches!(d.partial_cmp(&reach), Some(Less | Equal));
                !within
                    || (g.misses >= REANCHOR && d * norm > NEAR)
                    || (g.seconds >= RESETTLE && d * norm > FIRST_ORDER)
            }
            None => true,
        };
        if fresh {
            let f = self.forms[k as usize].as_ref().expect("made above");
            let g = gramians(&f.balanced, f.q.each_ref(), h)?;
            if self.grams.len() >= MAX_GRAMS {
                self.flush();
                self.grams.clear();
                self.index.clear();
                self.last.clear();
            }
            match self.index.get(&key) {
                Some(&gi) => {
                    let mut old = std::mem::replace(&mut self.grams[gi], g);
                    let e = old.flush();
                    self.add(e);
                    // Its place in `dirty`, if any, now stands for the new
                    // Gramians, which start clean.
                    self.dirty.retain(|&x| x != gi);
                }
                None => {
                    self.index.insert(key, self.grams.len());
                    self.grams.push(g);
                }
            }
        }
        let gi = self.index[&key];
        if self.last.len() <= k as usize {
            self.last.resize(k as usize + 1, (u64::MAX, 0));
        }
        self.last[k as usize] = (bucket, gi);
        let g = &mut self.grams[gi];
        let f = self.forms[k as usize].as_ref().expect("made above");
        let mut e = [f64::NAN; 5];
        let d = h - g.h0;
        if accumulate && d.abs() * f.norm <= NEAR {
            // The common case: a length that came back to the bit, or
            // within rounding of the absolute time it was computed from.
            // The second-order term is below ‖M‖₁·|Δ| of the first: with
            // that under [`FIRST_ORDER`] (lengths that differ by rounding),
            // it is left out.
            let second = d.abs() * f.norm > FIRST_ORDER;
            g.seconds += u32::from(second);
            g.accumulate(z0, d, second, f.norm);
            g.mark_dirty(gi, &mut self.dirty);
            return Some(e);
        }
        g.misses += u32::from(accumulate);
        let [a, b, c] = energies(g, &mode.m, f.q.each_ref(), (z0, h), &mut self.shift);
        e[..3].copy_from_slice(&[a, b, c]);
        e[3] = quadratic(&self.half_w, z0);
        e[4] = quadratic(&self.half_w, &self.shift.end);
        Some(e)
    }
}

/// G(h) and e^{Mh} for the forms `qs` of a mode balanced as `(mb, dg)` (see
/// the module notes); `None` when
/// the segment is too long for [`MAX_DOUBLINGS`] or a number is not finite.
fn gramians(
    (mb, dg): &(DMatrix<f64>, Vec<f64>),
    qs: [&DMatrix<f64>; FORMS],
    h: f64,
) -> Option<Gram> {
    // On the balanced D⁻¹MD (D powers of two): a circuit scaled in
    // impedance holds 1/L and 1/C entries 10²⁴ apart for the same
    // dynamics, and a norm-based step would lose the small ones.
    // G = D⁻¹·G̃·D⁻¹ with G̃ the Gramian of D⁻¹MD and D·Q·D, and
    // e^{Mh} = D·e^{M̃h}·D⁻¹. The balancing is the mode's
    // (`propagate::balancing`, kept in its `Forms`).
    let n = mb.nrows();
    let norm = norm1(mb);
    let mut j = 0u32;
    while norm * h / 2f64.powi(j as i32) > 0.5 {
        j += 1;
        if j > MAX_DOUBLINGS {
            return None;
        }
    }
    let d = h / 2f64.powi(j as i32);
    // B = M̃δ, ‖B‖₁ = β ≤ ½.
    let beta = norm * d;
    let b: Vec<f64> = mb.as_slice().iter().map(|v| v * d).collect();
    let mut k = Kernel::new(n);
    // F = e^B − I by its Taylor series, without the identity (as
    // `propagate::expm`): term k is below βᵏ/k!, and the series stops
    // where that is below 2⁻⁵⁶ of β.
    let mut f = b.clone();
    let mut term = b.clone();
    let mut bound = beta;
    for i in 2..=TAYLOR_TERMS {
        bound *= beta / i as f64;
        if bound <= TAYLOR_EPS * beta {
            break;
        }
        k.mul(&term, &b);
        let c = 1.0 / i as f64;
        for ((t, x), fv) in term.iter_mut().zip(&k.out).zip(f.iter_mut()) {
            *t = x * c;
            *fv += *t;
        }
    }
    // G̃(δ) = δ·Σₖ Tₖ/(k+1)! with T₀ = Q̃ and Tₖ₊₁ = BᵀTₖ + TₖB (the
    // derivatives of e^{Bᵀs}Q̃e^{Bs} at 0): Tₖ is symmetric, so Tₖ₊₁ is
    // X + Xᵀ with X = TₖB, one product. ‖Tₖ‖₁ ≤ (2β)ᵏ‖Q̃‖₁.
    // Q̃ = D·Q·D of each form, for the series and the end powers.
    let qbs: [Vec<f64>; FORMS] = qs.map(|q| {
        (0..n * n)
            .map(|i| q.as_slice()[i] * dg[i % n] * dg[i / n])
            .collect()
    });
    let mut gs: [Vec<f64>; FORMS] = std::array::from_fn(|_| vec![0.0; n * n]);
    for (g, qb) in gs.iter_mut().zip(&qbs) {
        let mut t = qb.clone();
        g.copy_from_slice(&t);
        let (mut bound, mut coef) = (1.0, 1.0);
        for i in 1..=TAYLOR_TERMS {
            bound *= 2.0 * beta / (i + 1) as f64;
            if bound <= TAYLOR_EPS {
                break;
            }
            coef /= (i + 1) as f64;
            k.mul(&t, &b);
            k.symmetric_part(1.0, &mut t);
            for (gv, tv) in g.iter_mut().zip(&t) {
                *gv += coef * tv;
            }
        }
        g.iter_mut().for_each(|v| *v *= d);
    }
    // j doublings: G(2δ) = G + ΦᵀGΦ with Φ = I + F, that is
    // 2G + Y + Yᵀ + FᵀY with Y = GF; and F(2δ) = 2F + F².
    let mut y = vec![0.0; n * n];
    for _ in 0..j {
        for g in gs.iter_mut() {
            k.mul(g, &f);
            y.copy_from_slice(&k.out);
            k.mul_tn(&f, &y);
            for c in 0..n {
                for r in 0..n {
                    let i = r + c * n;
                    g[i] = 2.0 * g[i] + y[i] + y[c + r * n] + k.out[i];
                }
            }
        }
        k.mul(&f, &f);
        for (fv, sq) in f.iter_mut().zip(&k.out) {
            *fv = 2.0 * *fv + sq;
        }
    }
    // Φ = I + F, and for each form the end power E = ΦᵀQ̃Φ and half its
    // derivative ½Φᵀ(M̃ᵀQ̃ + Q̃M̃)Φ, which is the symmetric part of E·M̃
    // because Φ and M̃ commute.
    let mut phi_b = f;
    for i in 0..n {
        phi_b[i + i * n] += 1.0;
    }
    let mut ends: [Vec<f64>; FORMS] = std::array::from_fn(|_| vec![0.0; n * n]);
    let mut bends: [Vec<f64>; FORMS] = std::array::from_fn(|_| vec![0.0; n * n]);
    for ((e, be), qb) in ends.iter_mut().zip(bends.iter_mut()).zip(&qbs) {
        k.mul(qb, &phi_b);
        y.copy_from_slice(&k.out);
        k.mul_tn(&phi_b, &y);
        e.copy_from_slice(&k.out);
        k.mul(e, mb.as_slice());
        k.symmetric_part(0.5, be);
    }
    // Back from the balanced coordinates.
    let unbalance = |x: &[f64]| DMatrix::from_fn(n, n, |r, c| x[r + c * n] / dg[r] / dg[c]);
    let phi = DMatrix::from_fn(n, n, |r, c| phi_b[r + c * n] * dg[r] / dg[c]);
    let g = gs.map(|g| unbalance(&g));
    let ends = ends.map(|e| unbalance(&e));
    let bends = bends.map(|b| unbalance(&b));
    let finite = |x: &DMatrix<f64>| x.iter().all(|v| v.is_finite());
    (finite(&phi) && g.iter().all(finite)).then_some(Gram {
        h0: h,
        phi,
        g,
        acc: vec![0.0; n * (n + 1) / 2],
        acc1: vec![0.0; n * (n + 1) / 2],
        acc2: vec![0.0; n * (n + 1) / 2],
        batch: Vec::new(),
        ends,
        bends,
        dirty: false,
        misses: 0,
        seconds: 0,
    })
}

/// Most terms of the Taylor series of [`gramians`]: at β = ½ the bound
/// (2β)ᵏ/(k+1)! is below 2⁻⁵⁶ from k = 18 on.
const TAYLOR_TERMS: usize = 24;

/// Where [`gramians`] stops its series: 2⁻⁵⁶, below half a unit in the
/// last place.
const TAYLOR_EPS: f64 = 1.0 / 72_057_594_037_927_936.0;

/// Products of small column-major n×n matrices into a buffer of its own:
/// at a converter's 2–24 states a plain loop beats a general product,
/// whose packing and set-up dominate at that size.
struct Kernel {
    n: usize,
    out: Vec<f64>,
}

impl Kernel {
    fn new(n: usize) -> Kernel {
        Kernel {
            n,
            out: vec![0.0; n * n],
        }
    }

    /// out = A·B.
    fn mul(&mut self, a: &[f64], b: &[f64]) {
        let n = self.n;
        self.out.iter_mut().for_each(|v| *v = 0.0);
        for (col, bc) in self.out.chunks_exact_mut(n).zip(b.chunks_exact(n)) {
            for (ac, &bkj) in a.chunks_exact(n).zip(bc) {
                for (o, &aik) in col.iter_mut().zip(ac) {
                    *o += aik * bkj;
                }
            }
        }
    }

    /// y = c·(out + outᵀ).
    fn symmetric_part(&self, c: f64, y: &mut [f64]) {
        let (n, x) = (self.n, &self.out);
        for col in 0..n {
            for r in 0..n {
                y[r + col * n] = c * (x[r + col * n] + x[col + r * n]);
            }
        }
    }

    /// out = Aᵀ·B.
    fn mul_tn(&mut self, a: &[f64], b: &[f64]) {
        let n = self.n;
        for (j, bc) in b.chunks_exact(n).enumerate() {
            for (i, ac) in a.chunks_exact(n).enumerate() {
                self.out[i + j * n] = dot(ac, bc);
            }
        }
    }
}

/// A length h₀ + Δ with ‖M‖₁·|Δ| ≤ NEAR (M balanced) is summed with a
/// cached length h₀ to second order in Δ: a located instant of a settled
/// converter comes back within a few units in the last place, a length
/// from a gate edge to it within rounding of the absolute time (for a
/// 4 ns ramp at t = 10 ms that is 1e-8 of the length), and a converter
/// that is still settling moves it by about 1e-9 of its time constants
/// per period. The third-order term left out, Δ³/6·e^{Mᵀh₀}(M²ᵀQ +
/// 2MᵀQM + QM²)e^{Mh₀}, is in norm below ⅔·(‖M‖₁·|Δ|)² ≤ 7e-11 of the
/// first-order term Δ·e^{Mᵀh₀}Qe^{Mh₀} that is kept: the energy of the
/// end power over 7e-11·|Δ|, where |Δ| is itself below 1e-5 of the
/// shortest time constant.
const NEAR: f64 = 1e-5;

/// Below this ‖M‖₁·|Δ|, [`Gram::accumulate`] leaves out the second-order
/// term, which is then below 1e-9 of the first-order term: the energy of
/// the end power over 1e-9·|Δ| with |Δ| itself below 1e-9 of the
/// shortest time constant.
const FIRST_ORDER: f64 = 1e-9;

/// A Δ with |Δ|·(1/h₀ + ‖M‖₁) at most this is a length equal to h₀ but
/// for rounding (see [`Gram::accumulate`]).
const SAME_LENGTH: f64 = 8.0 * f64::EPSILON;

/// After this many segments summed to second order, the next one beyond
/// [`FIRST_ORDER`] gets Gramians of its own: a converter that settled
/// after its length's Gramians were made comes back to a length a little
/// off them, and its second-order sums cost more, over a thousand
/// segments, than a Gramian of the settled length.
const RESETTLE: u32 = 1024;

/// After this many segments through the series of [`energies`], the next
/// length of the bucket beyond [`NEAR`] gets Gramians of its own: a
/// converter that settles moves its located lengths away from the first
/// one met, and a settled length then sums at the cost of an exact one.
const REANCHOR: u32 = 16;

/// Most terms of the series in Δ of [`energies`].
const MAX_TERMS: usize = 40;

/// Scratch of [`energies`]: p_a = Mᵃ·e^{Mh₀}·z₀, Q·p_a for each form, one
/// after another, and the end state.
#[derive(Default)]
struct Shift {
    p: Vec<f64>,
    r: [Vec<f64>; FORMS],
    end: Vec<f64>,
}

/// The three energies (delivered, dissipated, ∫ stored) over a segment of
/// length `h` from `z0` with the Gramians `g` of a length h₀ near it
/// (‖M‖₁·|h − h₀| ≤ 1/8 on the balanced M), and its end state in
/// `sh.end`. With y = e^{Mh₀}·z₀, Δ = h − h₀ and p_a = Mᵃ·y:
///
/// z₀ᵀG(h)z₀ = z₀ᵀG(h₀)z₀ + yᵀG(Δ)y (from G(h₀ + Δ) = G(h₀) +
/// e^{Mᵀh₀}·G(Δ)·e^{Mh₀}), yᵀG(Δ)y = Σₖ Δᵏ⁺¹/(k+1)! · Σₐ C(k,a)·p_aᵀ·Q·p_{k−a}
/// (the Taylor series of e^{Mᵀs}·Q·e^{Ms} integrated), and the end state
/// Σₖ Δᵏ/k!·p_k; summed until a term is below 1e-17 of its sum (terms
/// shrink at least eightfold).
fn energies(
    g: &Gram,
    m: &DMatrix<f64>,
    qs: [&DMatrix<f64>; FORMS],
    (z0, h): (&[f64], f64),
    sh: &mut Shift,
) -> [f64; FORMS] {
    let n = z0.len();
    let mut out: [f64; FORMS] = std::array::from_fn(|f| quadratic(&g.g[f], z0));
    sh.end.resize(n, 0.0);
    crate::propagate::matvec(&g.phi, z0, &mut sh.end);
    let d = h - g.h0;
    if d == 0.0 {
        return out;
    }
    let size = (MAX_TERMS + 1) * n;
    sh.p.resize(size, 0.0);
    for r in &mut sh.r {
        r.resize(size, 0.0);
    }
    sh.p[..n].copy_from_slice(&sh.end);
    let mut sums = [0.0; FORMS];
    // Δᵏ⁺¹/(k+1)! and Δᵏ/k!.
    let (mut c_int, mut c_state) = (d, 1.0);
    for k in 0..MAX_TERMS {
        if k > 0 {
            let (done, rest) = sh.p.split_at_mut(k * n);
            crate::propagate::matvec(m, &done[(k - 1) * n..], &mut rest[..n]);
            c_state *= d / k as f64;
            for (e, p) in sh.end.iter_mut().zip(&rest[..n]) {
                *e += c_state * p;
            }
        }
        let pk = &sh.p[k * n..(k + 1) * n];
        let mut done = k >= 1;
        for ((q, r), sum) in qs.iter().zip(sh.r.iter_mut()).zip(sums.iter_mut()) {
            crate::propagate::matvec(q, pk, &mut r[k * n..(k + 1) * n]);
            let mut t = 0.0;
            let mut binom = 1.0;
            for a in 0..=k {
                let b = k - a;
                t += binom * dot(&sh.p[a * n..(a + 1) * n], &r[b * n..(b + 1) * n]);
                binom = binom * (k - a) as f64 / (a + 1) as f64;
            }
            *sum += c_int * t;
            done &= (c_int * t).abs() <= 1e-17 * sum.abs();
        }
        if done {
            break;
        }
        c_int *= d / (k + 2) as f64;
    }
    for (o, s) in out.iter_mut().zip(sums) {
        *o += s;
    }
    out
}

/// acc += z·zᵀ, acc1 += Δ·z·zᵀ where Δ ≠ 0, and acc2 += Δ²·z·zᵀ where
/// `second`, each kept as its upper triangle column by column; unrolled
/// for n up to 12.
#[inline]
fn outer_add(
    acc: &mut [f64],
    acc1: &mut [f64],
    acc2: &mut [f64],
    z: &[f64],
    (d, second): (f64, bool),
) {
    if outer_add_sparse(acc, acc1, acc2, z, (d, second)) {
        return;
    }
    macro_rules! fixed {
        ($($n:literal)*) => {
            match z.len() {
                $($n => outer_add_n::<$n>(acc, acc1, acc2, z, (d, second)),)*
                _ => outer_add_columns(acc, acc1, acc2, z, (d, second)),
            }
        };
    }
    fixed!(1 2 3 4 5 6 7 8 9 10 11 12);
}

#[inline(always)]
fn outer_add_n<const N: usize>(
    acc: &mut [f64],
    acc1: &mut [f64],
    acc2: &mut [f64],
    z: &[f64],
    (d, second): (f64, bool),
) {
    let z: &[f64; N] = z.try_into().expect("length N");
    let len = N * (N + 1) / 2;
    let acc = &mut acc[..len];
    if d == 0.0 {
        // A column of a zero entry adds only signed zeros (the derivative
        // of a constant source is one in every segment): skipped, the same
        // sums (see `outer_add_sparse`).
        let mut k = 0;
        for j in 0..N {
            if z[j] != 0.0 {
                for i in 0..=j {
                    acc[k + i] += z[i] * z[j];
                }
            }
            k += j + 1;
        }
        return;
    }
    let acc1 = &mut acc1[..len];
    if !second {
        let mut k = 0;
        for j in 0..N {
            for i in 0..=j {
                let p = z[i] * z[j];
                acc[k] += p;
                acc1[k] += d * p;
                k += 1;
            }
        }
        return;
    }
    let acc2 = &mut acc2[..len];
    let d2 = d * d;
    let mut k = 0;
    for j in 0..N {
        for i in 0..=j {
            let p = z[i] * z[j];
            acc[k] += p;
            acc1[k] += d * p;
            acc2[k] += d2 * p;
            k += 1;
        }
    }
}

/// The most entries of z for [`outer_add_sparse`], whose index arrays are
/// on the stack (arrays of 64 cost more to clear than the sums they saved).
const SPARSE_MAX: usize = 16;

/// [`outer_add`] over the non-zero entries of z only, where at most half
/// of its pairs are non-zero (true: done), else false and nothing done.
/// A product with a zero entry adds a signed zero, which leaves every
/// sum as it is (a sum is never −0: it starts at +0, and x + (−x) is +0),
/// so the bits are those of the whole triangle. The ramp states of
/// switches with transition models are zero outside their transitions:
/// the transitions bench's z has 10 entries, 4 to 6 non-zero.
fn outer_add_sparse(
    acc: &mut [f64],
    acc1: &mut [f64],
    acc2: &mut [f64],
    z: &[f64],
    (d, second): (f64, bool),
) -> bool {
    let n = z.len();
    // Below 8 entries the dense fixed sizes are cheaper than gathering.
    if !(8..=SPARSE_MAX).contains(&n) {
        return false;
    }
    // The non-zero entries: their values, and the offsets of their columns
    // (j(j+1)/2) and rows (j) in the packed triangle.
    let mut val = [0.0f64; SPARSE_MAX];
    let mut col = [0usize; SPARSE_MAX];
    let mut row = [0usize; SPARSE_MAX];
    let mut m = 0;
    for (j, &v) in z.iter().enumerate() {
        if v != 0.0 {
            val[m] = v;
            col[m] = j * (j + 1) / 2;
            row[m] = j;
            m += 1;
        }
    }
    if 2 * m * (m + 1) > n * (n + 1) {
        return false;
    }
    let (val, col, row) = (&val[..m], &col[..m], &row[..m]);
    let pairs = val.iter().zip(col).enumerate();
    if d == 0.0 {
        for (b, (&zj, &base)) in pairs {
            for (&zi, &i) in val[..=b].iter().zip(&row[..=b]) {
                acc[base + i] += zi * zj;
            }
        }
    } else if !second {
        for (b, (&zj, &base)) in pairs {
            for (&zi, &i) in val[..=b].iter().zip(&row[..=b]) {
                let p = zi * zj;
                acc[base + i] += p;
                acc1[base + i] += d * p;
            }
        }
    } else {
        let d2 = d * d;
        for (b, (&zj, &base)) in pairs {
            for (&zi, &i) in val[..=b].iter().zip(&row[..=b]) {
                let p = zi * zj;
                acc[base + i] += p;
                acc1[base + i] += d * p;
                acc2[base + i] += d2 * p;
            }
        }
    }
    true
}

/// [`outer_add`] for any n, column by column of the triangle: the same
/// products and sums in the same order as the fixed sizes, each column's
/// entries as one slice operation (which the compiler can vectorise),
/// where an element-by-element loop cost 28 instructions a pair at 13
/// states.
fn outer_add_columns(
    acc: &mut [f64],
    acc1: &mut [f64],
    acc2: &mut [f64],
    z: &[f64],
    (d, second): (f64, bool),
) {
    // The branch on Δ outside the loop over columns, and the packed
    // triangle walked as consecutive column slices (`split_at_mut`): no
    // bounds to check per column. Same products and sums as before.
    let n = z.len();
    let len = n * (n + 1) / 2;
    if d == 0.0 {
        let mut rest = &mut acc[..len];
        for (j, &zj) in z.iter().enumerate() {
            let (a, tail) = rest.split_at_mut(j + 1);
            rest = tail;
            // A zero entry's column adds signed zeros only: skipped.
            if zj == 0.0 {
                continue;
            }
            for (a, &zi) in a.iter_mut().zip(&z[..=j]) {
                *a += zi * zj;
            }
        }
    } else if !second {
        let (mut rest, mut rest1) = (&mut acc[..len], &mut acc1[..len]);
        for (j, &zj) in z.iter().enumerate() {
            let (a, tail) = rest.split_at_mut(j + 1);
            rest = tail;
            let (a1, tail1) = rest1.split_at_mut(j + 1);
            rest1 = tail1;
            for ((a, a1), &zi) in a.iter_mut().zip(a1.iter_mut()).zip(&z[..=j]) {
                let p = zi * zj;
                *a += p;
                *a1 += d * p;
            }
        }
    } else {
        let d2 = d * d;
        let (mut rest, mut rest1, mut rest2) =
            (&mut acc[..len], &mut acc1[..len], &mut acc2[..len]);
        for (j, &zj) in z.iter().enumerate() {
            let (a, tail) = rest.split_at_mut(j + 1);
            rest = tail;
            let (a1, tail1) = rest1.split_at_mut(j + 1);
            rest1 = tail1;
            let (a2, tail2) = rest2.split_at_mut(j + 1);
            rest2 = tail2;
            for (((a, a1), a2), &zi) in a
                .iter_mut()
                .zip(a1.iter_mut())
                .zip(a2.iter_mut())
                .zip(&z[..=j])
            {
                let p = zi * zj;
                *a += p;
                *a1 += d * p;
                *a2 += d2 * p;
            }
        }
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// zᵀ·G·z.
fn quadratic(g: &DMatrix<f64>, z: &[f64]) -> f64 {
    let n = z.len();
    let mut s = 0.0;
    for j in 0..n {
        let col = &g.as_slice()[j * n..(j + 1) * n];
        let mut c = 0.0;
        for i in 0..n {
            c += col[i] * z[i];
        }
        s += c * z[j];
    }
    s
}

impl Simulator {
    /// Brings the energy certificate up to date with the segments recorded
    /// since the last check (see the module notes).
    ///
    /// # Errors
    ///
    /// [`SolverError::EnergyBalance`] when the residual exceeds the
    /// tolerance of [`crate::Options::energy_tolerance`].
    pub(super) fn certify(&mut self) -> Result<(), SolverError> {
        let Some(tol) = self.opts.energy_tolerance else {
            return Ok(());
        };
        let wave = &self.rec.wave;
        let cf = &mut self.certifier;
        let n = wave.n_z;
        let mut checked_from = None;
        while cf.next < wave.segments.len() {
            let i = cf.next;
            cf.next += 1;
            let seg = &wave.segments[i];
            let z0 = &wave.states[i * n..(i + 1) * n];
            // Jumps up to this segment's start: lost between the last
            // segment's end and this start when it continues it.
            let mut lost = 0.0;
            while let Some((t, e)) = self.rec.log.jump(cf.jump) {
                if t > seg.t0 {
                    break;
                }
                lost += e;
                cf.jump += 1;
            }
            let continues = cf.open.is_some_and(|s| s.t1 == seg.t0);
            if !continues {
                cf.close(wave);
            }
            let mode = &wave.modes[seg.mode as usize];
            let found = if n <= MAX_DIM
                && seg.len >= 0.0
                && propagate::substeps(mode.rate, seg.len) <= propagate::STIFF_SUBSTEPS
            {
                cf.segment(seg.mode, mode, seg.len, z0, true)
            } else {
                None
            };
            let Some([delivered, dissipated, integral, ..]) = found else {
                cf.close(wave);
                cf.cert.unchecked_time += seg.t1 - seg.t0;
                continue;
            };
            checked_from.get_or_insert(seg.t0);
            let c = &mut cf.cert;
            // NaN: accumulated, counted at the flush.
            if !delivered.is_nan() {
                c.delivered += delivered;
                c.dissipated += dissipated;
                cf.stored_integral += integral;
            }
            c.checked_segments += 1;
            c.checked_time += seg.len;
            match &mut cf.open {
                Some(s) if continues => {
                    c.jumps += lost;
                    s.t1 = seg.t1;
                    s.last = i;
                }
                _ => {
                    let start = quadratic(&cf.half_w, z0);
                    c.stored_peak = c.stored_peak.max(start.abs());
                    cf.open = Some(Stretch {
                        start,
                        t1: seg.t1,
                        last: i,
                    });
                }
            }
        }
        cf.flush();
        // The open stretch counts up to its present end.
        let mut stored = cf.closed;
        if let Some(s) = cf.open {
            let end = cf.end_energy(wave, s.last);
            stored += end - s.start;
            cf.cert.stored_peak = cf.cert.stored_peak.max(end.abs());
        }
        let c = &mut cf.cert;
        c.stored_change = stored;
        if c.checked_time > 0.0 {
            c.stored_mean = cf.stored_integral / c.checked_time;
        }
        c.residual = c.delivered - c.dissipated - c.jumps - c.stored_change;
        let rel = c.relative_residual();
        // NaN fails too.
        if rel <= tol {
            return Ok(());
        }
        Err(SolverError::EnergyBalance {
            time: self.t,
            from: checked_from.unwrap_or(self.t),
            residual: c.residual,
            scale: c.scale(),
            tolerance: tol,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::options::Options;
    use crate::test_util::{example, sync_buck, EXAMPLES};
    use fluxstep_netlist::Circuit;

    fn certified(c: &Circuit, stop: f64) -> EnergyCertificate {
        let mut sim = Simulator::new(c, Options::default()).expect("compiles");
        sim.advance_to(stop).expect("runs");
        sim.certificate()
    }

    /// Energy conservation (Tellegen's theorem; common practice): on every
    /// example circuit, and on the synchronous buck with transition models,
    /// what the sources delivered is what the parts dissipated, the jumps
    /// lost and the storage gained, to rounding.
    #[test]
    fn issue_19_every_example_closes_its_energy_balance() {
        let mut cases: Vec<(String, Circuit, f64)> = EXAMPLES
            .iter()
            .map(|&(f, stop)| (f.to_string(), example(f), stop))
            .collect();
        cases.push((
            "sync buck with transitions".into(),
            sync_buck(None, true),
            1e-3,
        ));
        for (name, c, stop) in cases {
            let cert = certified(&c, stop);
            assert!(cert.checked_segments > 0, "{name}: {cert:?}");
            assert_eq!(cert.unchecked_time, 0.0, "{name}: {cert:?}");
            assert!(cert.delivered > 0.0, "{name}: {cert:?}");
            assert!(cert.relative_residual() < 1e-10, "{name}: {cert:?}");
            eprintln!("{name}: relative residual {:.2e}", cert.relative_residual());
        }
    }

    /// A first-order RL step (from memory: i = V/R·(1 − e^(−t/τ)), τ = L/R):
    /// the source delivers V²/R·(t − τ·(1 − e^(−t/τ))), the inductor holds
    /// ½·L·i², the resistor takes the rest.
    #[test]
    fn issue_19_rl_step_energies_match_the_closed_form() {
        let (v, r, l, t) = (2.0, 3.0, 1.5e-3, 1e-3);
        let c = Circuit::builder()
            .voltage_source("V1", "in", "gnd", v)
            .resistor("R1", "in", "a", r)
            .inductor("L1", "a", "gnd", l)
            .build()
            .expect("valid");
        let cert = certified(&c, t);
        let tau = l / r;
        let i = v / r * (1.0 - (-t / tau).exp());
        let delivered = v * v / r * (t - tau * (1.0 - (-t / tau).exp()));
        let stored = 0.5 * l * i * i;
        assert!(
            (cert.delivered - delivered).abs() < 1e-13 * delivered,
            "{cert:?}"
        );
        assert!(
            (cert.stored_change - stored).abs() < 1e-13 * stored,
            "{cert:?}"
        );
        let dissipated = delivered - stored;
        assert!(
            (cert.dissipated - dissipated).abs() < 1e-12 * dissipated,
            "{cert:?}"
        );
        // ∫ i² dt = I²·(t − 2τ·(1 − e^(−t/τ)) + τ/2·(1 − e^(−2t/τ))).
        let big = v / r;
        let e1 = (-t / tau).exp();
        let i2 = big * big * (t - 2.0 * tau * (1.0 - e1) + 0.5 * tau * (1.0 - e1 * e1));
        let mean = 0.5 * l * i2 / t;
        assert!(
            (cert.stored_mean - mean).abs() < 1e-12 * mean,
            "{cert:?} vs {mean}"
        );
    }

    /// Charge sharing (common practice): two equal capacitors, one at 10 V,
    /// joined by an ideal switch, lose ½·(C₁C₂/(C₁+C₂))·ΔV² = 25 µJ in the
    /// jump, and the stored energy falls by as much.
    #[test]
    fn issue_19_charge_sharing_loss_is_counted() {
        let c = Circuit::builder()
            .capacitor_with_voltage("C1", "a", "gnd", 1e-6, 10.0)
            .capacitor("C2", "b", "gnd", 1e-6)
            .switch("S1", "a", "b", "hb.low")
            .resistor("R1", "b", "gnd", 1e6)
            .complementary_pwm("hb", 100e3, 0.5, 0.0, 0.0)
            .build()
            .expect("valid");
        let cert = certified(&c, 8e-6);
        assert!((cert.jumps - 25e-6).abs() < 1e-15, "{cert:?}");
        assert!(cert.relative_residual() < 1e-12, "{cert:?}");
    }

    /// Nets of nothing (energy conservation; common practice): an ideal
    /// inductor across a sine source over whole periods takes back what it
    /// was given, and a lossless buck from one source into another passes
    /// on what it takes; the balance's scale is then the stored energy, and
    /// the residual stays at rounding.
    #[test]
    fn issue_19_circulating_energy_is_no_residual() {
        use fluxstep_netlist::Stimulus;
        let sine = Circuit::builder()
            .voltage_waveform(
                "V1",
                "a",
                "gnd",
                Stimulus::Sine {
                    offset: 0.0,
                    amplitude: 10.0,
                    frequency: 50e3,
                    phase: 0.0,
                },
            )
            .inductor("L1", "a", "gnd", 100e-6)
            .build()
            .expect("valid");
        let pass = Circuit::builder()
            .voltage_source("Vin", "in", "gnd", 12.0)
            .switch("S1", "in", "sw", "drive")
            .diode("D1", "gnd", "sw")
            .inductor("L1", "sw", "out", 10e-6)
            .voltage_source("Vo", "out", "gnd", 5.0)
            .pwm("drive", 100e3, 0.3)
            .build()
            .expect("valid");
        for (c, stop) in [(sine, 60e-6), (pass, 200e-6)] {
            let cert = certified(&c, stop);
            assert!(cert.stored_mean > 0.0, "{cert:?}");
            assert!(cert.relative_residual() < 1e-12, "{cert:?}");
        }
    }

    /// A state that leaves the exact solution (what a propagation error
    /// would do: the run goes on from a state 1 % off, with no event to
    /// explain the change of stored energy) breaks the balance, and the
    /// check at the end of `advance_to` stops the run with the diagnostic.
    /// A single recorded state that is wrong and then right again is not
    /// caught: the energy it seems to gain at one boundary it gives back at
    /// the next.
    #[test]
    fn issue_19_a_state_off_the_solution_stops_the_run() {
        let c = example("buck.json");
        for corrupt in [false, true] {
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.advance_to(1e-4).expect("runs");
            if corrupt {
                sim.z[0] *= 1.01;
            }
            match (corrupt, sim.advance_to(2e-4)) {
                (false, Ok(())) => {}
                (true, Err(e @ SolverError::EnergyBalance { .. })) => {
                    assert_eq!(e.time(), Some(2e-4));
                    assert!(e.to_string().contains("energy balance"), "{e}");
                }
                (_, r) => panic!("corrupt = {corrupt}: {r:?} {:?}", sim.certificate()),
            }
        }
    }

    /// A state set from outside starts a new stretch: the change it made is
    /// not a residual.
    #[test]
    fn issue_19_set_state_starts_a_new_stretch() {
        let c = example("buck.json");
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        sim.advance_to(1e-4).expect("runs");
        let x: Vec<f64> = sim.state().iter().map(|v| v * 0.5 + 0.1).collect();
        sim.set_state(&x).expect("valid state");
        sim.advance_to(2e-4).expect("runs");
        let cert = sim.certificate();
        assert!(cert.relative_residual() < 1e-10, "{cert:?}");
    }

    /// A length a few thousand units in the last place from the cached
    /// one, and one 3 % longer: the energies and the end state from the
    /// cached Gramians and the series agree with fresh Gramians of the
    /// exact length to 1e-14.
    #[test]
    fn nearby_length_matches_fresh_gramians() {
        let m = DMatrix::from_row_slice(3, 3, &[-0.3, 2.0, 0.1, -2.5, -0.1, 0.0, 0.0, 0.0, 0.0]);
        let qd = DMatrix::from_row_slice(3, 3, &[0.0, 0.0, 0.5, 0.0, 0.0, 0.0, 0.5, 0.0, 0.0]);
        let qs = DMatrix::from_row_slice(3, 3, &[1.0, 0.4, 0.0, 0.4, 2.0, 0.0, 0.0, 0.0, 0.0]);
        let z = [0.7, -1.3, 1.0];
        let h0: f64 = 0.37;
        let h = f64::from_bits(h0.to_bits() + 5000);
        let near = gramians(&crate::propagate::balancing(&m), [&qd, &qs, &qs], h0).expect("finite");
        let exact = gramians(&crate::propagate::balancing(&m), [&qd, &qs, &qs], h).expect("finite");
        let mut sh = Shift::default();
        let [d1, s1, _] = energies(&near, &m, [&qd, &qs, &qs], (&z, h), &mut sh);
        let end1 = sh.end.clone();
        let [d2, s2, _] = energies(&exact, &m, [&qd, &qs, &qs], (&z, h), &mut sh);
        let end = sh.end.clone();
        assert!((d1 - d2).abs() < 1e-14 * d2.abs(), "{d1} vs {d2}");
        assert!((s1 - s2).abs() < 1e-14 * s2.abs(), "{s1} vs {s2}");
        for (a, b) in end1.iter().zip(&end) {
            assert!((a - b).abs() < 1e-14, "{a} vs {b}");
        }
        // Far enough that the shift matters: without it the energies
        // differ by about Δ/h₀ = 3e-12.
        let [d0, ..] = energies(&near, &m, [&qd, &qs, &qs], (&z, h0), &mut sh);
        assert!((d0 - d2).abs() > 1e-13 * d2.abs(), "{d0} vs {d2}");
        // 3 % longer (‖M‖₁·Δ = 0.03): the series takes a dozen terms.
        let far = h0 * 1.03;
        let exact =
            gramians(&crate::propagate::balancing(&m), [&qd, &qs, &qs], far).expect("finite");
        let [d1, s1, _] = energies(&near, &m, [&qd, &qs, &qs], (&z, far), &mut sh);
        let end1 = sh.end.clone();
        let [d2, s2, _] = energies(&exact, &m, [&qd, &qs, &qs], (&z, far), &mut sh);
        assert!((d1 - d2).abs() < 1e-14 * d2.abs(), "{d1} vs {d2}");
        assert!((s1 - s2).abs() < 1e-14 * s2.abs(), "{s1} vs {s2}");
        for (a, b) in end1.iter().zip(&sh.end) {
            assert!((a - b).abs() < 1e-14, "{a} vs {b}");
        }
    }

    /// Segments whose lengths are within [`NEAR`] of a cached one are
    /// only summed (z·zᵀ, Δ·z·zᵀ, Δ²·z·zᵀ) and traced at the flush: the
    /// flushed energies equal the sum of fresh Gramians' to 1e-14, at
    /// ‖M‖₁·Δ up to 1e-5, where the first-order sum alone is off by about
    /// (‖M‖₁·Δ)²·h₀ (the test checks it is off).
    #[test]
    fn accumulated_nearby_lengths_match_fresh_gramians() {
        let m = DMatrix::from_row_slice(3, 3, &[-0.3, 2.0, 0.1, -2.5, -0.1, 0.0, 0.0, 0.0, 0.0]);
        let qd = DMatrix::from_row_slice(3, 3, &[0.0, 0.0, 0.5, 0.0, 0.0, 0.0, 0.5, 0.0, 0.0]);
        let qs = DMatrix::from_row_slice(3, 3, &[1.0, 0.4, 0.0, 0.4, 2.0, 0.0, 0.0, 0.0, 0.0]);
        let forms = [&qd, &qs, &qs];
        let balanced = crate::propagate::balancing(&m);
        let norm = norm1(&balanced.0);
        let h0: f64 = 0.37;
        let mut g = gramians(&balanced, forms, h0).expect("finite");
        let zs = [[0.7, -1.3, 1.0], [-0.2, 0.9, 1.0], [1.1, 0.3, 1.0]];
        let deltas = [0.0, 1e-5 / norm, -0.6e-5 / norm];
        let mut want = [0.0; FORMS];
        let mut first_order = [0.0; FORMS];
        for (z, &d) in zs.iter().zip(&deltas) {
            assert!(d.abs() * norm <= NEAR);
            g.accumulate(z, d, true, norm);
            let fresh = gramians(&balanced, forms, h0 + d).expect("finite");
            for f in 0..FORMS {
                want[f] += quadratic(&fresh.g[f], z);
                first_order[f] += quadratic(&g.g[f], z) + d * quadratic(&g.ends[f], z);
            }
        }
        let got = g.flush();
        for f in 0..FORMS {
            assert!(
                (got[f] - want[f]).abs() < 1e-14 * want[f].abs(),
                "form {f}: {} vs {}",
                got[f],
                want[f]
            );
            if f == 1 {
                assert!(
                    (first_order[f] - want[f]).abs() > 1e-12 * want[f].abs(),
                    "the second-order term matters here: {} vs {}",
                    first_order[f],
                    want[f]
                );
            }
        }
        // Flushed: the sums start again from nothing.
        assert_eq!(g.flush(), [0.0; FORMS]);
    }

    /// A damped mode of `n` entries and three symmetric forms, from a
    /// fixed sequence of numbers (a test fixture, not a circuit).
    fn random_mode(n: usize, seed: u64) -> (DMatrix<f64>, [DMatrix<f64>; FORMS]) {
        let mut rnd = crate::test_util::uniform(seed);
        let mut next = move || rnd() - 0.5;
        let m = DMatrix::from_fn(n, n, |r, c| if r == c { -1.0 } else { 0.6 * next() });
        let mut form = || {
            let a = DMatrix::from_fn(n, n, |_, _| next());
            &a + a.transpose()
        };
        (m, [form(), form(), form()])
    }

    /// Segments of 13 and 23 entries go through batches: the sums they
    /// leave are those of a triangle per segment to the bit (the same
    /// products in the same order), zero entries included, across full
    /// batches and a partial one, and twice in a row (the sums start again
    /// from nothing); and the flushed energies equal the sum of zᵀGz
    /// segment by segment to 1e-13. (Σ zᵀGz = trace(G·Σ zzᵀ); common
    /// practice.)
    #[test]
    fn batched_segments_sum_to_the_energies_of_each_segment() {
        for n in [13, 23] {
            assert!(n >= BATCH_FROM);
            let (m, q) = random_mode(n, 7);
            let balanced = crate::propagate::balancing(&m);
            let norm = norm1(&balanced.0);
            let mut g = gramians(&balanced, q.each_ref(), 0.2).expect("finite");
            let mut rnd = crate::test_util::uniform(11);
            for round in 0..2 {
                let mut want = [0.0; FORMS];
                let mut triangle = vec![0.0; n * (n + 1) / 2];
                let count = 3 * BATCH + 5 + round;
                for s in 0..count {
                    // Every third state with a zero entry (a source's
                    // derivative), in a column that moves.
                    let z: Vec<f64> = (0..n)
                        .map(|i| {
                            if s % 3 == 0 && i == s % n {
                                0.0
                            } else {
                                rnd() - 0.5
                            }
                        })
                        .collect();
                    g.accumulate(&z, 0.0, false, norm);
                    outer_add(&mut triangle, &mut [], &mut [], &z, (0.0, false));
                    for (w, gf) in want.iter_mut().zip(&g.g) {
                        *w += quadratic(gf, &z);
                    }
                }
                assert!(!g.batch.is_empty(), "a partial batch is left");
                g.drain();
                let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
                assert_eq!(bits(&g.acc), bits(&triangle), "n {n}, round {round}");
                let got = g.flush();
                let scale: f64 = (0..FORMS).map(|f| want[f].abs()).fold(0.0, f64::max);
                for f in 0..FORMS {
                    assert!(
                        (got[f] - want[f]).abs() <= 1e-13 * scale,
                        "n {n}, round {round}, form {f}: {} vs {}",
                        got[f],
                        want[f]
                    );
                }
            }
        }
    }

    /// A length a few ulps off the cached one (the edges of an
    /// interleaved converter, T/N apart, differ in their last bits) is
    /// summed as the cached length itself, and its energies still equal
    /// a fresh Gramian's of its own length to 1e-14; a Δ of 1e-9 of the
    /// length is not (its first-order sum is kept). (Energy continuous in
    /// the length; common practice.)
    #[test]
    fn a_length_within_rounding_is_summed_as_the_cached_length() {
        let n = 4;
        let (m, q) = random_mode(n, 3);
        let balanced = crate::propagate::balancing(&m);
        let norm = norm1(&balanced.0);
        let h0: f64 = 0.37;
        let z = [0.4, -0.9, 0.25, 1.0];
        let near = f64::from_bits(h0.to_bits() + 3) - h0;
        let fresh = gramians(&balanced, q.each_ref(), h0 + near).expect("finite");
        let mut g = gramians(&balanced, q.each_ref(), h0).expect("finite");
        g.accumulate(&z, near, false, norm);
        assert!(g.acc1.iter().all(|v| *v == 0.0), "no first-order sum");
        let got = g.flush();
        for (f, (got, fresh)) in got.iter().zip(&fresh.g).enumerate() {
            let want = quadratic(fresh, &z);
            assert!(
                (got - want).abs() <= 1e-14 * want.abs().max(1e-300),
                "form {f}"
            );
        }
        g.accumulate(&z, 1e-9 * h0, false, norm);
        assert!(g.acc1.iter().any(|v| *v != 0.0), "a real Δ keeps its sum");
    }

    /// The Gramian against an independent sum: a 2×2 oscillating mode,
    /// ∫₀ʰ z(s)ᵀ·Q·z(s) ds by composite Simpson on 20,000 intervals with
    /// z(s) from one exponential each (agreement 1e-12 relative).
    #[test]
    fn gramian_matches_quadrature() {
        let m = DMatrix::from_row_slice(2, 2, &[-0.3, 2.0, -2.5, -0.1]);
        let q = DMatrix::from_row_slice(2, 2, &[1.0, 0.4, 0.4, 2.0]);
        let z = [0.7, -1.3];
        let h = 3.7;
        let g = gramians(&crate::propagate::balancing(&m), [&q, &q, &q], h).expect("finite");
        let n = 20_000;
        let f = |s: f64| {
            let e = (&m * s).exp();
            let y = &e * nalgebra::DVector::from_column_slice(&z);
            (y.transpose() * &q * &y)[0]
        };
        let d = h / n as f64;
        let mut sum = f(0.0) + f(h);
        for k in 1..n {
            sum += f(k as f64 * d) * if k % 2 == 1 { 4.0 } else { 2.0 };
        }
        let simpson = sum * d / 3.0;
        let exact = quadratic(&g.g[0], &z);
        assert!(
            (exact - simpson).abs() < 1e-12 * simpson.abs(),
            "{exact} vs {simpson}"
        );
    }

    /// The series-and-doubling Gramian against Van Loan's block exponential
    /// (C. F. Van Loan, IEEE Trans. Automatic Control, 1978: e^{[[−Mᵀ, Q],
    /// [0, M]]h} holds e^{−Mᵀh}·G(h) top right and e^{Mh} bottom right),
    /// taken by nalgebra's own Padé exponential, on an RLC-like mode over
    /// a few of its time constants (short enough that e^{−Mᵀh} does not
    /// swamp the reference) with entries 1e6 apart.
    #[test]
    fn gramian_matches_van_loan_block_exponential() {
        let m = DMatrix::from_row_slice(
            4,
            4,
            &[
                -2.0, 1e3, 0.0, 0.5, //
                -1e-3, -0.5, 3e-3, 0.0, //
                0.0, -2e2, -1.0, 1e2, //
                0.0, 0.0, 0.0, 0.0,
            ],
        );
        let q = DMatrix::from_row_slice(
            4,
            4,
            &[
                1.0, 0.0, 0.2, 0.0, //
                0.0, 1e3, 0.0, 1.0, //
                0.2, 0.0, 3.0, 0.0, //
                0.0, 1.0, 0.0, 0.0,
            ],
        );
        let h = 4.0;
        let balanced = crate::propagate::balancing(&m);
        // Doublings happen: the series alone would not do.
        assert!(norm1(&balanced.0) * h > 2.0, "{}", norm1(&balanced.0));
        let g = gramians(&balanced, [&q, &q, &q], h).expect("finite");
        let n = 4;
        let mut a = DMatrix::zeros(2 * n, 2 * n);
        a.view_mut((0, 0), (n, n)).copy_from(&(-m.transpose() * h));
        a.view_mut((0, n), (n, n)).copy_from(&(&q * h));
        a.view_mut((n, n), (n, n)).copy_from(&(&m * h));
        let e = a.exp();
        let phi = e.view((n, n), (n, n)).into_owned();
        let van_loan = phi.transpose() * e.view((0, n), (n, n));
        for (x, y) in g.g[0].iter().zip(van_loan.iter()) {
            assert!((x - y).abs() <= 1e-11 * y.abs().max(1.0), "{x} vs {y}");
        }
        for (x, y) in g.phi.iter().zip(phi.iter()) {
            assert!((x - y).abs() <= 1e-11 * y.abs().max(1e-3), "{x} vs {y}");
        }
    }
}
