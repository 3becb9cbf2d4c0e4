//! `fluxstep report` as a user runs it: the two files, and exit status 1
//! with the failure on top of the page when a design limit fails.

use crate::common::{example, fluxstep, scratch_dir};

#[test]
fn report_writes_the_page_and_its_summary() {
    let dir = scratch_dir("report-buck");
    let out = fluxstep(&[
        "report",
        &example("buck.json"),
        "--dir",
        dir.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{stderr}");
    let html = std::fs::read_to_string(dir.join("report.html")).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>"));
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("summary.json")).unwrap()).unwrap();
    // The certificate carries the input file's SHA-256 (64 hex digits).
    let hash = summary["certificate"]["sha256"].as_str().unwrap();
    assert_eq!(hash.len(), 64);
    assert!(html.contains(hash));
}

#[test]
fn a_failed_design_limit_exits_1_after_writing_the_page_with_it_on_top() {
    let text = std::fs::read_to_string(example("buck.json")).unwrap();
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    // The demo buck's output ripple is 18.1 mV: a 10 mV limit fails.
    v["run"]["limits"] = serde_json::json!({"max_output_ripple": "10m"});
    let dir = scratch_dir("report-limit");
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("buck_limited.json");
    std::fs::write(&file, v.to_string()).unwrap();
    let out_dir = dir.join("out");
    let out = fluxstep(&[
        "report",
        file.to_str().unwrap(),
        "--dir",
        out_dir.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("1 design limit(s) failed"), "{stderr}");
    assert!(stderr.contains("output ripple of out"), "{stderr}");
    let html = std::fs::read_to_string(out_dir.join("report.html")).unwrap();
    let banner = html.find("class=\"banner fail\"").expect("banner");
    assert!(banner < html.find("<section").unwrap());
    assert!(out_dir.join("summary.json").exists());

    // A limit that names no element is bad input (exit 2), naming the field.
    v["run"]["limits"] = serde_json::json!({"saturation_current": [{"element": "L7", "value": 3}]});
    std::fs::write(&file, v.to_string()).unwrap();
    let out = fluxstep(&[
        "report",
        file.to_str().unwrap(),
        "--dir",
        out_dir.to_str().unwrap(),
    ]);
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("run.limits.saturation_current[0].element"),
        "{stderr}"
    );
}
