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
//! 4. within a budget, the targets still failing are completed one by one: the cheapest single
//!    upsizing on a hydrant's supply paths that passes it and fits what is left of the budget
//!    is kept when every target that passed still passes (the greedy rounds can spend a budget
//!    on partial gains that pass nobody, which pruning then returns);
//! 5. the proposal is verified by a full check of every selected hydrant.
//!
//! Every trial network differs from the existing one in pipe diameters and roughnesses only,
//! so all share its matrix ordering and symbolic analysis
//! ([`Hydraulics::with_links_replaced`]).

use std::collections::{BTreeMap, BTreeSet};

use thiserror::Error;

use crate::criteria::Criteria;
use crate::fireflow::{sweep, FireFlowSetup, HydrantNote, HydrantResult, Outcome, SweepError};
use crate::hydraulics::headloss::{HW_DIAMETER_EXPONENT, HW_FLOW_EXPONENT};
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
    Threads(#[from] SweepError),
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
#[derive(Clone, Debug)]
pub struct Upsizing {
    pub link: usize,
    pub from_diameter_m: f64,
    pub to_diameter_m: f64,
    pub length_m: f64,
    pub cost: f64,
}

/// A hydrant that upsizing cannot help, and why.
#[derive(Clone, Debug)]
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

/// Runs the fire-flow search for `hydrants` on `net`, a network with the topology of `base`'s
/// (whose ordering and symbolic analysis it shares).
fn check(
    base: &Hydraulics<'_>,
    net: &Network,
    criteria: &Criteria,
    hydrants: &[usize],
    threads: Option<usize>,
    analyses: &mut usize,
) -> Result<Vec<HydrantResult>, UpsizeError> {
    if hydrants.is_empty() {
        return Ok(Vec::new());
    }
    let hydraulics = base.with_links_replaced(net)?;
    let setup = FireFlowSetup::new(&hydraulics, criteria)?;
    let (results, _) = sweep(&setup, hydrants, threads, &|_| {})?;
    *analyses += hydrants.len();
    Ok(results)
}

/// Whether every hydrant of `groups` passes on `net`, checking the groups in order and
/// stopping at the first group where one fails (`net` has the topology of `base`'s network).
fn still_pass(
    base: &Hydraulics<'_>,
    net: &Network,
    criteria: &Criteria,
    groups: &[Vec<usize>],
    threads: Option<usize>,
    analyses: &mut usize,
) -> Result<bool, UpsizeError> {
    let hydraulics = base.with_links_replaced(net)?;
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
            (pipe.roughness / new_roughness).powf(HW_FLOW_EXPONENT)
                * (pipe.diameter_m / to_d).powf(HW_DIAMETER_EXPONENT)
        }
        // Darcy-Weisbach at a similar friction factor: r ∝ D⁻⁵.
        HeadlossFormula::DarcyWeisbach => (pipe.diameter_m / to_d).powi(5),
    }
}

fn pipe_of(net: &Network, link: usize) -> Option<&Pipe> {
    net.links[link].as_pipe()
}

/// Plans upsizings for the failing hydrants of `net`, in the steps of the module doc.
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
    progress(Progress::Initial);
    let mut planner = Planner::new(net, criteria, config)?;
    // 1. Targets.
    let before = planner.check(net, &selection)?;
    let (targets, set_aside) = targets_and_set_aside(&before, criteria);
    // 2. Greedy rounds.
    let greedy = planner.greedy_rounds(&before, &targets, progress)?;
    let mut plan = greedy.plan;
    let mut passing = greedy.passing;
    // 3. Pruning.
    planner.prune(&mut plan, &passing, &greedy.helped, progress)?;
    // 4. Completion within the budget.
    if let Some(budget) = config.budget {
        planner.complete_within_budget(&mut plan, &mut passing, &targets, budget)?;
    }
    // 5. Verification.
    progress(Progress::Verifying);
    let proposed = apply(net, &plan, planner.new_roughness);
    let after = planner.check(&proposed, &selection)?;
    let upsizings = planner.upsizings(&plan);
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
        budget_limited: greedy.budget_limited && !all_pass,
        analyses: planner.analyses,
        rounds: greedy.rounds,
    })
}

/// Step 1: the failing hydrants that larger mains can help (the targets), and those they
/// cannot, with the reason.
fn targets_and_set_aside(
    before: &[HydrantResult],
    criteria: &Criteria,
) -> (Vec<usize>, Vec<SetAside>) {
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
    (targets, set_aside)
}

/// Candidate upsizings of a round: (link, size index) → benefit per hydrant served.
type Candidates = BTreeMap<(usize, usize), BTreeMap<usize, f64>>;

/// What the greedy rounds leave.
struct Greedy {
    /// Planned diameter (m) by link.
    plan: BTreeMap<usize, f64>,
    /// The targets that pass with the plan.
    passing: Vec<usize>,
    /// The hydrants each planned main was chosen for.
    helped: BTreeMap<usize, BTreeSet<usize>>,
    /// Whether the budget kept a candidate out.
    budget_limited: bool,
    rounds: usize,
}

/// What every step of planning shares: the inputs, the prepared solver of the existing
/// network (every trial network has its topology) and the count of analyses.
struct Planner<'a> {
    net: &'a Network,
    criteria: &'a Criteria,
    config: &'a UpsizeConfig,
    /// Upsizing changes diameters and roughnesses only: every trial network shares this
    /// solver's ordering and symbolic analysis.
    base: Hydraulics<'a>,
    new_roughness: f64,
    /// A replacement main serving hydrants is at least the minimum main size (m, less a
    /// relative 1e-9 so that the size itself qualifies).
    min_main: f64,
    /// Hydrant analyses made (each a full fire-flow search).
    analyses: usize,
}

impl<'a> Planner<'a> {
    fn new(
        net: &'a Network,
        criteria: &'a Criteria,
        config: &'a UpsizeConfig,
    ) -> Result<Self, UpsizeError> {
        let new_roughness = criteria.new_pipe_roughness.unwrap_or(match net.headloss {
            HeadlossFormula::HazenWilliams => DEFAULT_NEW_PIPE_C,
            HeadlossFormula::DarcyWeisbach => DEFAULT_NEW_PIPE_ROUGHNESS_M,
        });
        let min_main = criteria
            .min_main_diameter_m
            .unwrap_or_else(|| crate::weakmains::default_min_main_diameter_m(net.units))
            * (1.0 - 1e-9);
        Ok(Planner {
            net,
            criteria,
            config,
            base: Hydraulics::new(net)?,
            new_roughness,
            min_main,
            analyses: 0,
        })
    }

    /// Runs the fire-flow search for `hydrants` on `net` (a trial network).
    fn check(
        &mut self,
        net: &Network,
        hydrants: &[usize],
    ) -> Result<Vec<HydrantResult>, UpsizeError> {
        check(
            &self.base,
            net,
            self.criteria,
            hydrants,
            self.config.threads,
            &mut self.analyses,
        )
    }

    /// The existing network with `plan` applied.
    fn apply(&self, plan: &BTreeMap<usize, f64>) -> Network {
        apply(self.net, plan, self.new_roughness)
    }

    /// Total cost of `plan` (infinite when the cost table lacks a planned size).
    fn cost_of(&self, plan: &BTreeMap<usize, f64>) -> f64 {
        plan.iter()
            .map(|(&i, &d)| {
                let len = pipe_of(self.net, i).map_or(0.0, |p| p.length_m);
                self.config
                    .costs
                    .cost(self.net.units, len, d)
                    .unwrap_or(f64::INFINITY)
            })
            .sum()
    }

    /// Step 2: rounds of the best candidates by benefit per cost, each followed by full
    /// fire-flow searches of the targets still failing, until all pass, no candidate is
    /// left, or [`MAX_ROUNDS`].
    fn greedy_rounds(
        &mut self,
        before: &[HydrantResult],
        targets: &[usize],
        progress: &(dyn Fn(Progress) + Sync),
    ) -> Result<Greedy, UpsizeError> {
        let mut plan: BTreeMap<usize, f64> = BTreeMap::new();
        let mut current = self.net.clone();
        let mut latest: BTreeMap<usize, HydrantResult> = before
            .iter()
            .filter(|r| targets.contains(&r.hydrant))
            .map(|r| (r.hydrant, r.clone()))
            .collect();
        let mut budget_limited = false;
        let mut rounds = 0;
        let mut helped: BTreeMap<usize, BTreeSet<usize>> = BTreeMap::new();
        // Whether every pass in `latest` was found on the current plan (none is planned yet).
        let mut passes_current = true;

        while rounds < MAX_ROUNDS {
            let failing: Vec<&HydrantResult> = latest
                .values()
                .filter(|r| r.outcome != Outcome::Pass)
                .collect();
            if failing.is_empty() {
                if passes_current {
                    break;
                }
                self.recheck_passes(&current, &mut latest)?;
                passes_current = true;
                continue;
            }
            rounds += 1;
            progress(Progress::Round {
                round: rounds,
                failing: failing.len(),
            });
            let candidates = self.round_candidates(&failing, &current);
            let picked = self.pick(&candidates, &plan, &mut budget_limited);
            if picked.is_empty() {
                break;
            }
            for &(link, k) in &picked {
                plan.insert(link, self.config.sizes_m[k]);
                helped
                    .entry(link)
                    .or_default()
                    .extend(candidates[&(link, k)].keys().copied());
            }
            current = self.apply(&plan);
            let still: Vec<usize> = failing.iter().map(|r| r.hydrant).collect();
            for r in self.check(&current, &still)? {
                latest.insert(r.hydrant, r);
            }
            passes_current = still.len() == latest.len();
        }
        if !passes_current {
            self.recheck_passes(&current, &mut latest)?;
        }
        let passing = latest
            .values()
            .filter(|r| r.outcome == Outcome::Pass)
            .map(|r| r.hydrant)
            .collect();
        Ok(Greedy {
            plan,
            passing,
            helped,
            budget_limited,
            rounds,
        })
    }

    /// Checks again, on `current`, the targets whose pass in `latest` was found on an earlier
    /// plan: in a looped network a later upsizing can move flow away from a hydrant and lower
    /// its available flow, so a pass is only known for the plan it was found on. Pruning keeps
    /// the passing targets passing, and a stale pass would make it keep upsizings nobody
    /// needs (a case of two sources and a loop, found by the planner's property test).
    fn recheck_passes(
        &mut self,
        current: &Network,
        latest: &mut BTreeMap<usize, HydrantResult>,
    ) -> Result<(), UpsizeError> {
        let passed: Vec<usize> = latest
            .values()
            .filter(|r| r.outcome == Outcome::Pass)
            .map(|r| r.hydrant)
            .collect();
        for r in self.check(current, &passed)? {
            latest.insert(r.hydrant, r);
        }
        Ok(())
    }

    /// The candidates of a round: the pipes of `current` on the failing hydrants' supply paths
    /// at each of the next larger sizes, with their estimated benefit to each hydrant.
    fn round_candidates(&self, failing: &[&HydrantResult], current: &Network) -> Candidates {
        let mut candidates = Candidates::new();
        for r in failing {
            let deficit_kpa = r
                .min_pressure_kpa
                .map(|p| (self.criteria.residual_floor_kpa - p).max(0.0))
                .unwrap_or(f64::INFINITY);
            for share in r
                .supply_paths
                .iter()
                .filter(|s| s.share >= MIN_CANDIDATE_SHARE)
            {
                let Some(pipe) = pipe_of(current, share.link) else {
                    continue;
                };
                let larger = self
                    .config
                    .sizes_m
                    .iter()
                    .enumerate()
                    .filter(|(_, &d)| d > pipe.diameter_m * (1.0 + 1e-9) && d >= self.min_main)
                    .take(SIZE_STEPS);
                for (k, &d) in larger {
                    let ratio = resistance_ratio(current, pipe, d, self.new_roughness);
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
        candidates
    }

    /// The candidates a round applies: by score (summed benefit / added cost), the best ones
    /// that serve distinct hydrants, one size per pipe, within the budget (`budget_limited`
    /// is set when the budget keeps one out).
    fn pick(
        &self,
        candidates: &Candidates,
        plan: &BTreeMap<usize, f64>,
        budget_limited: &mut bool,
    ) -> Vec<(usize, usize)> {
        let (net, config) = (self.net, self.config);
        let spent = self.cost_of(plan);
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
                    *budget_limited = true;
                    continue;
                }
            }
            picked.push((link, k));
            served.extend(beneficiaries.keys());
            round_cost += added;
        }
        picked
    }

    /// Step 3: drops or shrinks upsizings the `passing` targets can do without, most expensive
    /// first, each verified by full fire-flow searches, until none can go.
    fn prune(
        &mut self,
        plan: &mut BTreeMap<usize, f64>,
        passing: &[usize],
        helped: &BTreeMap<usize, BTreeSet<usize>>,
        progress: &(dyn Fn(Progress) + Sync),
    ) -> Result<(), UpsizeError> {
        let net = self.net;
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
                    self.config
                        .sizes_m
                        .iter()
                        .filter(|&&s| {
                            s > original * (1.0 + 1e-9)
                                && s < *d * (1.0 - 1e-9)
                                && s >= self.min_main
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
                    // Only the hydrants that pass with the plan must still pass. Those this
                    // main was chosen for are checked first: when the main is needed, one of
                    // them fails and the rest need no check.
                    let network = self.apply(&trial);
                    let (first, rest): (Vec<usize>, Vec<usize>) = passing
                        .iter()
                        .partition(|h| helped.get(link).is_some_and(|set| set.contains(h)));
                    if still_pass(
                        &self.base,
                        &network,
                        self.criteria,
                        &[first, rest],
                        self.config.threads,
                        &mut self.analyses,
                    )? {
                        *plan = trial;
                        changed = true;
                        break;
                    }
                }
            }
            if !changed {
                return Ok(());
            }
        }
    }

    /// Step 4: within a budget the greedy rounds can spend it on partial gains that pass
    /// nobody, and pruning then returns them. Tries, hydrant by hydrant, the cheapest single
    /// upsizing on its supply paths that passes it and fits what is left of the budget, kept
    /// only when every target that passed still passes.
    fn complete_within_budget(
        &mut self,
        plan: &mut BTreeMap<usize, f64>,
        passing: &mut Vec<usize>,
        targets: &[usize],
        budget: f64,
    ) -> Result<(), UpsizeError> {
        let failing: Vec<usize> = targets
            .iter()
            .copied()
            .filter(|h| !passing.contains(h))
            .collect();
        let network = self.apply(plan);
        let results = self.check(&network, &failing)?;
        for r in results {
            let options = self.completion_options(&r, plan, &network, budget);
            for &(_, link, d) in options.iter().take(COMPLETION_TRIALS) {
                let mut trial = plan.clone();
                trial.insert(link, d);
                let trial_net = self.apply(&trial);
                let alone = self.check(&trial_net, &[r.hydrant])?;
                if alone.first().is_none_or(|a| a.outcome != Outcome::Pass) {
                    continue;
                }
                let all = self.check(&trial_net, targets)?;
                let now: Vec<usize> = all
                    .iter()
                    .filter(|r| r.outcome == Outcome::Pass)
                    .map(|r| r.hydrant)
                    .collect();
                if passing.iter().all(|h| now.contains(h)) {
                    *plan = trial;
                    *passing = now;
                    break;
                }
            }
        }
        Ok(())
    }

    /// The single upsizings on `r`'s supply paths (in `network`, the plan applied) that fit
    /// what is left of the budget: (added cost, link, diameter m), cheapest first.
    fn completion_options(
        &self,
        r: &HydrantResult,
        plan: &BTreeMap<usize, f64>,
        network: &Network,
        budget: f64,
    ) -> Vec<(f64, usize, f64)> {
        let (net, config) = (self.net, self.config);
        let spent = self.cost_of(plan);
        let mut options: Vec<(f64, usize, f64)> = Vec::new();
        for share in r
            .supply_paths
            .iter()
            .filter(|s| s.share >= MIN_CANDIDATE_SHARE)
        {
            let (Some(original), Some(now)) =
                (pipe_of(net, share.link), pipe_of(network, share.link))
            else {
                continue;
            };
            for &d in config
                .sizes_m
                .iter()
                .filter(|&&d| d > now.diameter_m * (1.0 + 1e-9) && d >= self.min_main)
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
        options
    }

    /// Step 5's list of replacements: each planned pipe with its sizes, length and cost.
    fn upsizings(&self, plan: &BTreeMap<usize, f64>) -> Vec<Upsizing> {
        plan.iter()
            .filter_map(|(&link, &d)| {
                let p = pipe_of(self.net, link)?;
                Some(Upsizing {
                    link,
                    from_diameter_m: p.diameter_m,
                    to_diameter_m: d,
                    length_m: p.length_m,
                    cost: self.config.costs.cost(self.net.units, p.length_m, d)?,
                })
            })
            .collect()
    }
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
