//! One pass over the event log per rule: each rule kind turns the events
//! of its elements into measurements (a value at an instant), and a
//! [`Tally`] keeps the worst margin and counts the periods that violate.

use fluxstep_netlist::{EdgeSense, TimingCheck};
use fluxstep_solver::{EventCause, EventKind, EventLog};

/// One measurement: the measured value (s, or a count), the margin
/// against the limit (negative: violated), the instant it is reported at,
/// and which subjects it concerns (indices into the rule's subjects:
/// for a gap, the one that turned off and the one that turned on).
#[derive(Clone, Copy, Debug)]
pub(super) struct Sample {
    pub value: f64,
    pub margin: f64,
    pub time: f64,
    pub pair: (usize, usize),
    /// Which limit the margin is taken against: false = min, true = max.
    pub against_max: bool,
}

/// The worst sample and the counts of a rule.
#[derive(Clone, Debug, Default)]
pub(super) struct Tally {
    pub worst: Option<Sample>,
    pub worst_period: Option<u64>,
    pub measured: usize,
    pub violations: usize,
    pub periods: usize,
    pub violated_periods: usize,
    last_period: Option<u64>,
    last_violated: Option<u64>,
}

impl Tally {
    /// Adds a sample at an instant inside the rule's window.
    pub fn add(&mut self, s: Sample, period: Option<u64>) {
        self.measured += 1;
        if period.is_none() || period != self.last_period {
            self.periods += 1;
            self.last_period = period;
        }
        // Strictly smaller: the first instant of the worst margin is kept.
        if self.worst.is_none_or(|w| s.margin < w.margin) {
            self.worst = Some(s);
            self.worst_period = period;
        }
        if s.margin < 0.0 {
            self.violations += 1;
            if period.is_none() || period != self.last_violated {
                self.violated_periods += 1;
                self.last_violated = period;
            }
        }
    }
}

/// Switch edges and diode transitions of the named elements, in log
/// order, as (subject index, turned on, time, cause).
fn transitions<'a>(
    log: &'a EventLog,
    subjects: &'a [&'a str],
) -> impl Iterator<Item = (usize, bool, f64, EventCause)> + 'a {
    // Element numbers instead of names: one integer comparison per event
    // keeps a rule a small fraction of the run it checks.
    let ids: Vec<Option<u32>> = subjects.iter().map(|s| log.element_number(s)).collect();
    log.brief().filter_map(move |(time, kind, cause, who)| {
        let on = match kind {
            EventKind::SwitchOn | EventKind::DiodeOn => true,
            EventKind::SwitchOff | EventKind::DiodeOff => false,
            _ => return None,
        };
        let i = ids.iter().position(|x| *x == Some(who))?;
        Some((i, on, time, cause))
    })
}

fn min_sample(value: f64, min: f64, time: f64, pair: (usize, usize)) -> Sample {
    Sample {
        value,
        margin: value - min,
        time,
        pair,
        against_max: false,
    }
}

fn max_sample(value: f64, max: f64, time: f64, pair: (usize, usize)) -> Sample {
    Sample {
        value,
        margin: max - value,
        time,
        pair,
        against_max: true,
    }
}

/// A min/max pair: the sample with the smaller margin (the limit that is
/// closer to being broken).
fn range_sample(value: f64, min: Option<f64>, max: Option<f64>, time: f64) -> Sample {
    let lo = min.map(|m| min_sample(value, m, time, (0, 0)));
    let hi = max.map(|m| max_sample(value, m, time, (0, 0)));
    match (lo, hi) {
        (Some(a), Some(b)) => {
            if b.margin < a.margin {
                b
            } else {
                a
            }
        }
        (Some(a), None) => a,
        (None, Some(b)) => b,
        (None, None) => min_sample(value, f64::NEG_INFINITY, time, (0, 0)),
    }
}

/// Calls `emit` with every sample of an event-log rule, in time order of
/// the instants they are reported at (the band rule is measured on the
/// waveform instead, by the caller).
pub(super) fn samples(
    check: &TimingCheck,
    log: &EventLog,
    period: Option<f64>,
    mut emit: impl FnMut(Sample),
) {
    let subjects = check.subjects();
    match check {
        TimingCheck::DeadTime { min, .. } => {
            gaps(log, &subjects, |s| emit(min_sample(s.0, *min, s.1, s.2)))
        }
        TimingCheck::NoOverlap { .. } => {
            gaps(log, &subjects, |s| emit(min_sample(s.0, 0.0, s.1, s.2)))
        }
        TimingCheck::OnTime { min, max, .. } => {
            intervals(log, &subjects, true, |t0, t1| {
                emit(range_sample(t1 - t0, *min, *max, t0))
            });
        }
        TimingCheck::OffTime { min, max, .. } => {
            intervals(log, &subjects, false, |t0, t1| {
                emit(range_sample(t1 - t0, *min, *max, t0))
            });
        }
        TimingCheck::SwitchingPeriod { min, max, .. } => {
            let mut last_on: Option<f64> = None;
            for (_, on, t, _) in transitions(log, &subjects) {
                if on {
                    if let Some(t0) = last_on {
                        emit(range_sample(t - t0, *min, *max, t0));
                    }
                    last_on = Some(t);
                }
            }
        }
        TimingCheck::DiodeConduction { max, .. } => {
            conduction(log, &subjects, period, |value, end| {
                emit(max_sample(value, *max, end, (0, 0)))
            });
        }
        TimingCheck::HardTurnOn { max_count, .. } => {
            // Subjects: [switch, diode]. At one instant the switch's edge
            // is logged before the diode's commutation, so a diode still
            // marked conducting when the switch turns on was forced off by
            // it: a hard turn-on. One whose current fell to zero before (a
            // located crossing) is off by then.
            let mut conducting = false;
            let mut count: u64 = 0;
            for (i, on, t, _) in transitions(log, &subjects) {
                match (i, on) {
                    (1, on) => conducting = on,
                    (0, true) if conducting => {
                        count += 1;
                        let allowed = *max_count as f64;
                        emit(max_sample(count as f64, allowed, t, (1, 0)));
                    }
                    _ => {}
                }
            }
        }
        TimingCheck::EdgeDelay { edge, max, .. } => {
            let switch = subjects[0];
            // The latest located crossing since this switch's last edge.
            let id = log.element_number(switch);
            let mut crossing: Option<f64> = None;
            for (time, kind, cause, who) in log.brief() {
                let own =
                    Some(who) == id && matches!(kind, EventKind::SwitchOn | EventKind::SwitchOff);
                if cause == EventCause::Crossing && !own {
                    crossing = Some(time);
                    continue;
                }
                if !own {
                    continue;
                }
                let on = kind == EventKind::SwitchOn;
                let watched = match edge {
                    EdgeSense::On => on,
                    EdgeSense::Off => !on,
                    EdgeSense::Both => true,
                };
                // A switch event at a crossing is its own trigger.
                let trigger = if cause == EventCause::Crossing {
                    Some(time)
                } else {
                    crossing
                };
                if watched {
                    if let Some(tc) = trigger {
                        emit(max_sample(time - tc, *max, time, (0, 0)));
                    }
                }
                crossing = None;
            }
        }
        TimingCheck::Band { .. } => {}
    }
}

/// Gaps from one switch turning off to another turning on, as (gap,
/// instant of the turn-on, (off, on) subject indices). An overlap — one
/// turning on while another is still on — counts as the negative gap
/// from the turn-on to the other's turn-off, reported at the turn-on.
fn gaps(log: &EventLog, subjects: &[&str], mut emit: impl FnMut((f64, f64, (usize, usize)))) {
    let n = subjects.len();
    let mut on = vec![false; n];
    let mut last_off: Vec<Option<f64>> = vec![None; n];
    let mut last_on: Vec<f64> = vec![f64::NAN; n];
    // The switch whose turn-off came last among those off (and when).
    let mut latest_off: Option<(usize, f64)> = None;
    for (i, turned_on, t, _) in transitions(log, subjects) {
        if turned_on {
            if on[i] {
                continue;
            }
            on[i] = true;
            last_on[i] = t;
            // Overlaps are reported when the other switch turns off.
            if (0..n).any(|j| j != i && on[j]) {
                continue;
            }
            if let Some((j, t_off)) = latest_off {
                if j != i {
                    emit((t - t_off, t, (j, i)));
                }
            }
        } else {
            if !on[i] {
                continue;
            }
            on[i] = false;
            last_off[i] = Some(t);
            latest_off = Some((i, t));
            for j in 0..n {
                if j != i && on[j] && last_on[j] >= last_on[i] {
                    // j turned on at last_on[j] while i was on until t.
                    emit((last_on[j] - t, last_on[j], (i, j)));
                }
            }
        }
    }
}

/// On-intervals (`on = true`) or off-intervals of the rule's switch, as
/// (start, end).
fn intervals(log: &EventLog, subjects: &[&str], on: bool, mut emit: impl FnMut(f64, f64)) {
    let mut start: Option<f64> = None;
    for (_, turned_on, t, _) in transitions(log, subjects) {
        if turned_on == on {
            start = Some(t);
        } else if let Some(t0) = start.take() {
            emit(t0, t);
        }
    }
}

/// Conduction time of the rule's diode per switching period (per
/// interval without a period), as (time, instant the last interval of the
/// period ended). An interval crossing a period boundary is split there.
fn conduction(
    log: &EventLog,
    subjects: &[&str],
    period: Option<f64>,
    mut emit: impl FnMut(f64, f64),
) {
    let mut start: Option<f64> = None;
    // (period index, conduction so far, end of the last interval)
    let mut acc: Option<(i64, f64, f64)> = None;
    for (_, on, t, _) in transitions(log, subjects) {
        if on {
            start.get_or_insert(t);
            continue;
        }
        let Some(t0) = start.take() else { continue };
        let Some(p) = period else {
            emit(t - t0, t);
            continue;
        };
        let mut a = t0;
        while a < t {
            let k = super::period_index_f(a, p);
            let b = t.min((k + 1) as f64 * p);
            let b = if b <= a { t } else { b };
            match &mut acc {
                Some((kk, sum, end)) if *kk == k => {
                    *sum += b - a;
                    *end = b;
                }
                _ => {
                    if let Some((_, sum, end)) = acc {
                        emit(sum, end);
                    }
                    acc = Some((k, b - a, b));
                }
            }
            a = b;
        }
    }
    if let Some((_, sum, end)) = acc {
        emit(sum, end);
    }
}
