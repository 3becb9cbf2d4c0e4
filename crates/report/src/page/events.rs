//! Sections 9 to 11: events by kind and the diagnostics, the certificate
//! (version, input hash, energy balance) and the cautions.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use fluxstep_plot::{format_si_short, PlotError};
use fluxstep_solver::{EventCause, EventKind};
use serde_json::Value;
use sha2::{Digest, Sha256};

use super::{heading, Page};
use crate::gather::Basis;
use crate::sheet::{esc, key, Sheet};

fn kind_words(k: EventKind) -> &'static str {
    match k {
        EventKind::SwitchOn => "switch on",
        EventKind::SwitchOff => "switch off",
        EventKind::DiodeOn => "diode on",
        EventKind::DiodeOff => "diode off",
        EventKind::SourceBreakpoint => "source corner",
        EventKind::ChargeJump => "charge-sharing jump",
        EventKind::FluxJump => "flux-conserving jump",
        EventKind::ShootThrough => "shoot-through",
    }
}

fn cause_words(c: EventCause) -> &'static str {
    match c {
        EventCause::Start => "at the start",
        EventCause::Scheduled => "at a scheduled instant",
        EventCause::Crossing => "located on the solution",
    }
}

/// Section 9: events in the span by kind, then every diagnostic with its
/// instant.
pub(super) fn events(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let f = p.f;
    let span_words = p.span_words;
    let (a, e) = f.window;
    let run = f.run();
    heading(b, 8);
    let events: Vec<_> = run
        .events
        .iter()
        .filter(|x| {
            x.time >= a && (x.time < e || matches!(f.basis, Basis::Transient { .. }) && x.time <= e)
        })
        .collect();
    let mut by_kind: BTreeMap<String, Vec<_>> = BTreeMap::new();
    for x in &events {
        by_kind
            .entry(kind_words(x.kind).to_string())
            .or_default()
            .push(*x);
    }
    let _ = write!(
        b,
        "<p>Events {span_words}, by kind, with the first three of each.</p>"
    );
    b.push_str("<table><thead><tr><th>kind</th><th class=\"n\">count</th><th>first events</th></tr></thead><tbody>");
    for (k, list) in &by_kind {
        let first = list
            .iter()
            .take(3)
            .map(|x| {
                format!(
                    "{} at {} ({})",
                    esc(x.element),
                    esc(&fluxstep_plot::format_si_digits(x.time, "s", 6)),
                    cause_words(x.cause)
                )
            })
            .collect::<Vec<_>>()
            .join("; ");
        let _ = write!(
            b,
            "<tr><td>{}</td><td class=\"n\">{}</td><td>{first}</td></tr>",
            esc(k),
            s.count(&format!("/events/counts/{}", key(k)), list.len()),
        );
    }
    b.push_str("</tbody></table>");
    let mut diagnostics: Vec<(Option<f64>, String)> = vec![];
    for x in &events {
        let energy = x
            .energy
            .map(|j| format_si_short(j, "J"))
            .unwrap_or_default();
        match x.kind {
            EventKind::ChargeJump => diagnostics.push((Some(x.time), format!("A switch or diode closed a loop of capacitors and sources ({}): their voltages jumped to share charge, dissipating {energy} at that instant. A real circuit shows a current spike here, limited only by the loop's resistance.", x.element))),
            EventKind::FluxJump => diagnostics.push((Some(x.time), format!("Inductor current lost its path ({}); the run went on with the flux-conserving jump, dumping {energy}. On hardware this is the voltage spike that destroys a transistor: add a freewheeling path.", x.element))),
            EventKind::ShootThrough => diagnostics.push((Some(x.time), format!("Closed switches short a source or capacitor ({}): a shoot-through. Check the dead time.", x.element))),
            _ => {}
        }
    }
    if let Basis::Transient { why, stopped, .. } = &f.basis {
        diagnostics.push((None, format!("No periodic steady state: {why}")));
        if let Some(x) = stopped {
            diagnostics.push((x.time(), x.to_string()));
        }
    }
    if let Basis::Steady(ss) = &f.basis {
        if !ss.is_stable() {
            diagnostics.push((Some(ss.start_time), "The periodic orbit is unstable (a Floquet multiplier lies outside the unit circle): the converter will not stay on it; peak-current control above 50 % duty without a compensation ramp does this.".into()));
        }
    }
    for j in f.junctions.iter().flatten() {
        if let Some(w) = j.warning() {
            diagnostics.push((Some(j.time_of_max), w));
        }
    }
    let count = s.count("/events/diagnostics", diagnostics.len());
    if diagnostics.is_empty() {
        let _ = write!(
            b,
            "<p>{count} diagnostics: no jump, shoot-through, interrupted current or stop.</p>"
        );
    } else {
        let _ = write!(
            b,
            "<h3>Diagnostics</h3><p>{count} in all, each with its instant.</p>"
        );
        b.push_str("<table><thead><tr><th class=\"n\">instant</th><th>what happened</th></tr></thead><tbody>");
        for (t, text) in &diagnostics {
            let _ = write!(
                b,
                "<tr><td class=\"n\">{}</td><td>{}</td></tr>",
                t.map(|t| fluxstep_plot::format_si_digits(t, "s", 6))
                    .unwrap_or_else(|| "—".into()),
                esc(text)
            );
        }
        b.push_str("</tbody></table>");
    }
    b.push_str("</section>");

    Ok(())
}

/// Section 10: what produced the page and how to reproduce it.
pub(super) fn certificate(p: &Page, s: &mut Sheet, b: &mut String) -> Result<(), PlotError> {
    let (f, opts, title) = (p.f, p.opts, p.title);
    heading(b, 9);
    let version = env!("CARGO_PKG_VERSION");
    s.set("/certificate/version", Value::from(version));
    let hash = opts.input.as_ref().map(|bytes| {
        Sha256::digest(bytes)
            .iter()
            .map(|x| format!("{x:02x}"))
            .collect::<String>()
    });
    let residual = match &f.losses {
        Ok(r) => format!(
            "energy balance residual {} ({} of the largest energy in the balance) over {} to {}",
            s.si("/certificate/balance_residual", r.balance_residual(), "J"),
            s.sci("/certificate/balance_error", r.balance_error()),
            fluxstep_plot::format_si_digits(r.t0, "s", 6),
            fluxstep_plot::format_si_digits(r.t1, "s", 6),
        ),
        Err(x) => format!("no energy balance ({})", esc(x)),
    };
    let _ = write!(
        b,
        "<p class=\"cert\">fluxstep {version}; input {}{}; {residual}.</p>",
        esc(opts.file.as_deref().unwrap_or(title)),
        match &hash {
            Some(h) => {
                s.set("/certificate/sha256", Value::from(h.clone()));
                format!(" (SHA-256 <code>{h}</code>)")
            }
            None => " (built in code: no file hash)".into(),
        }
    );
    b.push_str("<p>Same file and version, same bits: a run is deterministic, so a reviewer who runs <code>fluxstep report</code> on this file gets these numbers exactly.</p></section>");

    Ok(())
}

/// Section 11: the cautions every page carries.
pub(super) fn cautions(b: &mut String) {
    heading(b, 10);
    b.push_str("<ul><li>Simulation results do not replace measurement on real hardware, local electrical codes or qualified review — above all for mains voltages and large stored energies: inductors and capacitors can hold dangerous energy long after a supply is switched off.</li><li>The parts are ideal except for the loss fields the file gives: no parasitic capacitance, no stray inductance unless modelled as an element, no saturation, no temperature dependence of resistance.</li><li>Margins come from the small-signal model around one operating point; check the loop at the corners of input voltage, load and part tolerances.</li></ul></section>");
}
