//! The permit question for each building of an application: its needed fire flow (by the
//! criteria's method, `needed`), the hydrants within a hose lay of it (`reach`), their combined
//! available flow flowing together (`fireflow::group`), and whether the storage that feeds them
//! lasts the duration (`storage`), in SI. The report layer words it.
//!
//! A building passes when the combined available flow (a verified ordinary solve, the same rule
//! as the single-hydrant check) is at least its needed flow, no tank feeding the fire runs down
//! to its lowest level before the duration ends, and the needed flow still meets the floor with
//! those tanks drawn down to their levels at the end of the duration (a quasi-steady screening
//! check, docs/fire-flow-method.md).

pub mod reach;

use crate::criteria::NeededFlowSettings;
use crate::fireflow::{
    combined_available_flow, group_at_flow, FireFlowSetup, GroupPoint, GroupResult, Split,
};
use crate::hydraulics::{Hydraulics, Solution, SolveError, SolveRequest, Tolerance, Workspace};
use crate::model::buildings::Building;
use crate::model::{Network, NodeKind};
use crate::needed::{needed_fire_flow, NeededFlow};
use crate::storage;
use reach::{hydrants_in_reach, InReach, Reach};

/// A building's verdict.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    Pass,
    Fail,
    /// No verdict: the inputs do not allow one (the notes say why).
    Error,
}

impl Verdict {
    pub fn name(self) -> &'static str {
        match self {
            Verdict::Pass => "pass",
            Verdict::Fail => "fail",
            Verdict::Error => "error",
        }
    }
}

/// What decides a failing building.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Limit {
    /// No hydrant within the hose lay.
    NoHydrant,
    /// The combined available flow is below the needed flow.
    Flow,
    /// A tank feeding the fire reaches its lowest level before the duration ends.
    Storage,
    /// With the tanks drawn down to their end levels, the needed flow fails the floor.
    DrawnDown,
}

impl Limit {
    pub fn name(self) -> &'static str {
        match self {
            Limit::NoHydrant => "no hydrant in reach",
            Limit::Flow => "flow",
            Limit::Storage => "storage",
            Limit::DrawnDown => "tanks drawn down",
        }
    }
}

/// A tank that feeds the fire: what it gives and how long it lasts, SI.
#[derive(Clone, Debug, PartialEq)]
pub struct TankUse {
    /// Node index of the tank.
    pub tank: usize,
    /// Its outflow at the needed flow with max-day demand, m³/s.
    pub outflow_m3s: f64,
    /// Its usable storage, m³ (`None` without geometry in sources.csv).
    pub usable_m3: Option<f64>,
    /// Seconds until its lowest level at that outflow (`None`: no geometry).
    pub lasts_s: Option<f64>,
}

/// The storage side of a building's check.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct StorageCheck {
    /// Tanks giving water at the needed flow.
    pub tanks: Vec<TankUse>,
    /// Fixed-grade sources (reservoirs) giving water: unlimited in the model.
    pub reservoirs: Vec<usize>,
    /// Whether every feeding tank lasts the duration (`None`: not checked, no geometry).
    pub lasts: Option<bool>,
    /// The needed flow with the tanks at their end levels: passes? (`None`: not checked).
    pub drawn_down_passes: Option<bool>,
    /// Lowest constrained pressure with the tanks drawn down, kPa, and its junction.
    pub drawn_down_lowest: Option<(f64, usize)>,
}

/// Everything found for one building, SI.
#[derive(Clone, Debug)]
pub struct BuildingResult {
    /// Index into the buildings.
    pub building: usize,
    pub needed: Option<NeededFlow>,
    pub hydrants: Vec<InReach>,
    /// The combined available flow of the hydrants in reach (equal residual split).
    pub group: Option<GroupResult>,
    /// Their pressures at the needed flow.
    pub at_needed: Option<GroupPoint>,
    pub storage: StorageCheck,
    pub verdict: Verdict,
    pub limit: Option<Limit>,
    /// Plain-words findings (errors, fallbacks), in SI-free wording.
    pub notes: Vec<String>,
    pub solves: u32,
}

impl BuildingResult {
    /// Combined available minus needed flow, m³/s.
    pub fn margin_m3s(&self) -> Option<f64> {
        let total = self.group.as_ref()?.total_m3s?;
        Some(total - self.needed.as_ref()?.flow_m3s)
    }
}

/// What every building's analysis shares.
pub struct PermitSetup<'a> {
    pub setup: &'a FireFlowSetup<'a>,
    pub settings: &'a NeededFlowSettings,
    /// Metres per unit of the network's coordinates (hose lays are measured on the map).
    pub metres_per_unit: f64,
    /// How the hydrants of a building share its flow.
    pub split: Split,
}

/// Analyses one building.
pub fn analyse_building(
    p: &PermitSetup<'_>,
    ws: &mut Workspace,
    index: usize,
    building: &Building,
) -> BuildingResult {
    let net = p.setup.network();
    let mut r = BuildingResult {
        building: index,
        needed: None,
        hydrants: Vec::new(),
        group: None,
        at_needed: None,
        storage: StorageCheck::default(),
        verdict: Verdict::Error,
        limit: None,
        notes: Vec::new(),
        solves: 0,
    };
    match needed_fire_flow(building, &p.settings.method, net.units) {
        Ok(n) => r.needed = Some(n),
        Err(e) => {
            r.notes
                .push(format!("no needed fire flow: {e}; {}", e.fix()));
            return r;
        }
    }
    let Some(at) = building.position else {
        r.notes
            .push("no x/y in the buildings file: the hydrants within reach cannot be found".into());
        return r;
    };
    let reach = Reach {
        factor: p.settings.hose_lay_factor,
        max_hose_lay_m: p.settings.max_hose_lay_m,
        max_hydrants: p.settings.max_hydrants,
    };
    r.hydrants = hydrants_in_reach(net, at, p.metres_per_unit, &reach);
    if r.hydrants.is_empty() {
        r.verdict = Verdict::Fail;
        r.limit = Some(Limit::NoHydrant);
        return r;
    }
    flow_and_storage(p, ws, &mut r);
    r
}

/// The group's combined flow and the storage checks; sets the verdict.
fn flow_and_storage(p: &PermitSetup<'_>, ws: &mut Workspace, r: &mut BuildingResult) {
    let Some(needed) = r.needed.clone() else {
        return;
    };
    let hydrants: Vec<usize> = r.hydrants.iter().map(|h| h.hydrant).collect();
    let group = match combined_available_flow(p.setup, ws, &hydrants, p.split) {
        Ok(g) => g,
        Err(e) => {
            r.notes.push(format!("no combined flow: {e}"));
            return;
        }
    };
    r.solves += group.solves;
    let Some(total) = group.total_m3s else {
        r.group = Some(group);
        r.notes
            .push("no verified combined flow (see the group's notes)".into());
        return;
    };
    r.group = Some(group);
    match group_at_flow(p.setup, ws, &hydrants, needed.flow_m3s, p.split) {
        Ok(point) => {
            r.solves += point.solves;
            r.at_needed = Some(point);
        }
        Err(e) => r.notes.push(format!("no solution at the needed flow: {e}")),
    }
    if total < needed.flow_m3s {
        r.verdict = Verdict::Fail;
        r.limit = Some(Limit::Flow);
        return;
    }
    // The storage side is checked at the needed flow, where the flow side passes.
    match r.at_needed.clone() {
        Some(point) => r.storage = storage_check(p, ws, &hydrants, &point, &needed, &mut r.notes),
        None => return,
    }
    r.verdict = Verdict::Pass;
    if r.storage.lasts == Some(false) {
        r.verdict = Verdict::Fail;
        r.limit = Some(Limit::Storage);
    } else if r.storage.drawn_down_passes == Some(false) {
        r.verdict = Verdict::Fail;
        r.limit = Some(Limit::DrawnDown);
    }
}

/// Which sources feed the needed flow and for how long, and the needed flow again with the
/// feeding tanks at their levels after the duration.
fn storage_check(
    p: &PermitSetup<'_>,
    ws: &mut Workspace,
    hydrants: &[usize],
    point: &GroupPoint,
    needed: &NeededFlow,
    notes: &mut Vec<String>,
) -> StorageCheck {
    let net = p.setup.network();
    let mut check = StorageCheck::default();
    let sol = match solve_shares(p.setup, ws, hydrants, &point.shares_m3s) {
        Ok(sol) => sol,
        Err(e) => {
            notes.push(format!(
                "storage not checked: no solution at the needed flow ({e})"
            ));
            return check;
        }
    };
    for (i, node) in net.nodes.iter().enumerate().skip(net.n_junctions) {
        let q = storage::outflow_m3s(net, &sol, i);
        if q <= 0.0 {
            continue;
        }
        match node.kind {
            NodeKind::Tank => check.tanks.push(TankUse {
                tank: i,
                outflow_m3s: q,
                usable_m3: storage::usable_storage_m3(node).ok(),
                lasts_s: storage::time_to_min_level_s(node, q).ok().flatten(),
            }),
            _ => check.reservoirs.push(i),
        }
    }
    let with_geometry: Vec<&TankUse> = check.tanks.iter().filter(|t| t.lasts_s.is_some()).collect();
    if check.tanks.len() > with_geometry.len() {
        notes.push("a tank feeding the fire has no diameter and levels in sources.csv: its storage is not checked".into());
    }
    if !with_geometry.is_empty() {
        check.lasts = Some(
            with_geometry
                .iter()
                .all(|t| t.lasts_s.is_some_and(|s| s >= needed.duration_s)),
        );
        drawn_down_check(p, hydrants, &sol, needed, &mut check, notes);
    }
    check
}

/// The needed flow with every tank at its level after the duration (quasi-steady).
fn drawn_down_check(
    p: &PermitSetup<'_>,
    hydrants: &[usize],
    sol: &Solution,
    needed: &NeededFlow,
    check: &mut StorageCheck,
    notes: &mut Vec<String>,
) {
    let net = p.setup.network();
    let lowered = storage::end_levels(net, sol, needed.duration_s)
        .and_then(|levels| storage::drawn_down(net, &levels));
    let lowered = match lowered {
        Ok(n) => n,
        Err(e) => {
            notes.push(format!("tanks drawn down not checked: {e}"));
            return;
        }
    };
    let outcome = Hydraulics::new(&lowered)
        .map_err(|e| e.to_string())
        .and_then(|h| {
            let setup = FireFlowSetup::new(&h, p.setup.criteria).map_err(|e| e.to_string())?;
            let mut ws = h.workspace();
            group_at_flow(&setup, &mut ws, hydrants, needed.flow_m3s, p.split)
                .map_err(|e| e.to_string())
        });
    match outcome {
        Ok(point) => {
            check.drawn_down_passes = Some(point.passes);
            check.drawn_down_lowest = Some((point.lowest_kpa, point.lowest_junction));
        }
        Err(e) => {
            check.drawn_down_passes = Some(false);
            notes.push(format!(
                "with the tanks drawn down the needed flow has no solution ({e}): counted as failing"
            ));
        }
    }
}

/// An ordinary solve at max-day demand plus `shares` at the hydrants' junctions.
fn solve_shares(
    setup: &FireFlowSetup<'_>,
    ws: &mut Workspace,
    hydrants: &[usize],
    shares: &[f64],
) -> Result<Solution, SolveError> {
    let net: &Network = setup.network();
    let extra: Vec<(usize, f64)> = hydrants
        .iter()
        .zip(shares)
        .map(|(&h, &q)| (net.hydrants[h].junction, q))
        .collect();
    ws.set_tolerance(Tolerance::STEADY);
    let request = SolveRequest {
        demand_factor: setup.demand_factor,
        extra_demand: &extra,
        fixed_head: None,
    };
    setup.hydraulics.solve(ws, &request, &setup.base)
}
