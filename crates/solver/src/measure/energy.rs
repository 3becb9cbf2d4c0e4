//! Power and energy of elements and their parts: exact integrals of v·i.

use super::window::{check_window, too_fast, window_segments};
use super::MeasureError;
use crate::waveform::{OutputId, Waveform};
use crate::waveform_ext::within_piece_cap;

/// Average power absorbed by an element over `[t0, t1]` (W): the time
/// average of v·i with the element's own sign convention, voltage
/// v(first node) − v(second node) and current from the first node through
/// the element to the second, so a resistor absorbs positive power and a
/// source delivering energy absorbs negative power.
///
/// An element made of several recorded parts (coupled windings
/// `ELEMENT.WINDING`, a switch's `SWITCH.body_diode`) absorbs the sum over
/// its parts. Where a part's voltage floats but its current is identically
/// zero (an open switch next to a floating node) the part absorbs nothing.
///
/// # Errors
///
/// [`MeasureError::UnknownElement`] when no recorded current/voltage pair
/// belongs to `element`; otherwise as [`measure`](super::measure), naming the element.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::element_power;
/// use fluxstep_solver::{simulate, Options};
///
/// let divider = Circuit::builder()
///     .voltage_source("V1", "a", "gnd", 10.0)
///     .resistor("R1", "a", "gnd", 100.0)
///     .build()
///     .unwrap();
/// let run = simulate(&divider, 1e-3, Options::default()).unwrap();
/// let p = element_power(&run.waveform, "R1", 0.0, 1e-3).unwrap();
/// assert!((p - 1.0).abs() < 1e-12); // V²/R = 100 / 100 W
/// ```
pub fn element_power(
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    Ok(element_energy(waveform, element, t0, t1)? / (t1 - t0))
}

/// Energy absorbed by an element over `[t0, t1]` (J): ∫ v·i dt with the
/// sign convention of [`element_power`].
///
/// # Errors
///
/// As [`element_power`].
///
/// # Example
///
/// ```
/// use fluxstep_netlist::Circuit;
/// use fluxstep_solver::measure::element_energy;
/// use fluxstep_solver::{simulate, Options};
///
/// // The capacitor's 50 µJ (½·C·V²) ends up almost entirely in the resistor.
/// let rc = Circuit::builder()
///     .capacitor_with_voltage("C1", "top", "gnd", 1e-6, 10.0)
///     .resistor("R1", "top", "gnd", 1e3)
///     .build()
///     .unwrap();
/// let run = simulate(&rc, 20e-3, Options::default()).unwrap();
/// let e = element_energy(&run.waveform, "R1", 0.0, 20e-3).unwrap();
/// assert!((e - 50e-6).abs() < 1e-12);
/// ```
pub fn element_energy(
    waveform: &Waveform,
    element: &str,
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    parts_energy(waveform, element, &element_parts(waveform, element), t0, t1)
}

/// Energy absorbed over `[t0, t1]` (J) by exactly one recorded part: the
/// output pair `PART.voltage` / `PART.current`, without the sub-parts
/// `PART.*` that [`element_energy`] adds (a switch's channel without its
/// body diode, a capacitance without its expanded `ELEMENT.esr`).
///
/// # Errors
///
/// As [`element_power`], naming the part.
///
/// # Example
///
/// ```
/// use fluxstep_netlist::{Capacitor, Circuit, Element};
/// use fluxstep_solver::measure::{element_energy, part_energy};
/// use fluxstep_solver::{simulate, Options};
///
/// // 1 µF at 10 V with 1 Ω of ESR, discharged into 9 Ω: the ESR takes a
/// // tenth of the 50 µJ (series resistances share by value).
/// let rc = Circuit::builder()
///     .element(Element::Capacitor(Capacitor {
///         name: "C1".into(),
///         nodes: ["top".into(), "gnd".into()],
///         capacitance: 1e-6,
///         initial_voltage: Some(10.0),
///         esr: Some(1.0),
///     }))
///     .resistor("R1", "top", "gnd", 9.0)
///     .build()
///     .unwrap();
/// let run = simulate(&rc, 1e-3, Options::default()).unwrap();
/// let esr = part_energy(&run.waveform, "C1.esr", 0.0, 1e-3).unwrap();
/// assert!((esr - 5e-6).abs() < 1e-15);
/// let whole = element_energy(&run.waveform, "C1", 0.0, 1e-3).unwrap();
/// let capacitance = part_energy(&run.waveform, "C1", 0.0, 1e-3).unwrap();
/// assert!((whole - (capacitance + esr)).abs() < 1e-18);
/// ```
pub fn part_energy(waveform: &Waveform, part: &str, t0: f64, t1: f64) -> Result<f64, MeasureError> {
    let pair = waveform
        .output(&format!("{part}.voltage"))
        .ok()
        .zip(waveform.output(&format!("{part}.current")).ok());
    let parts: Vec<_> = pair.into_iter().collect();
    parts_energy(waveform, part, &parts, t0, t1)
}

/// ∫ Σ v·i dt over `parts`, after checking that none floats where it carries current.
pub(super) fn parts_energy(
    waveform: &Waveform,
    element: &str,
    parts: &[(OutputId, OutputId)],
    t0: f64,
    t1: f64,
) -> Result<f64, MeasureError> {
    if parts.is_empty() {
        return Err(MeasureError::UnknownElement {
            element: element.into(),
        });
    }
    check_window(waveform, element, t0, t1)?;
    for &(v, i) in parts {
        for (k, seg) in window_segments(waveform, t0, t1) {
            let floating = waveform.undetermined_in(k, v) || waveform.undetermined_in(k, i);
            if floating
                && !(waveform.identically_zero_in(k, i) || waveform.identically_zero_in(k, v))
            {
                return Err(MeasureError::Undetermined {
                    subject: element.into(),
                    time: seg.0,
                });
            }
        }
    }
    for (k, (a, b)) in window_segments(waveform, t0, t1) {
        let need = waveform
            .pieces_needed(k, a - waveform.segments()[k].t0, b - a)
            .0;
        if !within_piece_cap(need) {
            return Err(too_fast(waveform, element, k, (a, b)));
        }
    }
    // `integrate` counts a stretch where either output is undetermined as
    // zero, which the check above has shown to be exact.
    let energy: f64 = parts
        .iter()
        .map(|&(v, i)| waveform.integrate(&[v, i], t0, t1, |x| x[0] * x[1]))
        .sum();
    if !energy.is_finite() {
        return Err(MeasureError::NonFinite {
            subject: element.into(),
            time: t0,
        });
    }
    Ok(energy)
}

/// The (voltage, current) output pairs that make up `element`: the element
/// itself, or its parts named `ELEMENT.PART`.
pub(super) fn element_parts(waveform: &Waveform, element: &str) -> Vec<(OutputId, OutputId)> {
    let prefix = format!("{element}.");
    waveform
        .output_names()
        .iter()
        .filter_map(|n| n.strip_suffix(".current"))
        .filter(|part| *part == element || part.starts_with(&prefix))
        .filter_map(|part| {
            let v = waveform.output(&format!("{part}.voltage")).ok()?;
            let i = waveform.output(&format!("{part}.current")).ok()?;
            Some((v, i))
        })
        .collect()
}
