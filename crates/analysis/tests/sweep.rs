//! Sweeps: bitwise determinism over thread counts and shards, the buck's
//! conversion ratio across the CCM/DCM boundary, Monte Carlo statistics,
//! and bad input.

use fluxstep_analysis::sweep::{RunOptions, Shard, Status, Summary, Sweep, SweepError, SweepSpec};
use fluxstep_netlist::{Circuit, DiodeModel};

/// A test buck of our own: 12 V in, 100 kHz, 25 µH, 100 µF, 10 Ω, so
/// K = 2L/(R·T) = 0.5 and the CCM/DCM boundary K = 1 − D is at D = 0.5.
/// The switch has a body diode: started from rest, the lightly damped LC
/// overshoots above the input at high duty, the inductor current turns
/// negative through the closed switch, and without that diode the switch's
/// turn-off would interrupt it (the solver stops there, rightly).
fn buck() -> Circuit {
    Circuit::builder()
        .voltage_source("Vin", "in", "gnd", 12.0)
        .transistor("S1", "in", "sw", "drive", 0.0, DiodeModel::default())
        .diode("D1", "gnd", "sw")
        .inductor("L1", "sw", "out", 25e-6)
        .capacitor("C1", "out", "gnd", 100e-6)
        .resistor("Rload", "out", "gnd", 10.0)
        .pwm("drive", 100e3, 0.5)
        .build()
        .expect("test circuit is valid")
}

fn sweep(json: &str) -> Result<Sweep, SweepError> {
    Sweep::new(SweepSpec::from_json(json)?, &buck())
}

/// A grid of duty and load with Monte Carlo on L and C: 3 × 2 × 4 = 24 points.
const MIXED: &str = r#"{
    "circuit": "buck",
    "simulation": {"periods": 300, "window": {"kind": "last_periods", "count": 5}},
    "parameters": [
        {"path": "drive.duty", "values": {"kind": "linear", "from": 0.3, "to": 0.7, "count": 3}},
        {"path": "Rload.resistance", "values": {"kind": "list", "values": ["5", "40"]}}
    ],
    "monte_carlo": {"samples": 4, "seed": 2024, "tolerances": [
        {"path": "L1.inductance", "distribution": {"kind": "uniform", "low": -0.2, "high": 0.2}},
        {"path": "C1.capacitance", "distribution": {"kind": "normal", "sigma": 0.1, "limits": [-0.2, 0.8]}}
    ]},
    "figures": [
        {"kind": "window", "name": "vout", "of": "out", "measure": "average", "worst": "min"},
        {"kind": "window", "name": "il_peak", "of": "L1.current", "measure": "max"},
        {"kind": "window", "name": "ripple", "of": "out", "measure": "peak_to_peak"},
        {"kind": "window", "name": "p_load", "of": "Rload", "measure": "power"}
    ]
}"#;

/// Contract: the table and summary are the same bytes with 1 and 2
/// threads, and as 4 shards merged.
#[test]
fn same_bits_for_any_thread_count_and_for_merged_shards() {
    let s = sweep(MIXED).unwrap();
    assert_eq!(s.points(), 24);
    let run = |threads, shard| {
        s.run(&RunOptions {
            threads: Some(threads),
            shard,
            progress: None,
        })
        .unwrap()
    };
    let one = run(1, None);
    let two = run(2, None);
    assert_eq!(one.failures(), 0, "{}", one.to_csv());
    assert_eq!(one.to_csv(), two.to_csv());
    assert_eq!(Summary::of(&one).to_json(), Summary::of(&two).to_json());

    let dir = std::env::temp_dir().join(format!("fluxstep-sweep-shards-{}", std::process::id()));
    let mut shards = vec![];
    for i in 0..4 {
        let shard = Shard { index: i, count: 4 };
        let t = run(1 + (i as usize % 2), Some(shard));
        assert_eq!(t.rows.len(), 6);
        let d = dir.join(format!("shard-{i}"));
        t.write_shard(&d, shard).unwrap();
        // Read back from disk, as `fluxstep merge` does.
        shards.push(fluxstep_analysis::sweep::Table::read_shard(&d).unwrap());
    }
    shards.reverse(); // the order shards are given in does not matter
    let merged = fluxstep_analysis::sweep::Table::merge(shards).unwrap();
    assert_eq!(merged.to_csv(), one.to_csv());
    assert_eq!(Summary::of(&merged).to_json(), Summary::of(&one).to_json());
    let _ = std::fs::remove_dir_all(&dir);
}

/// Merging refuses a missing shard.
#[test]
fn merge_refuses_a_missing_shard() {
    let s = sweep(MIXED).unwrap();
    let parts: Vec<_> = (0..3)
        .map(|i| {
            let shard = Shard { index: i, count: 4 };
            let t = s
                .run(&RunOptions {
                    shard: Some(shard),
                    ..RunOptions::default()
                })
                .unwrap();
            (t, shard)
        })
        .collect();
    let err = fluxstep_analysis::sweep::Table::merge(parts).unwrap_err();
    assert!(err.to_string().contains("shard 3/4 is missing"), "{err}");
}

/// The buck's average output over a duty sweep: D·Vin in continuous
/// conduction, M = 2/(1 + √(1 + 4K/D²)) in discontinuous conduction with
/// K = 2L/(R·T), and the boundary at K = 1 − D (Erickson & Maksimović,
/// Fundamentals of Power Electronics, 2nd ed. 2001, ch. 5, eqs. 5.11 and
/// 5.39–5.40). The inductor current's minimum over the window is zero in
/// DCM and positive in CCM, so the mode change shows in that figure at the
/// boundary (common practice).
#[test]
fn buck_duty_sweep_follows_ccm_and_dcm_ratios() {
    let s = sweep(
        r#"{
        "circuit": "buck",
        "simulation": {"periods": 3000, "window": {"kind": "last_periods", "count": 10}},
        "parameters": [
            {"path": "drive.duty", "values": {"kind": "linear", "from": 0.1, "to": 0.9, "count": 17}}
        ],
        "figures": [
            {"kind": "window", "name": "vout", "of": "out", "measure": "average"},
            {"kind": "window", "name": "il_min", "of": "L1.current", "measure": "min"}
        ]
    }"#,
    )
    .unwrap();
    let t = s.run(&RunOptions::default()).unwrap();
    assert_eq!(t.failures(), 0);
    let duty = t.column("drive.duty").unwrap();
    let vout = t.figure("vout").unwrap();
    let il_min = t.figure("il_min").unwrap();
    let (vin, k) = (12.0, 0.5);
    let mut modes = vec![];
    for ((d, v), i) in duty.iter().zip(&vout).zip(&il_min) {
        let (v, i) = (v.unwrap(), i.unwrap());
        // At the boundary itself both ratios are D.
        let dcm = k <= 1.0 - d;
        let m = if dcm {
            2.0 / (1.0 + (1.0 + 4.0 * k / (d * d)).sqrt())
        } else {
            *d
        };
        // CCM: exact for ideal parts once the start-up has died out (the
        // LC ring decays with 2RC = 2 ms; 30 ms leave e^-15 ≈ 3e-7; seen:
        // 1.1e-8). DCM: the formula neglects the output ripple
        // (small-ripple approximation); seen: up to 3.3e-4.
        let tol = if dcm { 1e-3 } else { 1e-6 };
        assert!(
            (v / vin - m).abs() <= tol * m,
            "D = {d}: M = {} vs {m} ({})",
            v / vin,
            if dcm { "DCM" } else { "CCM" }
        );
        if (d - 0.5).abs() > 0.01 {
            assert_eq!(i.abs() < 1e-9, dcm, "D = {d}: minimum current {i}");
        }
        modes.push(i.abs() < 1e-9);
    }
    // The change of mode happens once, at the boundary D = 1 − K = 0.5.
    let first_ccm = modes.iter().position(|dcm| !dcm).unwrap();
    assert!((duty[first_ccm] - 0.5).abs() < 0.051, "{}", duty[first_ccm]);
    assert!(modes[first_ccm..].iter().all(|dcm| !dcm));
}

/// Monte Carlo draws reproduce their distributions: for n draws the sample
/// mean has standard error σ/√n and the sample standard deviation about
/// σ/√(2n) for a normal (σ·√((κ−1)/(4n)) in general, κ the kurtosis: 1.8 for
/// a uniform); the checks allow 4.5 standard errors, a false failure
/// chance below 1e-5 each (common practice). Truncated normal at ±2σ:
/// mean 0, standard deviation σ·√(1 − 2·2φ(2)/(2Φ(2) − 1)) = 0.87962·σ
/// (N. L. Johnson, S. Kotz & N. Balakrishnan, Continuous Univariate
/// Distributions vol. 1, 1994, ch. 13, from memory).
#[test]
fn monte_carlo_samples_follow_the_requested_distributions() {
    let n = 20_000u64;
    let s = sweep(&format!(
        r#"{{
        "circuit": "buck",
        "simulation": {{"periods": 20, "window": {{"kind": "last_periods", "count": 5}}}},
        "monte_carlo": {{"samples": {n}, "seed": 7, "tolerances": [
            {{"path": "L1.inductance", "distribution": {{"kind": "uniform", "low": -0.2, "high": 0.2}}}},
            {{"path": "C1.capacitance", "distribution": {{"kind": "normal", "sigma": 0.1, "limits": [-0.2, 0.2]}}}},
            {{"path": "drive.duty", "distribution": {{"kind": "normal", "sigma": 0.01}}, "absolute": true}}
        ]}},
        "figures": [{{"kind": "window", "name": "vout", "of": "out", "measure": "average"}}]
    }}"#
    ))
    .unwrap();
    let cols: Vec<Vec<f64>> = (0..n).map(|p| s.point_values(p)).collect();
    let stats = |j: usize, scale: f64, offset: f64| {
        let x: Vec<f64> = cols.iter().map(|c| (c[j] - offset) / scale).collect();
        let m = x.iter().sum::<f64>() / n as f64;
        let sd = (x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt();
        let (lo, hi) = x
            .iter()
            .fold((f64::MAX, f64::MIN), |(a, b), &v| (a.min(v), b.max(v)));
        (m, sd, lo, hi)
    };
    let nf = n as f64;
    let check = |what: &str, got: f64, want: f64, se: f64| {
        assert!(
            (got - want).abs() <= 4.5 * se,
            "{what}: {got} vs {want} (se {se})"
        );
    };
    // L: uniform on [−0.2, 0.2] relative: σ = 0.4/√12.
    let (m, sd, lo, hi) = stats(0, 25e-6, 25e-6);
    let sigma = 0.4 / 12f64.sqrt();
    check("uniform mean", m, 0.0, sigma / nf.sqrt());
    check("uniform std", sd, sigma, sigma * (0.8 / (4.0 * nf)).sqrt());
    assert!(lo >= -0.2 && hi <= 0.2 && lo < -0.199 && hi > 0.199);
    // C: normal σ = 0.1 truncated at ±0.2 (±2σ); kurtosis of this
    // truncated normal is below 3, so the normal's σ/√(2n) is an upper bound.
    let (m, sd, lo, hi) = stats(1, 100e-6, 100e-6);
    let sigma = 0.1 * 0.879_62;
    check("truncated mean", m, 0.0, sigma / nf.sqrt());
    check("truncated std", sd, sigma, sigma / (2.0 * nf).sqrt());
    assert!(lo >= -0.2 - 1e-12 && hi <= 0.2 + 1e-12);
    // Duty: absolute normal, σ = 0.01 around 0.5.
    let (m, sd, _, _) = stats(2, 1.0, 0.5);
    check("normal mean", m, 0.0, 0.01 / nf.sqrt());
    check("normal std", sd, 0.01, 0.01 / (2.0 * nf).sqrt());

    // The table shows exactly these values.
    let small = sweep(&MIXED.replace("\"samples\": 4", "\"samples\": 3")).unwrap();
    let t = small.run(&RunOptions::default()).unwrap();
    for (p, r) in t.rows.iter().enumerate() {
        assert_eq!(r.values, small.point_values(p as u64));
        assert_eq!(r.sample, Some(p as u64 % 3));
    }
}

/// The seed reproduces the samples; another seed gives others.
#[test]
fn the_seed_reproduces_the_samples() {
    let a = sweep(MIXED).unwrap();
    let b = sweep(MIXED).unwrap();
    let c = sweep(&MIXED.replace("2024", "2025")).unwrap();
    let vals = |s: &Sweep| {
        (0..s.points())
            .map(|p| s.point_values(p))
            .collect::<Vec<_>>()
    };
    assert_eq!(vals(&a), vals(&b));
    assert_ne!(vals(&a), vals(&c));
    // Common random numbers: sample k draws the same deviations at every
    // grid point (points 0 and 4 are sample 0 of two load values).
    assert_eq!(vals(&a)[0][2], vals(&a)[4][2]);
}

/// A corner that fails validation fails its row with the circuit's own
/// message; the other points run.
#[test]
fn a_corner_that_fails_validation_fails_only_its_row() {
    let s = sweep(
        r#"{
        "circuit": "buck",
        "simulation": {"periods": 50, "window": {"kind": "last_periods", "count": 5}},
        "parameters": [{"path": "Rload.resistance", "values": {"kind": "list", "values": [10, -1, 5]}}],
        "figures": [{"kind": "window", "name": "vout", "of": "out", "measure": "average"}]
    }"#,
    )
    .unwrap();
    let t = s.run(&RunOptions::default()).unwrap();
    let status: Vec<Status> = t.rows.iter().map(|r| r.status).collect();
    assert_eq!(status, [Status::Ok, Status::Invalid, Status::Ok]);
    assert!(
        t.rows[1]
            .message
            .contains("Rload.resistance: must be positive, got -1"),
        "{}",
        t.rows[1].message
    );
    assert_eq!(t.rows[1].figures, [None]);
    assert!(t.to_csv().contains(",invalid,"));
    let summary = Summary::of(&t);
    assert_eq!((summary.ok, summary.invalid), (2, 1));
}

/// Bad sweep files are refused as a whole with errors that name the field.
#[test]
fn bad_input_is_refused_with_a_clear_error() {
    let with = |from: &str, to: &str| {
        let text = MIXED.replace(from, to);
        assert_ne!(text, MIXED, "{from}");
        sweep(&text).unwrap_err().to_string()
    };
    let e = with("L1.inductance", "L1.inductence");
    assert!(
        e.contains("unknown parameter path \"L1.inductence\""),
        "{e}"
    );
    assert!(
        e.contains(
            "valid paths: Vin.waveform.value, L1.inductance, C1.capacitance, \
             Rload.resistance, drive.delay, drive.duty, drive.frequency"
        ),
        "{e}"
    );
    let e = with("\"count\": 3", "\"count\": 0");
    assert!(
        e.contains("parameters[0].values: count must be at least 1, got 0"),
        "{e}"
    );
    let e = with("\"samples\": 4", "\"samples\": -5");
    assert!(
        e.contains("monte_carlo.samples: must be at least 1, got -5"),
        "{e}"
    );
    let e = with("\"sigma\": 0.1", "\"sigma\": -0.1");
    assert!(
        e.contains("monte_carlo.tolerances[1].distribution: sigma must not be negative"),
        "{e}"
    );
    let e = with("\"values\": [\"5\", \"40\"]", "\"values\": []");
    assert!(e.contains("parameters[1].values: the list is empty"), "{e}");
    let e = with(
        "\"of\": \"out\", \"measure\": \"average\"",
        "\"of\": \"vout\", \"measure\": \"average\"",
    );
    assert!(
        e.contains("figures[0].of: \"vout\" is not an output"),
        "{e}"
    );
    let e = with(
        r#"{"kind": "window", "name": "ripple""#,
        r#"{"kind": "loop", "name": "pm", "at": "nowhere", "margin": "phase_margin_deg"}, {"kind": "window", "name": "r2""#,
    );
    assert!(e.contains("figures[2].at"), "{e}");
    assert!(e.contains("loop break point nowhere"), "{e}");
    let e = with(r#""kind": "uniform""#, r#""kind": "uniformly""#);
    assert!(e.contains("monte_carlo.tolerances[0].distribution"), "{e}");

    let s = sweep(MIXED).unwrap();
    for shard in ["4/4", "0/0", "x/2"] {
        let e = Shard::parse(shard).unwrap_err().to_string();
        assert!(e.contains("shard") || e.contains("--shard"), "{e}");
    }
    let e = s
        .run(&RunOptions {
            shard: Some(Shard { index: 5, count: 4 }),
            ..RunOptions::default()
        })
        .unwrap_err();
    assert!(e.to_string().contains("shard 5/4 is out of range"), "{e}");
}

/// The committed JSON Schema (docs/sweep.schema.json) matches the one
/// generated from the types. Regenerate it with
/// `UPDATE_SCHEMA=1 cargo test -p fluxstep-analysis`.
/// Steady-state figures: the output average of the periodic steady state
/// over a duty sweep in continuous conduction equals D·Vin less the
/// small-ripple error (the same K = 0.5 buck, D ≥ 0.5 in CCM; Erickson &
/// Maksimović, *Fundamentals of Power Electronics*, ch. 2), with no settling
/// transient to wait for.
#[test]
fn steady_figures_follow_the_conversion_ratio() {
    let json = r#"{
        "circuit": "buck",
        "simulation": {"periods": 10},
        "parameters": [
            {"path": "drive.duty", "values": {"kind": "list", "values": [0.6, 0.75, 0.9]}}
        ],
        "figures": [
            {"kind": "steady", "name": "vout", "of": "out", "measure": "average", "worst": "min"},
            {"kind": "steady", "name": "ripple", "of": "out", "measure": "peak_to_peak"}
        ]
    }"#;
    let t = sweep(json)
        .unwrap()
        .run(&RunOptions {
            threads: Some(1),
            shard: None,
            progress: None,
        })
        .unwrap();
    assert_eq!(t.failures(), 0, "{}", t.to_csv());
    for row in &t.rows {
        let d = row.values[0];
        let (v, ripple) = (row.figures[0].unwrap(), row.figures[1].unwrap());
        assert!(
            (v - 12.0 * d).abs() <= ripple + 1e-9,
            "D = {d}: {v} V, ripple {ripple} V"
        );
    }
}

/// Loop figures: a sweep of the closed voltage loop's load gives, per
/// point, exactly the crossover and phase margin `loop_gain` reports for
/// that circuit (the same computation, so the same bits).
#[test]
fn loop_figures_are_the_loop_gain_margins() {
    use fluxstep_analysis::response::{log_frequencies, loop_gain, BreakPoint};
    use fluxstep_analysis::steady::SteadyOptions;
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("../../examples/circuits/voltage_mode_buck.json");
    let base = Circuit::from_file(&path).unwrap();
    let json = r#"{
        "circuit": "voltage_mode_buck",
        "simulation": {"periods": 10},
        "parameters": [{"path": "Rload.resistance", "values": {"kind": "list", "values": ["2.2", "4.4"]}}],
        "figures": [
            {"kind": "loop", "name": "fc", "at": "vm", "margin": "crossover_hz", "from": "1k", "points": 40},
            {"kind": "loop", "name": "pm", "at": "vm", "margin": "phase_margin_deg", "from": "1k", "points": 40}
        ]
    }"#;
    let t = Sweep::new(SweepSpec::from_json(json).unwrap(), &base)
        .unwrap()
        .run(&RunOptions {
            threads: Some(1),
            shard: None,
            progress: None,
        })
        .unwrap();
    assert_eq!(t.failures(), 0, "{}", t.to_csv());
    for row in &t.rows {
        let mut c = base.clone();
        for e in &mut c.elements {
            if let fluxstep_netlist::Element::Resistor(r) = e {
                if r.name == "Rload" {
                    r.resistance = row.values[0];
                }
            }
        }
        let fs = 1.0
            / fluxstep_analysis::steady::find(&c, &SteadyOptions::default())
                .unwrap()
                .period;
        let freqs = log_frequencies(1e3, 0.5 * fs, 40).unwrap();
        let lg = loop_gain(
            &c,
            &BreakPoint::named(&c, "vm").unwrap(),
            &freqs,
            &SteadyOptions::default(),
        )
        .unwrap();
        assert_eq!(row.figures[0], lg.margins.crossover_hz);
        assert_eq!(row.figures[1], lg.margins.phase_margin_deg);
    }
}

#[test]
fn committed_sweep_schema_is_up_to_date() {
    let fresh = fluxstep_analysis::sweep::json_schema();
    let path =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../../docs/sweep.schema.json");
    if std::env::var_os("UPDATE_SCHEMA").is_some_and(|v| v == "1") {
        std::fs::write(&path, &fresh).expect("write docs/sweep.schema.json");
        return;
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_default();
    assert!(
        committed.replace("\r\n", "\n") == fresh,
        "docs/sweep.schema.json is missing or stale; regenerate it with\n\
         \n    UPDATE_SCHEMA=1 cargo test -p fluxstep-analysis\n\nand commit the result"
    );
    for kind in [
        "window",
        "steady",
        "loop",
        "linear",
        "log",
        "corners",
        "tolerance",
        "uniform",
        "normal",
    ] {
        assert!(
            fresh.contains(&format!("\"{kind}\"")),
            "schema lacks {kind}"
        );
    }
}
