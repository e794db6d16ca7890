//! The check report as a document: its sections in the order they are read, from which
//! `report.md` is drawn (and any further markup format would be).

use std::collections::BTreeMap;

use super::{CheckReport, SUPPLY_PIPES_SHOWN, WEAK_MAINS_SHOWN};
use crate::fireflow::{HydrantResult, LimitedBy, Outcome};
use crate::report::table::{Document, Markdown, Markup, Section, Table, Text};
use crate::report::{date_of, input_warnings_section, num, CAUTIONS};
use crate::units::Quantity;

impl CheckReport<'_> {
    /// `report.md`: a document to attach to a permit application.
    pub fn markdown(&self) -> String {
        Markdown.document(&self.document())
    }

    /// The report's sections, in order: the one place that order is declared.
    pub fn document(&self) -> Document {
        // The title block first; then what the figures rest on (cautions, assumptions, input
        // warnings) before the first figure; the legend of the compliance table right before it.
        let mut sections: Vec<Section> = self.title_block_section().into_iter().collect();
        sections.extend([
            self.facts_section(),
            self.cautions_section(),
            input_warnings_section(self.input_warnings),
            self.summary_section(),
            self.legend_section(),
            self.compliance_section(),
        ]);
        sections.extend(self.delivered_section());
        sections.extend(self.weak_mains_section());
        sections.push(self.service_section());
        sections.push(self.units_section());
        Document {
            title: format!("Fire-flow screening report: {}", self.network.name),
            sections,
        }
    }

    /// The title block of a permit package (`--project`): who, where, what reference, prepared
    /// and checked by whom, which revision; its free notes below it.
    fn title_block_section(&self) -> Option<Section> {
        self.project.map(crate::report::project_section)
    }

    /// The untitled table of what was analysed, under what assumptions, when and by what.
    fn facts_section(&self) -> Section {
        let net = self.network;
        let o = self.out();
        let rows = [
            ("Network", net.name.clone()),
            ("Criteria", self.criteria.name.clone()),
            ("Criteria reference", self.criteria.reference.clone()),
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
            ("Fire-flow condition", self.condition_line()),
            (
                "Source grades used",
                net.sources()
                    .iter()
                    .map(|n| {
                        format!(
                            "{} {} at {} {}",
                            n.kind.name(),
                            n.id,
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
            ("Field flow tests", self.field_tests_line()),
            ("Date", date_of(&self.generated).to_string()),
            ("Run id", self.run_id.clone()),
            ("Produced by", format!("firemain {}", self.version)),
        ];
        Section::titled("Analysis").table(Table::facts(rows))
    }

    /// The cautions, and the assumptions of the analysis in plain words.
    fn cautions_section(&self) -> Section {
        let net = self.network;
        let mut assumptions = vec![
            "Steady state: the network is solved at one instant; tank levels do not fall over the duration of a fire.".to_string(),
            "Demand-driven: every junction receives its demand whatever its pressure, so a pressure computed below zero means the mains cannot carry that flow, not that less water is drawn.".to_string(),
            format!(
                "One hydrant flows at a time, on top of max-day demand ({} x average day); fires at two places at once are not analysed.",
                net.demand_factors.max_day
            ),
            "Sources (reservoirs and tanks) are held at the fixed grades listed above.".to_string(),
        ];
        assumptions.extend(crate::report::words::hydrants_without_leads(net));
        Section::titled("Cautions and assumptions")
            .paragraph("Assumptions of the analysis:")
            .list(assumptions.into_iter().map(Text::from))
            .paragraph("Cautions:")
            .list(CAUTIONS.iter().map(|&c| c.into()))
    }

    /// The legend of the compliance table: every column, in the network's units, and every
    /// value the "requirement", "limited by" and "result" columns can take.
    fn legend_section(&self) -> Section {
        let o = self.out();
        let (f, p) = (o.sym(Quantity::Flow), o.sym(Quantity::Pressure));
        let floor = format!(
            "{} {p}",
            num(o.pressure(self.criteria.residual_floor_kpa), 1)
        );
        let velocity = match self.criteria.max_velocity_m_per_s {
            Some(v) => format!(
                " and every open pipe within {} {}",
                num(o.velocity(v), 1),
                o.sym(Quantity::Velocity)
            ),
            None => String::new(),
        };
        // Hydrants with a lead are judged and reported after its loss (docs/fire-flow-method.md,
        // "Laterals"); the wording says so only where the network has one.
        let lead = if self.network.hydrants.iter().any(|h| h.lateral.is_some()) {
            ", less the loss in the hydrant's lead where hydrants.csv gives one (the hydrant itself is then held to the floor)"
        } else {
            ""
        };
        let meanings = [
            "The hydrant's id (hydrants.csv).".to_string(),
            "The pressure zone of the hydrant's junction (empty when it has none).".to_string(),
            "The junction the hydrant is on, where its fire flow is drawn.".to_string(),
            "Where the required flow comes from: a hydrant class name of the criteria; \"own value\", the hydrant's own required flow in hydrants.csv; \"default\", the criteria's default required flow.".to_string(),
            format!("The fire flow the hydrant must deliver, in {f}."),
            format!(
                "The largest fire flow, in {f}, that keeps every constrained junction (see the fire-flow condition above) at or above the residual floor of {floor}{velocity}, verified by an ordinary solve at that flow and rounded down; at most the search cap ({} {f}).",
                o.flow_text(self.criteria.search_cap_m3s)
            ),
            format!("Available minus required, in {f}; negative when the hydrant fails."),
            format!("Pressure at the hydrant's junction, in {p}, with max-day demand and no fire flow."),
            format!("Pressure at the hydrant's junction, in {p}, while the required flow is drawn (not the available flow){lead}; \"below 0\" when the mains cannot carry the required flow."),
            format!(
                "What stops the available flow: \"{}\", the hydrant's own junction reaches the floor; \"{}\", another constrained junction reaches the floor first; \"{}\", a pipe reaches the velocity limit; \"{}\", the search cap is reached with every constraint still met; \"{}\", there is no hydraulic solution at a larger flow (the notes say why). Empty for an error.",
                LimitedBy::HydrantPressure.name(),
                LimitedBy::SystemPressure.name(),
                LimitedBy::Velocity.name(),
                LimitedBy::Cap.name(),
                LimitedBy::NoSolution.name()
            ),
            "The junction (pressure) or pipe (velocity) that binds at the available flow; empty when none binds (at the cap, say).".to_string(),
            format!(
                "\"{}\": available at least required; \"{}\": available below required (including a floor already violated without fire flow, reported as 0 available); \"{}\": no verified answer for this hydrant (the notes say why).",
                Outcome::Pass.name(),
                Outcome::Fail.name(),
                Outcome::Error.name()
            ),
        ];
        let header = self.table_header();
        debug_assert_eq!(header.len(), meanings.len(), "one meaning per column");
        let rows = header
            .into_iter()
            .zip(meanings)
            .map(|(column, meaning)| vec![column, meaning]);
        Section::titled("Columns of the compliance table")
            .table(Table::new(vec!["column".into(), "meaning".into()]).with_rows(rows))
    }

    /// The model against the field, in the network's units; says so when nothing checked it.
    fn field_tests_line(&self) -> String {
        let o = self.out();
        let p = o.sym(Quantity::Pressure);
        match self.field_tests {
            None => "none given (option --tests): the model's roughness, valve positions and source levels are unchecked against the field".to_string(),
            Some(f) => {
                let worst = f
                    .worst
                    .as_ref()
                    .map(|(id, d)| {
                        let sign = if *d > 0.0 { "+" } else { "" };
                        format!(
                            "; worst {id}, residual {sign}{} {p} (model minus field)",
                            num(o.pressure(*d), 1)
                        )
                    })
                    .unwrap_or_default();
                format!(
                    "{} test(s) from {}: RMS misfit {} {p} residual, {} {p} static{worst}",
                    f.tests,
                    f.file,
                    num(o.pressure(f.rms_residual_kpa), 1),
                    num(o.pressure(f.rms_static_kpa), 1),
                )
            }
        }
    }

    fn summary_section(&self) -> Section {
        let o = self.out();
        Section::titled("Summary").paragraph(
            Text::new()
                .plain(format!(
                    "{} hydrants analysed{}: ",
                    self.results.len(),
                    if self.partial { " (a selection)" } else { "" }
                ))
                .strong(format!("{} pass", self.count(Outcome::Pass)))
                .plain(", ")
                .strong(format!("{} fail", self.count(Outcome::Fail)))
                .plain(format!(
                    ", {} error. Service pressures: {} of {} junctions outside {}-{} {}.",
                    self.count(Outcome::Error),
                    self.service.exceptions().count(),
                    self.service.rows.len(),
                    num(o.pressure(self.criteria.service_min_kpa), 0),
                    num(o.pressure(self.criteria.service_max_kpa), 0),
                    o.sym(Quantity::Pressure)
                )),
        )
    }

    /// The compliance table by zone, each zone's hydrants by margin, then the hydrants' notes.
    fn compliance_section(&self) -> Section {
        let mut section = Section::titled("Compliance table").paragraph(
            "Available fire flow at each hydrant, sorted by margin (available minus required) within each zone; the weakest first.",
        );
        let mut zones: BTreeMap<String, Vec<&HydrantResult>> = BTreeMap::new();
        for r in self.by_margin() {
            zones.entry(self.zone(r)).or_default().push(r);
        }
        for (zone, rows) in zones {
            let table = self.compliance_table(rows);
            section = if zone.is_empty() && self.network.zones.is_empty() {
                section.table(table)
            } else if zone.is_empty() {
                section.section(Section::titled("Hydrants without a zone").table(table))
            } else {
                section.section(Section::titled(format!("Zone {zone}")).table(table))
            };
        }
        let noted: Vec<Text> = self
            .results
            .iter()
            .filter(|r| !r.notes.is_empty())
            .map(|r| {
                Text::new()
                    .strong(self.hydrant_id(r))
                    .plain(": ")
                    .plain(self.notes_text(r))
            })
            .collect();
        if !noted.is_empty() {
            section = section.section(Section::titled("Notes").list(noted));
        }
        section
    }

    /// With `[fire] pressure_dependent`: per failing hydrant, what the system delivers when
    /// the required flow is asked (pressure-dependent), beside the demand-driven residual.
    fn delivered_section(&self) -> Option<Section> {
        let pd = self.criteria.pressure_dependent?;
        let o = self.out();
        let psym = o.sym(Quantity::Pressure);
        let items: Vec<Text> = self
            .by_margin()
            .into_iter()
            .filter_map(|r| {
                let d = r.delivered.as_ref()?;
                let (volume, unit) = o.hourly_volume(d.customer_shortfall_m3s);
                let unit = if unit == "m3" { "m³" } else { unit };
                let lowest = d
                    .min_customer_kpa
                    .map(|(j, p)| {
                        format!(
                            "; lowest customer pressure {} {psym} at {}",
                            o.fmt(Quantity::Pressure, p),
                            self.network.nodes[j].id
                        )
                    })
                    .unwrap_or_default();
                Some(Text::new().strong(self.hydrant_id(r)).plain(format!(
                    ": asked {} {f}, delivers {} {f} at {} {psym}; {} lose service, {volume} {unit} short per hour{lowest}",
                    o.flow_text(r.required_m3s),
                    o.flow_text_down(d.fire_flow_m3s),
                    o.fmt(Quantity::Pressure, d.hydrant_kpa),
                    match d.short.len() {
                        1 => "1 junction".to_string(),
                        n => format!("{n} junctions"),
                    },
                    f = o.sym(Quantity::Flow),
                )))
            })
            .collect();
        if items.is_empty() {
            return None;
        }
        Some(
            Section::titled("Failing hydrants as the system would deliver")
                .paragraph(format!(
                    "Pressure-dependent: the state at each failing hydrant's required flow with customers' demands delivered in part between {} and {} {psym} (Wagner, Shamir & Marks, 1988) and the fire demand in part between 0 and the residual floor; a junction loses service below 99 % of its demand. The available flow, the residual and the lowest pressures of the compliance table are demand-driven.",
                    o.fmt(Quantity::Pressure, pd.minimum_kpa),
                    o.fmt(Quantity::Pressure, pd.service_kpa),
                ))
                .list(items),
        )
    }

    /// The top weak mains and, per failing hydrant, the pipes with the largest shares of its
    /// head loss; `None` when no main limits a failing hydrant.
    fn weak_mains_section(&self) -> Option<Section> {
        if self.weak_mains.is_empty() {
            return None;
        }
        let o = self.out();
        let l = o.sym(Quantity::Length);
        let pdd = self.criteria.pressure_dependent.is_some();
        // With pressure-dependent demands, the physical state's shares (see weakmains).
        fn shares(r: &HydrantResult) -> &[crate::fireflow::supply_paths::PipeShare] {
            r.delivered
                .as_ref()
                .map_or(&r.supply_paths, |d| &d.supply_paths)
        }
        let paths = self
            .by_margin()
            .into_iter()
            .filter(|r| !shares(r).is_empty())
            .map(|r| {
                let pipes: Vec<String> = shares(r)
                    .iter()
                    .take(SUPPLY_PIPES_SHOWN)
                    .map(|p| {
                        format!(
                            "{} ({}%, {}, {})",
                            self.network.links[p.link].id,
                            num(100.0 * p.share, 0),
                            num(p.unit_headloss, 1),
                            num(o.velocity(p.velocity_m_per_s), 1)
                        )
                    })
                    .collect();
                let at = match &r.delivered {
                    Some(_) => format!("supply of {}", self.network.nodes[r.junction].id),
                    None => format!(
                        "lowest pressure at {}",
                        self.node_id(r.min_pressure_junction)
                    ),
                };
                Text::new()
                    .strong(self.hydrant_id(r))
                    .plain(format!(" ({at}): {}", pipes.join(", ")))
            });
        let lead = if pdd {
            "Pipes on the supply paths of failing hydrants' junctions, at their required flow asked with pressure-dependent demands (what the system delivers, not the demand-driven state), ranked by their share of the head lost between the sources and the hydrant, summed over the failing hydrants they limit"
        } else {
            "Pipes on the supply paths of failing hydrants, at their required flow, ranked by their share of the head lost between the sources and the lowest-pressure junction, summed over the failing hydrants they limit"
        };
        Some(
            Section::titled("Weak mains")
                .paragraph(format!(
                    "{lead} (the top {} of {}; all in weak_mains.csv).",
                    WEAK_MAINS_SHOWN.min(self.weak_mains.len()),
                    self.weak_mains.len()
                ))
                .table(self.weak_mains_table())
                .paragraph(format!(
                    "Largest shares of head loss per failing hydrant (pipe: share, {l} per 1000 {l}, {}):",
                    o.sym(Quantity::Velocity)
                ))
                .list(paths),
        )
    }

    /// Junctions outside the service-pressure range, and the controls of those conditions.
    fn service_section(&self) -> Section {
        let net = self.network;
        let o = self.out();
        let section = Section::titled("Service-pressure exceptions");
        let exceptions: Vec<_> = self.service.exceptions().collect();
        let mut section = if exceptions.is_empty() {
            section.paragraph(format!(
                "Every junction is within {}-{} {}.",
                num(o.pressure(self.criteria.service_min_kpa), 0),
                num(o.pressure(self.criteria.service_max_kpa), 0),
                o.sym(Quantity::Pressure)
            ))
        } else {
            let p = o.sym(Quantity::Pressure);
            let header = vec![
                "junction".to_string(),
                "zone".to_string(),
                format!("elevation ({})", o.sym(Quantity::Length)),
                format!("peak hour ({p})"),
                format!("{} ({p})", self.service.low_condition.name()),
                "result".to_string(),
                "notes".to_string(),
            ];
            let pressure = |k: Option<f64>| k.map(|k| num(o.pressure(k), 1)).unwrap_or_default();
            section.table(
                Table::new(header).with_rows(exceptions.into_iter().map(|r| {
                    let node = &net.nodes[r.junction];
                    vec![
                        node.id.clone(),
                        net.zone_name(r.junction).unwrap_or_default().to_string(),
                        num(o.length(node.elevation_m), 1),
                        pressure(r.peak_hour_kpa),
                        pressure(r.low_demand_kpa),
                        r.result.name().to_string(),
                        self.service_note(r),
                    ]
                })),
            )
        };
        let notes = self.service_notes();
        if !notes.is_empty() {
            section = section
                .paragraph("Controls in the service conditions:")
                .list(notes.into_iter().map(Text::from));
        }
        section
    }

    /// The closing line: the units of the report.
    fn units_section(&self) -> Section {
        let o = self.out();
        Section::untitled().paragraph(format!(
            "Flows in {}, pressures in {}, elevations and grades in {}.",
            o.sym(Quantity::Flow),
            o.sym(Quantity::Pressure),
            o.sym(Quantity::Length)
        ))
    }
}
