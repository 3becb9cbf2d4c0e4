//! The period at which a run repeats, read from its switch turn-ons: for
//! runs without a periodic gate to take it from (a hysteretic converter,
//! explicit gate transitions), and to tell whether the end of a window is
//! periodic operation at all.

use super::{EventKind, EventLog};

/// How many of the last turn-on spacings must agree.
const REPEAT_GAPS: usize = 4;

/// The largest of those spacings may exceed the smallest by this factor
/// (1 %): a fixed-frequency converter repeats to rounding, a settled
/// hysteretic one to well within it, a start-up or a load step does not.
const REPEAT_SPREAD: f64 = 1.01;

impl EventLog {
    /// The switching period at the end of the window `[t0, t1]`, when the
    /// run repeats there: the mean of the last four spacings between
    /// turn-ons of the switch that turns on most often in the window,
    /// provided the largest of those spacings is at most 1 % above the
    /// smallest.
    ///
    /// Returns `None` when that switch turns on fewer than three times in
    /// the window, when two turn-ons coincide, or when the spacings
    /// disagree (start-up, a load step, an irregular or chaotic pattern).
    /// With three or four turn-ons the mean is over the two or three
    /// spacings there are. Among switches that turn on equally often, the
    /// one whose first turn-on in the window comes latest counts (for a
    /// complementary pair: the switch that turns on second); the result
    /// depends on the log alone, so it is the same on every run.
    ///
    /// Unlike [`EventLog::switching_period`] (the median spacing over the
    /// whole log, which pairs events for a golden comparison), this answers
    /// whether the end of a window is periodic operation and with which
    /// period: the design-review figure measures one period's ripple with
    /// it.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{simulate, Options};
    ///
    /// let buck = Circuit::builder()
    ///     .voltage_source("Vin", "in", "gnd", 12.0)
    ///     .switch("S1", "in", "sw", "drive")
    ///     .diode("D1", "gnd", "sw")
    ///     .inductor("L1", "sw", "out", 22e-6)
    ///     .capacitor("C1", "out", "gnd", 47e-6)
    ///     .resistor("R1", "out", "gnd", 5.0)
    ///     .pwm("drive", 200e3, 0.4)
    ///     .build()
    ///     .unwrap();
    /// let log = simulate(&buck, 100e-6, Options::default()).unwrap().events;
    /// let period = log.repeat_period(0.0, 100e-6).unwrap();
    /// assert!((period - 5e-6).abs() < 1e-15);
    /// ```
    pub fn repeat_period(&self, t0: f64, t1: f64) -> Option<f64> {
        // Grouped by name in order of first turn-on; `max_by_key` keeps the
        // last of equal counts, which is the tie rule documented above.
        let mut by_switch: Vec<(&str, Vec<f64>)> = Vec::new();
        for e in self.of_kind(EventKind::SwitchOn) {
            if e.time < t0 || e.time > t1 {
                continue;
            }
            match by_switch.iter_mut().find(|(n, _)| *n == e.element) {
                Some((_, v)) => v.push(e.time),
                None => by_switch.push((e.element, vec![e.time])),
            }
        }
        let (_, times) = by_switch.into_iter().max_by_key(|(_, v)| v.len())?;
        if times.len() < 3 {
            return None;
        }
        let gaps: Vec<f64> = times
            .windows(2)
            .rev()
            .take(REPEAT_GAPS)
            .map(|w| w[1] - w[0])
            .collect();
        let (lo, hi) = gaps
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(l, h), g| (l.min(*g), h.max(*g)));
        (lo > 0.0 && hi <= lo * REPEAT_SPREAD).then(|| gaps.iter().sum::<f64>() / gaps.len() as f64)
    }
}

#[cfg(test)]
mod tests {
    use crate::events::{EventCause, EventKind, EventLog};
    use crate::test_util::sync_buck;
    use crate::{simulate, Options};

    /// A log of on/off edge pairs: `switch` turns on at each of `ons` and
    /// off a quarter of the way to the next.
    fn log_of(switches: &[(&str, &[f64])]) -> EventLog {
        let mut events: Vec<(f64, EventKind, &str)> = vec![];
        for (name, ons) in switches {
            for (k, &t) in ons.iter().enumerate() {
                events.push((t, EventKind::SwitchOn, name));
                if let Some(next) = ons.get(k + 1) {
                    events.push((t + 0.25 * (next - t), EventKind::SwitchOff, name));
                }
            }
        }
        events.sort_by(|a, b| a.0.total_cmp(&b.0));
        let mut log = EventLog::new(vec!["L1.current".into()]);
        for (t, kind, name) in events {
            let who = log.intern(name);
            log.push(t, kind, EventCause::Scheduled, who, None, &[0.0], &[0.0]);
        }
        log
    }

    /// Turn-ons starting at `start` with the given spacings.
    fn ons(start: f64, gaps: &[f64]) -> Vec<f64> {
        let mut t = vec![start];
        for g in gaps {
            t.push(t[t.len() - 1] + g);
        }
        t
    }

    #[test]
    fn a_periodic_log_gives_its_period_exactly() {
        // Binary fractions: every spacing and their mean are exact.
        let log = log_of(&[("S1", &ons(0.0, &[0.25; 12]))]);
        assert_eq!(log.repeat_period(0.0, 3.0), Some(0.25));
        // Three turn-ons: the mean of the two spacings there are.
        assert_eq!(log.repeat_period(0.0, 0.5), Some(0.25));
    }

    #[test]
    fn an_aperiodic_log_gives_none() {
        // Each spacing 10 % longer than the one before (a slowing pattern).
        let gaps: Vec<f64> = (0..10).map(|k| 1.1f64.powi(k)).collect();
        let log = log_of(&[("S1", &ons(0.0, &gaps))]);
        assert_eq!(log.repeat_period(0.0, 100.0), None);
        // Too few turn-ons in the window.
        let log = log_of(&[("S1", &ons(0.0, &[1.0; 6]))]);
        assert_eq!(log.repeat_period(0.0, 1.5), None);
        assert_eq!(log.repeat_period(4.5, 6.0), None);
        // Coinciding turn-ons.
        let log = log_of(&[("S1", &[0.0, 1.0, 1.0, 2.0])]);
        assert_eq!(log.repeat_period(0.0, 2.0), None);
        // No switch at all.
        assert_eq!(EventLog::default().repeat_period(0.0, 1.0), None);
    }

    #[test]
    fn the_last_four_spacings_must_agree_to_one_percent() {
        // An irregular start-up, then four spacings within 0.8 %.
        let settled = [3.0, 0.5, 2.0, 1.0, 1.004, 0.996, 1.0];
        let log = log_of(&[("S1", &ons(0.0, &settled))]);
        let p = log.repeat_period(0.0, 20.0).expect("settled");
        assert!((p - 1.0).abs() < 1e-12, "{p}");
        // One of the last four 1.2 % off the others: not periodic.
        let jitter = [1.0, 1.0, 1.012, 1.0, 1.0];
        let log = log_of(&[("S1", &ons(0.0, &jitter))]);
        assert_eq!(log.repeat_period(0.0, 20.0), None);
        // Seen from after the odd spacing, the run repeats.
        assert!(log.repeat_period(2.5, 20.0).is_some());
    }

    #[test]
    fn the_busiest_switch_sets_the_period_and_ties_go_to_the_later_one() {
        let log = log_of(&[("S1", &ons(0.0, &[1.0; 4])), ("S2", &ons(0.0, &[0.5; 8]))]);
        assert_eq!(log.repeat_period(0.0, 10.0), Some(0.5));
        // Equal counts: S2 first turns on later, and its spacings disagree.
        let log = log_of(&[
            ("S1", &ons(0.0, &[1.0; 4])),
            ("S2", &ons(0.5, &[1.0, 1.0, 2.0, 1.0])),
        ]);
        assert_eq!(log.repeat_period(0.0, 10.0), None);
    }

    /// The synchronous buck of the unit tests at 200 kHz (5 µs, by
    /// construction of its gate): its high-side switch turns on once a
    /// period, so the period comes back to rounding; the whole run starts
    /// at rest but the gate is periodic from the first edge.
    #[test]
    fn a_simulated_pwm_run_repeats_at_its_gate_period() {
        let run = simulate(&sync_buck(None, false), 100e-6, Options::default()).expect("runs");
        let p = run.events.repeat_period(0.0, 100e-6).expect("periodic");
        assert!((p - 5e-6).abs() <= 1e-9 * 5e-6, "{p:e}");
        assert_eq!(run.events.repeat_period(0.0, 8e-6), None);
    }
}
