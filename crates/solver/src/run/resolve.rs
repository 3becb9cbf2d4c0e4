//! Stage 3: resolve the conduction pattern that is consistent with the
//! state, apply any jump, and log what changed.
//!
//! Each candidate pattern is judged at the present state: its constraints
//! (inductor cutsets, capacitor loops) and its guards with a derivative
//! look-ahead. The pattern is found by principal pivoting on the diodes'
//! complementarity conditions (`lcp.rs`), starting from a first guess (the
//! previous pattern with the diodes whose guard fired toggled), so the
//! usual case costs one candidate. Where pivoting finds no pattern that
//! holds without an inductor-current jump, the search by Hamming distance
//! from the first guess decides (`search`): exhaustive up to 16 diodes,
//! distance two at most above. It is what finds flux-conserving jumps and
//! builds the diagnostics of a rejection; trying a fixed finite list cannot
//! cycle. Diagnostics are kept as numbers and only turned into text if no
//! candidate holds.
//!
//! A fixed-frequency converter repeats the same few transitions, so each
//! outcome is remembered and replayed after re-checking exactly the
//! state-dependent reasons the search had (see `resolve_remembered`); a
//! contract test checks that replay gives the same bits.

use std::sync::Arc;

use nalgebra::DVector;

use super::record::Who;
use super::Simulator;
use crate::compile::BranchKind;
use crate::crossing::{Scales, SOURCE_BALANCE_REL};
use crate::error::SolverError;
use crate::events::{EventKind, JumpInfo};
use crate::mode::{pattern_text, ConstraintKind, Mode, ModeKey, ModeProblem};
use crate::options::{OnInterruption, OnShootThrough};
use crate::propagate;
use crate::propagate::dot_and_magnitude;

/// Why the best rejected candidate was rejected, kept cheap until needed.
enum Rejection {
    Problem(u32),
    ResistiveShort(u32),
    CurrentSource(usize, usize),
}

struct Interruption {
    mode: u32,
}

/// The outcome of judging one candidate pattern.
#[derive(Clone, Copy, PartialEq)]
pub(super) enum Verdict {
    /// It holds; entering it needs a flux (`cut`) or charge jump.
    Holds { cut: bool, charge: bool },
    /// Rejected whatever the state: an impossible or forbidden mode.
    Structural,
    /// Rejected for cutting an inductor current.
    Cut,
    /// Rejected by an unbalanced current source or a guard.
    Other,
}

/// A resolved transition, remembered for replay: from mode `from` with
/// switch bits `switches` and guard flips `flips`, the search rejected the
/// modes in `cut_rejected` for cutting an inductor current, those in
/// `other_rejected` for a guard or an unbalanced current source (every
/// other candidate before `to` for a structural reason) and accepted `to`
/// without a jump.
pub(super) struct Remembered {
    from: u32,
    switches: u64,
    ramps: u64,
    flips: u64,
    cut_rejected: Vec<u32>,
    /// Candidates rejected by a guard or a current source: a replay judges
    /// them again whole (`still_rejected`). A synchronous buck whose
    /// inductor current changes sign during start-up needs this: the
    /// freewheeling diode of the other transistor comes first in the
    /// search and is rejected by its guard once the current is positive.
    other_rejected: Vec<u32>,
    /// The distinct inductor-cutset rows that cut the candidates in
    /// `cut_rejected` when the transition was remembered, as (mode, row of
    /// its constraints): candidates that turn off the same diode share one.
    cut_rows: Vec<(u32, u32)>,
    /// Per entry of `cut_rejected`, its row in `cut_rows` (`NO_ROW`: none
    /// found, the replay checks the whole mode).
    cut_by: Vec<u16>,
    to: u32,
}

/// A `cut_by` entry without a remembered row.
const NO_ROW: u16 = u16::MAX;

impl Remembered {
    fn same_key(&self, other: &Remembered) -> bool {
        self.leaves(other.from, other.switches, other.ramps, other.flips)
    }

    /// Whether this is the transition from mode `from` with switch bits
    /// `switches`, ramp bits `ramps` and guard flips `flips`.
    fn leaves(&self, from: u32, switches: u64, ramps: u64, flips: u64) -> bool {
        self.from == from && self.switches == switches && self.ramps == ramps && self.flips == flips
    }
}

impl Simulator {
    fn cause_text(&self, cause: Option<(usize, bool)>) -> Option<String> {
        cause.map(|(i, on)| {
            format!(
                "switch {} {}",
                self.cc.switches[i].name,
                if on { "closing" } else { "opening" }
            )
        })
    }

    /// Candidate `idx` in order of distance from `first` (`first` itself
    /// at 0), ties broken by the pattern's value; the ordered list is
    /// built once per first guess, and only if the first guess fails. Up
    /// to 16 diodes the list holds every pattern; above, the patterns
    /// within distance two (2,081 for 64 diodes), as the list would not
    /// fit in memory.
    fn candidate(&mut self, first: u64, idx: usize) -> Option<u64> {
        if idx == 0 {
            return Some(first);
        }
        let nd = self.cc.diodes.len();
        if nd > EXHAUSTIVE_DIODES {
            if self.far_order.as_ref().map(|o| o.0) != Some(first) {
                self.far_order = Some((first, near_patterns(first, nd)));
            }
            let order = &self.far_order.as_ref().expect("just set").1;
            return order.get(idx).copied();
        }
        if self.orders.is_empty() {
            self.orders = vec![None; 1 << nd];
        }
        self.orders[first as usize]
            .get_or_insert_with(|| {
                let mut c: Vec<u64> = (0..1u64 << nd).collect();
                c.sort_by_key(|&c| ((c ^ first).count_ones(), c));
                c
            })
            .get(idx)
            .copied()
    }

    /// Finds the conduction pattern consistent with the present state, with
    /// the diodes in `flips` toggled first; applies any jump and logs.
    pub(super) fn resolve(
        &mut self,
        flips: u64,
        cause: Option<(usize, bool)>,
        initial: bool,
    ) -> Result<(), SolverError> {
        let first = self.key.diodes ^ flips;
        let scales = self.update_scales();
        if !initial && self.replay && self.resolve_remembered(flips, scales)? {
            return Ok(());
        }
        if self.pivoting {
            if let Some(found) = self.pivot(first, flips, initial, scales)? {
                let found = self.settle(first, flips, found, initial, scales)?;
                #[cfg(test)]
                self.cross_check(first, flips, initial, scales, Some(found))?;
                return self.commit_found(found, initial);
            }
            #[cfg(test)]
            self.cross_check(first, flips, initial, scales, None)?;
        }
        match self.search(first, flips, cause, initial, scales)? {
            Ok(found) => self.commit_found(found, initial),
            Err(e) => Err(e),
        }
    }

    /// Enters a pattern found by `pivot` or `search` (its state is in
    /// `z_try`).
    fn commit_found(&mut self, found: Found, initial: bool) -> Result<(), SolverError> {
        let key = ModeKey {
            switches: self.key.switches,
            diodes: found.diodes,
            ramps: self.key.ramps,
        };
        self.commit(key, found.mode, found.cut, found.charge, initial)
    }

    /// The search by Hamming distance from `first`: the first candidate
    /// that holds (its state in `z_try`), or the error that explains why
    /// none does. Without pivoting this is the whole resolution (the test
    /// oracle); with it, what decides where pivoting finds nothing.
    pub(super) fn search(
        &mut self,
        first: u64,
        flips: u64,
        cause: Option<(usize, bool)>,
        initial: bool,
        scales: Scales,
    ) -> Result<Result<Found, SolverError>, SolverError> {
        // What a remembered transition needs: the candidates rejected for
        // cutting an inductor current before the accepted one; `None` once
        // any other state-dependent rejection makes the outcome unsafe to
        // replay.
        let mut cut_rejected: Option<Vec<u32>> = (!initial).then(Vec::new);
        let mut interruption: Option<Interruption> = None;
        let mut other: Option<Rejection> = None;
        // At t = 0 the given initial state may cut an inductor current (an
        // inductor in series with a current source): it jumps to the
        // source's current, as a capacitor jumps to a source's voltage.
        // Later, only when the run allows it.
        let passes: &[bool] =
            if initial || self.opts.on_interruption == OnInterruption::ConserveFlux {
                &[false, true]
            } else {
                &[false]
            };
        for &allow_cut in passes {
            let mut idx = 0usize;
            while let Some(c) = self.candidate(first, idx) {
                idx += 1;
                let key = ModeKey {
                    switches: self.key.switches,
                    diodes: c,
                    ramps: self.key.ramps,
                };
                let mi = self.mode_id(key)?;
                // The modes are borrowed out of `self` while the candidate is
                // judged (cloning the `Arc` costs two atomic operations,
                // which dominated this stage).
                let modes = std::mem::take(&mut self.modes);
                let verdict =
                    self.judge(&modes, mi, allow_cut, scales, &mut interruption, &mut other);
                self.modes = modes;
                note_search_rejection(&mut cut_rejected, verdict, mi);
                if !allow_cut {
                    self.remember(&cut_rejected, verdict, flips, mi);
                }
                if let Some(found) = verdict.found(c, mi) {
                    // At t = 0 without the flux-conserving policy, a cut
                    // is taken only where a source sets the currents (the
                    // jump stores energy); one that would release the
                    // inductors' energy is an interruption, as later.
                    if found.cut
                        && initial
                        && self.opts.on_interruption != OnInterruption::ConserveFlux
                        && self.cc.stored_energy(self.z_try.as_slice())
                            < self.cc.stored_energy(self.z.as_slice())
                    {
                        continue;
                    }
                    return Ok(Ok(found));
                }
            }
        }
        Ok(Err(self.rejection_error(interruption, other, cause)))
    }

    /// Settles what pivoting found on the search's own rule, and makes it
    /// replayable. Where the LCP has several solutions (ideal diodes in
    /// parallel paths at the same voltage) pivoting can end on one farther
    /// from the first guess than the search's choice; and a transition it
    /// found by repairing several problems at once (two phases
    /// commutating at one instant) follows a path a replay cannot retrace.
    /// Both are settled by walking the search's candidates in its order
    /// (fewest changes from `first`, then value) up to `found`: the first
    /// that holds is the search's answer, and if every candidate before
    /// it was rejected for a structural reason or for cutting an inductor
    /// current the transition is remembered with the search's list. At
    /// most `SETTLE_CANDIDATES` candidates are judged (all within distance
    /// two of the first guess up to 22 diodes); beyond, `found` stands.
    /// Nothing is walked for a pattern within one change of the first
    /// guess that is remembered already (pivoting's usual case). `z_try`
    /// holds the returned pattern's state.
    fn settle(
        &mut self,
        first: u64,
        flips: u64,
        found: Found,
        initial: bool,
        scales: Scales,
    ) -> Result<Found, SolverError> {
        if found.cut {
            return Ok(found);
        }
        let near = (found.diodes ^ first).count_ones() < 2;
        let (mode, key) = (self.mode, self.key);
        let known = self
            .memo
            .iter()
            .any(|t| t.leaves(mode, key.switches, key.ramps, flips) && t.to == found.mode);
        if near && (known || initial) {
            return Ok(found);
        }
        let mut cut_rejected = (!initial).then(Vec::new);
        let mut settled = None;
        for idx in 0..SETTLE_CANDIDATES {
            let Some(c) = self.candidate(first, idx) else {
                break;
            };
            if c == found.diodes {
                settled = Some(found);
                break;
            }
            let (mi, verdict) = self.judge_pattern(c, scales)?;
            note_search_rejection(&mut cut_rejected, verdict, mi);
            if let Some(f) = verdict.found(c, mi) {
                settled = Some(f);
                break;
            }
        }
        let result = settled.unwrap_or(found);
        if settled.is_some() {
            self.remember(&cut_rejected, Verdict::held(result), flips, result.mode);
        }
        self.judge_pattern(result.diodes, scales)?;
        Ok(result)
    }

    /// Judges the candidate pattern `diodes` with the present switches,
    /// as [`Simulator::search`] does in its first pass (no inductor
    /// current may be cut): its mode and verdict, the state after any jump
    /// in `z_try`.
    pub(super) fn judge_pattern(
        &mut self,
        diodes: u64,
        scales: Scales,
    ) -> Result<(u32, Verdict), SolverError> {
        let key = ModeKey {
            switches: self.key.switches,
            diodes,
            ramps: self.key.ramps,
        };
        let mi = self.mode_id(key)?;
        let modes = std::mem::take(&mut self.modes);
        let verdict = self.judge(&modes, mi, false, scales, &mut None, &mut None);
        self.modes = modes;
        Ok((mi, verdict))
    }

    /// Remembers a transition that held at once (no jump, no short) after
    /// only structural rejections and the cuts in `cut_rejected`.
    pub(super) fn remember(
        &mut self,
        cut_rejected: &Option<Vec<u32>>,
        verdict: Verdict,
        flips: u64,
        mi: u32,
    ) {
        let (
            Some(list),
            Verdict::Holds {
                cut: false,
                charge: false,
            },
        ) = (cut_rejected, verdict)
        else {
            return;
        };
        if self.modes[mi as usize].resistive_short.is_some() {
            return;
        }
        let cut_list: Vec<u32> = list.iter().copied().filter(|m| m & OTHER == 0).collect();
        let other_rejected: Vec<u32> = list
            .iter()
            .filter(|&m| m & OTHER != 0)
            .map(|m| m & !OTHER)
            .collect();
        let (cut_rows, cut_by) = self.cut_rows(&cut_list);
        let t = Remembered {
            from: self.mode,
            switches: self.key.switches,
            ramps: self.key.ramps,
            flips,
            cut_rejected: cut_list,
            other_rejected,
            cut_rows,
            cut_by,
            to: mi,
        };
        // The latest outcome of a transition replaces an earlier one (a
        // converter moving between conduction modes changes it).
        match self.memo.iter().position(|m| m.same_key(&t)) {
            Some(i) => self.memo[i] = t,
            None if self.memo.len() < 64 => self.memo.push(t),
            None => {}
        }
    }

    /// The distinct cutset rows that cut the modes of `list` at the
    /// present state, and each mode's row among them (see
    /// [`Remembered`]).
    fn cut_rows(&self, list: &[u32]) -> (Vec<(u32, u32)>, Vec<u16>) {
        let z = self.z.as_slice();
        let scales = self.seen;
        let mut rows: Vec<(u32, u32)> = vec![];
        let mut by = Vec::with_capacity(list.len());
        for &mi in list {
            let mode = &self.modes[mi as usize];
            let Some(r) = first_cut_row(mode, z, scales) else {
                by.push(NO_ROW);
                continue;
            };
            let row = constraint_row(mode, r);
            let same = rows.iter().position(|&(m, q)| {
                let other = constraint_row(&self.modes[m as usize], q as usize);
                other.len() == row.len()
                    && other
                        .iter()
                        .zip(row)
                        .all(|(a, b)| a.to_bits() == b.to_bits())
            });
            let g = match same {
                Some(g) => g,
                None => {
                    rows.push((mi, r as u32));
                    rows.len() - 1
                }
            };
            by.push(u16::try_from(g).unwrap_or(NO_ROW));
        }
        (rows, by)
    }

    /// Replays a remembered transition from the present mode with the
    /// present switches: true if it applied (see
    /// [`Simulator::remembered_target`]), its diode changes logged.
    pub(super) fn resolve_remembered(
        &mut self,
        flips: u64,
        scales: Scales,
    ) -> Result<bool, SolverError> {
        let Some((to, projected)) = self.remembered_target(flips, scales) else {
            return Ok(false);
        };
        let n_x = self.cc.n_x;
        self.rec.before.clear();
        propagate::extend_small(&mut self.rec.before, &self.z.as_slice()[..n_x]);
        let old = self.enter_remembered(to, projected);
        self.log_diode_changes(old).map(|()| true)
    }

    /// The remembered transition from the present mode with the present
    /// switches and `flips`, if it applies: its mode, and whether that
    /// mode projects the state (the projected state is then in `z_try`).
    /// It applies only if the exhaustive search would reach the same
    /// pattern: every candidate it rejected for cutting an inductor
    /// current still cuts one (the others were rejected for structural
    /// reasons that cannot change), and the remembered pattern still holds
    /// without a jump.
    pub(super) fn remembered_target(&mut self, flips: u64, scales: Scales) -> Option<(u32, bool)> {
        let (mode, key) = (self.mode, self.key);
        let t = self
            .memo
            .iter()
            .find(|t| t.leaves(mode, key.switches, key.ramps, flips))?;
        let z = self.z.as_slice();
        // Each distinct row once (the common case: a few rows, one per
        // diode the candidates turn off); a mode whose remembered row no
        // longer cuts is checked whole, as before.
        let still = if t.cut_rows.len() <= 64 {
            let mut cutting = 0u64;
            for (g, &(m, r)) in t.cut_rows.iter().enumerate() {
                let row = constraint_row(&self.modes[m as usize], r as usize);
                if cuts(row, z, scales) {
                    cutting |= 1 << g;
                }
            }
            t.cut_rejected.iter().zip(&t.cut_by).all(|(&mi, &g)| {
                (g != NO_ROW && cutting >> g & 1 == 1)
                    || violations(&self.modes[mi as usize], z, scales, None).0
            })
        } else {
            t.cut_rejected
                .iter()
                .all(|&mi| violations(&self.modes[mi as usize], z, scales, None).0)
        };
        if !still {
            return None;
        }
        // Candidates rejected by a guard or a source are judged again as
        // `judge` does (`z_try` is only scratch until `to` is projected).
        let stop_short = self.opts.on_shoot_through == OnShootThrough::Stop;
        for &mi in &t.other_rejected {
            let m = &self.modes[mi as usize];
            if !still_rejected(m, &self.z, scales, stop_short, &mut self.z_try) {
                return None;
            }
        }
        let to = t.to;
        let mode = &self.modes[to as usize];
        if violations(mode, z, scales, None) != (false, false) {
            return None;
        }
        // As in `judge`: the projection removes rounding residue of the
        // constraints, and the checks see the projected state.
        let projected = !mode.constraints.is_empty();
        if projected {
            propagate::matvec(&mode.p, z, self.z_try.as_mut_slice());
        }
        let z1 = if projected { &self.z_try } else { &self.z };
        if unbalanced_source(mode, z1.as_slice()).is_some() || !guards_hold(mode, z1, scales) {
            return None;
        }
        Some((to, projected))
    }

    /// Enters a mode that [`Simulator::remembered_target`] found, as
    /// `commit` does for a pattern without a jump or a short (kept lean:
    /// this runs at every scheduled edge); returns the diode bits before.
    /// The state before must already be in `before`.
    pub(super) fn enter_remembered(&mut self, to: u32, projected: bool) -> u64 {
        if projected {
            std::mem::swap(&mut self.z, &mut self.z_try);
        }
        let old = self.key.diodes;
        self.key = self.modes[to as usize].key;
        self.mode = to;
        old
    }

    /// Logs a diode-on or diode-off event for each diode whose state
    /// differs between `old` and the present pattern.
    fn log_diode_changes(&mut self, old: u64) -> Result<(), SolverError> {
        let new = self.key.diodes;
        // The diodes that changed, in increasing order.
        let mut changed = old ^ new;
        while changed != 0 {
            let k = changed.trailing_zeros() as usize;
            changed &= changed - 1;
            let kind = if new >> k & 1 == 1 {
                EventKind::DiodeOn
            } else {
                EventKind::DiodeOff
            };
            self.push_event(self.t, kind, Who::Diode(k), None, true)?;
        }
        Ok(())
    }

    /// Judges candidate mode `mi` at the present state (if it holds, its
    /// state after any jump is then in `z_try`), keeping the closest reason
    /// for the diagnostic of a rejection.
    fn judge(
        &mut self,
        modes: &[Arc<Mode>],
        mi: u32,
        allow_cut: bool,
        scales: Scales,
        interruption: &mut Option<Interruption>,
        other: &mut Option<Rejection>,
    ) -> Verdict {
        let mode = &*modes[mi as usize];
        // Report the closest rejected pattern, but a short before
        // any other reason: it is what the switching action did.
        let other_is_short = match &*other {
            Some(Rejection::ResistiveShort(_)) => true,
            Some(Rejection::Problem(m)) => {
                matches!(modes[*m as usize].problem, Some(ModeProblem::Short { .. }))
            }
            _ => false,
        };
        if let Some(p) = &mode.problem {
            let short = matches!(p, ModeProblem::Short { .. });
            if other.is_none() || (short && !other_is_short) {
                *other = Some(Rejection::Problem(mi));
            }
            return Verdict::Structural;
        }
        if mode.resistive_short.is_some() && self.opts.on_shoot_through == OnShootThrough::Stop {
            if !other_is_short {
                *other = Some(Rejection::ResistiveShort(mi));
            }
            return Verdict::Structural;
        }
        let (cut_violated, loop_violated) = violations(mode, self.z.as_slice(), scales, None);
        if cut_violated && !allow_cut {
            // Only the mode is kept; the diagnostic is built from it only
            // if no candidate holds (the state does not change meanwhile).
            if interruption.is_none() {
                *interruption = Some(Interruption { mode: mi });
            }
            return Verdict::Cut;
        }
        // The candidate state (after any jump) goes into a scratch
        // buffer; `commit` swaps it in.
        if mode.constraints.is_empty() {
            self.z_try.copy_from(&self.z);
        } else {
            propagate::matvec(&mode.p, self.z.as_slice(), self.z_try.as_mut_slice());
        }
        let z1 = &self.z_try;
        if let Some(fi) = unbalanced_source(mode, z1.as_slice()) {
            if other.is_none() {
                *other = Some(Rejection::CurrentSource(mi as usize, fi));
            }
            return Verdict::Other;
        }
        if !guards_hold(mode, z1, scales) {
            return Verdict::Other;
        }
        Verdict::Holds {
            cut: cut_violated,
            charge: loop_violated,
        }
    }

    fn commit(
        &mut self,
        key: ModeKey,
        mi: u32,
        cut_jump: bool,
        loop_jump: bool,
        initial: bool,
    ) -> Result<(), SolverError> {
        let n_x = self.cc.n_x;
        self.rec.before.clear();
        self.rec.before.extend_from_slice(&self.z.as_slice()[..n_x]);
        let jump = (cut_jump || loop_jump).then(|| JumpInfo {
            energy: self.cc.stored_energy(self.z.as_slice())
                - self.cc.stored_energy(self.z_try.as_slice()),
            moved: Some(
                self.cc
                    .moved(self.z.as_slice(), self.z_try.as_slice(), cut_jump),
            ),
        });
        let old = self.key.diodes;
        let was_shorted = self.modes[self.mode as usize].resistive_short.is_some() && !initial;
        self.key = key;
        self.mode = mi;
        std::mem::swap(&mut self.z, &mut self.z_try);
        if let Some(jump) = jump {
            let mut names: Vec<String> = vec![];
            for kind in &self.modes[mi as usize].constraints {
                let list = match kind {
                    ConstraintKind::Cutset { windings, .. } => windings,
                    ConstraintKind::Loop { caps } => caps,
                };
                names.extend(list.iter().map(|&b| self.cc.branches[b].name.clone()));
            }
            let kind = if cut_jump {
                EventKind::FluxJump
            } else {
                EventKind::ChargeJump
            };
            let id = self.rec.log.intern(&names.join(","));
            self.push_event(self.t, kind, Who::Named(id), Some(jump), true)?;
        }
        let short = match (&self.modes[mi as usize].resistive_short, was_shorted) {
            (Some((devices, _)), false) => Some(devices.join(",")),
            _ => None,
        };
        if let Some(devices) = short {
            let id = self.rec.log.intern(&devices);
            self.push_event(self.t, EventKind::ShootThrough, Who::Named(id), None, true)?;
        }
        if !initial {
            self.log_diode_changes(old)?;
        }
        Ok(())
    }

    fn rejection_error(
        &self,
        interruption: Option<Interruption>,
        other: Option<Rejection>,
        cause: Option<(usize, bool)>,
    ) -> SolverError {
        let cause = self.cause_text(cause);
        if let Some(i) = interruption {
            let mut windings = vec![];
            violations(
                &self.modes[i.mode as usize],
                self.z.as_slice(),
                self.seen,
                Some(&mut windings),
            );
            let current = windings
                .iter()
                .filter_map(|&b| match self.cc.branches[b].kind {
                    BranchKind::Winding { state } => Some(self.z[state].abs()),
                    _ => None,
                })
                .fold(0.0, f64::max);
            // The energy the interrupted inductors hold (with their mutual
            // terms): what the spike would release.
            let mut without = self.z.clone();
            for &b in &windings {
                if let BranchKind::Winding { state } = self.cc.branches[b].kind {
                    without[state] = 0.0;
                }
            }
            let energy = self.cc.stored_energy(self.z.as_slice())
                - self.cc.stored_energy(without.as_slice());
            return SolverError::InductorInterrupted {
                time: self.t,
                cause,
                current,
                energy,
                inductors: windings
                    .iter()
                    .map(|&b| self.cc.branches[b].name.clone())
                    .collect(),
            };
        }
        match other {
            Some(Rejection::Problem(mi)) => {
                let mode = &self.modes[mi as usize];
                match mode.problem.as_ref().expect("rejected for its problem") {
                    ModeProblem::Short { switches, shorted } => SolverError::ShortCircuit {
                        time: self.t,
                        cause,
                        switches: switches.clone(),
                        shorted: shorted.clone(),
                    },
                    ModeProblem::Unsupported(reason) => SolverError::Unsupported {
                        time: self.t,
                        pattern: pattern_text(&self.cc, mode.key),
                        reason: reason.clone(),
                    },
                }
            }
            Some(Rejection::ResistiveShort(mi)) => {
                let (switches, shorted) = self.modes[mi as usize]
                    .resistive_short
                    .clone()
                    .expect("rejected for its short");
                SolverError::ShortCircuit {
                    time: self.t,
                    cause,
                    switches,
                    shorted,
                }
            }
            Some(Rejection::CurrentSource(mi, fi)) => {
                let (_, node, srcs) = &self.modes[mi].free_checks[fi];
                SolverError::CurrentSourceOpen {
                    time: self.t,
                    sources: srcs.clone(),
                    node: self.cc.nodes[*node].clone(),
                }
            }
            None => SolverError::NoConsistentPattern {
                time: self.t,
                diodes: self.cc.diodes.iter().map(|d| d.name.clone()).collect(),
                reason: "every pattern violates a diode condition".into(),
            },
        }
    }

    /// Largest inductor current and largest capacitor or source voltage seen
    /// so far in the run (never the present value alone: at a located zero
    /// crossing the only inductor current is itself ~1e-17 A).
    #[inline(always)]
    pub(super) fn update_scales(&mut self) -> Scales {
        let z = self.z.as_slice();
        let mut i_s: f64 = self.seen.current;
        for &s in &self.current_states {
            i_s = i_s.max(z[s].abs());
        }
        // Capacitor voltages and single-term sources as (index, factor);
        // the maximum does not depend on the order.
        let mut v_s: f64 = self.seen.voltage;
        for &(k, f) in &self.voltage_terms {
            v_s = v_s.max((f * z[k]).abs());
        }
        for &si in &self.multi_term_sources {
            let v: f64 = self.cc.sources[si]
                .terms
                .iter()
                .map(|&(k, f)| f * z[k])
                .sum();
            v_s = v_s.max(v.abs());
        }
        self.seen = Scales {
            current: i_s,
            voltage: v_s,
        };
        self.seen
    }
}

/// Above this many diodes the fallback search stops at Hamming distance
/// two: the list of all 2^n patterns would not fit in memory.
const EXHAUSTIVE_DIODES: usize = 16;

impl Verdict {
    /// The pattern `diodes` (mode `mode`) as found, if this verdict says
    /// it holds.
    pub(super) fn found(self, diodes: u64, mode: u32) -> Option<Found> {
        match self {
            Verdict::Holds { cut, charge } => Some(Found {
                diodes,
                mode,
                cut,
                charge,
            }),
            _ => None,
        }
    }

    /// The verdict of a pattern found to hold.
    pub(super) fn held(found: Found) -> Verdict {
        Verdict::Holds {
            cut: found.cut,
            charge: found.charge,
        }
    }
}

/// A pattern that holds: its diode bits, mode, and whether entering it
/// needs a flux (`cut`) or charge jump.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Found {
    pub diodes: u64,
    pub mode: u32,
    pub cut: bool,
    pub charge: bool,
}

/// Marks a mode in a list of rejected candidates as rejected by a guard
/// or a current source rather than by a cut (mode numbers stay far below).
const OTHER: u32 = 1 << 31;

/// As [`note_rejection`], for the search by Hamming distance (and
/// `settle`, which follows it): a candidate rejected by a guard or a
/// current source is kept too (marked [`OTHER`]), since a replay of the
/// search judges it again. Pivoting keeps [`note_rejection`]: which pivot
/// follows such a rejection depends on more than the verdict.
pub(super) fn note_search_rejection(
    cut_rejected: &mut Option<Vec<u32>>,
    verdict: Verdict,
    mi: u32,
) {
    match verdict {
        Verdict::Other if mi & OTHER == 0 => {
            if let Some(list) = cut_rejected.as_mut() {
                list.push(mi | OTHER);
            }
        }
        _ => note_rejection(cut_rejected, verdict, mi),
    }
}

/// Whether `judge` (first pass: no inductor current may be cut) still
/// rejects `mode` at `z`, without its diagnostics; `scratch` receives the
/// projected state. Keep the two in step.
fn still_rejected(
    mode: &Mode,
    z: &DVector<f64>,
    scales: Scales,
    stop_on_short: bool,
    scratch: &mut DVector<f64>,
) -> bool {
    if mode.problem.is_some() || (mode.resistive_short.is_some() && stop_on_short) {
        return true;
    }
    if violations(mode, z.as_slice(), scales, None).0 {
        return true;
    }
    let z1 = if mode.constraints.is_empty() {
        z
    } else {
        propagate::matvec(&mode.p, z.as_slice(), scratch.as_mut_slice());
        &*scratch
    };
    unbalanced_source(mode, z1.as_slice()).is_some() || !guards_hold(mode, z1, scales)
}

/// Keeps the list of cut rejections a remembered transition re-checks:
/// a structural rejection cannot change, a cut is re-checked on replay,
/// and any other state-dependent rejection forbids replay.
pub(super) fn note_rejection(cut_rejected: &mut Option<Vec<u32>>, verdict: Verdict, mi: u32) {
    match verdict {
        Verdict::Structural | Verdict::Holds { .. } => {}
        Verdict::Cut => {
            if let Some(list) = cut_rejected.as_mut() {
                list.push(mi);
            }
        }
        Verdict::Other => *cut_rejected = None,
    }
}

/// How many candidates of the search [`Simulator::settle`] judges at
/// most (every pattern within distance two of the first guess for up to
/// 22 diodes).
const SETTLE_CANDIDATES: usize = 256;

/// The patterns within Hamming distance two of `first` among `nd` diodes,
/// ordered by distance, then by value (the order of the exhaustive list).
fn near_patterns(first: u64, nd: usize) -> Vec<u64> {
    let mut c = vec![first];
    for i in 0..nd {
        c.push(first ^ 1 << i);
        for j in i + 1..nd {
            c.push(first ^ 1 << i ^ 1 << j);
        }
    }
    c.sort_by_key(|&c| ((c ^ first).count_ones(), c));
    c
}

/// Whether the mode's inductor cutsets (first) or capacitor loops (second)
/// are violated at z, i.e. entering it needs a jump; `windings` collects
/// the windings of the violated cutsets.
///
/// Residuals are measured against the largest inductor current (cutsets)
/// or capacitor/source voltage (loops) seen in the run: a located zero
/// crossing leaves ~1e-17 of that behind, which the projection removes
/// silently; anything above 1e-11 of it is a real jump.
#[inline(always)]
/// Row `r` of a mode's constraints (Hᵀ is column-major: constraint r's
/// row is the r-th run of n_z).
fn constraint_row(mode: &Mode, r: usize) -> &[f64] {
    let n = mode.ht.nrows();
    &mode.ht.as_slice()[r * n..(r + 1) * n]
}

/// Whether a cutset row carries current at z (the test of
/// [`violations`]).
#[inline(always)]
fn cuts(row: &[f64], z: &[f64], scales: Scales) -> bool {
    scales.cuts(propagate::dot_slices(row, z))
}

/// The first inductor cutset of `mode` that carries current at z.
fn first_cut_row(mode: &Mode, z: &[f64], scales: Scales) -> Option<usize> {
    mode.constraints.iter().enumerate().position(|(r, kind)| {
        matches!(kind, ConstraintKind::Cutset { .. }) && cuts(constraint_row(mode, r), z, scales)
    })
}

pub(super) fn violations(
    mode: &Mode,
    z: &[f64],
    scales: Scales,
    mut windings: Option<&mut Vec<usize>>,
) -> (bool, bool) {
    if mode.constraints.is_empty() {
        return (false, false);
    }
    let (mut cut, mut lp) = (false, false);
    // Hᵀ is column-major: constraint r's row is the r-th run of n_z.
    let rows = mode.ht.as_slice().chunks_exact(mode.ht.nrows().max(1));
    for (row, kind) in rows.zip(&mode.constraints) {
        match kind {
            ConstraintKind::Cutset { windings: w, .. } if cuts(row, z, scales) => {
                cut = true;
                if let Some(list) = windings.as_deref_mut() {
                    list.extend(w.iter().copied());
                }
            }
            ConstraintKind::Loop { .. }
                if scales.loop_holds_voltage(propagate::dot_slices(row, z)) =>
            {
                lp = true
            }
            _ => {}
        }
    }
    (cut, lp)
}

/// The first current source left without a path in the mode (its free
/// group's gauge current is not zero at z), if any.
fn unbalanced_source(mode: &Mode, z: &[f64]) -> Option<usize> {
    mode.free_checks.iter().position(|(row, _, _)| {
        let (v, s) = dot_and_magnitude(row, z);
        v.abs() > SOURCE_BALANCE_REL * s + 1e-300
    })
}

/// True if every guard is ≥ 0 at z and, where it is zero, its first
/// non-zero derivative (up to the third) is positive: the mode can be
/// entered and held for some positive time. Derivatives are computed only
/// for guards that sit at zero.
#[inline(always)]
fn guards_hold(mode: &Mode, z: &DVector<f64>, scales: Scales) -> bool {
    // Value pass first, on slices: in the usual case every guard is clearly
    // positive and no derivative is needed.
    let zs = z.as_slice();
    let mut at_zero = false;
    for g in &mode.guards {
        let (v, s) = dot_and_magnitude(&g.row, zs);
        let tol = scales.guard_zero(&g.kind, s);
        if v < -tol {
            return false;
        }
        at_zero |= v <= tol;
    }
    !at_zero || guards_hold_at_zero(mode, z, scales)
}

/// The rest of [`guards_hold`] when some guard sits at zero, kept out of
/// line so the usual value pass stays small: `violated_guards(…,
/// false).is_empty()`, with the guards at zero as bits and the
/// derivatives on the stack up to 64 guards and 16 entries of z. A
/// circuit with transition models gets here at every located clamp and
/// every ramp start (a diode at zero current), where the allocations of
/// the general function cost more than its arithmetic. The same values
/// and tolerances are compared; only the bookkeeping differs.
#[inline(never)]
fn guards_hold_at_zero(mode: &Mode, z: &DVector<f64>, scales: Scales) -> bool {
    let zs = z.as_slice();
    let n = zs.len();
    if mode.guards.len() > 64 || n > 16 {
        return violated_guards(mode, z, scales, false).is_empty();
    }
    let mut undecided = 0u64;
    for (gi, g) in mode.guards.iter().enumerate() {
        let (v, s) = dot_and_magnitude(&g.row, zs);
        let tol = scales.guard_zero(&g.kind, s);
        if v < -tol {
            return false;
        }
        if v <= tol {
            undecided |= 1 << gi;
        }
    }
    let mut buf = [[0.0f64; 16]; 2];
    let [a, b] = &mut buf;
    let (mut d, mut next): (&mut [f64], &mut [f64]) = (&mut a[..n], &mut b[..n]);
    d.copy_from_slice(zs);
    let mut rate_k = 1.0;
    for _ in 1..4 {
        if undecided == 0 {
            break;
        }
        propagate::matvec(&mode.m, d, next);
        std::mem::swap(&mut d, &mut next);
        rate_k *= mode.rate;
        let mut still = 0u64;
        let mut left = undecided;
        while left != 0 {
            let gi = left.trailing_zeros() as usize;
            left &= left - 1;
            let g = &mode.guards[gi];
            let (v, s) = dot_and_magnitude(&g.row, d);
            let tol = scales.derivative_zero(&g.kind, s, rate_k);
            if v < -tol {
                return false;
            }
            if v <= tol {
                still |= 1 << gi;
            }
        }
        undecided = still;
    }
    true
}

/// The guards violated at z (indices into `mode.guards`, increasing): a
/// guard below zero, or one at zero whose first non-zero derivative (up to
/// the third) is negative. This is the lexicographic order of the vector
/// (g, g′, g″, g‴): a guard that touches zero is judged by where it goes
/// next. With `all` false it stops at the first violated guard found.
pub(super) fn violated_guards(
    mode: &Mode,
    z: &DVector<f64>,
    scales: Scales,
    all: bool,
) -> Vec<usize> {
    let mut violated = vec![];
    // Guards that sit at zero so far.
    let mut undecided: Vec<usize> = vec![];
    let zs = z.as_slice();
    for (gi, g) in mode.guards.iter().enumerate() {
        let (v, s) = dot_and_magnitude(&g.row, zs);
        let tol = scales.guard_zero(&g.kind, s);
        if v < -tol {
            violated.push(gi);
            if !all {
                return violated;
            }
        } else if v <= tol {
            undecided.push(gi);
        }
    }
    if !violated.is_empty() && !all {
        return violated;
    }
    // On the stack up to 16 entries of z: a circuit with transition models
    // gets here at every located clamp, and allocating cost more than the rest.
    let n = zs.len();
    let (mut buf, mut heap) = ([[0.0f64; 16]; 2], vec![]);
    let (mut d, mut next): (&mut [f64], &mut [f64]) = match &mut buf {
        [a, b] if n <= 16 => (&mut a[..n], &mut b[..n]),
        _ => {
            heap.resize(2 * n, 0.0);
            heap.split_at_mut(n)
        }
    };
    d.copy_from_slice(zs);
    let mut rate_k = 1.0;
    for _ in 1..4 {
        if undecided.is_empty() {
            break;
        }
        propagate::matvec(&mode.m, d, next);
        std::mem::swap(&mut d, &mut next);
        rate_k *= mode.rate;
        let mut still = Vec::with_capacity(undecided.len());
        for &gi in &undecided {
            let g = &mode.guards[gi];
            let (v, s) = dot_and_magnitude(&g.row, d);
            let tol = scales.derivative_zero(&g.kind, s, rate_k);
            if v < -tol {
                violated.push(gi);
                if !all {
                    return violated;
                }
            } else if v <= tol {
                still.push(gi);
            }
        }
        undecided = still;
    }
    violated.sort_unstable();
    violated
}

#[cfg(test)]
mod tests {
    use fluxstep_netlist::Circuit;

    use super::super::lcp::{CrossCheck, CROSS};
    use super::super::{RunResult, Simulator};
    use super::{guards_hold_at_zero, violated_guards, DVector};
    use crate::options::Options;

    /// A synchronous buck with dead time and body diodes (24 V → 12 V,
    /// 200 kHz; demo values), started from rest: its inductor current is
    /// negative for a while during start-up, so the transition at the
    /// turn-off of the high side first takes the high side's body diode,
    /// later the low side's. With `ramps`, transition models on both
    /// transistors.
    fn buck(ramps: bool) -> Circuit {
        crate::test_util::sync_buck(None, ramps)
    }

    fn run(c: &Circuit, stop: f64, replay: bool) -> RunResult {
        let mut sim = Simulator::new(c, Options::default()).expect("compiles");
        sim.replay = replay;
        sim.advance_to(stop).expect("runs");
        sim.finish()
    }

    /// Contract: a transition remembered with candidates rejected by a
    /// guard replays to the same bits as the full resolution, through
    /// the start-up (both signs of the inductor current) and after it.
    #[test]
    fn replay_with_guard_rejections_gives_the_same_bits() {
        for ramps in [false, true] {
            let c = buck(ramps);
            let (a, b) = (run(&c, 2e-3, true), run(&c, 2e-3, false));
            assert!(a.events.len() > 1000);
            assert_eq!(a.events.to_json(), b.events.to_json(), "ramps {ramps}");
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "ramps {ramps}");
        }
    }

    /// `guards_hold_at_zero` (bits and a stack buffer) decides as
    /// `violated_guards(…, false).is_empty()` does, on states of the buck
    /// with transition models moved onto each guard's zero, in every mode
    /// the run built.
    #[test]
    fn guards_at_zero_decide_as_the_general_function() {
        let c = buck(true);
        let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
        let (mut checked, mut held) = (0, 0);
        for k in 1..400 {
            sim.advance_to(k as f64 * 37.3e-9).expect("runs");
            let scales = sim.seen;
            for mode in &sim.modes {
                for g in &mode.guards {
                    // z minus its component along the guard's row: the
                    // guard is zero there to rounding.
                    let row = DVector::from_column_slice(&g.row);
                    let (gz, gg) = (row.dot(&sim.z), row.dot(&row));
                    if gg == 0.0 {
                        continue;
                    }
                    let z = &sim.z - row * (gz / gg);
                    let want = violated_guards(mode, &z, scales, false).is_empty();
                    assert_eq!(guards_hold_at_zero(mode, &z, scales), want);
                    checked += 1;
                    held += usize::from(want);
                }
            }
        }
        assert!(
            checked > 1000 && held > 0 && held < checked,
            "{checked} {held}"
        );
    }

    /// Once the buck has settled, every instant replays a remembered
    /// transition: no resolution reaches pivoting (the cross-check
    /// counts each one that does). Before candidates rejected by a guard
    /// were remembered, the high side's turn-off pivoted every period.
    #[test]
    fn a_settled_buck_replays_every_instant() {
        for ramps in [false, true] {
            let c = buck(ramps);
            let mut sim = Simulator::new(&c, Options::default()).expect("compiles");
            sim.advance_to(1e-3).expect("runs");
            CROSS.with(|f| *f.borrow_mut() = Some(CrossCheck::default()));
            sim.advance_to(1.1e-3).expect("runs");
            let cross = CROSS.with(|f| f.borrow_mut().take()).expect("set above");
            let pivoted = cross.agree + cross.fallback + cross.neither + cross.differ.len();
            assert_eq!(pivoted, 0, "ramps {ramps}: {cross:?}");
        }
    }
}
