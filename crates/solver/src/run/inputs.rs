//! The input part of the state: source values and slopes at a time, and
//! the constant writes of a circuit whose sources never change.

use fluxstep_netlist::Stimulus;

use super::Simulator;

impl Simulator {
    /// Sets the input part of z (values, and the slopes of the inputs
    /// that ramp) for time t; returns a
    /// bit set of the sources that reached a corner at t.
    ///
    /// Constant inputs are written again every time on purpose: a cached
    /// matrix exponential need not carry them over to the last bit.
    #[inline(always)]
    pub(super) fn set_inputs(&mut self, t: f64) -> u64 {
        let nx = self.cc.n_x;
        if let Some(list) = &self.sched.const_inputs {
            // Every source constant: the same entries every time, no corners.
            let z = self.z.as_mut_slice();
            for &(i, v) in list {
                z[i] = v;
            }
            return 0;
        }
        self.z[nx] = 1.0;
        let mut corners = 0u64;
        for &si in &self.sched.pwl_sources {
            let s = &self.cc.sources[si];
            let (Some(w), Some(k)) = (&s.waveform, s.input) else {
                continue;
            };
            if let Stimulus::Constant { value } = w {
                // No slope entry: a constant's slope is zero for good.
                self.z[nx + k] = *value;
                continue;
            }
            let p = w.piece_at(t).expect("piecewise-linear source has a piece");
            if p.start == t && t > 0.0 && si < 64 {
                corners |= 1 << si;
            }
            self.z[nx + k] = p.at(t);
            if let Some(s) = self.cc.slopes[k] {
                self.z[s] = p.slope;
            }
        }
        corners
    }

    /// The writes of [`Simulator::set_inputs`] when every piecewise-linear
    /// source is constant (the entry of 1 and each value: a constant has
    /// no slope entry),
    /// in the order `set_inputs` makes them; `None` otherwise.
    pub(super) fn constant_inputs(&self) -> Option<Vec<(usize, f64)>> {
        let nx = self.cc.n_x;
        let mut list = vec![(nx, 1.0)];
        for &si in &self.sched.pwl_sources {
            let s = &self.cc.sources[si];
            let (Some(w), Some(k)) = (&s.waveform, s.input) else {
                continue;
            };
            let Stimulus::Constant { value } = w else {
                return None;
            };
            list.push((nx + k, *value));
        }
        Some(list)
    }
}
