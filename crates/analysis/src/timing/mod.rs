//! Timing checks as regression tests: the timing rules of a circuit's run
//! settings ([`fluxstep_netlist::TimingRule`]) evaluated over a recorded
//! run, period by period, and golden event-log comparisons put into a
//! designer's words.
//!
//! - [`check`]: every rule over an [`EventLog`] (and, for output bands, the
//!   [`Waveform`]), returning a [`TimingReport`] with each rule's
//!   worst-case margin, where it occurs and how many periods violate it.
//! - [`assert_timing`] and [`assert_matches_golden`]: one line in a
//!   `#[test]`; the panic message is the same sentence `fluxstep run` and
//!   `fluxstep compare` print.
//! - [`describe_comparison`]: the sentence for an [`EventLog::compare`]
//!   result.
//!
//! Margins are positive when a rule holds: for a lower limit the measured
//! value minus the limit, for an upper limit the limit minus the value
//! (docs/timing.md lists each rule's measured value and instant).
//!
//! # Example
//!
//! ```
//! use fluxstep_analysis::timing::{assert_timing, check};
//! use fluxstep_netlist::{Circuit, DiodeModel, TimingCheck, TimingRule};
//! use fluxstep_solver::{simulate, Options};
//!
//! // A synchronous buck: complementary 100 kHz pair, dead times 50 ns
//! // before the high side turns on and 80 ns before the low side does.
//! let body = DiodeModel { forward_voltage: Some(0.7), on_resistance: None, recovered_charge: None };
//! let buck = Circuit::builder()
//!     .voltage_source("Vin", "in", "gnd", 12.0)
//!     .transistor("Q1", "in", "sw", "hb.high", 0.01, body.clone())
//!     .transistor("Q2", "sw", "gnd", "hb.low", 0.01, body)
//!     .inductor("L1", "sw", "out", 47e-6)
//!     .capacitor("C1", "out", "gnd", 22e-6)
//!     .resistor("R", "out", "gnd", 4.0)
//!     .complementary_pwm("hb", 100e3, 0.5, 50e-9, 80e-9)
//!     .build()
//!     .unwrap();
//! let run = simulate(&buck, 1e-4, Options::default()).unwrap();
//! let rule = TimingRule::new(TimingCheck::DeadTime {
//!     switches: ["Q1".into(), "Q2".into()],
//!     min: 40e-9,
//! });
//! let report = check(&[rule.clone()], &run.events, None, Some(1e-5)).unwrap();
//! assert!(report.passed());
//! // The shorter of the two dead times, against 40 ns: 10 ns of margin.
//! let worst = report.rules[0].worst.as_ref().unwrap();
//! assert!((worst.margin - 10e-9).abs() < 1e-15);
//! assert_timing(&[rule], &run.events, None, Some(1e-5)); // panics with a sentence if not
//! ```

mod eval;

use fluxstep_netlist::si::{format_si_instant, format_si_short};
use fluxstep_netlist::{TimingCheck, TimingRule};
use fluxstep_solver::measure::measure;
use fluxstep_solver::{Comparison, DifferenceKind, EventCause, EventKind, EventLog, Waveform};
use serde::Serialize;

use crate::error::AnalysisError;
use eval::{Sample, Tally};

/// The worst-case point of a rule.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Worst {
    /// Margin against the limit (s, or a count, or V/A for a band);
    /// negative when violated.
    pub margin: f64,
    /// The measured value there (s, count, V or A).
    pub value: f64,
    /// The limit it was held against.
    pub limit: f64,
    /// Whether that limit is an upper one.
    pub upper: bool,
    /// The instant the measurement is reported at (s).
    pub time: f64,
    /// The switching period the instant falls in (0 first), when known.
    pub period: Option<u64>,
    /// The elements involved there (for a gap: the one that turned off,
    /// then the one that turned on).
    pub elements: Vec<String>,
}

/// How one rule fared.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RuleOutcome {
    /// The rule's name ([`TimingRule::display_name`]).
    pub rule: String,
    /// The kind as written in the circuit file.
    pub kind: &'static str,
    /// The elements or output the rule names.
    pub subjects: Vec<String>,
    /// True when no measurement violated the rule.
    pub passed: bool,
    /// Unit of `value`, `limit` and `margin`: `s`, `V`, `A`, or empty for
    /// a count.
    pub unit: &'static str,
    /// The worst-case point; `None` when nothing was measured.
    pub worst: Option<Worst>,
    /// Measurements made (edges, intervals, periods, occurrences).
    pub measured: usize,
    /// Measurements that violated the rule.
    pub violations: usize,
    /// Switching periods with at least one measurement.
    pub periods: usize,
    /// Switching periods with at least one violation.
    pub violated_periods: usize,
    /// A sentence for people: why the rule failed, or its worst margin.
    pub sentence: String,
}

/// Every rule's outcome, in the order the rules were given.
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct TimingReport {
    /// One per rule.
    pub rules: Vec<RuleOutcome>,
}

impl TimingReport {
    /// True when every rule passed.
    pub fn passed(&self) -> bool {
        self.rules.iter().all(|r| r.passed)
    }

    /// The rules that failed.
    pub fn failures(&self) -> impl Iterator<Item = &RuleOutcome> {
        self.rules.iter().filter(|r| !r.passed)
    }
}

/// The switching period an instant falls in. An instant within a
/// billionth of a period before a boundary counts in the next period, so
/// an edge at k·T computed with rounding is numbered k.
pub(crate) fn period_index_f(t: f64, period: f64) -> i64 {
    (t / period + 1e-9).floor() as i64
}

fn period_index(t: f64, period: Option<f64>) -> Option<u64> {
    period.map(|p| period_index_f(t, p).max(0) as u64)
}

/// Evaluates `rules` over a recorded run: `events` for the edge rules,
/// `waveform` for output bands, `period` (s) to number periods and to sum
/// diode conduction per period (`None`: per conduction interval, and no
/// period numbers).
///
/// A measurement counts when the instant it is reported at lies in the
/// rule's window [`from`, `to`] (default: all of the log).
///
/// # Errors
///
/// [`AnalysisError::Timing`] when a band rule has no waveform, names an
/// output the waveform does not have, or watches a window the waveform
/// does not cover; or `period` is given and not positive and finite.
pub fn check(
    rules: &[TimingRule],
    events: &EventLog,
    waveform: Option<&Waveform>,
    period: Option<f64>,
) -> Result<TimingReport, AnalysisError> {
    if let Some(p) = period {
        if !(p.is_finite() && p > 0.0) {
            return Err(AnalysisError::Timing {
                rule: String::new(),
                reason: format!("the switching period must be positive and finite, got {p} s"),
            });
        }
    }
    let mut report = TimingReport::default();
    for rule in rules {
        report
            .rules
            .push(check_one(rule, events, waveform, period)?);
    }
    Ok(report)
}

fn check_one(
    rule: &TimingRule,
    events: &EventLog,
    waveform: Option<&Waveform>,
    period: Option<f64>,
) -> Result<RuleOutcome, AnalysisError> {
    let from = rule.from.unwrap_or(f64::NEG_INFINITY);
    let to = rule.to.unwrap_or(f64::INFINITY);
    let subjects: Vec<String> = rule
        .check
        .subjects()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut tally = Tally::default();
    let (unit, limits) = match &rule.check {
        TimingCheck::Band { output, min, max } => {
            band(rule, output, *min, *max, waveform, period, &mut tally)?;
            (
                fluxstep_netlist::OutputName::parse(output).map_or("", |o| o.unit()),
                (Some(*min), Some(*max)),
            )
        }
        check => {
            eval::samples(check, events, period, |s| {
                if s.time >= from && s.time <= to {
                    tally.add(s, period_index(s.time, period));
                }
            });
            let unit = if matches!(check, TimingCheck::HardTurnOn { .. }) {
                ""
            } else {
                "s"
            };
            (unit, limits_of(check))
        }
    };
    let worst = tally.worst.map(|s| Worst {
        margin: s.margin,
        value: s.value,
        limit: if s.against_max {
            limits.1.unwrap_or(f64::NAN)
        } else {
            limits.0.unwrap_or(f64::NAN)
        },
        upper: s.against_max,
        time: s.time,
        period: tally.worst_period,
        elements: match &rule.check {
            TimingCheck::DeadTime { .. } | TimingCheck::NoOverlap { .. } => {
                vec![subjects[s.pair.0].clone(), subjects[s.pair.1].clone()]
            }
            _ => subjects.clone(),
        },
    });
    let mut outcome = RuleOutcome {
        rule: rule.display_name(),
        kind: rule.check.kind_name(),
        subjects,
        passed: tally.violations == 0,
        unit,
        worst,
        measured: tally.measured,
        violations: tally.violations,
        periods: tally.periods,
        violated_periods: tally.violated_periods,
        sentence: String::new(),
    };
    outcome.sentence = sentence(rule, &outcome);
    Ok(outcome)
}

/// (lower, upper) limits of an event rule.
fn limits_of(check: &TimingCheck) -> (Option<f64>, Option<f64>) {
    match check {
        TimingCheck::DeadTime { min, .. } => (Some(*min), None),
        TimingCheck::NoOverlap { .. } => (Some(0.0), None),
        TimingCheck::OnTime { min, max, .. }
        | TimingCheck::OffTime { min, max, .. }
        | TimingCheck::SwitchingPeriod { min, max, .. } => (*min, *max),
        TimingCheck::DiodeConduction { max, .. } | TimingCheck::EdgeDelay { max, .. } => {
            (None, Some(*max))
        }
        TimingCheck::HardTurnOn { max_count, .. } => (None, Some(*max_count as f64)),
        TimingCheck::Band { min, max, .. } => (Some(*min), Some(*max)),
    }
}

/// The band rule: the exact extremes of the output over the window.
fn band(
    rule: &TimingRule,
    output: &str,
    min: f64,
    max: f64,
    waveform: Option<&Waveform>,
    period: Option<f64>,
    tally: &mut Tally,
) -> Result<(), AnalysisError> {
    let fail = |reason: String| AnalysisError::Timing {
        rule: rule.display_name(),
        reason,
    };
    let w = waveform.ok_or_else(|| fail("an output band needs the recorded waveform".into()))?;
    let id = w
        .output(output)
        .map_err(|_| fail(format!("the waveform has no output {output:?}")))?;
    let (a, b) = w
        .span()
        .ok_or_else(|| fail("nothing was recorded".into()))?;
    let (t0, t1) = (rule.from.unwrap_or(a), rule.to.unwrap_or(b));
    if t0 < a || t1 > b {
        return Err(fail(format!(
            "the window [{}, {}] is not all recorded (the record covers [{}, {}])",
            format_si_instant(t0),
            format_si_instant(t1),
            format_si_instant(a),
            format_si_instant(b)
        )));
    }
    let m = measure(w, id, t0, t1)?;
    let low = Sample {
        value: m.min,
        margin: m.min - min,
        time: m.time_of_min,
        pair: (0, 0),
        against_max: false,
    };
    let high = Sample {
        value: m.max,
        margin: max - m.max,
        time: m.time_of_max,
        pair: (0, 0),
        against_max: true,
    };
    let s = if high.margin < low.margin { high } else { low };
    tally.add(s, period_index(s.time, period));
    Ok(())
}

fn at(w: &Worst) -> String {
    match w.period {
        Some(k) => format!("at t = {} (period {k})", format_si_instant(w.time)),
        None => format!("at t = {}", format_si_instant(w.time)),
    }
}

/// The sentence of one rule's outcome.
fn sentence(rule: &TimingRule, o: &RuleOutcome) -> String {
    let name = &o.rule;
    let Some(w) = &o.worst else {
        return format!(
            "rule '{name}': nothing to measure ({} never did what the rule watches)",
            o.subjects.join(", ")
        );
    };
    let u = o.unit;
    let what = match &rule.check {
        TimingCheck::DeadTime { .. } | TimingCheck::NoOverlap { .. } if w.value < 0.0 => format!(
            "{} turned on {} before {} turned off (both on together)",
            w.elements[1],
            format_si_short(-w.value, "s"),
            w.elements[0]
        ),
        TimingCheck::DeadTime { .. } | TimingCheck::NoOverlap { .. } => format!(
            "the dead time from {} turning off to {} turning on is {}",
            w.elements[0],
            w.elements[1],
            format_si_short(w.value, "s")
        ),
        TimingCheck::OnTime { switch, .. } => {
            format!("{switch} stays on for {}", format_si_short(w.value, u))
        }
        TimingCheck::OffTime { switch, .. } => {
            format!("{switch} stays off for {}", format_si_short(w.value, u))
        }
        TimingCheck::SwitchingPeriod { switch, .. } => {
            format!(
                "{switch} switches with a period of {}",
                format_si_short(w.value, u)
            )
        }
        TimingCheck::DiodeConduction { diode, .. } => format!(
            "{diode} conducts for {} {}",
            format_si_short(w.value, u),
            if o.periods > 0 && w.period.is_some() {
                "in one period"
            } else {
                "at a stretch"
            }
        ),
        TimingCheck::HardTurnOn { switch, diode, .. } => format!(
            "{switch} turns on while {diode} conducts ({} time{} in all)",
            o.violations.max(w.value as usize),
            if w.value == 1.0 { "" } else { "s" }
        ),
        TimingCheck::EdgeDelay { switch, .. } => format!(
            "{switch} switches {} after the crossing that causes it",
            format_si_short(w.value, u)
        ),
        TimingCheck::Band { output, .. } => {
            format!("{output} reaches {}", format_si_short(w.value, u))
        }
    };
    let limit = match (&rule.check, w.upper) {
        (TimingCheck::HardTurnOn { max_count, .. }, _) => format!("{max_count} allowed"),
        (TimingCheck::NoOverlap { .. }, _) => "no overlap allowed".into(),
        (_, true) => format!("the {} maximum", format_si_short(w.limit, u)),
        (_, false) => format!("the {} minimum", format_si_short(w.limit, u)),
    };
    let margin = if u.is_empty() {
        format!("{}", w.margin.abs())
    } else {
        format_si_short(w.margin.abs(), u)
    };
    if o.passed {
        format!(
            "rule '{name}' holds: worst case {what} {}, {margin} inside {limit}",
            at(w)
        )
    } else {
        let periods = if o.periods > 0 && w.period.is_some() {
            format!(
                "; {} of {} period{} {} it",
                o.violated_periods,
                o.periods,
                if o.periods == 1 { "" } else { "s" },
                if o.violated_periods == 1 {
                    "violates"
                } else {
                    "violate"
                }
            )
        } else {
            format!(
                "; {} of {} measurements violate it",
                o.violations, o.measured
            )
        };
        let beyond = match (&rule.check, w.upper) {
            (TimingCheck::HardTurnOn { .. }, _) => format!("{margin} more than {limit}"),
            (TimingCheck::NoOverlap { .. }, _) => limit.to_string(),
            (_, true) => format!("{margin} over {limit}"),
            (_, false) => format!("{margin} short of {limit}"),
        };
        format!(
            "rule '{name}' violated: {what} {}, {beyond}{periods}",
            at(w)
        )
    }
}

/// Panics with the failing rules' sentences (one per line) unless every
/// rule passes: a timing rule as one line of a `#[test]`.
///
/// # Panics
///
/// When a rule fails, or [`check`] returns an error.
pub fn assert_timing(
    rules: &[TimingRule],
    events: &EventLog,
    waveform: Option<&Waveform>,
    period: Option<f64>,
) {
    let report = match check(rules, events, waveform, period) {
        Ok(r) => r,
        Err(e) => panic!("timing rules could not be checked: {e}"),
    };
    let failures: Vec<&str> = report.failures().map(|r| r.sentence.as_str()).collect();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

fn event_words(kind: EventKind) -> &'static str {
    match kind {
        EventKind::SwitchOn | EventKind::DiodeOn => "turns on",
        EventKind::SwitchOff | EventKind::DiodeOff => "turns off",
        EventKind::SourceBreakpoint => "reaches a corner",
        EventKind::ChargeJump => "shares charge (jump)",
        EventKind::FluxJump => "shares flux (jump)",
        EventKind::ShootThrough => "shoots through",
    }
}

fn cause_words(cause: EventCause) -> &'static str {
    match cause {
        EventCause::Start => " at the start",
        EventCause::Scheduled => "",
        EventCause::Crossing => " on its own (located crossing)",
    }
}

/// The sentence for a golden comparison: equal, or the first divergence
/// and the counts ("period 37: S2 turns on 12.5 ns later than in the
/// golden log; …").
pub fn describe_comparison(c: &Comparison) -> String {
    let counts = format!(
        "{} moved, {} added, {} missing of {} events ({} in the golden log), {} allowed",
        c.moved,
        c.added,
        c.missing,
        c.events,
        c.golden_events,
        format_si_short(c.allowed, "s")
    );
    let Some(d) = c.first() else {
        return format!(
            "the event log matches the golden log: largest shift {}; {counts}",
            format_si_short(c.largest_shift, "s")
        );
    };
    let when = match d.period {
        Some(k) => format!("period {k}"),
        None => format!("t = {}", format_si_instant(d.first_time())),
    };
    let what = format!(
        "{} {}{}",
        d.element,
        event_words(d.event),
        cause_words(d.cause)
    );
    let first = match d.kind {
        DifferenceKind::Moved => {
            let s = d.shift().unwrap_or(0.0);
            format!(
                "{when}: {what} {} {} than in the golden log (at {} instead of {})",
                format_si_short(s.abs(), "s"),
                if s > 0.0 { "later" } else { "earlier" },
                format_si_instant(d.time.unwrap_or(f64::NAN)),
                format_si_instant(d.golden_time.unwrap_or(f64::NAN))
            )
        }
        DifferenceKind::Added => format!(
            "{when}: {what} at {}, which the golden log does not have",
            format_si_instant(d.time.unwrap_or(f64::NAN))
        ),
        DifferenceKind::Missing => format!(
            "{when}: the golden log has {what} at {}, which this log does not",
            format_si_instant(d.golden_time.unwrap_or(f64::NAN))
        ),
    };
    // A second difference at the same instant is often the consequence.
    let second = c.differences.get(1).filter(|e| {
        e.period == d.period
            && (e.first_time() - d.first_time()).abs()
                <= c.allowed.max(0.0) + { c.period.map_or(0.0, |p| 0.5 * p) }
    });
    let also = match second {
        Some(e) => format!(
            "; then {} {} {}",
            e.element,
            event_words(e.event),
            match e.kind {
                DifferenceKind::Moved => {
                    let s = e.shift().unwrap_or(0.0);
                    format!(
                        "{} {}",
                        format_si_short(s.abs(), "s"),
                        if s > 0.0 { "later" } else { "earlier" }
                    )
                }
                DifferenceKind::Added => "where the golden log has nothing".into(),
                DifferenceKind::Missing => "no longer".into(),
            }
        ),
        None => String::new(),
    };
    format!("{first}{also}; {counts}")
}

/// Panics with [`describe_comparison`]'s sentence unless `log` matches
/// `golden` within `tolerances`: a golden comparison as one line of a
/// `#[test]`.
///
/// # Panics
///
/// When the logs differ beyond the tolerance or cannot be compared.
pub fn assert_matches_golden(
    log: &EventLog,
    golden: &EventLog,
    tolerances: &fluxstep_solver::Tolerances,
) {
    match log.compare(golden, tolerances) {
        Ok(c) if c.is_equal() => {}
        Ok(c) => panic!("{}", describe_comparison(&c)),
        Err(e) => panic!("{e}"),
    }
}
