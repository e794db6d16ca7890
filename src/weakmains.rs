//! Weak mains: the pipes that starve failing hydrants.
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

use serde::Serialize;

use crate::criteria::Criteria;
use crate::fireflow::{HydrantResult, Outcome};
use crate::hydraulics::Solution;
use crate::model::{HeadlossFormula, LinkKind, Network};
use crate::units::{Quantity, UnitSystem};

/// Pipes kept per failing hydrant (the largest shares).
pub const PIPES_PER_HYDRANT: usize = 12;
/// Unit head loss under fire flow above which a main is flagged, m per 1000 m (= ft per
/// 1000 ft): 10 per 1000 (common practice, no source).
pub const HIGH_UNIT_HEADLOSS: f64 = 10.0;
/// Hazen-Williams C below which a main is flagged as very rough: tuberculation, or a partly
/// closed valve (common practice, no source).
pub const LOW_HW_C: f64 = 80.0;
/// Velocity flagged when the criteria set no limit: 10 ft/s ≈ 3 m/s during fire flow (common
/// practice, no source).
pub const DEFAULT_VELOCITY_FLAG_M_PER_S: f64 = 3.048;
/// Smallest main that should serve hydrants when the criteria do not say: 6 in / 150 mm
/// (common practice; state standards commonly require 6 in, some utilities 8 in).
pub fn default_min_main_diameter_m(units: UnitSystem) -> f64 {
    match units {
        UnitSystem::Us => units.to_si(Quantity::Diameter, 6.0),
        UnitSystem::Si => 0.150,
    }
}

/// One pipe on a failing hydrant's supply paths, at the required flow.
#[derive(Clone, Debug, Serialize)]
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
pub fn supply_path_shares(
    net: &Network,
    sol: &Solution,
    binding: usize,
    keep: usize,
) -> Vec<PipeShare> {
    let n = net.nodes.len();
    // Inflowing links of every node, by flow direction in this solution.
    let mut inflow_links: Vec<Vec<(usize, usize, f64)>> = vec![Vec::new(); n];
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
    // The upstream part of the flow graph, walked backwards from the binding junction.
    let mut upstream = vec![false; n];
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
    // A node passes its weight on once every node it feeds inside that part has passed theirs
    // (Kahn's order; flow runs downhill except across pumps, so heads alone cannot order it).
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
    let mut shares: Vec<PipeShare> = net
        .links
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
        .collect();
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

/// Why a main is flagged.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum WeakReason {
    /// Unit head loss under fire flow above [`HIGH_UNIT_HEADLOSS`].
    HighUnitHeadloss { per_1000: f64 },
    /// Velocity above the criteria's limit (or the common-practice flag without one).
    HighVelocity {
        velocity_m_per_s: f64,
        limit_m_per_s: f64,
        /// Whether the limit is the criteria's (else the common-practice flag).
        criteria_limit: bool,
    },
    /// Diameter below the minimum main size for hydrants.
    SmallDiameter { diameter_m: f64, minimum_m: f64 },
    /// Very low Hazen-Williams C.
    LowRoughnessCoefficient { c: f64 },
}

/// A main that limits failing hydrants, aggregated over all of them.
#[derive(Clone, Debug, Serialize)]
pub struct WeakMain {
    pub link: usize,
    /// Failing hydrants whose supply paths it is on (among their largest shares).
    pub hydrants_limited: usize,
    /// The largest share of a hydrant's head loss it carries.
    pub worst_share: f64,
    /// Its shares summed over the failing hydrants: the ranking key (how much of the failing
    /// hydrants' pressure deficits is spent in this pipe).
    pub total_share: f64,
    pub worst_unit_headloss: f64,
    pub max_velocity_m_per_s: f64,
    pub reasons: Vec<WeakReason>,
}

/// Shares below this are not counted as limiting a hydrant (1 %).
const MIN_SHARE: f64 = 0.01;

/// Aggregates the supply-path pipes of every failing hydrant, ranked by their shares summed
/// over the failing hydrants.
pub fn weak_mains(net: &Network, criteria: &Criteria, results: &[HydrantResult]) -> Vec<WeakMain> {
    let mut by_link: std::collections::BTreeMap<usize, WeakMain> = Default::default();
    for r in results.iter().filter(|r| r.outcome == Outcome::Fail) {
        for s in r.supply_paths.iter().filter(|s| s.share >= MIN_SHARE) {
            let e = by_link.entry(s.link).or_insert(WeakMain {
                link: s.link,
                hydrants_limited: 0,
                worst_share: 0.0,
                total_share: 0.0,
                worst_unit_headloss: 0.0,
                max_velocity_m_per_s: 0.0,
                reasons: Vec::new(),
            });
            e.hydrants_limited += 1;
            e.worst_share = e.worst_share.max(s.share);
            e.total_share += s.share;
            e.worst_unit_headloss = e.worst_unit_headloss.max(s.unit_headloss);
            e.max_velocity_m_per_s = e.max_velocity_m_per_s.max(s.velocity_m_per_s);
        }
    }
    let min_main = criteria
        .min_main_diameter_m
        .unwrap_or_else(|| default_min_main_diameter_m(net.units));
    let velocity_limit = criteria
        .max_velocity_m_per_s
        .unwrap_or(DEFAULT_VELOCITY_FLAG_M_PER_S);
    let mut out: Vec<WeakMain> = by_link
        .into_values()
        .map(|mut w| {
            let LinkKind::Pipe(p) = &net.links[w.link].kind else {
                return w;
            };
            if w.worst_unit_headloss > HIGH_UNIT_HEADLOSS {
                w.reasons.push(WeakReason::HighUnitHeadloss {
                    per_1000: w.worst_unit_headloss,
                });
            }
            if w.max_velocity_m_per_s > velocity_limit {
                w.reasons.push(WeakReason::HighVelocity {
                    velocity_m_per_s: w.max_velocity_m_per_s,
                    limit_m_per_s: velocity_limit,
                    criteria_limit: criteria.max_velocity_m_per_s.is_some(),
                });
            }
            if p.diameter_m < min_main - 1e-9 {
                w.reasons.push(WeakReason::SmallDiameter {
                    diameter_m: p.diameter_m,
                    minimum_m: min_main,
                });
            }
            if net.headloss == HeadlossFormula::HazenWilliams && p.roughness < LOW_HW_C {
                w.reasons
                    .push(WeakReason::LowRoughnessCoefficient { c: p.roughness });
            }
            w
        })
        .collect();
    out.sort_by(|a, b| {
        b.total_share
            .total_cmp(&a.total_share)
            .then(a.link.cmp(&b.link))
    });
    out
}
