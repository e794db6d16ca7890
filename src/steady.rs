//! One steady state at a design condition (`firemain solve`): solve, then collect per-element
//! results in SI for the report layer.

use crate::hydraulics::{Hydraulics, LinkState, Solution, SolveError, SolveRequest};
use crate::model::{LinkKind, Network, ValveKind, ValveStatus};

/// A demand condition of the network's `[demand]` factors.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Condition {
    /// Average-day demand (x1).
    Average,
    /// Maximum-day demand (x max_day_factor): the background of fire flow.
    MaxDay,
    /// Peak-hour demand (x peak_hour_factor): the low-pressure service check.
    PeakHour,
    /// Minimum-hour demand (x min_hour_factor, or average-day without one): the high-pressure check.
    MinHour,
}

impl Condition {
    pub fn name(self) -> &'static str {
        match self {
            Condition::Average => "average-day",
            Condition::MaxDay => "max-day",
            Condition::PeakHour => "peak-hour",
            Condition::MinHour => "min-hour",
        }
    }

    /// The name as a report shows it for `net`: a minimum-hour condition without a factor in
    /// model.toml is average-day demand and says so.
    pub fn label(self, net: &Network) -> &'static str {
        match self {
            Condition::MinHour if net.demand_factors.min_hour.is_none() => {
                "min-hour (no factor in model.toml: average-day)"
            }
            other => other.name(),
        }
    }

    /// The multiplier of average-day demand for `net`.
    pub fn factor(self, net: &Network) -> f64 {
        let f = &net.demand_factors;
        match self {
            Condition::Average => 1.0,
            Condition::MaxDay => f.max_day,
            Condition::PeakHour => f.peak_hour,
            Condition::MinHour => f.min_hour.unwrap_or(1.0),
        }
    }
}

/// Solves `net` at `condition` from a cold start.
pub fn solve_condition(
    hydraulics: &Hydraulics<'_>,
    condition: Condition,
) -> Result<Solution, SolveError> {
    let net = hydraulics.network();
    let mut ws = hydraulics.workspace();
    let request = SolveRequest {
        demand_factor: condition.factor(net),
        extra_demand: &[],
        fixed_head: None,
    };
    hydraulics.solve(&mut ws, &request, &hydraulics.cold_start())
}

/// Results at one node, SI.
#[derive(Clone, Debug)]
pub struct NodeResult {
    pub id: String,
    pub kind: &'static str,
    pub zone: Option<String>,
    pub elevation_m: f64,
    /// Junction demand; for a source, minus its net outflow (a tank filling shows positive).
    pub demand_m3s: f64,
    pub grade_m: f64,
    /// `None` for a junction cut off from every source (its head means nothing).
    pub pressure_kpa: Option<f64>,
}

/// Results at one link, SI.
#[derive(Clone, Debug)]
pub struct LinkResult {
    pub id: String,
    pub kind: &'static str,
    pub from: String,
    pub to: String,
    pub flow_m3s: f64,
    /// Mean velocity (pipes and valves).
    pub velocity_m_per_s: Option<f64>,
    /// Head loss from → to (for a pump: minus the head it adds).
    pub headloss_m: f64,
    /// Head loss per 1000 length units of pipe (m per 1000 m = ft per 1000 ft).
    pub headloss_per_1000: Option<f64>,
    pub state: LinkState,
}

/// A whole steady state, ready to report.
#[derive(Clone, Debug)]
pub struct SteadyReport {
    pub network: String,
    pub condition: Condition,
    /// The condition's name as shown (see [`Condition::label`]).
    pub condition_label: &'static str,
    pub demand_factor: f64,
    pub iterations: u32,
    pub factorizations: u32,
    /// Total junction demand, m³/s.
    pub total_demand_m3s: f64,
    /// Net outflow of all sources (tanks filling count negative), m³/s.
    pub source_outflow_m3s: f64,
    pub nodes: Vec<NodeResult>,
    pub links: Vec<LinkResult>,
    /// Controls that could not hold or settle.
    pub notes: Vec<ControlNote>,
}

/// Collects per-element results of `sol`.
pub fn steady_report(
    hydraulics: &Hydraulics<'_>,
    condition: Condition,
    sol: &Solution,
) -> SteadyReport {
    let net = hydraulics.network();
    let factor = condition.factor(net);
    let mut isolated = vec![false; net.nodes.len()];
    for &j in &sol.isolated {
        isolated[j] = true;
    }
    let outflow = source_outflows(net, sol);
    let nodes = net
        .nodes
        .iter()
        .enumerate()
        .map(|(i, n)| NodeResult {
            id: n.id.clone(),
            kind: n.kind.name(),
            zone: net.zone_name(i).map(str::to_string),
            elevation_m: n.elevation_m,
            demand_m3s: if n.is_junction() {
                n.base_demand_m3s * factor
            } else {
                -outflow[i]
            },
            grade_m: sol.heads_m[i],
            pressure_kpa: (!isolated[i]).then(|| sol.pressure_kpa(net, i)),
        })
        .collect();
    let links = net
        .links
        .iter()
        .enumerate()
        .map(|(i, l)| {
            let headloss = sol.headloss_m(net, i);
            LinkResult {
                id: l.id.clone(),
                kind: l.kind_name(),
                from: net.nodes[l.from].id.clone(),
                to: net.nodes[l.to].id.clone(),
                flow_m3s: sol.flows_m3s[i],
                velocity_m_per_s: l.diameter_m().map(|_| sol.velocity_m_per_s(net, i)),
                headloss_m: headloss,
                headloss_per_1000: match &l.kind {
                    LinkKind::Pipe(p) if p.length_m > 0.0 => {
                        Some(headloss.abs() / p.length_m * 1000.0)
                    }
                    _ => None,
                },
                state: sol.states[i],
            }
        })
        .collect();
    let source_outflow_m3s = outflow.iter().sum();
    SteadyReport {
        network: net.name.clone(),
        condition,
        condition_label: condition.label(net),
        demand_factor: factor,
        iterations: sol.iterations,
        factorizations: sol.factorizations,
        total_demand_m3s: net.total_base_demand_m3s() * factor,
        source_outflow_m3s,
        nodes,
        links,
        notes: control_notes(hydraulics, sol),
    }
}

/// Net outflow of every node into the links (non-zero only at sources in a converged state).
fn source_outflows(net: &Network, sol: &Solution) -> Vec<f64> {
    let mut out = vec![0.0; net.nodes.len()];
    for (i, l) in net.links.iter().enumerate() {
        if l.from != l.to {
            out[l.from] += sol.flows_m3s[i];
            out[l.to] -= sol.flows_m3s[i];
        }
    }
    for (o, node) in out.iter_mut().zip(&net.nodes) {
        if node.is_junction() {
            *o = 0.0;
        }
    }
    out
}

/// A fact about the controls of one solved state, for the report to put into words (see
/// `report::words::control_note`). Indices are into the network's links and nodes.
#[derive(Clone, Debug, PartialEq)]
pub enum ControlNote {
    /// An active PRV or PSV that cannot hold its setting and is wide open.
    ValveWideOpen { link: usize, valve: ValveKind },
    /// An active PRV or PSV shut because the grade downstream is above the grade upstream.
    ValveShut { link: usize, valve: ValveKind },
    /// A pump asked for a head above its shutoff head, delivering nothing.
    PumpNoFlow { link: usize },
    /// An element whose state kept switching and was frozen in `state`.
    Unsettled { link: usize, state: LinkState },
    /// Junctions without demand cut off from every source by closed elements (all of them).
    CutOff { junctions: Vec<usize> },
}

/// Notes about controls: valves that could not hold their setting, pumps that cannot lift,
/// elements whose state did not settle, junctions cut off.
pub fn control_notes(hydraulics: &Hydraulics<'_>, sol: &Solution) -> Vec<ControlNote> {
    let net = hydraulics.network();
    let mut notes = Vec::new();
    for (i, l) in net.links.iter().enumerate() {
        match (&l.kind, sol.states[i]) {
            (LinkKind::Valve(v), s)
                if v.status == ValveStatus::Active
                    && matches!(v.kind, ValveKind::Prv | ValveKind::Psv)
                    && s == LinkState::Open =>
            {
                notes.push(ControlNote::ValveWideOpen {
                    link: i,
                    valve: v.kind,
                });
            }
            (LinkKind::Valve(v), LinkState::Closed)
                if v.status == ValveStatus::Active
                    && matches!(v.kind, ValveKind::Prv | ValveKind::Psv) =>
            {
                notes.push(ControlNote::ValveShut {
                    link: i,
                    valve: v.kind,
                });
            }
            (LinkKind::Pump(_), LinkState::NoFlow) => {
                notes.push(ControlNote::PumpNoFlow { link: i })
            }
            _ => {}
        }
    }
    for &i in &sol.unsettled {
        notes.push(ControlNote::Unsettled {
            link: i,
            state: sol.states[i],
        });
    }
    if !sol.isolated.is_empty() {
        notes.push(ControlNote::CutOff {
            junctions: sol.isolated.clone(),
        });
    }
    notes
}
