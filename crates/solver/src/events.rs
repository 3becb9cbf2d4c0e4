//! The event log: every switching event in time order, with its cause, the
//! element, and the state before and after.

use serde::{Deserialize, Serialize};

/// Why an event happened.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EventKind {
    /// A switch's gate turned it on.
    SwitchOn,
    /// A switch's gate turned it off.
    SwitchOff,
    /// A diode started conducting.
    DiodeOn,
    /// A diode stopped conducting.
    DiodeOff,
    /// A piecewise-linear source reached a corner.
    SourceBreakpoint,
    /// Capacitor voltages jumped to conserve charge around a loop closed by a
    /// switch or diode; `energy` holds the energy dissipated by the jump.
    ChargeJump,
    /// Inductor currents jumped to conserve flux linkage when their path was
    /// cut (only when the run allows it); `energy` holds the energy dumped.
    FluxJump,
}

/// One event.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// Time (s).
    pub time: f64,
    /// Cause.
    pub kind: EventKind,
    /// The element (switch, diode, source; for jumps the elements involved, comma-separated).
    pub element: String,
    /// Energy dissipated by a jump (J); `None` for other events.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub energy: Option<f64>,
    /// State (inductor currents, capacitor voltages, oscillator states) just before.
    pub before: Vec<f64>,
    /// State just after.
    pub after: Vec<f64>,
}

/// Every recorded event in time order, with the names of the state entries.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct EventLog {
    /// Names of the state entries, in the order of `before` and `after`.
    pub state_names: Vec<String>,
    /// The events.
    pub events: Vec<Event>,
}

impl EventLog {
    /// Events of one element, in order.
    pub fn of<'a>(&'a self, element: &'a str) -> impl Iterator<Item = &'a Event> + 'a {
        self.events.iter().filter(move |e| e.element == element)
    }

    /// Events of one kind, in order.
    pub fn of_kind(&self, kind: EventKind) -> impl Iterator<Item = &Event> + '_ {
        self.events.iter().filter(move |e| e.kind == kind)
    }

    /// Switch edges (on and off) of one switch with `t0 <= time <= t1`.
    pub fn edges_within(&self, switch: &str, t0: f64, t1: f64) -> Vec<(f64, bool)> {
        self.events
            .iter()
            .filter(|e| e.element == switch && e.time >= t0 && e.time <= t1)
            .filter_map(|e| match e.kind {
                EventKind::SwitchOn => Some((e.time, true)),
                EventKind::SwitchOff => Some((e.time, false)),
                _ => None,
            })
            .collect()
    }

    /// The shortest dead time observed between two switches: the least time
    /// from one turning off to the other turning on (either way round).
    /// `None` if no such pair of edges was recorded; a negative value would
    /// mean an overlap, which the solver reports as a shoot-through.
    pub fn shortest_dead_time(&self, a: &str, b: &str) -> Option<f64> {
        let mut last_off: Option<(f64, bool)> = None; // (time, was it `a`)
        let mut best: Option<f64> = None;
        for e in &self.events {
            let is_a = e.element == a;
            if !is_a && e.element != b {
                continue;
            }
            match e.kind {
                EventKind::SwitchOff => last_off = Some((e.time, is_a)),
                EventKind::SwitchOn => {
                    if let Some((t, off_a)) = last_off {
                        if off_a != is_a {
                            let d = e.time - t;
                            best = Some(best.map_or(d, |x: f64| x.min(d)));
                        }
                    }
                }
                _ => {}
            }
        }
        best
    }

    /// Conduction intervals of a diode as (turn-on, turn-off) pairs; an
    /// interval still open at the end of the log ends at `f64::INFINITY`.
    /// A diode already conducting when recording began (its turn-on not in
    /// the log) starts at `f64::NEG_INFINITY`.
    pub fn conduction_intervals(&self, diode: &str) -> Vec<(f64, f64)> {
        let mut out = vec![];
        let mut start: Option<f64> = None;
        for e in self.events.iter().filter(|e| e.element == diode) {
            match e.kind {
                EventKind::DiodeOn => start = Some(e.time),
                EventKind::DiodeOff => {
                    out.push((start.unwrap_or(f64::NEG_INFINITY), e.time));
                    start = None;
                }
                _ => {}
            }
        }
        if let Some(s) = start {
            out.push((s, f64::INFINITY));
        }
        out
    }

    /// Recorded jumps (charge or flux) as (time, energy dissipated in J).
    pub fn jumps(&self) -> Vec<(f64, f64)> {
        self.events
            .iter()
            .filter(|e| matches!(e.kind, EventKind::ChargeJump | EventKind::FluxJump))
            .map(|e| (e.time, e.energy.unwrap_or(0.0)))
            .collect()
    }

    /// A stable JSON text of the log (same run, same bytes), for golden files.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("an event log always serializes") + "\n"
    }
}
