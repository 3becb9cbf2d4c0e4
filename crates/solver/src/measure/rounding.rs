//! Rounding noise: values below a billionth of their quantity's scale in
//! the run, shown as exact zero.

use super::Measurement;

/// Relative size below which a measured value is rounding noise: a value
/// whose magnitude is below this fraction of the largest magnitude of its
/// quantity in the run (see [`without_rounding_noise`]).
///
/// Why 1e-9: the solver itself treats a guard as zero within 1e-10 of its
/// magnitude plus 1e-13 of the run's largest current or voltage
/// (`run/locate.rs`), and an average of a waveform whose positive and
/// negative parts cancel keeps only the digits its largest part leaves
/// after cancellation. Nothing a designer reads changes below a
/// billionth of the run's scale.
pub const ROUNDING_REL: f64 = 1e-9;

/// The measurements with every value that is rounding noise set to exact
/// zero, for showing to people (keep the raw values for files meant for
/// programs).
///
/// The floor is scale-aware, as the solver's own zero tests are: for each
/// quantity (currents together, voltages together, each compensator output
/// alone) it is [`ROUNDING_REL`] times the largest magnitude among the
/// minima and maxima measured for that quantity. Average, RMS, minimum,
/// maximum and peak-to-peak below it become 0, so an inductor current
/// that touches zero shows a minimum of 0 rather than −8.65e-12 A, and an
/// AC current averages 0.
///
/// # Example
///
/// ```
/// use fluxstep_solver::measure::{without_rounding_noise, Measurement};
///
/// let m = |output: &str, average: f64, min: f64, max: f64| Measurement {
///     output: output.into(), t0: 0.0, t1: 1.0, average, rms: 1.0,
///     min, max, peak_to_peak: max - min, time_of_min: 0.0, time_of_max: 0.5,
/// };
/// let shown = without_rounding_noise(&[
///     m("L1.current", 0.5, -8.65e-12, 1.6),
///     m("Rs.current", -2.9e-10, -3.5, 3.5),
///     m("out", 12.0, 11.9, 12.1),
/// ]);
/// assert_eq!(shown[0].min, 0.0);
/// assert_eq!(shown[1].average, 0.0);
/// assert_eq!(shown[2].average, 12.0);
/// ```
pub fn without_rounding_noise(measurements: &[Measurement]) -> Vec<Measurement> {
    let quantity = |name: &str| -> String {
        match fluxstep_netlist::OutputName::parse(name) {
            Ok(fluxstep_netlist::OutputName::Signal(_)) | Err(_) => name.to_string(),
            Ok(o) => o.unit().to_string(),
        }
    };
    measurements
        .iter()
        .map(|m| {
            let q = quantity(&m.output);
            let scale = measurements
                .iter()
                .filter(|o| quantity(&o.output) == q)
                .map(|o| o.min.abs().max(o.max.abs()))
                .filter(|v| v.is_finite())
                .fold(0.0, f64::max);
            let floor = ROUNDING_REL * scale;
            let zero = |v: f64| if v.abs() < floor { 0.0 } else { v };
            Measurement {
                average: zero(m.average),
                rms: zero(m.rms),
                min: zero(m.min),
                max: zero(m.max),
                peak_to_peak: zero(m.peak_to_peak),
                ..m.clone()
            }
        })
        .collect()
}
