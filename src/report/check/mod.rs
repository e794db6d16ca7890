//! Reports of the fire-flow and service-pressure check (`firemain check`): terminal summary and
//! compliance table, `fireflow.csv`, `service.csv`, `weak_mains.csv`, `report.md` and
//! `report.json`.
//!
//! This file holds the data and what every format shares: the wording of notes and reasons and
//! the rows of the compliance and weak-mains tables. Each format has its own file: `terminal`,
//! `csv`, `document` (the report's sections in order, drawn as report.md) and `json`. Their
//! helpers here are private to this module, which its files can reach.

mod csv;
mod document;
mod html;
mod json;
mod sheets;
mod terminal;

pub use json::JSON_SCHEMA_VERSION;

use super::table::{Align, Table};
use super::{num, words, Out, OutputFile, OutputSet, ReportError};
use crate::criteria::{Criteria, Scope};
use crate::fireflow::{HydrantNote, HydrantResult, Outcome, SupplyCurve, SweepStats};
use crate::hydraulics::LinkState;
use crate::model::project::Project;
use crate::model::{Diagnostic, LinkKind, Network};
use crate::service::{ServiceReport, ServiceResult};
use crate::units::Quantity;
use crate::weakmains::{WeakMain, WeakReason};

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
    /// How the model compares with field flow tests (`--tests`), when given.
    pub field_tests: Option<&'a FieldTestSummary>,
    /// The title block (`--project`), when given.
    pub project: Option<&'a Project>,
    /// Modelled supply curves of the hydrants that get a sheet in report.html.
    pub curves: &'a [SupplyCurve],
}

/// How the model compares with the field flow tests given to `check --tests` (SI): the line of
/// the report's facts that makes a fire-flow table defensible.
#[derive(Clone, Debug)]
pub struct FieldTestSummary {
    /// The tests file, as given.
    pub file: String,
    pub tests: usize,
    /// RMS of modelled minus measured pressures over the tests, kPa.
    pub rms_static_kpa: f64,
    pub rms_residual_kpa: f64,
    /// The test with the largest residual misfit: its id and modelled minus measured, kPa.
    pub worst: Option<(String, f64)>,
    /// Each test's readings, drawn on the sheet of its residual hydrant.
    pub curves: Vec<FieldCurve>,
}

/// A field test's readings at its residual hydrant (SI): the field supply curve.
#[derive(Clone, Debug)]
pub struct FieldCurve {
    pub test: String,
    /// Index into `Network::hydrants`: the residual hydrant.
    pub hydrant: usize,
    pub static_kpa: f64,
    pub residual_kpa: f64,
    /// Total flow of the test.
    pub flow_m3s: f64,
    /// The flow projected to the criteria's floor (NFPA 291 §4.13), if the test had a drop.
    pub projected_m3s: Option<f64>,
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
        let link = |i: usize| words::link_label(net, i);
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
            } => format!(
                "{} {} at about {}",
                link(*i),
                state_change_words(*from, *to),
                flow(*at_flow_m3s)
            ),
            HydrantNote::SolveFailedAbove { flow_m3s, reason } => format!(
                "no hydraulic solution at {} ({reason}); the largest verified flow is reported",
                flow(*flow_m3s)
            ),
            HydrantNote::ResidualUnavailable { reason } => {
                format!("no hydraulic solution at the required flow: {reason}")
            }
            HydrantNote::DeliveredUnavailable { reason } => format!(
                "no pressure-dependent solution at the required flow: {reason}"
            ),
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
            HydrantNote::OtherStatesAbove { flow_m3s, links } => format!(
                "at {} {} settle in other states and the constraints fail: the limit is a change of state, and flows in between may settle either way",
                flow(*flow_m3s),
                links.iter().map(|&i| link(i)).collect::<Vec<_>>().join(", ")
            ),
            HydrantNote::Error { reason } => reason.clone(),
        }
    }

    /// The control notes of the service conditions, each after its condition's name.
    fn service_notes(&self) -> Vec<String> {
        self.service
            .notes
            .iter()
            .map(|n| {
                format!(
                    "{}: {}",
                    n.condition.name(),
                    words::control_note(self.network, &n.note)
                )
            })
            .collect()
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

    /// The compliance table of `results`, in the order given (terminal and report.md).
    fn compliance_table<'r>(&self, results: impl IntoIterator<Item = &'r HydrantResult>) -> Table {
        let mut table = Table::new(self.table_header())
            .with_rows(results.into_iter().map(|r| self.table_row(r)));
        // Flows and pressures (required to residual) read right-aligned.
        table.align = (0..12)
            .map(|c| {
                if (4..=8).contains(&c) {
                    Align::Right
                } else {
                    Align::Left
                }
            })
            .collect();
        table
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

    /// The top weak mains (terminal and report.md).
    fn weak_mains_table(&self) -> Table {
        Table::new(self.weak_main_header()).with_rows(
            self.weak_mains
                .iter()
                .take(WEAK_MAINS_SHOWN)
                .map(|w| self.weak_main_row(w)),
        )
    }

    /// Whether the check has findings: a hydrant that does not pass, or a service-pressure
    /// exception. `firemain check` exits with its findings status when this is true.
    pub fn has_findings(&self) -> bool {
        self.results.iter().any(|r| r.outcome != Outcome::Pass)
            || self.service.exceptions().next().is_some()
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
                name: "report.html".into(),
                bytes: self.html().into_bytes(),
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

/// What a pump or valve did when its state changed from `from` to `to`, in plain words.
fn state_change_words(from: LinkState, to: LinkState) -> String {
    match (from, to) {
        (LinkState::Regulating, LinkState::Open) => "went wide open".to_string(),
        (_, LinkState::Closed) => "closed".to_string(),
        (LinkState::Running, LinkState::NoFlow) => {
            "stopped delivering (head asked above its shutoff head)".to_string()
        }
        (LinkState::NoFlow, LinkState::Running) => "started delivering".to_string(),
        (LinkState::Closed, _) => "opened".to_string(),
        (a, b) => format!("changed from {} to {}", a.name(), b.name()),
    }
}
