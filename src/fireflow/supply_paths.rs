//! Supply paths of a junction under fire flow: how much of the head lost between the sources
//! and the junction each pipe accounts for.
//!
//! For a failing hydrant, at its required flow, the head lost between the sources and the
//! binding junction b is split over the pipes of b's supply paths by a flow-weighted path
//! decomposition: following the flow backwards from b, each junction passes its weight on to
//! the links that feed it, in proportion to their inflows. A link's weight w is then the
//! fraction of the water reaching b that passed through it, and Σ w·h over the supply links
//! equals the flow-weighted mean head lost on the paths from the sources to b. A pipe's share
//! is its w·h over that sum: the part of b's pressure deficit that is spent in that pipe.
//! (Common practice, no source: the decomposition is exact for a tree and a faithful first-order
//! attribution in loops.)
//!
//! It lives with the fire-flow search, which records each failing hydrant's shares; the weak
//! mains analysis downstream aggregates them.

use crate::hydraulics::Solution;
use crate::model::{LinkKind, Network};

/// Pipes kept per failing hydrant (the largest shares).
pub const PIPES_PER_HYDRANT: usize = 12;
/// One pipe on a failing hydrant's supply paths, at the required flow.
#[derive(Clone, Debug)]
pub struct PipeShare {
    pub link: usize,
    /// Share of the head lost between the sources and the binding junction (0..1).
    pub share: f64,
    /// Fraction of the water reaching the binding junction that passes through this pipe.
    pub weight: f64,
    /// Head loss in the pipe, m.
    pub headloss_m: f64,
    /// Head loss per 1000 length units (m/1000 m = ft/1000 ft).
    pub unit_headloss: f64,
    pub velocity_m_per_s: f64,
}

/// The supply-path pipes of junction `binding` in `sol`, largest share first, at most `keep`.
///
/// In steps: each node's inflowing links, the part of the flow graph upstream of `binding`,
/// the weights passed back through it, then each pipe's share of the head lost.
pub fn supply_path_shares(
    net: &Network,
    sol: &Solution,
    binding: usize,
    keep: usize,
) -> Vec<PipeShare> {
    let inflow_links = inflow_links(net, sol);
    let upstream = upstream_of(binding, &inflow_links);
    let link_weight = link_weights(net, &inflow_links, &upstream, binding);
    let mut shares = pipe_shares(net, sol, &link_weight);
    let total: f64 = shares.iter().map(|s| s.share).sum();
    if total > 0.0 {
        for s in &mut shares {
            s.share /= total;
        }
    }
    shares.sort_by(|a, b| b.share.total_cmp(&a.share).then(a.link.cmp(&b.link)));
    shares.truncate(keep);
    shares
}

/// Per node, the links that flow into it: (link, upstream node, |flow| m³/s).
type InflowLinks = Vec<Vec<(usize, usize, f64)>>;

/// Inflowing links of every node, by flow direction in this solution.
fn inflow_links(net: &Network, sol: &Solution) -> InflowLinks {
    let mut inflow_links: InflowLinks = vec![Vec::new(); net.nodes.len()];
    for (i, l) in net.links.iter().enumerate() {
        let q = sol.flows_m3s[i];
        if l.from == l.to || q == 0.0 {
            continue;
        }
        let (up, down) = if q > 0.0 {
            (l.from, l.to)
        } else {
            (l.to, l.from)
        };
        inflow_links[down].push((i, up, q.abs()));
    }
    inflow_links
}

/// The upstream part of the flow graph, walked backwards from the binding junction.
fn upstream_of(binding: usize, inflow_links: &InflowLinks) -> Vec<bool> {
    let mut upstream = vec![false; inflow_links.len()];
    upstream[binding] = true;
    let mut stack = vec![binding];
    while let Some(k) = stack.pop() {
        for &(_, up, _) in &inflow_links[k] {
            if !upstream[up] {
                upstream[up] = true;
                stack.push(up);
            }
        }
    }
    upstream
}

/// Each link's weight: the fraction of the water reaching `binding` that passed through it.
/// A node passes its weight on once every node it feeds inside that part has passed theirs
/// (Kahn's order; flow runs downhill except across pumps, so heads alone cannot order it).
fn link_weights(
    net: &Network,
    inflow_links: &InflowLinks,
    upstream: &[bool],
    binding: usize,
) -> Vec<f64> {
    let n = inflow_links.len();
    let mut pending = vec![0usize; n];
    for k in (0..n).filter(|&k| upstream[k]) {
        for &(_, up, _) in &inflow_links[k] {
            pending[up] += 1;
        }
    }
    let mut node_weight = vec![0.0; n];
    let mut link_weight = vec![0.0; net.links.len()];
    node_weight[binding] = 1.0;
    let mut ready: Vec<usize> = (0..n).filter(|&k| upstream[k] && pending[k] == 0).collect();
    while let Some(node) = ready.pop() {
        let w = node_weight[node];
        let feeds_on = node < net.n_junctions;
        let total: f64 = inflow_links[node].iter().map(|&(_, _, q)| q).sum();
        for &(i, up, q) in &inflow_links[node] {
            if feeds_on && w > 0.0 && total > 0.0 {
                let share = w * q / total;
                link_weight[i] += share;
                node_weight[up] += share;
            }
            pending[up] -= 1;
            if pending[up] == 0 {
                ready.push(up);
            }
        }
    }
    link_weight
}

/// Every pipe with a weight, its share not yet normalised: weight × head loss.
fn pipe_shares(net: &Network, sol: &Solution, link_weight: &[f64]) -> Vec<PipeShare> {
    net.links
        .iter()
        .enumerate()
        .filter_map(|(i, l)| {
            let LinkKind::Pipe(p) = &l.kind else {
                return None;
            };
            let w = link_weight[i];
            if w <= 0.0 {
                return None;
            }
            let h = sol.headloss_m(net, i).abs();
            Some(PipeShare {
                link: i,
                share: w * h,
                weight: w,
                headloss_m: h,
                unit_headloss: if p.length_m > 0.0 {
                    h / p.length_m * 1000.0
                } else {
                    0.0
                },
                velocity_m_per_s: sol.velocity_m_per_s(net, i).abs(),
            })
        })
        .collect()
}
