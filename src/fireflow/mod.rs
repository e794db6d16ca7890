//! Hydrant-by-hydrant available fire flow: the largest fire flow, on top of max-day demand,
//! for which every constrained junction keeps the residual-pressure floor (and every open pipe
//! the velocity limit, when one is set).
//!
//! Definitions (see docs/fire-flow-method.md):
//! - the fire flow Q is an extra demand at the hydrant's junction;
//! - constrained junctions: every junction (`system`) or those of the hydrant's zone (`zone`),
//!   minus the exempt ones; the hydrant's own junction always;
//! - available flow: the largest Q in [0, cap] such that every flow in [0, Q] meets the
//!   constraints (the first crossing, the safe reading for a fire flow that ramps up).

mod curve;
pub mod delivered;
mod group;
mod lateral;
mod search;
pub mod supply_paths;
mod sweep;
mod work;

pub use curve::{supply_curve, supply_curves, CurvePoint, SupplyCurve, CHART_FLOW_EXPONENT};
pub use group::{
    combined_available_flow, group_at_flow, GroupError, GroupNote, GroupPoint, GroupResult, Split,
    SPLIT_TOLERANCE_KPA,
};
pub use lateral::lateral_headloss_m;
pub use search::analyse_hydrant;
pub use sweep::{sweep, sweep_each, SweepError, SweepStats};
pub use work::{SolveRole, SolveWork, WorkByRole};

use crate::criteria::{Criteria, RequiredSource, Scope};
use crate::hydraulics::{
    FactorSnapshot, Hydraulics, LinkState, Solution, SolveError, SolveRequest,
};
use crate::model::{LinkKind, Network};
use crate::steady::Condition;
use crate::units::{head_m_from_pressure_kpa, pressure_kpa_from_head_m};

/// The binding constraint at the available flow.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LimitedBy {
    /// The hydrant's own junction reaches the floor.
    HydrantPressure,
    /// Another constrained junction reaches the floor first.
    SystemPressure,
    /// An open pipe reaches the velocity limit.
    Velocity,
    /// The search cap is reached with every constraint still met.
    Cap,
    /// The hydraulics have no solution at a larger flow (the notes say why); the largest
    /// verified flow is reported.
    NoSolution,
}

impl LimitedBy {
    pub fn name(self) -> &'static str {
        match self {
            LimitedBy::HydrantPressure => "hydrant-pressure",
            LimitedBy::SystemPressure => "system-pressure",
            LimitedBy::Velocity => "velocity",
            LimitedBy::Cap => "cap",
            LimitedBy::NoSolution => "no-solution",
        }
    }
}

/// Pass or fail against the required flow, or an analysis error.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    Pass,
    Fail,
    Error,
}

impl Outcome {
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Pass => "pass",
            Outcome::Fail => "fail",
            Outcome::Error => "error",
        }
    }
}

/// A finding about one hydrant, in SI; the report layer words it in the user's units.
#[derive(Clone, Debug, PartialEq)]
pub enum HydrantNote {
    /// The floor is already violated with no fire flow.
    FloorViolatedWithoutFireFlow { junction: usize, pressure_kpa: f64 },
    /// The velocity limit is already exceeded with no fire flow.
    VelocityExceededWithoutFireFlow { link: usize, velocity_m_per_s: f64 },
    /// The pipe that reaches the velocity limit at the available flow.
    VelocityLimit { link: usize },
    /// A pump or valve changed state between static and fire conditions, at about this flow.
    StateChanged {
        link: usize,
        from: LinkState,
        to: LinkState,
        at_flow_m3s: f64,
    },
    /// A larger flow could not be solved; the answer is the largest verified one.
    SolveFailedAbove { flow_m3s: f64, reason: String },
    /// The residual pressure at the required flow could not be computed.
    ResidualUnavailable { reason: String },
    /// The constraints fail at some flow below a larger flow that meets them (first crossing).
    NonMonotone { passes_again_at_m3s: f64 },
    /// The required flow is above the criteria's search cap: the search went up to the
    /// required flow instead, so that pass or fail is decided.
    RequiredAboveCap { cap_m3s: f64 },
    /// Controls that switched back and forth without settling in a solve of this hydrant's
    /// search: no answer can be verified (link indices).
    UnsettledControls { links: Vec<usize> },
    /// Solved from another start (the static state, or the input files' states), the flow
    /// the search found settles in other element states that violate a constraint: a lower
    /// flow that every start verifies is reported.
    OtherStatesFail { reported_flow_m3s: f64 },
    /// The smallest failing flow found above the answer settles in other element states than
    /// the answer (link indices): the limit is a change of state, and the flows in between may
    /// settle either way; the lower reading is reported.
    OtherStatesAbove { flow_m3s: f64, links: Vec<usize> },
    /// The analysis failed.
    Error { reason: String },
    /// The pressure-dependent state at the required flow could not be solved.
    DeliveredUnavailable { reason: String },
}

/// The result for one hydrant, SI units.
#[derive(Clone, Debug)]
pub struct HydrantResult {
    /// Index into `Network::hydrants`.
    pub hydrant: usize,
    pub junction: usize,
    pub required_m3s: f64,
    pub required_source: RequiredSource,
    pub available_m3s: Option<f64>,
    /// Pressure at the hydrant's junction, max-day, no fire flow.
    pub static_kpa: Option<f64>,
    /// Pressure at the hydrant's junction at the required flow.
    pub residual_kpa: Option<f64>,
    /// Lowest constrained pressure at the required flow, and its junction.
    pub min_pressure_kpa: Option<f64>,
    pub min_pressure_junction: Option<usize>,
    /// The junction that binds at the available flow (system-pressure or hydrant-pressure).
    pub critical_junction: Option<usize>,
    /// The pipe that binds at the available flow (velocity).
    pub critical_link: Option<usize>,
    pub limited_by: Option<LimitedBy>,
    pub outcome: Outcome,
    pub notes: Vec<HydrantNote>,
    /// For a failing hydrant: the pipes on the supply paths of the lowest constrained junction
    /// at the required flow, largest share of the head loss first (weak mains).
    pub supply_paths: Vec<supply_paths::PipeShare>,
    /// For a failing hydrant, with criteria `[fire] pressure_dependent`: the state at the
    /// required flow with pressure-dependent demands (fire flow delivered, customers short).
    pub delivered: Option<delivered::DeliveredState>,
    /// Hydraulic solves, solver iterations and numeric factorizations spent on this hydrant.
    pub solves: u32,
    pub iterations: u32,
    pub factorizations: u32,
    /// The same work by the role of each solve (for `--stats`); not kept in the sweep's
    /// journal, so zero for a hydrant read back from one.
    pub work_by_role: WorkByRole,
}

impl HydrantResult {
    /// Available minus required flow, m³/s (sorting key of the compliance table).
    pub fn margin_m3s(&self) -> Option<f64> {
        self.available_m3s.map(|a| a - self.required_m3s)
    }
}

/// What every hydrant's analysis shares: the network's solver, the criteria, and the max-day
/// solution every search starts from. Immutable and shared by all threads.
pub struct FireFlowSetup<'a> {
    pub hydraulics: &'a Hydraulics<'a>,
    pub criteria: &'a Criteria,
    /// Max-day steady state without fire flow.
    pub base: Solution,
    /// The factorization at the max-day state; every hydrant's search starts from a copy.
    base_factor: Option<FactorSnapshot>,
    pub demand_factor: f64,
    exempt: Vec<bool>,
    /// Each junction's elevation, m, copied out of the network's node records: the constraint
    /// check reads it for every junction after every solve, and the records are large.
    elevation_m: Vec<f64>,
    /// Whether any element can change state (check valves, pumps, regulating valves): then the
    /// available flow is checked for an earlier crossing.
    has_controls: bool,
}

impl<'a> FireFlowSetup<'a> {
    /// Solves the max-day condition and prepares the constraint sets.
    pub fn new(hydraulics: &'a Hydraulics<'a>, criteria: &'a Criteria) -> Result<Self, SolveError> {
        let net = hydraulics.network();
        let demand_factor = Condition::MaxDay.factor(net);
        let mut ws = hydraulics.workspace();
        let request = SolveRequest {
            demand_factor,
            extra_demand: &[],
            fixed_head: None,
        };
        let base = hydraulics.solve(&mut ws, &request, &hydraulics.cold_start())?;
        let base_factor = ws.snapshot();
        let mut exempt = vec![false; net.n_junctions];
        for id in &criteria.exempt {
            if let Some(j) = net.node_by_id(id) {
                if j < net.n_junctions {
                    exempt[j] = true;
                }
            }
        }
        let has_controls = net
            .links
            .iter()
            .any(|l| !crate::hydraulics::controls::is_fixed(l));
        let elevation_m = net.nodes[..net.n_junctions]
            .iter()
            .map(|n| n.elevation_m)
            .collect();
        Ok(FireFlowSetup {
            hydraulics,
            elevation_m,
            criteria,
            base,
            base_factor,
            demand_factor,
            exempt,
            has_controls,
        })
    }

    pub fn network(&self) -> &'a Network {
        self.hydraulics.network()
    }

    /// Whether junction `j` is constrained during a fire flow at junction `at`.
    pub fn is_constrained(&self, j: usize, at: usize) -> bool {
        if j == at {
            return true;
        }
        if self.exempt[j] {
            return false;
        }
        match self.criteria.scope {
            Scope::System => true,
            Scope::Zone => {
                let net = self.network();
                net.nodes[j].zone == net.nodes[at].zone
            }
        }
    }

    /// The head that puts junction `j` exactly at the residual floor, m.
    pub fn floor_head_m(&self, j: usize) -> f64 {
        self.network().nodes[j].elevation_m
            + head_m_from_pressure_kpa(self.criteria.residual_floor_kpa)
    }

    /// Checks the constraints on a solution with a fire flow at junction `at`.
    pub fn constraints(&self, sol: &Solution, at: usize) -> ConstraintCheck {
        self.constraints_for(sol, &[at])
    }

    /// Checks the constraints on a solution with fire flows at the junctions `at` (a group of
    /// hydrants flowing together; see the `group` module): a junction is constrained when it is
    /// constrained for any of them, so every flowing junction is. With one junction this is
    /// [`FireFlowSetup::constraints`] exactly.
    pub fn constraints_for(&self, sol: &Solution, at: &[usize]) -> ConstraintCheck {
        let net = self.network();
        let first = at.first().copied().unwrap_or(0);
        let floor = self.criteria.residual_floor_kpa;
        let mut isolated = vec![false; 0];
        if !sol.isolated.is_empty() {
            isolated = vec![false; net.n_junctions];
            for &j in &sol.isolated {
                isolated[j] = true;
            }
        }
        let mut worst_pressure = (f64::INFINITY, first);
        for (j, &elevation) in self.elevation_m.iter().enumerate() {
            if !isolated.is_empty() && isolated[j] {
                continue;
            }
            if !at.iter().any(|&a| self.is_constrained(j, a)) {
                continue;
            }
            // As `Solution::pressure_kpa`, on the copied elevation.
            let margin = pressure_kpa_from_head_m(sol.heads_m[j] - elevation) - floor;
            // Ties go to a flowing hydrant's own junction, then the lowest index:
            // deterministic.
            if margin < worst_pressure.0 || (margin == worst_pressure.0 && at.contains(&j)) {
                worst_pressure = (margin, j);
            }
        }
        let worst_velocity = self.criteria.max_velocity_m_per_s.map(|vmax| {
            let mut worst = (f64::INFINITY, 0usize);
            for (i, l) in net.links.iter().enumerate() {
                if !matches!(l.kind, LinkKind::Pipe(_)) || !sol.states[i].conducts() {
                    continue;
                }
                let margin = vmax - sol.velocity_m_per_s(net, i).abs();
                if margin < worst.0 {
                    worst = (margin, i);
                }
            }
            worst
        });
        ConstraintCheck {
            pressure_margin_kpa: worst_pressure.0,
            pressure_junction: worst_pressure.1,
            velocity: worst_velocity,
        }
    }
}

/// The worst constraint margins of a solution.
#[derive(Clone, Copy, Debug)]
pub struct ConstraintCheck {
    /// Lowest constrained pressure minus the floor, kPa.
    pub pressure_margin_kpa: f64,
    pub pressure_junction: usize,
    /// Velocity limit minus the highest open-pipe velocity (m/s), and that pipe.
    pub velocity: Option<(f64, usize)>,
}

/// Pressure margin that still counts as meeting the floor, kPa. The hydrant-limited answer
/// puts the hydrant exactly at the floor; solver tolerance must not turn that into a failure.
pub const FLOOR_TOLERANCE_KPA: f64 = 1.0e-3;

impl ConstraintCheck {
    pub fn feasible(&self) -> bool {
        self.pressure_margin_kpa >= -FLOOR_TOLERANCE_KPA
            && self.velocity.is_none_or(|(m, _)| m >= -1.0e-6)
    }
}
