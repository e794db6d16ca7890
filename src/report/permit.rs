//! Reports of `firemain permit`: the terminal table, `permit.csv`, `report.md`, `report.html`
//! and `report.json`, each building with how its needed flow was reached, the hydrants that
//! share it, and the storage that feeds it.

use serde::Serialize;

use super::html::Html;
use super::table::{Align, Document, Markdown, Markup, Section, Table, Terminal, Text};
use super::{
    csv_bytes, date_of, input_warnings_section, num, project_section, with_code_spans,
    JsonInputWarning, Out, OutputFile, OutputSet, ReportError, CAUTIONS,
};
use crate::criteria::{Criteria, NeededFlowSettings};
use crate::fireflow::Split;
use crate::model::buildings::Buildings;
use crate::model::project::Project;
use crate::model::{Diagnostic, Network};
use crate::permit::{BuildingResult, Verdict};
use crate::units::{Quantity, UnitSystem};

/// US gallons per cubic metre (1 gal = 3.785411784 L, exact).
const GAL_PER_M3: f64 = 1000.0 / 3.785411784;

/// Everything a permit report shows.
pub struct PermitReport<'a> {
    pub network: &'a Network,
    pub criteria: &'a Criteria,
    pub settings: &'a NeededFlowSettings,
    pub buildings: &'a Buildings,
    pub results: &'a [BuildingResult],
    pub split: Split,
    pub project: Option<&'a Project>,
    pub input_warnings: &'a [Diagnostic],
    pub generated: String,
    pub run_id: String,
    pub version: &'a str,
}

impl PermitReport<'_> {
    fn out(&self) -> Out {
        Out::new(self.network.units)
    }

    fn volume(&self, m3: f64) -> String {
        match self.network.units {
            UnitSystem::Us => format!("{} gal", num(m3 * GAL_PER_M3, 0)),
            UnitSystem::Si => format!("{} m³", num(m3, 0)),
        }
    }

    fn hours(s: f64) -> String {
        num(s / 3600.0, 2)
    }

    fn count(&self, v: Verdict) -> usize {
        self.results.iter().filter(|r| r.verdict == v).count()
    }

    /// Whether a building fails or has no verdict: the command's findings status.
    pub fn has_findings(&self) -> bool {
        self.results.iter().any(|r| r.verdict != Verdict::Pass)
    }

    fn hydrant_ids(&self, r: &BuildingResult) -> String {
        r.hydrants
            .iter()
            .map(|h| self.network.hydrants[h.hydrant].id.as_str())
            .collect::<Vec<_>>()
            .join(" ")
    }

    fn storage_word(r: &BuildingResult) -> &'static str {
        match (r.storage.lasts, r.storage.drawn_down_passes) {
            (Some(false), _) => "runs short",
            (Some(true), Some(false)) => "lasts; drawn down fails",
            (Some(true), _) => "lasts",
            (None, _) if !r.storage.reservoirs.is_empty() && r.storage.tanks.is_empty() => {
                "fixed-grade source"
            }
            (None, _) => "not checked",
        }
    }

    /// The summary table's rows (terminal and report.md).
    fn summary_table(&self) -> Table {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut t = Table::new(vec![
            "building".into(),
            format!("needed ({f})"),
            "duration (h)".into(),
            "hydrants".into(),
            format!("available ({f})"),
            format!("margin ({f})"),
            "storage".into(),
            "result".into(),
            "limited by".into(),
        ]);
        for r in self.results {
            let b = &self.buildings.buildings[r.building];
            let needed = r.needed.as_ref();
            t.push(vec![
                b.id.clone(),
                needed.map(|n| o.flow_text(n.flow_m3s)).unwrap_or_default(),
                needed
                    .map(|n| Self::hours(n.duration_s))
                    .unwrap_or_default(),
                self.hydrant_ids(r),
                r.group
                    .as_ref()
                    .and_then(|g| g.total_m3s)
                    .map(|q| o.flow_text_down(q))
                    .unwrap_or_default(),
                r.margin_m3s()
                    .map(|m| o.flow_text_down(m))
                    .unwrap_or_default(),
                if r.at_needed.is_some() {
                    Self::storage_word(r).to_string()
                } else {
                    String::new()
                },
                r.verdict.name().into(),
                r.limit.map(|l| l.name()).unwrap_or("").into(),
            ]);
        }
        t.align = vec![
            Align::Left,
            Align::Right,
            Align::Right,
            Align::Left,
            Align::Right,
            Align::Right,
        ];
        t
    }

    /// The terminal: a line of counts, the summary table, and how each needed flow was reached,
    /// one checkable line a step.
    pub fn terminal(&self) -> String {
        let mut steps = Section::titled("How each needed fire flow was reached");
        for r in self.results {
            let b = &self.buildings.buildings[r.building];
            if let Some(n) = &r.needed {
                steps = steps
                    .paragraph(format!("{}:", b.id))
                    .list(n.steps.iter().map(|st| Text::from(st.text.as_str())));
            }
        }
        format!(
            "{}\n{}{}",
            self.counts_line(),
            Terminal.section(
                &Section::titled("Buildings (needed fire flow against the hydrants within reach, flowing together)")
                    .table(self.summary_table()),
                1
            ),
            Terminal.section(&steps, 1)
        )
    }

    fn counts_line(&self) -> String {
        format!(
            "{} building(s): {} pass, {} fail, {} error (method: {})",
            self.results.len(),
            self.count(Verdict::Pass),
            self.count(Verdict::Fail),
            self.count(Verdict::Error),
            self.settings.method.name
        )
    }

    /// The report's sections in order (report.md and report.html).
    pub fn document(&self) -> Document {
        let mut sections: Vec<Section> = self.project.map(project_section).into_iter().collect();
        sections.push(self.facts_section());
        sections.push(self.cautions_section());
        sections.push(input_warnings_section(self.input_warnings));
        sections.push(
            Section::titled("Summary")
                .paragraph(self.counts_line())
                .table(self.summary_table()),
        );
        for r in self.results {
            sections.push(self.building_section(r));
        }
        Document {
            title: format!("Fire-flow permit screening: {}", self.network.name),
            sections,
        }
    }

    fn facts_section(&self) -> Section {
        let o = self.out();
        let m = &self.settings.method;
        let rows = [
            ("Network", self.network.name.clone()),
            ("Criteria", format!("{} ({})", self.criteria.name, self.criteria.reference)),
            (
                "Needed-flow method",
                format!("{}: {}, {}, {}", m.name, m.document, m.edition, m.section),
            ),
            (
                "Hydrants within reach",
                format!(
                    "up to {} hydrant(s) whose hose lay (straight-line distance x {}) is at most {} {}, nearest first, flowing together: {}",
                    self.settings.max_hydrants,
                    num(self.settings.hose_lay_factor, 2),
                    num(o.length(self.settings.max_hose_lay_m), 0),
                    o.sym(Quantity::Length),
                    match self.split {
                        Split::EqualResidual => "split so that every flowing hydrant has the same residual pressure",
                        Split::Even => "each hydrant the same flow (--split even)",
                    }
                ),
            ),
            (
                "Condition",
                format!(
                    "max-day demand (x{} average day) plus the needed flow; residual floor {} {} at every constrained junction",
                    self.network.demand_factors.max_day,
                    num(o.pressure(self.criteria.residual_floor_kpa), 1),
                    o.sym(Quantity::Pressure)
                ),
            ),
            ("Buildings file", self.buildings.file.clone()),
            ("Date", date_of(&self.generated).to_string()),
            ("Run id", self.run_id.clone()),
            ("Produced by", format!("firemain {}", self.version)),
        ];
        Section::titled("Analysis").table(Table::facts(rows))
    }

    fn cautions_section(&self) -> Section {
        let mut items: Vec<Text> = vec![
            "The local fire code official decides which method and which edition of it apply, and may amend them; the needed flows here follow the method the criteria name.".into(),
        ];
        if !self.settings.method.complete {
            items.push(Text::from(format!(
                "The method file {} is incomplete or holds figures from memory (marked unverified below): confirm every figure against a licensed copy of the document.",
                self.settings.method.file
            )));
        }
        items.push("Storage is screened quasi-steadily: each tank feeding the fire at its outflow for the whole duration, then the needed flow again with the tanks at their end levels; pumps, refill and operator action are not modelled.".into());
        items.extend(CAUTIONS.iter().map(|&c| Text::from(c)));
        Section::titled("Cautions and assumptions").list(items)
    }

    fn building_section(&self, r: &BuildingResult) -> Section {
        let b = &self.buildings.buildings[r.building];
        let title = if b.name.is_empty() {
            format!("Building {}: {}", b.id, r.verdict.name())
        } else {
            format!("Building {} ({}): {}", b.id, b.name, r.verdict.name())
        };
        let mut s = Section::titled(title);
        if let Some(n) = &r.needed {
            s = s
                .paragraph(
                    Text::new()
                        .strong("Needed fire flow")
                        .plain(format!(" ({}): how it was reached", n.method)),
                )
                .list(
                    n.steps
                        .iter()
                        .map(|st| with_code_spans(Text::new(), &st.text)),
                );
            if !n.all_verified() {
                s = s.paragraph("Some figures of the method are unverified (from memory): confirm them against the document the official adopts.");
            }
        }
        if !r.hydrants.is_empty() {
            s = s.table(self.hydrants_table(r));
        }
        if r.at_needed.is_some() {
            s = s.table(self.storage_table(r));
        }
        if !r.notes.is_empty() {
            s = s.list(r.notes.iter().map(|n| Text::from(n.as_str())));
        }
        s
    }

    fn hydrants_table(&self, r: &BuildingResult) -> Table {
        let o = self.out();
        let (f, p, l) = (
            o.sym(Quantity::Flow),
            o.sym(Quantity::Pressure),
            o.sym(Quantity::Length),
        );
        let mut t = Table::new(vec![
            "hydrant".into(),
            format!("hose lay ({l})"),
            format!("static ({p})"),
            format!("share of the available flow ({f})"),
            format!("residual at the available flow ({p})"),
            format!("residual at the needed flow ({p})"),
        ]);
        for (k, h) in r.hydrants.iter().enumerate() {
            let g = r.group.as_ref();
            let cell = |v: Option<f64>, d: usize| v.map(|v| num(v, d)).unwrap_or_default();
            t.push(vec![
                self.network.hydrants[h.hydrant].id.clone(),
                num(o.length(h.hose_lay_m), 0),
                cell(
                    g.and_then(|g| g.static_kpa.get(k)).map(|&v| o.pressure(v)),
                    1,
                ),
                g.filter(|g| g.total_m3s.is_some())
                    .and_then(|g| g.shares_m3s.get(k))
                    .map(|&q| o.flow_text_down(q))
                    .unwrap_or_default(),
                cell(
                    g.filter(|g| g.total_m3s.is_some())
                        .and_then(|g| g.residual_kpa.get(k))
                        .map(|&v| o.pressure(v)),
                    1,
                ),
                cell(
                    r.at_needed
                        .as_ref()
                        .and_then(|a| a.residual_kpa.get(k))
                        .map(|&v| o.pressure(v)),
                    1,
                ),
            ]);
        }
        t.align = vec![
            Align::Left,
            Align::Right,
            Align::Right,
            Align::Right,
            Align::Right,
            Align::Right,
        ];
        t
    }

    fn storage_table(&self, r: &BuildingResult) -> Table {
        let o = self.out();
        let net = self.network;
        let f = o.sym(Quantity::Flow);
        let mut t = Table::new(vec![
            "source feeding the fire".into(),
            format!("outflow ({f})"),
            "usable storage".into(),
            "lasts (h)".into(),
        ]);
        for u in &r.storage.tanks {
            t.push(vec![
                format!("tank {}", net.nodes[u.tank].id),
                o.flow_text(u.outflow_m3s),
                u.usable_m3
                    .map(|v| self.volume(v))
                    .unwrap_or_else(|| "no geometry".into()),
                u.lasts_s.map(Self::hours).unwrap_or_default(),
            ]);
        }
        for &i in &r.storage.reservoirs {
            t.push(vec![
                format!("reservoir {} (fixed grade)", net.nodes[i].id),
                String::new(),
                "unlimited in the model".into(),
                String::new(),
            ]);
        }
        if let (Some(n), Some((p, j))) = (&r.needed, r.storage.drawn_down_lowest) {
            t.push(vec![
                format!(
                    "tanks drawn down after {} h: lowest pressure {} {} at {}",
                    Self::hours(n.duration_s),
                    num(o.pressure(p), 1),
                    o.sym(Quantity::Pressure),
                    net.nodes[j].id
                ),
                String::new(),
                String::new(),
                String::new(),
            ]);
        }
        t.align = vec![Align::Left, Align::Right, Align::Right, Align::Right];
        t
    }

    fn csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (f, l) = (o.sfx(Quantity::Flow), o.sfx(Quantity::Length));
        let header: Vec<String> = vec![
            "building".into(),
            "name".into(),
            "method".into(),
            format!("needed_flow_{f}"),
            "duration_h".into(),
            "hydrants".into(),
            format!("hose_lays_{l}"),
            format!("combined_available_{f}"),
            format!("shares_{f}"),
            format!("margin_{f}"),
            "storage".into(),
            "result".into(),
            "limited_by".into(),
            "notes".into(),
        ];
        let rows: Vec<Vec<String>> = self
            .results
            .iter()
            .map(|r| {
                let b = &self.buildings.buildings[r.building];
                let n = r.needed.as_ref();
                let total = r.group.as_ref().and_then(|g| g.total_m3s);
                vec![
                    b.id.clone(),
                    b.name.clone(),
                    n.map(|n| n.method.clone()).unwrap_or_default(),
                    n.map(|n| o.fmt_precise(Quantity::Flow, n.flow_m3s))
                        .unwrap_or_default(),
                    n.map(|n| Self::hours(n.duration_s)).unwrap_or_default(),
                    self.hydrant_ids(r),
                    r.hydrants
                        .iter()
                        .map(|h| num(o.length(h.hose_lay_m), 1))
                        .collect::<Vec<_>>()
                        .join(" "),
                    total.map(|q| o.flow_text_down(q)).unwrap_or_default(),
                    r.group
                        .as_ref()
                        .filter(|_| total.is_some())
                        .map(|g| {
                            g.shares_m3s
                                .iter()
                                .map(|&q| o.flow_text_down(q))
                                .collect::<Vec<_>>()
                                .join(" ")
                        })
                        .unwrap_or_default(),
                    r.margin_m3s()
                        .map(|m| o.flow_text_down(m))
                        .unwrap_or_default(),
                    if r.at_needed.is_some() {
                        Self::storage_word(r).into()
                    } else {
                        String::new()
                    },
                    r.verdict.name().into(),
                    r.limit.map(|l| l.name()).unwrap_or("").into(),
                    r.notes.join("; "),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    fn json(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let buildings: Vec<JsonBuilding> = self
            .results
            .iter()
            .map(|r| {
                let b = &self.buildings.buildings[r.building];
                JsonBuilding {
                    id: b.id.clone(),
                    needed_flow: r.needed.as_ref().map(|n| o.flow(n.flow_m3s)),
                    duration_h: r.needed.as_ref().map(|n| n.duration_s / 3600.0),
                    method: r.needed.as_ref().map(|n| n.method.clone()),
                    steps: r
                        .needed
                        .as_ref()
                        .map(|n| n.steps.iter().map(|s| s.text.clone()).collect())
                        .unwrap_or_default(),
                    hydrants: r
                        .hydrants
                        .iter()
                        .map(|h| self.network.hydrants[h.hydrant].id.clone())
                        .collect(),
                    combined_available: r
                        .group
                        .as_ref()
                        .and_then(|g| g.total_m3s)
                        .map(|q| o.flow(q)),
                    storage: r
                        .at_needed
                        .as_ref()
                        .map(|_| Self::storage_word(r).to_string()),
                    tanks: r
                        .storage
                        .tanks
                        .iter()
                        .map(|t| JsonTank {
                            id: self.network.nodes[t.tank].id.clone(),
                            outflow: o.flow(t.outflow_m3s),
                            lasts_h: t.lasts_s.map(|s| s / 3600.0),
                        })
                        .collect(),
                    result: r.verdict.name(),
                    limited_by: r.limit.map(|l| l.name()),
                    notes: r.notes.clone(),
                }
            })
            .collect();
        let doc = JsonPermit {
            run_id: &self.run_id,
            generated: &self.generated,
            generator: format!("firemain {}", self.version),
            units: JsonUnits {
                flow: o.sym(Quantity::Flow),
                length: o.sym(Quantity::Length),
                pressure: o.sym(Quantity::Pressure),
            },
            network: &self.network.name,
            method: &self.settings.method.name,
            buildings,
            input_warnings: self
                .input_warnings
                .iter()
                .map(JsonInputWarning::from)
                .collect(),
        };
        let mut bytes = serde_json::to_vec_pretty(&doc).map_err(|e| ReportError::Render {
            what: "report.json".into(),
            message: e.to_string(),
        })?;
        bytes.push(b'\n');
        Ok(bytes)
    }

    /// All files of the run, as one set.
    pub fn output_set(&self) -> Result<OutputSet, ReportError> {
        let doc = self.document();
        Ok(OutputSet {
            command: "permit",
            run_id: self.run_id.clone(),
            generated: self.generated.clone(),
            generator: format!("firemain {}", self.version),
            files: vec![
                OutputFile {
                    name: "permit.csv".into(),
                    bytes: self.csv()?,
                },
                OutputFile {
                    name: "report.md".into(),
                    bytes: Markdown.document(&doc).into_bytes(),
                },
                OutputFile {
                    name: "report.html".into(),
                    bytes: Html.document(&doc).into_bytes(),
                },
                OutputFile {
                    name: "report.json".into(),
                    bytes: self.json()?,
                },
            ],
        })
    }
}

#[derive(Serialize)]
struct JsonUnits {
    flow: &'static str,
    length: &'static str,
    pressure: &'static str,
}

#[derive(Serialize)]
struct JsonBuilding {
    id: String,
    needed_flow: Option<f64>,
    duration_h: Option<f64>,
    method: Option<String>,
    steps: Vec<String>,
    hydrants: Vec<String>,
    combined_available: Option<f64>,
    storage: Option<String>,
    /// Tanks feeding the fire at the needed flow: outflow and hours to their lowest level.
    tanks: Vec<JsonTank>,
    result: &'static str,
    limited_by: Option<&'static str>,
    notes: Vec<String>,
}

#[derive(Serialize)]
struct JsonTank {
    id: String,
    outflow: f64,
    lasts_h: Option<f64>,
}

#[derive(Serialize)]
struct JsonPermit<'a> {
    run_id: &'a str,
    generated: &'a str,
    generator: String,
    units: JsonUnits,
    network: &'a str,
    method: &'a str,
    buildings: Vec<JsonBuilding>,
    input_warnings: Vec<JsonInputWarning>,
}
