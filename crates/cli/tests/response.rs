//! `fluxstep response` as a user runs it: files, summary, exit codes.

use crate::common::{example, fluxstep, scratch_dir};

#[test]
fn loop_gain_writes_margins_and_a_bode_figure() {
    let dir = scratch_dir("response-loop");
    let out = fluxstep(&[
        "response",
        &example("voltage_mode_buck.json"),
        "--loop",
        "vm",
        "--from",
        "100",
        "--to",
        "150k",
        "--points",
        "60",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{stdout}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(
        stdout.contains("crossover") && stdout.contains("kHz"),
        "{stdout}"
    );
    assert!(
        stdout.contains("phase margin") && stdout.contains("gain margin"),
        "{stdout}"
    );
    assert!(stdout.contains("beyond the Nyquist frequency"), "{stdout}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("response.json")).unwrap()).unwrap();
    let fc = json["margins"]["crossover_hz"].as_f64().unwrap();
    assert!(fc > 15e3 && fc < 25e3, "{fc}");
    assert_eq!(json["points"].as_array().unwrap().len(), 60);
    let csv = std::fs::read_to_string(dir.join("response.csv")).unwrap();
    assert!(csv.starts_with("frequency_hz,magnitude_db,phase_deg,re,im,beyond_nyquist\n"));
    assert_eq!(csv.lines().count(), 61);
    let svg = std::fs::read_to_string(dir.join("bode.svg")).unwrap();
    assert!(
        svg.contains("crossover") && svg.contains("fs/2"),
        "marks on the figure"
    );
}

#[test]
fn transfer_function_and_bad_input() {
    let dir = scratch_dir("response-buck");
    let out = fluxstep(&[
        "response",
        &example("buck.json"),
        "--input",
        "drive.duty",
        "--output",
        "out",
        "--points",
        "20",
        "--dir",
        dir.to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert_eq!(out.status.code(), Some(0), "{stdout}");
    assert!(stdout.contains("peak at"), "{stdout}");
    for (args, needle) in [
        (
            vec!["--input", "Vnone", "--output", "out"],
            "the inputs are",
        ),
        (
            vec!["--input", "Vin", "--output", "nowhere"],
            "unknown output",
        ),
        (
            vec!["--input", "Vin", "--output", "out", "--from", "0"],
            "positive",
        ),
        (
            vec!["--input", "Vin", "--output", "out", "--points", "0"],
            "at least one",
        ),
        (vec!["--input", "Vin"], "--input and --output"),
    ] {
        let mut all = vec!["response", &*example("buck.json").leak()];
        all.extend(args.iter().copied());
        all.extend(["--dir", dir.to_str().unwrap()]);
        let out = fluxstep(&all);
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(needle), "{args:?}: {stderr}");
    }
}
