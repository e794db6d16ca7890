//! The physical state of a failing hydrant at its required flow, with pressure-dependent
//! demands (criteria `[fire] pressure_dependent`).
//!
//! A demand-driven model delivers every demand whatever the pressure, so at a failing
//! hydrant's required flow it shows pressures far below zero that no real system has: the
//! real system delivers less. This state answers what the engineer needs to say instead: how
//! much fire flow the hydrant actually gives when asked for the required flow, its pressure
//! then, and which customers lose service, by how much.
//!
//! Relations (see `hydraulics::demand` and docs/fire-flow-method.md §2b):
//! - customers' demands (max-day): none at or below the criteria's `minimum`, all at or above
//!   `service`;
//! - the hydrant's fire demand: none at or below 0 (the hydrant at atmospheric pressure) and
//!   all of it at or above the residual floor, the pressure the required flow must be
//!   delivered at; for a hydrant with a lead, the pressure after the lead's loss at the flow
//!   drawn.
//!
//! The available flow keeps its demand-driven definition; only this state is pressure-dependent.

use super::lateral::lead_loss_kpa;
use super::supply_paths::{supply_path_shares, PipeShare, PIPES_PER_HYDRANT};
use super::FireFlowSetup;
use crate::hydraulics::laws::LinkLaw;
use crate::hydraulics::{DemandRelation, PressureDependence, SolveRequest, Tolerance, Workspace};
use crate::units::head_m_from_pressure_kpa;

/// A customer whose delivered demand is below this fraction of the demand asked loses service
/// (99 %: common practice, no source; it keeps the smoothing's last fraction of a percent from
/// listing junctions that are served in every practical sense).
pub const SERVICE_FRACTION: f64 = 0.99;

/// One junction whose customers get less than [`SERVICE_FRACTION`] of their demand.
#[derive(Clone, Debug, PartialEq)]
pub struct ShortJunction {
    pub junction: usize,
    /// Demand asked (max-day) and delivered, m³/s.
    pub asked_m3s: f64,
    pub delivered_m3s: f64,
    pub pressure_kpa: f64,
}

/// A failing hydrant's state at its required flow with pressure-dependent demands, SI.
#[derive(Clone, Debug)]
pub struct DeliveredState {
    /// Fire flow the hydrant delivers when the required flow is asked, m³/s.
    pub fire_flow_m3s: f64,
    /// Pressure at the hydrant, kPa: its junction's, less its lead's loss when it has one.
    pub hydrant_kpa: f64,
    /// Lowest pressure at a junction with customer demand, kPa, and that junction.
    pub min_customer_kpa: Option<(usize, f64)>,
    /// Junctions losing service, largest shortfall first (ties by index).
    pub short: Vec<ShortJunction>,
    /// Customer demand not delivered, summed over every junction, m³/s.
    pub customer_shortfall_m3s: f64,
    /// Supply-path shares of the hydrant's junction in this state (weak mains).
    pub supply_paths: Vec<PipeShare>,
    /// Solver iterations and numeric factorizations of the solve (work counters).
    pub iterations: u32,
    pub factorizations: u32,
}

/// The relations of one hydrant's pressure-dependent solve (module doc), the fire demand's on
/// the pressure after the hydrant's `lead` where it has one.
pub fn relations(setup: &FireFlowSetup<'_>, lead: Option<LinkLaw>) -> Option<PressureDependence> {
    let pd = setup.criteria.pressure_dependent?;
    Some(PressureDependence {
        customers: DemandRelation::new(
            head_m_from_pressure_kpa(pd.minimum_kpa),
            head_m_from_pressure_kpa(pd.service_kpa),
        ),
        extra: DemandRelation::new(
            0.0,
            head_m_from_pressure_kpa(setup.criteria.residual_floor_kpa),
        ),
        extra_lead: lead,
    })
}

/// Solves the state at fire flow `required_m3s` at junction `at` with pressure-dependent
/// demands, starting from `start`; an error message when it cannot be solved.
///
/// The search passes the state at the available flow: there the hydrant is at (or above) the
/// floor and every flow is already near the delivered one, so the Newton steps stay short. From
/// the static state the first step would push the whole required flow through the mains at
/// once, far outside where their head-loss laws are near linear.
pub fn delivered_state(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    at: usize,
    lead: Option<LinkLaw>,
    required_m3s: f64,
    start: &crate::hydraulics::Solution,
) -> Result<Option<DeliveredState>, String> {
    let Some(pdd) = relations(setup, lead) else {
        return Ok(None);
    };
    let net = setup.network();
    let extra = [(at, required_m3s)];
    let request = SolveRequest {
        demand_factor: setup.demand_factor,
        extra_demand: &extra,
        fixed_head: None,
    };
    // Reported pressures: the tolerance of the search's reported solves.
    ws.set_tolerance(Tolerance::SEARCH);
    let sol = setup
        .hydraulics
        .solve_pressure_dependent(ws, &request, &pdd, start)
        .map_err(|e| e.describe(net.units))?;
    let delivered = setup.hydraulics.delivered_m3s(&request, &pdd, &sol);
    let mut short = Vec::new();
    let mut customer_shortfall_m3s = 0.0;
    let mut min_customer_kpa: Option<(usize, f64)> = None;
    let isolated = |j: usize| sol.isolated.contains(&j);
    for (j, &(got, _)) in delivered.iter().enumerate() {
        let asked = net.nodes[j].base_demand_m3s * setup.demand_factor;
        if asked <= 0.0 || isolated(j) {
            continue;
        }
        let p = sol.pressure_kpa(net, j);
        if min_customer_kpa.is_none_or(|(_, m)| p < m) {
            min_customer_kpa = Some((j, p));
        }
        customer_shortfall_m3s += (asked - got).max(0.0);
        if got < SERVICE_FRACTION * asked {
            short.push(ShortJunction {
                junction: j,
                asked_m3s: asked,
                delivered_m3s: got,
                pressure_kpa: p,
            });
        }
    }
    short.sort_by(|a, b| {
        (b.asked_m3s - b.delivered_m3s)
            .total_cmp(&(a.asked_m3s - a.delivered_m3s))
            .then(a.junction.cmp(&b.junction))
    });
    Ok(Some(DeliveredState {
        fire_flow_m3s: delivered[at].1,
        hydrant_kpa: sol.pressure_kpa(net, at) - lead_loss_kpa(lead.as_ref(), delivered[at].1),
        min_customer_kpa,
        short,
        customer_shortfall_m3s,
        supply_paths: supply_path_shares(net, &sol, at, PIPES_PER_HYDRANT),
        iterations: sol.iterations,
        factorizations: sol.factorizations,
    }))
}
