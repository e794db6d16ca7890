//! The sweep's answers against a record made by an earlier build: a change meant to make the
//! sweep faster (fewer Newton steps or factorizations) must not move any available flow by more
//! than max(0.1 %, 0.5 gpm), must keep each hydrant's outcome and residual pressure, and must
//! give the same results for any number of threads.
//!
//! This is a regression guard, not a check against an outside source (common practice, no
//! source): the closed forms and brute-force scans of tests/verified_answers.rs are what say the
//! answers are right; this file says a speed change left them where they were.
//!
//! The records live in tests/data/recorded-flows/. The demo town's is checked by `cargo test`;
//! the 10k synthetic network's (seed 1, examples/synthetic.rs, about half a minute of release
//! sweep) by
//!
//! ```text
//! cargo test --release --test recorded_flows -- --ignored
//! ```
//!
//! A record is rewritten only by the build *before* a speed change, never to make a test pass:
//! `FIREMAIN_RECORD_FLOWS=1 cargo test --release --test recorded_flows -- --include-ignored`.

#[path = "../examples/synthetic.rs"]
#[allow(dead_code)]
mod synthetic;

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use firemain::criteria::load_criteria;
use firemain::fireflow::{sweep, FireFlowSetup, HydrantResult, Outcome};
use firemain::hydraulics::Hydraulics;
use firemain::model::{load_network, Network};
use firemain::units::{KPA_PER_PSI, M3S_PER_GPM};

fn repo(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

/// One hydrant's recorded answer: available flow (gpm), residual pressure at the required flow
/// (psi) and outcome.
#[derive(Debug, Clone, PartialEq)]
struct Recorded {
    available_gpm: Option<f64>,
    residual_psi: Option<f64>,
    required_gpm: f64,
    outcome: String,
}

fn outcome_name(o: Outcome) -> &'static str {
    match o {
        Outcome::Pass => "pass",
        Outcome::Fail => "fail",
        Outcome::Error => "error",
    }
}

fn recorded_of(net: &Network, results: &[HydrantResult]) -> BTreeMap<String, Recorded> {
    results
        .iter()
        .map(|r| {
            (
                net.hydrants[r.hydrant].id.clone(),
                Recorded {
                    available_gpm: r.available_m3s.map(|q| q / M3S_PER_GPM),
                    residual_psi: r.residual_kpa.map(|p| p / KPA_PER_PSI),
                    required_gpm: r.required_m3s / M3S_PER_GPM,
                    outcome: outcome_name(r.outcome).to_string(),
                },
            )
        })
        .collect()
}

fn cell(v: Option<f64>) -> String {
    v.map_or(String::new(), |x| format!("{x:.3}"))
}

fn write_record(path: &Path, record: &BTreeMap<String, Recorded>) {
    let mut text = String::from("hydrant,available_gpm,residual_psi,required_gpm,outcome\n");
    for (id, r) in record {
        let _ = writeln!(
            text,
            "{id},{},{},{:.3},{}",
            cell(r.available_gpm),
            cell(r.residual_psi),
            r.required_gpm,
            r.outcome
        );
    }
    std::fs::create_dir_all(path.parent().expect("parent")).expect("record folder");
    std::fs::write(path, text).expect("write record");
}

fn read_record(path: &Path) -> BTreeMap<String, Recorded> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| {
        panic!(
            "{}: {e} (make it with FIREMAIN_RECORD_FLOWS=1)",
            path.display()
        )
    });
    let number = |s: &str| (!s.is_empty()).then(|| s.parse::<f64>().expect("number"));
    text.lines()
        .skip(1)
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            assert_eq!(f.len(), 5, "{}: bad line {line}", path.display());
            (
                f[0].to_string(),
                Recorded {
                    available_gpm: number(f[1]),
                    residual_psi: number(f[2]),
                    required_gpm: number(f[3]).expect("required flow"),
                    outcome: f[4].to_string(),
                },
            )
        })
        .collect()
}

/// The allowed change of an available flow: max(0.1 %, 0.5 gpm).
fn allowed_gpm(q: f64) -> f64 {
    (0.001 * q).max(0.5)
}

/// Allowed change of a residual pressure: 0.01 psi, the resolution of a report (a residual is
/// an ordinary solve to 2e-4 m, 0.0003 psi).
const RESIDUAL_ALLOWED_PSI: f64 = 0.01;

fn differences(
    recorded: &BTreeMap<String, Recorded>,
    now: &BTreeMap<String, Recorded>,
) -> Vec<String> {
    let mut out = Vec::new();
    if recorded.len() != now.len() {
        out.push(format!(
            "{} hydrants recorded, {} now",
            recorded.len(),
            now.len()
        ));
    }
    for (id, r) in recorded {
        let Some(n) = now.get(id) else {
            out.push(format!("{id}: recorded, not analysed now"));
            continue;
        };
        match (r.available_gpm, n.available_gpm) {
            (Some(a), Some(b)) if (a - b).abs() > allowed_gpm(a) => out.push(format!(
                "{id}: available {b:.3} gpm, recorded {a:.3} ({:+.3} %)",
                100.0 * (b - a) / a.max(1e-9)
            )),
            (Some(_), Some(_)) | (None, None) => {}
            (a, b) => out.push(format!("{id}: available {b:?}, recorded {a:?}")),
        }
        match (r.residual_psi, n.residual_psi) {
            (Some(a), Some(b)) if (a - b).abs() > RESIDUAL_ALLOWED_PSI => {
                out.push(format!("{id}: residual {b:.3} psi, recorded {a:.3}"))
            }
            (Some(_), Some(_)) | (None, None) => {}
            (a, b) => out.push(format!("{id}: residual {b:?}, recorded {a:?}")),
        }
        // An outcome may only change where the recorded flow lies within the allowed change of
        // the required flow.
        let near_required = r
            .available_gpm
            .is_some_and(|a| (a - r.required_gpm).abs() <= allowed_gpm(a));
        if r.outcome != n.outcome && !near_required {
            out.push(format!("{id}: {}, recorded {}", n.outcome, r.outcome));
        }
    }
    out
}

/// Sweeps every hydrant of the network in `dir` with `criteria` on 1 and 2 threads, checks
/// that both give the same results, and compares them with the record `name` (or rewrites it).
fn check_against_record(dir: &Path, criteria: &str, name: &str) {
    let net = load_network(dir).expect("network loads").network;
    let criteria =
        load_criteria(&repo(&format!("criteria/{criteria}")), &net).expect("criteria load");
    let hydraulics = Hydraulics::new(&net).expect("prepare");
    let setup = FireFlowSetup::new(&hydraulics, &criteria).expect("max-day");
    let all: Vec<usize> = (0..net.hydrants.len()).collect();
    let one = sweep(&setup, &all, Some(1), &|_| {}).expect("sweep").0;
    let two = sweep(&setup, &all, Some(2), &|_| {}).expect("sweep").0;
    let now = recorded_of(&net, &one);
    assert_eq!(
        now,
        recorded_of(&net, &two),
        "1 and 2 threads gave different results"
    );
    let path = repo(&format!("tests/data/recorded-flows/{name}.csv"));
    if std::env::var_os("FIREMAIN_RECORD_FLOWS").is_some() {
        write_record(&path, &now);
        eprintln!("{}: record rewritten", path.display());
        return;
    }
    let diffs = differences(&read_record(&path), &now);
    assert!(
        diffs.is_empty(),
        "{} hydrant(s) moved against {}:\n{}",
        diffs.len(),
        path.display(),
        diffs.join("\n")
    );
}

#[test]
fn demo_town_answers_match_the_record() {
    check_against_record(
        &repo("examples/demo-town"),
        "cedar-county-demo.toml",
        "demo-town",
    );
}

#[test]
#[ignore = "a 10k-junction sweep on 1 and 2 threads: run in release (see the module docs)"]
fn synthetic_10k_answers_match_the_record() {
    let dir = repo("target/tmp/recorded-flows/synthetic-10k-seed1");
    if !dir.join("pipes.csv").exists() {
        let _ = std::fs::remove_dir_all(&dir);
        synthetic::write_us_network(10_000, 1, &dir).expect("generate the 10k network");
    }
    check_against_record(&dir, "common-practice-us.toml", "synthetic-10k-seed1");
}
