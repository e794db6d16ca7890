//! Checks of a loaded network that look at more than one row: connectivity to the sources,
//! plausibility of sizes and roughness, zones and their feeds; and the summary `validate` prints.
//!
//! The plausibility limits are common practice, no source: they catch unit mistakes and typing
//! errors, not design questions.

use std::collections::BTreeMap;

use super::diagnostic::{quoted, Diagnostics, Location};
use super::network::{HeadlossFormula, Link, LinkKind, Network, Pipe, PipeStatus};
use crate::units::{display_value, Quantity, UnitSystem};

/// Hazen-Williams C outside this range is implausible (common practice, no source: new plastic
/// pipe is about 150, badly tuberculated iron about 40-60).
const PLAUSIBLE_HW_C: (f64, f64) = (40.0, 160.0);
/// Diameters outside these ranges probably use the wrong unit (common practice, no source).
const PLAUSIBLE_DIAMETER_IN: (f64, f64) = (1.0, 120.0);
const PLAUSIBLE_DIAMETER_MM: (f64, f64) = (25.0, 3000.0);
/// Smallest main that should serve a hydrant: 6 in / 150 mm (common practice; state standards
/// commonly require 6 in, some utilities 8 in).
pub const MIN_HYDRANT_MAIN_M: f64 = 0.15;
/// A Darcy-Weisbach roughness above this fraction of the diameter is implausible.
const PLAUSIBLE_RELATIVE_ROUGHNESS: f64 = 0.05;

/// Runs the whole-network checks; findings go to `diags`.
pub fn check_network(net: &Network, diags: &mut Diagnostics) {
    check_connectivity(net, diags);
    check_pipes(net, diags);
    check_elevations(net, diags);
    check_hydrant_mains(net, diags);
    check_hydrant_leads(net, diags);
    check_zones(net, diags);
}

/// Union-find over nodes, joining the ends of every link that passes `joins`.
struct Components {
    parent: Vec<usize>,
}

impl Components {
    fn new(net: &Network, joins: impl Fn(&super::network::Link) -> bool) -> Self {
        let mut c = Components {
            parent: (0..net.nodes.len()).collect(),
        };
        for link in &net.links {
            if joins(link) {
                c.union(link.from, link.to);
            }
        }
        c
    }

    fn find(&mut self, mut i: usize) -> usize {
        while self.parent[i] != i {
            self.parent[i] = self.parent[self.parent[i]];
            i = self.parent[i];
        }
        i
    }

    fn union(&mut self, a: usize, b: usize) {
        let (ra, rb) = (self.find(a), self.find(b));
        if ra != rb {
            self.parent[ra.max(rb)] = ra.min(rb);
        }
    }
}

fn check_connectivity(net: &Network, diags: &mut Diagnostics) {
    let mut comps = Components::new(net, |l| l.can_carry_flow());
    let mut fed = vec![false; net.nodes.len()];
    for s in net.n_junctions..net.nodes.len() {
        let r = comps.find(s);
        fed[r] = true;
    }
    let mut islands: BTreeMap<usize, Vec<usize>> = BTreeMap::new();
    for j in 0..net.n_junctions {
        let r = comps.find(j);
        if !fed[r] {
            islands.entry(r).or_default().push(j);
        }
    }
    for members in islands.values() {
        const SHOWN: usize = 20;
        let names: Vec<String> = members
            .iter()
            .take(SHOWN)
            .map(|&j| quoted(&net.nodes[j].id))
            .collect();
        let more = if members.len() > SHOWN {
            format!(" and {} more", members.len() - SHOWN)
        } else {
            String::new()
        };
        diags.error(
            Location::line("junctions.csv", net.nodes[members[0]].line),
            format!(
                "an island of {} junction(s) has no path to any source through open links: {}{more}",
                members.len(),
                names.join(", ")
            ),
            "connect the island with an open pipe, open a closed pipe or valve, or remove the junctions",
        );
    }
}

/// Warns about link diameters in what looks like the wrong unit, and about each pipe's
/// roughness, length and ends (common practice: none of these is an error, but each is a
/// frequent slip of a spreadsheet or a GIS export).
fn check_pipes(net: &Network, diags: &mut Diagnostics) {
    for link in &net.links {
        let file = match link.kind {
            LinkKind::Pipe(_) => "pipes.csv",
            LinkKind::Pump(_) => "pumps.csv",
            LinkKind::Valve(_) => "valves.csv",
        };
        let loc = Location::line(file, link.line);
        check_diameter_unit(net.units, link, &loc, diags);
        let LinkKind::Pipe(pipe) = &link.kind else {
            continue;
        };
        check_roughness(net, link, pipe, &loc, diags);
        // A zero length without a minor loss is refused when the file is read.
        if pipe.length_m == 0.0 {
            diags.warning(
                loc.clone(),
                format!("pipe `{}` has zero length: it is modelled as a connection with only its minor loss", link.id),
                "give the pipe's length along its route",
            );
        }
        if link.from == link.to {
            diags.warning(
                loc,
                format!(
                    "pipe `{}` starts and ends at the same node `{}`: it carries no flow and is ignored",
                    link.id, net.nodes[link.from].id
                ),
                "check the from and to ids",
            );
        }
    }
}

/// A diameter outside the plausible range of its unit is most often one given in the other
/// unit system (common practice).
fn check_diameter_unit(units: UnitSystem, link: &Link, loc: &Location, diags: &mut Diagnostics) {
    let Some(off) = link.diameter_m().and_then(|d| off_unit_diameter(units, d)) else {
        return;
    };
    diags.warning(
        loc.clone(),
        format!("{} `{}`: diameter {off}", link.kind_name(), link.id),
        diameter_unit_fix(units),
    );
}

/// `d_m` as the file gives it, when it lies outside the plausible range of the file's diameter
/// unit: "8000 in looks like the wrong unit (plausible 1-120; common practice)".
fn off_unit_diameter(units: UnitSystem, d_m: f64) -> Option<String> {
    let (lo, hi) = match units {
        UnitSystem::Us => PLAUSIBLE_DIAMETER_IN,
        UnitSystem::Si => PLAUSIBLE_DIAMETER_MM,
    };
    let shown = units.from_si(Quantity::Diameter, d_m);
    (shown < lo || shown > hi).then(|| {
        format!(
            "{} {} looks like the wrong unit (plausible {lo}-{hi}; common practice)",
            display_value(shown),
            units.symbol(Quantity::Diameter)
        )
    })
}

fn diameter_unit_fix(units: UnitSystem) -> String {
    format!(
        "diameters are in {} for units = \"{}\"",
        units.symbol(Quantity::Diameter),
        units.name()
    )
}

/// What is implausible about a pipe's or a lead's roughness under the network's head-loss
/// formula, if anything: a C outside [`PLAUSIBLE_HW_C`], or a Darcy-Weisbach roughness above
/// [`PLAUSIBLE_RELATIVE_ROUGHNESS`] of the diameter.
fn implausible_roughness(net: &Network, roughness: f64, diameter_m: f64) -> Option<String> {
    match net.headloss {
        HeadlossFormula::HazenWilliams => {
            let (clo, chi) = PLAUSIBLE_HW_C;
            (roughness < clo || roughness > chi).then(|| {
                format!(
                    "Hazen-Williams C = {} is outside the plausible {clo}-{chi}",
                    display_value(roughness)
                )
            })
        }
        HeadlossFormula::DarcyWeisbach => (roughness > PLAUSIBLE_RELATIVE_ROUGHNESS * diameter_m)
            .then(|| {
                format!(
                    "roughness {} {} is more than 5 % of the diameter",
                    display_value(net.units.from_si(Quantity::Diameter, roughness)),
                    net.units.symbol(Quantity::Diameter)
                )
            }),
    }
}

/// A pipe's roughness against the plausible range of the network's head-loss formula.
fn check_roughness(
    net: &Network,
    link: &Link,
    pipe: &Pipe,
    loc: &Location,
    diags: &mut Diagnostics,
) {
    let Some(what) = implausible_roughness(net, pipe.roughness, pipe.diameter_m) else {
        return;
    };
    let fix = match net.headloss {
        HeadlossFormula::HazenWilliams => {
            "check the C factor; new PVC is about 150, old unlined cast iron 60-100".to_string()
        }
        HeadlossFormula::DarcyWeisbach => format!(
            "Darcy-Weisbach roughness is in {}, the diameter unit",
            net.units.symbol(Quantity::Diameter)
        ),
    };
    diags.warning(
        loc.clone(),
        format!("pipe `{}`: {what} (common practice)", link.id),
        fix,
    );
}

/// Warns about junctions above the highest grade of every source they can reach without a pump.
fn check_elevations(net: &Network, diags: &mut Diagnostics) {
    let mut comps = Components::new(net, |l| {
        l.can_carry_flow() && !matches!(l.kind, LinkKind::Pump(_))
    });
    let mut best: BTreeMap<usize, f64> = BTreeMap::new();
    for s in net.n_junctions..net.nodes.len() {
        let r = comps.find(s);
        let g = net.nodes[s].grade_m.unwrap_or(f64::NEG_INFINITY);
        let e = best.entry(r).or_insert(f64::NEG_INFINITY);
        *e = e.max(g);
    }
    let mut pumped = vec![false; net.nodes.len()];
    for link in &net.links {
        if let LinkKind::Pump(p) = &link.kind {
            if p.on {
                let r = comps.find(link.to);
                pumped[r] = true;
            }
        }
    }
    let units = net.units;
    for j in 0..net.n_junctions {
        let r = comps.find(j);
        if pumped[r] {
            continue;
        }
        let Some(&grade) = best.get(&r) else { continue };
        let node = &net.nodes[j];
        if node.elevation_m > grade {
            diags.warning(
                Location::line("junctions.csv", node.line),
                format!(
                    "junction `{}` at elevation {:.1} {u} is above every source grade it can reach without a pump (highest {:.1} {u}): its pressure will be negative",
                    node.id,
                    units.from_si(Quantity::Length, node.elevation_m),
                    units.from_si(Quantity::Length, grade),
                    u = units.symbol(Quantity::Length)
                ),
                "check the elevation and the source grades",
            );
        }
    }
}

/// Warns about hydrants whose junction is served only by mains smaller than 6 in / 150 mm.
fn check_hydrant_mains(net: &Network, diags: &mut Diagnostics) {
    let mut largest = vec![0.0_f64; net.nodes.len()];
    for link in &net.links {
        if let LinkKind::Pipe(p) = &link.kind {
            if p.status != PipeStatus::Closed {
                largest[link.from] = largest[link.from].max(p.diameter_m);
                largest[link.to] = largest[link.to].max(p.diameter_m);
            }
        }
    }
    let units = net.units;
    for h in &net.hydrants {
        let d = largest[h.junction];
        if d > 0.0 && d < MIN_HYDRANT_MAIN_M - 1e-9 {
            diags.warning(
                Location::line("hydrants.csv", h.line),
                format!(
                    "hydrant `{}` is on junction `{}` fed only by mains of {:.0} {} or less (mains serving hydrants are usually at least 6 in / 150 mm; common practice)",
                    h.id,
                    net.nodes[h.junction].id,
                    units.from_si(Quantity::Diameter, d),
                    units.symbol(Quantity::Diameter)
                ),
                "check the main's diameter; a small main limits the fire flow",
            );
        }
    }
}

/// Warns about a hydrant lead whose diameter looks like the wrong unit or whose roughness is
/// implausible, by the pipes' rules (common practice, no source).
fn check_hydrant_leads(net: &Network, diags: &mut Diagnostics) {
    for h in &net.hydrants {
        let Some(lead) = &h.lateral else {
            continue;
        };
        let at = Location::line("hydrants.csv", h.line);
        if let Some(off) = off_unit_diameter(net.units, lead.diameter_m) {
            diags.warning(
                at.clone(),
                format!("hydrant `{}`: lateral_diameter {off}", h.id),
                diameter_unit_fix(net.units),
            );
        }
        if let Some(what) = implausible_roughness(net, lead.roughness, lead.diameter_m) {
            diags.warning(
                at,
                format!("hydrant `{}`: the lead's {what} (common practice)", h.id),
                "check lateral_roughness: a C factor for Hazen-Williams, an absolute roughness in the diameter unit for Darcy-Weisbach",
            );
        }
    }
}

/// A zone's feeds: what delivers water into it.
#[derive(Clone, Debug, Default)]
pub struct ZoneSummary {
    pub name: String,
    pub junctions: usize,
    /// Ids of sources, pumps and valves feeding the zone, and open pipes from other zones.
    pub feeds: Vec<String>,
}

/// Zones with their junction counts and feeds.
pub fn zone_summaries(net: &Network) -> Vec<ZoneSummary> {
    let mut zones: Vec<ZoneSummary> = net
        .zones
        .iter()
        .map(|z| ZoneSummary {
            name: z.clone(),
            ..Default::default()
        })
        .collect();
    for node in net.junctions() {
        if let Some(z) = node.zone {
            zones[z].junctions += 1;
        }
    }
    for link in &net.links {
        if !link.can_carry_flow() {
            continue;
        }
        let (zf, zt) = (net.nodes[link.from].zone, net.nodes[link.to].zone);
        let from_source = !net.nodes[link.from].is_junction();
        let to_source = !net.nodes[link.to].is_junction();
        let mut add = |zone: Option<usize>, feed: String| {
            if let Some(z) = zone {
                if !zones[z].feeds.contains(&feed) {
                    zones[z].feeds.push(feed);
                }
            }
        };
        match &link.kind {
            LinkKind::Pump(_) | LinkKind::Valve(_) => {
                if zf != zt || from_source {
                    let what = if matches!(link.kind, LinkKind::Pump(_)) {
                        "pump"
                    } else {
                        "valve"
                    };
                    add(zt, format!("{what} {}", link.id));
                }
            }
            LinkKind::Pipe(p) => {
                if from_source {
                    add(
                        zt,
                        format!(
                            "{} {}",
                            net.nodes[link.from].kind.name(),
                            net.nodes[link.from].id
                        ),
                    );
                } else if to_source && p.status != PipeStatus::Check {
                    add(
                        zf,
                        format!(
                            "{} {}",
                            net.nodes[link.to].kind.name(),
                            net.nodes[link.to].id
                        ),
                    );
                } else if zf != zt {
                    add(zt, format!("pipe {}", link.id));
                    if p.status != PipeStatus::Check {
                        add(zf, format!("pipe {}", link.id));
                    }
                }
            }
        }
    }
    for z in &mut zones {
        z.feeds.sort();
    }
    zones
}

fn check_zones(net: &Network, diags: &mut Diagnostics) {
    for z in zone_summaries(net) {
        if z.feeds.is_empty() {
            diags.warning(
                Location::file("junctions.csv"),
                format!(
                    "zone `{}` ({} junctions) has no feed: no source, pump, valve or open pipe delivers water into it",
                    z.name, z.junctions
                ),
                "check the zone names of the junctions and the status of the zone's valves and pumps",
            );
        }
    }
}

/// What `validate` prints about a network that loaded.
#[derive(Clone, Debug)]
pub struct NetworkSummary {
    pub junctions: usize,
    pub reservoirs: usize,
    pub tanks: usize,
    pub pipes: usize,
    pub pumps: usize,
    pub valves: usize,
    pub hydrants: usize,
    pub zones: Vec<ZoneSummary>,
    /// Total average-day demand, m³/s.
    pub total_demand_m3s: f64,
    /// Total pipe length by diameter (m, m), ascending diameter.
    pub length_by_diameter_m: Vec<(f64, f64)>,
}

pub fn summarize(net: &Network) -> NetworkSummary {
    use super::network::NodeKind;
    let count = |k: NodeKind| net.nodes.iter().filter(|n| n.kind == k).count();
    let mut pipes = 0;
    let mut pumps = 0;
    let mut valves = 0;
    // Diameters are grouped to the micrometre so that 8 in read from a file is one key.
    let mut by_d: BTreeMap<i64, (f64, f64)> = BTreeMap::new();
    for link in &net.links {
        match &link.kind {
            LinkKind::Pipe(p) => {
                pipes += 1;
                let key = (p.diameter_m * 1e6).round() as i64;
                let e = by_d.entry(key).or_insert((p.diameter_m, 0.0));
                e.1 += p.length_m;
            }
            LinkKind::Pump(_) => pumps += 1,
            LinkKind::Valve(_) => valves += 1,
        }
    }
    NetworkSummary {
        junctions: net.n_junctions,
        reservoirs: count(NodeKind::Reservoir),
        tanks: count(NodeKind::Tank),
        pipes,
        pumps,
        valves,
        hydrants: net.hydrants.len(),
        zones: zone_summaries(net),
        total_demand_m3s: net.total_base_demand_m3s(),
        length_by_diameter_m: by_d.into_values().collect(),
    }
}
