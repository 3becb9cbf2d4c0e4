//! Signal-edge arithmetic: each gate signal as a shape of periodic
//! transitions, its state at any instant, and its exact edges in a window.

use super::format::Gate;

/// A gate edge at an exact time.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Edge {
    /// Absolute time (s), equal to `cycle as f64 * period + phase` for a
    /// periodic edge.
    pub time: f64,
    /// New state from this time on.
    pub on: bool,
    /// Cycle number `k` of a periodic edge (0 for an aperiodic one).
    pub cycle: i64,
    /// Phase within the cycle (s); the same bits for the same edge of every cycle.
    pub phase: f64,
    /// The signal's period, if it is periodic.
    pub period: Option<f64>,
}

/// The shape of one gate signal, independent of how it was described.
#[derive(Clone, Debug, PartialEq)]
pub struct SignalShape {
    /// Repeat period, if any.
    pub period: Option<f64>,
    /// State before the first transition (aperiodic) or when there are none.
    pub initial: bool,
    /// Transitions as (phase, on), phases increasing. For a periodic shape the
    /// transitions of cycle k happen at `k·period + phase`.
    pub transitions: Vec<(f64, bool)>,
    /// Held off before this time.
    pub start: Option<f64>,
    /// Held off from this time on.
    pub stop: Option<f64>,
    /// Time origin of the cycles: cycle k starts at `origin + k·period`
    /// (0 unless a controller restarted the period, e.g. after a frequency
    /// change).
    pub origin: f64,
}

impl Gate {
    /// Names of the signals this gate provides, with their shapes.
    pub fn signals(&self) -> Vec<(String, SignalShape)> {
        match self {
            Gate::Pwm {
                name,
                frequency,
                duty,
                delay,
                start,
                stop,
            } => {
                let t = 1.0 / frequency;
                let d0 = on_boundary(delay.rem_euclid(t), t);
                let transitions = if *duty <= 0.0 || *duty >= 1.0 {
                    vec![]
                } else {
                    vec![(d0, true), (on_boundary(d0 + duty * t, t), false)]
                };
                vec![(
                    name.clone(),
                    SignalShape {
                        period: Some(t),
                        initial: *duty >= 1.0,
                        transitions,
                        start: *start,
                        stop: *stop,
                        origin: 0.0,
                    },
                )]
            }
            Gate::ComplementaryPwm {
                name,
                frequency,
                duty,
                delay,
                dead_time_high,
                dead_time_low,
                start,
                stop,
            } => {
                let t = 1.0 / frequency;
                let d0 = on_boundary(delay.rem_euclid(t), t);
                let fall = on_boundary(d0 + duty * t, t);
                let hi_on = on_boundary(d0 + dead_time_high, t);
                let lo_on = on_boundary(fall + dead_time_low, t);
                let hi = if hi_on < fall {
                    vec![(hi_on, true), (fall, false)]
                } else {
                    vec![]
                };
                let lo = if lo_on < d0 + t {
                    vec![(lo_on, true), (d0 + t, false)]
                } else {
                    vec![]
                };
                let shape = |transitions| SignalShape {
                    period: Some(t),
                    initial: false,
                    transitions,
                    start: *start,
                    stop: *stop,
                    origin: 0.0,
                };
                vec![
                    (format!("{name}.high"), shape(hi)),
                    (format!("{name}.low"), shape(lo)),
                ]
            }
            Gate::PeakCurrent { name, .. }
            | Gate::ValleyCurrent { name, .. }
            | Gate::Hysteretic { name, .. }
            | Gate::VoltageMode { name, .. } => {
                // Driven by the solver's comparator, not by a schedule: the
                // shape only says "off until the run decides".
                let period = self.comparator().and_then(|c| c.period);
                vec![(
                    name.clone(),
                    SignalShape {
                        period,
                        initial: false,
                        transitions: vec![],
                        start: None,
                        stop: None,
                        origin: 0.0,
                    },
                )]
            }
            Gate::Transitions {
                name,
                initial,
                transitions,
                period,
            } => {
                let tr: Vec<(f64, bool)> = transitions.iter().map(|t| (t.time, t.on)).collect();
                let initial = if period.is_some() {
                    tr.last().map(|x| x.1).unwrap_or(*initial)
                } else {
                    *initial
                };
                vec![(
                    name.clone(),
                    SignalShape {
                        period: *period,
                        initial,
                        transitions: tr,
                        start: None,
                        stop: None,
                        origin: 0.0,
                    },
                )]
            }
        }
    }
}

/// A phase within rounding (8 units in the last place of the period) of a
/// cycle boundary (0, T or 2T) is that boundary: a delay of 9T/12 and a
/// duty cycle of 0.25, each rounded from its decimals, put the turn-off at
/// T ± 1 ulp, and the wrong side of the boundary turned the switch on at
/// t = 0 for 5e-22 s in some time units and not in others. Instants equal
/// by definition must be equal in bits; no intended pulse or gap is 1e-15
/// of a period.
fn on_boundary(phase: f64, t: f64) -> f64 {
    let band = 8.0 * f64::EPSILON * t;
    for b in [0.0, t, 2.0 * t] {
        if (phase - b).abs() <= band {
            return b;
        }
    }
    phase
}

/// The absolute time of the transition at `phase` in cycle `k` of a
/// periodic signal: the one formula every periodic edge time comes from, so
/// instants that are the same by definition are the same `f64`.
#[inline]
fn cycle_instant(origin: f64, k: i64, period: f64, phase: f64) -> f64 {
    origin + (k as f64 * period + phase)
}

impl SignalShape {
    /// The instant cycle `k` starts, as the schedule computes it: the time
    /// of the cycle's first transition (phase 0 when it has none), in the
    /// same bits as that edge. `None` for an aperiodic signal.
    pub fn cycle_start(&self, k: i64) -> Option<f64> {
        let p = self.period?;
        let phase = self.transitions.first().map_or(0.0, |t| t.0);
        Some(cycle_instant(self.origin, k, p, phase))
    }

    /// Raw (unwindowed) state just after time `t`.
    fn raw_at(&self, t: f64, strictly_before: bool) -> bool {
        let hit = |x: f64| if strictly_before { x < t } else { x <= t };
        match self.period {
            Some(p) if !self.transitions.is_empty() => {
                let k = ((t - self.origin) / p).floor() as i64;
                // Look at this cycle and the two before; phases lie in [0, 2p).
                let mut best: Option<(f64, bool)> = None;
                for c in [k - 2, k - 1, k, k + 1] {
                    for &(ph, on) in &self.transitions {
                        let time = cycle_instant(self.origin, c, p, ph);
                        if hit(time) && best.is_none_or(|(b, _)| time >= b) {
                            best = Some((time, on));
                        }
                    }
                }
                best.map(|b| b.1)
                    .unwrap_or(self.transitions.last().map(|x| x.1).unwrap_or(self.initial))
            }
            _ => self
                .transitions
                .iter()
                .rev()
                .find(|(time, _)| hit(*time))
                .map(|x| x.1)
                .unwrap_or(self.initial),
        }
    }

    fn in_window(&self, t: f64, strictly_before: bool) -> bool {
        // Every signal is off before t = 0, where a run starts.
        let s = self.start.unwrap_or(0.0).max(0.0);
        let after_start = if strictly_before { t > s } else { t >= s };
        let before_stop = match self.stop {
            Some(s) => {
                if strictly_before {
                    t <= s
                } else {
                    t < s
                }
            }
            None => true,
        };
        after_start && before_stop
    }

    /// [`SignalShape::steady_edges_into`] into a vector of its own (`None`
    /// when it does not apply), for the tests.
    #[cfg(test)]
    fn steady_edges(&self, t0: f64, t1: f64) -> Option<Vec<Edge>> {
        let mut out = Vec::new();
        self.steady_edges_into(t0, t1, &mut out).then_some(out)
    }

    /// [`SignalShape::edges`] for the usual chunk of a periodic signal,
    /// appended to `out`: the on/off window covers the whole chunk (no
    /// window edge inside it), phases lie in [0, period) and increase, and
    /// the generated times increase strictly (so no two transitions tie).
    /// Then every candidate is a transition whose own value holds, and only
    /// the changes of state are kept: the same edges as the general
    /// evaluation, without building and filtering a list of candidates.
    /// False (and `out` as it was) when any condition fails.
    fn steady_edges_into(&self, t0: f64, t1: f64, out: &mut Vec<Edge>) -> bool {
        let Some(p) = self.period else {
            return false;
        };
        let start = self.start.unwrap_or(0.0).max(0.0);
        let window_covers = start < t0 && self.stop.is_none_or(|stop| stop >= t1);
        let phases_ok = !self.transitions.is_empty()
            && self.transitions[0].0 >= 0.0
            && self.transitions.windows(2).all(|w| w[0].0 < w[1].0)
            && self.transitions.last().is_some_and(|&(ph, _)| ph < p);
        if !(window_covers && phases_ok && p > 0.0 && t1 > t0) {
            return false;
        }
        let k0 = ((t0 - self.origin) / p).floor() as i64 - 2;
        let k1 = ((t1 - self.origin) / p).ceil() as i64 + 1;
        let start = out.len();
        out.reserve(((k1 - k0).max(0) as usize + 1) * self.transitions.len());
        let mut state: Option<bool> = None;
        let mut last = f64::NEG_INFINITY;
        for k in k0..=k1 {
            for &(ph, on) in &self.transitions {
                let time = cycle_instant(self.origin, k, p, ph);
                if time < t0 {
                    continue;
                }
                if time >= t1 {
                    return true;
                }
                if time <= last {
                    out.truncate(start);
                    return false;
                }
                last = time;
                let before = *state.get_or_insert_with(|| self.was_on_before(time));
                if on != before {
                    out.push(Edge {
                        time,
                        on,
                        cycle: k,
                        phase: ph,
                        period: Some(p),
                    });
                }
                state = Some(on);
            }
        }
        true
    }

    /// State at time `t` (a signal takes its new value at the edge instant).
    pub fn is_on(&self, t: f64) -> bool {
        self.in_window(t, false) && self.raw_at(t, false)
    }

    /// State just before time `t`.
    pub fn was_on_before(&self, t: f64) -> bool {
        self.in_window(t, true) && self.raw_at(t, true)
    }

    /// Every edge with `t0 <= time < t1`, in time order.
    pub fn edges(&self, t0: f64, t1: f64) -> Vec<Edge> {
        let mut out = Vec::new();
        self.edges_into(t0, t1, &mut out);
        out
    }

    /// [`SignalShape::edges`] appended to `out` (a schedule's buffer,
    /// without a vector of its own per chunk).
    pub fn edges_into(&self, t0: f64, t1: f64, out: &mut Vec<Edge>) {
        if !self.steady_edges_into(t0, t1, out) {
            out.extend(self.general_edges(t0, t1));
        }
    }

    /// [`SignalShape::edges`] by evaluating the state after every candidate
    /// instant (transitions and window edges).
    fn general_edges(&self, t0: f64, t1: f64) -> Vec<Edge> {
        let mut cand: Vec<Edge> = Vec::new();
        let plain = |time: f64| Edge {
            time,
            on: false,
            cycle: 0,
            phase: time,
            period: None,
        };
        match self.period {
            Some(p) if !self.transitions.is_empty() => {
                let k0 = ((t0 - self.origin) / p).floor() as i64 - 2;
                let k1 = ((t1 - self.origin) / p).ceil() as i64 + 1;
                for k in k0..=k1 {
                    for &(ph, on) in &self.transitions {
                        let time = cycle_instant(self.origin, k, p, ph);
                        if time >= t0 && time < t1 {
                            cand.push(Edge {
                                time,
                                // The transition's own value, for the fast
                                // state evaluation below.
                                on,
                                cycle: k,
                                phase: ph,
                                period: Some(p),
                            });
                        }
                    }
                }
            }
            _ => {
                for &(time, _) in &self.transitions {
                    if time >= t0 && time < t1 {
                        cand.push(plain(time));
                    }
                }
            }
        }
        for w in [Some(self.start.unwrap_or(0.0).max(0.0)), self.stop]
            .into_iter()
            .flatten()
        {
            if w >= t0 && w < t1 {
                cand.push(plain(w));
            }
        }
        let order = |a: &Edge, b: &Edge| {
            a.time
                .total_cmp(&b.time)
                .then(b.period.is_some().cmp(&a.period.is_some()))
        };
        // Usually generated in order already; the sort is stable, so
        // skipping it then changes nothing.
        if !cand.is_sorted_by(|a, b| order(a, b).is_le()) {
            cand.sort_by(order);
        }
        // Without two periodic transitions at the same instant, the raw
        // state just after a periodic candidate is that transition's own
        // value (it is the latest transition at or before its time), so
        // the full evaluation is needed only for ties and window edges.
        let untied = cand
            .windows(2)
            .all(|w| !(w[0].time == w[1].time && w[0].period.is_some() && w[1].period.is_some()));
        cand.dedup_by(|b, a| a.time == b.time);
        // The state is constant between consecutive candidates (every
        // possible change is a candidate), so the state before each one is
        // the state after the previous: one evaluation per candidate.
        let mut state = cand
            .first()
            .map(|e| self.was_on_before(e.time))
            .unwrap_or(false);
        cand.into_iter()
            .filter_map(|mut e| {
                let after = if untied && e.period.is_some() {
                    e.on && self.in_window(e.time, false)
                } else {
                    self.is_on(e.time)
                };
                let changed = after != state;
                state = after;
                changed.then(|| {
                    e.on = after;
                    e
                })
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gate::format::Transition;

    /// Edges by brute force: every candidate instant, its state from
    /// `is_on`, kept where the state changes (the definition `edges`
    /// shortcuts for untied periodic transitions).
    fn edges_by_evaluation(s: &SignalShape, t0: f64, t1: f64) -> Vec<(f64, bool)> {
        let mut times: Vec<f64> = vec![];
        if let Some(p) = s.period {
            let k0 = ((t0 - s.origin) / p).floor() as i64 - 2;
            let k1 = ((t1 - s.origin) / p).ceil() as i64 + 1;
            for k in k0..=k1 {
                for &(ph, _) in &s.transitions {
                    times.push(cycle_instant(s.origin, k, p, ph));
                }
            }
        }
        times.extend([s.start.unwrap_or(0.0).max(0.0)]);
        times.extend(s.stop);
        times.retain(|&t| t >= t0 && t < t1);
        times.sort_by(f64::total_cmp);
        times.dedup();
        let mut state = times.first().map(|&t| s.was_on_before(t)).unwrap_or(false);
        let mut out = vec![];
        for t in times {
            let after = s.is_on(t);
            if after != state {
                out.push((t, after));
            }
            state = after;
        }
        out
    }

    /// The fast state evaluation in `edges` agrees with evaluating every
    /// candidate, for random periodic shapes with windows, origins and
    /// coinciding transitions (ties fall back to the full evaluation).
    #[test]
    fn edges_match_evaluation_of_every_candidate() {
        let mut rnd = uniform(0x2545_f491_4f6c_dd1du64);
        for case in 0..400 {
            let p = 1e-6 * (1.0 + 9.0 * rnd());
            let n = 1 + (rnd() * 5.0) as usize;
            let mut phases: Vec<f64> = (0..n).map(|_| 2.0 * p * rnd()).collect();
            if case % 5 == 0 {
                // A tie: the same instant twice (p apart in phase).
                let ph = 0.5 * p * rnd();
                phases.push(ph);
                phases.push(ph + p);
            }
            phases.sort_by(f64::total_cmp);
            let transitions = phases.iter().map(|&ph| (ph, rnd() < 0.5)).collect();
            let shape = SignalShape {
                period: Some(p),
                initial: rnd() < 0.5,
                transitions,
                start: (rnd() < 0.5).then(|| 20.0 * p * rnd()),
                stop: (rnd() < 0.5).then(|| 20.0 * p + 30.0 * p * rnd()),
                origin: if rnd() < 0.3 { 3.0 * p * rnd() } else { 0.0 },
            };
            let (t0, t1) = (10.0 * p * rnd(), 60.0 * p);
            let got: Vec<(f64, bool)> =
                shape.edges(t0, t1).iter().map(|e| (e.time, e.on)).collect();
            assert_eq!(
                got,
                edges_by_evaluation(&shape, t0, t1),
                "case {case}: {shape:?}"
            );
        }
    }

    /// Uniform numbers in [0, 1) from a xorshift generator: repeatable
    /// random test cases.
    fn uniform(mut seed: u64) -> impl FnMut() -> f64 {
        move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    /// Contract: the shortcut for a steady chunk gives exactly the edges of
    /// the general evaluation (every field), wherever it applies.
    #[test]
    fn steady_edges_match_the_general_evaluation() {
        let mut rnd = uniform(0x9e37_79b9_7f4a_7c15u64);
        let mut applied = 0;
        for case in 0..600 {
            let p = 1e-6 * (1.0 + 9.0 * rnd());
            let n = 1 + (rnd() * 5.0) as usize;
            let mut phases: Vec<f64> = (0..n).map(|_| p * rnd()).collect();
            phases.sort_by(f64::total_cmp);
            phases.dedup();
            let transitions = phases.iter().map(|&ph| (ph, rnd() < 0.5)).collect();
            let shape = SignalShape {
                period: Some(p),
                initial: rnd() < 0.5,
                transitions,
                start: (rnd() < 0.5).then(|| 10.0 * p * rnd()),
                stop: (rnd() < 0.5).then(|| 40.0 * p + 30.0 * p * rnd()),
                origin: if rnd() < 0.3 { 3.0 * p * rnd() } else { 0.0 },
            };
            let t0 = 12.0 * p * rnd();
            let t1 = t0 + 50.0 * p * rnd();
            if let Some(fast) = shape.steady_edges(t0, t1) {
                applied += 1;
                assert_eq!(fast, shape.general_edges(t0, t1), "case {case}: {shape:?}");
            }
        }
        assert!(
            applied > 200,
            "the shortcut applied in only {applied} cases"
        );
    }

    fn pwm(duty: f64) -> Gate {
        Gate::Pwm {
            name: "g".into(),
            frequency: 100e3,
            duty,
            delay: 0.0,
            start: None,
            stop: None,
        }
    }

    #[test]
    fn pwm_edges_are_k_times_period_plus_phase() {
        let (_, s) = pwm(0.25).signals().remove(0);
        let e = s.edges(0.0, 30e-6);
        assert_eq!(e.len(), 6);
        assert!(e[0].on && !e[1].on);
        assert_eq!(e[1].time, 0.25 * 10e-6);
        assert_eq!(e[4].time, 2.0 * 10e-6);
        // Same phase bits every cycle.
        assert_eq!(e[3].phase.to_bits(), e[1].phase.to_bits());
        assert!(s.is_on(10e-6) && !s.was_on_before(10e-6));
    }

    /// The last of twelve interleaved phases, delay 9T/12 and duty 0.25,
    /// turns off at the cycle boundary by definition; from the rounded
    /// decimals the sum is T ± 1 ulp, and on the wrong side of it the
    /// gate was on at t = 0 and turned off 5e-22 s later in some time
    /// units but not others. In every unit it is off at t = 0 and its
    /// first edge is the turn-on at 3T/4 (common practice: an edge is the
    /// same instant however the times are scaled).
    #[test]
    fn an_edge_on_the_cycle_boundary_is_on_it_in_every_time_unit() {
        for s in [1.0, 86.28277151183008, 1e-9, 3.7e-4, 1e9] {
            let t = 1.0 / (250e3 / s);
            let g = Gate::Pwm {
                name: "ph10".into(),
                frequency: 250e3 / s,
                duty: 0.25,
                delay: 3e-6 * s,
                start: None,
                stop: None,
            };
            let (_, shape) = g.signals().remove(0);
            assert_eq!(shape.transitions[1].0, t, "s = {s}");
            assert!(!shape.is_on(0.0), "s = {s}");
            let e = shape.edges(0.0, t);
            assert_eq!(e.len(), 1, "s = {s}: {e:?}");
            assert!(e[0].on, "s = {s}");
        }
        // A gap of a few ulps is a boundary; a real one is kept.
        assert_eq!(super::on_boundary(1.0 + 4.0 * f64::EPSILON, 1.0), 1.0);
        assert_eq!(super::on_boundary(1e-12, 1.0), 1e-12);
    }

    #[test]
    fn complementary_pair_has_dead_times() {
        let g = Gate::ComplementaryPwm {
            name: "hb".into(),
            frequency: 100e3,
            duty: 0.5,
            delay: 0.0,
            dead_time_high: 100e-9,
            dead_time_low: 50e-9,
            start: None,
            stop: None,
        };
        let s = g.signals();
        assert_eq!(s[0].0, "hb.high");
        let hi = s[0].1.edges(0.0, 10e-6);
        let lo = s[1].1.edges(0.0, 10e-6);
        assert_eq!(hi[0].time, 100e-9);
        assert_eq!(hi[1].time, 5e-6);
        assert_eq!(lo[0].time, 5e-6 + 50e-9);
        assert!(!lo[0].on || lo[0].time > hi[1].time);
    }

    #[test]
    fn start_and_stop_window() {
        let g = Gate::Pwm {
            name: "g".into(),
            frequency: 1.0,
            duty: 0.5,
            delay: 0.0,
            start: Some(0.25),
            stop: Some(2.25),
        };
        let (_, s) = g.signals().remove(0);
        let e: Vec<(f64, bool)> = s.edges(0.0, 5.0).iter().map(|e| (e.time, e.on)).collect();
        assert_eq!(
            e,
            vec![
                (0.25, true),
                (0.5, false),
                (1.0, true),
                (1.5, false),
                (2.0, true),
                (2.25, false)
            ]
        );
    }

    #[test]
    fn explicit_transitions_repeat() {
        let g = Gate::Transitions {
            name: "t".into(),
            initial: false,
            transitions: vec![
                Transition {
                    time: 0.1,
                    on: true,
                },
                Transition {
                    time: 0.3,
                    on: false,
                },
            ],
            period: Some(1.0),
        };
        let (_, s) = g.signals().remove(0);
        assert!(s.is_on(2.2));
        assert!(!s.is_on(2.5));
        assert_eq!(s.edges(0.0, 2.0).len(), 4);
    }
}
