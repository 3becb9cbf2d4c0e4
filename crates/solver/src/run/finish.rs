//! The end of an interval: at its scheduled end with no crossing inside
//! (`finish_interval`: the segment recorded, the state moved, the checks),
//! or at a located crossing (`enter_crossing`: logged, entered, then the
//! comparators, a running transition's clamp and the new conduction
//! pattern), with the check that event location makes progress. The
//! general loop and the lane end their intervals here.

use super::replay::Logged;
use super::*;

/// A crossing located at τ = 0 and how many times in a row the same one
/// came back.
#[derive(Clone, Copy, Debug)]
pub(super) struct Stall {
    time: f64,
    pattern: ModeKey,
    /// The crossing at `time` in `pattern` (its diode and comparator bits).
    crossing: Crossing,
    repeats: u32,
}

/// Crossings at τ = 0 of the same guards in the same pattern, in a row,
/// after which [`Simulator::check_progress`] stops the run. An ordinary
/// instant sees one or two (a diode turns on, another's guard starts at
/// zero); 64 leave room for a large diode network settling in steps.
const STALL_REPEATS: u32 = 64;

impl Stall {
    /// No crossing at τ = 0 yet.
    pub(super) fn none() -> Stall {
        Stall {
            time: f64::NAN,
            pattern: ModeKey {
                switches: 0,
                diodes: 0,
                ramps: 0,
            },
            crossing: Crossing {
                time: 0.0,
                diodes: 0,
                comparators: 0,
            },
            repeats: 0,
        }
    }
}

impl Simulator {
    /// The end of an interval with no crossing inside, at `t_next` (key
    /// `key_next`) after `h`: the segment recorded, the state moved there,
    /// and the checks of a finite state and of the memory budget.
    #[inline(always)]
    pub(super) fn finish_interval(
        &mut self,
        t_next: f64,
        h: f64,
        key_next: Option<TimeKey>,
    ) -> Result<(), SolverError> {
        self.record(t_next, h);
        self.t = t_next;
        self.tkey = key_next;
        std::mem::swap(&mut self.z, &mut self.z_next);
        self.check_finite()?;
        self.check_budget(t_next)
    }

    /// The located instant of crossing `c` inside the interval being
    /// advanced (`locate` left the state there in `z_next`): logged,
    /// entered, comparators fired, a running transition clamped, and the
    /// new conduction pattern resolved.
    pub(super) fn enter_crossing(&mut self, c: Crossing) -> Result<(), SolverError> {
        let (fired, cmp_fired) = (c.diodes, c.comparators);
        let t_e = self.begin_crossing(c)?;
        let cause = self.fire_comparators(cmp_fired, t_e)?;
        if fired != 0 && self.ramp_waits_for_clamp() {
            self.clamp_ramps(t_e);
        }
        self.resolve(fired, cause, Moment::Run)
    }

    /// `enter_crossing` for what the lane admits (no comparator, no
    /// running transition: nothing fires but diodes, nothing is clamped):
    /// the same steps in the same order, with the remembered transition
    /// tried first and its diode events logged as a plain instant's
    /// (`push_instant`: the same records as one by one), the full
    /// `resolve` only if it does not apply (its own replay attempt then
    /// fails the same way, changing nothing). The located instant then
    /// runs the scheduled instants' code, not a second copy of it: in
    /// discontinuous conduction both ran every period.
    pub(super) fn lane_crossing(&mut self, c: Crossing) -> Result<(), SolverError> {
        debug_assert!(c.comparators == 0 && self.key.ramps == 0);
        self.begin_crossing(c)?;
        let scales = self.update_scales();
        if self.shortcuts.replay && self.resolve_remembered(c.diodes, scales, Logged::Together)? {
            return Ok(());
        }
        self.resolve(c.diodes, None, Moment::Run)
    }

    /// The start of a located instant, shared by `enter_crossing` and
    /// `lane_crossing`: progress checked, the segment up to it recorded,
    /// the state there (`z_next`) made the present one and checked, the
    /// instant counted and its kind set; returns its time.
    #[inline(always)]
    fn begin_crossing(&mut self, c: Crossing) -> Result<f64, SolverError> {
        let t_e = self.t + c.time;
        self.check_progress(t_e, c)?;
        self.record_located(t_e, c.time, c.diodes, c.comparators);
        self.t = t_e;
        self.tkey = None;
        std::mem::swap(&mut self.z, &mut self.z_next);
        self.check_finite()?;
        self.stats.state_events += 1;
        self.rec.cause = EventCause::Crossing;
        Ok(t_e)
    }

    /// Stops a run whose event location makes no progress: the same
    /// guards cross at the same instant in the same pattern again and
    /// again, because the pattern resolved there is the one the crossing
    /// left (a diode grazing zero, e.g. a rectifier without load whose
    /// capacitor holds the source's peak). Each such crossing is handled
    /// without time moving or an event being logged, so neither the event
    /// limit nor the chatter window would end the loop.
    ///
    /// A few repeats are allowed (a crossing at τ = 0 after a pattern
    /// change is ordinary); [`STALL_REPEATS`] in a row are a stall.
    ///
    /// # Errors
    ///
    /// [`SolverError::Unsupported`] naming the instant, the pattern and
    /// the diodes or gates whose guards stay at zero.
    fn check_progress(&mut self, t_e: f64, c: Crossing) -> Result<(), SolverError> {
        if t_e != self.t {
            self.stalled.repeats = 0;
            return Ok(());
        }
        let same = Crossing { time: 0.0, ..c };
        let st = &mut self.stalled;
        if st.time == t_e && st.pattern == self.key && st.crossing == same {
            st.repeats += 1;
        } else {
            *st = Stall {
                time: t_e,
                pattern: self.key,
                crossing: same,
                repeats: 1,
            };
        }
        if st.repeats < STALL_REPEATS {
            return Ok(());
        }
        Err(self.stall_error(c.diodes, c.comparators))
    }

    #[cold]
    #[inline(never)]
    fn stall_error(&self, fired: u64, cmp_fired: u64) -> SolverError {
        let mut names: Vec<String> = (0..self.cc.diodes.len().min(64))
            .filter(|&j| fired >> j & 1 == 1)
            .map(|j| format!("diode {}", self.cc.diodes[j].name))
            .collect();
        names.extend(
            (0..self.cc.comparators.len().min(64))
                .filter(|&c| cmp_fired >> c & 1 == 1)
                .map(|c| format!("gate {}", self.cc.signals[self.cc.comparators[c].signal].0)),
        );
        SolverError::Unsupported {
            time: self.t,
            pattern: pattern_text(&self.cc, self.key),
            reason: format!(
                "event location makes no progress: the guard of {} stays at zero at this \
                 instant (a grazing contact) and the same pattern is resolved again \
                 {STALL_REPEATS} times",
                if names.is_empty() {
                    "a guard".to_string()
                } else {
                    names.join(", ")
                }
            ),
        }
    }

    /// Stops the run where the state is no longer finite, naming the
    /// state (or the stiff span's refusal that left it so).
    #[inline(always)]
    fn check_finite(&mut self) -> Result<(), SolverError> {
        let z = self.z.as_slice();
        if propagate::all_finite(z) {
            return Ok(());
        }
        // A stiff span refused by `step` left NaN and its reason.
        if let Some(e) = self.refused.take() {
            return Err(e);
        }
        let z = self.z.as_slice();
        if let Some(i) = z.iter().position(|v| !v.is_finite()) {
            let what = if i < self.cc.n_x {
                self.cc.state_names[i].clone()
            } else {
                "a source value".into()
            };
            return Err(SolverError::NonFinite { time: self.t, what });
        }
        Ok(())
    }
}
