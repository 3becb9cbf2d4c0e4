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

    /// A stable JSON text of the log (same run, same bytes), for golden files.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("an event log always serializes") + "\n"
    }
}
