//! `fluxstep sweep` and `fluxstep merge` as a user runs them: the same
//! bytes with 1 and 2 threads and from 4 shards run in 4 processes and
//! merged; bad input exits 2 with a clear message.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn fluxstep(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fluxstep"))
        .args(args)
        .output()
        .expect("the fluxstep binary runs")
}

fn scratch_dir(name: &str) -> PathBuf {
    let d = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("sweep-{name}"));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).expect("scratch folder");
    d
}

fn buck_json() -> String {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/circuits/buck.json")
        .to_string_lossy()
        .replace('\\', "/")
}

/// A small sweep of the demo buck: 3 inputs × 2 loads × 3 Monte Carlo samples.
fn sweep_text() -> String {
    format!(
        r#"{{
  "circuit": "{}",
  "simulation": {{"periods": 100, "window": {{"kind": "last_periods", "count": 5}}}},
  "parameters": [
    {{"path": "Vin.waveform.value", "values": {{"kind": "corners", "min": "20", "max": "28"}}}},
    {{"path": "Rload.resistance", "values": {{"kind": "list", "values": [6, 12]}}}}
  ],
  "monte_carlo": {{"samples": 3, "seed": 11, "tolerances": [
    {{"path": "L1.inductance", "distribution": {{"kind": "uniform", "low": -0.2, "high": 0.2}}}}
  ]}},
  "figures": [
    {{"kind": "window", "name": "vout", "of": "out", "measure": "average"}},
    {{"kind": "window", "name": "il_peak", "of": "L1.current", "measure": "max"}}
  ],
  "plots": [
    {{"kind": "lines", "figure": "vout", "x": "Vin.waveform.value", "lines": "Rload.resistance"}},
    {{"kind": "histogram", "figure": "il_peak", "bins": 5}}
  ]
}}"#,
        buck_json()
    )
}

fn write_sweep(dir: &Path, text: &str) -> String {
    let p = dir.join("s.sweep.json");
    std::fs::write(&p, text).expect("write the sweep file");
    p.to_string_lossy().into_owned()
}

fn ok(o: &Output) -> String {
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{stderr}");
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn read(p: PathBuf) -> Vec<u8> {
    std::fs::read(&p).unwrap_or_else(|e| panic!("{}: {e}", p.display()))
}

#[test]
fn threads_and_merged_shards_write_the_same_bytes() {
    let dir = scratch_dir("determinism");
    let file = write_sweep(&dir, &sweep_text());
    let whole = |threads: &str, out: &str| {
        let out = dir.join(out);
        let stdout = ok(&fluxstep(&[
            "sweep",
            &file,
            "--threads",
            threads,
            "--dir",
            out.to_str().unwrap(),
        ]));
        assert!(stdout.contains("18 points, 18 ok"), "{stdout}");
        assert!(stdout.contains("vout"), "{stdout}");
        out
    };
    let one = whole("1", "one");
    let two = whole("2", "two");
    // Four shards, each in its own process, then merged.
    let sharded = dir.join("sharded");
    let children: Vec<_> = (0..4)
        .map(|i| {
            Command::new(env!("CARGO_BIN_EXE_fluxstep"))
                .args(["sweep", &file, "--shard", &format!("{i}/4"), "--dir"])
                .arg(&sharded)
                .output()
        })
        .collect();
    for c in children {
        ok(&c.expect("shard runs"));
    }
    let mut shard_dirs: Vec<String> = (0..4)
        .map(|i| {
            sharded
                .join(format!("shard-{i}-of-4"))
                .to_string_lossy()
                .into_owned()
        })
        .collect();
    shard_dirs.reverse();
    let mut args = vec!["merge"];
    args.extend(shard_dirs.iter().map(String::as_str));
    ok(&fluxstep(&args));
    let plots = [
        "plot-1-vout-vs-Vin.waveform.value.svg",
        "plot-2-il_peak-histogram.svg",
    ];
    let lines = String::from_utf8(read(one.join(plots[0]))).unwrap();
    // One line per load, drawn through the three sample-0 points of each;
    // the slice holds L1.inductance at its first value.
    assert_eq!(lines.matches("<polyline").count(), 2, "{lines}");
    assert!(lines.contains("Rload.resistance = 6 Ω"), "{lines}");
    for name in ["table.csv", "summary.json", plots[0], plots[1]] {
        let a = read(one.join(name));
        assert_eq!(a, read(two.join(name)), "{name}: 1 vs 2 threads");
        assert_eq!(
            a,
            read(sharded.join(name)),
            "{name}: single run vs merged shards"
        );
    }
    // A merge with a shard missing is refused.
    let o = fluxstep(&[
        "merge",
        &shard_dirs[0],
        &shard_dirs[1],
        "--dir",
        dir.join("x").to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("is missing"));
}

#[test]
fn bad_input_exits_2_with_a_clear_message() {
    let dir = scratch_dir("bad");
    let text = sweep_text();
    let cases: &[(&str, &str, &str)] = &[
        (
            "Vin.waveform.value",
            "Vin.value",
            "valid paths: Vin.waveform.value, L1.inductance, C1.capacitance, Rload.resistance, drive.delay, drive.duty, drive.frequency",
        ),
        ("[6, 12]", "[]", "parameters[1].values: the list is empty"),
        ("\"samples\": 3", "\"samples\": -3", "monte_carlo.samples: must be at least 1, got -3"),
        (
            r#""kind": "uniform", "low": -0.2, "high": 0.2"#,
            r#""kind": "normal", "sigma": -0.1"#,
            "sigma must not be negative, got -0.1",
        ),
    ];
    for (from, to, expect) in cases {
        let bad = text.replace(from, to);
        assert_ne!(bad, text, "{from}");
        let file = write_sweep(&dir, &bad);
        let o = fluxstep(&["sweep", &file, "--dir", dir.join("o").to_str().unwrap()]);
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{to}: {stderr}");
        assert!(stderr.contains(expect), "{to}: {stderr}");
        assert!(!stderr.contains("panicked"), "{stderr}");
    }
    let file = write_sweep(&dir, &text);
    for shard in ["4/4", "0/0", "1-4"] {
        let o = fluxstep(&["sweep", &file, "--shard", shard]);
        let stderr = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{shard}: {stderr}");
        assert!(stderr.contains("shard"), "{stderr}");
    }
}
