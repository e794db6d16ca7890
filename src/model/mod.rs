//! The network model: reading the files, checking them, and the immutable SI network.

pub mod costs;
pub mod diagnostic;
pub mod flowtests;
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
