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

use super::checks::{violated_guards, violations};
use super::resolve::{note_rejection, Found, Moment, Verdict};
use super::Simulator;
use crate::crossing::Scales;
use crate::error::SolverError;
use crate::mode::{GuardKind, Mode, ModeProblem};

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
        moment: Moment,
        scales: Scales,
    ) -> Result<Option<Found>, SolverError> {
        let mut cut_rejected: Option<Vec<u32>> = (!moment.is_start()).then(Vec::new);
        // The usual case: the first guess holds. Nothing is allocated.
        let mut base = match self.pivot_step(first, scales, &mut cut_rejected)? {
            Step::Holds(found) => {
                self.remember(&cut_rejected, Verdict::held(found), flips, found.mode);
                return Ok(Some(found));
            }
            Step::Toggle(d) => Some(first ^ 1 << d),
            Step::Singular => None,
        };
        let nd = self.cc.diodes.len();
        let budget = PIVOTS_PER_DIODE * nd + 16;
        let mut judged: Vec<u64> = vec![first];
        let mut from = first;
        // Whether a scan of neighbours found nothing, after which singular
        // patterns are repaired by their cause alone.
        let mut targeted = false;
        // The patterns repaired from so far, and the steps taken.
        let mut path: Vec<u64> = vec![];
        let mut steps = 0;
        loop {
            steps += 1;
            if steps > budget {
                return Ok(None);
            }
            let next = match base {
                Some(next) => next,
                // A singular pivot: the first neighbour (in the order of
                // the exhaustive list) that is not singular decides.
                None if !targeted => {
                    let mut found = None;
                    for nb in neighbours(from, nd) {
                        if judged.contains(&nb) {
                            continue;
                        }
                        if judged.len() >= budget {
                            return Ok(None);
                        }
                        judged.push(nb);
                        match self.pivot_step(nb, scales, &mut cut_rejected)? {
                            Step::Holds(f) => {
                                return self.descend(
                                    first,
                                    f,
                                    &mut judged,
                                    scales,
                                    cut_rejected,
                                    flips,
                                )
                            }
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
                        None => {
                            // Several problems at once (two phases
                            // commutating at one instant): repair them one
                            // by one. The path now depends on more than a
                            // replay re-checks, so it is not remembered.
                            targeted = true;
                            cut_rejected = None;
                            path.push(from);
                            match self.repair(from, scales, &path)? {
                                Some(next) => next,
                                None => return Ok(None),
                            }
                        }
                    }
                }
                None => {
                    path.push(from);
                    match self.repair(from, scales, &path)? {
                        Some(next) => next,
                        None => return Ok(None),
                    }
                }
            };
            // A pattern judged before: the rule cycles (a degenerate
            // network of ideal diodes), the search decides.
            if (!targeted && judged.contains(&next)) || judged.len() >= budget {
                return Ok(None);
            }
            if !judged.contains(&next) {
                judged.push(next);
            }
            from = next;
            base = match self.pivot_step(next, scales, &mut cut_rejected)? {
                Step::Holds(found) => {
                    return self.descend(first, found, &mut judged, scales, cut_rejected, flips)
                }
                Step::Toggle(d) => Some(next ^ 1 << d),
                Step::Singular => None,
            };
        }
    }

    /// The repair of a singular pattern by its cause: a loop of zero
    /// resistance through conducting diodes turns its lowest-valued such
    /// diode off; an inductor current left without a path turns on a
    /// blocking diode at a terminal of a cut winding. Of the candidate
    /// patterns, the smallest value not yet repaired from (`path`);
    /// `None` if there is none (the search decides).
    fn repair(
        &mut self,
        base: u64,
        scales: Scales,
        path: &[u64],
    ) -> Result<Option<u64>, SolverError> {
        let (mi, _) = self.judge_pattern(base, scales)?;
        let mode = &self.modes[mi as usize];
        let mut toggles: Vec<usize> = vec![];
        let devices = match (&mode.problem, &mode.resistive_short) {
            (Some(ModeProblem::Short { switches, .. }), _) => Some(switches),
            (None, Some((devices, _))) => Some(devices),
            _ => None,
        };
        if let Some(devices) = devices {
            for (k, d) in self.cc.diodes.iter().enumerate() {
                if base >> k & 1 == 1 && devices.contains(&d.name) {
                    toggles.push(k);
                }
            }
        } else if mode.problem.is_none() {
            let mut windings = vec![];
            violations(mode, self.z.as_slice(), scales, Some(&mut windings));
            let ends: Vec<usize> = windings
                .iter()
                .flat_map(|&w| [self.cc.branches[w].a, self.cc.branches[w].b])
                .collect();
            for (k, d) in self.cc.diodes.iter().enumerate() {
                let br = &self.cc.branches[d.branch];
                if base >> k & 1 == 0 && (ends.contains(&br.a) || ends.contains(&br.b)) {
                    toggles.push(k);
                }
            }
        }
        Ok(toggles
            .into_iter()
            .map(|k| base ^ 1 << k)
            .filter(|c| !path.contains(c))
            .min())
    }

    /// The nearest pattern to `first` that holds, moving on from `found`
    /// one or two diodes at a time. Where the LCP has several solutions
    /// (ideal diodes in parallel or in series, a diode with zero current
    /// and zero slope) they differ only in diodes that carry no current,
    /// and the rule of the search by Hamming distance decides between
    /// them: fewest diodes changed from the first guess, then the smallest
    /// pattern value. Each step tries, in that order, the patterns between
    /// the first guess and `found` (those that undo some of its changes;
    /// all of them up to four changes, else those that undo one), then
    /// those that exchange a changed diode for another (as many changes, a
    /// smaller value). Patterns already judged were rejected and are
    /// skipped, so a pattern reached in one step from the first guess
    /// costs nothing here. Exchanges are tried only up to 16 diodes: above,
    /// they would build too many modes, and ties are left to pivoting.
    ///
    /// The transition is remembered (as [`Simulator::search`] would) only
    /// if `found` stands and every pattern judged on the way was rejected
    /// for a reason a replay re-checks: then pivoting from the same
    /// verdicts retraces the same path.
    fn descend(
        &mut self,
        first: u64,
        found: Found,
        judged: &mut Vec<u64>,
        scales: Scales,
        mut cut_rejected: Option<Vec<u32>>,
        flips: u64,
    ) -> Result<Option<Found>, SolverError> {
        let nd = self.cc.diodes.len();
        let mut best = found;
        // Whether `z_try` holds the state of `best`.
        let mut current = true;
        loop {
            let changed = best.diodes ^ first;
            // Nearer patterns: up to four changes, every pattern between
            // the first guess and `best` (rounding can reject a pattern
            // one step back and accept one two steps back); above, one
            // step back.
            let mut back: Vec<u64> = if changed.count_ones() <= 4 {
                let ks: Vec<usize> = bits(changed).collect();
                (0..(1u64 << ks.len()) - 1)
                    .map(|sub| bits(sub).fold(first, |c, i| c ^ 1 << ks[i]))
                    .collect()
            } else {
                bits(changed).map(|k| best.diodes ^ 1 << k).collect()
            };
            back.sort_unstable_by_key(|&c| ((c ^ first).count_ones(), c));
            let mut across: Vec<u64> = vec![];
            if nd <= 16 {
                let unchanged = !changed & (u64::MAX >> (64 - nd));
                for i in bits(changed) {
                    for j in bits(unchanged) {
                        let c = best.diodes ^ 1 << i ^ 1 << j;
                        if c < best.diodes {
                            across.push(c);
                        }
                    }
                }
                across.sort_unstable();
            }
            let mut better = None;
            for c in back.into_iter().chain(across) {
                if judged.contains(&c) {
                    continue;
                }
                judged.push(c);
                let (mi, verdict) = self.judge_pattern(c, scales)?;
                current = false;
                note_rejection(&mut cut_rejected, verdict, mi);
                if let Some(f) = verdict.found(c, mi) {
                    better = Some(f);
                    current = true;
                    break;
                }
            }
            match better {
                Some(b) => best = b,
                None => break,
            }
        }
        if best == found {
            self.remember(&cut_rejected, Verdict::held(best), flips, best.mode);
        }
        if !current {
            self.judge_pattern(best.diodes, scales)?;
        }
        Ok(Some(best))
    }

    /// Judges pattern `diodes` (no inductor current may be cut) and says
    /// which pivot follows, noting its rejection for a remembered
    /// transition.
    fn pivot_step(
        &mut self,
        diodes: u64,
        scales: Scales,
        cut_rejected: &mut Option<Vec<u32>>,
    ) -> Result<Step, SolverError> {
        let (mi, verdict) = self.judge_pattern(diodes, scales)?;
        note_rejection(cut_rejected, verdict, mi);
        if let Some(found) = verdict.found(diodes, mi) {
            return Ok(Step::Holds(found));
        }
        Ok(match verdict {
            // (A holding pattern returned above.)
            Verdict::Holds { .. } | Verdict::Structural | Verdict::Cut => Step::Singular,
            Verdict::Other => {
                match least_failing(&self.modes[mi as usize], &self.buf.z_try, scales) {
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
    /// Instants where pivoting found nothing and the search found a
    /// pattern (with a jump, or where pivoting cycled).
    pub fallback: usize,
    /// Instants where neither found a pattern (the run stops there).
    pub neither: usize,
    /// Instants where they differ: (time, pivoting's pattern, the
    /// search's pattern, or `None` if it found none).
    pub differ: Vec<(f64, u64, Option<u64>)>,
}

#[cfg(test)]
thread_local! {
    /// Tests only: while `Some`, every resolution on this thread runs the
    /// search beside pivoting and counts here (kept outside the simulator
    /// so that a run that stops, or a `new` that fails, still reports).
    pub(crate) static CROSS: std::cell::RefCell<Option<CrossCheck>> =
        const { std::cell::RefCell::new(None) };
}

#[cfg(test)]
impl Simulator {
    /// With [`CROSS`] switched on, runs the search by Hamming distance
    /// from the same state and counts whether it agrees with pivoting
    /// (`found`); leaves `z_try` and the remembered transitions as
    /// pivoting left them.
    pub(super) fn cross_check(
        &mut self,
        first: u64,
        flips: u64,
        moment: Moment,
        scales: Scales,
        found: Option<Found>,
    ) -> Result<(), SolverError> {
        if CROSS.with(|c| c.borrow().is_none()) {
            return Ok(());
        }
        let kept = self.buf.z_try.clone();
        let memo_len = self.memo.len();
        let oracle = self.search(first, flips, None, moment, scales)?.ok();
        self.buf.z_try = kept;
        self.memo.truncate(memo_len);
        let t = self.t;
        CROSS.with(|c| {
            let mut c = c.borrow_mut();
            let cross = c.as_mut().expect("checked above");
            match (found, oracle) {
                (Some(f), Some(o)) if f == o => cross.agree += 1,
                (Some(f), o) => cross.differ.push((t, f.diodes, o.map(|o| o.diodes))),
                (None, Some(_)) => cross.fallback += 1,
                (None, None) => cross.neither += 1,
            }
        });
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
fn least_failing(mode: &Mode, z: &nalgebra::DVector<f64>, scales: Scales) -> Option<usize> {
    violated_guards(mode, z, scales, true)
        .into_iter()
        .filter_map(|gi| match mode.guards[gi].kind {
            GuardKind::DiodeCurrent(d) | GuardKind::DiodeVoltage(d) => Some(d),
            GuardKind::DiodePair(a, b) => Some(a.min(b)),
            GuardKind::Comparator { .. } => None,
        })
        .min()
}

/// The indices of the set bits of `x`, lowest first.
fn bits(mut x: u64) -> impl Iterator<Item = usize> {
    std::iter::from_fn(move || {
        (x != 0).then(|| {
            let k = x.trailing_zeros() as usize;
            x &= x - 1;
            k
        })
    })
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
    use proptest::prelude::*;

    use crate::test_util::{example, EXAMPLES};

    /// Runs `c` for `stop` s with the given switches; replay is off so
    /// that every instant is resolved in full.
    fn run(c: &Circuit, stop: f64, pivoting: bool, cross: bool) -> (RunResult, Option<CrossCheck>) {
        CROSS.with(|f| *f.borrow_mut() = cross.then(CrossCheck::default));
        let mut sim = Simulator::new(c, Options::default()).expect("compiles");
        sim.shortcuts.replay = false;
        sim.shortcuts.pivoting = pivoting;
        sim.advance_to(stop).expect("runs");
        (sim.finish(), CROSS.with(|f| f.borrow_mut().take()))
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

    /// One part of a random diode network between nodes `a` and `b`
    /// (0 is ground).
    #[derive(Clone, Debug)]
    enum Part {
        Resistor(f64),
        Source(f64, f64, f64),
        Capacitor(f64),
        Inductor(f64),
        Diode(f64, f64),
        Switch(f64),
    }

    /// A random network of up to four nodes besides ground: parts from
    /// small sets of values that include the degenerate ones (ideal diodes
    /// in series and in parallel, zero sources, zero initial inductor
    /// currents and capacitor voltages, so that currents and margins sit
    /// exactly at zero and the derivatives decide), and sine sources and
    /// timed switches that make instants to resolve.
    fn network() -> impl Strategy<Value = (usize, Vec<(usize, usize, Part)>, Vec<usize>)> {
        let part = prop_oneof![
            prop::sample::select(vec![0.5, 2.0, 10.0, 1e3]).prop_map(Part::Resistor),
            (
                prop::sample::select(vec![0.0, 5.0, -12.0, 24.0]),
                prop::sample::select(vec![0.0, 0.0, 10.0]),
                prop::sample::select(vec![0.0, 1.0, 1.0, 1.0]),
            )
                .prop_map(|(v, a, r)| Part::Source(v, a, r)),
            prop::sample::select(vec![0.0, 3.0, -2.0]).prop_map(Part::Capacitor),
            prop::sample::select(vec![0.0, 0.0, 1.5, -0.5]).prop_map(Part::Inductor),
            (
                prop::sample::select(vec![0.0, 0.0, 0.7]),
                prop::sample::select(vec![0.0, 0.0, 0.05, 1.0])
            )
                .prop_map(|(vf, r)| Part::Diode(vf, r)),
            prop::sample::select(vec![0.1e-3, 0.15e-3]).prop_map(Part::Switch),
        ];
        (1usize..=4).prop_flat_map(move |n| {
            // Two distinct nodes.
            let ends = (0..=n, 1..=n).prop_map(move |(a, d)| (a, (a + d) % (n + 1)));
            let wire = (ends.clone(), part.clone()).prop_map(|((a, b), p)| (a, b, p));
            let diode = (
                ends,
                (
                    prop::sample::select(vec![0.0, 0.7]),
                    prop::sample::select(vec![0.0, 0.1]),
                )
                    .prop_map(|(vf, r)| Part::Diode(vf, r)),
            )
                .prop_map(|((a, b), p)| (a, b, p));
            (
                Just(n),
                (
                    prop::collection::vec(wire, 1..6),
                    prop::collection::vec(diode, 1..5),
                )
                    .prop_map(|(mut a, b)| {
                        a.extend(b);
                        a
                    }),
                // Nodes tied to ground through a large resistor.
                prop::collection::vec(1..=n, 0..=n),
            )
        })
    }

    /// The circuit of a generated network, if the netlist accepts it.
    fn build(parts: &[(usize, usize, Part)], tied: &[usize]) -> Option<Circuit> {
        let node = |i: usize| {
            if i == 0 {
                "gnd".to_string()
            } else {
                format!("n{i}")
            }
        };
        let mut b = Circuit::builder()
            .voltage_waveform(
                "Vref",
                "n1",
                "sref",
                fluxstep_netlist::Stimulus::sine(1.0, 9.0, 5e3, 0.0),
            )
            .resistor("Rref", "sref", "gnd", 1.0);
        for (k, (x, y, p)) in parts.iter().enumerate() {
            let (x, y) = (node(*x), node(*y));
            b = match *p {
                Part::Resistor(r) => b.resistor(&format!("R{k}"), &x, &y, r),
                // A source in series with its resistance `r` (if any).
                Part::Source(v, a, r) => {
                    let inner = if r > 0.0 { format!("s{k}") } else { y.clone() };
                    let w = if a == 0.0 {
                        fluxstep_netlist::Stimulus::constant(v)
                    } else {
                        fluxstep_netlist::Stimulus::sine(v, a, 3e3, 0.0)
                    };
                    let b = b.voltage_waveform(&format!("V{k}"), &x, &inner, w);
                    if r > 0.0 {
                        b.resistor(&format!("Rs{k}"), &inner, &y, r)
                    } else {
                        b
                    }
                }
                Part::Capacitor(v) => b.capacitor_with_voltage(&format!("C{k}"), &x, &y, 10e-6, v),
                // An inductor in series with 0.1 ohm: loops of ideal
                // inductors alone are left out (one such network makes the
                // event location loop; a finding of its own).
                Part::Inductor(i) => b
                    .inductor_with_current(&format!("L{k}"), &x, &format!("l{k}"), 1e-3, i)
                    .resistor(&format!("Rl{k}"), &format!("l{k}"), &y, 0.1),
                Part::Diode(vf, r) => b.diode_model(
                    &format!("D{k}"),
                    &x,
                    &y,
                    fluxstep_netlist::DiodeModel {
                        forward_voltage: Some(vf),
                        on_resistance: Some(r),
                        recovered_charge: None,
                    },
                ),
                Part::Switch(t) => b.timed_switch(
                    &format!("S{k}"),
                    &x,
                    &y,
                    &[(0.0, true), (t, false), (2.0 * t, true)],
                ),
            };
        }
        let mut tied = tied.to_vec();
        tied.sort_unstable();
        tied.dedup();
        for &i in &tied {
            b = b.resistor(&format!("Rt{i}"), &node(i), "gnd", 1e6);
        }
        b.build().ok()
    }

    proptest! {
        #![proptest_config(ProptestConfig {
            cases: std::env::var("LCP_CASES").ok().and_then(|v| v.parse().ok()).unwrap_or(1200),
            max_global_rejects: 100_000,
            // A fixed seed: the same 1,200 networks on every run.
            rng_seed: proptest::test_runner::RngSeed::Fixed(7),
            ..ProptestConfig::default()
        })]

        /// Issue 20: on random small diode networks, pivoting picks the
        /// pattern the exhaustive search picks, at t = 0 and at every
        /// instant of a 0.4 ms run (both from the same state; a run that
        /// stops, e.g. on a short of a source, is compared up to there).
        // Ties between parallel ideal paths (several solutions of the
        // LCP) go the search's way through `settle`; a network whose event
        // location would stall at one instant stops with the stall
        // diagnostic, and the comparison covers the run up to there.
        #[test]
        fn issue_20_pivoting_agrees_with_the_search_on_random_networks(
            (_n, parts, tied) in network()
        ) {
            // At most six diodes: the search beside pivoting may judge
            // all 2^n patterns at an instant.
            let diodes = parts.iter().filter(|p| matches!(p.2, Part::Diode(..))).count();
            prop_assume!(diodes <= 6);
            let c = build(&parts, &tied);
            prop_assume!(c.is_some());
            let c = c.expect("assumed");
            CROSS.with(|f| *f.borrow_mut() = Some(CrossCheck::default()));
            let opts = Options { max_events: 400, ..Options::default() };
            // Advanced in slices of 10 µs, so a run that stops is compared
            // up to the slice where it stopped.
            if let Ok(mut sim) = Simulator::new(&c, opts) {
                sim.shortcuts.replay = false;
                for k in 1..=40 {
                    if sim.advance_to(f64::from(k) * 1e-5).is_err() {
                        break;
                    }
                }
            }
            let cross = CROSS.with(|f| f.borrow_mut().take()).expect("set above");
            // LCP_SHOW=1 prints each case's counts (with --nocapture).
            if std::env::var("LCP_SHOW").is_ok() {
                eprintln!(
                    "case: {} agreed, {} fallbacks, {} neither",
                    cross.agree, cross.fallback, cross.neither
                );
            }
            prop_assert!(cross.differ.is_empty(), "{:?}\n{}", cross.differ, c.to_json());
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
