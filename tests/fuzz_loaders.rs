//! Structured fuzzing of every input loader and of the solver on random small networks, on the
//! stable toolchain, within `cargo test`.
//!
//! Each target takes one of the demo town's input files (or the demo criteria, project, method
//! or a random small network), applies one to three random mutations (cells deleted,
//! duplicated, swapped or replaced by huge, tiny, NaN, infinite, negative, empty, unicode or
//! quoting values; lines deleted, duplicated or swapped; random bytes; truncation; an empty
//! file; CRLF line ends; a byte-order mark; invalid UTF-8) and loads it through the library.
//! Every outcome must be:
//! - no panic;
//! - on failure, every error located: a file always, and a line for CSV tables (a few
//!   whole-file findings are listed in `FILE_LEVEL`);
//! - no NaN or infinity, and no number of more than 40 digits, in any message (text the input
//!   itself holds, quoted in the message, excepted);
//! - on success, finite numbers in the loaded model, and (for networks) a steady solve that
//!   either fails with an error or gives finite heads and flows.
//!
//! The demo files are invented data; they are only the seeds of mutation, never check values.
//! Common practice, no source: the properties are firemain's own rules (docs/ARCHITECTURE.md,
//! "Invariants").
//!
//! Time: `FIREMAIN_FUZZ_SECONDS` per target (default 2.5 s, about 35 s in all in a debug
//! build); `FIREMAIN_FUZZ_SEED` for another seed (default fixed). A failing case is written to
//! `target/tmp/fuzz-failures/` for a regression test (see `regressions_stay_fixed`).

mod netkit;

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use firemain::criteria::load_criteria;
use firemain::hydraulics::{Hydraulics, SolveRequest};
use firemain::model::buildings::load_buildings;
use firemain::model::flowtests::load_flowtests;
use firemain::model::project::load_project;
use firemain::model::{load_network, Diagnostics, Network, Severity};

const DEMO: &str = "examples/demo-town";
const CRITERIA: &str = "criteria/cedar-county-demo.toml";
const METHOD: &str = "criteria/methods/fire-code-appendix-b-2015.toml";

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

/// Text outside `...`, "..." and '...' quotes: what the program wrote, not the input it quotes.
fn unquoted(message: &str) -> String {
    let mut out = String::new();
    let mut quote: Option<char> = None;
    for c in message.chars() {
        match quote {
            Some(q) if c == q => quote = None,
            Some(_) => {}
            None if matches!(c, '`' | '"') => quote = Some(c),
            None => out.push(c),
        }
    }
    out
}

/// A problem with a message: NaN or infinity, or a number of more than 40 digits, written by
/// the program itself.
fn bad_number(message: &str) -> Option<String> {
    let text = unquoted(message);
    for word in text.split(|c: char| !(c.is_alphanumeric() || c == '.' || c == '-')) {
        let w = word
            .trim_matches(|c: char| c == '.' || c == '-')
            .to_ascii_lowercase();
        if matches!(w.as_str(), "nan" | "inf" | "infinity") {
            return Some(format!("non-finite number `{word}`"));
        }
        let digits = w.chars().filter(char::is_ascii_digit).count();
        if digits > 40
            && w.chars()
                .all(|c| c.is_ascii_digit() || c == '.' || c == 'e')
        {
            return Some(format!("{digits}-digit number"));
        }
    }
    None
}

/// Findings that concern a whole file, legitimately without a line (the file's absence,
/// emptiness, size or encoding, a missing header or column, a table without rows).
const FILE_LEVEL: &[&str] = &[
    "empty",
    "no header",
    "not found",
    "cannot read",
    "missing",
    "UTF-8",
    "larger than",
    "no rows",
    "there are no",
    "has no",
    "no junction",
    "no source",
    "no pipe",
    "not a folder",
    "not connected",
    "reach",
    "semicolon",
    "delimiter",
];

/// Checks the diagnostics of a load: every error located, no bad number in any message.
fn check_diagnostics(diags: &Diagnostics, csv: bool) -> Result<(), String> {
    for d in diags.iter() {
        let text = d.to_string();
        if d.location.file.is_empty() {
            return Err(format!("unlocated: {text}"));
        }
        if csv
            && d.severity == Severity::Error
            && d.location.line.is_none()
            && !FILE_LEVEL.iter().any(|k| d.message.contains(k))
        {
            return Err(format!("error without a line: {text}"));
        }
        if let Some(why) = bad_number(&text) {
            return Err(format!("{why} in: {text}"));
        }
    }
    Ok(())
}

/// Every loaded number finite, and a steady solve that fails cleanly or gives finite numbers.
fn check_network(net: &Network) -> Result<(), String> {
    for n in &net.nodes {
        let g = n.grade_m.unwrap_or(0.0);
        if !(n.elevation_m.is_finite() && n.base_demand_m3s.is_finite() && g.is_finite()) {
            return Err(format!("non-finite number at node {}", n.id));
        }
    }
    for l in &net.links {
        if let Some(d) = l.diameter_m() {
            if !(d.is_finite() && d > 0.0) {
                return Err(format!("diameter {d} in link {}", l.id));
            }
        }
    }
    let Ok(h) = Hydraulics::new(net) else {
        return Ok(());
    };
    let mut ws = h.workspace();
    let request = SolveRequest {
        demand_factor: net.demand_factors.max_day,
        extra_demand: &[],
        fixed_head: None,
    };
    if let Ok(sol) = h.solve(&mut ws, &request, &h.cold_start()) {
        if sol
            .heads_m
            .iter()
            .chain(&sol.flows_m3s)
            .any(|v| !v.is_finite())
        {
            return Err("a solve returned a non-finite head or flow".into());
        }
    }
    Ok(())
}

/// The demo folder copied to a fresh temporary directory.
fn demo_copy() -> tempfile::TempDir {
    let dir = tempfile::tempdir().expect("tempdir");
    for entry in std::fs::read_dir(DEMO).expect("demo folder") {
        let entry = entry.expect("entry");
        let name = entry.file_name();
        let name = name.to_string_lossy();
        if name.ends_with(".csv") || name.ends_with(".toml") {
            std::fs::copy(entry.path(), dir.path().join(&*name)).expect("copy");
        }
    }
    dir
}

fn demo_network() -> Network {
    load_network(Path::new(DEMO)).expect("demo loads").network
}

/// One input file to fuzz: its name, the mutation, and how it is loaded and checked.
#[derive(Clone, Copy)]
enum Target {
    /// A file of the network folder.
    NetworkFile(&'static str),
    Criteria,
    Method,
    Project,
    Buildings,
    FlowTests,
    FlowTestSources,
}

impl Target {
    fn name(self) -> String {
        match self {
            Target::NetworkFile(f) => f.to_string(),
            Target::Criteria => "criteria.toml".into(),
            Target::Method => "method.toml".into(),
            Target::Project => "project.toml".into(),
            Target::Buildings => "buildings.csv".into(),
            Target::FlowTests => "flowtests.csv".into(),
            Target::FlowTestSources => "flowtest_sources.csv".into(),
        }
    }

    fn seed_bytes(self) -> Vec<u8> {
        let path: PathBuf = match self {
            Target::NetworkFile(f) => Path::new(DEMO).join(f),
            Target::Criteria => CRITERIA.into(),
            Target::Method => METHOD.into(),
            Target::Project => Path::new(DEMO).join("project.toml"),
            Target::Buildings => Path::new(DEMO).join("buildings.csv"),
            Target::FlowTests => Path::new(DEMO).join("flowtests.csv"),
            Target::FlowTestSources => Path::new(DEMO).join("flowtest_sources.csv"),
        };
        std::fs::read(path).expect("seed file")
    }

    fn is_csv(self) -> bool {
        self.name().ends_with(".csv")
    }

    fn mutate(self, seed: &[u8], rng: &mut Rng) -> Vec<u8> {
        if self.is_csv() {
            mutate_csv(seed, rng)
        } else {
            mutate_toml(seed, rng)
        }
    }

    /// Loads `bytes` as this target's file (the other files unchanged) and checks the outcome.
    fn run(self, bytes: &[u8], demo: &Network) -> Result<(), String> {
        let dir = demo_copy();
        let d = dir.path();
        let csv = self.is_csv();
        match self {
            Target::NetworkFile(f) => {
                std::fs::write(d.join(f), bytes).expect("write");
                match load_network(d) {
                    Ok(loaded) => {
                        check_diagnostics(&loaded.diagnostics, csv)?;
                        check_network(&loaded.network)
                    }
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
            Target::Criteria => {
                let methods = d.join("methods");
                std::fs::create_dir_all(&methods).expect("mkdir");
                std::fs::copy(METHOD, methods.join("fire-code-appendix-b-2015.toml"))
                    .expect("copy method");
                let path = d.join("criteria.toml");
                std::fs::write(&path, bytes).expect("write");
                match load_criteria(&path, demo) {
                    Ok(c) => {
                        check_diagnostics(&c.warnings, false)?;
                        let numbers = [
                            c.residual_floor_kpa,
                            c.search_cap_m3s,
                            c.service_min_kpa,
                            c.service_max_kpa,
                        ];
                        if numbers.iter().any(|v| !v.is_finite()) {
                            return Err("criteria loaded a non-finite number".into());
                        }
                        Ok(())
                    }
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Method => {
                let text = String::from_utf8_lossy(bytes);
                match firemain::needed::method::parse_method(&text, "method.toml") {
                    Ok(_) => Ok(()),
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Project => {
                let path = d.join("project.toml");
                std::fs::write(&path, bytes).expect("write");
                match load_project(&path) {
                    Ok(_) => Ok(()),
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Buildings => {
                let path = d.join("buildings.csv");
                std::fs::write(&path, bytes).expect("write");
                match load_buildings(&path, demo.units) {
                    Ok(b) => check_diagnostics(&b.diagnostics, csv),
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
            Target::FlowTests | Target::FlowTestSources => {
                let name = self.name();
                std::fs::write(d.join(&name), bytes).expect("write");
                match load_flowtests(&d.join("flowtests.csv"), demo) {
                    Ok(t) => check_diagnostics(&t.diagnostics, csv),
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
        }
    }
}

const TARGETS: [Target; 13] = [
    Target::NetworkFile("model.toml"),
    Target::NetworkFile("junctions.csv"),
    Target::NetworkFile("sources.csv"),
    Target::NetworkFile("pipes.csv"),
    Target::NetworkFile("hydrants.csv"),
    Target::NetworkFile("pumps.csv"),
    Target::NetworkFile("valves.csv"),
    Target::Criteria,
    Target::Method,
    Target::Project,
    Target::Buildings,
    Target::FlowTests,
    Target::FlowTestSources,
];

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
        let seed_bytes = target.seed_bytes();
        let mut rng = Rng(seed() ^ (k as u64 + 1).wrapping_mul(0x9e37_79b9_7f4a_7c15));
        let start = Instant::now();
        let mut n = 0usize;
        while start.elapsed() < budget() {
            let bytes = target.mutate(&seed_bytes, &mut rng);
            n += 1;
            if let Err(e) = guarded(|| target.run(&bytes, &demo)) {
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
    fuzz_targets(&TARGETS[7..]);
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
            if let Err(e) = guarded(|| target.run(&bytes, &demo)) {
                panic!("{}: {e}", case.path().display());
            }
        }
    }
}
