//! Structured fuzzing of every input loader and of the solver on random small networks, on the
//! stable toolchain, within `cargo test`.
//!
//! Each target takes one of the demo town's input files (or the demo criteria, project, method
//! or a random small network), applies one to three random mutations (cells deleted,
//! duplicated, swapped or replaced by huge, tiny, NaN, infinite, negative, empty, unicode or
//! quoting values; lines deleted, duplicated or swapped; random bytes; truncation; an empty
//! file; CRLF line ends; a byte-order mark; invalid UTF-8) and loads it through the library.
//! The rules every outcome must keep (no panic, located errors, no NaN, infinity or absurd
//! number in any message or loaded value, a steady solve that is finite or fails) and the
//! loading of each file are in `fuzzkit`, shared with the coverage-guided targets in `fuzz/`.
//!
//! The demo files are invented data; they are only the seeds of mutation, never check values.
//! Common practice, no source: the properties are firemain's own rules (docs/ARCHITECTURE.md,
//! "Invariants").
//!
//! Time: `FIREMAIN_FUZZ_SECONDS` per target (default 2.5 s, about 35 s in all in a debug
//! build); `FIREMAIN_FUZZ_SEED` for another seed (default fixed). A failing case is written to
//! `target/tmp/fuzz-failures/` for a regression test (see `regressions_stay_fixed`).

mod fuzzkit;
mod netkit;

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use firemain::model::{load_network, Network};
use fuzzkit::{check_diagnostics, check_network, Target, Workspace, TARGETS};

/// A small xorshift64* generator (Vigna, "An experimental exploration of Marsaglia's xorshift
/// generators, scrambled", ACM TOMS 42(4), 2016 — from memory): repeatable without a crate.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: usize) -> usize {
        if n == 0 {
            0
        } else {
            (self.next() % n as u64) as usize
        }
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// Cell values that have broken readers elsewhere: magnitudes, non-numbers, signs, quoting,
/// unicode, ids that collide.
const SPECIAL: &[&str] = &[
    "",
    "0",
    "-0",
    "-1",
    "-1e-300",
    "1e308",
    "1e309",
    "-1e308",
    "1e-320",
    "NaN",
    "nan",
    "inf",
    "-inf",
    "Infinity",
    "99999999999999999999999999999999999999999999",
    "0x10",
    "1,5",
    "1.2.3",
    "  7  ",
    "\"",
    "\"quoted, cell\"",
    "é",
    "水",
    "🔥",
    "J-1",
    "R-1",
    "P-1",
    "reservoir",
    "tank",
    "open",
    "closed",
    "prv",
    "#",
    "\u{0}",
    "\u{202e}",
];

fn special(rng: &mut Rng) -> String {
    if rng.below(4) == 0 {
        // A random number of any magnitude and sign.
        let e = rng.below(40) as i32 - 20;
        let v = (rng.unit() - 0.3) * 10f64.powi(e);
        return format!("{v}");
    }
    SPECIAL[rng.below(SPECIAL.len())].to_string()
}

/// One to three mutations of a CSV table, cell by cell (lines split at commas).
fn mutate_csv(text: &[u8], rng: &mut Rng) -> Vec<u8> {
    let whole = rng.below(10);
    if whole == 0 {
        return mutate_bytes(text, rng);
    }
    let s = String::from_utf8_lossy(text).into_owned();
    let mut lines: Vec<Vec<String>> = s
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect();
    for _ in 0..1 + rng.below(3) {
        if lines.is_empty() {
            break;
        }
        let li = rng.below(lines.len());
        let n = lines[li].len();
        match rng.below(9) {
            0 if n > 0 => {
                lines[li].remove(rng.below(n));
            }
            1 if n > 0 => {
                let c = lines[li][rng.below(n)].clone();
                lines[li].insert(rng.below(n + 1), c);
            }
            2 if n > 1 => lines[li].swap(rng.below(n), rng.below(n)),
            3 | 4 if n > 0 => {
                let ci = rng.below(n);
                lines[li][ci] = special(rng);
            }
            5 => {
                lines.remove(li);
            }
            6 => {
                let l = lines[li].clone();
                lines.insert(rng.below(lines.len() + 1), l);
            }
            7 => {
                let other = rng.below(lines.len());
                lines.swap(li, other);
            }
            _ => {
                let ci = rng.below(n + 1);
                lines[li].insert(ci, special(rng));
            }
        }
    }
    let crlf = rng.below(8) == 0;
    let mut out = String::new();
    if rng.below(10) == 0 {
        out.push('\u{feff}');
    }
    for l in &lines {
        out.push_str(&l.join(","));
        out.push_str(if crlf { "\r\n" } else { "\n" });
    }
    out.into_bytes()
}

/// Byte-level damage: truncation, an empty file, random or invalid UTF-8 bytes, CRLF, a BOM.
fn mutate_bytes(text: &[u8], rng: &mut Rng) -> Vec<u8> {
    let mut b = text.to_vec();
    match rng.below(7) {
        0 => b.truncate(rng.below(b.len() + 1)),
        1 => b.clear(),
        2 => {
            for _ in 0..1 + rng.below(8) {
                let at = rng.below(b.len() + 1);
                b.insert(at, rng.next() as u8);
            }
        }
        3 => {
            let at = rng.below(b.len() + 1);
            b.splice(at..at, [0xff, 0xfe, 0xc3]);
        }
        4 => {
            let s = String::from_utf8_lossy(&b).replace('\n', "\r\n");
            b = s.into_bytes();
        }
        5 => {
            let mut v = "\u{feff}".as_bytes().to_vec();
            v.extend(b);
            b = v;
        }
        _ => {
            for _ in 0..1 + rng.below(4) {
                if !b.is_empty() {
                    let at = rng.below(b.len());
                    b[at] = rng.next() as u8;
                }
            }
        }
    }
    b
}

/// Mutations of a TOML file: number tokens replaced, lines deleted, duplicated or swapped, a
/// value's quotes dropped, and byte-level damage.
fn mutate_toml(text: &[u8], rng: &mut Rng) -> Vec<u8> {
    if rng.below(6) == 0 {
        return mutate_bytes(text, rng);
    }
    let s = String::from_utf8_lossy(text).into_owned();
    let mut lines: Vec<String> = s.lines().map(str::to_string).collect();
    for _ in 0..1 + rng.below(3) {
        if lines.is_empty() {
            break;
        }
        let li = rng.below(lines.len());
        match rng.below(6) {
            0 => {
                lines.remove(li);
            }
            1 => {
                let l = lines[li].clone();
                lines.insert(rng.below(lines.len() + 1), l);
            }
            2 => {
                let other = rng.below(lines.len());
                lines.swap(li, other);
            }
            3 => lines[li] = lines[li].replace('"', ""),
            _ => {
                // A value after `=` replaced by a special one (TOML numbers and others).
                if let Some(eq) = lines[li].find('=') {
                    let v = match rng.below(8) {
                        0 => "nan".to_string(),
                        1 => "inf".to_string(),
                        2 => "-inf".to_string(),
                        3 => "1e308".to_string(),
                        4 => "-5".to_string(),
                        5 => "\"text\"".to_string(),
                        6 => "[]".to_string(),
                        _ => format!(
                            "{}",
                            (rng.unit() - 0.2) * 10f64.powi(rng.below(30) as i32 - 10)
                        ),
                    };
                    lines[li] = format!("{}= {v}", &lines[li][..eq]);
                }
            }
        }
    }
    let mut out = lines.join("\n");
    out.push('\n');
    out.into_bytes()
}

/// The repository root (the seeds are read from there).
fn root() -> &'static Path {
    Path::new(env!("CARGO_MANIFEST_DIR"))
}

fn demo_network() -> Network {
    fuzzkit::demo_network(root())
}

/// The seed of `target`, mutated as a CSV table or a TOML file.
fn mutate(target: Target, seed: &[u8], rng: &mut Rng) -> Vec<u8> {
    if target.is_csv() {
        mutate_csv(seed, rng)
    } else {
        mutate_toml(seed, rng)
    }
}

/// One case in a fresh copy of the seeds.
fn run(target: Target, bytes: &[u8], demo: &Network) -> Result<(), String> {
    target.run(&Workspace::new(root()), bytes, demo)
}

fn budget() -> Duration {
    let secs = std::env::var("FIREMAIN_FUZZ_SECONDS")
        .ok()
        .and_then(|s| s.parse::<f64>().ok())
        .filter(|s| s.is_finite() && *s > 0.0)
        .unwrap_or(2.5);
    Duration::from_secs_f64(secs)
}

fn seed() -> u64 {
    std::env::var("FIREMAIN_FUZZ_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0x5eed_f12e)
        | 1
}

/// Runs `case` under `catch_unwind`; a panic becomes a failure with its message.
fn guarded(case: impl FnOnce() -> Result<(), String>) -> Result<(), String> {
    match catch_unwind(AssertUnwindSafe(case)) {
        Ok(r) => r,
        Err(p) => Err(format!(
            "panic: {}",
            p.downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default()
        )),
    }
}

/// Keeps a failing input for a regression test.
fn keep_failure(target: &str, n: usize, bytes: &[u8]) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join("fuzz-failures");
    std::fs::create_dir_all(&dir).expect("mkdir");
    let path = dir.join(format!("{n:03}-{target}"));
    std::fs::write(&path, bytes).expect("write failure");
    path
}

fn fuzz_targets(targets: &[Target]) {
    let demo = demo_network();
    let mut failures = Vec::new();
    let mut runs = 0usize;
    for (k, &target) in targets.iter().enumerate() {
        let seed_bytes = std::fs::read(root().join(target.seed_path())).expect("seed file");
        let mut rng = Rng(seed() ^ (k as u64 + 1).wrapping_mul(0x9e37_79b9_7f4a_7c15));
        let start = Instant::now();
        let mut n = 0usize;
        while start.elapsed() < budget() {
            let bytes = mutate(target, &seed_bytes, &mut rng);
            n += 1;
            if let Err(e) = guarded(|| run(target, &bytes, &demo)) {
                let kept = keep_failure(&target.name(), failures.len(), &bytes);
                failures.push(format!(
                    "{}: {e} (input kept in {})",
                    target.name(),
                    kept.display()
                ));
                if failures.len() > 20 {
                    break;
                }
            }
        }
        runs += n;
        eprintln!(
            "{}: {n} mutated inputs in {:.1} s",
            target.name(),
            start.elapsed().as_secs_f64()
        );
    }
    assert!(
        failures.is_empty(),
        "{} of {runs} fuzzed inputs broke a rule:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn network_loaders_survive_mutated_files() {
    fuzz_targets(&TARGETS[..7]);
}

#[test]
fn other_loaders_survive_mutated_files() {
    fuzz_targets(&TARGETS[7..13]);
}

/// The cost table, the GIS import's five inputs and a sweep's journal.
#[test]
fn import_costs_and_journal_survive_mutated_files() {
    fuzz_targets(&TARGETS[13..]);
}

/// A random small network (tree plus a few loops, random elevations, lengths, diameters,
/// roughnesses and demands across their plausible ranges, one or two reservoirs), written as a
/// folder and loaded like any other: the solver must give finite numbers or an error.
fn random_network(rng: &mut Rng) -> netkit::NetFiles {
    let mut f = netkit::NetFiles::si_hw();
    let n = 2 + rng.below(12);
    let sources = 1 + rng.below(2);
    for s in 0..sources {
        f.reservoir(&format!("R{s}"), 20.0 + 200.0 * rng.unit());
    }
    for j in 0..n {
        let demand = if rng.below(4) == 0 {
            0.0
        } else {
            50.0 * rng.unit()
        };
        f.junction(&format!("J{j}"), 150.0 * rng.unit(), demand);
    }
    let mut p = 0;
    let mut pipe = |f: &mut netkit::NetFiles, a: String, b: String, rng: &mut Rng| {
        let length = 1.0 + 3000.0 * rng.unit();
        let diameter = [25.0, 50.0, 100.0, 150.0, 300.0, 600.0][rng.below(6)];
        let c = 40.0 + 110.0 * rng.unit();
        f.pipe(&format!("P{p}"), &a, &b, length, diameter, c);
        p += 1;
    };
    for s in 0..sources {
        pipe(&mut f, format!("R{s}"), format!("J{}", rng.below(n)), rng);
    }
    for j in 1..n {
        pipe(&mut f, format!("J{}", rng.below(j)), format!("J{j}"), rng);
    }
    for _ in 0..rng.below(4) {
        let (a, b) = (rng.below(n), rng.below(n));
        if a != b {
            pipe(&mut f, format!("J{a}"), format!("J{b}"), rng);
        }
    }
    f
}

#[test]
fn solver_survives_random_small_networks() {
    let mut rng = Rng(seed() ^ 0xd1b5_4a32_d192_ed03);
    let start = Instant::now();
    let mut n = 0;
    let mut failures = Vec::new();
    while start.elapsed() < budget() * 2 {
        let files = random_network(&mut rng);
        let dir = tempfile::tempdir().expect("tempdir");
        files.write_to(dir.path());
        n += 1;
        let outcome = guarded(|| match load_network(dir.path()) {
            Ok(loaded) => check_network(&loaded.network),
            Err(diags) => check_diagnostics(&diags, true),
        });
        if let Err(e) = outcome {
            failures.push(format!("{e}\n{:?}", files.pipes));
        }
    }
    eprintln!(
        "solver: {n} random networks in {:.1} s",
        start.elapsed().as_secs_f64()
    );
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
}

/// Inputs that once broke a rule, kept in tests/data/fuzz-regressions/ as `<target>/<case>`
/// files (the target's file replaced by the case in a copy of the demo).
#[test]
fn regressions_stay_fixed() {
    let root = Path::new("tests/data/fuzz-regressions");
    let Ok(dirs) = std::fs::read_dir(root) else {
        return;
    };
    let demo = demo_network();
    for dir in dirs.flatten() {
        let target_name = dir.file_name().to_string_lossy().into_owned();
        let Some(target) = TARGETS.iter().find(|t| t.name() == target_name) else {
            panic!("unknown fuzz target folder {target_name}");
        };
        for case in std::fs::read_dir(dir.path()).expect("cases").flatten() {
            let bytes = std::fs::read(case.path()).expect("case");
            if let Err(e) = guarded(|| run(*target, &bytes, &demo)) {
                panic!("{}: {e}", case.path().display());
            }
        }
    }
}
