//! Reports of `firemain upsize`: the plan, the hydrants before and after, the proposed
//! network's pipes.csv, and a Markdown report.

use super::check::CheckReport;
use super::table::{hanging, Document, Markdown, Markup, Section, Table, Terminal, Text};
use super::{
    csv_bytes, input_warnings_section, num, plain_number, Out, OutputFile, OutputSet, ReportError,
    CAUTIONS,
};
use crate::fireflow::{HydrantResult, Outcome};
use crate::model::{LinkKind, Network, PipeStatus};
use crate::units::Quantity;
use crate::upsizing::{CostModel, UpsizePlan};

/// The folder, inside the output folder, that holds the proposed network.
pub const PROPOSED_NETWORK: &str = "proposed-network";

/// The plan's own cautions, on top of the check's.
pub const PLAN_CAUTIONS: &[&str] = &[
    "This plan is a screening proposal from a steady-state model, not a design. A licensed engineer must design and check any main replacement: surge and transients, fire storage and supply duration, water age and quality with larger mains, and constructability.",
    "Nominal sizes are used as inside diameters, and new mains get the criteria's new-pipe roughness; actual inside diameters and linings change the numbers.",
];

/// Everything an upsizing report shows.
pub struct UpsizeReport<'a> {
    pub network: &'a Network,
    pub plan: &'a UpsizePlan,
    pub costs: &'a CostModel,
    /// The check report of the proposed network (for its weak mains).
    pub after: &'a CheckReport<'a>,
    pub generated: String,
    pub version: &'a str,
}

impl UpsizeReport<'_> {
    fn out(&self) -> Out {
        Out::new(self.network.units)
    }

    fn result_of(results: &[HydrantResult], hydrant: usize) -> Option<&HydrantResult> {
        results.iter().find(|r| r.hydrant == hydrant)
    }

    fn passing(&self, results: &[HydrantResult]) -> usize {
        results
            .iter()
            .filter(|r| self.plan.targets.contains(&r.hydrant) && r.outcome == Outcome::Pass)
            .count()
    }

    /// Hydrants that passed before and fail on the proposed network.
    fn newly_failing(&self) -> Vec<&HydrantResult> {
        self.plan
            .after
            .iter()
            .filter(|r| r.outcome != Outcome::Pass)
            .filter(|r| {
                Self::result_of(&self.plan.before, r.hydrant)
                    .is_some_and(|b| b.outcome == Outcome::Pass)
            })
            .collect()
    }

    /// The upsizings, pipe by pipe (terminal and upsize_report.md).
    fn plan_table(&self) -> Table {
        let o = self.out();
        let (d, l) = (o.sym(Quantity::Diameter), o.sym(Quantity::Length));
        let header = vec![
            "pipe".to_string(),
            format!("from ({d})"),
            format!("to ({d})"),
            format!("length ({l})"),
            "cost".to_string(),
        ];
        let rows = self.plan.upsizings.iter().map(|u| {
            vec![
                self.network.links[u.link].id.clone(),
                num(o.diameter(u.from_diameter_m), 1),
                num(o.diameter(u.to_diameter_m), 1),
                num(o.length(u.length_m), 0),
                num(u.cost, 0),
            ]
        });
        Table::new(header).with_rows(rows)
    }

    /// The targeted hydrants before and after (terminal and upsize_report.md).
    fn hydrant_table(&self) -> Table {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let header = vec![
            "hydrant".to_string(),
            format!("required ({f})"),
            format!("before ({f})"),
            format!("after ({f})"),
            "before".to_string(),
            "after".to_string(),
        ];
        let flow = |q: Option<f64>| q.map(|q| o.flow_text_down(q)).unwrap_or_default();
        let rows = self.plan.targets.iter().filter_map(|&h| {
            let b = Self::result_of(&self.plan.before, h)?;
            let a = Self::result_of(&self.plan.after, h)?;
            Some(vec![
                self.network.hydrants[h].id.clone(),
                flow(Some(b.required_m3s)),
                flow(b.available_m3s),
                flow(a.available_m3s),
                b.outcome.name().to_string(),
                a.outcome.name().to_string(),
            ])
        });
        Table::new(header).with_rows(rows)
    }

    fn headline(&self) -> String {
        let targets = self.plan.targets.len();
        format!(
            "{} failing hydrant(s) targeted; {} pass with the plan ({} before). {} upsizing(s), total cost {} {}.{}",
            targets,
            self.passing(&self.plan.after),
            self.passing(&self.plan.before),
            self.plan.upsizings.len(),
            num(self.plan.total_cost, 0),
            self.costs.unit_label(self.network.units),
            if self.plan.budget_limited {
                " The budget stopped the search before every target passed."
            } else {
                ""
            }
        )
    }

    /// The terminal report.
    pub fn terminal(&self) -> String {
        let mut s = String::new();
        s.push_str(&hanging("Network:    ", &self.network.name));
        s.push_str(&hanging("Criteria:   ", &self.after.criteria.name));
        s.push_str(&hanging("Plan:       ", &self.headline()));
        for a in &self.plan.set_aside {
            s.push_str(&hanging(
                "Set aside:  ",
                &format!("{}: {}", self.network.hydrants[a.hydrant].id, a.reason),
            ));
        }
        let newly = self.newly_failing();
        if !newly.is_empty() {
            let ids: Vec<&str> = newly
                .iter()
                .map(|r| self.network.hydrants[r.hydrant].id.as_str())
                .collect();
            s.push_str(&hanging(
                "Warning:    ",
                &format!(
                    "hydrants that passed before fail with the plan: {}",
                    ids.join(", ")
                ),
            ));
        }
        let o = self.out();
        s.push_str(&hanging(
            "Service:    ",
            &format!(
                "with the plan, {} of {} junctions outside {}-{} {}",
                self.after.service.exceptions().count(),
                self.after.service.rows.len(),
                num(o.pressure(self.after.criteria.service_min_kpa), 0),
                num(o.pressure(self.after.criteria.service_max_kpa), 0),
                o.sym(Quantity::Pressure)
            ),
        ));
        s.push_str(
            "A screening proposal: a licensed engineer must design and check any replacement.\n",
        );
        if !self.plan.upsizings.is_empty() {
            s.push_str(
                &Terminal.section(&Section::titled("Upsizings").table(self.plan_table()), 1),
            );
        }
        let hydrants = self.hydrant_table();
        if !hydrants.rows.is_empty() {
            let section = Section::titled("Targeted hydrants, available fire flow").table(hydrants);
            s.push_str(&Terminal.section(&section, 1));
        }
        s.push_str(&self.after.terminal_weak_mains());
        s
    }

    /// `upsize_plan.csv`.
    fn plan_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (d, l) = (o.sfx(Quantity::Diameter), o.sfx(Quantity::Length));
        let header = vec![
            "pipe".to_string(),
            format!("from_diameter_{d}"),
            format!("to_diameter_{d}"),
            format!("length_{l}"),
            "cost".to_string(),
        ];
        let rows: Vec<Vec<String>> = self
            .plan
            .upsizings
            .iter()
            .map(|u| {
                vec![
                    self.network.links[u.link].id.clone(),
                    o.fmt(Quantity::Diameter, u.from_diameter_m),
                    o.fmt(Quantity::Diameter, u.to_diameter_m),
                    o.fmt(Quantity::Length, u.length_m),
                    num(u.cost, 2),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    /// `upsize_hydrants.csv`: every selected hydrant before and after.
    fn hydrants_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let f = o.sfx(Quantity::Flow);
        let header = vec![
            "hydrant".to_string(),
            format!("required_flow_{f}"),
            format!("available_before_{f}"),
            format!("available_after_{f}"),
            "result_before".to_string(),
            "result_after".to_string(),
            "targeted".to_string(),
        ];
        let flow = |q: Option<f64>| {
            q.map(|q| o.fmt_precise(Quantity::Flow, q))
                .unwrap_or_default()
        };
        let rows: Vec<Vec<String>> = self
            .plan
            .before
            .iter()
            .filter_map(|b| {
                let a = Self::result_of(&self.plan.after, b.hydrant)?;
                Some(vec![
                    self.network.hydrants[b.hydrant].id.clone(),
                    flow(Some(b.required_m3s)),
                    flow(b.available_m3s),
                    flow(a.available_m3s),
                    b.outcome.name().to_string(),
                    a.outcome.name().to_string(),
                    if self.plan.targets.contains(&b.hydrant) {
                        "yes"
                    } else {
                        "no"
                    }
                    .to_string(),
                ])
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    /// `upsize_report.md`.
    fn markdown(&self) -> String {
        Markdown.document(&self.document())
    }

    /// The proposal's sections, in order.
    pub fn document(&self) -> Document {
        let mut sections = vec![
            self.facts_section(),
            input_warnings_section(self.after.input_warnings),
        ];
        if !self.plan.upsizings.is_empty() {
            sections.push(Section::titled("Upsizings").table(self.plan_table()));
        }
        sections.push(Section::titled("Targeted hydrants").table(self.hydrant_table()));
        if !self.plan.set_aside.is_empty() {
            sections.push(
                Section::titled("Set aside").list(self.plan.set_aside.iter().map(|a| {
                    Text::from(format!(
                        "{}: {}",
                        self.network.hydrants[a.hydrant].id, a.reason
                    ))
                })),
            );
        }
        let newly = self.newly_failing();
        if !newly.is_empty() {
            sections.push(
                Section::titled("Hydrants that fail only with the plan").list(
                    newly
                        .iter()
                        .map(|r| Text::from(self.network.hydrants[r.hydrant].id.as_str())),
                ),
            );
        }
        sections.push(Section::titled("Search").paragraph(format!(
            "{} greedy round(s); {} hydrant analyses (full fire-flow searches), all on verified solves.",
            self.plan.rounds, self.plan.analyses
        )));
        sections.push(
            Section::titled("Cautions")
                .list(PLAN_CAUTIONS.iter().chain(CAUTIONS).map(|&c| c.into())),
        );
        Document {
            title: format!("Main upsizing proposal: {}", self.network.name),
            sections,
        }
    }

    /// The criteria, the run, the plan in one line and the cost basis.
    fn facts_section(&self) -> Section {
        let o = self.out();
        let criteria = self.after.criteria;
        Section::untitled()
            .paragraph(format!(
                "Criteria: {} ({}). Date: {}. Run id: {}. Produced by firemain {}.",
                criteria.name,
                criteria.reference,
                super::date_of(&self.generated),
                self.after.run_id,
                self.version
            ))
            .paragraph(self.headline())
            .paragraph(format!(
                "Cost basis: {}. New mains: {} {}.",
                self.costs.unit_label(self.network.units),
                match self.network.headloss {
                    crate::model::HeadlossFormula::HazenWilliams => "Hazen-Williams C",
                    crate::model::HeadlossFormula::DarcyWeisbach => "absolute roughness",
                },
                criteria
                    .new_pipe_roughness
                    .map(|r| match self.network.headloss {
                        crate::model::HeadlossFormula::HazenWilliams => num(r, 0),
                        crate::model::HeadlossFormula::DarcyWeisbach =>
                            format!("{} {}", num(o.diameter(r), 3), o.sym(Quantity::Diameter)),
                    })
                    .unwrap_or_else(|| "at the default for new ductile iron".into())
            ))
    }

    /// All output files as one set; `network_files` as for [`UpsizeReport::files`].
    pub fn output_set(
        &self,
        network_files: Vec<(String, Vec<u8>)>,
    ) -> Result<OutputSet, ReportError> {
        Ok(OutputSet {
            command: "upsize",
            run_id: self.after.run_id.clone(),
            generated: self.generated.clone(),
            generator: format!("firemain {}", self.version),
            files: self.files(network_files)?,
        })
    }

    /// All output files; `network_files` are the input network's files (name, bytes) copied
    /// into the proposed network's folder, except pipes.csv which is written anew.
    pub fn files(
        &self,
        network_files: Vec<(String, Vec<u8>)>,
    ) -> Result<Vec<OutputFile>, ReportError> {
        let mut files = vec![
            OutputFile {
                name: "upsize_plan.csv".into(),
                bytes: self.plan_csv()?,
            },
            OutputFile {
                name: "upsize_hydrants.csv".into(),
                bytes: self.hydrants_csv()?,
            },
            OutputFile {
                name: "weak_mains_after.csv".into(),
                bytes: self.after.weak_mains_csv()?,
            },
            OutputFile {
                name: "upsize_report.md".into(),
                bytes: self.markdown().into_bytes(),
            },
        ];
        for (name, bytes) in network_files {
            if name != crate::model::PIPES_FILE {
                files.push(OutputFile {
                    name: format!("{PROPOSED_NETWORK}/{name}"),
                    bytes,
                });
            }
        }
        files.push(OutputFile {
            name: format!("{PROPOSED_NETWORK}/pipes.csv"),
            bytes: pipes_csv(&self.plan.proposed)?,
        });
        Ok(files)
    }
}

/// A network's pipes.csv in its own units.
pub fn pipes_csv(net: &Network) -> Result<Vec<u8>, ReportError> {
    let u = net.units;
    let header: Vec<String> = crate::model::load::PIPE_COLUMNS
        .iter()
        .map(|s| s.to_string())
        .collect();
    let rows: Vec<Vec<String>> = net
        .links
        .iter()
        .filter_map(|l| {
            let LinkKind::Pipe(p) = &l.kind else {
                return None;
            };
            let roughness = match net.headloss {
                crate::model::HeadlossFormula::HazenWilliams => p.roughness,
                crate::model::HeadlossFormula::DarcyWeisbach => {
                    u.from_si(Quantity::Diameter, p.roughness)
                }
            };
            Some(vec![
                l.id.clone(),
                net.nodes[l.from].id.clone(),
                net.nodes[l.to].id.clone(),
                plain_number(u.from_si(Quantity::Length, p.length_m)),
                plain_number(u.from_si(Quantity::Diameter, p.diameter_m)),
                plain_number(roughness),
                plain_number(p.minor_loss),
                match p.status {
                    PipeStatus::Open => "open",
                    PipeStatus::Closed => "closed",
                    PipeStatus::Check => "check",
                }
                .to_string(),
                p.material.clone().unwrap_or_default(),
            ])
        })
        .collect();
    csv_bytes(&header, &rows)
}
