//! Laying the facts out as one HTML page: sections in the order a design
//! review reads them, every number through the [`Sheet`] so the summary
//! JSON holds exactly what the page shows.
//!
//! One file per group of sections, in page order: `limits.rs` (the checks,
//! the banner, section 1), `circuit.rs` (2), `operating.rs` (3 to 5),
//! `power.rs` (6), `control.rs` (7, 8) and `events.rs` (9 to 11).

use std::fmt::Write as _;

use fluxstep_netlist::{Circuit, OutputName};
use fluxstep_plot::PlotError;
use serde_json::Value;

use crate::gather::{Basis, Facts};
use crate::sheet::{esc, Sheet};
use crate::{Report, ReportOptions};

mod circuit;
mod control;
mod events;
mod limits;
mod operating;
mod power;

/// The sections, in page order: (element id, heading).
pub const SECTIONS: [(&str, &str); 11] = [
    ("limits", "Design limits"),
    ("circuit", "The circuit"),
    ("operating-point", "Operating point"),
    ("waveforms", "Waveforms"),
    ("stress", "Stress on switches and diodes"),
    ("losses", "Losses and efficiency"),
    ("loop", "Control loops"),
    ("sweep", "Sweep"),
    ("events", "Events and diagnostics"),
    ("certificate", "Certificate"),
    ("cautions", "Cautions"),
];

const STYLE: &str = include_str!("../style.css");

fn unit_of(output: &str) -> &'static str {
    OutputName::parse(output).map(|o| o.unit()).unwrap_or("")
}

/// Returns an inline SVG that scales with its container.
fn inline_svg(svg: &str) -> String {
    let start = svg.find("<svg").unwrap_or(0);
    svg[start..].to_string()
}

/// Opens section `i` of [`SECTIONS`] with its numbered heading.
fn heading(b: &mut String, i: usize) {
    let (id, heading) = SECTIONS[i];
    let _ = write!(b, "<section id=\"{id}\"><h2>{}. {heading}</h2>", i + 1);
}

/// What every section reads.
#[derive(Clone, Copy)]
struct Page<'a> {
    c: &'a Circuit,
    opts: &'a ReportOptions,
    f: &'a Facts,
    /// The page's title: the options' name, or "circuit".
    title: &'a str,
    /// The span the numbers cover, in words ("over one period").
    span_words: &'static str,
}

pub(crate) fn render(c: &Circuit, opts: &ReportOptions, f: &Facts) -> Result<Report, PlotError> {
    let mut s = Sheet::new();
    let mut body = String::new();
    let b = &mut body;
    let title = if opts.name.is_empty() {
        "circuit".to_string()
    } else {
        opts.name.clone()
    };
    s.set("/title", Value::from(title.clone()));

    // Design limits first: the banner reads their outcome.
    let checks = c
        .run
        .as_ref()
        .and_then(|r| r.limits.as_ref())
        .map(|l| limits::checks(l, f, &mut s))
        .unwrap_or_default();
    let failed = limits::failed(&checks);
    s.set(
        "/limits_failed",
        Value::Array(failed.iter().map(|x| Value::from(x.clone())).collect()),
    );
    limits::banner(b, &checks, &failed);

    let span_words = match f.basis {
        Basis::Steady(_) => "over one period",
        Basis::Transient { .. } => "over the window",
    };
    let p = Page {
        c,
        opts,
        f,
        title: &title,
        span_words,
    };
    limits::section(b, &checks);
    circuit::circuit(&p, b);
    operating::operating_point(&p, &mut s, b)?;
    operating::waveforms(&p, b)?;
    operating::stress(&p, &mut s, b)?;
    power::losses(&p, &mut s, b)?;
    control::loops(&p, &mut s, b)?;
    control::sweep(&p, &mut s, b)?;
    events::events(&p, &mut s, b)?;
    events::certificate(&p, &mut s, b)?;
    events::cautions(b);

    let version = env!("CARGO_PKG_VERSION");
    let html = format!(
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">\
         <meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\
         <title>{t} — design review</title><style>{STYLE}</style></head>\
         <body><main><header><h1>{t}: design review</h1><p class=\"sub\">fluxstep {version} · exact switched simulation · numbers {span_words}</p></header>\
         {body}</main></body></html>\n",
        t = esc(&title),
    );
    Ok(Report {
        html,
        summary: s.summary,
        failed,
    })
}
