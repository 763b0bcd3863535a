//! Seeded mutation fuzzing of specs and tables through the binary: every
//! outcome must be exit 0 or exit 2 with an `error:` message, never a panic,
//! an abort or a hang. The mutations (byte flips, dropped, doubled and
//! swapped lines, cut text, extreme numbers, stray keys) come from one
//! ChaCha20 stream, so a failing case is reproduced by its number.
//!
//! `HELDOUT_FUZZ_CASES` sets the number of cases (300 by default; `.ci/run`
//! runs 2 000) and `HELDOUT_FUZZ_SEED` the seed.

use std::io::Write as _;
use std::path::Path;
use std::process::Stdio;
use std::time::{Duration, Instant};

use rand_chacha::rand_core::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;

use crate::util;

const TABLE_SPEC: &str = "[experiment]\nname = \"fuzz\"\nseed = 7\n\n[data]\n\
table = \"data.csv\"\ntarget = \"y\"\nfeatures = [\"x\", \"z\"]\n\n[split]\nholdout = 0.2\n\
folds = 4\nrepeats = 2\n\n[[candidate]]\nfamily = \"polynomial\"\nfeatures = [\"x\"]\n\
degree = [1, 2, 3]\n\n[[candidate]]\nfamily = \"nearest-neighbors\"\nk = [1, 3, 5]\n\n\
[[candidate]]\nfamily = \"ridge\"\npenalty = [0.1, 10]\n\n[[candidate]]\n\
family = \"smoothing-spline\"\nfeatures = [\"x\"]\ndf = [2.5, 4]\n\n[choose]\nrule = \"one-se\"\n";

const SIMULATION_SPEC: &str = "[experiment]\nname = \"fuzz\"\nseed = 7\n\n[simulate]\n\
target = \"y\"\ntruth = \"1 + 2*x - x^2/10\"\ninputs = { x = { uniform = [0, 10] } }\n\
noise_sd = 1\ntrain_size = 20\nreplicates = 3\ntest_points = 5\n\n[split]\nfolds = 4\n\n\
[[candidate]]\nfamily = \"polynomial\"\ndegree = [1, 2]\n";

/// Replacements for a number in the text.
const EXTREMES: [&str; 14] = [
    "1e308",
    "-1e308",
    "1e155",
    "0",
    "-0",
    "NaN",
    "inf",
    "",
    "99999999999",
    "-1",
    "0.5",
    "abc",
    "1e-320",
    "4294967297",
];

/// Lines a mutation may insert.
const STRAY: [&str; 12] = [
    "repeats = 9999999999",
    "folds = 1",
    "holdout = 0.95",
    "method = \"column\"",
    "family = \"nope\"",
    "df = [1]",
    "k = [0]",
    "[[candidate]]",
    "intercept = false",
    "key = \"x\"",
    "group = \"y\"",
    "missing = \"drop-rows\"",
];

/// An invented table: a smooth surface with a deterministic wobble.
fn table() -> String {
    let mut text = String::from("x,z,y\n");
    for i in 0..60 {
        let x = f64::from(i) / 6.0;
        let z = f64::from((i * 17) % 60) / 20.0;
        let y = (x * 0.7).sin() * 4.0 + z + f64::from((i * 31) % 7) / 7.0;
        text.push_str(&format!("{x},{z},{y}\n"));
    }
    text
}

fn below(rng: &mut ChaCha20Rng, n: usize) -> usize {
    (rng.next_u64() % n.max(1) as u64) as usize
}

/// One random mutation of `text`.
fn mutate(rng: &mut ChaCha20Rng, text: &str) -> String {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let line = below(rng, lines.len());
    match below(rng, 7) {
        0 => {
            let mut bytes = text.as_bytes().to_vec();
            let at = below(rng, bytes.len());
            if let Some(byte) = bytes.get_mut(at) {
                *byte = b" ,.[]{}\"=#-e0123456789\nxyz"[below(rng, 26)];
            }
            return String::from_utf8_lossy(&bytes).into_owned();
        }
        1 if !lines.is_empty() => {
            lines.remove(line);
        }
        2 if !lines.is_empty() => lines.insert(line, lines[line].clone()),
        3 => {
            let other = below(rng, lines.len());
            if !lines.is_empty() {
                lines.swap(line, other);
            }
        }
        4 => return text.chars().take(below(rng, text.len() + 1)).collect(),
        5 => {
            let extreme = EXTREMES[below(rng, EXTREMES.len())];
            if let Some(target) = lines.get_mut(line) {
                let numbers: Vec<(usize, usize)> = number_spans(target);
                if !numbers.is_empty() {
                    let (start, end) = numbers[below(rng, numbers.len())];
                    target.replace_range(start..end, extreme);
                }
            }
        }
        _ => lines.insert(line, STRAY[below(rng, STRAY.len())].to_string()),
    }
    let mut joined = lines.join("\n");
    joined.push('\n');
    joined
}

/// Byte spans of the runs of digits (with `.`, `e`, `-`) in a line.
fn number_spans(line: &str) -> Vec<(usize, usize)> {
    let bytes = line.as_bytes();
    let mut spans = Vec::new();
    let mut i = 0;
    while i < bytes.len() {
        if bytes[i].is_ascii_digit() {
            let start = i;
            while i < bytes.len() && (bytes[i].is_ascii_digit() || b".e-".contains(&bytes[i])) {
                i += 1;
            }
            spans.push((start, i));
        } else {
            i += 1;
        }
    }
    spans
}

/// Runs `heldout run spec.toml` in `dir`, killed after `limit`; the exit
/// code (`None` when killed or ended by a signal) and stderr.
fn run_bounded(dir: &Path, limit: Duration) -> (Option<i32>, String) {
    let mut child = util::heldout()
        .current_dir(dir)
        .args([
            "run",
            "spec.toml",
            "--out",
            "out",
            "--cache",
            "cache",
            "--quiet",
        ])
        .args(["--jobs", "1"])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the heldout binary could not be started");
    let started = Instant::now();
    loop {
        if let Ok(Some(status)) = child.try_wait() {
            let mut stderr = String::new();
            if let Some(mut pipe) = child.stderr.take() {
                let _ = std::io::Read::read_to_string(&mut pipe, &mut stderr);
            }
            return (status.code(), stderr);
        }
        if started.elapsed() > limit {
            let _ = child.kill();
            let _ = child.wait();
            return (None, "killed: time limit".into());
        }
        std::thread::sleep(Duration::from_millis(2));
    }
}

#[test]
fn mutated_specs_and_tables_end_in_exit_0_or_2_never_a_panic_or_hang() {
    let cases: usize = std::env::var("HELDOUT_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(300);
    let seed: u64 = std::env::var("HELDOUT_FUZZ_SEED")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20_261_203);
    let mut rng = ChaCha20Rng::seed_from_u64(seed);
    let dir = tempfile::tempdir().unwrap();
    let (mut ok, mut refused) = (0, 0);
    for case in 0..cases {
        let simulation = below(&mut rng, 10) == 0;
        let (mut spec, mut data) = if simulation {
            (SIMULATION_SPEC.to_string(), table())
        } else {
            (TABLE_SPEC.to_string(), table())
        };
        for _ in 0..1 + below(&mut rng, 3) {
            if below(&mut rng, 2) == 0 {
                spec = mutate(&mut rng, &spec);
            } else {
                data = mutate(&mut rng, &data);
            }
        }
        std::fs::write(dir.path().join("spec.toml"), &spec).unwrap();
        std::fs::write(dir.path().join("data.csv"), &data).unwrap();
        let (code, stderr) = run_bounded(dir.path(), Duration::from_secs(60));
        let context = format!("case {case} (seed {seed})\nspec:\n{spec}\nstderr:\n{stderr}");
        assert!(!stderr.contains("panicked"), "{context}");
        match code {
            Some(0) => ok += 1,
            Some(2) => {
                assert!(
                    stderr.lines().any(|line| line.starts_with("error: ")),
                    "{context}"
                );
                refused += 1;
            }
            other => panic!("exit {other:?} in {context}"),
        }
    }
    assert_eq!(ok + refused, cases);
    // The tally is written past libtest's capture, so it shows in the
    // ordinary output of `cargo test` (and in CI's log).
    let _ = writeln!(
        std::io::stderr(),
        "fuzz: {cases} cases (seed {seed}): {ok} ran (exit 0), {refused} refused (exit 2)"
    );
    assert!(
        ok > 0 && refused > 0,
        "the mutations should both pass and break specs"
    );
}
