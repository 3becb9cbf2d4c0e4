//! The event log: every switching event in time order, with its cause, the
//! element, and the state before and after.
//!
//! Events are stored compactly — element names interned, state snapshots
//! shared by the events of one instant — so that logging every edge of a
//! long run costs no allocation per event. [`EventLog::iter`] hands out
//! borrowed [`EventRef`] views; [`EventRef::to_event`] makes an owned
//! [`Event`]. The JSON form lists full events and is stable (same run, same
//! bytes). [`EventLog::compare`] sets a log against a golden one;
//! [`EventLog::repeat_period`] reads the period at which a run repeats.

mod compare;
mod period;

pub use compare::{CompareError, Comparison, Difference, DifferenceKind, Tolerances};

use serde::ser::SerializeStruct;
use serde::{Deserialize, Deserializer, Serialize, Serializer};

/// Why an event happened.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
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
    /// Closed switches began to short a source or capacitor through their
    /// on-resistance (only when the run records instead of stopping);
    /// `element` lists the devices.
    ShootThrough,
}

/// What kind of instant an event happened at: with the event's kind, why
/// it happened. A diode turning off at a [`EventCause::Scheduled`] instant
/// was commutated by the switching there; one turning off at a
/// [`EventCause::Crossing`] had its current fall to zero on its own
/// (discontinuous conduction).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum EventCause {
    /// At t = 0, settling the initial conduction pattern.
    #[default]
    Start,
    /// At a scheduled instant: a gate edge, a comparator gate's clock, a
    /// sampled controller's update or a source corner. Switch events here
    /// are gate edges; diode events and jumps follow from them.
    Scheduled,
    /// At an instant located on the exact solution: a diode's current or
    /// voltage reaching zero, or a comparator gate's threshold crossed
    /// (its switch events), and what follows from it.
    Crossing,
}

/// A switch turning on or off (see [`EventLog::edges_within`]).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SwitchEdge {
    /// Time (s).
    pub time: f64,
    /// True: turned on; false: turned off.
    pub on: bool,
}

/// One event, owned.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// Time (s).
    pub time: f64,
    /// What happened.
    pub kind: EventKind,
    /// The kind of instant it happened at (why).
    #[serde(default)]
    pub cause: EventCause,
    /// The element (switch, diode, source; for jumps the elements involved, comma-separated).
    pub element: String,
    /// Energy dissipated by a jump (J); `None` for other events.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub energy: Option<f64>,
    /// What a jump moved: the charge (C) of a [`EventKind::ChargeJump`],
    /// the flux linkage (Wb) of a [`EventKind::FluxJump`] — the largest
    /// that any one capacitor or inductor gained or lost, which for two
    /// sharing is what passed between them; `None` for other events.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub moved: Option<f64>,
    /// State (inductor currents, capacitor voltages, oscillator states) just before.
    pub before: Vec<f64>,
    /// State just after.
    pub after: Vec<f64>,
}

/// The events of one instant without energy, for
/// [`EventLog::push_instant`]: a switch event for each bit of the first
/// mask of `switches`, of the kind its bit in the second gives (on or
/// off now), then a diode event likewise for each bit of `diodes`, each
/// in increasing order; diode `i` is recorded as element `base + i`.
#[derive(Clone, Copy, Debug)]
pub(crate) struct InstantEvents {
    pub time: f64,
    /// The number of events: set bits in both masks.
    pub count: u32,
    pub cause: EventCause,
    pub switches: (u64, u64),
    pub diodes: (u64, u64),
    pub base: u32,
}

/// One event, borrowed from an [`EventLog`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct EventRef<'a> {
    /// Time (s).
    pub time: f64,
    /// What happened.
    pub kind: EventKind,
    /// The kind of instant it happened at (why).
    pub cause: EventCause,
    /// The element (switch, diode, source; for jumps the elements involved, comma-separated).
    pub element: &'a str,
    /// Energy dissipated by a jump (J); `None` for other events.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub energy: Option<f64>,
    /// Charge (C) or flux linkage (Wb) a jump moved (see [`Event::moved`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub moved: Option<f64>,
    /// State just before (see [`EventLog::state_names`]).
    pub before: &'a [f64],
    /// State just after.
    pub after: &'a [f64],
}

impl EventRef<'_> {
    /// A diode turned off by the switching at a scheduled instant (a
    /// commutation), not by its current falling to zero.
    pub fn is_commutation(&self) -> bool {
        self.kind == EventKind::DiodeOff && self.cause == EventCause::Scheduled
    }

    /// An owned copy.
    pub fn to_event(self) -> Event {
        Event {
            time: self.time,
            kind: self.kind,
            cause: self.cause,
            element: self.element.to_string(),
            energy: self.energy,
            moved: self.moved,
            before: self.before.to_vec(),
            after: self.after.to_vec(),
        }
    }
}

/// One logged event in 24 bytes: its snapshots are numbered (snapshot k
/// is `states[k·n..(k+1)·n]`), and the rare energy of a jump is kept aside.
/// Kind and cause are one byte each, in what would be padding.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Compact {
    time: f64,
    who: u32,
    before: u32,
    after: u32,
    kind: EventKind,
    cause: EventCause,
}

/// What a jump adds to its event: the energy it dissipated (J) and the
/// charge or flux linkage it moved (`None` in logs read from JSON written
/// before it was recorded).
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct JumpInfo {
    pub energy: f64,
    pub moved: Option<f64>,
}

/// Every recorded event in time order, with the names of the state entries.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EventLog {
    state_names: Vec<String>,
    names: Vec<String>,
    records: Vec<Compact>,
    states: Vec<f64>,
    /// Number of snapshots in `states`.
    snapshots: u32,
    /// (record index, what the jump dissipated and moved) of the events
    /// that carry them, in order.
    energies: Vec<(u32, JumpInfo)>,
}

impl EventLog {
    /// An empty log for states named `state_names`.
    pub fn new(state_names: Vec<String>) -> Self {
        EventLog {
            state_names,
            ..EventLog::default()
        }
    }

    /// Names of the state entries, in the order of `before` and `after`.
    pub fn state_names(&self) -> &[String] {
        &self.state_names
    }

    /// Bytes the recorded events occupy (records, state snapshots and jump
    /// energies: what [`crate::Options::memory_budget`] counts for the log).
    pub fn memory_bytes(&self) -> usize {
        self.records.len() * std::mem::size_of::<Compact>()
            + self.states.len() * std::mem::size_of::<f64>()
            + self.energies.len() * std::mem::size_of::<(u32, JumpInfo)>()
    }

    /// Number of events.
    pub fn len(&self) -> usize {
        self.records.len()
    }

    /// True if no event was recorded.
    pub fn is_empty(&self) -> bool {
        self.records.is_empty()
    }

    /// The id of an element name, adding it if new.
    pub(crate) fn intern(&mut self, name: &str) -> u32 {
        match self.names.iter().position(|n| n == name) {
            Some(i) => i as u32,
            None => {
                self.names.push(name.to_string());
                (self.names.len() - 1) as u32
            }
        }
    }

    /// The element name of an id.
    pub(crate) fn name(&self, id: u32) -> &str {
        &self.names[id as usize]
    }

    /// Adds a name without looking for it (the simulator's fixed ids).
    pub(crate) fn names_push(&mut self, name: &str) {
        self.names.push(name.to_string());
    }

    /// Number of a snapshot equal to `x`: the last one if it matches (the
    /// events of one instant share their snapshots), else a new one.
    #[inline(always)]
    fn snapshot(&mut self, x: &[f64]) -> u32 {
        let n = x.len();
        let len = self.states.len();
        if self.snapshots > 0 && same_bits(&self.states[len - n..], x) {
            return self.snapshots - 1;
        }
        crate::propagate::extend_small(&mut self.states, x);
        self.snapshots += 1;
        self.snapshots - 1
    }

    /// Takes over the buffers of `old`, emptied, if this log is still
    /// empty (see `Simulator::reuse_storage`).
    pub(crate) fn reuse_storage(&mut self, old: EventLog) {
        if !self.records.is_empty() {
            return;
        }
        let EventLog {
            records,
            states,
            energies,
            ..
        } = old;
        adopt(&mut self.records, records);
        adopt(&mut self.states, states);
        adopt(&mut self.energies, energies);
    }

    /// Makes room for `events` more events with about one new snapshot
    /// each.
    pub(crate) fn reserve(&mut self, events: usize) {
        self.records.reserve(events);
        self.states.reserve(events * self.state_names.len());
    }

    /// Appends an event; `false` (and nothing added) if the log is full
    /// (2³² − 2 snapshots or records) or the states have the wrong length.
    #[inline]
    #[allow(clippy::too_many_arguments)] // one record's fields
    pub(crate) fn push(
        &mut self,
        time: f64,
        kind: EventKind,
        cause: EventCause,
        who: u32,
        jump: Option<JumpInfo>,
        before: &[f64],
        after: &[f64],
    ) -> bool {
        if !self.has_room(before, after, 1) {
            return false;
        }
        let b = self.snapshot(before);
        // The same slice twice (an event that leaves the state as it was)
        // is the same snapshot without comparing it again.
        let a = if std::ptr::eq(before, after) {
            b
        } else {
            self.snapshot(after)
        };
        if let Some(j) = jump {
            self.energies.push((self.records.len() as u32, j));
        }
        self.push_record(time, who, kind, cause, (b, a));
        true
    }

    /// Appends the events of one instant without energy (see
    /// [`InstantEvents`]): its switch events leave the state `before` as
    /// it was, its diode events take it to `after`; all share one
    /// snapshot of each. `false` (and nothing added) where the log cannot
    /// take them all.
    #[inline(always)]
    pub(crate) fn push_instant(
        &mut self,
        group: InstantEvents,
        before: &[f64],
        after: &[f64],
    ) -> bool {
        let InstantEvents {
            time,
            count,
            cause,
            switches: (switched, switch_on),
            diodes: (diodes, diode_on),
            base,
        } = group;
        if !self.has_room(before, after, count) {
            return false;
        }
        let b = self.snapshot(before);
        let switch_kinds = [EventKind::SwitchOff, EventKind::SwitchOn];
        self.push_masked(
            time,
            cause,
            (switched, switch_on),
            (0, switch_kinds),
            (b, b),
        );
        if diodes != 0 {
            // The state after is compared with the snapshot just taken,
            // which is `before`.
            let a = if same_bits(before, after) {
                b
            } else {
                crate::propagate::extend_small(&mut self.states, after);
                self.snapshots += 1;
                self.snapshots - 1
            };
            let diode_kinds = [EventKind::DiodeOff, EventKind::DiodeOn];
            self.push_masked(time, cause, (diodes, diode_on), (base, diode_kinds), (b, a));
        }
        true
    }

    /// A record for each bit i of `mask` (lowest first), element
    /// `base + i`, of kind `kinds[1]` where bit i of `on` is set and
    /// `kinds[0]` where it is not, with the snapshots `states`.
    #[inline(always)]
    fn push_masked(
        &mut self,
        time: f64,
        cause: EventCause,
        (mut mask, on): (u64, u64),
        (base, kinds): (u32, [EventKind; 2]),
        states: (u32, u32),
    ) {
        while mask != 0 {
            let i = mask.trailing_zeros();
            mask &= mask - 1;
            let kind = if on >> i & 1 == 1 { kinds[1] } else { kinds[0] };
            self.push_record(time, base + i, kind, cause, states);
        }
    }

    /// Appends one record whose states are the snapshots numbered
    /// `(before, after)`.
    #[inline(always)]
    fn push_record(
        &mut self,
        time: f64,
        who: u32,
        kind: EventKind,
        cause: EventCause,
        (before, after): (u32, u32),
    ) {
        self.records.push(Compact {
            time,
            who,
            before,
            after,
            kind,
            cause,
        });
    }

    /// Whether `records` more records (1 or 2) with their snapshots fit
    /// the log's 32-bit numbering, and the states have the log's length.
    #[inline(always)]
    fn has_room(&self, before: &[f64], after: &[f64], records: u32) -> bool {
        let n = self.state_names.len();
        before.len() == n
            && after.len() == n
            && self.snapshots < u32::MAX - 2 * records
            && self.records.len() < (u32::MAX - (2 * records - 1)) as usize
    }

    fn view(&self, i: usize, c: &Compact) -> EventRef<'_> {
        let n = self.state_names.len();
        let (b, a) = (c.before as usize * n, c.after as usize * n);
        let jump = self
            .energies
            .binary_search_by_key(&(i as u32), |&(k, _)| k)
            .ok()
            .map(|k| self.energies[k].1);
        EventRef {
            time: c.time,
            kind: c.kind,
            cause: c.cause,
            element: &self.names[c.who as usize],
            energy: jump.map(|j| j.energy),
            moved: jump.and_then(|j| j.moved),
            before: &self.states[b..b + n],
            after: &self.states[a..a + n],
        }
    }

    /// Every event in order.
    pub fn iter(&self) -> impl DoubleEndedIterator<Item = EventRef<'_>> + '_ {
        self.records
            .iter()
            .enumerate()
            .map(|(i, c)| self.view(i, c))
    }

    /// The `j`-th jump of the log (in time order): its time and the energy
    /// it dissipated.
    pub(crate) fn jump(&self, j: usize) -> Option<(f64, f64)> {
        self.energies
            .get(j)
            .map(|&(k, info)| (self.records[k as usize].time, info.energy))
    }

    /// Event `i`.
    pub fn get(&self, i: usize) -> Option<EventRef<'_>> {
        self.records.get(i).map(|c| self.view(i, c))
    }

    /// The log's number for an element name (see [`EventLog::brief`]);
    /// `None` if the element has no event in the log.
    pub fn element_number(&self, name: &str) -> Option<u32> {
        self.names.iter().position(|n| n == name).map(|i| i as u32)
    }

    /// Every event in order as (time, kind, cause, element number) — no
    /// states or names, for passes over long logs that only need timing
    /// (element numbers from [`EventLog::element_number`]).
    pub fn brief(&self) -> impl DoubleEndedIterator<Item = (f64, EventKind, EventCause, u32)> + '_ {
        self.records
            .iter()
            .map(|c| (c.time, c.kind, c.cause, c.who))
    }

    /// Events of one element, in order.
    pub fn of<'a>(
        &'a self,
        element: &'a str,
    ) -> impl DoubleEndedIterator<Item = EventRef<'a>> + 'a {
        self.iter().filter(move |e| e.element == element)
    }

    /// Events of one kind, in order.
    pub fn of_kind(&self, kind: EventKind) -> impl DoubleEndedIterator<Item = EventRef<'_>> + '_ {
        self.iter().filter(move |e| e.kind == kind)
    }

    /// Switch edges (on and off) of one switch with `t0 <= time <= t1`.
    pub fn edges_within(&self, switch: &str, t0: f64, t1: f64) -> Vec<SwitchEdge> {
        self.of(switch)
            .filter(|e| e.time >= t0 && e.time <= t1)
            .filter_map(|e| match e.kind {
                EventKind::SwitchOn => Some(SwitchEdge {
                    time: e.time,
                    on: true,
                }),
                EventKind::SwitchOff => Some(SwitchEdge {
                    time: e.time,
                    on: false,
                }),
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
        for e in self.iter() {
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
        for e in self.of(diode) {
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
        self.iter()
            .filter(|e| matches!(e.kind, EventKind::ChargeJump | EventKind::FluxJump))
            .map(|e| (e.time, e.energy.unwrap_or(0.0)))
            .collect()
    }

    /// A stable JSON text of the log (same run, same bytes), for golden files.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("an event log always serializes") + "\n"
    }

    /// Writes the same text as [`EventLog::to_json`] to `w` as it goes,
    /// without holding it (or a list of the events) in memory: a log of
    /// millions of events costs only the writer's buffer.
    pub fn write_json<W: std::io::Write>(&self, mut w: W) -> std::io::Result<()> {
        serde_json::to_writer_pretty(&mut w, self)?;
        w.write_all(b"\n")?;
        w.flush()
    }
}

/// The events of a log as a JSON array, serialized one at a time.
struct EventSeq<'a>(&'a EventLog);

impl Serialize for EventSeq<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_seq(self.0.iter())
    }
}

impl Serialize for EventLog {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut st = s.serialize_struct("EventLog", 2)?;
        st.serialize_field("state_names", &self.state_names)?;
        st.serialize_field("events", &EventSeq(self))?;
        st.end()
    }
}

impl<'de> Deserialize<'de> for EventLog {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        #[derive(Deserialize)]
        struct Owned {
            state_names: Vec<String>,
            events: Vec<Event>,
        }
        let o = Owned::deserialize(d)?;
        let mut log = EventLog::new(o.state_names);
        for (i, e) in o.events.into_iter().enumerate() {
            let who = log.intern(&e.element);
            let jump = e.energy.map(|energy| JumpInfo {
                energy,
                moved: e.moved,
            });
            if !log.push(e.time, e.kind, e.cause, who, jump, &e.before, &e.after) {
                return Err(serde::de::Error::custom(format!(
                    "event {i}: before/after must list {} state values",
                    log.state_names.len()
                )));
            }
        }
        Ok(log)
    }
}

/// Replaces the empty buffer `mine` by `old`, emptied, if `old` has more
/// room (for reusing the storage of a finished run).
pub(crate) fn adopt<T>(mine: &mut Vec<T>, mut old: Vec<T>) {
    old.clear();
    if old.capacity() > mine.capacity() {
        *mine = old;
    }
}

/// Whether two slices of equal length hold the same bits.
#[inline]
fn same_bits(a: &[f64], b: &[f64]) -> bool {
    fn fixed<const N: usize>(a: &[f64], b: &[f64]) -> bool {
        let (a, b): (&[f64; N], &[f64; N]) = match (a.try_into(), b.try_into()) {
            (Ok(a), Ok(b)) => (a, b),
            _ => return false,
        };
        (0..N).all(|i| a[i].to_bits() == b[i].to_bits())
    }
    match (a.len(), b.len()) {
        (1, 1) => fixed::<1>(a, b),
        (2, 2) => fixed::<2>(a, b),
        (3, 3) => fixed::<3>(a, b),
        (4, 4) => fixed::<4>(a, b),
        _ => a.len() == b.len() && a.iter().zip(b).all(|(x, y)| x.to_bits() == y.to_bits()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The cause byte sits in what was padding: a record stays 24 bytes.
    #[test]
    fn a_record_is_24_bytes() {
        assert_eq!(std::mem::size_of::<Compact>(), 24);
    }

    #[test]
    fn json_round_trip_and_shared_snapshots() {
        let mut log = EventLog::new(vec!["L1.current".into()]);
        let s = log.intern("S1");
        let d = log.intern("D1");
        log.push(
            1e-6,
            EventKind::SwitchOff,
            EventCause::Scheduled,
            s,
            None,
            &[2.0],
            &[2.0],
        );
        log.push(
            1e-6,
            EventKind::DiodeOn,
            EventCause::Scheduled,
            d,
            None,
            &[2.0],
            &[2.0],
        );
        // One snapshot serves both events of the instant.
        assert_eq!(log.states.len(), 1);
        let text = log.to_json();
        let back: EventLog = serde_json::from_str(&text).unwrap();
        assert_eq!(back.to_json(), text);
        assert_eq!(back.get(1).unwrap().element, "D1");
    }

    #[test]
    fn energies_belong_to_their_events_and_bad_lengths_are_refused() {
        let mut log = EventLog::new(vec!["C1.voltage".into(), "C2.voltage".into()]);
        let s = log.intern("S1");
        let j = log.intern("C1,C2");
        assert!(log.push(
            0.0,
            EventKind::SwitchOn,
            EventCause::Start,
            s,
            None,
            &[4.0, 0.0],
            &[4.0, 0.0]
        ));
        assert!(log.push(
            0.0,
            EventKind::ChargeJump,
            EventCause::Start,
            j,
            Some(JumpInfo {
                energy: 2.0,
                moved: Some(4.0)
            }),
            &[4.0, 0.0],
            &[2.0, 2.0]
        ));
        assert!(log.push(
            1.0,
            EventKind::SwitchOff,
            EventCause::Scheduled,
            s,
            None,
            &[2.0, 2.0],
            &[2.0, 2.0]
        ));
        assert!(log.push(
            2.0,
            EventKind::ChargeJump,
            EventCause::Scheduled,
            j,
            Some(JumpInfo {
                energy: 0.5,
                moved: None
            }),
            &[2.0, 1.0],
            &[1.5, 1.5]
        ));
        let energies: Vec<Option<f64>> = log.iter().map(|e| e.energy).collect();
        assert_eq!(energies, [None, Some(2.0), None, Some(0.5)]);
        let moved: Vec<Option<f64>> = log.iter().map(|e| e.moved).collect();
        assert_eq!(moved, [None, Some(4.0), None, None]);
        assert_eq!(log.get(1).unwrap().after, &[2.0, 2.0]);
        assert_eq!(log.get(2).unwrap().before, &[2.0, 2.0]);
        assert_eq!(log.jumps(), [(0.0, 2.0), (2.0, 0.5)]);
        // Three states against two names: refused, nothing added.
        assert!(!log.push(
            3.0,
            EventKind::SwitchOn,
            EventCause::Scheduled,
            s,
            None,
            &[1.0, 2.0, 3.0],
            &[1.0, 2.0, 3.0]
        ));
        assert_eq!(log.len(), 4);
        let text = log.to_json().replace("1.5,", "1.5, 9.0,");
        let err = serde_json::from_str::<EventLog>(&text)
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("event 3") && err.contains("2 state values"),
            "{err}"
        );
    }
}
