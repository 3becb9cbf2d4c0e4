//! Shared helpers for the physics tests.

use fluxstep_netlist::{Circuit, Element};
use fluxstep_solver::{EventKind, RunResult};

/// Relative difference |a − b| / max(|b|, floor).
pub fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(1e-300)
}

/// Energy balance over the whole run (coupled windings count their
/// absorbed energy with the dissipated side: their stored energy change): energy delivered by the sources,
/// change of stored energy, energy dissipated in resistors, diodes and
/// switches (absorbed v·i), and energy dissipated by recorded jumps.
/// Returns (delivered, stored change + dissipated) — Tellegen's theorem
/// says they are equal (common practice).
pub fn energy_balance(c: &Circuit, run: &RunResult) -> (f64, f64) {
    let w = &run.waveform;
    let (t0, t1) = w.span().unwrap();
    let absorbed = |name: &str| -> f64 {
        let v = w.output(&format!("{name}.voltage")).unwrap();
        let i = w.output(&format!("{name}.current")).unwrap();
        w.integrate(&[v, i], t0, t1, |x| x[0] * x[1])
    };
    let mut delivered = 0.0;
    let mut dissipated = 0.0;
    let mut stored_names = vec![];
    for e in &c.elements {
        match e {
            Element::VoltageSource(s) => delivered -= absorbed(&s.name),
            Element::CurrentSource(s) => delivered -= absorbed(&s.name),
            Element::Resistor(r) => dissipated += absorbed(&r.name),
            Element::Diode(d) => dissipated += absorbed(&d.name),
            Element::Switch(s) => {
                dissipated += absorbed(&s.name);
                if s.body_diode.is_some() {
                    dissipated += absorbed(&format!("{}.body_diode", s.name));
                }
            }
            Element::CoupledInductors(k) => {
                for wd in &k.windings {
                    dissipated += absorbed(&format!("{}.{}", k.name, wd.name));
                }
            }
            Element::IdealTransformer(t) => {
                for side in ["primary", "secondary"] {
                    dissipated += absorbed(&format!("{}.{side}", t.name));
                }
            }
            Element::Inductor(l) => stored_names.push((l.name.clone(), l.inductance, true)),
            Element::Capacitor(k) => stored_names.push((k.name.clone(), k.capacitance, false)),
        }
    }
    let mut stored = 0.0;
    for (n, v, is_l) in &stored_names {
        let q = w
            .output(&format!(
                "{n}.{}",
                if *is_l { "current" } else { "voltage" }
            ))
            .unwrap();
        let a = w.value(q, t0).unwrap();
        let b = w.value_before(q, t1).unwrap();
        stored += 0.5 * v * (b * b - a * a);
    }
    let jumps: f64 = run
        .events
        .iter()
        .filter(|e| matches!(e.kind, EventKind::ChargeJump | EventKind::FluxJump))
        .filter_map(|e| e.energy)
        .sum();
    (delivered, stored + dissipated + jumps)
}
