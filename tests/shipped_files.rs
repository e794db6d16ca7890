//! The files the project ships load cleanly: every criteria set against a network in its units,
//! and the demo network. (Smoke tests: the demo is invented and never a check value.)

mod common;

use std::path::Path;

use firemain::criteria::load_criteria;
use firemain::model::{load_network, Severity};

fn repo(relative: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(relative)
}

#[test]
fn every_shipped_criteria_set_loads_against_a_network_in_its_units() {
    let us = load_network(&repo("examples/demo-town"))
        .expect("demo town")
        .network;
    let si = common::load("loop_grid");
    let mut checked = 0;
    for entry in std::fs::read_dir(repo("criteria")).expect("criteria folder") {
        let path = entry.expect("entry").path();
        if path.extension().and_then(|e| e.to_str()) != Some("toml") {
            continue;
        }
        let text = std::fs::read_to_string(&path).expect("read");
        let net = if text.contains("units = \"si\"") {
            &si
        } else {
            &us
        };
        if let Err(d) = load_criteria(&path, net) {
            panic!("{} does not load:\n{d}", path.display());
        }
        checked += 1;
    }
    assert!(
        checked >= 3,
        "expected at least three shipped criteria sets"
    );
}

#[test]
fn demo_network_validates_without_errors_or_warnings() {
    let loaded = load_network(&repo("examples/demo-town")).expect("demo town");
    let findings: Vec<String> = loaded
        .diagnostics
        .iter()
        .filter(|d| d.severity != Severity::Note)
        .map(|d| d.to_string())
        .collect();
    assert!(findings.is_empty(), "{findings:#?}");
    assert!(loaded.network.n_junctions > 250);
    assert!(loaded.network.hydrants.len() > 60);
}
