//! Tank storage for a fire-flow check with the feeding tanks drawn down: the usable volume of
//! a cylindrical tank, the level a tank reaches after a fire of some duration, and the network
//! with its tanks at given levels.
//!
//! **Method (a screening approximation, quasi-steady).** The network is solved with the fire
//! flow and the tanks at their given grades; each tank's outflow Q (the sum of the flows of its
//! links away from it) is taken as constant for the fire's duration T, so that its level falls
//! by Q·T/A (A = π D²/4, a cylinder), and is clamped at `min_level`. The caller then checks the
//! fire flow again with the tanks at those end levels ([`drawn_down`]). Outflows in fact fall as
//! the level drops and other sources take over, so the end level is on the low (safe) side for
//! the tank itself; a tank that fills during the fire keeps its starting level (no credit taken
//! for filling). A tank that reaches `min_level` before the end is held there: whether its
//! usable volume lasts the duration is [`time_to_min_level_s`]'s question, to be asked
//! alongside. Common practice, no source; an extended-period simulation would replace it.

use std::f64::consts::PI;

use thiserror::Error;

use crate::hydraulics::Solution;
use crate::model::{Network, Node, NodeKind};

/// Why a storage computation cannot be made (elements named by the user's ids).
#[derive(Debug, Clone, Error, PartialEq)]
pub enum StorageError {
    #[error("`{0}` is not a tank")]
    NotATank(String),
    #[error("tank `{0}` has no `{1}` in sources.csv")]
    Missing(String, &'static str),
    #[error("the level {1} m for tank `{0}` is not a finite number")]
    BadLevel(String, f64),
    #[error("the duration is not a finite number of at least zero seconds")]
    BadDuration,
}

/// Plan area of a cylindrical tank of inside diameter `diameter_m`, m²: A = π D²/4.
fn area_m2(diameter_m: f64) -> f64 {
    PI * diameter_m * diameter_m / 4.0
}

fn storage_of(tank: &Node) -> Result<&crate::model::TankStorage, StorageError> {
    if tank.kind != NodeKind::Tank {
        return Err(StorageError::NotATank(tank.id.clone()));
    }
    tank.storage
        .as_ref()
        .ok_or_else(|| StorageError::Missing(tank.id.clone(), "diameter"))
}

/// A tank's diameter and lowest level, m, or which is missing.
fn diameter_and_min_level(tank: &Node) -> Result<(f64, f64), StorageError> {
    let s = storage_of(tank)?;
    let d = s
        .diameter_m
        .ok_or_else(|| StorageError::Missing(tank.id.clone(), "diameter"))?;
    let lo = s
        .min_level_m
        .ok_or_else(|| StorageError::Missing(tank.id.clone(), "min_level"))?;
    Ok((d, lo))
}

/// Usable storage of a cylindrical tank between its `min_level` and `max_level`, m³:
/// V = π/4 · D² · (max_level − min_level).
pub fn usable_storage_m3(tank: &Node) -> Result<f64, StorageError> {
    let (d, lo) = diameter_and_min_level(tank)?;
    let hi = storage_of(tank)?
        .max_level_m
        .ok_or_else(|| StorageError::Missing(tank.id.clone(), "max_level"))?;
    Ok(area_m2(d) * (hi - lo))
}

/// Net outflow of node `node` into the network in the solution `sol`, m³/s: the flows of its
/// links away from it, minus those towards it.
pub fn outflow_m3s(net: &Network, sol: &Solution, node: usize) -> f64 {
    net.links
        .iter()
        .zip(&sol.flows_m3s)
        .map(|(l, &q)| {
            if l.from == l.to {
                0.0
            } else if l.from == node {
                q
            } else if l.to == node {
                -q
            } else {
                0.0
            }
        })
        .sum()
}

/// The level of `tank` after `duration_s` seconds of a constant outflow `outflow_m3s` from its
/// grade (the level at the start), m: grade − Q·T/A, clamped at `min_level`; an inflow
/// (Q < 0) keeps the starting level (see the module documentation).
pub fn end_level_m(tank: &Node, outflow_m3s: f64, duration_s: f64) -> Result<f64, StorageError> {
    if !(duration_s.is_finite() && duration_s >= 0.0) {
        return Err(StorageError::BadDuration);
    }
    let (d, lo) = diameter_and_min_level(tank)?;
    let start = tank.grade_m.unwrap_or(tank.elevation_m);
    let drop = outflow_m3s.max(0.0) * duration_s / area_m2(d);
    Ok((start - drop).max(lo))
}

/// Seconds until `tank` reaches `min_level` at a constant outflow `outflow_m3s` from its
/// grade: (grade − min_level)·A/Q; `None` when it does not drain (Q ≤ 0).
pub fn time_to_min_level_s(tank: &Node, outflow_m3s: f64) -> Result<Option<f64>, StorageError> {
    let (d, lo) = diameter_and_min_level(tank)?;
    let start = tank.grade_m.unwrap_or(tank.elevation_m);
    Ok((outflow_m3s > 0.0).then(|| (start - lo).max(0.0) * area_m2(d) / outflow_m3s))
}

/// Every tank with storage data, at its end level after `duration_s` seconds of the outflow it
/// has in `sol` (the solve of the fire flow, tanks at their grades): (node index, grade m),
/// for [`drawn_down`]. Tanks without `diameter` or `min_level` are left out.
pub fn end_levels(
    net: &Network,
    sol: &Solution,
    duration_s: f64,
) -> Result<Vec<(usize, f64)>, StorageError> {
    let mut out = Vec::new();
    for (i, node) in net.nodes.iter().enumerate().skip(net.n_junctions) {
        let complete = node
            .storage
            .is_some_and(|s| s.diameter_m.is_some() && s.min_level_m.is_some());
        if node.kind == NodeKind::Tank && complete {
            out.push((i, end_level_m(node, outflow_m3s(net, sol, i), duration_s)?));
        }
    }
    Ok(out)
}

/// The network with the tanks `grades` (node index, water-surface grade m) at those grades:
/// solve it (a new `Hydraulics`, whose source grades are read from it) to check a fire flow
/// with the tanks drawn down.
pub fn drawn_down(net: &Network, grades: &[(usize, f64)]) -> Result<Network, StorageError> {
    let mut out = net.clone();
    for &(i, grade) in grades {
        let node = out
            .nodes
            .get_mut(i)
            .filter(|n| n.kind == NodeKind::Tank)
            .ok_or_else(|| {
                StorageError::NotATank(
                    net.nodes
                        .get(i)
                        .map_or_else(|| i.to_string(), |n| n.id.clone()),
                )
            })?;
        if !grade.is_finite() {
            return Err(StorageError::BadLevel(node.id.clone(), grade));
        }
        node.grade_m = Some(grade);
        node.elevation_m = grade;
    }
    Ok(out)
}
