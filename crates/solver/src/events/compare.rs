//! Comparing an event log with a golden one: events are aligned by
//! element, kind and cause, then paired in time order within each such
//! stream; a pair further apart than the tolerance has *moved*, an event
//! with no partner was *added* (new log only) or is *missing* (golden log
//! only). The analysis crate turns the result into sentences.

use std::collections::HashMap;

use super::{EventCause, EventKind, EventLog};

/// Time tolerances of [`EventLog::compare`]: an event may move by
/// `absolute + relative · period` and still count as the same.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerances {
    /// Default 0. Absolute tolerance (s).
    pub absolute: f64,
    /// Default 0. Tolerance as a fraction of the switching period.
    pub relative: f64,
    /// Default `None`: estimated from the golden log (the median interval
    /// between turn-ons of its most frequently switched switch). The
    /// switching period (s), for `relative`, for numbering periods and for
    /// pairing: events more than half a period apart are never paired.
    pub period: Option<f64>,
}

impl Default for Tolerances {
    fn default() -> Self {
        Tolerances {
            absolute: 0.0,
            relative: 0.0,
            period: None,
        }
    }
}

impl Tolerances {
    /// An absolute tolerance only (s).
    pub fn absolute(seconds: f64) -> Tolerances {
        Tolerances {
            absolute: seconds,
            ..Tolerances::default()
        }
    }
}

/// How one event differs from the golden log.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum DifferenceKind {
    /// Paired with a golden event but further from it than the tolerance.
    Moved,
    /// In the new log only.
    Added,
    /// In the golden log only.
    Missing,
}

/// One difference between a log and its golden log.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Difference {
    /// What differs.
    pub kind: DifferenceKind,
    /// The element.
    pub element: String,
    /// The event's kind.
    pub event: EventKind,
    /// The event's cause.
    pub cause: EventCause,
    /// When it happens in the new log (s); `None` if missing.
    pub time: Option<f64>,
    /// When it happens in the golden log (s); `None` if added.
    pub golden_time: Option<f64>,
    /// Switching period it falls in (0 first), when the period is known.
    pub period: Option<u64>,
}

impl Difference {
    /// The earlier of its two instants (s).
    pub fn first_time(&self) -> f64 {
        match (self.time, self.golden_time) {
            (Some(a), Some(b)) => a.min(b),
            (Some(a), None) | (None, Some(a)) => a,
            (None, None) => f64::NAN,
        }
    }

    /// New time minus golden time (s), for a moved event.
    pub fn shift(&self) -> Option<f64> {
        Some(self.time? - self.golden_time?)
    }
}

/// The result of [`EventLog::compare`].
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Comparison {
    /// The switching period used (given or estimated), if any (s).
    pub period: Option<f64>,
    /// The tolerance applied to each event (s).
    pub allowed: f64,
    /// Events compared in the new log.
    pub events: usize,
    /// Events compared in the golden log.
    pub golden_events: usize,
    /// Pairs within the tolerance.
    pub matched: usize,
    /// Pairs further apart than the tolerance.
    pub moved: usize,
    /// Events in the new log only.
    pub added: usize,
    /// Events in the golden log only.
    pub missing: usize,
    /// Events left out because one log runs past the end (or starts
    /// before the start) of the other, by more than half a period.
    pub outside_common_span: usize,
    /// The largest shift of a paired event, within tolerance or not
    /// (new minus golden, s).
    pub largest_shift: f64,
    /// The first differences in time order (at most
    /// [`Comparison::KEPT`]).
    pub differences: Vec<Difference>,
}

impl Comparison {
    /// How many differences are kept in [`Comparison::differences`].
    pub const KEPT: usize = 100;

    /// True when nothing moved beyond the tolerance, nothing was added
    /// and nothing is missing.
    pub fn is_equal(&self) -> bool {
        self.moved == 0 && self.added == 0 && self.missing == 0
    }

    /// The first difference in time, if any.
    pub fn first(&self) -> Option<&Difference> {
        self.differences.first()
    }
}

/// Why two logs cannot be compared.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum CompareError {
    /// The logs record different state variables: they come from
    /// different circuits.
    #[error(
        "the logs come from different circuits: their states are [{}] and, in the golden log, [{}]",
        .new.join(", "),
        .golden.join(", ")
    )]
    DifferentCircuits {
        /// State names of the new log.
        new: Vec<String>,
        /// State names of the golden log.
        golden: Vec<String>,
    },
    /// The logs have no switch in common: they come from different
    /// circuits.
    #[error(
        "the logs come from different circuits: their switches are [{}] and, in the golden log, [{}]",
        .new.join(", "),
        .golden.join(", ")
    )]
    DifferentSwitches {
        /// Switches of the new log.
        new: Vec<String>,
        /// Switches of the golden log.
        golden: Vec<String>,
    },
    /// A tolerance or period that is negative or not finite.
    #[error("tolerance {what} must be finite and not negative, got {value}")]
    BadTolerance {
        /// Which one (`absolute`, `relative`, `period`).
        what: &'static str,
        /// The value given.
        value: f64,
    },
}

/// The stream an event belongs to: (element name index, kind, cause).
type Key = (u32, u8, u8);

/// Event times per stream, with the stream keys in first-seen order.
struct Streams {
    index: HashMap<Key, usize>,
    keys: Vec<Key>,
    times: Vec<Vec<f64>>,
}

impl Streams {
    fn of(log: &EventLog, names: &mut HashMap<String, u32>) -> Streams {
        let ids: Vec<u32> = log
            .names
            .iter()
            .map(|n| {
                let next = names.len() as u32;
                *names.entry(n.clone()).or_insert(next)
            })
            .collect();
        let mut s = Streams {
            index: HashMap::new(),
            keys: Vec::new(),
            times: Vec::new(),
        };
        for r in &log.records {
            let key = (ids[r.who as usize], r.kind as u8, r.cause as u8);
            let k = *s.index.entry(key).or_insert_with(|| {
                s.keys.push(key);
                s.times.push(Vec::new());
                s.keys.len() - 1
            });
            s.times[k].push(r.time);
        }
        s
    }
}

fn kind_of(byte: u8) -> EventKind {
    const ALL: [EventKind; 8] = [
        EventKind::SwitchOn,
        EventKind::SwitchOff,
        EventKind::DiodeOn,
        EventKind::DiodeOff,
        EventKind::SourceBreakpoint,
        EventKind::ChargeJump,
        EventKind::FluxJump,
        EventKind::ShootThrough,
    ];
    ALL[byte as usize]
}

fn cause_of(byte: u8) -> EventCause {
    const ALL: [EventCause; 3] = [
        EventCause::Start,
        EventCause::Scheduled,
        EventCause::Crossing,
    ];
    ALL[byte as usize]
}

impl EventLog {
    /// The switching period as the golden comparison estimates it: the
    /// median interval between successive turn-ons of the switch that
    /// turns on most often; `None` with fewer than two turn-ons.
    pub fn switching_period(&self) -> Option<f64> {
        let mut ons: HashMap<u32, Vec<f64>> = HashMap::new();
        for r in &self.records {
            if r.kind == EventKind::SwitchOn {
                ons.entry(r.who).or_default().push(r.time);
            }
        }
        // Ties broken by the lower id, so the estimate is deterministic.
        let (_, times) = ons
            .into_iter()
            .max_by(|a, b| a.1.len().cmp(&b.1.len()).then(b.0.cmp(&a.0)))?;
        let mut gaps: Vec<f64> = times.windows(2).map(|w| w[1] - w[0]).collect();
        if gaps.is_empty() {
            return None;
        }
        gaps.sort_by(f64::total_cmp);
        Some(gaps[gaps.len() / 2])
    }

    /// Compares this log with a `golden` one of the same circuit.
    ///
    /// Events are aligned by element, kind and cause; within each such
    /// stream they are paired in time order, never across more than half
    /// a switching period. A pair whose times differ by more than
    /// `absolute + relative · period` has moved (a difference exactly
    /// equal to the tolerance passes). Logs of different lengths are
    /// compared over their common span.
    ///
    /// # Errors
    ///
    /// [`CompareError::DifferentCircuits`] when the logs record different
    /// states; [`CompareError::BadTolerance`] for a negative or
    /// non-finite tolerance.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{simulate, Options, Tolerances};
    ///
    /// let buck = Circuit::builder()
    ///     .voltage_source("Vin", "in", "gnd", 12.0)
    ///     .switch("S1", "in", "sw", "drive")
    ///     .diode("D1", "gnd", "sw")
    ///     .inductor("L1", "sw", "out", 100e-6)
    ///     .capacitor("C1", "out", "gnd", 100e-6)
    ///     .resistor("Rload", "out", "gnd", 5.0)
    ///     .pwm("drive", 100e3, 0.5)
    ///     .build()
    ///     .unwrap();
    /// let golden = simulate(&buck, 1e-4, Options::default()).unwrap().events;
    /// let again = simulate(&buck, 1e-4, Options::default()).unwrap().events;
    /// let c = again.compare(&golden, &Tolerances::absolute(1e-9)).unwrap();
    /// assert!(c.is_equal());
    /// ```
    pub fn compare(&self, golden: &EventLog, tol: &Tolerances) -> Result<Comparison, CompareError> {
        self.check_comparable(golden, tol)?;
        let span = Span::of(self, golden, tol);
        let mut names: HashMap<String, u32> = HashMap::new();
        let new = Streams::of(self, &mut names);
        let old = Streams::of(golden, &mut names);
        let mut name_of = vec![String::new(); names.len()];
        for (n, i) in names {
            name_of[i as usize] = n;
        }
        let mut tally = Tally {
            out: Comparison {
                period: span.period,
                allowed: span.allowed,
                events: 0,
                golden_events: 0,
                matched: 0,
                moved: 0,
                added: 0,
                missing: 0,
                outside_common_span: 0,
                largest_shift: 0.0,
                differences: Vec::new(),
            },
            diffs: Vec::new(),
        };
        let empty: Vec<f64> = Vec::new();
        let mut keys: Vec<Key> = new.keys.clone();
        keys.extend(old.keys.iter().filter(|k| !new.index.contains_key(k)));
        for key in keys {
            let a = new.index.get(&key).map_or(&empty, |&i| &new.times[i]);
            let g = old.index.get(&key).map_or(&empty, |&i| &old.times[i]);
            tally.pair_stream(&span, key, a, g);
        }
        let mut out = tally.out;
        out.differences = first_differences(tally.diffs, &name_of, &span);
        Ok(out)
    }

    /// Refuses logs of different circuits and bad tolerances.
    fn check_comparable(&self, golden: &EventLog, tol: &Tolerances) -> Result<(), CompareError> {
        if self.state_names != golden.state_names {
            return Err(CompareError::DifferentCircuits {
                new: self.state_names.clone(),
                golden: golden.state_names.clone(),
            });
        }
        // The same states but no switch in common: another circuit with
        // the same state names (a switch that stopped switching in one run
        // is a difference to report, so only disjoint sets are refused).
        let switches = |log: &EventLog| -> Vec<String> {
            let mut v: Vec<String> = log
                .records
                .iter()
                .filter(|r| matches!(r.kind, EventKind::SwitchOn | EventKind::SwitchOff))
                .map(|r| log.names[r.who as usize].clone())
                .collect();
            v.sort();
            v.dedup();
            v
        };
        let (mine, theirs) = (switches(self), switches(golden));
        if !mine.is_empty() && !theirs.is_empty() && !mine.iter().any(|s| theirs.contains(s)) {
            return Err(CompareError::DifferentSwitches {
                new: mine,
                golden: theirs,
            });
        }
        for (what, value) in [
            ("absolute", tol.absolute),
            ("relative", tol.relative),
            ("period", tol.period.unwrap_or(0.0)),
        ] {
            if !value.is_finite() || value < 0.0 {
                return Err(CompareError::BadTolerance { what, value });
            }
        }
        Ok(())
    }
}

/// The period, tolerance and common span of a comparison.
struct Span {
    /// The switching period used (given or estimated), if any (s).
    period: Option<f64>,
    /// The tolerance applied to each pair (s).
    allowed: f64,
    /// Half a period: pairs further apart never pair (s).
    window: f64,
    /// The common span of the two logs (s).
    lo: f64,
    hi: f64,
}

impl Span {
    fn of(new: &EventLog, golden: &EventLog, tol: &Tolerances) -> Span {
        let period = tol
            .period
            .filter(|p| *p > 0.0)
            .or_else(|| golden.switching_period())
            .filter(|p| *p > 0.0);
        let allowed = tol.absolute + tol.relative * period.unwrap_or(0.0);
        let window = period.map_or(f64::INFINITY, |p| 0.5 * p);
        let span = |log: &EventLog| -> Option<(f64, f64)> {
            Some((log.records.first()?.time, log.records.last()?.time))
        };
        let (lo, hi) = match (span(new), span(golden)) {
            (Some(a), Some(b)) => (a.0.max(b.0), a.1.min(b.1)),
            _ => (f64::NEG_INFINITY, f64::INFINITY),
        };
        Span {
            period,
            allowed,
            window,
            lo,
            hi,
        }
    }

    /// Inside the common span widened by the pairing window, so that
    /// events that moved across its ends still pair.
    fn inside(&self, t: f64) -> bool {
        t >= self.lo - self.window && t <= self.hi + self.window
    }

    /// Inside the common span itself: only there does an event with no
    /// partner count as added or missing.
    fn strictly_inside(&self, t: f64) -> bool {
        t >= self.lo && t <= self.hi
    }

    /// The switching period `t` falls in (0 first), when the period is known.
    fn period_of(&self, t: f64) -> Option<u64> {
        self.period.map(|p| (t / p).floor().max(0.0) as u64)
    }
}

/// A difference as (time, stream, new time, golden time); turned into a
/// named [`Difference`] only for the first few.
type RawDifference = (f64, Key, Option<f64>, Option<f64>);

/// The counts so far and the differences found.
struct Tally {
    out: Comparison,
    diffs: Vec<RawDifference>,
}

impl Tally {
    /// An event of the new log with no partner.
    fn added(&mut self, span: &Span, x: f64, key: Key) {
        if span.strictly_inside(x) {
            self.out.added += 1;
            self.out.events += 1;
            self.diffs.push((x, key, Some(x), None));
        } else {
            self.out.outside_common_span += 1;
        }
    }

    /// Pairs the times `a` (new) and `g` (golden) of one stream in time
    /// order and counts the outcome.
    fn pair_stream(&mut self, span: &Span, key: Key, a: &[f64], g: &[f64]) {
        let (mut i, mut j) = (0, 0);
        while i < a.len() || j < g.len() {
            let (ta, tg) = (a.get(i).copied(), g.get(j).copied());
            for t in [ta, tg].into_iter().flatten() {
                if !span.inside(t) {
                    self.out.outside_common_span += 1;
                }
            }
            match (ta, tg) {
                (Some(x), _) if !span.inside(x) => {
                    i += 1;
                    continue;
                }
                (_, Some(y)) if !span.inside(y) => {
                    j += 1;
                    continue;
                }
                _ => {}
            }
            // Pair the two heads unless the next event of either stream
            // is a closer partner: then the head is extra.
            let closer_next = |next: Option<f64>, x: f64, y: f64| {
                next.is_some_and(|n| span.inside(n) && (n - y).abs() < (x - y).abs())
            };
            let pair = match (ta, tg) {
                (Some(x), Some(y)) => {
                    (x - y).abs() <= span.window
                        && !closer_next(a.get(i + 1).copied(), x, y)
                        && !closer_next(g.get(j + 1).copied(), y, x)
                }
                _ => false,
            };
            match (ta, tg) {
                (Some(x), Some(y)) if pair => {
                    self.paired(span, key, x, y);
                    i += 1;
                    j += 1;
                }
                (Some(x), Some(y)) if x < y => {
                    self.added(span, x, key);
                    i += 1;
                }
                (Some(x), None) => {
                    self.added(span, x, key);
                    i += 1;
                }
                (_, Some(y)) => {
                    if span.strictly_inside(y) {
                        self.out.missing += 1;
                        self.out.golden_events += 1;
                        self.diffs.push((y, key, None, Some(y)));
                    } else {
                        self.out.outside_common_span += 1;
                    }
                    j += 1;
                }
                (None, None) => unreachable!("the loop runs while one remains"),
            }
        }
    }

    /// A pair: matched within the tolerance, else moved.
    fn paired(&mut self, span: &Span, key: Key, x: f64, y: f64) {
        let d = x - y;
        if d.abs() > self.out.largest_shift.abs() {
            self.out.largest_shift = d;
        }
        if d.abs() <= span.allowed {
            self.out.matched += 1;
        } else {
            self.out.moved += 1;
            self.diffs.push((x.min(y), key, Some(x), Some(y)));
        }
        self.out.events += 1;
        self.out.golden_events += 1;
    }
}

/// The first [`Comparison::KEPT`] differences, earliest first (ties by
/// stream so the order is deterministic), named.
fn first_differences(
    mut diffs: Vec<RawDifference>,
    name_of: &[String],
    span: &Span,
) -> Vec<Difference> {
    let keep = Comparison::KEPT.min(diffs.len());
    let order = |x: &RawDifference, y: &RawDifference| x.0.total_cmp(&y.0).then(x.1.cmp(&y.1));
    if keep > 0 && keep < diffs.len() {
        diffs.select_nth_unstable_by(keep - 1, order);
        diffs.truncate(keep);
    }
    diffs.sort_by(order);
    diffs
        .into_iter()
        .map(|(t, (who, kind, cause), time, golden_time)| Difference {
            kind: match (time, golden_time) {
                (Some(_), Some(_)) => DifferenceKind::Moved,
                (Some(_), None) => DifferenceKind::Added,
                _ => DifferenceKind::Missing,
            },
            element: name_of[who as usize].clone(),
            event: kind_of(kind),
            cause: cause_of(cause),
            time,
            golden_time,
            period: span.period_of(t),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A log of `S1` on/off edges at the given times (on first).
    fn edges(times: &[f64]) -> EventLog {
        let mut log = EventLog::new(vec!["L1.current".into()]);
        let s = log.intern("S1");
        for (k, &t) in times.iter().enumerate() {
            let kind = if k % 2 == 0 {
                EventKind::SwitchOn
            } else {
                EventKind::SwitchOff
            };
            log.push(t, kind, EventCause::Scheduled, s, None, &[0.0], &[0.0]);
        }
        log
    }

    #[test]
    fn the_period_is_the_median_turn_on_interval() {
        let log = edges(&[0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.1]);
        assert_eq!(log.switching_period(), Some(1.0));
    }

    #[test]
    fn a_shift_equal_to_the_tolerance_passes_and_one_ulp_less_of_tolerance_fails() {
        let golden = edges(&[0.0, 0.5, 1.0, 1.5, 2.0, 2.5]);
        let moved = edges(&[0.0, 0.5, 1.0, 1.5 + 1e-3, 2.0, 2.5]);
        let d = (1.5 + 1e-3) - 1.5;
        let pass = moved
            .compare(
                &golden,
                &Tolerances {
                    absolute: d,
                    ..Tolerances::default()
                },
            )
            .unwrap();
        assert!(pass.is_equal(), "{pass:?}");
        let fail = moved
            .compare(
                &golden,
                &Tolerances {
                    absolute: f64::from_bits(d.to_bits() - 1),
                    ..Tolerances::default()
                },
            )
            .unwrap();
        assert_eq!((fail.moved, fail.added, fail.missing), (1, 0, 0));
        assert_eq!(fail.first().unwrap().golden_time, Some(1.5));
        assert_eq!(fail.first().unwrap().period, Some(1));
    }
}
