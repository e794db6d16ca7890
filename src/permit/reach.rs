//! The hydrants that may serve a building: those within a hose lay of it.
//!
//! A hose lay is estimated from the straight-line distance times a factor (a route along the
//! streets is longer than the straight line; the criteria give the factor, 1.0 for a straight
//! lay), and a hydrant is within reach when that estimate is at most the criteria's maximum
//! hose lay. The nearest ones are taken first, up to the criteria's count. Coordinates are those
//! of the network files (hydrant x/y, else its junction's), in the network's length unit.

use crate::model::Network;

/// A hydrant within reach of a building.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct InReach {
    /// Index into `Network::hydrants`.
    pub hydrant: usize,
    /// Estimated hose lay, m: straight-line distance × the factor.
    pub hose_lay_m: f64,
}

/// How far a hose lay may run and how many hydrants may flow together.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Reach {
    /// Hose lay over straight-line distance (at least 1).
    pub factor: f64,
    /// Longest hose lay, m.
    pub max_hose_lay_m: f64,
    /// Most hydrants flowing together.
    pub max_hydrants: usize,
}

/// The position of a hydrant on the map: its own, else its junction's.
pub fn hydrant_position(net: &Network, hydrant: usize) -> Option<[f64; 2]> {
    let h = &net.hydrants[hydrant];
    h.position.or(net.nodes[h.junction].position)
}

/// The hydrants within reach of `at` (m, in the network's coordinates converted to metres by
/// `metres_per_unit`), nearest first, at most `reach.max_hydrants`; ties by hydrant order, so
/// the choice is deterministic. Two hydrants on the same junction count once: flowing both draws
/// from one point of the network.
pub fn hydrants_in_reach(
    net: &Network,
    at: [f64; 2],
    metres_per_unit: f64,
    reach: &Reach,
) -> Vec<InReach> {
    let mut found: Vec<InReach> = (0..net.hydrants.len())
        .filter_map(|h| {
            let p = hydrant_position(net, h)?;
            let d = ((p[0] - at[0]).powi(2) + (p[1] - at[1]).powi(2)).sqrt() * metres_per_unit;
            let lay = d * reach.factor;
            (lay.is_finite() && lay <= reach.max_hose_lay_m).then_some(InReach {
                hydrant: h,
                hose_lay_m: lay,
            })
        })
        .collect();
    found.sort_by(|a, b| {
        a.hose_lay_m
            .total_cmp(&b.hose_lay_m)
            .then(a.hydrant.cmp(&b.hydrant))
    });
    let mut junctions = Vec::new();
    found.retain(|r| {
        let j = net.hydrants[r.hydrant].junction;
        let new = !junctions.contains(&j);
        junctions.push(j);
        new
    });
    found.truncate(reach.max_hydrants);
    found
}
