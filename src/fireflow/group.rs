//! The combined available fire flow of a group of hydrants that flow together (the hydrants
//! within hose-lay reach of one building), in named steps ([`combined_available_flow`]):
//!
//! 1. **Static state**: the shared max-day solution, checked with every flowing hydrant's
//!    junction constrained. If it already violates a constraint, the combined flow is zero.
//! 2. **Cap** ([`GroupSearch::probe_cap`]): the group's cap, the criteria's search cap times the
//!    number of hydrants, is probed; a passing cap is the answer.
//! 3. **Bracket** ([`GroupSearch::bracket`]): the interval between the largest total known to
//!    pass and the smallest known to fail is closed by regula falsi (Illinois variant) on the
//!    binding margin in u = Q^1.852, with bisection below totals that cannot be solved and when
//!    the interpolation stalls, to the single search's accuracy (max(0.5 %, 1 gpm or 0.1 L/s)).
//! 4. **First crossing** ([`GroupSearch::first_crossing`]): when a solve found an element in
//!    another state than the static one, the totals of a grid from zero to the answer are
//!    checked, with every state change between two grid totals located by bisection; a failure
//!    restarts the bracket below it.
//! 5. **Other starts** ([`GroupSearch::other_starts`]): with elements that can change state, the
//!    answer's demands are solved again from the static state and from a cold start; the answer
//!    steps down until every start verifies it.
//! 6. **Binding constraint** ([`classify`]).
//!
//! **Splits.** A trial total Q is shared among the hydrants either evenly (Q/n each) or so that
//! every flowing hydrant has the same residual pressure ([`Split::EqualResidual`], the
//! default). The equal-residual shares are found by Newton steps on the flows of the distinct
//! hydrant junctions: the residual equations p_i − p_last = 0 and Σ q_i = Q are linearised with
//! the response of every junction's head to one more m³/s drawn at each flowing junction (one
//! back-solve per junction with the factorization of the solve just made,
//! [`Hydraulics::demand_response`](crate::hydraulics::Hydraulics::demand_response)), and each
//! Newton step is one ordinary solve. The shares are converged when the flowing hydrants'
//! pressures lie within [`SPLIT_TOLERANCE_KPA`] of each other. A hydrant whose flow would turn
//! negative does not flow (its pressure is below the common residual even without flow; it is
//! still constrained). Hydrants on the same junction share that junction's flow evenly. When
//! the shares do not converge in [`MAX_SPLIT_STEPS`] solves (or the linearisation is not
//! available: a junction pinned by a regulating valve), the total is solved with the even split
//! instead and a note says so.
//!
//! **Laterals.** A hydrant with a lead (`Hydrant::lateral`) is constrained at the hydrant: its
//! pressure is its junction's less the lead's head loss at its own flow ([`lateral_headloss_m`]),
//! and that pressure is the one the split equalises and the one reported.
//!
//! **Verified answers**, as in the single-hydrant search (docs/fire-flow-method.md, "Verified
//! answers"): the reported total is the flow of an ordinary solve (no junction held, controls
//! settled by their own rules, [`Tolerance::SEARCH`]) at exactly the reported demands — every
//! hydrant's share on the reporting grid ([`on_grid`]), the total their sum — which meets every
//! constraint with room for the solve's tolerance ([`verdict`]). The split only chooses the
//! demands; it never enters the verdict, so a split that did not converge costs flow, never
//! safety.
//!
//! **Monotonicity.** Between state changes every head falls when any junction's demand rises
//! (the argument of the single search's first crossing). With the even split every hydrant's
//! demand rises with the total, so the lowest pressures of all totals below the answer are at
//! the answer. With the equal-residual split a share can in principle fall while the total
//! rises; the common residual falls with the total in every case examined, but that is not
//! proven here (from memory): where elements change state the grid of step 4 checks the totals
//! below the answer explicitly.

use thiserror::Error;

use super::lateral::lead_of;
use super::search::{
    binding_of, closing_width, margin, on_grid, solve_or_from_base, tolerance, unsettled_reason,
    verdict, Binding, Continuation,
};
use super::{ConstraintCheck, FireFlowSetup, LimitedBy};
use crate::hydraulics::laws::LinkLaw;
use crate::hydraulics::{Solution, SolveError, SolveRequest, Tolerance, Workspace};
use crate::units::pressure_kpa_from_head_m;

/// Spread of the flowing hydrants' residual pressures at which equal-residual shares count as
/// converged, kPa: 0.2 kPa (0.03 psi), below the 0.1 psi / 1 kPa that reports show (common
/// practice, no source). The split only chooses the demands; the verdict does not depend on it.
pub const SPLIT_TOLERANCE_KPA: f64 = 0.2;
/// Solves allowed to equalise the residual pressures at one total (Newton converges in two or
/// three where the linearisation holds).
pub const MAX_SPLIT_STEPS: u32 = 8;
/// Largest group the search accepts: hydrants within hose-lay reach of one building are a
/// handful; the dense Newton system is sized by it (common practice, no source).
pub const MAX_GROUP_SIZE: usize = 16;
/// Probes allowed in the bracket.
const MAX_PROBES: u32 = 60;
/// Exponent of the supply-curve model of the interpolation (Hazen-Williams, 1/0.54).
const SUPPLY_CURVE_EXPONENT: f64 = crate::hydraulics::headloss::HW_FLOW_EXPONENT;
/// Intervals of the first-crossing grid between zero and the answer (as the single search).
const FIRST_CROSSING_INTERVALS: u32 = 32;
/// Bisections locating a state change between two grid totals.
const STATE_CHANGE_BISECTIONS: u32 = 5;
/// Rounds of first-crossing checks after a failure restarted the bracket.
const FIRST_CROSSING_ROUNDS: u32 = 4;
/// Steps down from an answer that another start does not verify.
const MAX_STEP_DOWNS: u32 = 16;

/// How a group's total flow is shared among its hydrants.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub enum Split {
    /// Every hydrant draws total/n.
    Even,
    /// Every flowing hydrant at the same residual pressure (the default).
    #[default]
    EqualResidual,
}

impl Split {
    pub fn name(self) -> &'static str {
        match self {
            Split::Even => "even",
            Split::EqualResidual => "equal-residual",
        }
    }
}

/// A finding about a group, in SI; the report layer words it in the user's units.
#[derive(Clone, Debug, PartialEq)]
pub enum GroupNote {
    /// The equal-residual shares did not converge at this total (largest such total kept):
    /// it was solved with the even split.
    SplitFellBackToEven { total_m3s: f64, spread_kpa: f64 },
    /// At the answer this hydrant (index into `Network::hydrants`) draws nothing under the
    /// equal-residual split: its pressure is below the others' residual even without flow.
    HydrantNotFlowing { hydrant: usize },
    /// The floor is already violated with no fire flow.
    FloorViolatedWithoutFireFlow { junction: usize, pressure_kpa: f64 },
    /// The velocity limit is already exceeded with no fire flow.
    VelocityExceededWithoutFireFlow { link: usize, velocity_m_per_s: f64 },
    /// A larger total could not be solved; the answer is the largest verified one.
    SolveFailedAbove { total_m3s: f64, reason: String },
    /// The constraints fail at a total below a larger total that meets them.
    NonMonotone { fails_at_m3s: f64 },
    /// Solved from another start, the total found settles in states that violate a
    /// constraint: a lower total that every start verifies is reported.
    OtherStatesFail { first_total_m3s: f64 },
    /// Controls that did not settle (link indices): no answer can be verified.
    UnsettledControls { links: Vec<usize> },
}

/// Why a group cannot be analysed (a request the caller must correct).
#[derive(Debug, Clone, Error, PartialEq)]
pub enum GroupError {
    #[error("a group needs at least one hydrant")]
    Empty,
    #[error("a group of {0} hydrants is more than the {MAX_GROUP_SIZE} allowed")]
    TooLarge(usize),
    #[error("hydrant index {0} is not in the network")]
    UnknownHydrant(usize),
    #[error("hydrant `{0}` is listed twice in the group")]
    Duplicate(String),
    #[error("the total flow is not a finite number of at least zero")]
    BadTotal,
    /// The total could not be solved (the reason in plain words, elements named by id).
    #[error("{0}")]
    Unsolved(String),
}

/// The combined available flow of a group, SI units.
#[derive(Clone, Debug)]
pub struct GroupResult {
    /// Indices into `Network::hydrants`, in the order given.
    pub hydrants: Vec<usize>,
    /// The split asked for.
    pub split: Split,
    /// The largest verified total; `None` when no answer can be verified (the notes say why).
    pub total_m3s: Option<f64>,
    /// Each hydrant's flow at the answer, m³/s, on the reporting grid; they sum to the total.
    pub shares_m3s: Vec<f64>,
    /// Each hydrant's residual pressure at the answer, kPa: at the hydrant, after its lead's
    /// head loss when it has a lateral, else at its junction.
    pub residual_kpa: Vec<f64>,
    /// Each hydrant's pressure with no fire flow (max day), kPa.
    pub static_kpa: Vec<f64>,
    pub limited_by: Option<LimitedBy>,
    /// The junction that binds (system-pressure or hydrant-pressure).
    pub critical_junction: Option<usize>,
    /// The pipe that binds (velocity).
    pub critical_link: Option<usize>,
    pub notes: Vec<GroupNote>,
    /// Hydraulic solves spent.
    pub solves: u32,
}

/// The group's pressures at one given total (a needed flow), SI units.
#[derive(Clone, Debug)]
pub struct GroupPoint {
    pub hydrants: Vec<usize>,
    pub split: Split,
    /// The total solved: the sum of the shares, on the reporting grid (at most the total
    /// asked for, by the grid's rounding).
    pub total_m3s: f64,
    pub shares_m3s: Vec<f64>,
    /// Each hydrant's pressure, kPa (after its lead, as in [`GroupResult::residual_kpa`]).
    pub residual_kpa: Vec<f64>,
    /// Lowest constrained pressure, kPa (a hydrant's after its lead), and its junction.
    pub lowest_kpa: f64,
    pub lowest_junction: usize,
    /// Highest open-pipe velocity, m/s, and its pipe, when the criteria set a limit.
    pub highest_velocity: Option<(f64, usize)>,
    /// Every constraint met with room for the solve's tolerance (from every start, with
    /// elements that can change state).
    pub passes: bool,
    pub notes: Vec<GroupNote>,
    pub solves: u32,
}

/// An ordinary solve at one total, with its demands.
#[derive(Clone)]
struct GPoint {
    /// The sum of `demands`.
    total: f64,
    /// Each hydrant's flow, on the reporting grid.
    demands: Vec<f64>,
    sol: Solution,
    check: ConstraintCheck,
    fails: Option<Binding>,
}

impl GPoint {
    fn passes(&self) -> bool {
        self.fails.is_none()
    }
}

/// Above the largest passing total: a failing point or a total that could not be solved.
enum Above {
    Failing(GPoint),
    Unsolved { total: f64, reason: String },
}

impl Above {
    fn total(&self) -> f64 {
        match self {
            Above::Failing(p) => p.total,
            Above::Unsolved { total, .. } => *total,
        }
    }
}

enum ProbeError {
    Solve(SolveError),
    Unsettled(Vec<usize>),
}

struct GroupSearch<'s, 'a> {
    setup: &'s FireFlowSetup<'a>,
    ws: &'s mut Workspace,
    split: Split,
    /// Indices into `Network::hydrants`.
    hydrants: Vec<usize>,
    /// Each hydrant's junction.
    junctions: Vec<usize>,
    /// Each hydrant's lateral head-loss law, when it has a lateral.
    laterals: Vec<Option<LinkLaw>>,
    /// The distinct junctions, and for each hydrant the index of its junction there.
    distinct: Vec<usize>,
    slot_of: Vec<usize>,
    unsettled: Vec<usize>,
    states_changed: bool,
    fallback: Option<(f64, f64)>,
    solves: u32,
}

impl GroupSearch<'_, '_> {
    fn units(&self) -> crate::units::UnitSystem {
        self.setup.network().units
    }

    /// Each hydrant's flow on the reporting grid from the flows of the distinct junctions
    /// (hydrants on one junction share its flow evenly).
    fn demands_of(&self, junction_flows: &[f64]) -> Vec<f64> {
        let mut count = vec![0usize; self.distinct.len()];
        for &k in &self.slot_of {
            count[k] += 1;
        }
        self.slot_of
            .iter()
            .map(|&k| on_grid(junction_flows[k].max(0.0) / count[k] as f64, self.units()))
            .collect()
    }

    /// One ordinary solve at exactly `demands` to `tolerance`, checked.
    fn solve_demands(
        &mut self,
        demands: &[f64],
        start: &Solution,
        tolerance: Tolerance,
    ) -> Result<GPoint, ProbeError> {
        self.ws.set_tolerance(tolerance);
        let extra: Vec<(usize, f64)> = self
            .junctions
            .iter()
            .zip(demands)
            .filter(|(_, &q)| q > 0.0)
            .map(|(&j, &q)| (j, q))
            .collect();
        let request = SolveRequest {
            demand_factor: self.setup.demand_factor,
            extra_demand: &extra,
            fixed_head: None,
        };
        let (outcome, attempts) = solve_or_from_base(self.setup, self.ws, &request, start);
        self.solves += attempts;
        let sol = outcome.map_err(ProbeError::Solve)?;
        if sol.states != self.setup.base.states {
            self.states_changed = true;
        }
        if !sol.unsettled.is_empty() {
            for &i in &sol.unsettled {
                if !self.unsettled.contains(&i) {
                    self.unsettled.push(i);
                }
            }
            return Err(ProbeError::Unsettled(sol.unsettled));
        }
        let check = self.with_laterals(
            self.setup.constraints_for(&sol, &self.distinct),
            &sol,
            demands,
        );
        let fails = verdict(self.setup, &check, tolerance);
        if let Some(continuation) = Continuation::of(&check, tolerance, fails) {
            let tighter = self.solve_demands(demands, &sol, continuation.tolerance);
            if let Some(outcome) = continuation.outcome(tighter) {
                return outcome;
            }
        }
        Ok(GPoint {
            total: demands.iter().sum(),
            demands: demands.to_vec(),
            sol,
            check,
            fails,
        })
    }

    /// An ordinary solve at total `q` with the group's split, started from `near` (its
    /// solution and its shares).
    fn evaluate(&mut self, q: f64, near: &GPoint) -> Result<GPoint, ProbeError> {
        let n = self.distinct.len();
        let even: Vec<f64> = {
            // Even per hydrant: a junction with two hydrants takes two shares.
            let mut f = vec![0.0; n];
            for &k in &self.slot_of {
                f[k] += q / self.junctions.len() as f64;
            }
            f
        };
        if self.split == Split::Even || n == 1 || q <= 0.0 {
            let demands = self.demands_of(&even);
            return self.solve_demands(&demands, &near.sol, Tolerance::SEARCH);
        }
        let mut flows = self.shares_from(near, q).unwrap_or_else(|| even.clone());
        let mut start = near.sol.clone();
        let mut spread = f64::INFINITY;
        for step in 0..MAX_SPLIT_STEPS {
            let demands = self.demands_of(&flows);
            let p = match self.solve_demands(&demands, &start, Tolerance::SEARCH) {
                Ok(p) => p,
                // Shares a Newton step proposed that cannot be solved: the even split decides
                // whether the total itself can.
                Err(ProbeError::Solve(_)) if step > 0 => break,
                Err(e) => return Err(e),
            };
            let pressures = self.junction_pressures(&p.sol, &p.demands);
            let (s, balanced) = spread_of(&pressures, &flows);
            spread = s;
            if balanced {
                return Ok(p);
            }
            let Some(next) = self.newton_step(&pressures, &flows, q) else {
                break;
            };
            flows = next;
            start = p.sol;
        }
        let entry = self.fallback.get_or_insert((q, spread));
        if q >= entry.0 {
            *entry = (q, spread);
        }
        let demands = self.demands_of(&even);
        self.solve_demands(&demands, &near.sol, Tolerance::SEARCH)
    }

    /// The distinct junctions' flows of `near`, scaled to total `q`.
    fn shares_from(&self, near: &GPoint, q: f64) -> Option<Vec<f64>> {
        if near.total <= 0.0 {
            return None;
        }
        let mut f = vec![0.0; self.distinct.len()];
        for (i, &k) in self.slot_of.iter().enumerate() {
            f[k] += near.demands[i] * q / near.total;
        }
        Some(f)
    }

    /// The pressure of each distinct junction's hydrants, kPa: the lowest at the hydrants
    /// themselves (after their laterals) at the flows `demands`.
    fn junction_pressures(&self, sol: &Solution, demands: &[f64]) -> Vec<f64> {
        let mut out = vec![f64::INFINITY; self.distinct.len()];
        for (i, &k) in self.slot_of.iter().enumerate() {
            out[k] = out[k].min(self.hydrant_kpa(sol, i, demands[i]));
        }
        out
    }

    /// Pressure at hydrant `i` (index in the group) drawing `q`, kPa: its junction's pressure
    /// less its lateral's head loss at that flow.
    fn hydrant_kpa(&self, sol: &Solution, i: usize, q: f64) -> f64 {
        let p = sol.pressure_kpa(self.setup.network(), self.junctions[i]);
        match &self.laterals[i] {
            Some(law) => p - pressure_kpa_from_head_m(law.headloss(q)),
            None => p,
        }
    }

    /// The largest rate of change of a lateral's loss at distinct junction `k` with the
    /// junction's flow `q_k`, kPa per m³/s (each of its `c` hydrants draws q_k/c).
    fn lateral_slope_kpa(&self, k: usize, q_k: f64) -> f64 {
        let c = self.slot_of.iter().filter(|&&s| s == k).count().max(1) as f64;
        self.slot_of
            .iter()
            .zip(&self.laterals)
            .filter(|(&s, _)| s == k)
            .filter_map(|(_, law)| law.as_ref())
            .map(|law| pressure_kpa_from_head_m(law.evaluate(q_k / c).1) / c)
            .fold(0.0, f64::max)
    }

    /// The constraint check with every hydrant's own pressure taken after its lateral: a
    /// hydrant whose pressure is below the lowest constrained junction's becomes the binding
    /// one (at its junction).
    fn with_laterals(
        &self,
        mut check: ConstraintCheck,
        sol: &Solution,
        demands: &[f64],
    ) -> ConstraintCheck {
        let floor = self.setup.criteria.residual_floor_kpa;
        for (i, &q) in demands.iter().enumerate() {
            if self.laterals[i].is_none() || sol.isolated.contains(&self.junctions[i]) {
                continue;
            }
            let margin = self.hydrant_kpa(sol, i, q) - floor;
            if margin < check.pressure_margin_kpa {
                check.pressure_margin_kpa = margin;
                check.pressure_junction = self.junctions[i];
            }
        }
        check
    }

    /// The margin of `binding` at point `p`: for a pressure, the lowest of the junction and
    /// its hydrants (after their laterals).
    fn margin_at(&self, p: &GPoint, binding: Binding) -> f64 {
        let base = margin(self.setup, &p.sol, binding);
        let Binding::Pressure(j) = binding else {
            return base;
        };
        let floor = self.setup.criteria.residual_floor_kpa;
        (0..self.junctions.len())
            .filter(|&i| self.junctions[i] == j)
            .map(|i| self.hydrant_kpa(&p.sol, i, p.demands[i]) - floor)
            .fold(base, f64::min)
    }

    /// One Newton step on the flows of the flowing junctions towards equal pressures with
    /// the sum `q`; a junction whose flow would turn negative stops flowing, one that does not
    /// flow joins again when its pressure is above the common residual. `None` when the
    /// linearisation is not available or singular.
    fn newton_step(&mut self, pressures: &[f64], flows: &[f64], q: f64) -> Option<Vec<f64>> {
        let common = common_residual(pressures, flows)?;
        let active: Vec<usize> = (0..flows.len())
            .filter(|&k| flows[k] > 0.0 || pressures[k] > common + SPLIT_TOLERANCE_KPA)
            .collect();
        let m = active.len();
        if m == 0 {
            return None;
        }
        // dp_a/dq_b, kPa per m³/s: one back-solve per flowing junction.
        let mut jac = vec![vec![0.0; m]; m];
        for (col, &b) in active.iter().enumerate() {
            let (dh, _) = self
                .setup
                .hydraulics
                .demand_response(self.ws, self.distinct[b])?;
            for (row, &a) in active.iter().enumerate() {
                jac[row][col] = pressure_kpa_from_head_m(dh[self.distinct[a]]);
            }
            jac[col][col] -= self.lateral_slope_kpa(b, flows[b]);
        }
        // Rows: (p_a − p_last) linearised to zero, then Σ δq = q − Σ q.
        let last = m - 1;
        let mut a = vec![vec![0.0; m + 1]; m];
        for row in 0..last {
            for col in 0..m {
                a[row][col] = jac[row][col] - jac[last][col];
            }
            a[row][m] = pressures[active[last]] - pressures[active[row]];
        }
        a[last][..m].fill(1.0);
        let sum: f64 = active.iter().map(|&k| flows[k]).sum();
        a[last][m] = q - sum;
        let step = solve_dense(a)?;
        let mut next = vec![0.0; flows.len()];
        for (i, &k) in active.iter().enumerate() {
            next[k] = (flows[k] + step[i]).max(0.0);
        }
        let total: f64 = next.iter().sum();
        if !(total > 0.0 && total.is_finite()) {
            return None;
        }
        Some(next.iter().map(|f| f * q / total).collect())
    }
}

/// The lowest pressure of the flowing junctions, `None` when none flows.
fn common_residual(pressures: &[f64], flows: &[f64]) -> Option<f64> {
    (0..flows.len())
        .filter(|&k| flows[k] > 0.0)
        .map(|k| pressures[k])
        .min_by(f64::total_cmp)
}

/// The spread of the flowing junctions' pressures, kPa, and whether the split is balanced:
/// the spread within [`SPLIT_TOLERANCE_KPA`] and no junction without flow above the lowest
/// flowing pressure by more than that.
fn spread_of(pressures: &[f64], flows: &[f64]) -> (f64, bool) {
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for k in 0..flows.len() {
        if flows[k] > 0.0 {
            lo = lo.min(pressures[k]);
            hi = hi.max(pressures[k]);
        }
    }
    if !lo.is_finite() {
        return (f64::INFINITY, false);
    }
    let idle_above =
        (0..flows.len()).any(|k| flows[k] <= 0.0 && pressures[k] > lo + SPLIT_TOLERANCE_KPA);
    let spread = hi - lo;
    (spread, spread <= SPLIT_TOLERANCE_KPA && !idle_above)
}

/// Solves the dense system [A | b] (m rows, m + 1 columns) by Gaussian elimination with partial
/// pivoting; `None` when it is singular.
fn solve_dense(mut a: Vec<Vec<f64>>) -> Option<Vec<f64>> {
    let m = a.len();
    for col in 0..m {
        let pivot = (col..m).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        // Also refuses a NaN pivot.
        if a[pivot][col].abs().partial_cmp(&1e-300) != Some(std::cmp::Ordering::Greater) {
            return None;
        }
        a.swap(col, pivot);
        let (upper, lower) = a.split_at_mut(col + 1);
        let pivot_row = &upper[col];
        for row in lower.iter_mut() {
            let f = row[col] / pivot_row[col];
            for (x, p) in row[col..].iter_mut().zip(&pivot_row[col..]) {
                *x -= f * p;
            }
        }
    }
    let mut x = vec![0.0; m];
    for row in (0..m).rev() {
        let mut s = a[row][m];
        for k in row + 1..m {
            s -= a[row][k] * x[k];
        }
        x[row] = s / a[row][row];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

/// The search interval: `lo` passes (an ordinary solve), `hi` is the smallest total known not
/// to.
struct Bracket {
    lo: GPoint,
    hi: Option<Above>,
}

impl GroupSearch<'_, '_> {
    /// The search's state for `hydrants`, the workspace started from the max-day
    /// factorization so that the answer does not depend on what it solved before.
    fn new<'s, 'a>(
        setup: &'s FireFlowSetup<'a>,
        ws: &'s mut Workspace,
        hydrants: &[usize],
        split: Split,
    ) -> Result<GroupSearch<'s, 'a>, GroupError> {
        let net = setup.network();
        if hydrants.is_empty() {
            return Err(GroupError::Empty);
        }
        if hydrants.len() > MAX_GROUP_SIZE {
            return Err(GroupError::TooLarge(hydrants.len()));
        }
        for (i, &h) in hydrants.iter().enumerate() {
            if h >= net.hydrants.len() {
                return Err(GroupError::UnknownHydrant(h));
            }
            if hydrants[..i].contains(&h) {
                return Err(GroupError::Duplicate(net.hydrants[h].id.clone()));
            }
        }
        match &setup.base_factor {
            Some(snapshot) => ws.restore(snapshot),
            None => ws.forget_history(),
        }
        let junctions: Vec<usize> = hydrants.iter().map(|&h| net.hydrants[h].junction).collect();
        let mut distinct: Vec<usize> = Vec::new();
        let slot_of = junctions
            .iter()
            .map(|j| match distinct.iter().position(|d| d == j) {
                Some(k) => k,
                None => {
                    distinct.push(*j);
                    distinct.len() - 1
                }
            })
            .collect();
        Ok(GroupSearch {
            setup,
            ws,
            split,
            hydrants: hydrants.to_vec(),
            laterals: hydrants.iter().map(|&h| lead_of(net, h)).collect(),
            junctions,
            distinct,
            slot_of,
            unsettled: Vec::new(),
            states_changed: false,
            fallback: None,
            solves: 0,
        })
    }

    /// Step 1: the static state (the shared max-day solve).
    fn static_point(&self) -> GPoint {
        let sol = self.setup.base.clone();
        let check = self.setup.constraints_for(&sol, &self.distinct);
        let check = self.with_laterals(check, &sol, &vec![0.0; self.junctions.len()]);
        let fails = verdict(self.setup, &check, Tolerance::STEADY);
        GPoint {
            total: 0.0,
            demands: vec![0.0; self.junctions.len()],
            sol,
            check,
            fails,
        }
    }

    fn reason(&self, e: &ProbeError) -> String {
        match e {
            ProbeError::Solve(e) => e.describe(self.setup.network().units),
            ProbeError::Unsettled(links) => unsettled_reason(self.setup.network(), links),
        }
    }

    fn unsolved(&self, total: f64, e: &ProbeError) -> Above {
        Above::Unsolved {
            total: on_grid(total, self.units()),
            reason: self.reason(e),
        }
    }

    /// Step 2: the group's cap; a passing cap is the answer.
    fn probe_cap(&mut self, b: &mut Bracket, cap: f64) -> Option<LimitedBy> {
        let lo = b.lo.clone();
        match self.evaluate(cap, &lo) {
            Ok(p) if p.passes() => {
                b.lo = p;
                Some(LimitedBy::Cap)
            }
            Ok(p) => {
                b.hi = Some(Above::Failing(p));
                None
            }
            Err(e) => {
                b.hi = Some(self.unsolved(cap, &e));
                None
            }
        }
    }

    /// The next total to probe in (lo, hi): the root of the binding margin interpolated
    /// linearly in u = Q^n (n = 1.852 for pressures, 1 for velocities), the margins weighted
    /// by the Illinois factors; the midpoint when that lands too near an end, or when the
    /// upper end could not be solved.
    fn next_total(&self, b: &Bracket, weights: (f64, f64)) -> f64 {
        let lo = &b.lo;
        let mid = |hi: f64| 0.5 * (lo.total + hi);
        let Some(h) = &b.hi else { return lo.total };
        let Above::Failing(hp) = h else {
            return mid(h.total());
        };
        let binding = hp.fails.unwrap_or_else(|| binding_of(&hp.check));
        let n = match binding {
            Binding::Pressure(_) => SUPPLY_CURVE_EXPONENT,
            Binding::Velocity(_) => 1.0,
        };
        let m0 = weights.0 * self.margin_at(lo, binding);
        let m1 = weights.1 * self.margin_at(hp, binding);
        let (u0, u1) = (lo.total.powf(n), hp.total.powf(n));
        let u = u0 + m0 * (u1 - u0) / (m0 - m1);
        let q = if m0 > m1 && u > 0.0 {
            u.powf(1.0 / n)
        } else {
            f64::NAN
        };
        let guard = 0.25 * closing_width(lo.total, self.units());
        if q.is_finite() && q > lo.total + guard && q < hp.total - guard {
            q
        } else {
            mid(hp.total)
        }
    }

    /// Step 3: narrows the bracket to the accuracy (regula falsi, Illinois variant: an end
    /// kept twice in a row has its margin halved, so that the interpolation cannot stall at a
    /// curved margin).
    fn bracket(&mut self, b: &mut Bracket) {
        let units = self.units();
        let mut weights = (1.0, 1.0);
        let mut last_moved: Option<bool> = None;
        for _ in 0..MAX_PROBES {
            let Some(h) = b.hi.as_ref() else { return };
            if h.total() - b.lo.total <= closing_width(b.lo.total, units) {
                return;
            }
            let q = self.next_total(b, weights);
            let lo = b.lo.clone();
            let moved_lo = match self.evaluate(q, &lo) {
                Ok(p) if p.total <= b.lo.total => return,
                Ok(p) if p.passes() => {
                    b.lo = p;
                    true
                }
                Ok(p) => {
                    b.hi = Some(Above::Failing(p));
                    false
                }
                Err(e) => {
                    b.hi = Some(self.unsolved(q, &e));
                    false
                }
            };
            weights = match (last_moved, moved_lo) {
                (Some(true), true) => (1.0, 0.5 * weights.1),
                (Some(false), false) => (0.5 * weights.0, 1.0),
                _ => (1.0, 1.0),
            };
            last_moved = Some(moved_lo);
        }
    }

    /// Step 4: the first crossing. When any solve found an element in another state than the
    /// static one, the totals of a grid of [`FIRST_CROSSING_INTERVALS`] equal steps from zero
    /// to the answer are solved and checked, and every state change between two grid totals is
    /// located by bisection (to 1/32 of the interval), checking each total solved. A failure
    /// restarts the bracket between the last total checked and the failing one; the stretch
    /// from there to the new answer is checked again (a quarter of the grid), up to
    /// [`FIRST_CROSSING_ROUNDS`] times, after which the last total checked is kept (the safe
    /// side). Unlike the single search, the small gap between the last total solved before a
    /// located change (1/32 of a grid step) and the change is not bounded by an extrapolated
    /// slope.
    fn first_crossing(
        &mut self,
        b: &mut Bracket,
        answer: &mut Option<LimitedBy>,
        notes: &mut Vec<GroupNote>,
    ) {
        if !self.setup.has_controls || !self.states_changed || b.lo.total <= 0.0 {
            return;
        }
        let mut from = self.static_point();
        let mut intervals = FIRST_CROSSING_INTERVALS;
        for round in 0..FIRST_CROSSING_ROUNDS {
            let to = b.lo.clone();
            let Some((passing, failing)) = self.check_below(&from, &to, intervals) else {
                return;
            };
            if !notes
                .iter()
                .any(|n| matches!(n, GroupNote::NonMonotone { .. }))
            {
                notes.push(GroupNote::NonMonotone {
                    fails_at_m3s: failing.total(),
                });
            }
            *answer = None;
            b.lo = passing.clone();
            b.hi = Some(failing);
            if round + 1 == FIRST_CROSSING_ROUNDS {
                return;
            }
            self.bracket(b);
            from = passing;
            intervals = FIRST_CROSSING_INTERVALS / 4;
        }
    }

    /// Checks the totals between `from` (checked) and `to` (the answer): `None` when all pass,
    /// else the last passing point and what fails above it.
    fn check_below(
        &mut self,
        from: &GPoint,
        to: &GPoint,
        intervals: u32,
    ) -> Option<(GPoint, Above)> {
        let units = self.units();
        let mut previous = from.clone();
        for k in 1..=intervals {
            let next = if k == intervals {
                to.clone()
            } else {
                let q = from.total + (to.total - from.total) * f64::from(k) / f64::from(intervals);
                let q = on_grid(q, units);
                if q <= previous.total {
                    continue;
                }
                match self.evaluate(q, &previous) {
                    Ok(p) => p,
                    Err(e) => return Some((previous, self.unsolved(q, &e))),
                }
            };
            if !next.passes() {
                return Some((previous, Above::Failing(next)));
            }
            if next.sol.states != previous.sol.states {
                if let Some(found) = self.locate_change(&previous, &next) {
                    return Some(found);
                }
            }
            previous = next;
        }
        None
    }

    /// Bisects between two passing points whose element states differ, checking every total
    /// solved: `None` when all pass, else the last passing point and what fails above it.
    fn locate_change(&mut self, below: &GPoint, above: &GPoint) -> Option<(GPoint, Above)> {
        let mut a = below.clone();
        let mut c = above.total;
        for _ in 0..STATE_CHANGE_BISECTIONS {
            let mid = on_grid(0.5 * (a.total + c), self.units());
            if mid <= a.total {
                break;
            }
            let p = match self.evaluate(mid, &a) {
                Ok(p) => p,
                Err(e) => return Some((a, self.unsolved(mid, &e))),
            };
            if !p.passes() {
                return Some((a, Above::Failing(p)));
            }
            if p.sol.states == below.sol.states {
                a = p;
            } else {
                c = p.total;
            }
        }
        None
    }

    /// Whether the ordinary solves at exactly `demands` from the static state (when any solve
    /// changed states) and from a cold start all meet the constraints.
    fn every_start_passes(&mut self, demands: &[f64]) -> bool {
        let cold = self.setup.hydraulics.cold_start();
        let starts = if self.states_changed {
            vec![self.setup.base.clone(), cold]
        } else {
            vec![cold]
        };
        starts.iter().all(|start| {
            self.ws.forget_factor();
            matches!(self.solve_demands(demands, start, Tolerance::SEARCH), Ok(p) if p.passes())
        })
    }

    /// Step 5: with elements that can change state, the answer stands only when every start
    /// verifies its demands; otherwise it steps down, by the accuracy and then by doubling
    /// steps, to a total that every start verifies (or zero), with a note.
    fn other_starts(
        &mut self,
        b: &mut Bracket,
        answer: &mut Option<LimitedBy>,
        notes: &mut Vec<GroupNote>,
    ) {
        if !self.setup.has_controls || b.lo.total <= 0.0 {
            return;
        }
        let units = self.units();
        let first = b.lo.total;
        let mut current = Some(b.lo.clone());
        let mut q = first;
        let mut step = tolerance(first, units);
        for _ in 0..MAX_STEP_DOWNS {
            if let Some(p) = current.take() {
                let demands = p.demands.clone();
                if self.every_start_passes(&demands) {
                    if p.total < first {
                        self.stepped_down(b, p, answer, notes, first);
                    }
                    return;
                }
            }
            q = on_grid(q - step, units);
            step *= 2.0;
            if q <= 0.0 {
                break;
            }
            let lo = b.lo.clone();
            current = self.evaluate(q, &lo).ok().filter(GPoint::passes);
        }
        let base = self.static_point();
        self.stepped_down(b, base, answer, notes, first);
    }

    fn stepped_down(
        &self,
        b: &mut Bracket,
        p: GPoint,
        answer: &mut Option<LimitedBy>,
        notes: &mut Vec<GroupNote>,
        first: f64,
    ) {
        let j = p.check.pressure_junction;
        b.lo = p;
        b.hi = None;
        *answer = Some(if self.distinct.contains(&j) {
            LimitedBy::HydrantPressure
        } else {
            LimitedBy::SystemPressure
        });
        notes.push(GroupNote::OtherStatesFail {
            first_total_m3s: first,
        });
    }
}

/// Step 6: what binds at the answer, and where: (limited by, critical junction, critical link).
fn classify(
    s: &GroupSearch<'_, '_>,
    b: &Bracket,
    answer: Option<LimitedBy>,
    notes: &mut Vec<GroupNote>,
) -> (LimitedBy, Option<usize>, Option<usize>) {
    let pressure = |j: usize| {
        if s.distinct.contains(&j) {
            LimitedBy::HydrantPressure
        } else {
            LimitedBy::SystemPressure
        }
    };
    match (answer, &b.hi) {
        (Some(LimitedBy::Cap), _) | (None, None) => (LimitedBy::Cap, None, None),
        (Some(other), _) => (other, Some(b.lo.check.pressure_junction), None),
        (None, Some(Above::Failing(h))) => match h.fails.unwrap_or_else(|| binding_of(&h.check)) {
            Binding::Pressure(j) => (pressure(j), Some(j), None),
            Binding::Velocity(i) => (LimitedBy::Velocity, None, Some(i)),
        },
        (None, Some(Above::Unsolved { total, reason })) => {
            notes.push(GroupNote::SolveFailedAbove {
                total_m3s: *total,
                reason: reason.clone(),
            });
            (LimitedBy::NoSolution, None, None)
        }
    }
}

/// The combined available flow of the hydrants `hydrants` (indices into `Network::hydrants`)
/// flowing together with the split `split`, on top of max-day demand: the largest total for
/// which every constrained junction (those of any flowing hydrant's scope, every flowing
/// hydrant's junction always) keeps the floor and every open pipe the velocity limit, for
/// every total from zero up (see the module documentation). The search's cap is the
/// criteria's search cap times the number of hydrants.
///
/// Errors only for a request that names no hydrant, too many, one twice or one not in the
/// network; an analysis that fails is a result without a total and a note saying why.
pub fn combined_available_flow(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    hydrants: &[usize],
    split: Split,
) -> Result<GroupResult, GroupError> {
    let mut s = GroupSearch::new(setup, ws, hydrants, split)?;
    let net = setup.network();
    let base = s.static_point();
    let mut result = GroupResult {
        hydrants: hydrants.to_vec(),
        split,
        total_m3s: None,
        shares_m3s: vec![0.0; hydrants.len()],
        residual_kpa: s
            .junctions
            .iter()
            .map(|&j| base.sol.pressure_kpa(net, j))
            .collect(),
        static_kpa: s
            .junctions
            .iter()
            .map(|&j| base.sol.pressure_kpa(net, j))
            .collect(),
        limited_by: None,
        critical_junction: None,
        critical_link: None,
        notes: Vec::new(),
        solves: 0,
    };
    if !base.passes() {
        static_failure(&s, &base, &mut result);
        return Ok(result);
    }
    let cap = on_grid(
        setup.criteria.search_cap_m3s * hydrants.len() as f64,
        net.units,
    );
    let mut b = Bracket { lo: base, hi: None };
    let mut answer = s.probe_cap(&mut b, cap);
    if answer.is_none() {
        s.bracket(&mut b);
    }
    let mut notes = Vec::new();
    s.first_crossing(&mut b, &mut answer, &mut notes);
    s.other_starts(&mut b, &mut answer, &mut notes);
    let (limited_by, junction, link) = classify(&s, &b, answer, &mut notes);
    result.limited_by = Some(limited_by);
    result.critical_junction = junction;
    result.critical_link = link;
    result.total_m3s = Some(b.lo.total);
    result.shares_m3s = b.lo.demands.clone();
    result.residual_kpa = (0..hydrants.len())
        .map(|i| s.hydrant_kpa(&b.lo.sol, i, b.lo.demands[i]))
        .collect();
    finish_notes(&s, &b.lo, &mut notes);
    result.notes = notes;
    if !s.unsettled.is_empty() {
        result.total_m3s = None;
        result.limited_by = None;
        result.critical_junction = None;
        result.critical_link = None;
        result.notes.push(GroupNote::UnsettledControls {
            links: s.unsettled.clone(),
        });
    }
    result.solves = s.solves;
    Ok(result)
}

/// The notes about the split at the answer: hydrants that do not flow, and a fallback to the
/// even split.
fn finish_notes(s: &GroupSearch<'_, '_>, answer: &GPoint, notes: &mut Vec<GroupNote>) {
    if s.split == Split::EqualResidual && answer.total > 0.0 {
        for (i, &q) in answer.demands.iter().enumerate() {
            if q <= 0.0 {
                notes.push(GroupNote::HydrantNotFlowing {
                    hydrant: s.hydrants[i],
                });
            }
        }
    }
    if let Some((total, spread)) = s.fallback {
        notes.push(GroupNote::SplitFellBackToEven {
            total_m3s: total,
            spread_kpa: spread,
        });
    }
}

/// Step 1's failure: a constraint violated with no fire flow.
fn static_failure(s: &GroupSearch<'_, '_>, base: &GPoint, result: &mut GroupResult) {
    let net = s.setup.network();
    result.total_m3s = Some(0.0);
    match base
        .fails
        .unwrap_or(Binding::Pressure(base.check.pressure_junction))
    {
        Binding::Pressure(j) => {
            result.limited_by = Some(if s.distinct.contains(&j) {
                LimitedBy::HydrantPressure
            } else {
                LimitedBy::SystemPressure
            });
            result.critical_junction = Some(j);
            result.notes.push(GroupNote::FloorViolatedWithoutFireFlow {
                junction: j,
                pressure_kpa: base.sol.pressure_kpa(net, j),
            });
        }
        Binding::Velocity(i) => {
            result.limited_by = Some(LimitedBy::Velocity);
            result.critical_link = Some(i);
            result
                .notes
                .push(GroupNote::VelocityExceededWithoutFireFlow {
                    link: i,
                    velocity_m_per_s: base.sol.velocity_m_per_s(net, i).abs(),
                });
        }
    }
}

/// The pressures of the group at the total `total_m3s` (a needed flow) with the split `split`:
/// pass or fail at exactly the demands reported (each share on the reporting grid, the total
/// their sum, at most `total_m3s`), verified like an available flow (an ordinary solve, and,
/// with elements that can change state, from the static state and a cold start as well).
pub fn group_at_flow(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    hydrants: &[usize],
    total_m3s: f64,
    split: Split,
) -> Result<GroupPoint, GroupError> {
    if !(total_m3s.is_finite() && total_m3s >= 0.0) {
        return Err(GroupError::BadTotal);
    }
    let mut s = GroupSearch::new(setup, ws, hydrants, split)?;
    let net = setup.network();
    let base = s.static_point();
    let p = if total_m3s == 0.0 {
        base
    } else {
        s.evaluate(total_m3s, &base)
            .map_err(|e| GroupError::Unsolved(s.reason(&e)))?
    };
    let mut passes = p.passes();
    if passes && setup.has_controls && p.total > 0.0 {
        passes = s.every_start_passes(&p.demands);
    }
    let mut notes = Vec::new();
    finish_notes(&s, &p, &mut notes);
    if !s.unsettled.is_empty() {
        return Err(GroupError::Unsolved(unsettled_reason(net, &s.unsettled)));
    }
    Ok(GroupPoint {
        hydrants: hydrants.to_vec(),
        split,
        total_m3s: p.total,
        shares_m3s: p.demands.clone(),
        residual_kpa: (0..hydrants.len())
            .map(|i| s.hydrant_kpa(&p.sol, i, p.demands[i]))
            .collect(),
        // The margin's own junction or hydrant (after its lateral), read back as a pressure.
        lowest_kpa: p.check.pressure_margin_kpa + setup.criteria.residual_floor_kpa,
        lowest_junction: p.check.pressure_junction,
        highest_velocity: p
            .check
            .velocity
            .map(|(_, i)| (p.sol.velocity_m_per_s(net, i).abs(), i)),
        passes,
        notes,
        solves: s.solves,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source: a hand-solved system (common practice, no source): x + y + z = 6,
    /// 2y + 5z = −4, 2x + 5y − z = 27 has x = 5, y = 3, z = −2; the zero first pivot of the
    /// reordered system needs the row swap.
    #[test]
    fn dense_solve_with_pivoting() {
        let a = vec![
            vec![0.0, 2.0, 5.0, -4.0],
            vec![1.0, 1.0, 1.0, 6.0],
            vec![2.0, 5.0, -1.0, 27.0],
        ];
        let x = solve_dense(a).expect("regular");
        for (got, want) in x.iter().zip([5.0, 3.0, -2.0]) {
            assert!((got - want).abs() < 1e-12, "{x:?}");
        }
        assert!(solve_dense(vec![vec![1.0, 2.0, 3.0], vec![2.0, 4.0, 6.0]]).is_none());
    }

    /// Source: the definition of a balanced split (module documentation): flowing pressures
    /// within the tolerance, and no idle hydrant above them by more than it.
    #[test]
    fn balance_of_a_split() {
        assert!(spread_of(&[300.0, 300.1], &[1.0, 1.0]).1);
        assert!(!spread_of(&[300.0, 301.0], &[1.0, 1.0]).1);
        // An idle hydrant below the others is fine, above them it must flow.
        assert!(spread_of(&[300.0, 250.0], &[1.0, 0.0]).1);
        assert!(!spread_of(&[300.0, 350.0], &[1.0, 0.0]).1);
    }
}
