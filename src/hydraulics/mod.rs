//! Steady-state hydraulics: head-loss laws, the sparse factorization, the gradient algorithm
//! and the control rules. No I/O: data in, numbers out.

pub mod controls;
pub mod demand;
pub mod factor;
pub mod headloss;
pub mod laws;
pub mod solver;

pub use controls::LinkState;
pub use demand::{DemandRelation, PressureDependence};
pub use solver::{FactorSnapshot, Hydraulics, Solution, SolveRequest, Tolerance, Workspace};

use thiserror::Error;

/// Why a steady state could not be found. Elements are named by the user's ids.
#[derive(Debug, Clone, Error)]
pub enum SolveError {
    #[error(
        "no convergence after {iterations} iterations; largest head changes at junctions {}; largest energy imbalance in links {}",
        list_values(.junctions), list_values(.links)
    )]
    NoConvergence {
        iterations: u32,
        /// Junctions with the largest last head change (id, m).
        junctions: Vec<(String, f64)>,
        /// Links with the largest energy residual (id, m).
        links: Vec<(String, f64)>,
    },
    #[error(
        "junctions with demand are cut off from every source: {}{}",
        .junctions.join(", "),
        if .closed_links.is_empty() { String::new() } else { format!(" (closed elements at the cut: {})", .closed_links.join(", ")) }
    )]
    Unsupplied {
        junctions: Vec<String>,
        closed_links: Vec<String>,
    },
    #[error("the network matrix is singular near junctions {}: check that they connect to a source", .junctions.join(", "))]
    Singular { junctions: Vec<String> },
    #[error("internal solver error: {0}")]
    Internal(String),
    /// The ordering or symbolic analysis of the junction matrix failed.
    #[error("internal solver error: {0}")]
    Factor(#[from] factor::FactorError),
    /// [`Hydraulics::with_links_replaced`] was given a network whose nodes or link ends differ.
    #[error("internal solver error: the network's nodes or link ends differ from those the solver was prepared for")]
    TopologyChanged,
}

fn list_values(items: &[(String, f64)]) -> String {
    items
        .iter()
        .map(|(id, v)| format!("{id} ({v:.3e} m)"))
        .collect::<Vec<_>>()
        .join(", ")
}
