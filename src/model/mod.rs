//! The network model: reading the files, checking them, and the immutable SI network.

pub mod buildings;
pub mod costs;
pub mod diagnostic;
pub mod flowtests;
pub mod gis;
pub mod limits;
pub mod load;
pub mod network;
pub mod project;
pub mod table;
pub mod toml_input;
pub mod validate;

pub use diagnostic::{Diagnostic, Diagnostics, Location, Severity};
pub use load::{load_network, read_network_rows, Loaded};
pub use network::{
    DemandFactors, HeadlossFormula, Hydrant, Lateral, Link, LinkKind, Network, Node, NodeKind,
    Pipe, PipeStatus, Pump, TankStorage, Valve, ValveKind, ValveStatus, DEFAULT_LATERAL_C,
    DEFAULT_LATERAL_ROUGHNESS_M,
};

/// The files of a network folder, in the order a copy of the network lists them: `model.toml`
/// and the tables of docs/network-format.md. The first four are required; `hydrants.csv`,
/// `pumps.csv` and `valves.csv` may be absent.
pub const NETWORK_FILES: [&str; 7] = [
    MODEL_FILE,
    JUNCTIONS_FILE,
    SOURCES_FILE,
    PIPES_FILE,
    HYDRANTS_FILE,
    PUMPS_FILE,
    VALVES_FILE,
];
/// The name of each file of a network folder (see [`NETWORK_FILES`]).
pub const MODEL_FILE: &str = "model.toml";
pub const JUNCTIONS_FILE: &str = "junctions.csv";
pub const SOURCES_FILE: &str = "sources.csv";
pub const PIPES_FILE: &str = "pipes.csv";
pub const HYDRANTS_FILE: &str = "hydrants.csv";
pub const PUMPS_FILE: &str = "pumps.csv";
pub const VALVES_FILE: &str = "valves.csv";

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
