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

#[cfg(test)]
mod tests {
    use super::*;

    /// The scales are the largest inductor current and the largest
    /// capacitor or source voltage ever seen, never the present values
    /// alone, and they never shrink (common practice: tolerances relative
    /// to the run's own amplitudes).
    #[test]
    fn scales_keep_the_largest_magnitudes_seen() {
        let c = fluxstep_netlist::Circuit::builder()
            .voltage_source("V1", "in", "gnd", 12.0)
            .resistor("R1", "in", "a", 1.0)
            .inductor("L1", "a", "b", 1e-3)
            .capacitor("C1", "b", "gnd", 1e-6)
            .build()
            .expect("valid");
        let cc = Compiled::compile(&c).expect("compiles");
        let mut w = ScaleWatch::new(&cc);
        let i_l = cc.groups[0].states[0];
        let v_c = cc.caps[0].0;
        let mut z = vec![0.0; cc.n_z()];
        z[i_l] = -3.0;
        z[v_c] = 5.0;
        let (k, f) = cc.sources[0].terms[0];
        z[k] = 12.0 / f;
        let s = w.update(&z, &cc.sources);
        assert_eq!((s.current, s.voltage), (3.0, 12.0));
        // Smaller now: the scales stay.
        z[i_l] = 0.5;
        z[k] = 0.0;
        let s = w.update(&z, &cc.sources);
        assert_eq!((s.current, s.voltage), (3.0, 12.0));
        // A capacitor above the source: it sets the voltage scale.
        z[v_c] = -20.0;
        let s = w.update(&z, &cc.sources);
        assert_eq!((s.current, s.voltage), (3.0, 20.0));
        assert_eq!(w.seen, s);
    }
}
