//! A seeded fuzzer: the `.ward` files of the test corpus and of `examples/`,
//! mutated (bytes changed, tokens dropped or doubled, brackets inserted,
//! lines spliced in from other files), each run through the library as the
//! command line runs it, with small e-graph limits. Every outcome must be a
//! report (exit code 0 or 1) or an input error (exit code 2), never a
//! panic. The sequence of inputs depends only on the seed.
//!
//! In `cargo test` it runs 2,000 inputs from the quick files of the corpus
//! (see [`corpus`]). At scale, with every file:
//!
//!     WARDSMITH_FUZZ_COUNT=100000 WARDSMITH_FUZZ_ISOLATE=500 WARDSMITH_FUZZ_ALL=1 \
//!         cargo test --release --test fuzz -- --nocapture
//!
//! `WARDSMITH_FUZZ_ISOLATE=N` runs the inputs in child processes of N
//! inputs each, so that an abort (which `catch_unwind` cannot catch) is
//! found and pinned to its input, and reports the worst time and memory of
//! one input. `WARDSMITH_FUZZ_SEED` changes the sequence and
//! `WARDSMITH_FUZZ_SKIP` starts it further on; `WARDSMITH_FUZZ_SAVE=DIR`
//! saves each input as `DIR/input-N.ward`. Times are printed, never
//! asserted.

mod support;

use std::collections::BTreeMap;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use support::SplitMix64;
use wardsmith::egraph::Limits;
use wardsmith::run::{run_path, Mode, Options};

const DEFAULT_COUNT: usize = 2_000;
const DEFAULT_SEED: u64 = 0x5eed_2026;

#[test]
fn mutated_inputs_end_in_a_report_or_an_input_error() {
    let config = Config::from_env();
    if let Some(batch) = config.isolate {
        return isolated(&config, batch);
    }
    let corpus = corpus(config.all);
    let scratch = Scratch::new();
    let mut summary = Summary::default();
    let mut panics = Vec::new();
    for index in config.skip..config.skip + config.count {
        let input = mutate(&corpus, config.seed, index);
        if let Some(dir) = &config.save {
            std::fs::write(dir.join(format!("input-{index}.ward")), &input).expect("save");
        }
        let (outcome, took) = run_one(&scratch.0, &input);
        if outcome == "panic" {
            panics.push(index);
        }
        summary.add(&outcome, took, index);
    }
    summary.peak_kib = peak_rss_kib();
    // One line the parent process of an isolated run reads back.
    println!("fuzz-summary {}", summary.encode());
    println!("{}", summary.describe(config.count));
    assert!(panics.is_empty(), "panics at inputs {panics:?}");
}

// ─────────────────────────── the corpus ───────────────────────────

/// The `.ward` files under `tests/cases` and `examples`, sorted by path.
/// Without `all`, two kinds are left out, each taking up to seconds a
/// run, too long to repeat in every test run: files with a `model`
/// (numeric work) and the error cases whose committed diagnostic is a
/// budget met (`error[limit]`, which use up the whole budget by design).
fn corpus(all: bool) -> Vec<Vec<u8>> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut paths = Vec::new();
    let mut pending = vec![root.join("tests/cases"), root.join("examples")];
    while let Some(dir) = pending.pop() {
        for entry in std::fs::read_dir(&dir).expect("corpus folder").flatten() {
            let path = entry.path();
            if path.is_dir() {
                pending.push(path);
            } else if path.extension().is_some_and(|x| x == "ward") {
                paths.push(path);
            }
        }
    }
    paths.sort();
    assert!(paths.len() > 100, "the corpus is found");
    let snapshots = root.join("tests/snapshots");
    let probes_a_limit = |path: &Path| {
        let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
        let snapshot = snapshots.join(format!("cases__errors@{}.snap", name.unwrap_or_default()));
        std::fs::read_to_string(snapshot).is_ok_and(|s| s.contains("error[limit]"))
    };
    paths
        .iter()
        .filter(|p| all || !probes_a_limit(p))
        .map(|p| std::fs::read(p).expect("corpus file"))
        .filter(|text| {
            all || !String::from_utf8_lossy(text)
                .lines()
                .any(|l| l.trim_start().starts_with("model "))
        })
        .collect()
}

// ─────────────────────────── mutations ────────────────────────────

/// Characters worth inserting: brackets, operators, the language's own
/// symbols, a byte-order mark, controls, and bytes that are not UTF-8.
const INTERESTING: &[&[u8]] = &[
    b"(",
    b")",
    b"[",
    b"]",
    b"{",
    b"}",
    b"<",
    b">",
    b"|",
    b",",
    b"^",
    b"*",
    b"/",
    b"+",
    b"-",
    b"=",
    b"?",
    b".",
    b"'",
    b"\"",
    b"#",
    b"\n",
    b" ",
    b"0",
    b"1",
    b"9",
    b"x",
    b"n",
    b"d",
    b"mu",
    b"...?rest",
    "∂".as_bytes(),
    "δ".as_bytes(),
    "⟨".as_bytes(),
    "⟩".as_bytes(),
    "∫".as_bytes(),
    "∮".as_bytes(),
    "∥".as_bytes(),
    "\u{feff}".as_bytes(),
    b"\x1b[2J",
    b"\x00",
    b"\xff",
    b"\xc3",
    b"let",
    b"claim",
    b"simplify",
    b"expect",
    b"end",
    b"by",
    b"into",
];

/// What a run of nesting repeats.
const RUNS: &[&[u8]] = &[b"(", b"{", b"F(", b"- ", b"a^", "∂[n](x) ".as_bytes()];

/// Input number `index` of the sequence for `seed`: a corpus file with one
/// to four mutations.
fn mutate(corpus: &[Vec<u8>], seed: u64, index: usize) -> Vec<u8> {
    let mut rng = SplitMix64::new(seed ^ (index as u64).wrapping_mul(0x9e37_79b9_7f4a_7c15));
    let pick = |rng: &mut SplitMix64, n: usize| (rng.next_u64() % n.max(1) as u64) as usize;
    let mut text = corpus[pick(&mut rng, corpus.len())].clone();
    for _ in 0..1 + pick(&mut rng, 4) {
        let at = pick(&mut rng, text.len() + 1);
        match pick(&mut rng, 9) {
            // A byte changed to any byte.
            0 if !text.is_empty() => {
                let at = at.min(text.len() - 1);
                text[at] = rng.next_u64() as u8;
            }
            // A byte changed to an interesting token.
            1 if !text.is_empty() => {
                let at = at.min(text.len() - 1);
                let with = INTERESTING[pick(&mut rng, INTERESTING.len())];
                text.splice(at..at + 1, with.iter().copied());
            }
            // A token inserted.
            2 => {
                let with = INTERESTING[pick(&mut rng, INTERESTING.len())];
                text.splice(at..at, with.iter().copied());
            }
            // A token deleted or doubled.
            3 | 4 => {
                let (start, end) = token_at(&text, at);
                if pick(&mut rng, 2) == 0 {
                    text.drain(start..end);
                } else {
                    let copy = text[start..end].to_vec();
                    text.splice(end..end, copy);
                }
            }
            // A run of brackets or of calls, past or near the depth limit.
            5 => {
                let opens = RUNS[pick(&mut rng, RUNS.len())];
                let n = [3, 50, 999, 1_001, 2_500][pick(&mut rng, 5)];
                let run: Vec<u8> = opens.repeat(n);
                text.splice(at..at, run);
            }
            // Lines spliced in from another file of the corpus.
            6 | 7 => {
                let other = &corpus[pick(&mut rng, corpus.len())];
                let lines: Vec<&[u8]> = other.split(|b| *b == b'\n').collect();
                let from = pick(&mut rng, lines.len());
                let to = (from + 1 + pick(&mut rng, 6)).min(lines.len());
                let mut piece = lines[from..to].join(&b'\n');
                piece.push(b'\n');
                let at = line_start(&text, at);
                text.splice(at..at, piece);
            }
            // A line dropped.
            _ => {
                let start = line_start(&text, at);
                let end = text[start..]
                    .iter()
                    .position(|b| *b == b'\n')
                    .map_or(text.len(), |i| start + i + 1);
                text.drain(start..end);
            }
        }
    }
    text
}

/// The token around byte `at`: a run of letters, digits and `_`, a run of
/// white space, or one character.
fn token_at(text: &[u8], at: usize) -> (usize, usize) {
    if text.is_empty() {
        return (0, 0);
    }
    let at = at.min(text.len() - 1);
    let class = |b: u8| {
        if b.is_ascii_alphanumeric() || b == b'_' || b >= 0x80 {
            0
        } else if b.is_ascii_whitespace() {
            1
        } else {
            2
        }
    };
    let c = class(text[at]);
    if c == 2 {
        return (at, at + 1);
    }
    let mut start = at;
    while start > 0 && class(text[start - 1]) == c {
        start -= 1;
    }
    let mut end = at + 1;
    while end < text.len() && class(text[end]) == c {
        end += 1;
    }
    (start, end)
}

/// The start of the line holding byte `at`.
fn line_start(text: &[u8], at: usize) -> usize {
    let at = at.min(text.len());
    text[..at]
        .iter()
        .rposition(|b| *b == b'\n')
        .map_or(0, |i| i + 1)
}

// ──────────────────────────── one run ─────────────────────────────

/// Runs one input from a file in `dir` (so that its `scan`s write there)
/// and names its outcome: `ok 0`, `ok 1`, `error <kind>` or `panic`.
fn run_one(dir: &Path, input: &[u8]) -> (String, Duration) {
    let path = dir.join("input.ward");
    std::fs::write(&path, input).expect("write the input");
    let options = Options {
        limits: Limits {
            nodes: 3_000,
            iterations: 8,
            ..Limits::default()
        },
        ..Options::default()
    };
    let start = Instant::now();
    let result = catch_unwind(AssertUnwindSafe(|| run_path(&path, Mode::Check, &options)));
    let took = start.elapsed();
    let outcome = match result {
        Ok(Ok(out)) => {
            assert!(out.code == 0 || out.code == 1, "exit code {}", out.code);
            format!("ok {}", out.code)
        }
        Ok(Err(e)) => format!("error {:?}", e.kind).to_lowercase(),
        Err(_) => "panic".to_string(),
    };
    (outcome, took)
}

/// A fresh folder under the system's temporary folder, removed on drop.
struct Scratch(PathBuf);

impl Scratch {
    fn new() -> Scratch {
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.as_nanos());
        let dir =
            std::env::temp_dir().join(format!("wardsmith-fuzz-{}-{nanos}", std::process::id()));
        std::fs::create_dir_all(&dir).expect("a scratch folder");
        Scratch(dir)
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

// ─────────────────────────── the summary ──────────────────────────

/// Outcomes counted, and the slowest input.
#[derive(Default)]
struct Summary {
    outcomes: BTreeMap<String, usize>,
    slowest: (Duration, usize),
    /// Peak resident memory of the process, in KiB (0 where unknown).
    peak_kib: u64,
}

impl Summary {
    fn add(&mut self, outcome: &str, took: Duration, index: usize) {
        *self.outcomes.entry(outcome.to_string()).or_insert(0) += 1;
        if took > self.slowest.0 {
            self.slowest = (took, index);
        }
    }

    fn merge(&mut self, other: Summary) {
        for (k, n) in other.outcomes {
            *self.outcomes.entry(k).or_insert(0) += n;
        }
        if other.slowest.0 > self.slowest.0 {
            self.slowest = other.slowest;
        }
        self.peak_kib = self.peak_kib.max(other.peak_kib);
    }

    /// `outcome=count;…|micros|index|peak`, one line.
    fn encode(&self) -> String {
        let counts: Vec<String> = self
            .outcomes
            .iter()
            .map(|(k, n)| format!("{}={n}", k.replace(' ', "_")))
            .collect();
        format!(
            "{}|{}|{}|{}",
            counts.join(";"),
            self.slowest.0.as_micros(),
            self.slowest.1,
            self.peak_kib
        )
    }

    fn decode(line: &str) -> Option<Summary> {
        let mut parts = line.split('|');
        let mut out = Summary::default();
        for item in parts.next()?.split(';').filter(|s| !s.is_empty()) {
            let (k, n) = item.split_once('=')?;
            out.outcomes.insert(k.replace('_', " "), n.parse().ok()?);
        }
        let micros: u64 = parts.next()?.parse().ok()?;
        out.slowest = (Duration::from_micros(micros), parts.next()?.parse().ok()?);
        out.peak_kib = parts.next()?.parse().ok()?;
        Some(out)
    }

    fn describe(&self, count: usize) -> String {
        let counts: Vec<String> = self
            .outcomes
            .iter()
            .map(|(k, n)| format!("  {k}: {n}"))
            .collect();
        format!(
            "{count} inputs\n{}\nslowest input: {:.3} s (input {})\npeak resident memory: {} MiB",
            counts.join("\n"),
            self.slowest.0.as_secs_f64(),
            self.slowest.1,
            self.peak_kib / 1024
        )
    }
}

// ───────────────────────── configuration ──────────────────────────

struct Config {
    count: usize,
    seed: u64,
    skip: usize,
    /// Inputs per child process, when isolated.
    isolate: Option<usize>,
    /// A folder to save every input in (`input-N.ward`), to rerun one.
    save: Option<PathBuf>,
    /// Every file of the corpus, the slow ones too (see [`corpus`]).
    all: bool,
}

impl Config {
    fn from_env() -> Config {
        let var = |k: &str| std::env::var(k).ok().and_then(|v| v.parse::<u64>().ok());
        Config {
            count: var("WARDSMITH_FUZZ_COUNT").map_or(DEFAULT_COUNT, |n| n as usize),
            seed: var("WARDSMITH_FUZZ_SEED").unwrap_or(DEFAULT_SEED),
            skip: var("WARDSMITH_FUZZ_SKIP").map_or(0, |n| n as usize),
            isolate: var("WARDSMITH_FUZZ_ISOLATE").map(|n| n.max(1) as usize),
            save: std::env::var_os("WARDSMITH_FUZZ_SAVE").map(PathBuf::from),
            all: var("WARDSMITH_FUZZ_ALL") == Some(1),
        }
    }
}

// ─────────────────────── isolated child runs ──────────────────────

/// Runs the inputs in child processes of `batch` inputs each; a child that
/// does not end normally is run again one input per process to find the
/// inputs that abort. Prints the histogram, the slowest input and the
/// largest resident memory of any child.
fn isolated(config: &Config, batch: usize) {
    let mut summary = Summary::default();
    let mut aborts = Vec::new();
    let end = config.skip + config.count;
    let mut start = config.skip;
    while start < end {
        let n = batch.min(end - start);
        match child(config.seed, start, n, config.all) {
            Ok(s) => summary.merge(s),
            Err(_) => {
                for index in start..start + n {
                    match child(config.seed, index, 1, config.all) {
                        Ok(s) => summary.merge(s),
                        Err(status) => {
                            aborts.push((index, status.clone()));
                            summary.add(&format!("abort {status}"), Duration::ZERO, index);
                        }
                    }
                }
            }
        }
        start += n;
        eprintln!("fuzz: {} of {} inputs", start - config.skip, config.count);
    }
    println!("{}", summary.describe(config.count));
    println!("(memory: the largest peak of a child process of {batch} inputs)");
    assert!(
        aborts.is_empty(),
        "{} inputs abort, the first: {:?}",
        aborts.len(),
        &aborts[..aborts.len().min(20)]
    );
    assert!(
        summary.outcomes.keys().all(|k| k != "panic"),
        "some inputs panic"
    );
}

/// Runs `count` inputs from `skip` in a child process: its summary, or
/// how it ended when it did not end normally.
fn child(seed: u64, skip: usize, count: usize, all: bool) -> Result<Summary, String> {
    let exe = std::env::current_exe().expect("the test binary");
    let out = std::process::Command::new(exe)
        .args([
            "--exact",
            "mutated_inputs_end_in_a_report_or_an_input_error",
            "--nocapture",
            "--test-threads=1",
        ])
        .env_remove("WARDSMITH_FUZZ_ISOLATE")
        .env("WARDSMITH_FUZZ_SEED", seed.to_string())
        .env("WARDSMITH_FUZZ_SKIP", skip.to_string())
        .env("WARDSMITH_FUZZ_COUNT", count.to_string())
        .env("WARDSMITH_FUZZ_ALL", u8::from(all).to_string())
        .output()
        .expect("the test binary runs");
    let stdout = String::from_utf8_lossy(&out.stdout);
    let summary = stdout
        .lines()
        .find_map(|l| l.split_once("fuzz-summary ").map(|(_, rest)| rest))
        .and_then(Summary::decode);
    match summary {
        Some(s) if out.status.success() => Ok(s),
        Some(s) if s.outcomes.contains_key("panic") => Ok(s),
        _ => Err(out.status.to_string()),
    }
}

/// The peak resident memory of this process so far, in KiB, from
/// `/proc/self/status` (0 where there is none).
fn peak_rss_kib() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|status| {
            status
                .lines()
                .find_map(|l| l.strip_prefix("VmHWM:"))
                .and_then(|v| v.trim().trim_end_matches("kB").trim().parse().ok())
        })
        .unwrap_or(0)
}
