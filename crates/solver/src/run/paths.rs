//! The switch panel of the solver's shortcuts: each can be turned off, so
//! that tests can prove it changes nothing.
//!
//! Every shortcut here is a faster way to the same answer, never an
//! approximation of its own. Three give the same bits as the general path
//! (plain instants, replayed transitions, principal pivoting); the three
//! caches of exponentials and guard polynomials agree with the uncached
//! Taylor path to within rounding, which the unit tests of `run/mod.rs`
//! pin at 1e-12 of the states' scale and of the run's length, and the case
//! corpus (`crates/solver/tests/corpus.rs`, which compares every event's
//! snapshot too) at 2e-12 and 1e-12.

use super::Simulator;

/// Which of the solver's shortcuts a run may take (default: all of them,
/// [`Shortcuts::ALL`]).
///
/// None of them changes a result beyond the rounding stated on each field;
/// they exist to be turned off in tests that prove it, and a run is slower
/// without them. One limit: above 16 diodes the search that stands in for
/// pivoting looks only near its first guess, so a circuit of many diodes
/// may find no pattern and stop with a diagnostic (the 24-diode multiplier
/// example does); every other example runs either way.
///
/// Start from [`Shortcuts::ALL`] or [`Shortcuts::NONE`] and set fields:
/// the struct is non-exhaustive, so a shortcut added later does not break
/// code that names the ones it knows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub struct Shortcuts {
    /// Default on. An instant with nothing but gate edges takes the plain
    /// path, which logs its events together instead of resolving the
    /// conduction pattern in full. Same bits either way.
    pub plain_instants: bool,
    /// Default on. A transition between conduction patterns seen before
    /// is replayed from memory, re-checking exactly what the full search
    /// would check. Same bits either way.
    pub replay: bool,
    /// Default on. Interval lengths that come back to the bit (located
    /// instants of a settled converter) get a cached matrix exponential
    /// instead of Taylor steps. Agrees to rounding (1e-12 of the states'
    /// scale).
    pub repeated_lengths: bool,
    /// Default on. Event location on a scheduled interval length uses the
    /// guard polynomials cached for that length instead of the Taylor
    /// expansion of each guard. Agrees to rounding (1e-12 of the period in
    /// event times).
    pub guard_polynomials: bool,
    /// Default on. A length that is not cached is advanced from the cached
    /// exponential of a nearby length and a short Taylor remainder, and
    /// spans of the schedule past the first 16 by the cache of lengths that
    /// come back. Agrees to rounding (1e-12 of the states' scale).
    pub nearby_lengths: bool,
    /// Default on. The conduction pattern is found by principal pivoting
    /// before the search by Hamming distance, which settles ties on the
    /// search's rule. Same states and events to the bit either way; the
    /// modes may be numbered in another order (they are numbered as first
    /// met, and the search builds its candidates in its own order). Off,
    /// circuits of more than 16 diodes may stop (see above).
    pub pivoting: bool,
}

impl Shortcuts {
    /// Every shortcut on: the default of a new [`Simulator`].
    pub const ALL: Shortcuts = Shortcuts {
        plain_instants: true,
        replay: true,
        repeated_lengths: true,
        guard_polynomials: true,
        nearby_lengths: true,
        pivoting: true,
    };

    /// Every shortcut off: the general path everywhere (slowest).
    pub const NONE: Shortcuts = Shortcuts {
        plain_instants: false,
        replay: false,
        repeated_lengths: false,
        guard_polynomials: false,
        nearby_lengths: false,
        pivoting: false,
    };

    /// The names of the shortcuts, in the order of the fields.
    pub const NAMES: [&'static str; 6] = [
        "plain_instants",
        "replay",
        "repeated_lengths",
        "guard_polynomials",
        "nearby_lengths",
        "pivoting",
    ];

    /// Every shortcut on but the one named (one of [`Shortcuts::NAMES`]);
    /// `None` for any other name.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_solver::Shortcuts;
    ///
    /// let s = Shortcuts::all_but("replay").unwrap();
    /// assert!(!s.replay && s.pivoting);
    /// assert!(Shortcuts::all_but("warp").is_none());
    /// ```
    pub fn all_but(name: &str) -> Option<Shortcuts> {
        let mut s = Shortcuts::ALL;
        let field = match name {
            "plain_instants" => &mut s.plain_instants,
            "replay" => &mut s.replay,
            "repeated_lengths" => &mut s.repeated_lengths,
            "guard_polynomials" => &mut s.guard_polynomials,
            "nearby_lengths" => &mut s.nearby_lengths,
            "pivoting" => &mut s.pivoting,
            _ => return None,
        };
        *field = false;
        Some(s)
    }

    /// Whether a run with these settings gives the same bits as one with
    /// [`Shortcuts::ALL`]: true when every cache is on (only the
    /// bit-exact shortcuts may be off).
    pub fn promises_bits(&self) -> bool {
        self.repeated_lengths && self.guard_polynomials && self.nearby_lengths
    }
}

impl Default for Shortcuts {
    fn default() -> Self {
        Shortcuts::ALL
    }
}

impl Simulator {
    /// Sets which shortcuts the run may take from here on (see
    /// [`Shortcuts`]); best called before the first advance, so that the
    /// whole run takes the same path. Results stay within the rounding
    /// stated on each field either way. Exponentials already cached stay
    /// in use: only the making of new ones is switched.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{Options, Shortcuts, Simulator};
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
    /// let run = |s: Shortcuts| {
    ///     let mut sim = Simulator::new(&buck, Options::default()).unwrap();
    ///     sim.set_shortcuts(s);
    ///     sim.advance_to(1e-4).unwrap();
    ///     sim.finish()
    /// };
    /// let (fast, plain) = (run(Shortcuts::ALL), run(Shortcuts::all_but("replay").unwrap()));
    /// assert_eq!(fast.events.to_json(), plain.events.to_json());
    /// ```
    pub fn set_shortcuts(&mut self, s: Shortcuts) {
        self.shortcuts = s;
        // The lane is the plain instants' loop of periodic spans.
        self.lane = s.plain_instants;
    }

    /// The shortcuts the run may take (see [`Simulator::set_shortcuts`]).
    pub fn shortcuts(&self) -> Shortcuts {
        self.shortcuts
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Each name switches its own field, and only it.
    #[test]
    fn all_but_turns_off_exactly_the_named_shortcut() {
        let mut seen = std::collections::HashSet::new();
        for name in Shortcuts::NAMES {
            let s = Shortcuts::all_but(name).expect("a known name");
            assert_ne!(s, Shortcuts::ALL, "{name}");
            assert!(seen.insert(s), "{name} switches the same field as another");
        }
        assert_eq!(Shortcuts::default(), Shortcuts::ALL);
        assert!(Shortcuts::ALL.promises_bits());
        assert!(!Shortcuts::NONE.promises_bits());
    }

    /// The setter and the getter are inverse, field by field.
    #[test]
    fn set_shortcuts_round_trips() {
        let c = fluxstep_netlist::Circuit::builder()
            .voltage_source("V1", "a", "gnd", 1.0)
            .resistor("R1", "a", "gnd", 1.0)
            .build()
            .expect("valid");
        let mut sim = Simulator::new(&c, crate::Options::default()).expect("compiles");
        assert_eq!(sim.shortcuts(), Shortcuts::ALL);
        for name in Shortcuts::NAMES {
            let s = Shortcuts::all_but(name).expect("a known name");
            sim.set_shortcuts(s);
            assert_eq!(sim.shortcuts(), s, "{name}");
        }
        sim.set_shortcuts(Shortcuts::NONE);
        assert_eq!(sim.shortcuts(), Shortcuts::NONE);
    }
}
