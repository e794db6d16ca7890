//! The coverage-guided fuzz targets' shared part: each target binary hands its bytes to
//! [`run`] (one loader) or [`solve::run`] (a random small network).
//!
//! The rules a case must keep, and how each file is loaded, are those of the stable harness
//! (`tests/fuzz_loaders.rs`): `tests/fuzzkit/mod.rs` is included here by `#[path]`, so that
//! both judge a case by one definition. A broken rule becomes a panic, which libFuzzer reports
//! as a crash and keeps the input of.

#[path = "../../tests/fuzzkit/mod.rs"]
pub mod fuzzkit;
pub mod solve;

use std::path::Path;
use std::sync::OnceLock;

use firemain::model::Network;
use fuzzkit::{Target, Workspace};

/// The repository root, where the seeds are.
pub fn root() -> &'static Path {
    Path::new(concat!(env!("CARGO_MANIFEST_DIR"), "/.."))
}

/// One workspace and the demo network per process: a case overwrites its target's file only,
/// so copying the seeds once per process (not per case) keeps the executions fast.
fn shared() -> &'static (Workspace, Network) {
    static SHARED: OnceLock<(Workspace, Network)> = OnceLock::new();
    SHARED.get_or_init(|| (Workspace::new(root()), fuzzkit::demo_network(root())))
}

/// Loads `data` as the file `name` of the shared workspace; panics on a broken rule.
pub fn run(name: &str, data: &[u8]) {
    let target = Target::by_name(name).unwrap_or_else(|| panic!("unknown target {name}"));
    let (ws, demo) = shared();
    if let Err(e) = target.run(ws, data, demo) {
        panic!("{name}: {e}");
    }
}
