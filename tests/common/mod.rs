//! Helpers shared by the integration tests: loading test networks and reading fixtures.
#![allow(dead_code)]

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use firemain::hydraulics::{Hydraulics, Solution, SolveRequest};
use firemain::model::{load_network, Network};

/// Path of a file or folder under `tests/`.
pub fn test_path(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests")
        .join(relative)
}

/// Loads a network under `tests/data/`, panicking with the diagnostics on error.
pub fn load(name: &str) -> Network {
    match load_network(&test_path(&format!("data/{name}"))) {
        Ok(loaded) => loaded.network,
        Err(d) => panic!("{name} did not load:\n{d}"),
    }
}

/// Reads a `kind,id,value` fixture (lines starting with `#` skipped) into a map.
pub fn read_kind_id_value(relative: &str) -> HashMap<(String, String), String> {
    let text = std::fs::read_to_string(test_path(relative)).expect("fixture");
    let mut out = HashMap::new();
    for line in text.lines().filter(|l| !l.starts_with('#')).skip(1) {
        let mut parts = line.splitn(3, ',');
        let (Some(k), Some(id), Some(v)) = (parts.next(), parts.next(), parts.next()) else {
            continue;
        };
        out.insert((k.to_string(), id.to_string()), v.to_string());
    }
    out
}

/// Reads a CSV fixture with a header (lines starting with `#` skipped) into rows of named cells.
pub fn read_rows(relative: &str) -> Vec<HashMap<String, String>> {
    let text = std::fs::read_to_string(test_path(relative)).expect("fixture");
    let mut lines = text.lines().filter(|l| !l.starts_with('#'));
    let header: Vec<String> = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_string)
        .collect();
    lines
        .filter(|l| !l.is_empty())
        .map(|l| {
            header
                .iter()
                .cloned()
                .zip(l.split(',').map(str::to_string))
                .collect()
        })
        .collect()
}

/// Solves `net` at average-day demand from a cold start, panicking on a solver error.
pub fn solve_average(net: &Network) -> Solution {
    let hydraulics = Hydraulics::new(net).expect("prepare");
    let mut ws = hydraulics.workspace();
    let request = SolveRequest {
        demand_factor: 1.0,
        extra_demand: &[],
        fixed_head: None,
    };
    hydraulics
        .solve(&mut ws, &request, &hydraulics.cold_start())
        .expect("solve")
}

/// The files of the set that `command` wrote into `dir`, by name, read through the set's
/// manifest, with the run id and the analysis date masked (`<run-id>`, `<generated>`): two runs
/// on the same input compare equal. Panics if the manifest is missing or a file's size differs
/// from the manifest's.
pub fn masked_outputs(dir: &Path, command: &str) -> std::collections::BTreeMap<String, String> {
    let manifest = firemain::report::set::read_manifest(dir, command)
        .unwrap_or_else(|| panic!("no manifest-{command}.toml in {}", dir.display()));
    manifest
        .files
        .iter()
        .map(|f| {
            let bytes = std::fs::read(dir.join(&f.name)).expect("a file of the manifest");
            assert_eq!(bytes.len() as u64, f.bytes, "size of {}", f.name);
            let text = String::from_utf8_lossy(&bytes);
            (
                f.name.clone(),
                firemain::report::mask_run(&text, &manifest.run_id, &manifest.generated),
            )
        })
        .collect()
}
