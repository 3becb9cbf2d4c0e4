//! `fluxstep steady` as a user runs it: files, summary, exit codes.

use crate::common::{example, fluxstep, scratch_dir};

#[test]
fn steady_writes_one_period_and_a_summary_with_units() {
    let dir = scratch_dir("steady-buck-dcm");
    let out = fluxstep(&[
        "steady",
        &example("buck_dcm.json"),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stdout}\n{stderr}");
    assert!(
        stdout.contains("periodic steady state, period 5 µs (200 kHz)"),
        "{stdout}"
    );
    assert!(
        stdout.contains("C1.voltage") && stdout.contains(" V"),
        "{stdout}"
    );
    assert!(stdout.contains("stability: stable"), "{stdout}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["period"], 5e-6);
    assert!(summary["residual"].as_f64().unwrap() <= 1e-12);
    let vc = summary["state_at_period_start"]["C1.voltage"]
        .as_f64()
        .unwrap();
    assert!((vc - 16.96).abs() < 0.01, "{vc}");
    assert_eq!(summary["multipliers"].as_array().unwrap().len(), 2);
    // The CSV covers exactly one period.
    let csv = std::fs::read_to_string(dir.join("waveform.csv")).unwrap();
    let times: Vec<f64> = csv
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().parse().unwrap())
        .collect();
    assert_eq!(times.first(), Some(&0.0));
    assert_eq!(times.last(), Some(&5e-6));
    for f in ["events.json", "figure.svg"] {
        assert!(dir.join(f).exists(), "{f}");
    }
}

#[test]
fn steady_without_a_period_is_bad_input() {
    let dir = scratch_dir("steady-none");
    let out = fluxstep(&[
        "steady",
        &example("interrupted_inductor.json"),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("no periodic steady state"), "{stderr}");
}

#[test]
fn steady_that_does_not_converge_exits_1_with_the_history() {
    let dir = scratch_dir("steady-limit");
    let out = fluxstep(&[
        "steady",
        &example("buck_dcm.json"),
        "--max-iterations",
        "1",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(out.status.code(), Some(1));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("iteration limit 1"), "{stderr}");
}

/// The file's timing rules without a window hold over the steady orbit:
/// the synchronous buck's 50 ns dead time passes a 40 ns minimum (exit 0,
/// margins in the summary) and fails a 60 ns one (exit 1, the rule's
/// sentence on stderr, files still written). Dead-time arithmetic: common
/// practice.
#[test]
fn steady_checks_the_files_timing_rules() {
    let text = std::fs::read_to_string(example("sync_buck.json")).unwrap();
    for (min, code) in [("40n", 0), ("60n", 1)] {
        let dir = scratch_dir(&format!("steady-timing-{min}"));
        std::fs::create_dir_all(&dir).unwrap();
        let file = dir.join("sync.json");
        std::fs::write(
            &file,
            text.replace("\"min\": \"40n\"", &format!("\"min\": \"{min}\"")),
        )
        .unwrap();
        let out = fluxstep(&[
            "steady",
            file.to_str().unwrap(),
            "--dir",
            dir.to_str().unwrap(),
        ]);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(code), "{min}: {stderr}");
        let summary: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap())
                .unwrap();
        let rule = &summary["timing"]["rules"][0];
        assert_eq!(rule["rule"], "bridge dead time");
        let value = rule["worst"]["value"].as_f64().unwrap();
        assert!((value - 50e-9).abs() < 1e-15, "{value}");
        if code == 1 {
            assert!(stderr.contains("bridge dead time"), "{stderr}");
        }
    }
}

/// The figure of `steady` takes the steady state's own period, so an
/// inductor current carries the one-period ripple bracket (docs/outputs.md)
/// with the same peak-to-peak value as summary.json's measurement (common
/// practice: in steady state every period has the same ripple).
#[test]
fn steady_figure_brackets_the_ripple_of_one_period() {
    let dir = scratch_dir("steady-buck-ripple");
    let out = fluxstep(&[
        "steady",
        &example("buck.json"),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    let ripple = summary["measurements"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["output"] == "L1.current")
        .and_then(|m| m["peak_to_peak"].as_f64())
        .expect("L1.current is measured");
    let label = format!("{} p-p", fluxstep_plot::format_si(ripple, "A"));
    let svg = std::fs::read_to_string(dir.join("figure.svg")).unwrap();
    assert!(svg.contains(&label), "no {label:?} in the figure");
}
