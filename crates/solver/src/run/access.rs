//! What a user reads of a running simulator (time, state, outputs,
//! records) and how a run ends (`finish`) or reuses an old run's storage.

use super::*;

impl Simulator {
    /// Takes over the storage of a finished run — its segment, state and
    /// event buffers, emptied — so that a series of runs (a sweep, a test
    /// suite) records into memory it already has instead of asking the
    /// system for fresh pages. Call it before advancing: buffers that
    /// already hold this run's records are kept and `old` is dropped.
    ///
    /// # Example
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::{Options, Simulator};
    ///
    /// let c = Circuit::builder()
    ///     .voltage_source("V1", "in", "gnd", 1.0)
    ///     .resistor("R1", "in", "a", 1.0)
    ///     .inductor("L1", "a", "gnd", 1e-3)
    ///     .build()
    ///     .unwrap();
    /// let mut first = Simulator::new(&c, Options::default()).unwrap();
    /// first.advance_to(1e-3).unwrap();
    /// let first = first.finish();
    /// let mut second = Simulator::new(&c, Options::default()).unwrap();
    /// second.reuse_storage(first);
    /// second.advance_to(1e-3).unwrap();
    /// assert!(second.waveform().span().is_some());
    /// ```
    pub fn reuse_storage(&mut self, old: RunResult) {
        let RunResult {
            waveform, events, ..
        } = old;
        if self.rec.wave.segments.is_empty() {
            adopt(&mut self.rec.wave.segments, waveform.segments);
            adopt(&mut self.rec.wave.states, waveform.states);
        }
        self.rec.log.reuse_storage(events);
    }

    /// Sends every finished segment to `sink` (in addition to what
    /// [`Options::record`] keeps), e.g. to measure a million-cycle run in
    /// bounded memory.
    pub fn set_sink(&mut self, sink: SegmentSink) {
        self.rec.sink = Some(sink);
    }

    /// Present time (s).
    pub fn time(&self) -> f64 {
        self.t
    }

    /// Present state: inductor currents, capacitor voltages, oscillator states.
    pub fn state(&self) -> &[f64] {
        &self.z.as_slice()[..self.cc.n_x]
    }

    /// Names of the state entries.
    pub fn state_names(&self) -> &[String] {
        &self.cc.state_names
    }

    /// Present conduction pattern as text (`S1 on, D1 blocking`).
    pub fn pattern(&self) -> String {
        pattern_text(&self.cc, self.key)
    }

    /// The id of an output by name, for [`Simulator::value`] and the
    /// waveform (the same look-up as [`Waveform::output`]).
    ///
    /// # Errors
    ///
    /// [`SolverError::UnknownOutput`], listing every accepted form.
    pub fn output(&self, name: &str) -> Result<OutputId, SolverError> {
        self.cc.output_index(name).map(OutputId)
    }

    /// Present value of an output.
    ///
    /// # Errors
    ///
    /// [`SolverError::UnknownOutput`] for a name that is not an output,
    /// [`SolverError::Undetermined`] where it floats now.
    pub fn output_value(&self, name: &str) -> Result<f64, SolverError> {
        let id = self.output(name)?;
        self.value(id)
    }

    /// Present value of output `id`.
    ///
    /// # Errors
    ///
    /// As [`Simulator::output_value`].
    pub fn value(&self, id: OutputId) -> Result<f64, SolverError> {
        let i = self.checked_row(id)?;
        Ok(dot_iter(
            self.modes[self.mode as usize].c.row(i).iter().copied(),
            self.z.as_slice(),
        ))
    }

    /// Present time derivative of output `id` (di/dt of an inductor
    /// current, dv/dt of a capacitor voltage), exact from the mode: see
    /// [`Waveform::slope`].
    ///
    /// # Errors
    ///
    /// As [`Simulator::output_value`].
    pub fn slope(&self, id: OutputId) -> Result<f64, SolverError> {
        let i = self.checked_row(id)?;
        Ok(crate::waveform::slope_of(
            &self.modes[self.mode as usize],
            i,
            self.z.as_slice(),
        ))
    }

    /// The output row of `id` if it is this circuit's and determined now.
    fn checked_row(&self, id: OutputId) -> Result<usize, SolverError> {
        let name = self.cc.outputs.get(id.0).map(|(n, _)| n.as_str());
        let Some(name) = name else {
            return Err(SolverError::UnknownOutput {
                name: format!("#{}", id.0),
                reason: "the id belongs to another circuit".into(),
            });
        };
        if self.modes[self.mode as usize].undetermined[id.0] {
            return Err(SolverError::Undetermined {
                output: name.to_string(),
                time: self.t,
            });
        }
        Ok(id.0)
    }

    /// Stored energy in inductors and capacitors now (J).
    pub fn stored_energy(&self) -> f64 {
        self.cc.stored_energy(self.z.as_slice())
    }

    /// The switching period used by [`Simulator::advance_periods`]: the
    /// period of the first periodic gate signal.
    pub fn period(&self) -> Option<f64> {
        self.cc.signals.iter().find_map(|(_, s)| s.period)
    }

    /// The instant cycle `k` of the first periodic gate signal (the one
    /// [`Simulator::period`] gives) starts: the time of its first edge in
    /// that cycle, in the same bits as the schedule computes that edge, so
    /// it is a segment boundary of the record. With
    /// [`crate::measure::measure_period`] this measures period k by its
    /// index.
    ///
    /// ```
    /// use fluxstep_netlist::Circuit;
    /// use fluxstep_solver::measure::measure_period;
    /// use fluxstep_solver::{Options, Simulator};
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
    /// let mut sim = Simulator::new(&buck, Options::default()).unwrap();
    /// sim.advance_periods(20).unwrap();
    /// let (a, b) = (sim.cycle_start(10).unwrap(), sim.cycle_start(11).unwrap());
    /// let sw = sim.waveform().output("sw").unwrap();
    /// let m = measure_period(sim.waveform(), sw, a, b).unwrap();
    /// assert!((m.average - 6.0).abs() < 1e-12); // D·Vin
    /// ```
    pub fn cycle_start(&self, k: i64) -> Option<f64> {
        self.cc.signals.iter().find_map(|(_, s)| s.cycle_start(k))
    }

    /// The recorded waveform so far.
    pub fn waveform(&self) -> &Waveform {
        &self.rec.wave
    }

    /// The recorded events so far.
    pub fn events(&self) -> &EventLog {
        &self.rec.log
    }

    /// Wall time spent in each stage of the loop so far (the
    /// `stage-timers` feature; see [`StageTimes`]).
    #[cfg(feature = "stage-timers")]
    pub fn stage_times(&self) -> StageTimes {
        self.times
    }

    /// Counters so far.
    pub fn stats(&self) -> Stats {
        let mut s = self.stats;
        s.modes = self.modes.len();
        s
    }

    /// The energy certificate so far: the balance over the segments
    /// recorded up to the end of the last [`Simulator::advance_to`].
    pub fn certificate(&self) -> EnergyCertificate {
        self.certifier.cert
    }

    /// Ends the run and hands over what was recorded.
    pub fn finish(self) -> RunResult {
        let stats = self.stats();
        RunResult {
            waveform: self.rec.wave,
            events: self.rec.log,
            stats,
            certificate: self.certifier.cert,
        }
    }
}
