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
pub use solver::{
    FactorSnapshot, Hydraulics, Region, Solution, SolveRequest, Tolerance, Workspace,
};

use thiserror::Error;

use crate::model::diagnostic::quoted;

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
        quoted_list(.junctions),
        if .closed_links.is_empty() { String::new() } else { format!(" (closed elements at the cut: {})", quoted_list(.closed_links)) }
    )]
    Unsupplied {
        junctions: Vec<String>,
        closed_links: Vec<String>,
    },
    #[error("the network matrix is singular near junctions {}: check that they connect to a source", quoted_list(.junctions))]
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

impl SolveError {
    /// The message in the network's units: head changes and energy residuals in its length
    /// unit, at most six significant digits (the `Display` form gives them in metres).
    pub fn describe(&self, units: crate::units::UnitSystem) -> String {
        use crate::units::{display_value, Quantity};
        let list = |items: &[(String, f64)]| {
            items
                .iter()
                .map(|(id, v)| {
                    format!(
                        "{} ({} {})",
                        quoted(id),
                        display_value(units.from_si(Quantity::Length, *v)),
                        units.symbol(Quantity::Length)
                    )
                })
                .collect::<Vec<_>>()
                .join(", ")
        };
        match self {
            SolveError::NoConvergence {
                iterations,
                junctions,
                links,
            } => format!(
                "no convergence after {iterations} iterations; largest head changes at junctions {}; largest energy imbalance in links {}",
                list(junctions),
                list(links)
            ),
            other => other.to_string(),
        }
    }
}

/// Ids in a message, each quoted as every message quotes input text (docs/network-format.md §5).
fn quoted_list(ids: &[String]) -> String {
    ids.iter()
        .map(|id| quoted(id))
        .collect::<Vec<_>>()
        .join(", ")
}

fn list_values(items: &[(String, f64)]) -> String {
    items
        .iter()
        .map(|(id, v)| format!("{} ({v:.3e} m)", quoted(id)))
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::SolveError;
    use crate::units::UnitSystem;

    #[test]
    fn a_convergence_failure_is_described_in_the_network_units() {
        // 10.5156 m = 34.5 ft exactly (1 ft = 0.3048 m, international foot, 1959).
        let e = SolveError::NoConvergence {
            iterations: 200,
            junctions: vec![("J1".into(), 10.5156)],
            links: vec![("P1".into(), 0.3048e-2)],
        };
        let us = e.describe(UnitSystem::Us);
        assert!(
            us.contains("`J1` (34.5 ft)") && us.contains("`P1` (0.01 ft)"),
            "{us}"
        );
        let si = e.describe(UnitSystem::Si);
        assert!(si.contains("`J1` (10.5156 m)"), "{si}");
    }
}
