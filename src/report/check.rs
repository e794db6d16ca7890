//! Reports of the fire-flow and service-pressure check (`firemain check`): terminal summary and
//! compliance table, `fireflow.csv`, `service.csv`, `report.md` and `report.json`.

use std::collections::BTreeMap;

use serde::Serialize;
use tabled::builder::Builder;
use tabled::settings::Style;

use super::{
    csv_bytes, input_warnings_markdown, num, JsonInputWarning, Out, OutputFile, OutputSet,
    ReportError, CAUTIONS,
};
use crate::criteria::{Criteria, Scope};
use crate::fireflow::{HydrantNote, HydrantResult, Outcome, SweepStats};
use crate::hydraulics::LinkState;
use crate::model::{Diagnostic, LinkKind, Network};
use crate::service::{ServiceReport, ServiceResult};
use crate::units::Quantity;
use crate::weakmains::{WeakMain, WeakReason};

/// Version of the layout of `report.json`; raised on any incompatible change.
pub const JSON_SCHEMA_VERSION: u32 = 1;

/// Everything a check report shows.
pub struct CheckReport<'a> {
    pub network: &'a Network,
    pub criteria: &'a Criteria,
    pub results: &'a [HydrantResult],
    pub service: &'a ServiceReport,
    /// Date and time of the analysis, as shown on the report.
    pub generated: String,
    /// The run id shared by every file of the run (see `report::new_run_id`).
    pub run_id: String,
    pub version: &'a str,
    /// Plausibility warnings about the network and criteria files.
    pub input_warnings: &'a [Diagnostic],
    /// Whether only some hydrants were analysed (`--hydrant`).
    pub partial: bool,
    /// Mains that limit failing hydrants, ranked.
    pub weak_mains: &'a [WeakMain],
}

impl CheckReport<'_> {
    /// Whether the run has findings (exit status 1): a hydrant that does not pass (it fails, or
    /// its analysis failed), or a junction outside its service-pressure range.
    pub fn has_findings(&self) -> bool {
        self.results
            .iter()
            .any(|r| r.outcome != crate::fireflow::Outcome::Pass)
            || self.service.exceptions().next().is_some()
    }
}

/// Weak mains shown on the terminal and in report.md.
const WEAK_MAINS_SHOWN: usize = 10;
/// Supply-path pipes shown per failing hydrant in report.md.
const SUPPLY_PIPES_SHOWN: usize = 5;

impl CheckReport<'_> {
    fn out(&self) -> Out {
        Out::new(self.network.units)
    }

    fn count(&self, outcome: Outcome) -> usize {
        self.results.iter().filter(|r| r.outcome == outcome).count()
    }

    /// Results sorted by margin (available − required), errors first, then by hydrant id.
    fn by_margin(&self) -> Vec<&HydrantResult> {
        let mut v: Vec<&HydrantResult> = self.results.iter().collect();
        v.sort_by(|a, b| {
            let key = |r: &HydrantResult| r.margin_m3s().unwrap_or(f64::NEG_INFINITY);
            key(a)
                .total_cmp(&key(b))
                .then_with(|| self.hydrant_id(a).cmp(self.hydrant_id(b)))
        });
        v
    }

    fn hydrant_id(&self, r: &HydrantResult) -> &str {
        &self.network.hydrants[r.hydrant].id
    }

    fn node_id(&self, j: Option<usize>) -> String {
        j.map(|j| self.network.nodes[j].id.clone())
            .unwrap_or_default()
    }

    fn zone(&self, r: &HydrantResult) -> String {
        self.network
            .zone_name(r.junction)
            .unwrap_or_default()
            .to_string()
    }

    fn condition_line(&self) -> String {
        let net = self.network;
        let o = self.out();
        format!(
            "max-day demand (x{} average day) plus the fire flow at one hydrant at a time; residual floor {} {} at {}; search cap {} {}{}",
            net.demand_factors.max_day,
            num(o.pressure(self.criteria.residual_floor_kpa), 1),
            o.sym(Quantity::Pressure),
            match self.criteria.scope {
                Scope::System => "every junction",
                Scope::Zone => "every junction of the hydrant's zone",
            },
            o.flow_text(self.criteria.search_cap_m3s),
            o.sym(Quantity::Flow),
            match self.criteria.max_velocity_m_per_s {
                Some(v) => format!(
                    "; pipe velocity limit {} {}",
                    num(o.velocity(v), 1),
                    o.sym(Quantity::Velocity)
                ),
                None => String::new(),
            }
        )
    }

    /// A note in plain words, in the network's units.
    pub fn note_text(&self, note: &HydrantNote) -> String {
        let net = self.network;
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let flow = |q: f64| format!("{} {f}", o.flow_text(q));
        // "PRV PRV-1" reads badly: the kind is left out when the id already starts with it.
        let link = |i: usize| {
            let l = &net.links[i];
            let kind = match &l.kind {
                LinkKind::Valve(v) => v.kind.name().to_uppercase(),
                _ => l.kind_name().to_string(),
            };
            if l.id.to_lowercase().starts_with(&kind.to_lowercase()) {
                l.id.clone()
            } else {
                format!("{kind} {}", l.id)
            }
        };
        match note {
            HydrantNote::FloorViolatedWithoutFireFlow {
                junction,
                pressure_kpa,
            } => format!(
                "the floor is already violated without fire flow at junction {} ({} {})",
                net.nodes[*junction].id,
                num(o.pressure(*pressure_kpa), 1),
                o.sym(Quantity::Pressure)
            ),
            HydrantNote::VelocityExceededWithoutFireFlow {
                link: i,
                velocity_m_per_s,
            } => format!(
                "the velocity limit is already exceeded without fire flow in {} ({} {})",
                link(*i),
                num(o.velocity(*velocity_m_per_s), 1),
                o.sym(Quantity::Velocity)
            ),
            HydrantNote::VelocityLimit { link: i } => {
                format!("the velocity limit is reached in {}", link(*i))
            }
            HydrantNote::StateChanged {
                link: i,
                from,
                to,
                at_flow_m3s,
            } => {
                let what = match (from, to) {
                    (LinkState::Regulating, LinkState::Open) => "went wide open".to_string(),
                    (_, LinkState::Closed) => "closed".to_string(),
                    (LinkState::Running, LinkState::NoFlow) => {
                        "stopped delivering (head asked above its shutoff head)".to_string()
                    }
                    (LinkState::NoFlow, LinkState::Running) => "started delivering".to_string(),
                    (LinkState::Closed, _) => "opened".to_string(),
                    (a, b) => format!("changed from {} to {}", a.name(), b.name()),
                };
                format!("{} {what} at about {}", link(*i), flow(*at_flow_m3s))
            }
            HydrantNote::SolveFailedAbove { flow_m3s, reason } => format!(
                "no hydraulic solution at {} ({reason}); the largest verified flow is reported",
                flow(*flow_m3s)
            ),
            HydrantNote::ResidualUnavailable { reason } => {
                format!("no hydraulic solution at the required flow: {reason}")
            }
            HydrantNote::NonMonotone {
                passes_again_at_m3s,
            } => format!(
                "the constraints fail at a flow below {} where they are met again; the first crossing is reported",
                flow(*passes_again_at_m3s)
            ),
            HydrantNote::RequiredAboveCap { cap_m3s } => format!(
                "the required flow is above the criteria's search cap ({}): the search went up to the required flow",
                flow(*cap_m3s)
            ),
            HydrantNote::UnsettledControls { links } => format!(
                "no verified answer: the controls of {} switched back and forth without settling; check their settings",
                links.iter().map(|&i| link(i)).collect::<Vec<_>>().join(", ")
            ),
            HydrantNote::OtherStatesFail { reported_flow_m3s } => format!(
                "at {} the pumps or valves can settle in states that violate the constraints when solved from another start; a lower flow that every start verifies is reported",
                flow(*reported_flow_m3s)
            ),
            HydrantNote::Error { reason } => reason.clone(),
        }
    }

    fn notes_text(&self, r: &HydrantResult) -> String {
        r.notes
            .iter()
            .map(|n| self.note_text(n))
            .collect::<Vec<_>>()
            .join("; ")
    }

    fn required_label(&self, r: &HydrantResult) -> String {
        let h = &self.network.hydrants[r.hydrant];
        match (&h.class, r.required_source) {
            (_, crate::criteria::RequiredSource::Hydrant) => "own value".into(),
            (Some(c), crate::criteria::RequiredSource::Class) => c.clone(),
            _ => "default".into(),
        }
    }

    /// The summary block printed first on the terminal.
    pub fn summary(&self) -> String {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut s = String::new();
        s.push_str(&format!("Network:    {}\n", self.network.name));
        s.push_str(&format!("Criteria:   {}\n", self.criteria.name));
        s.push_str(&format!("Reference:  {}\n", self.criteria.reference));
        s.push_str(&format!("Condition:  {}\n", self.condition_line()));
        s.push_str(&format!(
            "Hydrants:   {} analysed{}: {} pass, {} fail, {} error\n",
            self.results.len(),
            if self.partial { " (selected)" } else { "" },
            self.count(Outcome::Pass),
            self.count(Outcome::Fail),
            self.count(Outcome::Error)
        ));
        let weakest: Vec<String> = self
            .by_margin()
            .into_iter()
            .filter(|r| r.outcome != Outcome::Pass)
            .take(5)
            .map(|r| match r.margin_m3s() {
                Some(m) => format!("{} ({} {f} short)", self.hydrant_id(r), o.flow_text_up(-m)),
                None => format!("{} (error)", self.hydrant_id(r)),
            })
            .collect();
        if !weakest.is_empty() {
            s.push_str(&format!("Weakest:    {}\n", weakest.join(", ")));
        }
        let exceptions = self.service.exceptions().count();
        s.push_str(&format!(
            "Service:    {} of {} junctions outside {}-{} {} (peak hour x{}, {} x{})\n",
            exceptions,
            self.service.rows.len(),
            num(o.pressure(self.criteria.service_min_kpa), 0),
            num(o.pressure(self.criteria.service_max_kpa), 0),
            o.sym(Quantity::Pressure),
            self.service.peak_hour_factor,
            self.service.low_condition.name(),
            self.service.low_demand_factor
        ));
        s.push_str(
            "Screening estimates from a model: confirm with field flow tests; the fire code official and a licensed engineer decide.\n",
        );
        s
    }

    fn table_header(&self) -> Vec<String> {
        let o = self.out();
        let (f, p) = (o.sym(Quantity::Flow), o.sym(Quantity::Pressure));
        vec![
            "hydrant".into(),
            "zone".into(),
            "junction".into(),
            "requirement".into(),
            format!("required ({f})"),
            format!("available ({f})"),
            format!("margin ({f})"),
            format!("static ({p})"),
            format!("residual ({p})"),
            "limited by".into(),
            "critical".into(),
            "result".into(),
        ]
    }

    fn table_row(&self, r: &HydrantResult) -> Vec<String> {
        let o = self.out();
        let flow = |q: Option<f64>| q.map(|q| o.flow_text_down(q)).unwrap_or_default();
        let pressure = |p: Option<f64>| p.map(|p| num(o.pressure(p), 1)).unwrap_or_default();
        // A demand-driven model computes pressures far below zero when a main cannot carry the
        // required flow; the table says so rather than show a meaningless number (the CSV keeps
        // the model's value).
        let residual = |p: Option<f64>| match p {
            Some(p) if p < 0.0 => "below 0".to_string(),
            other => pressure(other),
        };
        let critical = match (r.critical_junction, r.critical_link) {
            (_, Some(i)) => self.network.links[i].id.clone(),
            (Some(j), None) => self.network.nodes[j].id.clone(),
            _ => String::new(),
        };
        vec![
            self.hydrant_id(r).to_string(),
            self.zone(r),
            self.network.nodes[r.junction].id.clone(),
            self.required_label(r),
            flow(Some(r.required_m3s)),
            flow(r.available_m3s),
            flow(r.margin_m3s()),
            pressure(r.static_kpa),
            residual(r.residual_kpa),
            r.limited_by.map(|l| l.name()).unwrap_or("").to_string(),
            critical,
            r.outcome.name().to_string(),
        ]
    }

    /// The compliance table for the terminal, sorted by margin.
    pub fn terminal_table(&self) -> String {
        let mut b = Builder::default();
        b.push_record(self.table_header());
        for r in self.by_margin() {
            b.push_record(self.table_row(r));
        }
        format!(
            "\nCompliance table (sorted by margin, weakest first)\n{}\n",
            b.build().with(Style::sharp())
        )
    }

    /// `fireflow.csv`.
    pub fn fireflow_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (f, p) = (o.sfx(Quantity::Flow), o.sfx(Quantity::Pressure));
        let header: Vec<String> = vec![
            "hydrant".into(),
            "junction".into(),
            "zone".into(),
            format!("required_flow_{f}"),
            format!("available_flow_{f}"),
            format!("static_pressure_{p}"),
            format!("residual_pressure_{p}"),
            format!("min_pressure_{p}"),
            "min_pressure_junction".into(),
            "critical_junction".into(),
            "limited_by".into(),
            "result".into(),
            "notes".into(),
        ];
        let flow = |q: Option<f64>| {
            q.map(|q| o.fmt_precise(Quantity::Flow, q))
                .unwrap_or_default()
        };
        let pressure = |k: Option<f64>| {
            k.map(|k| o.fmt_precise(Quantity::Pressure, k))
                .unwrap_or_default()
        };
        let rows: Vec<Vec<String>> = self
            .results
            .iter()
            .map(|r| {
                vec![
                    self.hydrant_id(r).to_string(),
                    self.network.nodes[r.junction].id.clone(),
                    self.zone(r),
                    flow(Some(r.required_m3s)),
                    flow(r.available_m3s),
                    pressure(r.static_kpa),
                    pressure(r.residual_kpa),
                    pressure(r.min_pressure_kpa),
                    self.node_id(r.min_pressure_junction),
                    self.node_id(r.critical_junction),
                    r.limited_by.map(|l| l.name()).unwrap_or("").to_string(),
                    r.outcome.name().to_string(),
                    self.notes_text(r),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    /// `service.csv`.
    pub fn service_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (l, p) = (o.sfx(Quantity::Length), o.sfx(Quantity::Pressure));
        let header: Vec<String> = vec![
            "junction".into(),
            "zone".into(),
            format!("elevation_{l}"),
            format!("pressure_peak_hour_{p}"),
            format!("pressure_low_demand_{p}"),
            "result".into(),
            "notes".into(),
        ];
        let rows: Vec<Vec<String>> = self
            .service
            .rows
            .iter()
            .map(|r| {
                let node = &self.network.nodes[r.junction];
                vec![
                    node.id.clone(),
                    self.network
                        .zone_name(r.junction)
                        .unwrap_or_default()
                        .to_string(),
                    o.fmt_precise(Quantity::Length, node.elevation_m),
                    r.peak_hour_kpa
                        .map(|k| o.fmt_precise(Quantity::Pressure, k))
                        .unwrap_or_default(),
                    r.low_demand_kpa
                        .map(|k| o.fmt_precise(Quantity::Pressure, k))
                        .unwrap_or_default(),
                    r.result.name().to_string(),
                    self.service_note(r),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    fn service_note(&self, r: &crate::service::ServiceRow) -> String {
        let o = self.out();
        let p = o.sym(Quantity::Pressure);
        let mut notes = Vec::new();
        match r.result {
            ServiceResult::Low => notes.push(format!(
                "below {} {p} at peak hour",
                num(o.pressure(self.criteria.service_min_kpa), 0)
            )),
            ServiceResult::High => notes.push(format!(
                "above {} {p} at {}",
                num(o.pressure(self.criteria.service_max_kpa), 0),
                self.service.low_condition.name()
            )),
            ServiceResult::Pass => {}
        }
        if r.also_high {
            notes.push(format!(
                "also above {} {p} at {}",
                num(o.pressure(self.criteria.service_max_kpa), 0),
                self.service.low_condition.name()
            ));
        }
        if r.peak_hour_kpa.is_none() || r.low_demand_kpa.is_none() {
            notes.push("cut off from every source by closed elements".into());
        }
        notes.join("; ")
    }

    fn reason_text(&self, r: &WeakReason) -> String {
        let o = self.out();
        let l = o.sym(Quantity::Length);
        match r {
            WeakReason::HighUnitHeadloss { per_1000 } => format!(
                "high unit head loss under fire flow ({} {l} per 1000 {l})",
                num(*per_1000, 1)
            ),
            WeakReason::HighVelocity {
                velocity_m_per_s,
                limit_m_per_s,
                criteria_limit,
            } => format!(
                "velocity {} {v} above {} {v}{}",
                num(o.velocity(*velocity_m_per_s), 1),
                num(o.velocity(*limit_m_per_s), 1),
                if *criteria_limit {
                    " (the criteria's limit)"
                } else {
                    " (a common-practice flag; the criteria set no limit)"
                },
                v = o.sym(Quantity::Velocity)
            ),
            WeakReason::SmallDiameter {
                diameter_m,
                minimum_m,
            } => format!(
                "diameter {} {d} below the {} {d} minimum for mains serving hydrants",
                num(o.diameter(*diameter_m), 1),
                num(o.diameter(*minimum_m), 0),
                d = o.sym(Quantity::Diameter)
            ),
            WeakReason::LowRoughnessCoefficient { c } => format!(
                "very low Hazen-Williams C ({}): tuberculation or a partly closed valve?",
                num(*c, 0)
            ),
        }
    }

    fn weak_main_row(&self, w: &WeakMain) -> Vec<String> {
        let o = self.out();
        let link = &self.network.links[w.link];
        let (d, len, material) = pipe_facts(link);
        vec![
            link.id.clone(),
            num(o.diameter(d), 1),
            num(o.length(len), 0),
            material,
            w.hydrants_limited.to_string(),
            format!("{}%", num(100.0 * w.worst_share, 0)),
            num(w.worst_unit_headloss, 1),
            num(o.velocity(w.max_velocity_m_per_s), 1),
            w.reasons
                .iter()
                .map(|r| self.reason_text(r))
                .collect::<Vec<_>>()
                .join("; "),
        ]
    }

    fn weak_main_header(&self) -> Vec<String> {
        let o = self.out();
        let l = o.sym(Quantity::Length);
        vec![
            "pipe".into(),
            format!("diameter ({})", o.sym(Quantity::Diameter)),
            format!("length ({l})"),
            "material/class".into(),
            "hydrants limited".into(),
            "largest share".into(),
            format!("unit head loss ({l}/1000 {l})"),
            format!("velocity ({})", o.sym(Quantity::Velocity)),
            "reasons".into(),
        ]
    }

    /// The top weak mains for the terminal.
    pub fn terminal_weak_mains(&self) -> String {
        if self.weak_mains.is_empty() {
            return String::new();
        }
        let mut b = Builder::default();
        b.push_record(self.weak_main_header());
        for w in self.weak_mains.iter().take(WEAK_MAINS_SHOWN) {
            b.push_record(self.weak_main_row(w));
        }
        format!(
            "\nWeak mains (pipes on the supply paths of failing hydrants, at their required flow; {} in all, see weak_mains.csv)\n{}\n",
            self.weak_mains.len(),
            b.build().with(Style::sharp())
        )
    }

    /// `weak_mains.csv`.
    pub fn weak_mains_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (d, l, v) = (
            o.sfx(Quantity::Diameter),
            o.sfx(Quantity::Length),
            o.sfx(Quantity::Velocity),
        );
        let header: Vec<String> = vec![
            "pipe".into(),
            format!("diameter_{d}"),
            format!("length_{l}"),
            "material_or_class".into(),
            "hydrants_limited".into(),
            format!("worst_unit_headloss_{l}"),
            format!("max_velocity_{v}"),
            "reasons".into(),
        ];
        let rows: Vec<Vec<String>> = self
            .weak_mains
            .iter()
            .map(|w| {
                let link = &self.network.links[w.link];
                let (dia, len, material) = pipe_facts(link);
                vec![
                    link.id.clone(),
                    o.fmt(Quantity::Diameter, dia),
                    o.fmt(Quantity::Length, len),
                    material,
                    w.hydrants_limited.to_string(),
                    num(w.worst_unit_headloss, 2),
                    o.fmt_precise(Quantity::Velocity, w.max_velocity_m_per_s),
                    w.reasons
                        .iter()
                        .map(|r| self.reason_text(r))
                        .collect::<Vec<_>>()
                        .join("; "),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    /// `report.md`: a document to attach to a permit application.
    pub fn markdown(&self) -> String {
        let net = self.network;
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut s = String::new();
        s.push_str(&format!(
            "# Fire-flow screening report: {}\n\n",
            md(&net.name)
        ));
        s.push_str("| | |\n|---|---|\n");
        let rows = [
            ("Network", md(&net.name)),
            ("Criteria", md(&self.criteria.name)),
            ("Criteria reference", md(&self.criteria.reference)),
            (
                "Demand condition",
                format!(
                    "max-day = {} x average day (fire flow); peak hour = {} x; {} = {} x (service pressures)",
                    net.demand_factors.max_day,
                    self.service.peak_hour_factor,
                    self.service.low_condition.name(),
                    self.service.low_demand_factor
                ),
            ),
            ("Fire-flow condition", md(&self.condition_line())),
            (
                "Source grades used",
                net.sources()
                    .iter()
                    .map(|n| {
                        format!(
                            "{} {} at {} {}",
                            n.kind.name(),
                            md(&n.id),
                            num(o.length(n.grade_m.unwrap_or(n.elevation_m)), 1),
                            o.sym(Quantity::Length)
                        )
                    })
                    .collect::<Vec<_>>()
                    .join("; "),
            ),
            (
                "Assumptions",
                format!(
                    "steady state; demand-driven (demands are met whatever the pressure); sources at fixed grades; head loss by {}; one hydrant flowing at a time",
                    net.headloss.name()
                ),
            ),
            ("Date", md(&self.generated)),
            ("Run id", md(&self.run_id)),
            ("Produced by", format!("firemain {}", self.version)),
        ];
        for (k, v) in rows {
            s.push_str(&format!("| {k} | {v} |\n"));
        }
        s.push_str(&format!(
            "\n## Summary\n\n{} hydrants analysed{}: **{} pass**, **{} fail**, {} error. Service pressures: {} of {} junctions outside {}-{} {}.\n",
            self.results.len(),
            if self.partial { " (a selection)" } else { "" },
            self.count(Outcome::Pass),
            self.count(Outcome::Fail),
            self.count(Outcome::Error),
            self.service.exceptions().count(),
            self.service.rows.len(),
            num(o.pressure(self.criteria.service_min_kpa), 0),
            num(o.pressure(self.criteria.service_max_kpa), 0),
            o.sym(Quantity::Pressure)
        ));
        s.push_str(&input_warnings_markdown(self.input_warnings));

        s.push_str("\n## Compliance table\n\nAvailable fire flow at each hydrant, sorted by margin (available minus required) within each zone; the weakest first.\n");
        let mut zones: BTreeMap<String, Vec<&HydrantResult>> = BTreeMap::new();
        for r in self.by_margin() {
            zones.entry(self.zone(r)).or_default().push(r);
        }
        for (zone, rows) in zones {
            if zone.is_empty() {
                if self.network.zones.is_empty() {
                    s.push('\n');
                } else {
                    s.push_str("\n### Hydrants without a zone\n\n");
                }
            } else {
                s.push_str(&format!("\n### Zone {}\n\n", md(&zone)));
            }
            let header = self.table_header();
            s.push_str(&format!("| {} |\n", header.join(" | ")));
            s.push_str(&format!("|{}\n", "---|".repeat(header.len())));
            for r in rows {
                let cells: Vec<String> = self.table_row(r).iter().map(|c| md(c)).collect();
                s.push_str(&format!("| {} |\n", cells.join(" | ")));
            }
        }
        let noted: Vec<&HydrantResult> = self
            .results
            .iter()
            .filter(|r| !r.notes.is_empty())
            .collect();
        if !noted.is_empty() {
            s.push_str("\n### Notes\n\n");
            for r in noted {
                s.push_str(&format!(
                    "- **{}**: {}\n",
                    md(self.hydrant_id(r)),
                    md(&self.notes_text(r))
                ));
            }
        }

        if !self.weak_mains.is_empty() {
            let o = self.out();
            let l = o.sym(Quantity::Length);
            s.push_str(&format!(
                "\n## Weak mains\n\nPipes on the supply paths of failing hydrants, at their required flow, ranked by their share of the head lost between the sources and the lowest-pressure junction, summed over the failing hydrants they limit (the top {} of {}; all in weak_mains.csv).\n\n",
                WEAK_MAINS_SHOWN.min(self.weak_mains.len()),
                self.weak_mains.len()
            ));
            let header = self.weak_main_header();
            s.push_str(&format!(
                "| {} |\n|{}\n",
                header.join(" | "),
                "---|".repeat(header.len())
            ));
            for w in self.weak_mains.iter().take(WEAK_MAINS_SHOWN) {
                let cells: Vec<String> = self.weak_main_row(w).iter().map(|c| md(c)).collect();
                s.push_str(&format!("| {} |\n", cells.join(" | ")));
            }
            s.push_str(&format!(
                "\nLargest shares of head loss per failing hydrant (pipe: share, {l} per 1000 {l}, {}):\n\n",
                o.sym(Quantity::Velocity)
            ));
            for r in self.by_margin() {
                if r.supply_paths.is_empty() {
                    continue;
                }
                let pipes: Vec<String> = r
                    .supply_paths
                    .iter()
                    .take(SUPPLY_PIPES_SHOWN)
                    .map(|p| {
                        format!(
                            "{} ({}%, {}, {})",
                            md(&self.network.links[p.link].id),
                            num(100.0 * p.share, 0),
                            num(p.unit_headloss, 1),
                            num(o.velocity(p.velocity_m_per_s), 1)
                        )
                    })
                    .collect();
                s.push_str(&format!(
                    "- **{}** (lowest pressure at {}): {}\n",
                    md(self.hydrant_id(r)),
                    md(&self.node_id(r.min_pressure_junction)),
                    pipes.join(", ")
                ));
            }
        }

        s.push_str("\n## Service-pressure exceptions\n\n");
        let exceptions: Vec<_> = self.service.exceptions().collect();
        if exceptions.is_empty() {
            s.push_str(&format!(
                "Every junction is within {}-{} {}.\n",
                num(o.pressure(self.criteria.service_min_kpa), 0),
                num(o.pressure(self.criteria.service_max_kpa), 0),
                o.sym(Quantity::Pressure)
            ));
        } else {
            let p = o.sym(Quantity::Pressure);
            s.push_str(&format!(
                "| junction | zone | elevation ({}) | peak hour ({p}) | {} ({p}) | result | notes |\n|---|---|---|---|---|---|---|\n",
                o.sym(Quantity::Length),
                self.service.low_condition.name()
            ));
            for r in exceptions {
                let node = &net.nodes[r.junction];
                s.push_str(&format!(
                    "| {} | {} | {} | {} | {} | {} | {} |\n",
                    md(&node.id),
                    md(net.zone_name(r.junction).unwrap_or_default()),
                    num(o.length(node.elevation_m), 1),
                    r.peak_hour_kpa
                        .map(|k| num(o.pressure(k), 1))
                        .unwrap_or_default(),
                    r.low_demand_kpa
                        .map(|k| num(o.pressure(k), 1))
                        .unwrap_or_default(),
                    r.result.name(),
                    md(&self.service_note(r))
                ));
            }
        }
        if !self.service.notes.is_empty() {
            s.push_str("\nControls in the service conditions:\n\n");
            for n in &self.service.notes {
                s.push_str(&format!("- {}\n", md(n)));
            }
        }
        s.push_str("\n## Cautions\n\n");
        for c in CAUTIONS {
            s.push_str(&format!("- {c}\n"));
        }
        s.push_str(&format!(
            "\nFlows in {f}, pressures in {}, elevations and grades in {}.\n",
            o.sym(Quantity::Pressure),
            o.sym(Quantity::Length)
        ));
        s
    }

    /// `report.json`: everything above, machine-readable.
    pub fn json(&self, stats: Option<&SweepStats>) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let flow = |q: Option<f64>| q.map(|q| round(o.flow(q), 4));
        let pressure = |p: Option<f64>| p.map(|p| round(o.pressure(p), 4));
        let doc = JsonReport {
            schema_version: JSON_SCHEMA_VERSION,
            generator: format!("firemain {}", self.version),
            generated: self.generated.clone(),
            run_id: self.run_id.clone(),
            units: JsonUnits {
                flow: o.sym(Quantity::Flow),
                pressure: o.sym(Quantity::Pressure),
                length: o.sym(Quantity::Length),
                velocity: o.sym(Quantity::Velocity),
            },
            network: self.network.name.clone(),
            criteria: JsonCriteria {
                name: self.criteria.name.clone(),
                reference: self.criteria.reference.clone(),
                residual_floor: round(o.pressure(self.criteria.residual_floor_kpa), 4),
                scope: self.criteria.scope,
                search_cap: round(o.flow(self.criteria.search_cap_m3s), 4),
                max_velocity: self
                    .criteria
                    .max_velocity_m_per_s
                    .map(|v| round(o.velocity(v), 4)),
                service_min_pressure: round(o.pressure(self.criteria.service_min_kpa), 4),
                service_max_pressure: round(o.pressure(self.criteria.service_max_kpa), 4),
            },
            demand_factors: JsonDemand {
                max_day: self.network.demand_factors.max_day,
                peak_hour: self.service.peak_hour_factor,
                low_demand_condition: self.service.low_condition.name(),
                low_demand: self.service.low_demand_factor,
            },
            summary: JsonSummary {
                hydrants: self.results.len(),
                pass: self.count(Outcome::Pass),
                fail: self.count(Outcome::Fail),
                error: self.count(Outcome::Error),
                service_exceptions: self.service.exceptions().count(),
                partial: self.partial,
            },
            input_warnings: self.input_warnings.iter().map(Into::into).collect(),
            hydrants: self
                .results
                .iter()
                .map(|r| JsonHydrant {
                    hydrant: self.hydrant_id(r).to_string(),
                    junction: self.network.nodes[r.junction].id.clone(),
                    zone: self.network.zone_name(r.junction).map(str::to_string),
                    requirement: self.required_label(r),
                    required_flow: round(o.flow(r.required_m3s), 4),
                    available_flow: flow(r.available_m3s),
                    static_pressure: pressure(r.static_kpa),
                    residual_pressure: pressure(r.residual_kpa),
                    min_pressure: pressure(r.min_pressure_kpa),
                    min_pressure_junction: r
                        .min_pressure_junction
                        .map(|j| self.network.nodes[j].id.clone()),
                    critical_junction: r
                        .critical_junction
                        .map(|j| self.network.nodes[j].id.clone()),
                    critical_pipe: r.critical_link.map(|i| self.network.links[i].id.clone()),
                    limited_by: r.limited_by.map(|l| l.name()),
                    result: r.outcome.name(),
                    notes: r.notes.iter().map(|n| self.note_text(n)).collect(),
                    supply_paths: r
                        .supply_paths
                        .iter()
                        .map(|p| JsonShare {
                            pipe: self.network.links[p.link].id.clone(),
                            share: round(p.share, 4),
                            unit_headloss: round(p.unit_headloss, 4),
                            velocity: round(o.velocity(p.velocity_m_per_s), 4),
                        })
                        .collect(),
                })
                .collect(),
            service: self
                .service
                .rows
                .iter()
                .map(|r| JsonService {
                    junction: self.network.nodes[r.junction].id.clone(),
                    zone: self.network.zone_name(r.junction).map(str::to_string),
                    pressure_peak_hour: pressure(r.peak_hour_kpa),
                    pressure_low_demand: pressure(r.low_demand_kpa),
                    result: r.result.name(),
                })
                .collect(),
            weak_mains: self
                .weak_mains
                .iter()
                .map(|w| JsonWeakMain {
                    pipe: self.network.links[w.link].id.clone(),
                    hydrants_limited: w.hydrants_limited,
                    worst_share: round(w.worst_share, 4),
                    worst_unit_headloss: round(w.worst_unit_headloss, 4),
                    max_velocity: round(o.velocity(w.max_velocity_m_per_s), 4),
                    reasons: w.reasons.iter().map(|r| self.reason_text(r)).collect(),
                })
                .collect(),
            service_notes: self.service.notes.clone(),
            sweep: stats.map(|s| JsonStats {
                solves: s.solves,
                factorizations: s.factorizations,
                factorizations_per_hydrant_mean: round(s.factorizations_per_hydrant_mean, 3),
                factorizations_per_hydrant_max: s.factorizations_per_hydrant_max,
            }),
            cautions: CAUTIONS.to_vec(),
        };
        serde_json::to_vec_pretty(&doc).map_err(|e| ReportError::Render {
            what: "report.json".into(),
            message: e.to_string(),
        })
    }

    /// All files of the check, as one set.
    pub fn output_set(&self, stats: Option<&SweepStats>) -> Result<OutputSet, ReportError> {
        Ok(OutputSet {
            command: "check",
            run_id: self.run_id.clone(),
            generated: self.generated.clone(),
            generator: format!("firemain {}", self.version),
            files: self.files(stats)?,
        })
    }

    /// All files of the check.
    pub fn files(&self, stats: Option<&SweepStats>) -> Result<Vec<OutputFile>, ReportError> {
        Ok(vec![
            OutputFile {
                name: "fireflow.csv".into(),
                bytes: self.fireflow_csv()?,
            },
            OutputFile {
                name: "service.csv".into(),
                bytes: self.service_csv()?,
            },
            OutputFile {
                name: "weak_mains.csv".into(),
                bytes: self.weak_mains_csv()?,
            },
            OutputFile {
                name: "report.md".into(),
                bytes: self.markdown().into_bytes(),
            },
            OutputFile {
                name: "report.json".into(),
                bytes: self.json(stats)?,
            },
        ])
    }
}

/// Diameter (m), length (m) and material text of a pipe; zeros for other links.
fn pipe_facts(link: &crate::model::Link) -> (f64, f64, String) {
    match &link.kind {
        LinkKind::Pipe(p) => (
            p.diameter_m,
            p.length_m,
            p.material.clone().unwrap_or_default(),
        ),
        _ => (0.0, 0.0, String::new()),
    }
}

/// Escapes a cell for a Markdown table.
fn md(text: &str) -> String {
    text.replace('|', "\\|").replace('\n', " ")
}

/// Rounds for JSON so that files do not carry solver noise in the last digits.
fn round(v: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    let r = (v * k).round() / k;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

#[derive(Serialize)]
struct JsonReport {
    schema_version: u32,
    generator: String,
    generated: String,
    run_id: String,
    units: JsonUnits,
    network: String,
    criteria: JsonCriteria,
    demand_factors: JsonDemand,
    summary: JsonSummary,
    input_warnings: Vec<JsonInputWarning>,
    hydrants: Vec<JsonHydrant>,
    service: Vec<JsonService>,
    weak_mains: Vec<JsonWeakMain>,
    service_notes: Vec<String>,
    /// Work counters; `null` unless --stats (they are not part of the result).
    sweep: Option<JsonStats>,
    cautions: Vec<&'static str>,
}

#[derive(Serialize)]
struct JsonUnits {
    flow: &'static str,
    pressure: &'static str,
    length: &'static str,
    velocity: &'static str,
}

#[derive(Serialize)]
struct JsonCriteria {
    name: String,
    reference: String,
    residual_floor: f64,
    scope: Scope,
    search_cap: f64,
    max_velocity: Option<f64>,
    service_min_pressure: f64,
    service_max_pressure: f64,
}

#[derive(Serialize)]
struct JsonDemand {
    max_day: f64,
    peak_hour: f64,
    low_demand_condition: &'static str,
    low_demand: f64,
}

#[derive(Serialize)]
struct JsonSummary {
    hydrants: usize,
    pass: usize,
    fail: usize,
    error: usize,
    service_exceptions: usize,
    partial: bool,
}

#[derive(Serialize)]
struct JsonHydrant {
    hydrant: String,
    junction: String,
    zone: Option<String>,
    requirement: String,
    required_flow: f64,
    available_flow: Option<f64>,
    static_pressure: Option<f64>,
    residual_pressure: Option<f64>,
    min_pressure: Option<f64>,
    min_pressure_junction: Option<String>,
    critical_junction: Option<String>,
    critical_pipe: Option<String>,
    limited_by: Option<&'static str>,
    result: &'static str,
    notes: Vec<String>,
    /// Failing hydrants: supply-path pipes by share of head loss (unit head loss per 1000
    /// length units).
    supply_paths: Vec<JsonShare>,
}

#[derive(Serialize)]
struct JsonShare {
    pipe: String,
    share: f64,
    unit_headloss: f64,
    velocity: f64,
}

#[derive(Serialize)]
struct JsonWeakMain {
    pipe: String,
    hydrants_limited: usize,
    worst_share: f64,
    worst_unit_headloss: f64,
    max_velocity: f64,
    reasons: Vec<String>,
}

#[derive(Serialize)]
struct JsonService {
    junction: String,
    zone: Option<String>,
    pressure_peak_hour: Option<f64>,
    pressure_low_demand: Option<f64>,
    result: &'static str,
}

#[derive(Serialize)]
struct JsonStats {
    solves: u64,
    factorizations: u64,
    factorizations_per_hydrant_mean: f64,
    factorizations_per_hydrant_max: u32,
}
