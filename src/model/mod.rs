//! The network model: reading the files, checking them, and the immutable SI network.

pub mod costs;
pub mod diagnostic;
pub mod limits;
pub mod load;
pub mod network;
pub mod table;
pub mod toml_input;
pub mod validate;

pub use diagnostic::{Diagnostic, Diagnostics, Location, Severity};
pub use load::{load_network, Loaded};
pub use network::{
    DemandFactors, HeadlossFormula, Hydrant, Link, LinkKind, Network, Node, NodeKind, Pipe,
    PipeStatus, Pump, Valve, ValveKind, ValveStatus,
};

/// The files of a network folder, in the order a copy of the network lists them: `model.toml`
/// and the tables of docs/network-format.md. The first four are required; `hydrants.csv`,
/// `pumps.csv` and `valves.csv` may be absent.
pub const NETWORK_FILES: [&str; 7] = [
    "model.toml",
    "junctions.csv",
    "sources.csv",
    "pipes.csv",
    "hydrants.csv",
    "pumps.csv",
    "valves.csv",
];

/// The bytes of every [`NETWORK_FILES`] file present in `dir`, as (name, bytes), to copy a
/// network unchanged.
pub fn read_network_files(dir: &std::path::Path) -> std::io::Result<Vec<(String, Vec<u8>)>> {
    let mut files = Vec::new();
    for name in NETWORK_FILES {
        let path = dir.join(name);
        if path.exists() {
            files.push((name.to_string(), std::fs::read(&path)?));
        }
    }
    Ok(files)
}
