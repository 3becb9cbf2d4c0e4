//! `fluxstep-fuzz`: mutates the example circuits and runs each mutation
//! through check and a short run, counting executions, panics, crashes and
//! cases over the time limit.
//!
//! The parent process hands ranges of case numbers to a worker process
//! (this same binary with `--worker`) and reads one line per case back.
//! A panic is caught in the worker (`catch_unwind`) and reported; a case
//! that runs past `--case-seconds` gets its worker killed (a hard limit:
//! no thread can be stopped from outside, a process can); an abort (a
//! failed allocation, a stack overflow) ends the worker and is reported
//! for the case it was running. Each bad case is saved for reproduction
//! with `--replay FILE`.
//!
//! The exit status is 1 when a case panicked or crashed (and, with
//! `--fail-on-timeout`, when one ran past the time limit), else 0.
//!
//! Usage (docs in DEVELOPERS.md):
//!   fluxstep-fuzz [--seed N] [--seconds S | --cases N] [--case-seconds S]
//!                 [--fail-on-timeout] [--save DIR]
//!   fluxstep-fuzz --replay FILE

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, ExitCode, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use fluxstep_fuzz::{run_case, Limits, Mutator, Rng};

struct Config {
    seed: u64,
    seconds: Option<f64>,
    cases: Option<u64>,
    case_seconds: f64,
    save: PathBuf,
    worker: Option<(u64, u64)>,
    replay: Option<PathBuf>,
    fail_on_timeout: bool,
}

fn parse_args() -> Result<Config, String> {
    let mut c = Config {
        seed: 1,
        seconds: None,
        cases: None,
        case_seconds: 2.0,
        save: PathBuf::from("target/fuzz-cases"),
        worker: None,
        replay: None,
        fail_on_timeout: false,
    };
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        let mut value = |what: &str| args.next().ok_or(format!("{a} needs {what}"));
        match a.as_str() {
            "--seed" => {
                c.seed = value("a number")?
                    .parse()
                    .map_err(|e| format!("--seed: {e}"))?
            }
            "--seconds" => {
                c.seconds = Some(
                    value("seconds")?
                        .parse()
                        .map_err(|e| format!("--seconds: {e}"))?,
                )
            }
            "--cases" => {
                c.cases = Some(
                    value("a count")?
                        .parse()
                        .map_err(|e| format!("--cases: {e}"))?,
                )
            }
            "--case-seconds" => {
                c.case_seconds = value("seconds")?
                    .parse()
                    .map_err(|e| format!("--case-seconds: {e}"))?
            }
            "--fail-on-timeout" => c.fail_on_timeout = true,
            "--save" => c.save = PathBuf::from(value("a folder")?),
            "--replay" => c.replay = Some(PathBuf::from(value("a file")?)),
            "--worker" => {
                let from = value("a first case")?.parse().map_err(|e| format!("{e}"))?;
                let to = value("an end case")?.parse().map_err(|e| format!("{e}"))?;
                c.worker = Some((from, to));
            }
            "-h" | "--help" => {
                return Err("usage: fluxstep-fuzz [--seed N] [--seconds S | --cases N] \
                            [--case-seconds S] [--fail-on-timeout] [--save DIR] | --replay FILE"
                    .into())
            }
            other => return Err(format!("unknown argument {other:?} (try --help)")),
        }
    }
    if c.seconds.is_none() && c.cases.is_none() {
        c.seconds = Some(20.0);
    }
    Ok(c)
}

/// How often each example is drawn, per 1,000 draws of an ordinary one.
/// An example costs about its run: the multiplier's 2,000 events take
/// about a second (24 diodes, a pattern search at most events), the
/// twelve-phase buck about 0.1 s, the inverter about 20 ms, the others
/// 1–10 ms. Drawn as often as the rest, the multiplier took nine tenths of
/// the fuzzing time, so a long run would test the same few thousand
/// multiplier mutants instead of millions of the others. With these
/// weights each example gets a share of the time of the same order, and a
/// ten-million-case run still runs thousands of mutants of each heavy one.
const WEIGHTS: &[(&str, u64)] = &[
    ("multiplier_24.json", 5),
    ("interleaved_buck_12.json", 100),
    ("three_phase_inverter.json", 500),
];

/// Weight of an example without an entry in [`WEIGHTS`].
const ORDINARY_WEIGHT: u64 = 1000;

/// The example circuits the mutations start from, read once, with their
/// draw weights.
struct Corpus {
    texts: Vec<String>,
    weights: Vec<u64>,
}

impl Corpus {
    /// An example drawn by weight.
    fn draw(&self, rng: &mut Rng) -> &str {
        let total: u64 = self.weights.iter().sum();
        let mut r = rng.next_u64() % total;
        for (text, &w) in self.texts.iter().zip(&self.weights) {
            if r < w {
                return text;
            }
            r -= w;
        }
        unreachable!("r < total")
    }
}

fn corpus() -> Corpus {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("../../examples/circuits");
    let mut files: Vec<PathBuf> = std::fs::read_dir(&dir)
        .expect("the examples folder is readable")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "json"))
        .collect();
    files.sort();
    Corpus {
        texts: files
            .iter()
            .map(|p| std::fs::read_to_string(p).expect("an example is readable"))
            .collect(),
        weights: files
            .iter()
            .map(|p| {
                let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
                WEIGHTS
                    .iter()
                    .find(|(n, _)| *n == name)
                    .map_or(ORDINARY_WEIGHT, |&(_, w)| w)
            })
            .collect(),
    }
}

/// Case `n` of seed `seed`: its own generator, so any case can be made
/// again alone.
fn case_text(corpus: &Corpus, seed: u64, n: u64) -> String {
    let mut rng = Rng::new(seed ^ n.wrapping_mul(0x2545_f491_4f6c_dd1d));
    let base = corpus.draw(&mut rng);
    let mut m = Mutator::new(rng);
    let mut text = m.mutate(base);
    // Now and then mutate the mutant again: deeper damage.
    while m.rng().one_in(3) {
        text = m.mutate(&text);
    }
    text
}

fn limits(case_seconds: f64) -> Limits {
    Limits {
        deadline: Duration::from_secs_f64(case_seconds / 2.0),
        ..Limits::default()
    }
}

/// The worker: runs cases `from..to`, one line each on stdout.
fn worker(c: &Config, from: u64, to: u64) {
    std::panic::set_hook(Box::new(|_| {}));
    let corpus = corpus();
    let lim = limits(c.case_seconds);
    let stdout = std::io::stdout();
    let mut out = stdout.lock();
    for n in from..to {
        let _ = writeln!(out, "start {n}");
        let _ = out.flush();
        let text = case_text(&corpus, c.seed, n);
        let line = match std::panic::catch_unwind(|| run_case(&text, &lim)) {
            Ok(o) => format!(
                "done {n} {} {} {}",
                o.valid as u8, o.ran as u8, o.timed_out as u8
            ),
            Err(p) => {
                let msg = p
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default();
                format!("panic {n} {}", msg.replace('\n', " "))
            }
        };
        let _ = writeln!(out, "{line}");
        let _ = out.flush();
    }
}

#[derive(Default)]
struct Counts {
    executions: u64,
    valid: u64,
    ran: u64,
    panics: u64,
    crashes: u64,
    timeouts: u64,
}

/// Executions between two progress lines of a long run (on stderr, so
/// that a run stopped early still shows what it did).
const PROGRESS_EVERY: u64 = 100_000;

impl Counts {
    fn progress(&self, secs: f64) {
        eprintln!(
            "progress: {} executions in {:.0} s; {} panics, {} crashes, {} over the time limit",
            self.executions, secs, self.panics, self.crashes, self.timeouts
        );
    }
}

fn save(c: &Config, corpus: &Corpus, n: u64, what: &str) -> PathBuf {
    let _ = std::fs::create_dir_all(&c.save);
    let path = c.save.join(format!("{what}-seed{}-case{n}.json", c.seed));
    let _ = std::fs::write(&path, case_text(corpus, c.seed, n));
    path
}

fn spawn(from: u64, to: u64, c: &Config) -> (Child, mpsc::Receiver<String>) {
    let exe = std::env::current_exe().expect("the running binary has a path");
    let mut child = Command::new(exe)
        .args([
            "--worker",
            &from.to_string(),
            &to.to_string(),
            "--seed",
            &c.seed.to_string(),
            "--case-seconds",
            &c.case_seconds.to_string(),
        ])
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("the worker starts");
    let stdout = child.stdout.take().expect("piped");
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        for line in BufReader::new(stdout).lines() {
            let Ok(line) = line else { break };
            if tx.send(line).is_err() {
                break;
            }
        }
    });
    (child, rx)
}

fn parent(c: &Config) -> ExitCode {
    let corpus = corpus();
    let start = Instant::now();
    let budget = c.seconds.map(Duration::from_secs_f64);
    let total = c.cases.unwrap_or(u64::MAX);
    let case_limit = Duration::from_secs_f64(c.case_seconds);
    let mut counts = Counts::default();
    let mut next = 0u64;
    let mut next_progress = PROGRESS_EVERY;
    const BATCH: u64 = 100_000;
    'outer: while next < total && budget.is_none_or(|b| start.elapsed() < b) {
        let to = (next + BATCH).min(total);
        let (mut child, rx) = spawn(next, to, c);
        let mut running: Option<(u64, Instant)> = None;
        loop {
            if budget.is_some_and(|b| start.elapsed() >= b) && running.is_none() {
                let _ = child.kill();
                let _ = child.wait();
                break 'outer;
            }
            match rx.recv_timeout(Duration::from_millis(100)) {
                Ok(line) => {
                    let mut parts = line.splitn(3, ' ');
                    let tag = parts.next().unwrap_or("");
                    let n: u64 = parts.next().and_then(|x| x.parse().ok()).unwrap_or(0);
                    match tag {
                        "start" => running = Some((n, Instant::now())),
                        "done" => {
                            running = None;
                            counts.executions += 1;
                            let f: Vec<&str> = parts.next().unwrap_or("").split(' ').collect();
                            counts.valid += (f.first() == Some(&"1")) as u64;
                            counts.ran += (f.get(1) == Some(&"1")) as u64;
                            if f.get(2) == Some(&"1") {
                                counts.timeouts += 1;
                                let p = save(c, &corpus, n, "timeout");
                                eprintln!("case {n}: over the time limit, saved {}", p.display());
                            }
                            next = n + 1;
                        }
                        "panic" => {
                            running = None;
                            counts.executions += 1;
                            counts.panics += 1;
                            let p = save(c, &corpus, n, "panic");
                            eprintln!(
                                "case {n}: panic: {}; saved {}",
                                parts.next().unwrap_or(""),
                                p.display()
                            );
                            next = n + 1;
                        }
                        _ => {}
                    }
                    if counts.executions >= next_progress {
                        counts.progress(start.elapsed().as_secs_f64());
                        next_progress += PROGRESS_EVERY;
                    }
                    if next >= to {
                        let _ = child.wait();
                        break;
                    }
                }
                Err(mpsc::RecvTimeoutError::Timeout) => {
                    if let Some((n, t)) = running {
                        if t.elapsed() > case_limit {
                            let _ = child.kill();
                            let _ = child.wait();
                            counts.executions += 1;
                            counts.timeouts += 1;
                            let p = save(c, &corpus, n, "timeout");
                            eprintln!("case {n}: killed at the time limit, saved {}", p.display());
                            next = n + 1;
                            break;
                        }
                    }
                }
                Err(mpsc::RecvTimeoutError::Disconnected) => {
                    let _ = child.wait();
                    if let Some((n, _)) = running {
                        counts.executions += 1;
                        counts.crashes += 1;
                        let p = save(c, &corpus, n, "crash");
                        eprintln!("case {n}: the worker died, saved {}", p.display());
                        next = n + 1;
                    }
                    break;
                }
            }
        }
    }
    let secs = start.elapsed().as_secs_f64();
    println!(
        "seed {}: {} executions in {:.1} s ({:.0}/s); {} valid circuits, {} ran to their stop time; \
         {} panics, {} crashes, {} over the time limit",
        c.seed,
        counts.executions,
        secs,
        counts.executions as f64 / secs,
        counts.valid,
        counts.ran,
        counts.panics,
        counts.crashes,
        counts.timeouts
    );
    let timeouts = if c.fail_on_timeout {
        counts.timeouts
    } else {
        0
    };
    if counts.panics + counts.crashes + timeouts == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::FAILURE
    }
}

fn main() -> ExitCode {
    let c = match parse_args() {
        Ok(c) => c,
        Err(e) => {
            eprintln!("{e}");
            return ExitCode::from(2);
        }
    };
    if let Some((from, to)) = c.worker {
        worker(&c, from, to);
        return ExitCode::SUCCESS;
    }
    if let Some(path) = &c.replay {
        let text = match std::fs::read(path) {
            Ok(b) => String::from_utf8_lossy(&b).into_owned(),
            Err(e) => {
                eprintln!("cannot read {}: {e}", path.display());
                return ExitCode::from(2);
            }
        };
        let o = run_case(&text, &limits(c.case_seconds));
        println!("{o:?}");
        return ExitCode::SUCCESS;
    }
    parent(&c)
}
