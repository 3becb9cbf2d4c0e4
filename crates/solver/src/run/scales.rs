//! The scale watch: the largest inductor current and capacitor or source
//! voltage seen so far in the run, which every tolerance of event location
//! and resolution is relative to (`crate::crossing::Scales`).

use crate::compile::{Compiled, SourceRef};
use crate::crossing::Scales;

/// The state entries whose largest magnitude sets the run's scales, and
/// the scales seen so far.
pub(super) struct ScaleWatch {
    /// The scales as of the last resolved instant.
    pub(super) seen: Scales,
    /// The state entries that are inductor currents.
    current_states: Vec<usize>,
    /// Capacitor voltages (factor 1) and single-term source voltages as
    /// (z index, factor).
    voltage_terms: Vec<(usize, f64)>,
    /// The sources of several terms.
    multi_term_sources: Vec<usize>,
}

impl ScaleWatch {
    /// The entries of `cc` to watch: inductor currents, capacitor
    /// voltages and single-term source voltages, and the sources of
    /// several terms; nothing seen yet.
    pub(super) fn new(cc: &Compiled) -> ScaleWatch {
        let current_states = cc
            .groups
            .iter()
            .flat_map(|g| g.states.iter().copied())
            .collect();
        let mut voltage_terms: Vec<(usize, f64)> = cc.caps.iter().map(|&(s, _)| (s, 1.0)).collect();
        let mut multi_term_sources = vec![];
        for (si, src) in cc.sources.iter().enumerate() {
            match src.terms.as_slice() {
                &[(k, f)] => voltage_terms.push((k, f)),
                _ => multi_term_sources.push(si),
            }
        }
        ScaleWatch {
            seen: Scales::default(),
            current_states,
            voltage_terms,
            multi_term_sources,
        }
    }

    /// Updates the largest magnitudes with the state `z` (the circuit's
    /// `sources`) and returns them: the largest ever seen so far in the
    /// run (never the present value alone: at a located zero crossing the
    /// only inductor current is itself ~1e-17 A).
    #[inline(always)]
    pub(super) fn update(&mut self, z: &[f64], sources: &[SourceRef]) -> Scales {
        let mut i_s: f64 = self.seen.current;
        for &s in &self.current_states {
            i_s = i_s.max(z[s].abs());
        }
        // Capacitor voltages and single-term sources as (index, factor);
        // the maximum does not depend on the order.
        let mut v_s: f64 = self.seen.voltage;
        for &(k, f) in &self.voltage_terms {
            v_s = v_s.max((f * z[k]).abs());
        }
        for &si in &self.multi_term_sources {
            let v: f64 = sources[si].terms.iter().map(|&(k, f)| f * z[k]).sum();
            v_s = v_s.max(v.abs());
        }
        self.seen = Scales {
            current: i_s,
            voltage: v_s,
        };
        self.seen
    }
}
