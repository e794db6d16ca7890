//! The files of one run form one set: a shared run id and manifest, input warnings in the
//! reports, and a failed write that leaves the previous set as it was. Through the real binary.
//! (Behaviour checks of firemain's own output contract: no outside value is involved.)

mod common;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use firemain::report::set::read_manifest;

/// A copy of tests/data/sweep_town in a temporary folder, with pipe P001's Hazen-Williams C
/// raised to 180, above the plausible range: a warning at pipes.csv line 3 (line 1 is a
/// comment, line 2 the header). The network already warns about hydrant H08's small mains.
fn warned_network() -> (tempfile::TempDir, PathBuf) {
    let root = tempfile::tempdir().expect("temporary folder");
    let net = root.path().join("net");
    std::fs::create_dir(&net).expect("network folder");
    let src = common::test_path("data/sweep_town");
    for entry in std::fs::read_dir(&src).expect("sweep_town") {
        let path = entry.expect("entry").path();
        let name = path.file_name().expect("name").to_owned();
        std::fs::copy(&path, net.join(name)).expect("copy");
    }
    let pipes = std::fs::read_to_string(net.join("pipes.csv")).expect("pipes.csv");
    let pipes = pipes.replacen("P001,J11,J12,650,8,96", "P001,J11,J12,650,8,180", 1);
    assert!(
        pipes.contains(",180"),
        "pipes.csv changed: update this test"
    );
    std::fs::write(net.join("pipes.csv"), pipes).expect("write pipes.csv");
    (root, net)
}

fn criteria() -> PathBuf {
    common::test_path("data/criteria/us-20psi-1000gpm.toml")
}

fn firemain(args: &[&std::ffi::OsStr]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_firemain"))
        .args(args)
        .output()
        .expect("run firemain")
}

fn check(net: &Path, out: &Path) -> Output {
    analyse("check", net, out)
}

/// `firemain COMMAND NET --criteria … --out OUT --quiet` (check or upsize).
fn analyse(command: &str, net: &Path, out: &Path) -> Output {
    firemain(&[
        command.as_ref(),
        net.as_os_str(),
        "--criteria".as_ref(),
        criteria().as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
        "--quiet".as_ref(),
    ])
}

/// Every file under `dir`, hidden ones included: relative path → bytes.
fn snapshot(dir: &Path) -> BTreeMap<PathBuf, Vec<u8>> {
    let mut out = BTreeMap::new();
    let mut todo = vec![dir.to_path_buf()];
    while let Some(d) = todo.pop() {
        for e in std::fs::read_dir(&d).expect("read folder") {
            let p = e.expect("entry").path();
            if p.is_dir() {
                todo.push(p);
            } else {
                let rel = p.strip_prefix(dir).expect("inside").to_path_buf();
                out.insert(rel, std::fs::read(&p).expect("read"));
            }
        }
    }
    out
}

#[test]
fn input_warnings_reach_report_md_and_report_json() {
    let (root, net) = warned_network();
    let out = root.path().join("out");
    let run = check(&net, &out);
    assert!(run.status.code().is_some_and(|c| c <= 1), "{run:?}");
    let md = std::fs::read_to_string(out.join("report.md")).expect("report.md");
    let section = md
        .split("## Input warnings")
        .nth(1)
        .expect("an Input warnings section in report.md");
    let section = section.split("\n## ").next().unwrap_or_default();
    assert!(
        section.contains("`pipes.csv:3`: pipe `P001`: Hazen-Williams C = 180"),
        "{section}"
    );
    assert!(
        section.contains("`hydrants.csv:9`: hydrant `H08`"),
        "{section}"
    );

    let json: serde_json::Value =
        serde_json::from_slice(&std::fs::read(out.join("report.json")).expect("report.json"))
            .expect("valid JSON");
    let warnings = json["input_warnings"].as_array().expect("input_warnings");
    let pipe = warnings
        .iter()
        .find(|w| w["file"] == "pipes.csv")
        .expect("the pipes.csv warning in report.json");
    assert_eq!(pipe["line"], 3);
    assert!(pipe["message"]
        .as_str()
        .is_some_and(|m| m.contains("Hazen-Williams C = 180")));
    assert!(pipe["fix"].is_string());
}

#[test]
fn upsize_report_lists_input_warnings() {
    let (root, net) = warned_network();
    let out = root.path().join("out");
    let run = analyse("upsize", &net, &out);
    assert!(run.status.code().is_some_and(|c| c <= 1), "{run:?}");
    let md = std::fs::read_to_string(out.join("upsize_report.md")).expect("upsize_report.md");
    assert!(md.contains("## Input warnings"), "{md}");
    assert!(md.contains("`pipes.csv:3`: pipe `P001`"), "{md}");
    let manifest = read_manifest(&out, "upsize").expect("manifest-upsize.toml");
    assert!(
        md.contains(&format!("Run id: {}.", manifest.run_id)),
        "{md}"
    );
    assert!(manifest
        .files
        .iter()
        .any(|f| f.name == "proposed-network/pipes.csv"));
}

#[test]
fn every_file_of_a_run_shares_its_run_id_and_reruns_differ_only_in_it() {
    let (root, net) = warned_network();
    let (a, b) = (root.path().join("a"), root.path().join("b"));
    check(&net, &a);
    check(&net, &b);
    let (ma, mb) = (
        read_manifest(&a, "check").expect("manifest a"),
        read_manifest(&b, "check").expect("manifest b"),
    );
    assert_ne!(ma.run_id, mb.run_id, "two runs share a run id");
    let md = std::fs::read_to_string(a.join("report.md")).expect("report.md");
    assert!(md.contains(&format!("| Run id | {} |", ma.run_id)), "{md}");
    let json = std::fs::read_to_string(a.join("report.json")).expect("report.json");
    assert!(json.contains(&format!("\"run_id\": \"{}\"", ma.run_id)));
    let names: Vec<&str> = ma.files.iter().map(|f| f.name.as_str()).collect();
    assert_eq!(
        names,
        [
            "fireflow.csv",
            "service.csv",
            "weak_mains.csv",
            "report.md",
            "report.html",
            "report.json"
        ]
    );
    // Byte-identical except the run id and the date.
    assert_eq!(
        common::masked_outputs(&a, "check"),
        common::masked_outputs(&b, "check")
    );
}

#[test]
fn a_failed_write_leaves_the_previous_set_byte_identical() {
    let (root, net) = warned_network();
    let out = root.path().join("out");
    check(&net, &out);
    // A folder named report.json (holding the first run's file) is in the way of the last file
    // of the set; the four files before it are staged and must not replace the first run's.
    let json = out.join("report.json");
    let kept = std::fs::read(&json).expect("report.json");
    std::fs::remove_file(&json).expect("remove");
    std::fs::create_dir(&json).expect("a folder named report.json");
    std::fs::write(json.join("keep"), &kept).expect("write");
    let before = snapshot(&out);
    // A different input, so that every other file would change.
    let pipes = std::fs::read_to_string(net.join("pipes.csv")).expect("pipes.csv");
    std::fs::write(net.join("pipes.csv"), pipes.replace(",8,", ",6,")).expect("write");
    let run = check(&net, &out);
    let stderr = String::from_utf8_lossy(&run.stderr);
    assert_eq!(run.status.code(), Some(3), "{stderr}");
    assert!(stderr.contains("report.json"), "{stderr}");
    assert!(stderr.contains("no output file was replaced"), "{stderr}");
    // The run keeps its sweep's journal beside the previous set, so that `--resume` can write
    // the files without sweeping again; nothing else in the folder changed.
    let mut after = snapshot(&out);
    assert!(
        after.remove(Path::new("check-journal.jsonl")).is_some(),
        "the journal is kept when the set could not be written"
    );
    assert!(after == before, "the previous set changed");

    // With the folder out of the way, `--resume` writes the second run's set from the journal.
    std::fs::remove_dir_all(&json).expect("remove the folder");
    let run = firemain(&[
        "check".as_ref(),
        net.as_os_str(),
        "--criteria".as_ref(),
        criteria().as_os_str(),
        "--out".as_ref(),
        out.as_os_str(),
        "--quiet".as_ref(),
        "--resume".as_ref(),
    ]);
    assert!(run.status.code().is_some_and(|c| c <= 1), "{run:?}");
    assert!(json.is_file(), "report.json written");
    assert!(!out.join("check-journal.jsonl").exists(), "journal removed");
}
