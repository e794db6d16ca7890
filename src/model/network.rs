//! The network as the rest of firemain sees it: immutable, SI units, elements addressed by index.
//!
//! Junctions come first in `nodes` (indices `0..n_junctions`), then the fixed-grade sources. The
//! user's ids are kept for every message and report.

use std::collections::HashMap;

use crate::units::UnitSystem;

/// Head-loss formula for every pipe of a network.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum HeadlossFormula {
    HazenWilliams,
    DarcyWeisbach,
}

impl HeadlossFormula {
    pub fn name(self) -> &'static str {
        match self {
            HeadlossFormula::HazenWilliams => "hazen-williams",
            HeadlossFormula::DarcyWeisbach => "darcy-weisbach",
        }
    }
}

/// Demand multipliers of the design conditions (all relative to average-day demand).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DemandFactors {
    pub max_day: f64,
    pub peak_hour: f64,
    /// `None`: the high-pressure check uses average-day demand.
    pub min_hour: Option<f64>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum NodeKind {
    Junction,
    Reservoir,
    Tank,
}

impl NodeKind {
    pub fn name(self) -> &'static str {
        match self {
            NodeKind::Junction => "junction",
            NodeKind::Reservoir => "reservoir",
            NodeKind::Tank => "tank",
        }
    }
}

/// A junction or a fixed-grade source.
#[derive(Clone, Debug, PartialEq)]
pub struct Node {
    pub id: String,
    pub kind: NodeKind,
    /// Ground elevation for junctions; the water-surface grade for sources (their pressure is 0).
    pub elevation_m: f64,
    /// Average-day demand, m³/s (withdrawal positive); 0 for sources.
    pub base_demand_m3s: f64,
    /// Fixed hydraulic grade of a source, m; `None` for junctions.
    pub grade_m: Option<f64>,
    /// Index into [`Network::zones`].
    pub zone: Option<usize>,
    pub position: Option<[f64; 2]>,
    /// Line of the element in its file, for messages.
    pub line: u64,
    /// A tank's storage, from the optional `diameter`, `min_level`, `max_level` columns of
    /// sources.csv; `None` for junctions, reservoirs and tanks without them.
    pub storage: Option<TankStorage>,
}

/// The storage of a cylindrical tank (sources.csv, docs/network-format.md §7). Levels are
/// water-surface elevations on the datum of `grade` (m), like the tank's grade itself.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TankStorage {
    /// Inside diameter, m.
    pub diameter_m: Option<f64>,
    /// Lowest usable water-surface elevation, m.
    pub min_level_m: Option<f64>,
    /// Highest (overflow) water-surface elevation, m.
    pub max_level_m: Option<f64>,
}

impl Node {
    pub fn is_junction(&self) -> bool {
        self.kind == NodeKind::Junction
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PipeStatus {
    Open,
    Closed,
    /// A check valve: flow only from `from` to `to`.
    Check,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Pipe {
    pub length_m: f64,
    pub diameter_m: f64,
    /// Hazen-Williams C, or Darcy-Weisbach absolute roughness in metres.
    pub roughness: f64,
    pub minor_loss: f64,
    pub status: PipeStatus,
    /// Free-text material or class from an optional `material` column.
    pub material: Option<String>,
}

/// The head curve head = s²·(a − b·(q/s)^c) of a pump at relative speed s.
#[derive(Clone, Debug, PartialEq)]
pub struct Pump {
    /// Shutoff head a, m.
    pub shutoff_head_m: f64,
    /// Coefficient b, m per (m³/s)^c.
    pub coefficient_b: f64,
    /// Exponent c.
    pub exponent_c: f64,
    /// Relative speed s.
    pub speed: f64,
    pub on: bool,
    /// The three points as given, SI, for reports: (flow m³/s, head m).
    pub design_point: (f64, f64),
    pub runout_point: (f64, f64),
}

impl Pump {
    /// Head added at flow `q` m³/s (q ≥ 0), m; negative past the curve's end.
    pub fn head_m(&self, q: f64) -> f64 {
        let s = self.speed;
        s * s * (self.shutoff_head_m - self.coefficient_b * (q.max(0.0) / s).powf(self.exponent_c))
    }

    /// Shutoff head at this speed, s²·a, m (affinity laws).
    pub fn shutoff_at_speed_m(&self) -> f64 {
        self.speed * self.speed * self.shutoff_head_m
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ValveKind {
    /// Pressure-reducing: holds the downstream pressure at the setting.
    Prv,
    /// Pressure-sustaining: holds the upstream pressure at the setting.
    Psv,
    /// Flow-control: limits the flow to the setting.
    Fcv,
    /// A partly closed valve with loss coefficient K = setting.
    Throttle,
}

impl ValveKind {
    pub fn name(self) -> &'static str {
        match self {
            ValveKind::Prv => "prv",
            ValveKind::Psv => "psv",
            ValveKind::Fcv => "fcv",
            ValveKind::Throttle => "throttle",
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ValveStatus {
    /// The valve regulates.
    Active,
    /// Held fully open: a plain open valve, flow either way.
    Open,
    Closed,
}

#[derive(Clone, Debug, PartialEq)]
pub struct Valve {
    pub kind: ValveKind,
    pub diameter_m: f64,
    /// SI setting: PRV/PSV pressure in kPa, FCV flow in m³/s, throttle loss coefficient K.
    pub setting: f64,
    /// Loss coefficient K of the wide-open valve.
    pub minor_loss: f64,
    pub status: ValveStatus,
}

#[derive(Clone, Debug, PartialEq)]
pub enum LinkKind {
    Pipe(Pipe),
    Pump(Pump),
    Valve(Valve),
}

/// A pipe, pump or valve between two nodes.
#[derive(Clone, Debug, PartialEq)]
pub struct Link {
    pub id: String,
    pub from: usize,
    pub to: usize,
    pub kind: LinkKind,
    pub line: u64,
}

impl Link {
    pub fn kind_name(&self) -> &'static str {
        match &self.kind {
            LinkKind::Pipe(_) => "pipe",
            LinkKind::Pump(_) => "pump",
            LinkKind::Valve(_) => "valve",
        }
    }

    pub fn as_pipe(&self) -> Option<&Pipe> {
        match &self.kind {
            LinkKind::Pipe(p) => Some(p),
            _ => None,
        }
    }

    /// Inside diameter where the element has one (pipes and valves), m.
    pub fn diameter_m(&self) -> Option<f64> {
        match &self.kind {
            LinkKind::Pipe(p) => Some(p.diameter_m),
            LinkKind::Valve(v) => Some(v.diameter_m),
            LinkKind::Pump(_) => None,
        }
    }

    /// Whether the element can ever carry flow (not closed or switched off by the user).
    pub fn can_carry_flow(&self) -> bool {
        match &self.kind {
            LinkKind::Pipe(p) => p.status != PipeStatus::Closed,
            LinkKind::Pump(p) => p.on,
            LinkKind::Valve(v) => v.status != ValveStatus::Closed,
        }
    }
}

/// A fire hydrant on a junction.
#[derive(Clone, Debug, PartialEq)]
pub struct Hydrant {
    pub id: String,
    pub junction: usize,
    /// Required fire flow given for this hydrant, m³/s.
    pub required_flow_m3s: Option<f64>,
    pub class: Option<String>,
    pub position: Option<[f64; 2]>,
    pub line: u64,
    /// Field number of the `class` cell in hydrants.csv (0 without a class column), so that a
    /// class the criteria do not list is reported at its cell.
    pub class_column: u64,
    /// The lead from the main to the hydrant, when hydrants.csv gives one.
    pub lateral: Option<Lateral>,
}

/// A hydrant's lateral (lead) from the main, SI: its head loss lies between the junction on
/// the main and the hydrant (docs/network-format.md §9).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Lateral {
    pub length_m: f64,
    pub diameter_m: f64,
    /// Hazen-Williams C, or Darcy-Weisbach absolute roughness in metres (the network's
    /// formula).
    pub roughness: f64,
}

/// Hazen-Williams C of a lateral without `lateral_roughness`: 100, a common design value for
/// lined iron leads of some age (common practice, no source).
pub const DEFAULT_LATERAL_C: f64 = 100.0;
/// Darcy-Weisbach roughness of a lateral without `lateral_roughness`, m: 0.26 mm, cast iron in
/// Moody's table (Moody, "Friction factors for pipe flow", Trans. ASME 66, 1944; from memory).
pub const DEFAULT_LATERAL_ROUGHNESS_M: f64 = 0.26e-3;

/// A whole network, SI units inside.
#[derive(Clone, Debug)]
pub struct Network {
    pub name: String,
    /// The units of the input files; reports use them too.
    pub units: UnitSystem,
    pub headloss: HeadlossFormula,
    pub demand_factors: DemandFactors,
    /// Junctions (`0..n_junctions`), then sources.
    pub nodes: Vec<Node>,
    pub n_junctions: usize,
    pub links: Vec<Link>,
    pub hydrants: Vec<Hydrant>,
    /// Zone names, sorted.
    pub zones: Vec<String>,
    /// The coordinate reference system of the x/y positions (`EPSG:NNNN`), from model.toml.
    pub crs: Option<String>,
    node_index: HashMap<String, usize>,
    link_index: HashMap<String, usize>,
    hydrant_index: HashMap<String, usize>,
}

impl Network {
    /// Builds the indexes; the loader guarantees unique ids.
    #[allow(clippy::too_many_arguments)]
    pub fn new(
        name: String,
        units: UnitSystem,
        headloss: HeadlossFormula,
        demand_factors: DemandFactors,
        nodes: Vec<Node>,
        n_junctions: usize,
        links: Vec<Link>,
        hydrants: Vec<Hydrant>,
        zones: Vec<String>,
    ) -> Self {
        let node_index = nodes
            .iter()
            .enumerate()
            .map(|(i, n)| (n.id.clone(), i))
            .collect();
        let link_index = links
            .iter()
            .enumerate()
            .map(|(i, l)| (l.id.clone(), i))
            .collect();
        let hydrant_index = hydrants
            .iter()
            .enumerate()
            .map(|(i, h)| (h.id.clone(), i))
            .collect();
        Network {
            name,
            units,
            headloss,
            demand_factors,
            nodes,
            n_junctions,
            links,
            hydrants,
            zones,
            crs: None,
            node_index,
            link_index,
            hydrant_index,
        }
    }

    pub fn node_by_id(&self, id: &str) -> Option<usize> {
        self.node_index.get(id).copied()
    }

    pub fn link_by_id(&self, id: &str) -> Option<usize> {
        self.link_index.get(id).copied()
    }

    pub fn hydrant_by_id(&self, id: &str) -> Option<usize> {
        self.hydrant_index.get(id).copied()
    }

    pub fn junctions(&self) -> &[Node] {
        &self.nodes[..self.n_junctions]
    }

    pub fn sources(&self) -> &[Node] {
        &self.nodes[self.n_junctions..]
    }

    pub fn zone_name(&self, node: usize) -> Option<&str> {
        self.nodes[node].zone.map(|z| self.zones[z].as_str())
    }

    /// Total average-day junction demand, m³/s (inflows negative).
    pub fn total_base_demand_m3s(&self) -> f64 {
        self.junctions().iter().map(|n| n.base_demand_m3s).sum()
    }

    /// The same network with some pipes replaced (used by the upsizing planner); ids and
    /// topology unchanged.
    pub fn with_pipes_replaced(&self, replacements: &[(usize, Pipe)]) -> Network {
        let mut out = self.clone();
        for (link, pipe) in replacements {
            out.links[*link].kind = LinkKind::Pipe(pipe.clone());
        }
        out
    }
}
