//! The consistent conduction pattern as a linear complementarity problem,
//! solved by principal pivoting.
//!
//! At an instant the diodes of a circuit satisfy complementarity
//! conditions: a conducting diode carries i ≥ 0 (its voltage is
//! Vf + Ron·i), a blocking one carries no current and sees v ≤ Vf. With the
//! inductor currents and capacitor voltages fixed, the rest of the network
//! is resistive, so the currents and voltage margins are affine in each
//! other: a linear complementarity problem (LCP) whose principal pivots are
//! the conduction patterns. The mode of a pattern already holds the basic
//! variables of that pivot as its guards (a conducting diode's current, a
//! blocking diode's margin Vf − v), so pivoting needs no tableau of its
//! own: exchanging a diode's current and margin is entering the neighbour
//! pattern.
//!
//! The pivot rule is the least-index rule of K. G. Murty ("Note on a
//! Bard-type scheme for solving the complementarity problem", Opsearch
//! 11, 1974): of the diodes whose condition fails, toggle the one with the
//! lowest index. It terminates on any LCP with a P-matrix (every diode with
//! some resistance in its loops), in practice after a few pivots. Guards
//! are compared lexicographically, value first and then the first non-zero
//! derivative up to the third ([`violated_guards`]), which resolves
//! degenerate pivots (a current or margin exactly zero) as the dynamics
//! do: a diode that touches zero with its current about to rise stays on.
//!
//! A pattern whose equations reject it whatever the guards say (a short of
//! a voltage source, an inductor current left without a path, a current
//! source without a path) is a singular principal pivot. From such a
//! pattern the method tries its neighbours in the order of the exhaustive
//! list (by value), and pivots on from the first one that is not singular.
//! That keeps the commonest event of a converter — a switch opens, its
//! inductor current needs a diode — a single step, and keeps it the very
//! pattern the search by Hamming distance picks.
//!
//! Ideal diodes (no resistance) give a positive semi-definite matrix, on
//! which the least-index rule can return to a pattern it has left; the
//! method then stops (it keeps a list of the patterns it judged) and the
//! search by Hamming distance decides, as it does where no pattern holds
//! without a jump.

use super::resolve::{note_rejection, violated_guards, Found, Verdict};
use super::Simulator;
use crate::error::SolverError;
use crate::mode::{GuardKind, Mode};

/// Patterns judged per diode before pivoting gives up (plus a constant):
/// generous for the few pivots a well-posed network needs, small enough
/// that a cycling network falls back to the search quickly.
const PIVOTS_PER_DIODE: usize = 8;

/// What one judged pattern says about the next pivot.
enum Step {
    /// The pattern holds.
    Holds(Found),
    /// The complementarity condition of this diode fails (the lowest
    /// index of those that fail).
    Toggle(usize),
    /// The pattern's equations reject it whatever its guards say.
    Singular,
}

impl Simulator {
    /// The consistent pattern by principal pivoting from `first` (the
    /// previous pattern with the fired diodes toggled), its state in
    /// `z_try`; `None` where pivoting finds no pattern that holds without
    /// an inductor-current jump (see the module notes). Remembers the
    /// transition where the search by Hamming distance would remember it.
    pub(super) fn pivot(
        &mut self,
        first: u64,
        flips: u64,
        initial: bool,
        scales: (f64, f64),
    ) -> Result<Option<Found>, SolverError> {
        let mut cut_rejected: Option<Vec<u32>> = (!initial).then(Vec::new);
        // The usual case: the first guess holds. Nothing is allocated.
        let mut base = match self.pivot_step(first, flips, scales, &mut cut_rejected)? {
            Step::Holds(found) => return Ok(Some(found)),
            Step::Toggle(d) => Some(first ^ 1 << d),
            Step::Singular => None,
        };
        let nd = self.cc.diodes.len();
        let budget = PIVOTS_PER_DIODE * nd + 16;
        let mut judged: Vec<u64> = vec![first];
        let mut from = first;
        loop {
            let next = match base {
                Some(next) => next,
                // A singular pivot: the first neighbour (in the order of
                // the exhaustive list) that is not singular decides.
                None => {
                    let mut found = None;
                    for nb in neighbours(from, nd) {
                        if judged.contains(&nb) {
                            continue;
                        }
                        if judged.len() >= budget {
                            return Ok(None);
                        }
                        judged.push(nb);
                        match self.pivot_step(nb, flips, scales, &mut cut_rejected)? {
                            Step::Holds(f) => return Ok(Some(f)),
                            // Back to a pattern judged before: try the
                            // next neighbour.
                            Step::Toggle(d) if judged.contains(&(nb ^ 1 << d)) => {}
                            Step::Toggle(d) => {
                                found = Some(nb ^ 1 << d);
                                break;
                            }
                            Step::Singular => {}
                        }
                    }
                    match found {
                        Some(next) => next,
                        None => return Ok(None),
                    }
                }
            };
            // A pattern judged before: the rule cycles (a degenerate
            // network of ideal diodes), the search decides.
            if judged.contains(&next) || judged.len() >= budget {
                return Ok(None);
            }
            judged.push(next);
            from = next;
            base = match self.pivot_step(next, flips, scales, &mut cut_rejected)? {
                Step::Holds(found) => return Ok(Some(found)),
                Step::Toggle(d) => Some(next ^ 1 << d),
                Step::Singular => None,
            };
        }
    }

    /// Judges pattern `diodes` (no inductor current may be cut) and says
    /// which pivot follows; remembers a transition that holds as
    /// [`Simulator::search`] would.
    fn pivot_step(
        &mut self,
        diodes: u64,
        flips: u64,
        scales: (f64, f64),
        cut_rejected: &mut Option<Vec<u32>>,
    ) -> Result<Step, SolverError> {
        let (mi, verdict) = self.judge_pattern(diodes, scales)?;
        note_rejection(cut_rejected, verdict, mi);
        self.remember(cut_rejected, verdict, flips, mi);
        Ok(match verdict {
            Verdict::Holds { cut, charge } => Step::Holds(Found {
                diodes,
                mode: mi,
                cut,
                charge,
            }),
            Verdict::Structural | Verdict::Cut => Step::Singular,
            Verdict::Other => {
                match least_failing(&self.modes[mi as usize], &self.z_try, scales) {
                    Some(d) => Step::Toggle(d),
                    // An unbalanced current source: singular.
                    None => Step::Singular,
                }
            }
        })
    }
}

/// How pivoting compared with the search by Hamming distance over a run
/// (tests only: [`Simulator::cross_check`]).
#[cfg(test)]
#[derive(Clone, Debug, Default)]
pub(crate) struct CrossCheck {
    /// Instants where both found the same pattern.
    pub agree: usize,
    /// Instants where pivoting found nothing and the search decided.
    pub fallback: usize,
    /// Instants where they differ: (time, pivoting's pattern, the
    /// search's pattern, or `None` if it found none).
    pub differ: Vec<(f64, u64, Option<u64>)>,
}

#[cfg(test)]
thread_local! {
    /// Tests only: simulators built on this thread cross-check from their
    /// first instant (the initial resolution runs inside `new`).
    pub(crate) static CROSS_FROM_START: std::cell::Cell<bool> =
        const { std::cell::Cell::new(false) };
}

/// A fresh [`CrossCheck`] if this thread asked for one.
#[cfg(test)]
pub(crate) fn cross_from_start() -> Option<CrossCheck> {
    CROSS_FROM_START
        .with(|c| c.get())
        .then(CrossCheck::default)
}

#[cfg(test)]
impl Simulator {
    /// With a [`CrossCheck`] switched on, runs the search by Hamming
    /// distance from the same state and counts whether it agrees with
    /// pivoting (`found`); leaves `z_try` as pivoting left it.
    pub(super) fn cross_check(
        &mut self,
        first: u64,
        flips: u64,
        initial: bool,
        scales: (f64, f64),
        found: Option<Found>,
    ) -> Result<(), SolverError> {
        if self.cross.is_none() {
            return Ok(());
        }
        let kept = self.z_try.clone();
        let oracle = self.search(first, flips, None, initial, scales)?.ok();
        self.z_try = kept;
        let t = self.t;
        let cross = self.cross.as_mut().expect("checked above");
        match (found, oracle) {
            (Some(f), Some(o)) if f == o => cross.agree += 1,
            (Some(f), o) => cross.differ.push((t, f.diodes, o.map(|o| o.diodes))),
            (None, _) => cross.fallback += 1,
        }
        Ok(())
    }
}

/// The lowest index of the diodes whose complementarity condition fails
/// at z (lexicographically, see [`violated_guards`]); `None` if every
/// guard holds. Two blocking diodes whose loop voltage exceeds their
/// forward voltages (a pair guard) both fail; the lower index is toggled
/// first.
#[cold]
#[inline(never)]
fn least_failing(mode: &Mode, z: &nalgebra::DVector<f64>, scales: (f64, f64)) -> Option<usize> {
    violated_guards(mode, z, scales, true)
        .into_iter()
        .filter_map(|gi| match mode.guards[gi].kind {
            GuardKind::DiodeCurrent(d) | GuardKind::DiodeVoltage(d) => Some(d),
            GuardKind::DiodePair(a, b) => Some(a.min(b)),
            GuardKind::Comparator(..) => None,
        })
        .min()
}

/// The patterns at Hamming distance one from `base` among `nd` diodes, in
/// increasing value (the order of the exhaustive list): first those that
/// clear a set bit, highest bit first, then those that set a clear bit,
/// lowest bit first.
fn neighbours(base: u64, nd: usize) -> impl Iterator<Item = u64> {
    let clear = (0..nd).rev().filter(move |&k| base >> k & 1 == 1);
    let set = (0..nd).filter(move |&k| base >> k & 1 == 0);
    clear.chain(set).map(move |k| base ^ 1 << k)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::options::Options;
    use crate::run::RunResult;
    use fluxstep_netlist::Circuit;

    /// An example circuit file of the repository.
    fn example(file: &str) -> Circuit {
        let path = format!(
            "{}/../../examples/circuits/{file}",
            env!("CARGO_MANIFEST_DIR")
        );
        Circuit::from_file(path).expect("example circuit is valid")
    }

    /// Every example circuit, with a run time that reaches its steady
    /// behaviour.
    const EXAMPLES: [(&str, f64); 10] = [
        ("buck.json", 1e-3),
        ("buck_dcm.json", 1e-3),
        ("boost.json", 1e-3),
        ("sync_buck.json", 1e-3),
        ("flyback.json", 2e-3),
        ("rectifier.json", 40e-3),
        ("peak_current_buck.json", 1e-3),
        ("hysteretic_buck.json", 1e-3),
        ("voltage_mode_buck.json", 2e-3),
        ("buck_boost.json", 1e-3),
    ];

    /// Runs `c` for `stop` s with the given switches; replay is off so
    /// that every instant is resolved in full.
    fn run(c: &Circuit, stop: f64, pivoting: bool, cross: bool) -> (RunResult, Option<CrossCheck>) {
        CROSS_FROM_START.with(|f| f.set(cross));
        let sim = Simulator::new(c, Options::default());
        CROSS_FROM_START.with(|f| f.set(false));
        let mut sim = sim.expect("compiles");
        sim.replay = false;
        sim.pivoting = pivoting;
        let res = sim.advance_to(stop);
        let cross = sim.cross.take();
        res.expect("runs");
        (sim.finish(), cross)
    }

    /// Issue 20: pivoting agrees with the exhaustive search at every
    /// instant of every example circuit (both run from the same state),
    /// and a whole run gives the same bits either way.
    #[test]
    fn issue_20_pivoting_agrees_with_the_search_on_every_example() {
        for (file, stop) in EXAMPLES {
            let c = example(file);
            let (a, cross) = run(&c, stop, true, true);
            let cross = cross.expect("cross-checked");
            assert!(cross.differ.is_empty(), "{file}: {:?}", cross.differ);
            assert!(cross.agree > 10, "{file}: {cross:?}");
            let (b, _) = run(&c, stop, false, false);
            assert_eq!(a.events.to_json(), b.events.to_json(), "{file}");
            let bits = |r: &RunResult| -> Vec<u64> {
                r.waveform.states.iter().map(|v| v.to_bits()).collect()
            };
            assert_eq!(bits(&a), bits(&b), "{file}: segment states differ");
            eprintln!("{file}: {cross:?}");
        }
    }

    #[test]
    fn neighbours_come_in_increasing_value() {
        for base in [0u64, 0b1011, 0b1111, 0b0100_1001] {
            let nb: Vec<u64> = neighbours(base, 8).collect();
            assert_eq!(nb.len(), 8);
            assert!(nb.windows(2).all(|w| w[0] < w[1]), "{base:b}: {nb:?}");
            assert!(nb.iter().all(|&c| (c ^ base).count_ones() == 1));
        }
        let nb: Vec<u64> = neighbours(1 << 63, 64).collect();
        assert_eq!(nb[0], 0);
        assert!(nb.windows(2).all(|w| w[0] < w[1]));
    }
}
