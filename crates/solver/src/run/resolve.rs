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
//! candidate holds. A jump is taken only where no pattern holds without
//! one: the search walks its list once allowing no jump, then allowing a
//! charge jump, then (where the run allows it) a flux jump; an outcome
//! that passed over a charge jump is not replayed. (Ideal diodes at their
//! forward voltage with zero current can be named conducting or
//! blocking; a nearer pattern that closed a capacitor loop with a jump of
//! negative loss once won over the jump-free one.)
//!
//! A fixed-frequency converter repeats the same few transitions, so each
//! outcome is remembered and replayed after re-checking exactly the
//! state-dependent reasons the search had (see `resolve_remembered`); a
//! contract test checks that replay gives the same bits.

use std::sync::Arc;

use super::checks::{guards_hold, unbalanced_source, violations};
use super::record::{After, Who};
use super::replay::Logged;
use super::Simulator;
use crate::compile::BranchKind;
use crate::crossing::Scales;
use crate::error::SolverError;
use crate::events::{EventKind, JumpInfo};
use crate::mode::{pattern_text, ConstraintKind, Mode, ModeKey, ModeProblem};
use crate::options::{OnInterruption, OnShootThrough};
use crate::propagate;

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

/// When a conduction pattern is resolved.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Moment {
    /// At t = 0, from the circuit's initial values: a jump is taken only
    /// where a source sets it, and nothing is remembered for replay.
    Start,
    /// At an instant of the run (a scheduled instant or a located event).
    Run,
}

impl Moment {
    /// Whether this is the start of the run.
    pub(super) fn is_start(self) -> bool {
        self == Moment::Start
    }
}

/// Candidate diode patterns of the search by distance, built once per
/// first guess.
#[derive(Default)]
pub(super) struct Candidates {
    /// Patterns ordered by distance from each first guess.
    pub(super) orders: Vec<Option<Vec<u64>>>,
    /// Patterns within distance two of one first guess, for circuits of
    /// more than 16 diodes (built when pivoting fails).
    pub(super) far: Option<(u64, Vec<u64>)>,
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
            if self.candidates.far.as_ref().map(|o| o.0) != Some(first) {
                self.candidates.far = Some((first, near_patterns(first, nd)));
            }
            let order = &self.candidates.far.as_ref().expect("just set").1;
            return order.get(idx).copied();
        }
        if self.candidates.orders.is_empty() {
            self.candidates.orders = vec![None; 1 << nd];
        }
        self.candidates.orders[first as usize]
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
        moment: Moment,
    ) -> Result<(), SolverError> {
        let first = self.key.diodes ^ flips;
        let scales = self.update_scales();
        if !moment.is_start()
            && self.shortcuts.replay
            && self.resolve_remembered(flips, scales, Logged::OneByOne)?
        {
            return Ok(());
        }
        self.stats.resolved_patterns += 1;
        if self.shortcuts.pivoting {
            if let Some(found) = self.pivot(first, flips, moment, scales)? {
                let found = self.settle(first, flips, found, moment, scales)?;
                #[cfg(test)]
                self.cross_check(first, flips, moment, scales, Some(found))?;
                return self.commit_found(found, moment);
            }
            #[cfg(test)]
            self.cross_check(first, flips, moment, scales, None)?;
        }
        match self.search(first, flips, cause, moment, scales)? {
            Ok(found) => self.commit_found(found, moment),
            Err(e) => Err(e),
        }
    }

    /// Enters a pattern found by `pivot` or `search` (its state is in
    /// `z_try`).
    fn commit_found(&mut self, found: Found, moment: Moment) -> Result<(), SolverError> {
        let key = ModeKey {
            switches: self.key.switches,
            diodes: found.diodes,
            ramps: self.key.ramps,
        };
        self.commit(key, found.mode, found.cut, found.charge, moment)
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
        moment: Moment,
        scales: Scales,
    ) -> Result<Result<Found, SolverError>, SolverError> {
        // What a remembered transition needs: the candidates rejected for
        // cutting an inductor current before the accepted one; `None` once
        // any other state-dependent rejection makes the outcome unsafe to
        // replay.
        let mut cut_rejected: Option<Vec<u32>> = (!moment.is_start()).then(Vec::new);
        let mut interruption: Option<Interruption> = None;
        let mut other: Option<Rejection> = None;
        // At t = 0 the given initial state may cut an inductor current (an
        // inductor in series with a current source): it jumps to the
        // source's current, as a capacitor jumps to a source's voltage.
        // Later, only when the run allows it.
        // A jump is taken only where no pattern holds without one: a
        // charge jump in the second pass, a flux jump in the third.
        let passes: &[(bool, bool)] =
            if moment.is_start() || self.opts.on_interruption == OnInterruption::ConserveFlux {
                &[(false, false), (false, true), (true, true)]
            } else {
                &[(false, false), (false, true)]
            };
        for &(allow_cut, allow_charge) in passes {
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
                let modes = std::mem::take(&mut self.modes.list);
                let verdict =
                    self.judge(&modes, mi, allow_cut, scales, &mut interruption, &mut other);
                self.modes.list = modes;
                if !allow_charge && matches!(verdict, Verdict::Holds { charge: true, .. }) {
                    // Passed over for a pattern without a jump, which a
                    // replay does not re-check.
                    cut_rejected = None;
                    continue;
                }
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
                        && moment.is_start()
                        && self.opts.on_interruption != OnInterruption::ConserveFlux
                        && self.cc.stored_energy(self.buf.z_try.as_slice())
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
        moment: Moment,
        scales: Scales,
    ) -> Result<Found, SolverError> {
        if found.cut {
            return Ok(found);
        }
        let near = (found.diodes ^ first).count_ones() < 2;
        let (mode, key) = (self.mode, self.key);
        let known = self
            .memo
            .find(mode, key.switches, key.ramps, flips)
            .is_some_and(|t| t.to == found.mode);
        if near && (known || moment.is_start()) {
            return Ok(found);
        }
        let mut cut_rejected = (!moment.is_start()).then(Vec::new);
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
            if !found.charge && matches!(verdict, Verdict::Holds { charge: true, .. }) {
                // The search's first pass passes over a pattern that needs
                // a charge jump where one holds without (`found`).
                cut_rejected = None;
                continue;
            }
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
        let modes = std::mem::take(&mut self.modes.list);
        let verdict = self.judge(&modes, mi, false, scales, &mut None, &mut None);
        self.modes.list = modes;
        Ok((mi, verdict))
    }

    /// Logs a diode-on or diode-off event for each diode whose state
    /// differs between `old` and the present pattern.
    pub(super) fn log_diode_changes(&mut self, old: u64) -> Result<(), SolverError> {
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
            self.push_event(self.t, kind, Who::Diode(k), None, After::Present)?;
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
            self.buf.z_try.copy_from(&self.z);
        } else {
            propagate::matvec(&mode.p, self.z.as_slice(), self.buf.z_try.as_mut_slice());
        }
        let z1 = &self.buf.z_try;
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
        moment: Moment,
    ) -> Result<(), SolverError> {
        self.keep_before();
        let jump = (cut_jump || loop_jump).then(|| JumpInfo {
            energy: self.cc.stored_energy(self.z.as_slice())
                - self.cc.stored_energy(self.buf.z_try.as_slice()),
            moved: Some(
                self.cc
                    .moved(self.z.as_slice(), self.buf.z_try.as_slice(), cut_jump),
            ),
        });
        let old = self.key.diodes;
        let was_shorted =
            self.modes[self.mode as usize].resistive_short.is_some() && !moment.is_start();
        self.key = key;
        self.mode = mi;
        std::mem::swap(&mut self.z, &mut self.buf.z_try);
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
            self.push_event(self.t, kind, Who::Named(id), Some(jump), After::Present)?;
        }
        let short = match (&self.modes[mi as usize].resistive_short, was_shorted) {
            (Some((devices, _)), false) => Some(devices.join(",")),
            _ => None,
        };
        if let Some(devices) = short {
            let id = self.rec.log.intern(&devices);
            self.push_event(
                self.t,
                EventKind::ShootThrough,
                Who::Named(id),
                None,
                After::Present,
            )?;
        }
        if !moment.is_start() {
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
            let mode = &self.modes[i.mode as usize];
            let mut windings = vec![];
            violations(
                mode,
                self.z.as_slice(),
                self.scales.seen,
                Some(&mut windings),
            );
            // Current sources in series with an interrupted winding: those
            // of every cut that winding belongs to, named apart.
            let mut sources: Vec<String> = mode
                .constraints
                .iter()
                .filter_map(|k| match k {
                    ConstraintKind::Cutset {
                        windings: w,
                        sources,
                        ..
                    } if w.iter().any(|b| windings.contains(b)) => Some(sources),
                    _ => None,
                })
                .flatten()
                .cloned()
                .collect();
            sources.sort();
            sources.dedup();
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
                sources,
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
pub(super) const OTHER: u32 = 1 << 31;

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

#[cfg(test)]
mod tests {
    use fluxstep_netlist::Circuit;

    use super::super::checks::{guards_hold_at_zero, violated_guards};
    use super::super::lcp::{CrossCheck, CROSS};
    use super::super::{RunResult, Simulator};
    use crate::options::Options;
    use nalgebra::DVector;

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
        sim.shortcuts.replay = replay;
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
            let scales = sim.scales.seen;
            for mode in &sim.modes.list {
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
