//! Pipe upsizing: the cheapest set of main replacements that makes failing hydrants pass.
//!
//! The search is greedy by benefit per cost, with re-evaluation:
//! 1. every hydrant selected is checked on the existing network; the failing ones are the
//!    targets (hydrants already below the floor without fire flow, or whose requirement exceeds
//!    the search cap, cannot be fixed by larger mains and are set aside);
//! 2. each round, the candidates are the pipes on the targets' supply paths (the weak-main
//!    decomposition) at each larger commercial size. A candidate's benefit to a hydrant is the
//!    estimated pressure gain at its binding junction, w·h·(1 − r'/r) (the pipe's part of the
//!    path loss, scaled by the change in its resistance), as a fraction of the hydrant's
//!    deficit, at most 1; its score is the summed benefit over its cost. The best candidates
//!    that serve different hydrants are applied together, and the failing targets are
//!    re-analysed by full fire-flow searches;
//! 3. a pruning pass removes (or shrinks) any upsizing that the targets can do without,
//!    verified by full fire-flow searches, until none can be removed;
//! 4. the proposal is verified by a full check of every selected hydrant.

use std::collections::BTreeMap;

use serde::Serialize;
use thiserror::Error;

use crate::criteria::Criteria;
use crate::fireflow::{sweep, FireFlowSetup, HydrantNote, HydrantResult, Outcome};
use crate::hydraulics::{Hydraulics, SolveError};
use crate::model::{HeadlossFormula, Network, Pipe};
use crate::units::{same_diameter, Quantity, UnitSystem, KPA_PER_M_OF_HEAD};

/// Default candidate sizes, US: 6-24 in nominal (ductile-iron sizes of AWWA C151).
pub const DEFAULT_SIZES_IN: [f64; 9] = [6.0, 8.0, 10.0, 12.0, 14.0, 16.0, 18.0, 20.0, 24.0];
/// Default candidate sizes, SI: DN 150-600 (ISO 6708 preferred values).
pub const DEFAULT_SIZES_MM: [f64; 9] = [
    150.0, 200.0, 250.0, 300.0, 350.0, 400.0, 450.0, 500.0, 600.0,
];
/// Hazen-Williams C of new pipe when the criteria do not say (common practice: 130 for new
/// cement-lined ductile iron is a usual design value; 140 is quoted for it new).
pub const DEFAULT_NEW_PIPE_C: f64 = 130.0;
/// Darcy-Weisbach roughness of new cement-lined ductile-iron pipe when the criteria do not say,
/// m (0.1 mm; from memory: quoted values run 0.03-0.1 mm).
pub const DEFAULT_NEW_PIPE_ROUGHNESS_M: f64 = 1.0e-4;
/// The `material` written for a replaced main in the proposed network.
pub const NEW_MAIN_MATERIAL: &str = "new main (proposed)";
/// Larger sizes tried per pipe and round.
const SIZE_STEPS: usize = 4;
/// Rounds of the greedy search before it stops.
const MAX_ROUNDS: usize = 60;
/// Single upsizings tried per hydrant when completing a plan within a budget.
const COMPLETION_TRIALS: usize = 12;
/// Shares below this are not candidates (1 %).
const MIN_CANDIDATE_SHARE: f64 = 0.01;

#[derive(Debug, Error)]
pub enum UpsizeError {
    #[error("{0}")]
    Solve(#[from] SolveError),
    #[error("cannot start worker threads: {0}")]
    Threads(#[from] rayon::ThreadPoolBuildError),
}

/// How a replacement is priced.
#[derive(Clone, Debug)]
pub enum CostModel {
    /// Cost per unit length by diameter, from a cost table (diameter m, cost per m).
    Table(Vec<(f64, f64)>),
    /// Without a cost table: length × diameter in the network's units (e.g. in·ft), a proxy
    /// for the cost that ranks alternatives but is no currency figure.
    LengthTimesDiameter,
}

impl CostModel {
    /// Cost of laying `length_m` of pipe of `diameter_m`, in the model's unit; `None` when a
    /// cost table has no row for the diameter.
    pub fn cost(&self, units: UnitSystem, length_m: f64, diameter_m: f64) -> Option<f64> {
        match self {
            CostModel::Table(rows) => rows
                .iter()
                .find(|&&(d, _)| same_diameter(d, diameter_m))
                .map(|(_, per_m)| per_m * length_m),
            CostModel::LengthTimesDiameter => Some(
                units.from_si(Quantity::Length, length_m)
                    * units.from_si(Quantity::Diameter, diameter_m),
            ),
        }
    }

    /// The sizes of `sizes_m` (m) that the model cannot price: those without a cost-table row.
    /// The length × diameter proxy prices every size.
    pub fn unpriced(&self, sizes_m: &[f64]) -> Vec<f64> {
        match self {
            CostModel::Table(rows) => sizes_m
                .iter()
                .copied()
                .filter(|&d| !rows.iter().any(|&(t, _)| same_diameter(t, d)))
                .collect(),
            CostModel::LengthTimesDiameter => Vec::new(),
        }
    }

    /// The unit of a cost, for reports.
    pub fn unit_label(&self, units: UnitSystem) -> String {
        match self {
            CostModel::Table(_) => "cost units of the cost table".into(),
            CostModel::LengthTimesDiameter => format!(
                "{}·{} (length × diameter proxy, not a currency figure)",
                units.symbol(Quantity::Diameter),
                units.symbol(Quantity::Length)
            ),
        }
    }
}

/// What to plan.
#[derive(Clone, Debug)]
pub struct UpsizeConfig {
    /// Commercial inside diameters to choose from, m, ascending.
    pub sizes_m: Vec<f64>,
    pub costs: CostModel,
    /// Hydrants to consider (`None`: all).
    pub hydrants: Option<Vec<usize>>,
    /// Largest total cost, in the cost model's unit.
    pub budget: Option<f64>,
    pub threads: Option<usize>,
}

/// One pipe replacement of a plan.
#[derive(Clone, Debug, Serialize)]
pub struct Upsizing {
    pub link: usize,
    pub from_diameter_m: f64,
    pub to_diameter_m: f64,
    pub length_m: f64,
    pub cost: f64,
}

/// A hydrant that upsizing cannot help, and why.
#[derive(Clone, Debug, Serialize)]
pub struct SetAside {
    pub hydrant: usize,
    pub reason: &'static str,
}

/// The result of planning.
#[derive(Clone, Debug)]
pub struct UpsizePlan {
    pub upsizings: Vec<Upsizing>,
    pub total_cost: f64,
    /// Every selected hydrant on the existing network.
    pub before: Vec<HydrantResult>,
    /// Every selected hydrant on the proposed network.
    pub after: Vec<HydrantResult>,
    /// Hydrants that failed before and that the plan aimed at.
    pub targets: Vec<usize>,
    pub set_aside: Vec<SetAside>,
    /// The proposed network.
    pub proposed: Network,
    /// Whether the budget stopped the search before every target passed.
    pub budget_limited: bool,
    /// Hydrant analyses made (each a full fire-flow search).
    pub analyses: usize,
    pub rounds: usize,
}

/// Progress of a planning run, for a progress bar.
#[derive(Clone, Copy, Debug)]
pub enum Progress {
    /// Checking the selected hydrants of the existing network.
    Initial,
    /// Greedy round, with the number of targets still failing.
    Round { round: usize, failing: usize },
    /// Pruning: upsizing `index` of `of` being tried without.
    Pruning { index: usize, of: usize },
    /// Verifying the proposal.
    Verifying,
}

/// Runs the fire-flow search for `hydrants` on `net`.
fn check(
    net: &Network,
    criteria: &Criteria,
    hydrants: &[usize],
    threads: Option<usize>,
    analyses: &mut usize,
) -> Result<Vec<HydrantResult>, UpsizeError> {
    if hydrants.is_empty() {
        return Ok(Vec::new());
    }
    let hydraulics = Hydraulics::new(net)?;
    let setup = FireFlowSetup::new(&hydraulics, criteria)?;
    let (results, _) = sweep(&setup, hydrants, threads, &|_| {})?;
    *analyses += hydrants.len();
    Ok(results)
}

/// Whether every hydrant of `groups` passes on `net`, checking the groups in order and
/// stopping at the first group where one fails.
fn still_pass(
    net: &Network,
    criteria: &Criteria,
    groups: &[Vec<usize>],
    threads: Option<usize>,
    analyses: &mut usize,
) -> Result<bool, UpsizeError> {
    let hydraulics = Hydraulics::new(net)?;
    let setup = FireFlowSetup::new(&hydraulics, criteria)?;
    for group in groups.iter().filter(|g| !g.is_empty()) {
        let (results, _) = sweep(&setup, group, threads, &|_| {})?;
        *analyses += group.len();
        if results.iter().any(|r| r.outcome != Outcome::Pass) {
            return Ok(false);
        }
    }
    Ok(true)
}

/// Resistance ratio r'/r of a pipe replaced by `to_d` with roughness `new_roughness`.
fn resistance_ratio(net: &Network, pipe: &Pipe, to_d: f64, new_roughness: f64) -> f64 {
    match net.headloss {
        HeadlossFormula::HazenWilliams => {
            (pipe.roughness / new_roughness).powf(1.852) * (pipe.diameter_m / to_d).powf(4.8704)
        }
        // Darcy-Weisbach at a similar friction factor: r ∝ D⁻⁵.
        HeadlossFormula::DarcyWeisbach => (pipe.diameter_m / to_d).powi(5),
    }
}

fn pipe_of(net: &Network, link: usize) -> Option<&Pipe> {
    net.links[link].as_pipe()
}

/// Plans upsizings for the failing hydrants of `net`.
pub fn plan_upsizing(
    net: &Network,
    criteria: &Criteria,
    config: &UpsizeConfig,
    progress: &(dyn Fn(Progress) + Sync),
) -> Result<UpsizePlan, UpsizeError> {
    let selection: Vec<usize> = config
        .hydrants
        .clone()
        .unwrap_or_else(|| (0..net.hydrants.len()).collect());
    let mut analyses = 0;
    progress(Progress::Initial);
    let before = check(net, criteria, &selection, config.threads, &mut analyses)?;
    let new_roughness = criteria.new_pipe_roughness.unwrap_or(match net.headloss {
        HeadlossFormula::HazenWilliams => DEFAULT_NEW_PIPE_C,
        HeadlossFormula::DarcyWeisbach => DEFAULT_NEW_PIPE_ROUGHNESS_M,
    });

    // A replacement main serving hydrants is at least the minimum main size.
    let min_main = criteria
        .min_main_diameter_m
        .unwrap_or_else(|| crate::weakmains::default_min_main_diameter_m(net.units))
        * (1.0 - 1e-9);
    let mut targets = Vec::new();
    let mut set_aside = Vec::new();
    for r in before.iter().filter(|r| r.outcome == Outcome::Fail) {
        let static_violation = r
            .notes
            .iter()
            .any(|n| matches!(n, HydrantNote::FloorViolatedWithoutFireFlow { .. }));
        if static_violation {
            set_aside.push(SetAside {
                hydrant: r.hydrant,
                reason: "the floor is violated without fire flow: a source-grade or elevation problem that larger mains do not fix",
            });
        } else if r.required_m3s > criteria.search_cap_m3s {
            set_aside.push(SetAside {
                hydrant: r.hydrant,
                reason: "the required flow is above the criteria's search cap",
            });
        } else {
            targets.push(r.hydrant);
        }
    }

    let mut plan: BTreeMap<usize, f64> = BTreeMap::new();
    let mut current = net.clone();
    let cost_of = |plan: &BTreeMap<usize, f64>| -> f64 {
        plan.iter()
            .map(|(&i, &d)| {
                let len = pipe_of(net, i).map_or(0.0, |p| p.length_m);
                config
                    .costs
                    .cost(net.units, len, d)
                    .unwrap_or(f64::INFINITY)
            })
            .sum()
    };
    let mut latest: BTreeMap<usize, HydrantResult> = before
        .iter()
        .filter(|r| targets.contains(&r.hydrant))
        .map(|r| (r.hydrant, r.clone()))
        .collect();
    let mut budget_limited = false;
    let mut rounds = 0;
    // The hydrants each planned main was chosen for.
    let mut helped: BTreeMap<usize, std::collections::BTreeSet<usize>> = BTreeMap::new();

    while rounds < MAX_ROUNDS {
        let failing: Vec<&HydrantResult> = latest
            .values()
            .filter(|r| r.outcome != Outcome::Pass)
            .collect();
        if failing.is_empty() {
            break;
        }
        rounds += 1;
        progress(Progress::Round {
            round: rounds,
            failing: failing.len(),
        });

        // Candidates: (link, size) -> benefit per hydrant.
        let mut candidates: BTreeMap<(usize, usize), BTreeMap<usize, f64>> = BTreeMap::new();
        for r in &failing {
            let deficit_kpa = r
                .min_pressure_kpa
                .map(|p| (criteria.residual_floor_kpa - p).max(0.0))
                .unwrap_or(f64::INFINITY);
            for share in r
                .supply_paths
                .iter()
                .filter(|s| s.share >= MIN_CANDIDATE_SHARE)
            {
                let Some(pipe) = pipe_of(&current, share.link) else {
                    continue;
                };
                let larger = config
                    .sizes_m
                    .iter()
                    .enumerate()
                    .filter(|(_, &d)| d > pipe.diameter_m * (1.0 + 1e-9) && d >= min_main)
                    .take(SIZE_STEPS);
                for (k, &d) in larger {
                    let ratio = resistance_ratio(&current, pipe, d, new_roughness);
                    let gain_kpa =
                        share.weight * share.headloss_m * (1.0 - ratio) * KPA_PER_M_OF_HEAD;
                    let benefit = if deficit_kpa.is_finite() && deficit_kpa > 0.0 {
                        (gain_kpa / deficit_kpa).min(1.0)
                    } else {
                        0.0
                    };
                    if benefit > 0.0 {
                        candidates
                            .entry((share.link, k))
                            .or_default()
                            .insert(r.hydrant, benefit);
                    }
                }
            }
        }
        // Score = summed benefit / added cost; pick the best candidates serving distinct hydrants.
        let spent = cost_of(&plan);
        let mut scored: Vec<(f64, usize, usize, f64)> = candidates
            .iter()
            .filter_map(|(&(link, k), benefits)| {
                let d = config.sizes_m[k];
                let len = pipe_of(net, link)?.length_m;
                let new_cost = config.costs.cost(net.units, len, d)?;
                let old_cost = plan
                    .get(&link)
                    .and_then(|&d0| config.costs.cost(net.units, len, d0))
                    .unwrap_or(0.0);
                let added = (new_cost - old_cost).max(1e-12);
                let benefit: f64 = benefits.values().sum();
                Some((benefit / added, link, k, added))
            })
            .collect();
        scored.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
        let mut served: Vec<usize> = Vec::new();
        let mut picked: Vec<(usize, usize)> = Vec::new();
        let mut round_cost = 0.0;
        for &(_, link, k, added) in &scored {
            if picked.iter().any(|&(l, _)| l == link) {
                continue;
            }
            let beneficiaries = &candidates[&(link, k)];
            if beneficiaries.keys().any(|h| served.contains(h)) {
                continue;
            }
            if let Some(budget) = config.budget {
                if spent + round_cost + added > budget * (1.0 + 1e-12) {
                    budget_limited = true;
                    continue;
                }
            }
            picked.push((link, k));
            served.extend(beneficiaries.keys());
            round_cost += added;
        }
        if picked.is_empty() {
            break;
        }
        for &(link, k) in &picked {
            plan.insert(link, config.sizes_m[k]);
            helped
                .entry(link)
                .or_default()
                .extend(candidates[&(link, k)].keys().copied());
        }
        current = apply(net, &plan, new_roughness);
        let still: Vec<usize> = failing.iter().map(|r| r.hydrant).collect();
        for r in check(&current, criteria, &still, config.threads, &mut analyses)? {
            latest.insert(r.hydrant, r);
        }
    }

    // Pruning: drop or shrink upsizings the targets can do without.
    let passing_targets = |results: &[HydrantResult]| -> Vec<usize> {
        results
            .iter()
            .filter(|r| r.outcome == Outcome::Pass)
            .map(|r| r.hydrant)
            .collect()
    };
    let mut passing: Vec<usize> = latest
        .values()
        .filter(|r| r.outcome == Outcome::Pass)
        .map(|r| r.hydrant)
        .collect();
    loop {
        let mut changed = false;
        // Most expensive first: those save the most if they can go.
        let mut order: Vec<(usize, f64)> = plan.iter().map(|(&l, &d)| (l, d)).collect();
        order.sort_by(|a, b| {
            let ca = pipe_of(net, a.0).map_or(0.0, |p| p.length_m * a.1);
            let cb = pipe_of(net, b.0).map_or(0.0, |p| p.length_m * b.1);
            cb.total_cmp(&ca).then(a.0.cmp(&b.0))
        });
        for (index, (link, d)) in order.iter().enumerate() {
            progress(Progress::Pruning {
                index: index + 1,
                of: order.len(),
            });
            let original = pipe_of(net, *link).map_or(0.0, |p| p.diameter_m);
            // Try without it, then each smaller size that is still an upsizing.
            let mut options: Vec<Option<f64>> = vec![None];
            options.extend(
                config
                    .sizes_m
                    .iter()
                    .filter(|&&s| {
                        s > original * (1.0 + 1e-9) && s < *d * (1.0 - 1e-9) && s >= min_main
                    })
                    .map(|&s| Some(s)),
            );
            for option in options {
                let mut trial = plan.clone();
                match option {
                    None => {
                        trial.remove(link);
                    }
                    Some(s) => {
                        trial.insert(*link, s);
                    }
                }
                // Only the hydrants that pass with the plan must still pass. Those this main
                // was chosen for are checked first: when the main is needed, one of them fails
                // and the rest need no check.
                let network = apply(net, &trial, new_roughness);
                let (first, rest): (Vec<usize>, Vec<usize>) = passing
                    .iter()
                    .partition(|h| helped.get(link).is_some_and(|set| set.contains(h)));
                if still_pass(
                    &network,
                    criteria,
                    &[first, rest],
                    config.threads,
                    &mut analyses,
                )? {
                    plan = trial;
                    changed = true;
                    break;
                }
            }
        }
        if !changed {
            break;
        }
    }

    // Within a budget the greedy rounds can spend it on partial gains that pass nobody, and
    // pruning then returns them. Try, hydrant by hydrant, the cheapest single upsizing on its
    // supply paths that passes it and fits what is left of the budget.
    if let Some(budget) = config.budget {
        let failing: Vec<usize> = targets
            .iter()
            .copied()
            .filter(|h| !passing.contains(h))
            .collect();
        let network = apply(net, &plan, new_roughness);
        let results = check(&network, criteria, &failing, config.threads, &mut analyses)?;
        for r in results {
            let spent = cost_of(&plan);
            let mut options: Vec<(f64, usize, f64)> = Vec::new();
            for share in r
                .supply_paths
                .iter()
                .filter(|s| s.share >= MIN_CANDIDATE_SHARE)
            {
                let (Some(original), Some(now)) =
                    (pipe_of(net, share.link), pipe_of(&network, share.link))
                else {
                    continue;
                };
                for &d in config
                    .sizes_m
                    .iter()
                    .filter(|&&d| d > now.diameter_m * (1.0 + 1e-9) && d >= min_main)
                {
                    let old = plan
                        .get(&share.link)
                        .and_then(|&d0| config.costs.cost(net.units, original.length_m, d0))
                        .unwrap_or(0.0);
                    if let Some(c) = config.costs.cost(net.units, original.length_m, d) {
                        if spent + c - old <= budget * (1.0 + 1e-12) {
                            options.push((c - old, share.link, d));
                        }
                    }
                }
            }
            options.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
            for &(_, link, d) in options.iter().take(COMPLETION_TRIALS) {
                let mut trial = plan.clone();
                trial.insert(link, d);
                let trial_net = apply(net, &trial, new_roughness);
                let alone = check(
                    &trial_net,
                    criteria,
                    &[r.hydrant],
                    config.threads,
                    &mut analyses,
                )?;
                if alone.first().is_none_or(|a| a.outcome != Outcome::Pass) {
                    continue;
                }
                let all = check(
                    &trial_net,
                    criteria,
                    &targets,
                    config.threads,
                    &mut analyses,
                )?;
                let now = passing_targets(&all);
                if passing.iter().all(|h| now.contains(h)) {
                    plan = trial;
                    passing = now;
                    break;
                }
            }
        }
    }

    progress(Progress::Verifying);
    let proposed = apply(net, &plan, new_roughness);
    let after = check(
        &proposed,
        criteria,
        &selection,
        config.threads,
        &mut analyses,
    )?;
    let upsizings = plan
        .iter()
        .filter_map(|(&link, &d)| {
            let p = pipe_of(net, link)?;
            Some(Upsizing {
                link,
                from_diameter_m: p.diameter_m,
                to_diameter_m: d,
                length_m: p.length_m,
                cost: config.costs.cost(net.units, p.length_m, d)?,
            })
        })
        .collect::<Vec<_>>();
    let total_cost = upsizings.iter().map(|u| u.cost).sum();
    let all_pass = after
        .iter()
        .filter(|r| targets.contains(&r.hydrant))
        .all(|r| r.outcome == Outcome::Pass);
    Ok(UpsizePlan {
        upsizings,
        total_cost,
        before,
        after,
        targets,
        set_aside,
        proposed,
        budget_limited: budget_limited && !all_pass,
        analyses,
        rounds,
    })
}

/// The network with the planned pipes replaced by new pipe of the planned size.
pub fn apply(net: &Network, plan: &BTreeMap<usize, f64>, new_roughness: f64) -> Network {
    let replacements: Vec<(usize, Pipe)> = plan
        .iter()
        .filter_map(|(&link, &d)| {
            let mut p = pipe_of(net, link)?.clone();
            p.diameter_m = d;
            p.roughness = new_roughness;
            p.material = Some(NEW_MAIN_MATERIAL.to_string());
            Some((link, p))
        })
        .collect();
    net.with_pipes_replaced(&replacements)
}
