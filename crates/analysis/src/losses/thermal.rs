//! Junction temperature from a Foster thermal network driven by a part's
//! exact instantaneous loss.
//!
//! Each Foster stage k (resistance R_k, time constant τ_k) is a
//! first-order system: its temperature rise θ_k obeys
//! θ_k′ = (R_k·p(t) − θ_k)/τ_k, so over any interval
//! θ_k(b) = e^(−(b−a)/τ_k)·θ_k(a) + (R_k/τ_k)·∫ₐᵇ e^(−(b−s)/τ_k)·p(s) ds,
//! with p(t) = Σ v·i of the part's recorded outputs. The integral is taken
//! on the exact solution ([`fluxstep_solver::Waveform::integrate_timed`]),
//! so the temperature is exact at every instant where it is evaluated.
//! The junction temperature is the ambient plus the sum of the stages'
//! rises (stages in series: junction → case, then case → ambient; chaining
//! Foster networks is the usual datasheet practice, exact for each one and
//! an approximation of the physical heat path where they meet — common
//! practice).

use serde::{Deserialize, Serialize};

use fluxstep_netlist::{Circuit, Element, ThermalNetwork};
use fluxstep_solver::measure::MeasureError;
use fluxstep_solver::{EventLog, OutputId, Waveform};

use crate::AnalysisError;

/// Instants per evaluated window besides the event instants: the peak and
/// trough are read among the exact temperatures at these instants and at
/// every event (where the loss jumps, which is where a switching part's
/// temperature turns).
const GRID: usize = 256;

/// Steady temperature rise P·ΣR of a network carrying a constant loss `p`
/// (K): every stage settles at R_k·p.
///
/// # Example
///
/// ```
/// use fluxstep_analysis::losses::thermal::steady_rise;
/// use fluxstep_netlist::{FosterPair, ThermalNetwork};
///
/// let net = ThermalNetwork {
///     junction_case: vec![FosterPair { resistance: 0.2, time_constant: 1e-3 }],
///     case_ambient: vec![FosterPair { resistance: 1.3, time_constant: 10.0 }],
///     ambient: None,
///     max_junction: None,
/// };
/// assert!((steady_rise(&net, 10.0) - 15.0).abs() < 1e-12);
/// ```
pub fn steady_rise(net: &ThermalNetwork, p: f64) -> f64 {
    net.stages().map(|s| s.resistance * p).sum()
}

/// Temperature rise at time `t` after a constant loss `p` starts with the
/// network at ambient: Σ R_k·p·(1 − e^(−t/τ_k)) (K), the network's
/// thermal impedance times the loss.
pub fn step_rise(net: &ThermalNetwork, p: f64, t: f64) -> f64 {
    net.stages()
        .map(|s| s.resistance * p * -(-t / s.time_constant).exp_m1())
        .sum()
}

/// How the network starts at the window's beginning.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ThermalStart {
    /// Every stage at ambient (a cold start: the step response).
    Ambient,
    /// The window is one period of a periodic steady state: each stage
    /// starts where it ends, θ_k(t0) = θ_k(t1) (the temperature ripple of
    /// a settled converter).
    Periodic,
}

/// The junction temperature of one part over a window.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct JunctionTemperature {
    /// The element (switch or diode).
    pub element: String,
    /// Average loss over the window (W).
    pub average_loss: f64,
    /// Ambient plus average loss times ΣR (°C): where the junction settles
    /// on average.
    pub steady: f64,
    /// Lowest temperature among the evaluated instants (°C).
    pub min: f64,
    /// Highest temperature among the evaluated instants (°C).
    pub max: f64,
    /// When `max` is reached (s).
    pub time_of_max: f64,
    /// Temperature at the end of the window (°C).
    pub end: f64,
    /// The network's largest allowed temperature (°C), if given.
    pub max_junction: Option<f64>,
}

impl JunctionTemperature {
    /// `max − min` (K): the ripple over the window.
    pub fn ripple(&self) -> f64 {
        self.max - self.min
    }

    /// A warning naming the element when its peak exceeds the network's
    /// `max_junction`.
    pub fn warning(&self) -> Option<String> {
        let limit = self.max_junction?;
        (self.max > limit).then(|| {
            format!(
                "{}: junction reaches {:.1} °C at t = {:e} s, above its maximum of {:.1} °C",
                self.element, self.max, self.time_of_max, limit
            )
        })
    }
}

/// The junction temperature of `element` (a switch or diode with a
/// `thermal` network) over `[t0, t1]`, driven by its exact loss (for a
/// switch, channel and body diode together).
///
/// With [`ThermalStart::Periodic`] the window should be whole periods of a
/// settled run (for example a steady state's recorded period): the result
/// is then the periodic temperature ripple.
///
/// # Errors
///
/// - [`AnalysisError::LossModel`] when the element is not a switch or
///   diode with a thermal network;
/// - [`AnalysisError::Measure`] when the window is not inside the record or
///   the loss is undetermined (floating) in it.
pub fn junction_temperature(
    circuit: &Circuit,
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
    start: ThermalStart,
) -> Result<JunctionTemperature, AnalysisError> {
    junction_temperature_with_pulses(circuit, waveform, element, t0, t1, start, &[])
}

/// As [`junction_temperature`], with the part's simulated loss joined by
/// energy pulses `(instant, J)` deposited at single instants: the
/// switching energies of its datasheet tables and the recovery energy of
/// its body diode, evaluated beside the simulation. A pulse E lifts each
/// Foster stage by E·R/τ at its instant (the stage's heat capacity is
/// τ/R), exactly. [`junction_temperature_of`] gathers them from the
/// circuit.
///
/// # Errors
///
/// As [`junction_temperature`].
pub fn junction_temperature_with_pulses(
    circuit: &Circuit,
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
    start: ThermalStart,
    pulses: &[(f64, f64)],
) -> Result<JunctionTemperature, AnalysisError> {
    let net = network(circuit, element)?;
    let pulses: Vec<(f64, f64)> = pulses
        .iter()
        .copied()
        .filter(|p| p.0 >= t0 && p.0 < t1)
        .collect();
    let energy = fluxstep_solver::measure::element_energy(waveform, element, t0, t1)?
        + pulses.iter().map(|p| p.1).sum::<f64>();
    let parts = parts(waveform, element);
    let power = |v: &[f64]| -> f64 { v.chunks(2).map(|c| c[0] * c[1]).sum() };
    let stages: Vec<(f64, f64)> = net
        .stages()
        .map(|s| (s.resistance, s.time_constant))
        .collect();
    // Evaluation instants: the event instants inside, and a grid no
    // coarser than a quarter of the shortest time constant (so each
    // exponential weight is smooth on its piece), capped in number.
    let tau_min = stages.iter().map(|s| s.1).fold(f64::INFINITY, f64::min);
    let n = ((t1 - t0) / (0.25 * tau_min))
        .ceil()
        .clamp(GRID as f64, 1e5) as usize;
    let mut times: Vec<f64> = (0..=n)
        .map(|k| {
            if k == n {
                t1
            } else {
                t0 + (t1 - t0) * k as f64 / n as f64
            }
        })
        .collect();
    times.extend(waveform.event_times(t0, t1));
    times.extend(pulses.iter().map(|p| p.0));
    times.retain(|t| *t >= t0 && *t <= t1);
    times.sort_by(f64::total_cmp);
    times.dedup();
    // Each stage's forced response over each piece [a, b].
    let forced = |a: f64, b: f64, r: f64, tau: f64| -> f64 {
        r / tau * waveform.integrate_timed(&parts, a, b, |s, v| (-(b - s) / tau).exp() * power(v))
    };
    // The pulse energy at instant t (every pulse there).
    let pulse_at = |t: f64| -> f64 { pulses.iter().filter(|p| p.0 == t).map(|p| p.1).sum() };
    let mut theta: Vec<f64> = match start {
        ThermalStart::Ambient => vec![0.0; stages.len()],
        ThermalStart::Periodic => stages
            .iter()
            .map(|&(r, tau)| {
                let mut f = 0.0;
                for w in times.windows(2) {
                    f += pulse_at(w[0]) * r / tau;
                    f = (-(w[1] - w[0]) / tau).exp() * f + forced(w[0], w[1], r, tau);
                }
                // θ(t0) = e^(−T/τ)·θ(t0) + F.
                -f / (-(t1 - t0) / tau).exp_m1()
            })
            .collect(),
    };
    let ambient = net.ambient();
    let temp = |theta: &[f64]| ambient + theta.iter().sum::<f64>();
    let first = temp(&theta);
    let (mut min, mut max, mut time_of_max) = (first, first, t0);
    for w in times.windows(2) {
        let e = pulse_at(w[0]);
        if e != 0.0 {
            // Just after the pulse: the peak of its spike.
            for (th, &(r, tau)) in theta.iter_mut().zip(&stages) {
                *th += e * r / tau;
            }
            let t = temp(&theta);
            if t > max {
                max = t;
                time_of_max = w[0];
            }
        }
        for (th, &(r, tau)) in theta.iter_mut().zip(&stages) {
            *th = (-(w[1] - w[0]) / tau).exp() * *th + forced(w[0], w[1], r, tau);
        }
        let t = temp(&theta);
        if t > max {
            max = t;
            time_of_max = w[1];
        }
        min = min.min(t);
    }
    let average_loss = energy / (t1 - t0);
    if !(max.is_finite() && min.is_finite()) {
        return Err(MeasureError::NonFinite {
            subject: element.into(),
            time: t0,
        }
        .into());
    }
    Ok(JunctionTemperature {
        element: element.into(),
        average_loss,
        steady: ambient + steady_rise(net, average_loss),
        min,
        max,
        time_of_max,
        end: temp(&theta),
        max_junction: net.max_junction,
    })
}

/// As [`junction_temperature`], with the pulses of the part's
/// `switching_energy` tables and its (body) diode's `recovered_charge`
/// (see [`crate::losses::switching`]) added to its simulated loss.
///
/// # Errors
///
/// As [`junction_temperature`], and those of
/// [`crate::losses::switching::switching_loss`].
pub fn junction_temperature_of(
    circuit: &Circuit,
    waveform: &Waveform,
    events: &EventLog,
    element: &str,
    t0: f64,
    t1: f64,
    start: ThermalStart,
) -> Result<JunctionTemperature, AnalysisError> {
    use crate::losses::switching::{recovery_loss, switching_loss};
    let mut pulses = vec![];
    match circuit.element(element) {
        Some(Element::Switch(s)) => {
            if let Some(m) = &s.switching_energy {
                pulses.extend(switching_loss(element, m, waveform, events, t0, t1)?.pulses);
            }
            if let Some(q) = s.body_diode.as_ref().and_then(|d| d.recovered_charge) {
                let d = format!("{element}.body_diode");
                pulses.extend(recovery_loss(&d, q, waveform, events, t0, t1)?.pulses);
            }
        }
        Some(Element::Diode(d)) => {
            if let Some(q) = d.model.recovered_charge {
                pulses.extend(recovery_loss(element, q, waveform, events, t0, t1)?.pulses);
            }
        }
        _ => {}
    }
    junction_temperature_with_pulses(circuit, waveform, element, t0, t1, start, &pulses)
}

/// The thermal network of a switch or diode.
fn network<'a>(circuit: &'a Circuit, element: &str) -> Result<&'a ThermalNetwork, AnalysisError> {
    let net = match circuit.element(element) {
        Some(Element::Switch(s)) => s.thermal.as_ref(),
        Some(Element::Diode(d)) => d.thermal.as_ref(),
        _ => None,
    };
    net.ok_or_else(|| AnalysisError::LossModel {
        element: element.into(),
        field: "thermal".into(),
        reason:
            "is not given: a junction temperature needs a switch or diode with a thermal network"
                .into(),
    })
}

/// The element's outputs as [v, i, v, i, …] (the element and its parts).
fn parts(waveform: &Waveform, element: &str) -> Vec<OutputId> {
    let prefix = format!("{element}.");
    waveform
        .output_names()
        .iter()
        .filter_map(|n| n.strip_suffix(".current"))
        .filter(|p| *p == element || p.starts_with(&prefix))
        .filter_map(|p| {
            let v = waveform.output(&format!("{p}.voltage")).ok()?;
            let i = waveform.output(&format!("{p}.current")).ok()?;
            Some([v, i])
        })
        .flatten()
        .collect()
}
