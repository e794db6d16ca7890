//! Steady-state solution by the global gradient algorithm (Todini & Pilati, "A gradient
//! algorithm for the analysis of pipe networks", in *Computer Applications in Water Supply*,
//! vol. 1, 1988), in correction form.
//!
//! Unknowns: junction heads H and link flows Q (positive from → to). Each Newton step solves
//! the junction system M·δH = r with M = A₂₁·D⁻¹·A₁₂ (D = dφ/dQ of the conducting links; a
//! weighted graph Laplacian, symmetric positive definite while every junction reaches a fixed
//! grade), then updates δQ = D⁻¹·(δH_from − δH_to − e) with e = φ(Q) − (H_from − H_to).
//! Continuity holds exactly after every step. Near convergence the factorization is reused
//! for a few steps (the chord method) and renewed as soon as the steps stop shrinking fast.
//!
//! A junction held at a head by the request (the fire-flow search's hydrant at the floor) is
//! pinned there; the flow it draws is what continuity leaves at it after each step.
//!
//! Control devices: a regulating PRV fixes the head of its downstream junction (a PSV, of its
//! upstream junction); the valve's flow is then recovered from continuity at that junction and
//! acts as a known withdrawal at the other end in the next step. A regulating FCV carries its
//! set flow. Closed elements carry nothing. States switch by the rules of [`super::controls`].

// Index loops over several parallel arrays read more clearly than zipped iterators here.
#![allow(clippy::needless_range_loop)]

use std::sync::Arc;

use super::controls::{self, LinkState, LinkView, MAX_SWITCHES};
use super::demand::{LeadOutflow, PressureDependence};
use super::factor::{OrderedPattern, SparseCholesky, SpdFactorization, SymbolicAnalysis};
use super::laws::{LinkLaw, MIN_SLOPE_S_PER_M2, ZERO_FLOW_M3S};
use super::SolveError;
use crate::model::{LinkKind, Network, ValveKind};
use crate::units::head_m_from_pressure_kpa;

mod local;
pub use local::Region;

/// When a solve has converged: the largest head and flow changes of the last step.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerance {
    pub head_m: f64,
    pub flow_m3s: f64,
}

impl Tolerance {
    /// For reported steady states: 1e-6 m (0.0000014 psi) and 1e-7 m³/s (0.0016 gpm) on the
    /// estimated remaining error (see `within`): pressures are converged far inside the
    /// 0.01 psi that reports show, and cheaply so, as one steady state is a handful of steps.
    pub const STEADY: Tolerance = Tolerance {
        head_m: 1.0e-6,
        flow_m3s: 1.0e-7,
    };
    /// For the solves of a fire-flow search that place a flow (the held solve, bracket probes):
    /// 2e-3 m (0.003 psi) and 3e-4 m³/s. A flow found where a junction is at the floor moves by
    /// δh/(1.852·(S − floor)) relative, under 0.05 % for 2 m or more between static head and
    /// floor, well inside the 0.5 % the search promises. The flow drawn by a held junction is
    /// one of the flows under the flow tolerance: at 1e-3 m³/s, hydrants near 600 gpm on 4-in
    /// dead ends of the 10k synthetic network came out up to 2.8 gpm (0.46 %) from a 2e-7 m
    /// solve; at 3e-4 m³/s every available flow is within 0.22 % (1.0 gpm) of it, for 2 %
    /// more iterations.
    pub const BRACKET: Tolerance = Tolerance {
        head_m: 2.0e-3,
        flow_m3s: 3.0e-4,
    };
    /// For the many solves of a fire-flow search: 2e-4 m (0.0003 psi) on the estimated
    /// remaining error, still well inside the 0.01 psi resolution of a residual pressure, and
    /// 1e-4 m³/s (1.6 gpm) on link flows (the fire flow itself is a demand, exact whatever the
    /// tolerance).
    pub const SEARCH: Tolerance = Tolerance {
        head_m: 2.0e-4,
        flow_m3s: 1.0e-4,
    };
}
/// Flow at whose slope a pipe's entry in the iteration matrix is floored, m³/s (3e-4 m³/s,
/// about 5 gpm), in the solves of a fire-flow search. Newton's linearization of a power law at
/// a flow near zero is nearly flat, so a pipe whose flow must move from near zero to a few
/// litres a second (a quiet loop that a fire flow wakes, a flow that reverses) overshoots by an
/// order of magnitude and then creeps back at the rate 1 − 1/1.852 of a power law approached
/// from above, a factorization per step. A pipe whose flow is below the smaller of this flow
/// and its last step (when that step exceeds the law's own smoothing flow, `ZERO_FLOW_M3S`)
/// enters the matrix with the slope at that flow; it then moves in two or three steps, and a
/// pipe settling near zero flow keeps Newton's slope. Only the iteration matrix changes, not
/// the equations solved, and a step made with a floored matrix is judged as a chord step
/// (`Hydraulics::within`). Measured on 250 hydrants of the 10k synthetic network
/// (docs/performance.md): from 4.24 factorizations per hydrant without a floor to 3.74; a
/// floor at every flow below it gave 3.64 at 3e-4, 3.84 at 1.5e-4, 3.76 at 5e-4 and 5.84 at
/// 1e-3, where pipes settling near zero converge slowly (our measure, no source).
pub const SLOPE_FLOOR_FLOW_M3S: f64 = 3.0e-4;
/// Iterations allowed per solve, all state changes included.
pub const MAX_ITERATIONS: u32 = 200;
/// Reuse the factorization only while the head step is below this, m ...
const CHORD_MAX_STEP_M: f64 = 0.1;
/// ... and each step, of heads and of flows alike, shrinks the previous one at least by this
/// factor. Flows count too: where no free junction's head moves (a hydrant fed straight from a
/// source and held at the floor), the head steps are zero while a stale factorization leaves
/// the flows converging ever more slowly.
const CHORD_MAX_RATIO: f64 = 0.45;
/// Relative accuracy of the flow drawn by a held junction: its convergence test uses the
/// smaller of the tolerance on flows and this fraction of the flow drawn (0.1 %), so that a
/// flow placed by a held solve is accurate relative to itself whatever its size. A held solve
/// only places a flow, which an ordinary solve 0.1 % below it then verifies: on the 10k
/// synthetic network 1e-4 cost 1,450 more iterations per sweep than 1e-3 and 3e-4 550 more,
/// while 1e-3 sent one verification of 1,753 to the bracket search and lowered no answer by
/// more than 0.28 % against the build before the verification.
const DRAWN_FLOW_RELATIVE: f64 = 1.0e-3;
/// A first chord step (no earlier step to measure the contraction by) ends a solve only when it
/// is this fraction of the tolerance: a contraction of up to 0.9 then still leaves less than the
/// tolerance to go (common practice, no source).
const FIRST_CHORD_STEP_FRACTION: f64 = 0.1;
/// A step this fraction of the tolerance ends a solve whatever the measured rate: at that size
/// the rate is round-off, and a contraction slower than 1 − 1e-6 would be needed for the
/// tolerance to be exceeded (common practice, no source).
const ROUNDOFF_STEP_FRACTION: f64 = 1.0e-6;
/// Marks "no matrix row or slot" in the per-link index arrays.
const NO_ROW: u32 = u32::MAX;
/// Head steps above this (m) are checked by a line search on the content merit function.
const LINE_SEARCH_MIN_STEP_M: f64 = 0.1;
/// Relative round-off allowed in the line search's merit comparison.
const MERIT_ROUNDOFF: f64 = 1.0e-12;
/// Halvings of the step the line search tries.
const LINE_SEARCH_HALVINGS: u32 = 6;
/// Halvings tried by the damped step of a pressure-dependent solve (down to 1/512 of it).
const PDD_HALVINGS: u32 = 10;
/// ½‖F‖² (m²) below which any step is accepted: the residuals are then far inside every
/// tolerance and the merit's round-off decides nothing.
const PDD_MERIT_FLOOR: f64 = 1.0e-20;
/// Initial flow velocity of a cold start, m/s (a common starting guess, about 1 ft/s).
const COLD_START_VELOCITY_M_PER_S: f64 = 0.3;

/// How a link enters the solve.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Role {
    /// A pipe, pump or valve whose state never changes by rule.
    Plain,
    /// Check-valve pipe, pump, or control valve: state by rule.
    Controlled,
}

/// Everything about a network that the solver needs and never changes: shareable between
/// threads (`Send + Sync`).
#[derive(Debug)]
pub struct Hydraulics<'n> {
    net: &'n Network,
    n_junctions: usize,
    laws: Vec<LinkLaw>,
    roles: Vec<Role>,
    /// PRV/PSV set head (m) or FCV set flow (m³/s); 0 for others.
    settings: Vec<f64>,
    /// Grade of every node that has one fixed (sources), else 0.
    source_grade: Vec<f64>,
    /// From and to node of each link (kept apart from the links for the hot loops).
    ends: Vec<(usize, usize)>,
    /// Regulating role of each link, for the hot loops.
    valve_kinds: Vec<Option<ValveKind>>,
    /// The PRVs and PSVs (links that may hold a junction's head).
    pressure_valves: Vec<usize>,
    /// The links whose state is ruled by a control (pumps, check and regulating valves).
    controlled: Vec<usize>,
    /// Each node's base demand, m³/s, copied out of the node records for the per-solve loops.
    base_demand_m3s: Vec<f64>,
    pattern: OrderedPattern,
    /// Matrix row of each junction.
    row_of: Vec<usize>,
    /// Diagonal slot of each junction.
    diag_slot: Vec<usize>,
    /// Matrix rows of each link's ends ([`NO_ROW`] at a source or on a self-loop).
    link_rows: Vec<[u32; 2]>,
    /// Diagonal slots of each link's ends and its off-diagonal slot ([`NO_ROW`] where none).
    link_slots: Vec<[u32; 3]>,
    /// Links at each node: `adj_links[adj_ptr[n]..adj_ptr[n+1]]`.
    adj_ptr: Vec<usize>,
    adj_links: Vec<usize>,
    analysis: Arc<SymbolicAnalysis>,
}

/// Per-thread mutable state of the solver: matrix values, factorization and scratch vectors.
pub struct Workspace {
    factor: SparseCholesky,
    values: Vec<f64>,
    rhs: Vec<f64>,
    /// Conductances 1/D with which the current factorization was made.
    g_factored: Vec<f64>,
    /// Whether a slope of the current factorization was floored (see
    /// [`SLOPE_FLOOR_FLOW_M3S`]): its steps are then not Newton's.
    floored: bool,
    /// Known flow change of each link in the current step.
    known: Vec<f64>,
    /// Flow change of each link in the current step.
    flow_step: Vec<f64>,
    /// Per node: the fixed step of pinned junctions while assembling, then every junction's
    /// head change (0 at sources).
    node_step: Vec<f64>,
    /// Per link: the last exact (|Q|, |Q|^0.852) of a Hazen-Williams pipe.
    memo: Vec<(f64, f64)>,
    /// Scratch for the head response to a unit draw (matrix order).
    response: Vec<f64>,
    demand: Vec<f64>,
    /// Fixed head of a junction in the current state (sources are always fixed).
    pinned: Vec<Option<f64>>,
    /// The fixed-head junction and link states the current factorization was made for; a
    /// later solve with the same ones may start with chord steps on it.
    factor_key: Option<(Option<usize>, Vec<LinkState>)>,
    /// The junction pinned in the current factorization but free in the current solve, whose
    /// row and column a border restores (see `Hydraulics::solve_bordered`).
    border_at: Option<usize>,
    /// That border: b, z = A⁻¹b and the Schur complement d − bᵀz, in matrix order.
    border_z: Option<(Vec<f64>, Vec<f64>, f64)>,
    tolerance: Tolerance,
    /// Pressure-dependent demands of the current solve (see
    /// [`Hydraulics::solve_pressure_dependent`]); `None` in a demand-driven solve.
    pdd: Option<PressureDependence>,
    /// In a pressure-dependent solve: each junction's customer demand and extra demand asked,
    /// m³/s, and the slope d(outflow)/dH of the last assembly, m²/s.
    asked: Vec<(f64, f64)>,
    outflow_slope: Vec<f64>,
    /// The fixed weights of the continuity residuals in the damped step's merit, 1/(m²/s).
    pdd_weight: Vec<f64>,
    /// A hydrant held at its outlet head behind a lead (see [`Hydraulics::solve_behind_lead`]).
    lead_outflow: Option<LeadOutflow>,
    /// The junction and slope of a lead outflow on the current factorization's diagonal
    /// (made in a solve behind a lead); a later solve without it corrects for it.
    factor_outflow: Option<(usize, f64)>,
    /// Whether this solve's steps take `factor_outflow` back out of the factorization.
    correct_outflow: bool,
    /// For that correction: w = F⁻¹e_j (matrix order) and 1 − s·w_j.
    outflow_w: Option<(Vec<f64>, f64)>,
    /// The lead outflow's linearization of this step, as a link's: its conductance g = 1/L′
    /// and the known part k of its flow change (see `lead_terms`).
    lead_gk: (f64, f64),
}

/// A copy of a workspace's factorization, to start other workspaces from (the fire-flow sweep
/// starts every hydrant from the max-day factorization: its first step is then the linear
/// response of the max-day state to the fire flow, at no factorization cost).
#[derive(Clone, Debug)]
pub struct FactorSnapshot {
    l_values: Vec<f64>,
    g_factored: Vec<f64>,
    floored: bool,
    /// The memo of powers too: a power continued by its series from another anchor differs
    /// in the last bits, and results must not depend on what a workspace solved before.
    memo: Vec<(f64, f64)>,
    key: (Option<usize>, Vec<LinkState>),
}

impl Workspace {
    /// Whether some outflow of the current solve depends on its junction's head (a
    /// pressure-dependent solve, or a hydrant held behind its lead): such solves take the
    /// damped step and keep Newton's own matrix.
    fn head_dependent(&self) -> bool {
        self.pdd.is_some() || self.lead_outflow.is_some()
    }

    /// The lead outflow of the current solve and its present flow (`drawn`), if any.
    fn lead_flow(&self, it: &Iterate) -> Option<(LeadOutflow, f64)> {
        self.lead_outflow.zip(it.drawn)
    }

    /// A copy of the current factorization, if there is one.
    pub fn snapshot(&self) -> Option<FactorSnapshot> {
        if self.factor_outflow.is_some() {
            return None;
        }
        self.factor_key.as_ref().map(|key| FactorSnapshot {
            l_values: self.factor.values().to_vec(),
            g_factored: self.g_factored.clone(),
            floored: self.floored,
            memo: self.memo.clone(),
            key: key.clone(),
        })
    }

    /// Makes `snapshot` the current factorization.
    pub fn restore(&mut self, snapshot: &FactorSnapshot) {
        self.factor.set_values(&snapshot.l_values);
        self.g_factored.copy_from_slice(&snapshot.g_factored);
        self.floored = snapshot.floored;
        self.memo.copy_from_slice(&snapshot.memo);
        self.factor_key = Some(snapshot.key.clone());
        self.border_z = None;
        self.factor_outflow = None;
        self.outflow_w = None;
    }

    /// Forgets everything earlier solves left that could shape later ones: the factorization
    /// and the memo of powers (see [`FactorSnapshot`]).
    pub fn forget_history(&mut self) {
        self.forget_factor();
        self.memo.iter_mut().for_each(|m| *m = (0.0, 0.0));
    }

    /// Sets the convergence tolerance of later solves (default [`Tolerance::STEADY`]).
    pub fn set_tolerance(&mut self, tolerance: Tolerance) {
        self.tolerance = tolerance;
    }

    /// Forgets the current factorization, so that the next solve starts with a fresh one.
    /// (The fire-flow sweep calls this between hydrants so that every hydrant's result is
    /// independent of which hydrants the thread analysed before: output is identical for any
    /// number of threads.)
    pub fn forget_factor(&mut self) {
        self.factor_key = None;
        self.border_z = None;
        self.factor_outflow = None;
        self.outflow_w = None;
    }
}

/// What to solve: demands and an optional junction held at a head.
#[derive(Clone, Copy, Debug)]
pub struct SolveRequest<'a> {
    /// Multiplier of every junction's average-day demand.
    pub demand_factor: f64,
    /// Extra withdrawals at junctions, m³/s.
    pub extra_demand: &'a [(usize, f64)],
    /// A junction held at a head (m); the flow it must draw for that is reported.
    pub fixed_head: Option<(usize, f64)>,
}

/// A converged steady state.
#[derive(Clone, Debug)]
pub struct Solution {
    /// Hydraulic grade of every node, m.
    pub heads_m: Vec<f64>,
    /// Flow of every link from → to, m³/s.
    pub flows_m3s: Vec<f64>,
    pub states: Vec<LinkState>,
    /// Newton and chord steps taken.
    pub iterations: u32,
    /// Numeric factorizations made.
    pub factorizations: u32,
    /// With a fixed-head junction: the flow it draws beyond its demand, m³/s.
    pub fixed_head_outflow_m3s: Option<f64>,
    /// Junctions cut off from every fixed grade by closed elements, with no demand (their heads
    /// mean nothing).
    pub isolated: Vec<usize>,
    /// Links whose control switched too often and was frozen.
    pub unsettled: Vec<usize>,
}

/// The iterate of one solve and the bookkeeping of its steps (see [`Hydraulics::solve`]).
struct Iterate {
    heads: Vec<f64>,
    flows: Vec<f64>,
    states: Vec<LinkState>,
    /// The junction the request holds at a head, and the flow it draws beyond its demand.
    held: Option<usize>,
    drawn: Option<f64>,
    /// State changes of each link so far.
    switches: Vec<u8>,
    unsettled: Vec<usize>,
    isolated: Vec<usize>,
    /// The states changed: pins and factorization reuse must be decided anew.
    dirty: bool,
    need_factor: bool,
    /// The largest head and flow changes of the last step (infinite after a restart).
    previous_step: f64,
    previous_flow_step: f64,
    factorizations: u32,
    /// Whether the flows may violate continuity (at the start, and after a state change):
    /// the line search needs a start that satisfies it.
    continuity_pending: bool,
    /// Whether the last step left every regulating valve's flow where it was (no continuity
    /// pending after it): only then does the next step's ratio to it estimate a rate.
    last_step_settled: bool,
    /// Whether the last step was a Newton step (see `converged`).
    last_step_newton: bool,
    /// The regulating valves coupled into the Newton step under the present states (see
    /// [`Hydraulics::couple_regulating_valves`]).
    coupled: Vec<CoupledValve>,
    /// Regulating valves taken out of regulation once already because a part they feed was
    /// cut off (see [`Hydraulics::pin_and_isolate`]).
    released: Vec<usize>,
    /// The links that the last round of switching rules closed (see
    /// [`Hydraulics::switch_controls`]), and those reopened alone once already as the
    /// feeders of a cut-off part (see [`Hydraulics::pin_and_isolate`]).
    just_closed: Vec<usize>,
    reopened_alone: Vec<usize>,
}

impl Iterate {
    fn into_solution(self, iterations: u32) -> Solution {
        Solution {
            heads_m: self.heads,
            flows_m3s: self.flows,
            states: self.states,
            iterations,
            factorizations: self.factorizations,
            fixed_head_outflow_m3s: self.drawn,
            isolated: self.isolated,
            unsettled: self.unsettled,
        }
    }
}

/// Where each link enters the junction matrix: the rows of its two ends and the matrix slots
/// of their diagonals and of their off-diagonal entry ([`NO_ROW`] for an end that is not a
/// junction, and for a link whose ends are one node), found once so that assembling a
/// Newton step needs no search.
fn link_places(
    pattern: &OrderedPattern,
    nj: usize,
    ends: &[(usize, usize)],
) -> (Vec<[u32; 2]>, Vec<[u32; 3]>) {
    let row = |n: usize| {
        if n < nj {
            u32::try_from(pattern.position(n)).unwrap_or(NO_ROW)
        } else {
            NO_ROW
        }
    };
    let slot = |n: usize| {
        if n < nj {
            u32::try_from(pattern.diagonal_slot(n)).unwrap_or(NO_ROW)
        } else {
            NO_ROW
        }
    };
    let off_slot = |a: usize, b: usize| {
        (a < nj && b < nj)
            .then(|| pattern.slot(a, b))
            .flatten()
            .and_then(|o| u32::try_from(o).ok())
            .unwrap_or(NO_ROW)
    };
    ends.iter()
        .map(|&(a, b)| {
            if a == b {
                ([NO_ROW; 2], [NO_ROW; 3])
            } else {
                ([row(a), row(b)], [slot(a), slot(b), off_slot(a, b)])
            }
        })
        .unzip()
}

/// The links at each node, in compressed form: node n's links are
/// `adj_links[adj_ptr[n]..adj_ptr[n + 1]]`, in link order.
fn adjacency(net: &Network) -> (Vec<usize>, Vec<usize>) {
    let nn = net.nodes.len();
    let mut degree = vec![0usize; nn + 1];
    for l in &net.links {
        degree[l.from] += 1;
        degree[l.to] += 1;
    }
    let mut adj_ptr = vec![0usize; nn + 1];
    for n in 0..nn {
        adj_ptr[n + 1] = adj_ptr[n] + degree[n];
    }
    let mut fill = adj_ptr.clone();
    let mut adj_links = vec![0usize; adj_ptr[nn]];
    for (i, l) in net.links.iter().enumerate() {
        adj_links[fill[l.from]] = i;
        fill[l.from] += 1;
        adj_links[fill[l.to]] = i;
        fill[l.to] += 1;
    }
    (adj_ptr, adj_links)
}

/// The (from, to) junctions of every link joining two different junctions: the off-diagonal
/// entries of the junction matrix (links to a source only touch its diagonal).
pub fn junction_pairs(net: &Network) -> Vec<(usize, usize)> {
    let nj = net.n_junctions;
    net.links
        .iter()
        .filter(|l| l.from != l.to && l.from < nj && l.to < nj)
        .map(|l| (l.from, l.to))
        .collect()
}

/// What the solver takes from each element apart from the topology: the parts of
/// [`Hydraulics`] that a change of pipe diameter or roughness renews.
struct Elements {
    laws: Vec<LinkLaw>,
    roles: Vec<Role>,
    settings: Vec<f64>,
    source_grade: Vec<f64>,
    valve_kinds: Vec<Option<ValveKind>>,
    pressure_valves: Vec<usize>,
    controlled: Vec<usize>,
    base_demand_m3s: Vec<f64>,
}

impl Elements {
    fn of(net: &Network) -> Self {
        let laws: Vec<LinkLaw> = net
            .links
            .iter()
            .map(|l| LinkLaw::of(l, net.headloss))
            .collect();
        let roles: Vec<Role> = net
            .links
            .iter()
            .map(|l| {
                if controls::is_fixed(l) {
                    Role::Plain
                } else {
                    Role::Controlled
                }
            })
            .collect();
        let controlled = (0..roles.len())
            .filter(|&i| roles[i] == Role::Controlled)
            .collect();
        let base_demand_m3s = net.nodes.iter().map(|n| n.base_demand_m3s).collect();
        let settings = net
            .links
            .iter()
            .map(|l| match &l.kind {
                LinkKind::Valve(v) => match v.kind {
                    ValveKind::Prv => {
                        net.nodes[l.to].elevation_m + head_m_from_pressure_kpa(v.setting)
                    }
                    ValveKind::Psv => {
                        net.nodes[l.from].elevation_m + head_m_from_pressure_kpa(v.setting)
                    }
                    ValveKind::Fcv => v.setting,
                    ValveKind::Throttle => 0.0,
                },
                _ => 0.0,
            })
            .collect();
        let source_grade = net.nodes.iter().map(|n| n.grade_m.unwrap_or(0.0)).collect();
        let valve_kinds: Vec<Option<ValveKind>> = net
            .links
            .iter()
            .map(|l| match &l.kind {
                LinkKind::Valve(v) => Some(v.kind),
                _ => None,
            })
            .collect();
        let pressure_valves = valve_kinds
            .iter()
            .enumerate()
            .filter(|(_, k)| matches!(k, Some(ValveKind::Prv | ValveKind::Psv)))
            .map(|(i, _)| i)
            .collect();
        Elements {
            laws,
            roles,
            settings,
            source_grade,
            valve_kinds,
            pressure_valves,
            controlled,
            base_demand_m3s,
        }
    }
}

impl<'n> Hydraulics<'n> {
    /// Prepares the solver for `net`: link laws, matrix pattern, and the symbolic
    /// factorization (once per network).
    pub fn new(net: &'n Network) -> Result<Self, SolveError> {
        let nj = net.n_junctions;
        if nj == 0 {
            return Err(SolveError::Internal("the network has no junctions".into()));
        }
        let pairs = junction_pairs(net);
        let pattern = OrderedPattern::new(nj, &pairs)?;
        let row_of = (0..nj).map(|j| pattern.position(j)).collect();
        let diag_slot = (0..nj).map(|j| pattern.diagonal_slot(j)).collect();
        let ends: Vec<(usize, usize)> = net.links.iter().map(|l| (l.from, l.to)).collect();
        let (link_rows, link_slots) = link_places(&pattern, nj, &ends);
        let (adj_ptr, adj_links) = adjacency(net);
        let analysis = SymbolicAnalysis::new(&pattern)?;
        let elements = Elements::of(net);
        Ok(Hydraulics {
            net,
            n_junctions: nj,
            laws: elements.laws,
            roles: elements.roles,
            settings: elements.settings,
            source_grade: elements.source_grade,
            ends,
            valve_kinds: elements.valve_kinds,
            pressure_valves: elements.pressure_valves,
            controlled: elements.controlled,
            base_demand_m3s: elements.base_demand_m3s,
            link_rows,
            link_slots,
            pattern,
            row_of,
            diag_slot,
            adj_ptr,
            adj_links,
            analysis,
        })
    }

    /// The solver for `net`, a network with the same nodes and links joining the same ends as
    /// this one's (e.g. with pipes replaced by other diameters or roughnesses): the ordering,
    /// the symbolic analysis and the index maps, which depend only on which nodes the links
    /// join, are shared; only the link laws, roles and settings and the source grades are made
    /// anew. The result is the one [`Hydraulics::new`] would give, without re-ordering and
    /// re-analysing the matrix. An error when the topology differs.
    pub fn with_links_replaced<'m>(&self, net: &'m Network) -> Result<Hydraulics<'m>, SolveError> {
        let same_topology = net.n_junctions == self.n_junctions
            && net.nodes.len() == self.net.nodes.len()
            && net.links.len() == self.ends.len()
            && net
                .links
                .iter()
                .zip(&self.ends)
                .all(|(l, &(a, b))| l.from == a && l.to == b);
        if !same_topology {
            return Err(SolveError::TopologyChanged);
        }
        let elements = Elements::of(net);
        Ok(Hydraulics {
            net,
            n_junctions: self.n_junctions,
            laws: elements.laws,
            roles: elements.roles,
            settings: elements.settings,
            source_grade: elements.source_grade,
            ends: self.ends.clone(),
            valve_kinds: elements.valve_kinds,
            pressure_valves: elements.pressure_valves,
            controlled: elements.controlled,
            base_demand_m3s: elements.base_demand_m3s,
            link_rows: self.link_rows.clone(),
            link_slots: self.link_slots.clone(),
            pattern: self.pattern.clone(),
            row_of: self.row_of.clone(),
            diag_slot: self.diag_slot.clone(),
            adj_ptr: self.adj_ptr.clone(),
            adj_links: self.adj_links.clone(),
            analysis: self.analysis.clone(),
        })
    }

    pub fn network(&self) -> &'n Network {
        self.net
    }

    /// A fresh per-thread workspace.
    pub fn workspace(&self) -> Workspace {
        let nl = self.net.links.len();
        let nj = self.n_junctions;
        Workspace {
            factor: SparseCholesky::new(self.analysis.clone()),
            values: vec![0.0; self.pattern.nnz()],
            rhs: vec![0.0; nj],
            g_factored: vec![0.0; nl],
            floored: false,
            known: vec![0.0; nl],
            flow_step: vec![0.0; nl],
            node_step: vec![0.0; self.net.nodes.len()],
            response: vec![0.0; nj],
            memo: vec![(0.0, 0.0); nl],
            demand: vec![0.0; nj],
            pinned: vec![None; nj],
            factor_key: None,
            border_at: None,
            border_z: None,
            tolerance: Tolerance::STEADY,
            pdd: None,
            asked: Vec::new(),
            outflow_slope: Vec::new(),
            pdd_weight: Vec::new(),
            lead_outflow: None,
            factor_outflow: None,
            correct_outflow: false,
            outflow_w: None,
            lead_gk: (0.0, 0.0),
        }
    }

    /// Number of stored entries of the junction matrix and of its Cholesky factor.
    pub fn matrix_sizes(&self) -> (usize, usize) {
        (self.pattern.nnz(), self.analysis.factor_len())
    }

    /// The linearised response of heads (per node, m) and link flows (m³/s) to one more m³/s
    /// drawn at junction `node`, from the workspace's current factorization (that of the last
    /// solve); `None` when there is none. This is the sensitivity of the last state to a
    /// demand: one solve with the factorization already made.
    pub fn demand_response(&self, ws: &mut Workspace, node: usize) -> Option<(Vec<f64>, Vec<f64>)> {
        if ws.factor_key.is_none()
            || ws.factor_outflow.is_some()
            || node >= self.n_junctions
            || ws.pinned[node].is_some()
        {
            return None;
        }
        ws.response.iter_mut().for_each(|v| *v = 0.0);
        ws.response[self.row_of[node]] = -1.0;
        ws.factor.solve_in_place(&mut ws.response);
        let mut heads = vec![0.0; self.net.nodes.len()];
        for j in 0..self.n_junctions {
            heads[j] = ws.response[self.row_of[j]];
        }
        let flows = self
            .ends
            .iter()
            .zip(&ws.g_factored)
            .map(|(&(a, b), g)| g * (heads[a] - heads[b]))
            .collect();
        Some((heads, flows))
    }

    /// The link law (for reports of head loss).
    pub fn law(&self, link: usize) -> &LinkLaw {
        &self.laws[link]
    }

    /// Set head (m) of a PRV/PSV or set flow (m³/s) of an FCV.
    pub fn setting(&self, link: usize) -> f64 {
        self.settings[link]
    }

    fn links_at(&self, node: usize) -> &[usize] {
        &self.adj_links[self.adj_ptr[node]..self.adj_ptr[node + 1]]
    }

    /// Net inflow minus demand at junction `j` (zero when continuity holds), m³/s.
    fn imbalance(&self, j: usize, flows: &[f64], demand: &[f64]) -> f64 {
        self.net_inflow(j, flows) - demand[j]
    }

    /// The flow into node `j` from its links, m³/s.
    fn net_inflow(&self, j: usize, flows: &[f64]) -> f64 {
        let mut sum = 0.0;
        for &i in self.links_at(j) {
            let l = &self.net.links[i];
            if l.from == l.to {
                continue;
            }
            if l.to == j {
                sum += flows[i];
            } else {
                sum -= flows[i];
            }
        }
        sum
    }

    /// A cold starting point: flows at 0.3 m/s, pumps at their design flow, initial states.
    pub fn cold_start(&self) -> Solution {
        let net = self.net;
        let top = net
            .sources()
            .iter()
            .filter_map(|s| s.grade_m)
            .fold(f64::NEG_INFINITY, f64::max);
        let mut heads_m = self.source_grade.clone();
        for h in heads_m.iter_mut().take(self.n_junctions) {
            *h = top;
        }
        let flows_m3s = net
            .links
            .iter()
            .map(|l| match &l.kind {
                LinkKind::Pump(p) => p.design_point.0 * p.speed,
                _ => {
                    let d = l.diameter_m().unwrap_or(0.0);
                    COLD_START_VELOCITY_M_PER_S * std::f64::consts::PI * d * d / 4.0
                }
            })
            .collect();
        let states = net.links.iter().map(controls::initial_state).collect();
        Solution {
            heads_m,
            flows_m3s,
            states,
            iterations: 0,
            factorizations: 0,
            fixed_head_outflow_m3s: None,
            isolated: Vec::new(),
            unsettled: Vec::new(),
        }
    }

    /// Solves `request` with pressure-dependent demands: each junction delivers its customer
    /// demand times `pdd.customers`' fraction at its pressure, and its extra demand times
    /// `pdd.extra`'s (see [`super::demand`]), instead of the whole demand whatever the
    /// pressure.
    ///
    /// Formulation: the global gradient algorithm with the nodal outflow a function of the
    /// junction's head, as in Giustolisi, Savic & Kapelan, "Pressure-driven demand and leakage
    /// simulation for water distribution networks", J. Hydraul. Eng. 134(5), 2008 (the
    /// structure from memory): continuity at junction j reads Σ inflow − q_j(H_j) = 0, and its
    /// Newton linearisation adds dq_j/dH_j to the diagonal of the junction (Schur) matrix
    /// A₂₁·D⁻¹·A₁₂, with −q_j(H_j) at the current heads in the right-hand side; no outer
    /// fixed-point loop. The derivative is non-negative, so the matrix stays symmetric positive
    /// definite. The content line search is not used (its merit function would need the
    /// inverse of the demand relation); the smoothing of the relation keeps the Newton steps
    /// steady. The factorization is fresh at the start and forgotten at the end, so that no
    /// demand-driven solve reuses a matrix with these extra diagonal terms.
    pub fn solve_pressure_dependent(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        pdd: &PressureDependence,
        start: &Solution,
    ) -> Result<Solution, SolveError> {
        ws.forget_factor();
        ws.pdd = Some(*pdd);
        let result = self.solve(ws, request, start);
        ws.pdd = None;
        ws.forget_factor();
        result
    }

    /// Solves `request` with the hydrant of `outflow` drawing, beyond its junction's demand,
    /// whatever flow puts its outlet at `outflow.outlet_head_m` after its lead (see
    /// [`LeadOutflow`]): in one solve, the flow a hydrant behind a lead draws with its outlet
    /// at a pressure floor. The outflow is a pipe from the junction to the fixed outlet head,
    /// linearised in its flow as the gradient algorithm linearises pipes (see `lead_terms`),
    /// with its content in the line search; the flow drawn is the solution's
    /// `fixed_head_outflow_m3s`, converged to the flow tolerance or 0.1 % of itself as a held
    /// junction's is. The factorization is fresh at the start; the last one is kept with the
    /// outflow's slope noted, which later solves without the outflow take back out of it (see
    /// `solve_factored`).
    pub fn solve_behind_lead(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        outflow: &LeadOutflow,
        start: &Solution,
    ) -> Result<Solution, SolveError> {
        ws.forget_factor();
        ws.lead_outflow = Some(*outflow);
        let result = self.solve(ws, request, start);
        ws.lead_outflow = None;
        if result.is_err() {
            ws.forget_factor();
        }
        result
    }

    /// Each junction's customer demand and extra demand asked by `request`, m³/s.
    fn asked_demands(&self, request: &SolveRequest<'_>) -> Vec<(f64, f64)> {
        let mut asked: Vec<(f64, f64)> = (0..self.n_junctions)
            .map(|j| (self.base_demand_m3s[j] * request.demand_factor, 0.0))
            .collect();
        for &(j, q) in request.extra_demand {
            if j < self.n_junctions {
                asked[j].1 += q;
            }
        }
        asked
    }

    /// The outflow junction `j` delivers at head `head_m` and its derivative d/dH, m³/s and
    /// m²/s.
    fn delivered_at(
        &self,
        pdd: &PressureDependence,
        asked: (f64, f64),
        j: usize,
        head_m: f64,
    ) -> (f64, f64) {
        let p = head_m - self.net.nodes[j].elevation_m;
        let (fc, sc) = pdd.customers.fraction(p);
        let (qe, se) = pdd.extra_delivered(asked.1, p);
        (asked.0 * fc + qe, asked.0 * sc + se)
    }

    /// The (customer, extra) outflow each junction delivers in `sol`, a solution of
    /// [`Hydraulics::solve_pressure_dependent`] for `request` and `pdd`, m³/s.
    pub fn delivered_m3s(
        &self,
        request: &SolveRequest<'_>,
        pdd: &PressureDependence,
        sol: &Solution,
    ) -> Vec<(f64, f64)> {
        let asked = self.asked_demands(request);
        (0..self.n_junctions)
            .map(|j| {
                let p = sol.heads_m[j] - self.net.nodes[j].elevation_m;
                (
                    asked[j].0 * pdd.customers.fraction(p).0,
                    pdd.extra_delivered(asked[j].1, p).0,
                )
            })
            .collect()
    }

    /// Solves `request`, starting from `start` (a previous solution of the same network, or
    /// [`Hydraulics::cold_start`]).
    ///
    /// Each iteration runs the phases in order: the states' pins and factorization reuse
    /// (`refresh_states`, after a state change), the assembly of the step
    /// (`assemble_step`), the linear solve (`linear_solve`), the step with its
    /// line search (`take_step`), the flows of regulating valves
    /// (`regulating_valve_flows`), the convergence test (`converged`) and, once
    /// converged for the current states, control switching (`switch_controls`).
    pub fn solve(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        start: &Solution,
    ) -> Result<Solution, SolveError> {
        let mut it = self.start_iterate(ws, request, start);
        for iteration in 1..=MAX_ITERATIONS {
            if it.dirty {
                self.refresh_states(ws, request, &mut it)?;
            }
            self.assemble_step(ws, &it);
            let factored_now = it.need_factor;
            let full_step_h = self.linear_solve(ws, &mut it)?;
            let Some((step_h, mut step_q)) = self.take_step(ws, &mut it, full_step_h, factored_now)
            else {
                continue;
            };
            self.regulating_valve_flows(ws, &mut it, &mut step_q);
            if let (Some(j), Some(q)) = (it.held, it.drawn.as_mut()) {
                let now = self.imbalance(j, &it.flows, &ws.demand);
                step_q = step_q.max((now - *q).abs());
                *q = now;
            }
            if self.converged(ws, &mut it, iteration, step_h, step_q, factored_now) {
                if !self.switch_controls(request, &mut it) {
                    return Ok(it.into_solution(iteration));
                }
                it.dirty = true;
                it.continuity_pending = true;
                it.previous_step = f64::INFINITY;
                it.previous_flow_step = f64::INFINITY;
            }
        }
        let nj = self.n_junctions;
        Err(self.no_convergence(&it.heads, &it.flows, &it.states, &ws.node_step[..nj]))
    }

    /// The demands of `request` into the workspace, and the first iterate: `start`'s heads,
    /// flows and states, sources at their grades.
    fn start_iterate(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        start: &Solution,
    ) -> Iterate {
        let net = self.net;
        let nj = self.n_junctions;
        let nl = net.links.len();
        for (d, base) in ws.demand.iter_mut().zip(&self.base_demand_m3s) {
            *d = base * request.demand_factor;
        }
        for &(j, q) in request.extra_demand {
            ws.demand[j] += q;
        }
        if ws.head_dependent() {
            ws.asked = self.asked_demands(request);
            ws.outflow_slope = vec![0.0; nj];
            ws.pdd_weight.clear();
        }
        // A junction held at a head is pinned there like the junction a PRV regulates; the
        // flow it draws beyond its demand follows from continuity after every step.
        let held = request.fixed_head.map(|(j, _)| j);
        let drawn = match ws.lead_outflow {
            Some(e) => Some(e.outflow(start.heads_m[e.junction])),
            None => held.map(|j| self.imbalance(j, &start.flows_m3s, &ws.demand)),
        };
        // No step yet: the first matrix floors slopes at the full floor flow.
        ws.flow_step
            .iter_mut()
            .for_each(|d| *d = SLOPE_FLOOR_FLOW_M3S);
        let mut heads = start.heads_m.clone();
        let flows = start.flows_m3s.clone();
        let mut states = start.states.clone();
        heads[nj..].copy_from_slice(&self.source_grade[nj..]);
        // A PRV or PSV whose controlled junction the request holds starts in the state its
        // held head asks for, whatever the start's state (an open valve carried over from the
        // start could pass reverse flow between two fixed heads); its rules take over from there.
        if let Some((_, head)) = request.fixed_head {
            for &i in &self.pressure_valves {
                if self.is_held_by_request(i, request) {
                    states[i] =
                        controls::held_end_state(self.valve_kind(i), head, self.settings[i]);
                }
            }
        }
        Iterate {
            heads,
            flows,
            states,
            held,
            drawn,
            switches: vec![0u8; nl],
            unsettled: Vec::new(),
            isolated: Vec::new(),
            dirty: true,
            coupled: Vec::new(),
            released: Vec::new(),
            just_closed: Vec::new(),
            reopened_alone: Vec::new(),
            need_factor: true,
            previous_step: f64::INFINITY,
            previous_flow_step: f64::INFINITY,
            factorizations: 0,
            continuity_pending: true,
            last_step_settled: false,
            last_step_newton: false,
        }
    }

    /// After a state change: pins the junctions the states fix, finds the cut-off ones, and
    /// decides whether the current factorization still serves.
    fn refresh_states(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        it: &mut Iterate,
    ) -> Result<(), SolveError> {
        it.isolated = self.pin_and_isolate(ws, request, it)?;
        for &j in &it.isolated {
            ws.pinned[j] = Some(it.heads[j]);
        }
        it.coupled = self.valves_to_couple(ws, it);
        it.dirty = false;
        // The factorization serves chord steps when it was made for these states and
        // the same held junction, or for a held junction when none is held now: the
        // matrix then differs only in that junction's row and column, which a border
        // restores (see `solve_bordered`).
        let (reusable, border) = match &ws.factor_key {
            Some((key, st)) if st == &it.states => match (*key, it.held) {
                (k, h) if k == h => (true, None),
                (Some(k), None) => (true, Some(k)),
                _ => (false, None),
            },
            _ => (false, None),
        };
        // A factorization with a lead outflow's slope on its diagonal serves the solves behind
        // that lead, and the others with the slope taken back out (see `solve_factored`).
        let reusable = reusable
            && match (ws.factor_outflow, ws.lead_outflow) {
                (Some((j, _)), Some(e)) => j == e.junction,
                (None, Some(_)) => false,
                (_, None) => true,
            };
        it.need_factor = !reusable;
        ws.border_at = if reusable { border } else { None };
        ws.correct_outflow = reusable && ws.lead_outflow.is_none() && ws.factor_outflow.is_some();
        Ok(())
    }

    /// Assembles the junction system of the step: the right-hand side and, when a new
    /// factorization is needed, the matrix values; also each link's conductance and the
    /// known part of its flow change. In three passes: the junctions' own terms, the links',
    /// then the rows of pinned junctions.
    fn assemble_step(&self, ws: &mut Workspace, it: &Iterate) {
        let any_pinned = self.junction_terms(ws, it);
        if it.need_factor {
            ws.values.iter_mut().for_each(|v| *v = 0.0);
            ws.floored = false;
        }
        self.link_terms(ws, it, any_pinned);
        self.fixed_rows(ws, it.need_factor, any_pinned);
    }

    /// Each junction's demand into the right-hand side (its pressure-dependent outflow and
    /// slope at the current head, in such a solve), and the step of every fixed node: a pinned
    /// junction moves to its target in this step, sources stay where they are. Returns whether
    /// any junction is pinned (most solves pin nothing: then the pinned rows need no pass of
    /// their own).
    #[inline]
    fn junction_terms(&self, ws: &mut Workspace, it: &Iterate) -> bool {
        let heads = &it.heads;
        let mut any_pinned = false;
        for j in 0..self.n_junctions {
            ws.node_step[j] = match ws.pinned[j] {
                Some(target) => {
                    any_pinned = true;
                    target - heads[j]
                }
                None => 0.0,
            };
            if let Some(pdd) = &ws.pdd {
                // Pressure-dependent outflow at the current head (see
                // `solve_pressure_dependent`); its slope joins the diagonal in `fixed_rows`.
                let (q, slope) = self.delivered_at(pdd, ws.asked[j], j, heads[j]);
                ws.demand[j] = q;
                ws.outflow_slope[j] = slope;
            }
            ws.rhs[self.row_of[j]] = -ws.demand[j];
        }
        self.lead_terms(ws, it);
        any_pinned
    }

    /// A lead outflow's terms, linearised in its flow q as the gradient algorithm linearises a
    /// pipe's (the outflow is a pipe from its junction to the fixed outlet head H_o): with
    /// g = 1/L′(q) and k = −(L(q) − (H_j − H_o))·g, the step's flow is q + k + g·ΔH_j, so
    /// −(q + k) joins the junction's right-hand side and g its diagonal (in `fixed_rows`).
    /// Linearising q(H_j) instead, Newton's steps swung the junction's head by tens of metres
    /// where a short lead draws much for a little head.
    fn lead_terms(&self, ws: &mut Workspace, it: &Iterate) {
        let Some((e, q)) = ws.lead_flow(it) else {
            return;
        };
        let j = e.junction;
        let (loss, slope) = e.lead.evaluate(q);
        // A chord step moves the flow by the conductance the factorization holds, as a pipe's
        // does (`conductance_and_known`): with a fresh one the step broke continuity at the
        // junction, and two steps' ratio gave a false rate (an answer came out 0.5 % short).
        let g = match ws.factor_outflow {
            Some((at, g)) if !it.need_factor && at == j => g,
            _ => 1.0 / slope.max(f64::MIN_POSITIVE),
        };
        let k = -(loss - (it.heads[j] - e.outlet_head_m)) * g;
        ws.lead_gk = (g, k);
        ws.outflow_slope[j] = g;
        let asked = ws.asked[j].0 + ws.asked[j].1;
        ws.rhs[self.row_of[j]] = -(asked + q + k);
        // Continuity at the junction counts the flow drawn (a valve holding this junction
        // takes its flow from it).
        ws.demand[j] = asked + q;
    }

    /// One pass over the links: conductance g, the known part k of the flow change, the
    /// continuity residual and the known changes into the right-hand side, and (when
    /// refactoring) the matrix values.
    #[inline]
    fn link_terms(&self, ws: &mut Workspace, it: &Iterate, any_pinned: bool) {
        let need_factor = it.need_factor;
        // Slopes are floored in the solves of a fire-flow search only: a steady state reported
        // as such (tolerance STEADY) and a pressure-dependent one, whose damped step needs
        // Newton's own direction, keep Newton's matrix.
        let floor_slopes = ws.pdd.is_none() && ws.tolerance.head_m > Tolerance::STEADY.head_m;
        for i in 0..self.ends.len() {
            let (a, b) = self.ends[i];
            let q = it.flows[i];
            let (g, k) = if a == b {
                (0.0, -q)
            } else {
                self.conductance_and_known(ws, it, i, need_factor, floor_slopes)
            };
            if need_factor {
                ws.g_factored[i] = g;
            }
            ws.known[i] = k;
            if a == b {
                continue;
            }
            // Rows and slots of pinned junctions are overwritten below, so only the
            // off-diagonal entry needs both ends free.
            let carried = q + k;
            let [row_a, row_b] = self.link_rows[i];
            if row_a != NO_ROW {
                ws.rhs[row_a as usize] += g * ws.node_step[b] - carried;
            }
            if row_b != NO_ROW {
                ws.rhs[row_b as usize] += g * ws.node_step[a] + carried;
            }
            if need_factor {
                let [diag_a, diag_b, off] = self.link_slots[i];
                if diag_a != NO_ROW {
                    ws.values[diag_a as usize] += g;
                }
                if diag_b != NO_ROW {
                    ws.values[diag_b as usize] += g;
                }
                if off != NO_ROW
                    && !(any_pinned && (ws.pinned[a].is_some() || ws.pinned[b].is_some()))
                {
                    ws.values[off as usize] -= g;
                }
            }
        }
    }

    /// Link `i`'s conductance g in the step's matrix (a new one when refactoring, else the one
    /// factorized) and the known part k of its flow change, by its state: a conducting link's
    /// energy residual, a regulating FCV's distance to its setting, a closed link's flow.
    #[inline(always)]
    fn conductance_and_known(
        &self,
        ws: &mut Workspace,
        it: &Iterate,
        i: usize,
        need_factor: bool,
        floor_slopes: bool,
    ) -> (f64, f64) {
        let (a, b) = self.ends[i];
        let q = it.flows[i];
        match it.states[i] {
            st if st.conducts() => {
                let (phi, slope) = self.laws[i].evaluate_with(q, &mut ws.memo[i]);
                let g = if need_factor {
                    let matrix_slope = if floor_slopes {
                        self.floored_slope(i, q, slope, ws.flow_step[i])
                    } else {
                        slope
                    };
                    ws.floored |= matrix_slope > slope;
                    1.0 / matrix_slope
                } else {
                    ws.g_factored[i]
                };
                (g, -g * (phi - (it.heads[a] - it.heads[b])))
            }
            LinkState::Regulating => match self.valve_kinds[i] {
                Some(ValveKind::Fcv) => (0.0, self.settings[i] - q),
                _ => (0.0, 0.0),
            },
            _ => (0.0, -q),
        }
    }

    /// The rows the link pass leaves to the junctions: a pressure-dependent outflow's slope on
    /// its diagonal, and each pinned junction's identity row with its step as right-hand side.
    #[inline]
    fn fixed_rows(&self, ws: &mut Workspace, need_factor: bool, any_pinned: bool) {
        if need_factor && ws.head_dependent() {
            for j in 0..self.n_junctions {
                ws.values[self.diag_slot[j]] += ws.outflow_slope[j];
            }
        }
        if !any_pinned {
            return;
        }
        for j in 0..self.n_junctions {
            if ws.pinned[j].is_some() {
                ws.rhs[self.row_of[j]] = ws.node_step[j];
                if need_factor {
                    ws.values[self.diag_slot[j]] = 1.0;
                }
            }
        }
    }

    /// The slope with which link `i`, at flow `q` with slope `slope` and last flow step
    /// `last_step`, enters the iteration matrix of a fire-flow search's solve: a pipe below
    /// the smaller of [`SLOPE_FLOOR_FLOW_M3S`] and its last step, when that step exceeds the
    /// law's smoothing flow, takes the slope at that flow.
    fn floored_slope(&self, i: usize, q: f64, slope: f64, last_step: f64) -> f64 {
        let floor_flow = last_step.abs().min(SLOPE_FLOOR_FLOW_M3S);
        if self.roles[i] == Role::Plain && floor_flow > ZERO_FLOW_M3S && q.abs() < floor_flow {
            slope.max(self.laws[i].evaluate(floor_flow).1)
        } else {
            slope
        }
    }

    /// Factorizes the assembled matrix when needed and solves for the head step of every
    /// junction (into `ws.node_step`); returns the largest head step of a free junction, m.
    fn linear_solve(&self, ws: &mut Workspace, it: &mut Iterate) -> Result<f64, SolveError> {
        let nj = self.n_junctions;
        if it.need_factor {
            ws.factor_key = None;
            ws.factor
                .refactor(&ws.values)
                .map_err(|_| self.singular_error(ws))?;
            ws.factor_key = Some((it.held, it.states.clone()));
            ws.border_at = None;
            ws.border_z = None;
            ws.factor_outflow = ws
                .lead_outflow
                .map(|e| (e.junction, ws.outflow_slope[e.junction]));
            ws.outflow_w = None;
            ws.correct_outflow = false;
            it.factorizations += 1;
        }
        self.solve_factored(ws);
        self.couple_regulating_valves(ws, it);
        let mut full_step_h = 0.0_f64;
        for j in 0..nj {
            let d = ws.rhs[self.row_of[j]];
            if !d.is_finite() {
                return Err(SolveError::Internal(
                    "the linear solve produced a non-finite head".into(),
                ));
            }
            ws.node_step[j] = d;
        }
        for j in 0..nj {
            if ws.pinned[j].is_none() {
                full_step_h = full_step_h.max(ws.node_step[j].abs());
            }
        }
        Ok(full_step_h)
    }

    /// Solves `v` in place with the factorization of this step (bordered when it has one).
    fn solve_current(&self, ws: &mut Workspace, v: &mut Vec<f64>) {
        std::mem::swap(&mut ws.rhs, v);
        self.solve_factored(ws);
        std::mem::swap(&mut ws.rhs, v);
    }

    /// Solves `ws.rhs` in place with the current factorization: bordered when it has a
    /// border, and with a lead outflow's slope s at junction j taken back out of it when this
    /// solve has none. The matrix is then A = F − s·e_j·e_jᵀ, F the factorized one, and by
    /// the Sherman-Morrison formula A⁻¹r = F⁻¹r + w·s·(F⁻¹r)_j/(1 − s·w_j) with w = F⁻¹e_j,
    /// once per factorization (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013,
    /// §2.1.4 — from memory). A solve that verifies a flow placed behind a lead thus starts
    /// with chord steps on the held solve's last factorization, as one after a pinned
    /// junction does.
    fn solve_factored(&self, ws: &mut Workspace) {
        match ws.border_at {
            Some(h) => self.solve_bordered(ws, h),
            None => ws.factor.solve_in_place(&mut ws.rhs),
        }
        let Some((j, slope)) = ws.factor_outflow.filter(|_| ws.correct_outflow) else {
            return;
        };
        let row = self.row_of[j];
        if ws.outflow_w.is_none() {
            let mut w = vec![0.0; self.n_junctions];
            w[row] = 1.0;
            ws.factor.solve_in_place(&mut w);
            let denominator = 1.0 - slope * w[row];
            ws.outflow_w = Some((w, denominator));
        }
        if let Some((w, denominator)) = &ws.outflow_w {
            let scale = slope * ws.rhs[row] / denominator;
            for (x, wi) in ws.rhs.iter_mut().zip(w) {
                *x += wi * scale;
            }
        }
    }

    /// Couples the flows of regulating PRVs and PSVs into the head step just solved (in
    /// `ws.rhs`, matrix order). The step sees each valve's current flow at the valve's free end,
    /// and the valve's flow then follows from continuity at the junction it holds: one step
    /// late, a fixed point whose rate is the loop gain G = the share of a change of the valve's
    /// flow that returns to the held junction through the network. Where the valve's zone loops
    /// back towards that junction G nears one and the exchange crawls (a PSV just past the flow
    /// at which it begins to regulate took steps shrinking 1 % an iteration, and the solve hit
    /// the iteration limit). Here the flow changes ε that restore continuity at the held
    /// junctions after the step are found from the linear response z = A⁻¹e of the step's
    /// matrix to a unit inflow at each valve's free end, (G − I)·ε = −r, and the step becomes
    /// Δh + Σ ε·z: the Newton step of the system with the valve flows as unknowns (block
    /// elimination, as in `solve_bordered`). The valve flows themselves are still set from
    /// continuity after the step, so the converged state is the same; only the path is
    /// shorter. Left to the one-step-late update when a valve's free end is pinned, two valves
    /// hold one junction, or the small system is singular or gives no finite change.
    fn couple_regulating_valves(&self, ws: &mut Workspace, it: &Iterate) {
        let valves = &it.coupled;
        if valves.is_empty() {
            return;
        }
        let nj = self.n_junctions;
        let responses: Vec<Vec<f64>> = valves
            .iter()
            .map(|v| {
                let mut z = vec![0.0; nj];
                z[self.row_of[v.free]] = 1.0;
                self.solve_current(ws, &mut z);
                z
            })
            .collect();
        let (gain, residual) = self.held_continuity(ws, it, valves, &responses);
        let Some(change) = gain.lu().solve(&(-residual)) else {
            return;
        };
        // No cap on the change: where the valves' present states have a far-off solution
        // (two regulating valves that would circulate flow through their zone), reaching it
        // quickly lets the switching rules correct the states; the one-step-late exchange
        // crawled there (about 0.004 m³/s an iteration) into the iteration limit.
        if change.iter().any(|e| !e.is_finite()) {
            return;
        }
        for (v, (z, e)) in valves.iter().zip(responses.iter().zip(change.iter())) {
            for (x, dz) in ws.rhs.iter_mut().zip(z) {
                *x += v.sigma * e * dz;
            }
        }
    }

    /// The regulating PRVs and PSVs to couple into the step under the present states and pins:
    /// none when one of them cannot be (its free end pinned, or its held junction shared with
    /// another). Beyond [`ALWAYS_COUPLED`] valves, none either when no valve's flow can reach
    /// a held junction through the network (every zone joined to the rest only through
    /// regulating valves, as pressure zones mostly are): there the one-step-late update
    /// converges, one step behind, and coupling would add a triangular solve per valve to
    /// every step.
    fn valves_to_couple(&self, ws: &Workspace, it: &Iterate) -> Vec<CoupledValve> {
        let nj = self.n_junctions;
        let mut valves: Vec<CoupledValve> = Vec::new();
        for &i in &self.pressure_valves {
            if it.states[i] != LinkState::Regulating {
                continue;
            }
            let l = &self.net.links[i];
            let (held, free, sigma) = match self.valve_kind(i) {
                Some(ValveKind::Psv) => (l.from, l.to, 1.0),
                Some(ValveKind::Prv) => (l.to, l.from, -1.0),
                _ => continue,
            };
            let eligible = held < nj
                && free < nj
                && ws.pinned[held].is_some()
                && ws.pinned[free].is_none()
                && valves.iter().all(|v| v.held != held);
            if !eligible {
                return Vec::new();
            }
            valves.push(CoupledValve {
                link: i,
                held,
                free,
                sigma,
            });
        }
        let coupled = !valves.is_empty()
            && (valves.len() <= ALWAYS_COUPLED || self.valve_flows_return(ws, it, &valves));
        if coupled {
            valves
        } else {
            Vec::new()
        }
    }

    /// Whether some valve's free end is joined, through conducting links between junctions
    /// that nothing pins, to a junction next to some valve's held junction: only then does a
    /// valve's flow change reach the continuity of a held junction within the step.
    fn valve_flows_return(&self, ws: &Workspace, it: &Iterate, valves: &[CoupledValve]) -> bool {
        let nj = self.n_junctions;
        let free_node = |n: usize| n < nj && ws.pinned[n].is_none();
        let mut parent: Vec<usize> = (0..nj).collect();
        fn root(parent: &mut [usize], mut n: usize) -> usize {
            while parent[n] != n {
                parent[n] = parent[parent[n]];
                n = parent[n];
            }
            n
        }
        for (i, &(a, b)) in self.ends.iter().enumerate() {
            if it.states[i].conducts() && a != b && free_node(a) && free_node(b) {
                let (ra, rb) = (root(&mut parent, a), root(&mut parent, b));
                parent[ra] = rb;
            }
        }
        let free_roots: Vec<usize> = valves.iter().map(|v| root(&mut parent, v.free)).collect();
        valves.iter().any(|v| {
            self.links_at(v.held).iter().any(|&i| {
                let (a, b) = self.ends[i];
                let other = if a == v.held { b } else { a };
                i != v.link
                    && it.states[i].conducts()
                    && free_node(other)
                    && free_roots.contains(&root(&mut parent, other))
            })
        })
    }

    /// Continuity at each coupled valve's held junction after the step in `ws.rhs`: the
    /// residual inflow r, and the gain matrix of its change with a unit change of each valve's
    /// flow (through the responses z = A⁻¹e at the free ends, and the valve's own flow).
    fn held_continuity(
        &self,
        ws: &Workspace,
        it: &Iterate,
        valves: &[CoupledValve],
        responses: &[Vec<f64>],
    ) -> (nalgebra::DMatrix<f64>, nalgebra::DVector<f64>) {
        let nj = self.n_junctions;
        let step = |n: usize, v: &[f64]| if n < nj { v[self.row_of[n]] } else { 0.0 };
        let m = valves.len();
        let mut gain = nalgebra::DMatrix::<f64>::zeros(m, m);
        let mut residual = nalgebra::DVector::<f64>::zeros(m);
        for (r, row_valve) in valves.iter().enumerate() {
            let held = row_valve.held;
            let mut inflow = -ws.demand[held];
            for &i in self.links_at(held) {
                let (a, b) = self.ends[i];
                if a == b {
                    continue;
                }
                let sign = if b == held { 1.0 } else { -1.0 };
                let g = ws.g_factored[i];
                inflow +=
                    sign * (it.flows[i] + ws.known[i] + g * (step(a, &ws.rhs) - step(b, &ws.rhs)));
                for (c, (v, z)) in valves.iter().zip(responses).enumerate() {
                    gain[(r, c)] += sign * g * v.sigma * (step(a, z) - step(b, z));
                    if i == v.link {
                        gain[(r, c)] += sign;
                    }
                }
            }
            residual[r] = inflow;
        }
        (gain, residual)
    }

    /// Updates heads and flows by the step, with a line search on large steps once continuity
    /// holds (a Newton step from far away can overshoot, e.g. when a fire flow is added to a
    /// state with near-zero flows in the pipes around the hydrant). Returns the largest head
    /// and flow changes taken, or `None` when a chord step that does not descend was
    /// discarded (the next iteration then takes a Newton step).
    fn take_step(
        &self,
        ws: &mut Workspace,
        it: &mut Iterate,
        full_step_h: f64,
        factored_now: bool,
    ) -> Option<(f64, f64)> {
        let nj = self.n_junctions;
        let nl = self.ends.len();
        // Steps that shrink at least twofold need no line search: the iteration contracts.
        let contracting = full_step_h < 0.5 * it.previous_step;
        let search = ws.pdd.is_none()
            && !it.continuity_pending
            && full_step_h > LINE_SEARCH_MIN_STEP_M
            && !contracting;
        if search {
            self.compute_flow_step(ws);
        }
        if ws.pdd.is_some() {
            return self.take_pdd_step(ws, it, factored_now);
        }
        let alpha = if search {
            match self.line_search(ws, it, factored_now) {
                Some(alpha) => alpha,
                None => {
                    // A chord step on a stale factorization that does not descend:
                    // discard it and take a Newton step instead.
                    it.need_factor = true;
                    it.previous_step = f64::INFINITY;
                    it.previous_flow_step = f64::INFINITY;
                    return None;
                }
            }
        } else {
            1.0
        };
        it.continuity_pending = false;
        let step_h = apply_head_step(ws, it, nj, alpha);
        let mut step_q = self.step_lead_flow(ws, it, alpha);
        if search {
            for i in 0..nl {
                let dq = alpha * ws.flow_step[i];
                it.flows[i] += dq;
                step_q = step_q.max(dq.abs());
            }
        } else {
            // The full step, computed as it is applied (one pass over the links).
            for i in 0..nl {
                let (a, b) = self.ends[i];
                let dq = ws.known[i] + ws.g_factored[i] * (ws.node_step[a] - ws.node_step[b]);
                it.flows[i] += dq;
                ws.flow_step[i] = dq;
                step_q = step_q.max(dq.abs());
            }
        }
        Some((step_h, step_q))
    }

    /// The full step of a lead outflow's flow, k + g·ΔH_j (see `lead_terms`), m³/s.
    fn lead_flow_step(&self, ws: &Workspace, e: LeadOutflow) -> f64 {
        let (g, k) = ws.lead_gk;
        k + g * ws.node_step[e.junction]
    }

    /// Moves a lead outflow's flow by `alpha` of its step; returns the change, m³/s (0 without
    /// a lead outflow).
    fn step_lead_flow(&self, ws: &mut Workspace, it: &mut Iterate, alpha: f64) -> f64 {
        let Some((e, _)) = ws.lead_flow(it) else {
            return 0.0;
        };
        let dq = alpha * self.lead_flow_step(ws, e);
        if let Some(q) = it.drawn.as_mut() {
            *q += dq;
            let asked = ws.asked[e.junction].0 + ws.asked[e.junction].1;
            ws.demand[e.junction] = asked + *q;
        }
        dq.abs()
    }

    /// The step of a pressure-dependent solve (see `solve_pressure_dependent`), damped by
    /// backtracking on the squared residual norm ½‖F‖² of the full system: each conducting
    /// link's energy residual φ(Q) − (H_from − H_to), m, and each free junction's continuity
    /// residual Σ inflow − q_j(H_j), divided by the junction's diagonal entry (its conductances
    /// and dq_j/dH_j) at the first step of the solve, kept for the whole solve, to make it a
    /// head, m. A Newton step of the system is a
    /// descent direction of that norm for any fixed positive weights, so halving finds a step
    /// that reduces it (Armijo's condition; Dennis & Schnabel, *Numerical Methods for
    /// Unconstrained Optimization and Nonlinear Equations*, SIAM 1996, §6.3 — from memory).
    /// Without it, Newton's steps swing between full delivery (no slope) and none. A chord
    /// step that does not descend is discarded for a Newton step; a damped step does not
    /// count towards convergence.
    fn take_pdd_step(
        &self,
        ws: &mut Workspace,
        it: &mut Iterate,
        factored_now: bool,
    ) -> Option<(f64, f64)> {
        self.compute_flow_step(ws);
        if ws.pdd_weight.is_empty() {
            // Fixed for the whole solve, so that every accepted step lowers one function.
            ws.pdd_weight = (0..self.n_junctions)
                .map(|j| 1.0 / ws.values[self.diag_slot[j]].max(MIN_SLOPE_S_PER_M2))
                .collect();
        }
        let start = self.pdd_merit(ws, it, 0.0);
        let mut alpha = 1.0;
        let mut accepted = false;
        for _ in 0..PDD_HALVINGS {
            let merit = self.pdd_merit(ws, it, alpha);
            if merit <= (1.0 - 1.0e-4 * alpha) * start || merit <= PDD_MERIT_FLOOR {
                accepted = true;
                break;
            }
            if !factored_now {
                break;
            }
            alpha *= 0.5;
        }
        if !accepted && !factored_now {
            it.need_factor = true;
            it.previous_step = f64::INFINITY;
            it.previous_flow_step = f64::INFINITY;
            return None;
        }
        it.continuity_pending = false;
        let nj = self.n_junctions;
        let step_h = apply_head_step(ws, it, nj, alpha);
        let mut step_q = 0.0_f64;
        for i in 0..self.ends.len() {
            let dq = alpha * ws.flow_step[i];
            it.flows[i] += dq;
            step_q = step_q.max(dq.abs());
        }
        if alpha < 1.0 {
            // Not a Newton step: the next one needs a fresh matrix, and this one's size says
            // nothing about the distance to the solution.
            it.need_factor = true;
            it.previous_step = f64::INFINITY;
            it.previous_flow_step = f64::INFINITY;
            return Some((f64::INFINITY, f64::INFINITY));
        }
        Some((step_h, step_q))
    }

    /// ½‖F‖² of [`Hydraulics::take_pdd_step`] at step length `alpha` along the current step.
    fn pdd_merit(&self, ws: &Workspace, it: &Iterate, alpha: f64) -> f64 {
        let nj = self.n_junctions;
        let Some(pdd) = &ws.pdd else {
            return 0.0;
        };
        let head = |n: usize| -> f64 {
            if n >= nj {
                self.source_grade[n]
            } else if ws.pinned[n].is_some() {
                it.heads[n] + ws.node_step[n]
            } else {
                it.heads[n] + alpha * ws.node_step[n]
            }
        };
        let mut residual: Vec<f64> = (0..nj)
            .map(|j| -self.delivered_at(pdd, ws.asked[j], j, head(j)).0)
            .collect();
        let mut total = 0.0;
        for (i, &(a, b)) in self.ends.iter().enumerate() {
            if a == b {
                continue;
            }
            let q = it.flows[i] + alpha * ws.flow_step[i];
            if it.states[i].conducts() {
                let e = self.laws[i].evaluate(q).0 - (head(a) - head(b));
                total += e * e;
            }
            if a < nj {
                residual[a] -= q;
            }
            if b < nj {
                residual[b] += q;
            }
        }
        for j in 0..nj {
            if ws.pinned[j].is_none() {
                let c = residual[j] * ws.pdd_weight[j];
                total += c * c;
            }
        }
        0.5 * total
    }

    /// Regulating PRV/PSV: flow from continuity at the junction they hold; `step_q` takes the
    /// largest change.
    fn regulating_valve_flows(&self, ws: &Workspace, it: &mut Iterate, step_q: &mut f64) {
        for &i in &self.pressure_valves {
            if it.states[i] != LinkState::Regulating {
                continue;
            }
            let l = &self.net.links[i];
            let held = match self.valve_kind(i) {
                Some(ValveKind::Prv) => l.to,
                Some(ValveKind::Psv) => l.from,
                _ => continue,
            };
            let old = it.flows[i];
            let residual = self.imbalance(held, &it.flows, &ws.demand);
            // At `to` the valve flow enters; at `from` it leaves.
            it.flows[i] = if held == l.to {
                old - residual
            } else {
                old + residual
            };
            *step_q = step_q.max((it.flows[i] - old).abs());
            // The valve's other end saw the old flow in this step: continuity there is off
            // by the change until the next step, so the next step takes no line search.
            if (it.flows[i] - old).abs() > 1e-12 {
                it.continuity_pending = true;
            }
        }
    }

    /// The convergence test of the step just taken (largest changes `step_h`, m, and
    /// `step_q`, m³/s): records the steps, decides whether the next step needs a new
    /// factorization, and says whether heads and flows have converged for the current states.
    fn converged(
        &self,
        ws: &Workspace,
        it: &mut Iterate,
        iteration: u32,
        step_h: f64,
        step_q: f64,
        factored_now: bool,
    ) -> bool {
        let ratio = step_h / it.previous_step;
        let flow_ratio = step_q / it.previous_flow_step;
        let previous_small = it.previous_step <= CHORD_MAX_STEP_M;
        it.previous_step = step_h;
        it.previous_flow_step = step_q;
        let flow_tolerance = match it.drawn {
            Some(q) => ws
                .tolerance
                .flow_m3s
                .min(DRAWN_FLOW_RELATIVE * q.abs())
                .max(Tolerance::STEADY.flow_m3s),
            None => ws.tolerance.flow_m3s,
        };
        it.need_factor = step_h > CHORD_MAX_STEP_M
            || ratio > CHORD_MAX_RATIO
            || (flow_ratio > CHORD_MAX_RATIO && step_q > flow_tolerance);

        // A regulating valve's other end sees its new flow one step late: a step that moved
        // such a flow converges only linearly, whatever the factorization, so the step alone
        // does not bound the remaining error; nor does a step on a floored matrix.
        let newton = factored_now && !it.continuity_pending && !ws.floored;
        // The ratio of two steps is a rate only where both belong to one converging sequence.
        // A Newton step's ratio counts only to a Newton step of at most CHORD_MAX_STEP_M before
        // it (a 2.7 cm step after one of 6.6 m, taken far from the answer, was taken as
        // converged with 0.6 mm left); a chord step's only to a step that left no valve flow
        // moving, since the step after such a move still carries it to the rest of the network
        // (a chord step of 1.3 mm after one of 11 mm, ratio 0.11, left 3.5 mm). Without a rate
        // the step is judged as a first one.
        let (ratio, flow_ratio) = if (newton && it.last_step_newton && previous_small)
            || (!newton && it.last_step_settled)
        {
            (ratio, flow_ratio)
        } else {
            (f64::INFINITY, f64::INFINITY)
        };
        it.last_step_settled = !it.continuity_pending;
        it.last_step_newton = newton;
        let flows_converged = Self::within(step_q, flow_ratio, newton, flow_tolerance);
        let heads_converged = Self::within(step_h, ratio, newton, ws.tolerance.head_m)
            || (iteration >= STALL_CHECK_AFTER
                && flows_converged
                && self.equations_hold(ws, &it.heads, &it.flows, &it.states, flow_tolerance));
        heads_converged && flows_converged
    }

    /// Converged for the current states: applies the switching rules of every controlled
    /// link. Returns whether a state changed; a link that switched [`MAX_SWITCHES`] times
    /// keeps its state and is listed as unsettled. Every link whose rules ask for a change
    /// switches at once, until some link has switched [`ONE_AT_A_TIME_AFTER`] times: from
    /// then on one link switches per converged solve, a link stopping reverse flow first
    /// (else the first in order). Rules judged on a state that other switches are about to
    /// change can cycle: a PRV passing reverse flow and another PRV short of head, switched
    /// together, alternated with a PSV without ever reaching the state where the first alone
    /// had closed.
    fn switch_controls(&self, request: &SolveRequest<'_>, it: &mut Iterate) -> bool {
        let mut wanted: Vec<(usize, LinkState)> = Vec::new();
        for &i in &self.controlled {
            let next = self.next_state_of(request, it, i);
            if next == it.states[i] {
                continue;
            }
            if it.switches[i] < MAX_SWITCHES {
                wanted.push((i, next));
            } else if !it.unsettled.contains(&i) {
                it.unsettled.push(i);
            }
        }
        let one_at_a_time = self
            .controlled
            .iter()
            .any(|&i| it.switches[i] >= ONE_AT_A_TIME_AFTER);
        if one_at_a_time && wanted.len() > 1 {
            let first = wanted
                .iter()
                .position(|&(_, next)| stops_flow(next))
                .unwrap_or(0);
            wanted = vec![wanted[first]];
        }
        it.just_closed.clear();
        for &(i, next) in &wanted {
            if stops_flow(next) {
                it.just_closed.push(i);
            }
            it.switches[i] += 1;
            it.states[i] = next;
            if !next.conducts() && next != LinkState::Regulating {
                it.flows[i] = 0.0;
            }
        }
        !wanted.is_empty()
    }

    /// The state the switching rules ask of controlled link `i` at the converged iterate.
    fn next_state_of(&self, request: &SolveRequest<'_>, it: &Iterate, i: usize) -> LinkState {
        let l = &self.net.links[i];
        let view = LinkView {
            state: it.states[i],
            head_from: it.heads[l.from],
            head_to: it.heads[l.to],
            flow: it.flows[i],
            setting: self.settings[i],
            open_loss: open_valve_loss,
            shutoff_m: match &l.kind {
                LinkKind::Pump(p) => p.shutoff_at_speed_m(),
                _ => 0.0,
            },
        };
        if self.is_held_by_request(i, request) {
            controls::next_state_with_held_end(l, &view)
        } else {
            controls::next_state(l, &view)
        }
    }

    /// Whether the remaining error after a step of size `step`, which was `ratio` times the one
    /// before, is within `tolerance`.
    ///
    /// After a Newton step (`fresh`: the matrix was factorized at this point) the iteration
    /// converges quadratically and the step bounds the remaining error: the step itself must be
    /// within the tolerance, or the steps shrink at least twofold and the geometric estimate of
    /// what remains, step·r/(1 − r), is. A chord step converges only linearly, at a rate the
    /// step alone does not show: there the geometric estimate must be within the tolerance
    /// (the usual error estimate of a linearly converging iteration, e.g. Kelley, *Iterative
    /// Methods for Linear and Nonlinear Equations*, SIAM 1995, §5.4 — from memory), and a first
    /// chord step, with no rate known yet, must be a tenth of it. A step below
    /// [`ROUNDOFF_STEP_FRACTION`] of the tolerance ends it in every case.
    fn within(step: f64, ratio: f64, fresh: bool, tolerance: f64) -> bool {
        let estimate_within =
            ratio > 0.0 && ratio < 1.0 && step * ratio / (1.0 - ratio) < tolerance;
        if step <= ROUNDOFF_STEP_FRACTION * tolerance {
            true
        } else if fresh {
            step < tolerance || (ratio < 0.5 && estimate_within)
        } else if ratio > 0.0 && ratio.is_finite() {
            estimate_within
        } else {
            step < FIRST_CHORD_STEP_FRACTION * tolerance
        }
    }

    /// Whether the current state satisfies the equations it solves: every conducting link's
    /// energy equation within the head tolerance, and continuity at every free junction within
    /// `flow_tolerance`. A regulating PRV or PSV takes its flow from continuity at the junction
    /// it holds, and its other end sees that flow one step late; where two such valves feed one
    /// another's zones, the head steps can settle into a slow exchange of a few hundredths of a
    /// millimetre while the equations already hold far inside the tolerances. This is the
    /// test of last resort for such a stall; the step tests decide every ordinary solve.
    fn equations_hold(
        &self,
        ws: &Workspace,
        heads: &[f64],
        flows: &[f64],
        states: &[LinkState],
        flow_tolerance: f64,
    ) -> bool {
        let energy_ok = (0..self.ends.len()).all(|i| {
            let (a, b) = self.ends[i];
            !states[i].conducts()
                || a == b
                || (self.laws[i].evaluate(flows[i]).0 - (heads[a] - heads[b])).abs()
                    < ws.tolerance.head_m
        });
        energy_ok
            && (0..self.n_junctions).all(|j| {
                ws.pinned[j].is_some()
                    || self.imbalance(j, flows, &ws.demand).abs() < flow_tolerance
            })
    }

    /// Solves the junction system in `ws.rhs` in place when the factorization was made with
    /// junction `h` pinned (its row and column replaced by the identity, A′) but `h` is free in
    /// this step. By block elimination with h last, M = [[A, b], [bᵀ, d]] (b: minus the
    /// conductances from h to its free neighbours, d: the sum of the conductances at h, both as
    /// factorized): z = A⁻¹b (once per factorization), y = A⁻¹r, x_h = (r_h − bᵀy)/(d − bᵀz),
    /// x = y − z·x_h (Golub & Van Loan, *Matrix Computations*, 4th ed., 2013, §3.2.11 on block
    /// elimination — from memory). A solve that verifies a flow placed by a held solve thus
    /// starts with chord steps on the held solve's last factorization instead of a new one.
    fn solve_bordered(&self, ws: &mut Workspace, h: usize) {
        let row_h = self.row_of[h];
        if ws.border_z.is_none() {
            let mut b = vec![0.0; self.n_junctions];
            let mut d = 0.0;
            for &i in self.links_at(h) {
                let (a, c) = self.ends[i];
                if a == c {
                    continue;
                }
                let g = ws.g_factored[i];
                d += g;
                let other = if a == h { c } else { a };
                if other < self.n_junctions && ws.pinned[other].is_none() {
                    b[self.row_of[other]] -= g;
                }
            }
            let mut z = b.clone();
            ws.factor.solve_in_place(&mut z);
            let schur = d - b.iter().zip(&z).map(|(bi, zi)| bi * zi).sum::<f64>();
            ws.border_z = Some((b, z, schur));
        }
        let r_h = ws.rhs[row_h];
        ws.rhs[row_h] = 0.0;
        ws.factor.solve_in_place(&mut ws.rhs);
        if let Some((b, z, schur)) = &ws.border_z {
            let by: f64 = b.iter().zip(&ws.rhs).map(|(bi, yi)| bi * yi).sum();
            let x_h = (r_h - by) / schur;
            for (x, zi) in ws.rhs.iter_mut().zip(z) {
                *x -= zi * x_h;
            }
            ws.rhs[row_h] = x_h;
        }
    }

    /// The flow change of every link in the current step (for the line search).
    fn compute_flow_step(&self, ws: &mut Workspace) {
        for i in 0..self.ends.len() {
            let (a, b) = self.ends[i];
            ws.flow_step[i] = ws.known[i] + ws.g_factored[i] * (ws.node_step[a] - ws.node_step[b]);
        }
    }

    /// Step length in (0, 1] along `ws.flow_step` that does not increase the content merit
    /// function (Σ link contents − Σ fixed grade × outflow), by halving after a Newton step;
    /// `None` after a chord step whose full length increases it.
    fn line_search(&self, ws: &Workspace, it: &Iterate, newton: bool) -> Option<f64> {
        let (flows, states) = (&it.flows, &it.states);
        let fixed_head = |node: usize| self.fixed_head(node, ws);
        // A lead outflow is a link from its junction to the fixed outlet head.
        let lead = ws
            .lead_flow(it)
            .map(|(e, q)| (e, q, self.lead_flow_step(ws, e)));
        let merit = |alpha: f64| -> f64 {
            let mut total = 0.0;
            if let Some((e, q, dq)) = lead {
                let q = q + alpha * dq;
                total += e.lead.content(q) + e.outlet_head_m * q;
            }
            for (i, l) in self.net.links.iter().enumerate() {
                if !states[i].conducts() || l.from == l.to {
                    continue;
                }
                let q = flows[i] + alpha * ws.flow_step[i];
                total += self.laws[i].content(q);
                if let Some(h) = fixed_head(l.from) {
                    total -= h * q;
                }
                if let Some(h) = fixed_head(l.to) {
                    total += h * q;
                }
            }
            total
        };
        let start = merit(0.0);
        // Round-off allowance: on a tree the flows follow from continuity alone and the merit
        // does not change along the step, so an exact comparison would be decided by noise.
        let allowed = start + MERIT_ROUNDOFF * start.abs().max(1.0);
        let mut alpha = 1.0;
        for _ in 0..LINE_SEARCH_HALVINGS {
            if merit(alpha) <= allowed {
                return Some(alpha);
            }
            if !newton {
                return None;
            }
            alpha *= 0.5;
        }
        // No step length descends: the merit says nothing here, so take Newton's full step.
        Some(1.0)
    }

    /// The head of a node that is fixed in the current state (source or pinned junction).
    fn fixed_head(&self, node: usize, ws: &Workspace) -> Option<f64> {
        if node >= self.n_junctions {
            Some(self.source_grade[node])
        } else {
            ws.pinned[node]
        }
    }

    fn valve_kind(&self, link: usize) -> Option<ValveKind> {
        match &self.net.links[link].kind {
            LinkKind::Valve(v) => Some(v.kind),
            _ => None,
        }
    }

    /// Whether the request's fixed-head junction is the one this valve controls. The valve
    /// cannot regulate a junction whose head the request fixes: it is then open or closed by
    /// [`controls::next_state_with_held_end`], never passing reverse flow.
    fn is_held_by_request(&self, link: usize, request: &SolveRequest<'_>) -> bool {
        let Some((j, _)) = request.fixed_head else {
            return false;
        };
        let l = &self.net.links[link];
        match self.valve_kind(link) {
            Some(ValveKind::Prv) => l.to == j,
            Some(ValveKind::Psv) => l.from == j,
            _ => false,
        }
    }

    /// Sets the junctions whose head is fixed in the current states.
    fn pin_junctions(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        states: &mut [LinkState],
    ) {
        ws.pinned.iter_mut().for_each(|p| *p = None);
        if let Some((j, head)) = request.fixed_head {
            ws.pinned[j] = Some(head);
        }
        for (i, l) in self.net.links.iter().enumerate() {
            if states[i] != LinkState::Regulating {
                continue;
            }
            if self.is_held_by_request(i, request) {
                // Set at the start of the solve (see `solve`); it cannot regulate.
                states[i] = LinkState::Open;
                continue;
            }
            match self.valve_kind(i) {
                Some(ValveKind::Prv) => ws.pinned[l.to] = Some(self.settings[i]),
                Some(ValveKind::Psv) => ws.pinned[l.from] = Some(self.settings[i]),
                _ => {}
            }
        }
    }

    /// Pins the junctions of the current states and finds the cut-off ones (see
    /// [`Hydraulics::find_isolated`]). A regulating valve with an end in a cut-off part cannot
    /// hold its setting: nothing there fixes a head, and the valve's flow has nowhere to go
    /// but that part's demand. It is taken out of regulation, open when the part has a demand
    /// to serve, closed when it has none, and its rules decide from there; without this the
    /// state would be declared unsolvable although a neighbouring state is not. When its rules
    /// send it back to regulating and the part is cut off again, the valve's throttling would
    /// draw the part's heads down: an element that a falling head there would open (see
    /// [`Hydraulics::feeders_into`]) is then switched to conducting instead, so that a PSV
    /// holding the main's head shares the zone with the PRV that takes up the rest. (Opening
    /// those feeders at the first release cycled where the PSV alone, open, was the steady
    /// state.) Only a feeder that the last switching round closed is reopened, when there is
    /// one; and FCVs whose settings cover the part's demand are released wide open again, with
    /// no feeder opened (see [`Hydraulics::flow_controls_cover`]). Both cycled otherwise:
    /// tests/data/valve_fcv_reopen and valve_fcv_open.
    fn pin_and_isolate(
        &self,
        ws: &mut Workspace,
        request: &SolveRequest<'_>,
        it: &mut Iterate,
    ) -> Result<Vec<usize>, SolveError> {
        let held = request.fixed_head.map(|(j, _)| j);
        // Each round makes at least one closed element conduct or takes one valve out of
        // regulation, and neither is undone here: the rounds are bounded.
        loop {
            self.pin_junctions(ws, request, &mut it.states);
            match self.find_isolated(ws, &it.states, held)? {
                Isolation::Cut(cut) => return Ok(cut),
                Isolation::Release { valves, cut } => {
                    // A second release of the same valve means that, released, it went back
                    // to regulating: only then are the part's feeders opened.
                    let again = valves.iter().any(|i| it.released.contains(i))
                        && !self.flow_controls_cover(ws, &valves, &cut, held);
                    let mut feeders = if again {
                        self.feeders_into(&cut, request, it)
                    } else {
                        Vec::new()
                    };
                    // Where the last switching round closed one of them, that closure cut the
                    // part off: judged on flows that the other switches of that round were
                    // about to change (a PSV passing reverse flow beside an FCV that was
                    // about to start regulating), it is undone alone, once per link (should
                    // its rules close it again, every feeder opens as before). Opening every
                    // feeder there cycled between states around the one steady state.
                    let undo: Vec<(usize, LinkState)> = feeders
                        .iter()
                        .filter(|(i, _)| {
                            it.just_closed.contains(i) && !it.reopened_alone.contains(i)
                        })
                        .copied()
                        .collect();
                    if !undo.is_empty() {
                        it.reopened_alone.extend(undo.iter().map(|&(i, _)| i));
                        feeders = undo;
                    }
                    it.just_closed.clear();
                    if !feeders.is_empty() {
                        for (i, state) in feeders {
                            it.states[i] = state;
                        }
                        continue;
                    }
                    let demand = cut.iter().any(|&j| ws.demand[j] != 0.0 || Some(j) == held);
                    it.released.extend(valves.iter().copied());
                    for i in valves {
                        it.states[i] = if demand {
                            LinkState::Open
                        } else {
                            it.flows[i] = 0.0;
                            LinkState::Closed
                        };
                    }
                }
            }
        }
    }

    /// Whether the regulating valves `valves` at the cut-off part `cut` are all FCVs whose
    /// settings, net of those leaving the part, cover the part's demand (and no junction of it
    /// is held by the request): such FCVs cannot all carry their settings, so the part's heads
    /// would rise, not fall, and released wide open they are its supply. Where the demand is
    /// larger, the part's heads would fall and its feeders open (see
    /// [`Hydraulics::pin_and_isolate`]).
    fn flow_controls_cover(
        &self,
        ws: &Workspace,
        valves: &[usize],
        cut: &[usize],
        held: Option<usize>,
    ) -> bool {
        let in_cut = |j: usize| cut.binary_search(&j).is_ok();
        if held.is_some_and(in_cut) {
            return false;
        }
        let mut inflow = 0.0;
        for &i in valves {
            if self.valve_kinds[i] != Some(ValveKind::Fcv) {
                return false;
            }
            let l = &self.net.links[i];
            match (in_cut(l.from), in_cut(l.to)) {
                (false, true) => inflow += self.settings[i],
                (true, false) => inflow -= self.settings[i],
                _ => {}
            }
        }
        let demand: f64 = cut.iter().map(|&j| ws.demand[j]).sum();
        demand <= inflow
    }

    /// The elements that would start to deliver into the cut-off part `cut` (which has a
    /// demand) as its heads fell, with the state they would take: closed PRVs from a supplied
    /// junction into the part (regulating where the upstream head exceeds the setting, else
    /// open), closed PSVs whose upstream head exceeds their setting (open), closed check-valve
    /// pipes into it (open) and stopped pumps into it (running).
    /// Empty when the part has no demand. Valves whose controlled junction the request holds
    /// follow their own rules and are left alone.
    fn feeders_into(
        &self,
        cut: &[usize],
        request: &SolveRequest<'_>,
        it: &Iterate,
    ) -> Vec<(usize, LinkState)> {
        let held = request.fixed_head.map(|(j, _)| j);
        let in_cut = |j: usize| cut.binary_search(&j).is_ok();
        let has_demand = cut.iter().any(|&j| {
            self.base_demand_m3s[j] * request.demand_factor != 0.0
                || request
                    .extra_demand
                    .iter()
                    .any(|&(k, q)| k == j && q != 0.0)
                || Some(j) == held
        });
        if !has_demand {
            return Vec::new();
        }
        let mut feeders = Vec::new();
        for &i in &self.controlled {
            let l = &self.net.links[i];
            if !in_cut(l.to) || in_cut(l.from) || self.is_held_by_request(i, request) {
                continue;
            }
            let next = match (it.states[i], &l.kind) {
                (LinkState::Closed, LinkKind::Valve(_)) => match self.valve_kind(i) {
                    Some(ValveKind::Prv) => {
                        if it.heads[l.from] > self.settings[i] + controls::SWITCH_HEAD_TOL_M {
                            LinkState::Regulating
                        } else {
                            LinkState::Open
                        }
                    }
                    // A PSV whose upstream head clears its setting opens as the part's heads
                    // fall (its rules take over from there).
                    Some(ValveKind::Psv)
                        if it.heads[l.from] > self.settings[i] + controls::SWITCH_HEAD_TOL_M =>
                    {
                        LinkState::Open
                    }
                    _ => continue,
                },
                (LinkState::Closed, LinkKind::Pipe(_)) => LinkState::Open,
                (LinkState::NoFlow, LinkKind::Pump(_)) => LinkState::Running,
                _ => continue,
            };
            feeders.push((i, next));
        }
        feeders
    }

    /// Junctions that no conducting path joins to a fixed grade. An error if any of them has a
    /// demand (or is held) and no regulating valve touches them; valves to release when one
    /// does; otherwise they are returned (and held at their head).
    fn find_isolated(
        &self,
        ws: &Workspace,
        states: &[LinkState],
        held: Option<usize>,
    ) -> Result<Isolation, SolveError> {
        // When every element that can change state conducts, the conducting links are the
        // links that validation found joining every junction to a source: nothing is cut off.
        let all_controls_conduct = self.controlled.iter().all(|&i| states[i].conducts());
        if all_controls_conduct {
            return Ok(Isolation::Cut(Vec::new()));
        }
        let cut = self.cut_off_junctions(ws, states, held);
        if cut.is_empty() {
            return Ok(Isolation::Cut(cut));
        }
        let has_demand = |j: usize| ws.demand[j] != 0.0 || Some(j) == held;
        // A regulating valve at a cut-off junction delivers or draws a flow there that only
        // the cut-off part's demand could balance: it is released (see `pin_and_isolate`).
        let mut valves: Vec<usize> = cut
            .iter()
            .flat_map(|&j| self.links_at(j).iter().copied())
            .filter(|&i| states[i] == LinkState::Regulating)
            .collect();
        if !valves.is_empty() {
            valves.sort_unstable();
            valves.dedup();
            return Ok(Isolation::Release { valves, cut });
        }
        // A cut-off junction with a demand has no steady state in a demand-driven model.
        let unsupplied: Vec<String> = cut
            .iter()
            .filter(|&&j| has_demand(j))
            .map(|&j| self.net.nodes[j].id.clone())
            .collect();
        if !unsupplied.is_empty() {
            return Err(self.unsupplied_error(unsupplied, &cut, states));
        }
        Ok(Isolation::Cut(cut))
    }

    /// The junctions that no conducting path joins to a fixed grade (in increasing order),
    /// found by a search over conducting links from the sources and from the junctions that
    /// regulating valves hold.
    fn cut_off_junctions(
        &self,
        ws: &Workspace,
        states: &[LinkState],
        held: Option<usize>,
    ) -> Vec<usize> {
        let nj = self.n_junctions;
        let mut reached = vec![false; nj];
        let mut stack: Vec<usize> = Vec::new();
        // Junctions held by a regulating valve are fixed grades fed through it; a junction
        // held by the request is not: it draws, and must itself be reached.
        for j in 0..nj {
            if ws.pinned[j].is_some() && Some(j) != held {
                reached[j] = true;
                stack.push(j);
            }
        }
        let visit = |n: usize, reached: &mut Vec<bool>, stack: &mut Vec<usize>| {
            for &i in self.links_at(n) {
                let (a, b) = self.ends[i];
                let other = if a == n { b } else { a };
                if other < nj && states[i].conducts() && !reached[other] {
                    reached[other] = true;
                    stack.push(other);
                }
            }
        };
        for source in nj..self.net.nodes.len() {
            visit(source, &mut reached, &mut stack);
        }
        while let Some(n) = stack.pop() {
            visit(n, &mut reached, &mut stack);
        }
        (0..nj).filter(|&j| !reached[j]).collect()
    }

    /// The error for cut-off junctions with a demand: their ids, and up to ten closed links
    /// that touch the cut-off part (the likely ones to open).
    fn unsupplied_error(
        &self,
        unsupplied: Vec<String>,
        cut: &[usize],
        states: &[LinkState],
    ) -> SolveError {
        let closed: Vec<String> = self
            .net
            .links
            .iter()
            .enumerate()
            .filter(|(i, l)| {
                !states[*i].conducts()
                    && (cut.binary_search(&l.from).is_ok() || cut.binary_search(&l.to).is_ok())
            })
            .map(|(_, l)| l.id.clone())
            .take(10)
            .collect();
        SolveError::Unsupplied {
            junctions: unsupplied,
            closed_links: closed,
        }
    }

    fn singular_error(&self, ws: &Workspace) -> SolveError {
        // Name the junctions with the weakest connection to the rest.
        let mut weakest: Vec<(f64, usize)> = (0..self.n_junctions)
            .filter(|&j| ws.pinned[j].is_none())
            .map(|j| (ws.values[self.diag_slot[j]], j))
            .collect();
        weakest.sort_by(|a, b| a.0.total_cmp(&b.0));
        SolveError::Singular {
            junctions: weakest
                .iter()
                .take(5)
                .map(|&(_, j)| self.net.nodes[j].id.clone())
                .collect(),
        }
    }

    fn no_convergence(
        &self,
        heads: &[f64],
        flows: &[f64],
        states: &[LinkState],
        delta: &[f64],
    ) -> SolveError {
        let mut by_step: Vec<(f64, usize)> = delta
            .iter()
            .enumerate()
            .map(|(j, d)| (d.abs(), j))
            .collect();
        by_step.sort_by(|a, b| b.0.total_cmp(&a.0));
        let mut by_residual: Vec<(f64, usize)> = self
            .net
            .links
            .iter()
            .enumerate()
            .filter(|(i, _)| states[*i].conducts())
            .map(|(i, l)| {
                let e = self.laws[i].evaluate(flows[i]).0 - (heads[l.from] - heads[l.to]);
                (e.abs(), i)
            })
            .collect();
        by_residual.sort_by(|a, b| b.0.total_cmp(&a.0));
        SolveError::NoConvergence {
            iterations: MAX_ITERATIONS,
            junctions: by_step
                .iter()
                .take(5)
                .map(|&(d, j)| (self.net.nodes[j].id.clone(), d))
                .collect(),
            links: by_residual
                .iter()
                .take(5)
                .map(|&(e, i)| (self.net.links[i].id.clone(), e))
                .collect(),
        }
    }
}

/// Whether a link in state `s` stops its flow (a closed valve or pipe, a stopped pump).
fn stops_flow(s: LinkState) -> bool {
    matches!(s, LinkState::Closed | LinkState::NoFlow)
}

/// Switches of one link after which the links switch one per converged solve (see
/// [`Hydraulics::switch_controls`]).
const ONE_AT_A_TIME_AFTER: u8 = 2;

/// Regulating valves coupled into the Newton step whatever the network's shape: each costs a
/// triangular solve per step (about a sixth of a factorization), which the step they save
/// repays; the demo town's one PRV took its sweep from 1,358 to 1,117 factorizations.
const ALWAYS_COUPLED: usize = 4;

/// A regulating PRV or PSV coupled into the Newton step (see
/// [`Hydraulics::couple_regulating_valves`]).
#[derive(Clone)]
struct CoupledValve {
    link: usize,
    /// The junction whose head it holds (a PRV's downstream end, a PSV's upstream end).
    held: usize,
    /// Its other end, where its flow enters the step as an injection.
    free: usize,
    /// The sign of its flow (from → to) as an inflow at the free end.
    sigma: f64,
}

/// What [`Hydraulics::find_isolated`] found.
enum Isolation {
    /// The cut-off junctions (none with a demand): they are held at their heads.
    Cut(Vec<usize>),
    /// Regulating valves with an end in a cut-off part, and the cut-off junctions (in
    /// increasing order).
    Release { valves: Vec<usize>, cut: Vec<usize> },
}

/// Iterations after which head steps that no longer shrink are judged by the equations
/// themselves (see [`Hydraulics::equations_hold`]).
const STALL_CHECK_AFTER: u32 = 20;

/// Loss of a valve held wide open at flow q, m.
fn open_valve_loss(link: &crate::model::Link, q: f64) -> f64 {
    match &link.kind {
        LinkKind::Valve(v) => {
            super::headloss::minor_loss_coefficient(v.minor_loss, v.diameter_m) * q * q.abs()
        }
        _ => 0.0,
    }
}

impl Solution {
    /// Pressure at a node, kPa (0 at sources).
    pub fn pressure_kpa(&self, net: &Network, node: usize) -> f64 {
        crate::units::pressure_kpa_from_head_m(self.heads_m[node] - net.nodes[node].elevation_m)
    }

    /// Mean velocity in a pipe or valve, m/s (0 for pumps).
    pub fn velocity_m_per_s(&self, net: &Network, link: usize) -> f64 {
        match net.links[link].diameter_m() {
            Some(d) => self.flows_m3s[link] / (std::f64::consts::PI * d * d / 4.0),
            None => 0.0,
        }
    }

    /// Head loss from → to (negative across a running pump: its head gain), m.
    pub fn headloss_m(&self, net: &Network, link: usize) -> f64 {
        let l = &net.links[link];
        self.heads_m[l.from] - self.heads_m[l.to]
    }
}

/// Moves the heads of the `nj` junctions by the step in `ws`, scaled by `alpha` (a pinned
/// junction takes its whole step: it goes to its held head); returns the largest scaled move, m.
fn apply_head_step(ws: &Workspace, it: &mut Iterate, nj: usize, alpha: f64) -> f64 {
    let mut step_h = 0.0_f64;
    for j in 0..nj {
        let d = ws.node_step[j];
        if ws.pinned[j].is_none() {
            it.heads[j] += alpha * d;
            step_h = step_h.max((alpha * d).abs());
        } else {
            it.heads[j] += d;
        }
    }
    step_h
}

#[cfg(test)]
mod tests {
    use super::Tolerance;

    /// Each `Tolerance` constant's doc comment states its own values (a doc that drifted onto
    /// another constant gave readers the wrong figures; common practice, no source).
    #[test]
    fn each_tolerance_doc_states_its_values() {
        let source = include_str!("solver.rs");
        for (name, t) in [
            ("STEADY", Tolerance::STEADY),
            ("BRACKET", Tolerance::BRACKET),
            ("SEARCH", Tolerance::SEARCH),
        ] {
            let decl = format!("pub const {name}: Tolerance");
            let at = source.find(&decl).expect("declaration");
            let doc: String = source[..at]
                .lines()
                .rev()
                .skip(1)
                .take_while(|l| l.trim_start().starts_with("///"))
                .collect::<Vec<_>>()
                .join(" ");
            for value in [
                format!("{:e} m ", t.head_m),
                format!("{:e} m³/s", t.flow_m3s),
            ] {
                assert!(
                    doc.contains(&value),
                    "the doc of {name} lacks {value:?}: {doc}"
                );
            }
        }
    }

    /// The tolerances docs/fire-flow-method.md states are the ones the solver uses (the doc is
    /// the source of the figures users read; common practice, no source).
    #[test]
    fn method_doc_states_the_tolerances_in_use() {
        let doc = include_str!("../../docs/fire-flow-method.md");
        let doc = doc.split_whitespace().collect::<Vec<_>>().join(" ");
        for (t, what) in [
            (Tolerance::STEADY, "for reported steady states"),
            (
                Tolerance::SEARCH,
                "for the solves whose pressures are reported",
            ),
            (Tolerance::BRACKET, "for the solves that place a flow"),
        ] {
            let head = format!("{:e} m", t.head_m);
            let flow = format!("{:e} m³/s", t.flow_m3s);
            let at = doc
                .find(what)
                .unwrap_or_else(|| panic!("docs/fire-flow-method.md no longer says {what:?}"));
            let before = &doc[at.saturating_sub(120)..at];
            assert!(
                before.contains(&head) && before.contains(&flow),
                "docs/fire-flow-method.md gives other tolerances {what}: expected {head} and {flow} in {before:?}"
            );
        }
    }
}
