//! One point of a sweep: draw its tolerances, build and validate its
//! circuit, run the transient, measure the figures.

use fluxstep_netlist::Circuit;
use fluxstep_solver::measure::{element_power, measure, MeasureError, Measurement};
use fluxstep_solver::{Options, Record, RunResult, Simulator};

use super::rng::SplitMix64;
use super::spec::{Distribution, Margin, Measure, Window};
use super::table::{Row, Status};
use super::{FigureKind, Length, Sweep};

/// A truncated normal whose limits keep less than this share of the
/// distribution is refused: rejection sampling would spin.
const MIN_TRUNCATED_MASS: f64 = 1e-3;

/// Redraws before a truncated normal gives up. With at least
/// `MIN_TRUNCATED_MASS` inside the limits, running out has probability
/// below e⁻¹⁰⁰⁰.
const MAX_REDRAWS: usize = 1_000_000;

/// Checks a distribution's parameters.
pub(super) fn check_distribution(d: &Distribution) -> Result<(), String> {
    match *d {
        Distribution::Uniform { low, high } => {
            if !(low.is_finite() && high.is_finite() && low <= high) {
                return Err(format!(
                    "uniform needs finite low <= high, got [{low}, {high}]"
                ));
            }
        }
        Distribution::Normal { sigma, limits } => {
            if !(sigma.is_finite() && sigma >= 0.0) {
                return Err(format!("sigma must not be negative, got {sigma}"));
            }
            if let Some([lo, hi]) = limits {
                if lo.is_nan() || hi.is_nan() || lo >= hi {
                    return Err(format!("limits must satisfy low < high, got [{lo}, {hi}]"));
                }
                let mass = if sigma == 0.0 {
                    if lo <= 0.0 && 0.0 <= hi {
                        1.0
                    } else {
                        0.0
                    }
                } else {
                    normal_cdf(hi / sigma) - normal_cdf(lo / sigma)
                };
                if mass < MIN_TRUNCATED_MASS {
                    return Err(format!(
                        "limits [{lo}, {hi}] keep only {mass:.2e} of the normal distribution (sigma {sigma}); widen them"
                    ));
                }
            }
        }
    }
    Ok(())
}

/// One draw of a deviation.
pub(super) fn draw(d: &Distribution, rng: &mut SplitMix64) -> Result<f64, String> {
    match *d {
        Distribution::Uniform { low, high } => Ok(low + (high - low) * rng.uniform()),
        Distribution::Normal { sigma, limits } => {
            for _ in 0..MAX_REDRAWS {
                let x = sigma * rng.normal();
                match limits {
                    Some([lo, hi]) if x < lo || x > hi => continue,
                    _ => return Ok(x),
                }
            }
            Err("no draw fell inside the truncation limits".into())
        }
    }
}

/// Φ(x), the standard normal distribution function, from the
/// complementary error function of W. J. Cody's rational approximation as
/// given by Numerical Recipes (`erfcc`, fractional error below 1.2e-7):
/// enough to judge how much of a distribution truncation limits keep.
fn normal_cdf(x: f64) -> f64 {
    let z = (x / std::f64::consts::SQRT_2).abs();
    let t = 1.0 / (1.0 + 0.5 * z);
    let erfc = t
        * (-z * z - 1.265_512_23
            + t * (1.000_023_68
                + t * (0.374_091_96
                    + t * (0.096_784_18
                        + t * (-0.186_288_06
                            + t * (0.278_868_07
                                + t * (-1.135_203_98
                                    + t * (1.488_515_87
                                        + t * (-0.822_152_23 + t * 0.170_872_77)))))))))
            .exp();
    if x >= 0.0 {
        1.0 - 0.5 * erfc
    } else {
        0.5 * erfc
    }
}

impl Sweep {
    /// Runs point `p`; `old` holds the previous run of this worker, whose
    /// storage the new run reuses (same bits as fresh storage: the solver's
    /// contract test `reused_storage_gives_the_same_records`).
    pub(super) fn run_point(&self, p: u64, old: &mut Option<RunResult>) -> Row {
        let (doc, drawn) = self.point_doc(p);
        let values: Vec<f64> = self
            .columns
            .iter()
            .map(|c| c.get(&doc).expect("resolved paths end at a number"))
            .collect();
        let mut row = Row {
            point: p,
            sample: self.meta.monte_carlo.then_some(p % self.samples),
            values,
            figures: vec![None; self.figures.len()],
            status: Status::Ok,
            message: String::new(),
        };
        let fail = |mut row: Row, status, message: String| {
            row.status = status;
            row.message = message;
            row
        };
        if let Some(m) = drawn {
            return fail(row, Status::Invalid, m);
        }
        let circuit: Circuit = match serde_json::from_value(doc) {
            Ok(c) => c,
            Err(e) => return fail(row, Status::Invalid, e.to_string()),
        };
        if let Err(e) = circuit.validate() {
            return fail(row, Status::Invalid, e.to_string());
        }
        let period = circuit.signals().iter().find_map(|(_, s)| s.period);
        let stop = match self.length {
            Length::Stop(t) => t,
            Length::Periods(n) => match period {
                Some(t) => n as f64 * t,
                None => {
                    return fail(
                        row,
                        Status::Invalid,
                        "no periodic gate to count periods by".into(),
                    )
                }
            },
        };
        let (from, to) = match self.window {
            Window::Span { from, to } => (from, to),
            Window::LastPeriods { count } => match period {
                Some(t) => ((stop - count as f64 * t).max(0.0), stop),
                None => {
                    return fail(
                        row,
                        Status::Invalid,
                        "no periodic gate to count periods by".into(),
                    )
                }
            },
        };
        if to > stop {
            return fail(
                row,
                Status::Failed,
                format!("window end {to:e} s is after the end of the run, {stop:e} s"),
            );
        }
        let mut problem = None;
        // Steady-state and loop figures: one search per point, one loop
        // gain per break point.
        if self.kinds.iter().any(|k| !matches!(k, FigureKind::Window)) {
            if let Err((status, message)) = self.analyses(&circuit, &mut row) {
                return fail(row, status, message);
            }
        }
        if !self.kinds.iter().any(|k| matches!(k, FigureKind::Window)) {
            return row;
        }
        let opts = Options {
            record: Record::Window { from, to: stop },
            ..Options::default()
        };
        let mut sim = match Simulator::new(&circuit, opts) {
            Ok(s) => s,
            Err(e) => return fail(row, Status::Invalid, e.to_string()),
        };
        if let Some(o) = old.take() {
            sim.reuse_storage(o);
        }
        if let Err(e) = sim.advance_to(stop) {
            return fail(row, Status::Stopped, e.to_string());
        }
        let run = sim.finish();
        let w = &run.waveform;
        // The window of the last periods starts at stop − count·T; a run
        // of exactly that many periods may record from a few ulps later
        // (as `measure_last_periods` allows).
        let from = match w.span() {
            Some((start, _)) if from < start && start - from <= 8.0 * f64::EPSILON * stop => start,
            _ => from,
        };
        // One measurement per output, shared by its figures: measuring
        // (exact integrals and extremes) costs more than the run's last
        // periods themselves.
        let mut measured: Vec<(&str, Result<Measurement, MeasureError>)> = vec![];
        for (k, f) in self.figures.iter().enumerate() {
            if !matches!(self.kinds[k], FigureKind::Window) {
                continue;
            }
            let value = if f.measure == Measure::Power {
                element_power(w, &f.of, from, to)
            } else {
                let m = match measured.iter().position(|(o, _)| *o == f.of) {
                    Some(j) => measured[j].1.clone(),
                    None => {
                        let id = w
                            .output(&f.of)
                            .expect("figure outputs are checked on the base circuit");
                        let m = measure(w, id, from, to);
                        measured.push((&f.of, m.clone()));
                        m
                    }
                };
                m.map(|m| match f.measure {
                    Measure::Average => m.average,
                    Measure::Rms => m.rms,
                    Measure::Min => m.min,
                    Measure::Max => m.max,
                    Measure::PeakToPeak => m.peak_to_peak,
                    Measure::Power => unreachable!("handled above"),
                })
            };
            match value {
                Ok(v) => row.figures[k] = Some(v),
                Err(e) => {
                    problem.get_or_insert(format!("{}: {e}", f.name));
                }
            }
        }
        *old = Some(run);
        match problem {
            Some(m) => fail(row, Status::Failed, m),
            None => row,
        }
    }
}

impl Sweep {
    /// The steady-state and loop figures of one point into `row`; a failed
    /// analysis fails the point with its message.
    fn analyses(&self, circuit: &Circuit, row: &mut Row) -> Result<(), (Status, String)> {
        let failed = |e: crate::AnalysisError| {
            let status = match e {
                crate::AnalysisError::Solver(_) => Status::Stopped,
                _ => Status::Failed,
            };
            (status, e.to_string())
        };
        if self.kinds.iter().any(|k| matches!(k, FigureKind::Steady)) {
            let ss = crate::steady::find(circuit, &crate::steady::SteadyOptions::default())
                .map_err(failed)?;
            let w = &ss.run.waveform;
            let (from, to) = (ss.start_time, ss.end_time());
            for (k, f) in self.figures.iter().enumerate() {
                if !matches!(self.kinds[k], FigureKind::Steady) {
                    continue;
                }
                let value = if f.measure == Measure::Power {
                    element_power(w, &f.of, from, to)
                } else {
                    let id = w
                        .output(&f.of)
                        .expect("figure outputs are checked on the base circuit");
                    measure(w, id, from, to).map(|m| match f.measure {
                        Measure::Average => m.average,
                        Measure::Rms => m.rms,
                        Measure::Min => m.min,
                        Measure::Max => m.max,
                        Measure::PeakToPeak => m.peak_to_peak,
                        Measure::Power => unreachable!("handled above"),
                    })
                };
                row.figures[k] =
                    Some(value.map_err(|e| (Status::Failed, format!("{}: {e}", f.name)))?);
            }
        }
        let mut gains: Vec<(String, crate::response::LoopGain)> = vec![];
        for (k, kind) in self.kinds.iter().enumerate() {
            let FigureKind::Loop(l) = kind else {
                continue;
            };
            let key = format!("{}|{}|{}", l.at, l.from, l.points);
            let lg = match gains.iter().position(|(g, _)| *g == key) {
                Some(i) => &gains[i].1,
                None => {
                    let point =
                        crate::response::BreakPoint::named(circuit, &l.at).map_err(failed)?;
                    let fs = 1.0 / crate::steady::period(circuit).map_err(failed)?;
                    let freqs = crate::response::log_frequencies(l.from, 0.5 * fs, l.points)
                        .map_err(failed)?;
                    let lg = crate::response::loop_gain(
                        circuit,
                        &point,
                        &freqs,
                        &crate::steady::SteadyOptions::default(),
                    )
                    .map_err(failed)?;
                    gains.push((key, lg));
                    &gains.last().expect("just pushed").1
                }
            };
            let m = &lg.margins;
            let value = match l.margin {
                Margin::CrossoverHz => m.crossover_hz,
                Margin::PhaseMarginDeg => m.phase_margin_deg,
                Margin::GainMarginDb => m.gain_margin_db,
            };
            row.figures[k] = Some(value.ok_or_else(|| {
                (
                    Status::Failed,
                    format!(
                        "{}: no such crossing between {} Hz and fs/2",
                        l.name, l.from
                    ),
                )
            })?);
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Φ at a few points (tables of the normal distribution, from memory).
    #[test]
    fn normal_cdf_matches_tables() {
        for (x, p) in [
            (0.0, 0.5),
            (1.0, 0.841_344_75),
            (-2.0, 0.022_750_13),
            (3.0, 0.998_650_1),
        ] {
            assert!((normal_cdf(x) - p).abs() < 2e-7, "{x}");
        }
    }

    #[test]
    fn distributions_are_checked() {
        assert!(check_distribution(&Distribution::Normal {
            sigma: -0.1,
            limits: None
        })
        .is_err());
        assert!(check_distribution(&Distribution::Uniform {
            low: 0.2,
            high: -0.2
        })
        .is_err());
        assert!(check_distribution(&Distribution::Normal {
            sigma: 0.01,
            limits: Some([0.1, 0.2])
        })
        .is_err());
        assert!(check_distribution(&Distribution::Normal {
            sigma: 0.1,
            limits: Some([-0.2, 0.2])
        })
        .is_ok());
    }
}
