//! Replay: a resolved transition remembered (from which mode, with which
//! switch, ramp and guard-flip bits, to which mode, and which candidates
//! were rejected on the way) and replayed at the next instant with the
//! same key once its rejections are checked to hold again — the same
//! pattern the full search would find, at a fraction of its cost. The
//! contract test `replay_gives_the_same_bits_as_the_full_search` runs
//! every example with and without it.

use super::checks::{constraint_row, first_cut_row, guards_hold, unbalanced_source, violations};
use nalgebra::DVector;

use super::resolve::{Verdict, OTHER};
use super::Simulator;
use crate::crossing::Scales;
use crate::error::SolverError;
use crate::mode::{Mode, PackedRows};
use crate::options::OnShootThrough;
use crate::propagate;

/// A resolved transition, remembered for replay: from mode `from` with
/// switch bits `switches` and guard flips `flips`, the search rejected the
/// modes in `cut_rejected` for cutting an inductor current, those in
/// `other_rejected` for a guard or an unbalanced current source (every
/// other candidate before `to` for a structural reason) and accepted `to`
/// without a jump.
pub(super) struct Remembered {
    pub(super) from: u32,
    pub(super) switches: u64,
    pub(super) ramps: u64,
    pub(super) flips: u64,
    pub(super) cut_rejected: Vec<u32>,
    /// Candidates rejected by a guard or a current source: a replay judges
    /// them again whole (`still_rejected`). A synchronous buck whose
    /// inductor current changes sign during start-up needs this: the
    /// freewheeling diode of the other transistor comes first in the
    /// search and is rejected by its guard once the current is positive.
    pub(super) other_rejected: Vec<u32>,
    /// The distinct inductor-cutset rows that cut the candidates in
    /// `cut_rejected` when the transition was remembered, packed (the
    /// replay's products): candidates that turn off the same diode share
    /// one.
    pub(super) cut_rows: PackedRows,
    /// Per entry of `cut_rejected`, its row in `cut_rows` (`NO_ROW`: none
    /// found, the replay checks the whole mode).
    pub(super) cut_by: Vec<u16>,
    pub(super) to: u32,
}

/// A `cut_by` entry without a remembered row.
const NO_ROW: u16 = u16::MAX;

impl Remembered {
    fn same_key(&self, other: &Remembered) -> bool {
        self.leaves(other.from, other.switches, other.ramps, other.flips)
    }

    /// Whether this is the transition from mode `from` with switch bits
    /// `switches`, ramp bits `ramps` and guard flips `flips`.
    pub(super) fn leaves(&self, from: u32, switches: u64, ramps: u64, flips: u64) -> bool {
        self.from == from && self.switches == switches && self.ramps == ramps && self.flips == flips
    }
}

/// The remembered transitions, at most [`MEMO_CAPACITY`], with the
/// indices of those leaving each mode (a lookup scans a mode's handful,
/// not the whole list). Keys are unique: the latest outcome of a
/// transition replaces an earlier one in place.
#[derive(Default)]
pub(super) struct Memo {
    entries: Vec<Remembered>,
    /// Per mode: the indices of the entries that leave it, in the order
    /// they were first remembered.
    by_from: Vec<Vec<u8>>,
}

/// Most transitions remembered.
const MEMO_CAPACITY: usize = 64;

impl Memo {
    /// The transition from mode `from` with switch bits `switches`, ramp
    /// bits `ramps` and guard flips `flips`, if remembered.
    #[inline]
    pub(super) fn find(
        &self,
        from: u32,
        switches: u64,
        ramps: u64,
        flips: u64,
    ) -> Option<&Remembered> {
        self.by_from
            .get(from as usize)?
            .iter()
            .map(|&i| &self.entries[i as usize])
            .find(|t| t.leaves(from, switches, ramps, flips))
    }

    /// Remembers `t`, replacing the entry of the same key (or nothing
    /// once [`MEMO_CAPACITY`] transitions are remembered).
    fn insert(&mut self, t: Remembered) {
        let from = t.from as usize;
        if let Some(i) = self.by_from.get(from).and_then(|list| {
            list.iter()
                .copied()
                .find(|&i| self.entries[i as usize].same_key(&t))
        }) {
            self.entries[i as usize] = t;
            return;
        }
        if self.entries.len() >= MEMO_CAPACITY {
            return;
        }
        if self.by_from.len() <= from {
            self.by_from.resize(from + 1, vec![]);
        }
        self.by_from[from].push(self.entries.len() as u8);
        self.entries.push(t);
    }

    /// How many transitions are remembered.
    #[cfg(test)]
    pub(super) fn len(&self) -> usize {
        self.entries.len()
    }

    /// Forgets every transition remembered after the first `n` (the
    /// cross-check's oracle search must leave no trace).
    #[cfg(test)]
    pub(super) fn truncate(&mut self, n: usize) {
        self.entries.truncate(n);
        for list in &mut self.by_from {
            list.retain(|&i| (i as usize) < n);
        }
    }
}

/// How a replayed transition logs its diode events: one by one
/// (`push_event`, the general path) or together as a plain instant's
/// (`push_instant`, the lane), which gives the same records.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum Logged {
    OneByOne,
    Together,
}

impl Simulator {
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
        let (rows, cut_by) = self.cut_rows(&cut_list);
        let cut_rows = PackedRows::of(
            rows.iter()
                .map(|&(m, r)| &self.modes[m as usize].h_rows[r as usize]),
        );
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
        self.memo.insert(t);
    }

    /// The distinct cutset rows that cut the modes of `list` at the
    /// present state, as (mode, row of its constraints), and each mode's
    /// row among them (see [`Remembered`]).
    fn cut_rows(&self, list: &[u32]) -> (Vec<(u32, u32)>, Vec<u16>) {
        let z = self.z.as_slice();
        let scales = self.scales.seen;
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
    /// [`Simulator::remembered_target`]), its diode changes logged as
    /// `logged` says (the same records either way).
    #[inline(always)]
    pub(super) fn resolve_remembered(
        &mut self,
        flips: u64,
        scales: Scales,
        logged: Logged,
    ) -> Result<bool, SolverError> {
        let Some((to, projected)) = self.remembered_target(flips, scales) else {
            return Ok(false);
        };
        self.keep_before();
        let old = self.enter_remembered(to, projected);
        match logged {
            Logged::OneByOne => self.log_diode_changes(old)?,
            Logged::Together => self.push_instant(self.t, 0, old ^ self.key.diodes)?,
        }
        Ok(true)
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
        let t = self.memo.find(mode, key.switches, key.ramps, flips)?;
        let z = self.z.as_slice();
        // Each distinct row once (the common case: a few rows, one per
        // diode the candidates turn off); a mode whose remembered row no
        // longer cuts is checked whole, as before.
        let still = if t.cut_rows.len() <= 64 {
            let mut cutting = 0u64;
            t.cut_rows.all(z, |g, v| {
                if scales.cuts(v) {
                    cutting |= 1 << g;
                }
                true
            });
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
            if !still_rejected(m, &self.z, scales, stop_short, &mut self.buf.z_try) {
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
            propagate::matvec(&mode.p, z, self.buf.z_try.as_mut_slice());
        }
        let z1 = if projected { &self.buf.z_try } else { &self.z };
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
        self.stats.replayed_transitions += 1;
        if projected {
            std::mem::swap(&mut self.z, &mut self.buf.z_try);
        }
        let old = self.key.diodes;
        self.key = self.modes[to as usize].key;
        self.modes.caches[self.mode as usize].successor = to;
        self.mode = to;
        old
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
