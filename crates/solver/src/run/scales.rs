//! The scale watch: the largest inductor current and capacitor or source
//! voltage seen so far in the run, which every tolerance of event location
//! and resolution is relative to (`crate::crossing::Scales`).

use crate::compile::{BranchKind, Compiled, SourceRef};
use crate::crossing::Scales;
use crate::propagate::larger;

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
    /// In a circuit without inductors, its largest conductance (a
    /// resistor, or a switch's or diode's on-resistance): the current
    /// scale is then the voltage scale times it, the most the circuit's
    /// resistances can carry. 0 where inductors set the current scale.
    conductance: f64,
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
        let conductance = if cc.groups.is_empty() {
            let r_on = cc
                .switches
                .iter()
                .map(|s| s.r_on)
                .chain(cc.diodes.iter().map(|d| d.r_on))
                .filter(|&r| r > 0.0)
                .map(|r| 1.0 / r);
            cc.branches
                .iter()
                .filter_map(|b| match b.kind {
                    BranchKind::Resistor { g } => Some(g.abs()),
                    _ => None,
                })
                .chain(r_on)
                .filter(|g| g.is_finite())
                .fold(0.0, f64::max)
        } else {
            0.0
        };
        ScaleWatch {
            seen: Scales::default(),
            current_states,
            voltage_terms,
            multi_term_sources,
            conductance,
        }
    }

    /// Updates the largest magnitudes with the state `z` (the circuit's
    /// `sources`) and returns them: the largest ever seen so far in the
    /// run (never the present value alone: at a located zero crossing the
    /// only inductor current is itself ~1e-17 A). A NaN entry leaves them
    /// as they were (`propagate::larger`, as `f64::max` would: the scales
    /// start at 0 and never hold a NaN).
    #[inline(always)]
    pub(super) fn update(&mut self, z: &[f64], sources: &[SourceRef]) -> Scales {
        let mut i_s: f64 = self.seen.current;
        for &s in &self.current_states {
            i_s = larger(i_s, z[s].abs());
        }
        // Capacitor voltages and single-term sources as (index, factor);
        // the maximum does not depend on the order.
        let mut v_s: f64 = self.seen.voltage;
        for &(k, f) in &self.voltage_terms {
            v_s = larger(v_s, (f * z[k]).abs());
        }
        for &si in &self.multi_term_sources {
            let v: f64 = sources[si].terms.iter().map(|&(k, f)| f * z[k]).sum();
            v_s = larger(v_s, v.abs());
        }
        // Without inductors: the voltage scale through the largest
        // conductance (0 otherwise, which leaves the inductor currents').
        i_s = larger(i_s, v_s * self.conductance);
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

    /// Without inductors the current scale is the voltage scale through
    /// the largest conductance (Ohm's law; common practice): a diode
    /// ladder with its capacitors ×1e9 had a current floor of zero and
    /// judged a diode current of −2.5e-14 A, rounding beside 1e9 A, as
    /// reverse conduction. Scaling every impedance by k scales it by 1/k.
    #[test]
    fn without_inductors_the_current_scale_comes_from_the_conductances() {
        for k in [1.0, 1e-9, 1e9] {
            let c = fluxstep_netlist::Circuit::builder()
                .voltage_source("V1", "in", "gnd", 10.0)
                .resistor("Rs", "in", "a", 2.0 * k)
                .diode("D1", "a", "out")
                .capacitor("C1", "out", "gnd", 1e-6 / k)
                .resistor("Rload", "out", "gnd", 1e6 * k)
                .build()
                .expect("valid");
            let cc = Compiled::compile(&c).expect("compiles");
            let mut w = ScaleWatch::new(&cc);
            let mut z = vec![0.0; cc.n_z()];
            let (i, f) = cc.sources[0].terms[0];
            z[i] = 10.0 / f;
            let s = w.update(&z, &cc.sources);
            assert_eq!(s.voltage, 10.0);
            let want = 10.0 / (2.0 * k);
            assert!((s.current - want).abs() <= 1e-15 * want, "k = {k}: {s:?}");
        }
    }
}
