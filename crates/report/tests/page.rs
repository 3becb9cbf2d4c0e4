//! The page without a browser: self-contained, small, its numbers equal
//! to the summary, limits marked and failed ones on top.

use fluxstep_netlist::{DesignLimits, PartLimit, RunSettings};
use fluxstep_report::{build, ReportOptions, SECTIONS};

use crate::common::{check_numbers, circuit, example_report, marked, report_of};

/// Every value of `src`, `href` and CSS `url(` in the page.
fn references(html: &str) -> Vec<String> {
    let mut out = vec![];
    for pat in ["src=\"", "href=\"", "src='", "href='", "url("] {
        let mut rest = html;
        while let Some(i) = rest.find(pat) {
            let from = i + pat.len();
            let end = rest[from..]
                .find(['"', '\'', ')'])
                .map(|e| e + from)
                .unwrap_or(rest.len());
            out.push(rest[from..end].to_string());
            rest = &rest[end..];
        }
    }
    out
}

#[test]
fn the_page_is_self_contained() {
    for name in ["buck.json", "voltage_mode_buck.json", "sync_buck.json"] {
        let (r, _) = example_report(name);
        for v in references(&r.html) {
            let low = v.to_ascii_lowercase();
            assert!(
                !low.contains("http") && !low.contains("//") && !low.starts_with("file:"),
                "{name}: external reference {v:?}"
            );
        }
        let low = r.html.to_ascii_lowercase();
        for tag in [
            "<link",
            "<img",
            "<script",
            "<iframe",
            "@import",
            "@font-face",
        ] {
            assert!(!low.contains(tag), "{name}: {tag} in the page");
        }
    }
    // The scan itself finds what it must reject.
    assert_eq!(
        references("<a href=\"http://x\"><img src='//y'><i style=\"background:url(file:z)\">"),
        ["http://x", "//y", "file:z"]
    );
}

#[test]
fn the_buck_report_is_below_500_kb_and_has_every_section() {
    let (r, dir) = example_report("buck.json");
    let size = std::fs::metadata(dir.join("report.html")).unwrap().len();
    assert!(size < 500_000, "report.html is {size} bytes");
    for (id, heading) in SECTIONS {
        assert!(r.html.contains(&format!("<section id=\"{id}\">")), "{id}");
        assert!(r.html.contains(heading), "{heading}");
    }
    assert!(dir.join("summary.json").exists());
    assert!(r
        .html
        .contains("do not replace measurement on real hardware"));
}

#[test]
fn every_number_on_the_page_is_in_the_summary_json_beside_it() {
    for name in ["buck.json", "voltage_mode_buck.json", "sync_buck.json"] {
        let (r, dir) = example_report(name);
        let text = std::fs::read_to_string(dir.join("summary.json")).unwrap();
        let written: serde_json::Value = serde_json::from_str(&text).unwrap();
        assert_eq!(written, r.summary, "{name}");
        let n = check_numbers(&marked(&r.html), &written);
        assert!(n > 20, "{name}: only {n} numbers");
    }
}

/// The demo buck against the textbook: a buck in continuous conduction
/// averages D·Vin at its output, and its inductor ripple is
/// (Vin − Vout)·D / (L·fs) (R. W. Erickson & D. Maksimović, Fundamentals
/// of Power Electronics, 2nd ed. 2001, chapter 2: volt-second balance and
/// the small-ripple approximation; the ripple of a straight-line current
/// is exact, the output average is D·Vin to the small ripple).
#[test]
fn the_buck_operating_point_matches_the_textbook() {
    let (r, _) = example_report("buck.json");
    let get = |k: &str| r.summary.pointer(k).and_then(|v| v.as_f64()).unwrap();
    let ripple = get("/operating_point/inductors/L1/peak_to_peak");
    let expected = (24.0 - 12.0) * 0.5 / (22e-6 * 200e3);
    assert!(
        (ripple - expected).abs() < 0.01 * expected,
        "{ripple} vs {expected}"
    );
    assert!((get("/operating_point/outputs/out/average") - 12.0).abs() < 0.01);
    assert!((get("/operating_point/inductors/L1/average") - 2.0).abs() < 0.01);
    // The diode blocks the whole input voltage (common practice).
    assert!((get("/stress/D1/peak_voltage") - 24.0).abs() < 1e-9);
    // Ideal parts: no loss data, said plainly; the energy balance closes.
    assert!(r.html.contains("No loss data"));
    assert!(get("/certificate/balance_error").abs() < 1e-9);
}

#[test]
fn a_circuit_with_loss_fields_shows_the_breakdown_and_efficiency() {
    let (r, _) = example_report("sync_buck.json");
    let get = |k: &str| r.summary.pointer(k).and_then(|v| v.as_f64()).unwrap();
    let eta = get("/losses/efficiency_percent");
    // Output power over input power (definition); the losses make up the
    // difference, up to the energy balance residual.
    let (pin, pout, loss) = (
        get("/losses/input_power"),
        get("/losses/output_power"),
        get("/losses/total"),
    );
    assert!((eta - 100.0 * pout / pin).abs() < 1e-9, "{eta}");
    assert!((pin - pout - loss).abs() < 1e-6 * pin);
    assert!(eta > 90.0 && eta < 100.0, "{eta}");
    assert!(r.html.contains("<svg class=\"bars\""));
}

fn with_limits(limits: DesignLimits) -> fluxstep_netlist::Circuit {
    let mut c = circuit("buck.json");
    let run = c
        .run
        .take()
        .unwrap_or_else(|| RunSettings::default_for(5e-3));
    c.run = Some(RunSettings {
        limits: Some(limits),
        ..run
    });
    c.validate().expect("limits valid");
    c
}

#[test]
fn limits_are_marked_and_a_failed_one_is_shown_on_top() {
    let part = |e: &str, v: f64| PartLimit {
        element: e.into(),
        value: v,
    };
    // Met: 18 mV ripple under 50 mV, 2.68 A under 4 A, 24 V under 80 % of 40 V.
    let ok = with_limits(DesignLimits {
        max_output_ripple: Some(50e-3),
        saturation_current: vec![part("L1", 4.0)],
        voltage_rating: vec![part("S1", 40.0), part("D1", 40.0)],
        derating: Some(0.8),
        ..DesignLimits::default()
    });
    let (r, _) = report_of(&ok, "limits-met", None);
    assert!(r.failed.is_empty(), "{:?}", r.failed);
    assert!(r.html.contains("class=\"banner pass\""));
    assert_eq!(r.html.matches("<td class=\"pass\">").count(), 4);
    // The ripple checked is the one the operating point shows.
    assert_eq!(
        r.summary.pointer("/limits/output_ripple/value"),
        r.summary.pointer("/operating_point/output_ripple")
    );

    // Failed: 24 V is above 80 % of a 25 V rating, 2.68 A above 2.5 A.
    let bad = with_limits(DesignLimits {
        saturation_current: vec![part("L1", 2.5)],
        voltage_rating: vec![part("D1", 25.0)],
        derating: Some(0.8),
        ..DesignLimits::default()
    });
    let r = build(&bad, &ReportOptions::named("limits-failed")).unwrap();
    assert_eq!(r.failed.len(), 2, "{:?}", r.failed);
    assert!(
        r.failed[0].contains("L1") && r.failed[0].contains("2.682 A"),
        "{:?}",
        r.failed
    );
    assert!(
        r.failed[1].contains("D1") && r.failed[1].contains("20.00 V"),
        "{:?}",
        r.failed
    );
    let banner = r
        .html
        .find("class=\"banner fail\"")
        .expect("a failure banner");
    let first_section = r.html.find("<section").unwrap();
    assert!(banner < first_section, "the banner is on top");
    assert!(r.html[banner..first_section].contains("2 design limits failed"));
    assert_eq!(r.html.matches("<td class=\"fail\">").count(), 2);
}

#[test]
fn a_closed_loop_shows_its_margins_and_bode_plot() {
    let (r, _) = example_report("voltage_mode_buck.json");
    let pm = r
        .summary
        .pointer("/loops/K/phase_margin_deg")
        .and_then(|v| v.as_f64())
        .expect("a phase margin");
    // The file's own description designs the crossover near a tenth of
    // the switching frequency (200 kHz), with a positive phase margin.
    let fc = r
        .summary
        .pointer("/loops/K/crossover_hz")
        .unwrap()
        .as_f64()
        .unwrap();
    assert!(fc > 10e3 && fc < 40e3, "{fc}");
    assert!(pm > 0.0 && pm < 90.0, "{pm}");
    assert!(r.html.contains("Loop broken at the input of compensator K"));
}

#[test]
fn every_example_circuit_gives_a_consistent_report() {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits");
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .filter_map(|e| e.ok()?.file_name().into_string().ok())
        .filter(|n| n.ends_with(".json"))
        .collect();
    names.sort();
    assert!(names.len() >= 10);
    for name in &names {
        let (r, _) = example_report(name);
        check_numbers(&marked(&r.html), &r.summary);
        for (id, _) in SECTIONS {
            assert!(
                r.html.contains(&format!("<section id=\"{id}\">")),
                "{name}: {id}"
            );
        }
    }
}

/// A sweep file adds its points by status, the worst case of each figure
/// and its plots (two line plots in buck_operating_range.sweep.json) to
/// the sweep section, with the numbers in the summary.
#[test]
fn a_sweep_adds_its_worst_cases_and_its_plots() {
    let sweep = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/sweeps/buck_operating_range.sweep.json");
    let dir = std::path::Path::new(env!("CARGO_TARGET_TMPDIR")).join("report-sweep");
    let opts = ReportOptions {
        name: "buck".into(),
        sweep: Some(sweep),
        loop_points: 40,
        ..ReportOptions::default()
    };
    let r = fluxstep_report::write(&circuit("buck.json"), &opts, &dir).expect("written");
    let start = r
        .html
        .find("<section id=\"sweep\">")
        .expect("a sweep section");
    let end = start + r.html[start..].find("</section>").expect("closed");
    let section = &r.html[start..end];
    assert_eq!(section.matches("<svg").count(), 2, "{section}");
    assert!(section.contains("il_peak against Vin.waveform.value"));
    assert!(r.summary["sweep"]["points"].as_f64().unwrap() > 0.0);
    assert!(check_numbers(&marked(&r.html), &r.summary) > 0);
}
