//! Reports of `firemain flowtest`: flowtest_results.csv, calibration.csv, flowtest.md, the
//! terminal summary, and the calibrated copy of the network folder.

use super::table::{hanging, Markup, Table, Terminal};
use super::{csv_bytes, num, Out, OutputFile, OutputSet, ReportError, CAUTIONS};
use crate::flowtest::calibrate::Calibration;
use crate::flowtest::compare::{Compared, Comparison, LARGE_MISFIT_KPA};
use crate::model::flowtests::{FlowTest, FlowTests};
use crate::model::table::{parse_table, TableSpec};
use crate::model::{Diagnostics, HeadlossFormula, LinkKind, Network};
use crate::units::Quantity;

/// The folder, inside the output folder, that holds the calibrated network.
pub const CALIBRATED_NETWORK: &str = "calibrated-network";

/// Everything a flow-test report shows.
pub struct FlowTestReport<'a> {
    pub network: &'a Network,
    pub tests: &'a FlowTests,
    pub comparison: &'a Comparison,
    /// The calibration and the pipes.csv column it grouped by.
    pub calibration: Option<(&'a Calibration, &'a str)>,
    /// The criteria file whose floor the projections use (`None`: 20 psi, NFPA 291 §4.2.1).
    pub criteria: Option<String>,
    pub generated: String,
    pub run_id: String,
    pub version: &'static str,
}

impl FlowTestReport<'_> {
    fn out(&self) -> Out {
        Out::new(self.network.units)
    }

    fn test(&self, row: &Compared) -> &FlowTest {
        &self.tests.tests[row.test]
    }

    fn flow_hydrants(&self, test: &FlowTest) -> String {
        let mut ids: Vec<&str> = Vec::new();
        for o in &test.outlets {
            let id = self.network.hydrants[o.hydrant].id.as_str();
            if !ids.contains(&id) {
                ids.push(id);
            }
        }
        ids.join(" ")
    }

    /// Whether any test misfits by more than [`LARGE_MISFIT_KPA`].
    pub fn has_large_misfit(&self) -> bool {
        self.comparison.rows.iter().any(|r| r.hint.is_some())
    }

    fn floor_text(&self) -> String {
        let o = self.out();
        format!(
            "{} {}",
            o.fmt(Quantity::Pressure, self.comparison.floor_kpa),
            o.sym(Quantity::Pressure)
        )
    }

    /// flowtest_results.csv: one row per test.
    pub fn results_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (p, q) = (o.sfx(Quantity::Pressure), o.sfx(Quantity::Flow));
        let header: Vec<String> = [
            "test".to_string(),
            "date".into(),
            "residual_hydrant".into(),
            "flow_hydrants".into(),
            "outlets".into(),
            format!("measured_flow_{q}"),
            format!("static_measured_{p}"),
            format!("static_model_{p}"),
            format!("static_diff_{p}"),
            format!("residual_measured_{p}"),
            format!("residual_model_{p}"),
            format!("residual_diff_{p}"),
            "drop_percent".into(),
            format!("projected_flow_field_{q}"),
            format!("projected_flow_model_{q}"),
            "class_field".into(),
            "class_model".into(),
            "hint".into(),
            "warnings".into(),
        ]
        .to_vec();
        let pr = |v: f64| o.fmt_precise(Quantity::Pressure, v);
        let fl = |v: f64| o.fmt_precise(Quantity::Flow, v);
        let rows = self
            .comparison
            .rows
            .iter()
            .map(|r| {
                let t = self.test(r);
                vec![
                    t.id.clone(),
                    t.date.clone().unwrap_or_default(),
                    self.network.hydrants[t.residual_hydrant].id.clone(),
                    self.flow_hydrants(t),
                    t.outlets.len().to_string(),
                    fl(r.reduced.total_flow_m3s),
                    pr(t.static_kpa),
                    pr(r.model_static_kpa),
                    pr(r.static_diff_kpa(t)),
                    pr(t.residual_kpa),
                    pr(r.model_residual_kpa),
                    pr(r.residual_diff_kpa(t)),
                    num(r.reduced.drop_fraction * 100.0, 1),
                    r.reduced.projected_m3s.map(fl).unwrap_or_default(),
                    r.model_projected_m3s.map(fl).unwrap_or_default(),
                    r.reduced
                        .class
                        .map(|c| c.name().to_string())
                        .unwrap_or_default(),
                    r.model_projected_m3s
                        .map(|q| {
                            crate::flowtest::reduce::HydrantClass::of_flow(q)
                                .name()
                                .to_string()
                        })
                        .unwrap_or_default(),
                    r.hint.clone().unwrap_or_default(),
                    r.reduced.warnings.join("; "),
                ]
            })
            .collect::<Vec<_>>();
        csv_bytes(&header, &rows)
    }

    fn roughness_out(&self, v: f64) -> f64 {
        match self.network.headloss {
            HeadlossFormula::HazenWilliams => v,
            HeadlossFormula::DarcyWeisbach => self.out().diameter(v),
        }
    }

    fn roughness_name(&self) -> String {
        match self.network.headloss {
            HeadlossFormula::HazenWilliams => "c".into(),
            HeadlossFormula::DarcyWeisbach => {
                format!("roughness_{}", self.out().sfx(Quantity::Diameter))
            }
        }
    }

    /// A roughness as reports and the calibrated pipes.csv write it: C to 0.1, roughness to
    /// four significant digits (more would claim a precision no test gives).
    pub fn roughness_text(&self, si: f64) -> String {
        let v = self.roughness_out(si);
        match self.network.headloss {
            HeadlossFormula::HazenWilliams => num(v, 1),
            HeadlossFormula::DarcyWeisbach => {
                let digits = 3 - v.abs().log10().floor() as i32;
                num(v, digits.max(0) as usize)
            }
        }
    }

    /// calibration.csv: one row per group (empty header-only file without calibration).
    pub fn calibration_csv(&self) -> Result<Vec<u8>, ReportError> {
        let rn = self.roughness_name();
        let header: Vec<String> = vec![
            "group".into(),
            "pipes".into(),
            format!("length_{}", self.out().sfx(Quantity::Length)),
            format!("{rn}_before"),
            format!("{rn}_after"),
            format!("{rn}_standard_error"),
            "identifiable".into(),
            "at_bound".into(),
            "tests".into(),
        ];
        let mut rows = Vec::new();
        if let Some((cal, _)) = self.calibration {
            for g in &cal.groups {
                rows.push(vec![
                    g.name.clone(),
                    g.pipes.to_string(),
                    num(self.out().length(g.length_m), 0),
                    self.roughness_text(g.before),
                    self.roughness_text(g.after),
                    g.standard_error
                        .map(|s| self.roughness_text(s))
                        .unwrap_or_default(),
                    if g.identifiable { "yes" } else { "no" }.into(),
                    if g.at_bound { "yes" } else { "no" }.into(),
                    g.tests
                        .iter()
                        .map(|&t| self.tests.tests[t].id.as_str())
                        .collect::<Vec<_>>()
                        .join(" "),
                ]);
            }
        }
        csv_bytes(&header, &rows)
    }

    fn p(&self, kpa: f64) -> String {
        let o = self.out();
        format!(
            "{} {}",
            o.fmt(Quantity::Pressure, kpa),
            o.sym(Quantity::Pressure)
        )
    }

    /// The headline: tests, RMS misfits, worst test.
    pub fn summary(&self) -> String {
        let c = self.comparison;
        let worst = c.worst(&self.tests.tests).map(|w| {
            let t = self.test(w);
            format!(
                "; worst test {} (residual {}{})",
                t.id,
                if w.residual_diff_kpa(t) >= 0.0 {
                    "+"
                } else {
                    ""
                },
                self.p(w.residual_diff_kpa(t))
            )
        });
        format!(
            "{} test(s) from {}; RMS misfit of the model: static {}, residual {}{}",
            c.rows.len(),
            self.tests.file,
            self.p(c.rms_static_kpa),
            self.p(c.rms_residual_kpa),
            worst.unwrap_or_default()
        )
    }

    /// The terminal summary.
    pub fn terminal(&self) -> String {
        let mut s = hanging("", &format!("Field flow tests: {}", self.network.name));
        s.push_str(&hanging("", &self.summary()));
        if let Some(f) = &self.tests.sources_file {
            s.push_str(&hanging(
                "",
                &format!("source levels during the tests from {f} (beside the tests file)"),
            ));
        }
        s.push_str(&Terminal.table(&self.terminal_table()));
        s.push('\n');
        if let Some((cal, column)) = self.calibration {
            s.push('\n');
            s.push_str(&hanging(
                "",
                &format!(
                    "Calibration by `{column}`: RMS residual misfit {} -> {}",
                    self.p(cal.rms_before_kpa),
                    self.p(cal.rms_after_kpa)
                ),
            ));
            for g in &cal.groups {
                s.push_str(&hanging("  ", &self.group_line(g)));
            }
        }
        s
    }

    /// One row per test: field and model pressures side by side, the field's flow at the
    /// floor and its class, and how many notes flowtest.md has for the test.
    fn terminal_table(&self) -> Table {
        let o = self.out();
        let (p, f) = (o.sym(Quantity::Pressure), o.sym(Quantity::Flow));
        let header = vec![
            "test".to_string(),
            format!("flow ({f})"),
            format!("static, field ({p})"),
            format!("static, model ({p})"),
            format!("residual, field ({p})"),
            format!("residual, model ({p})"),
            format!("field at {} ({f})", self.floor_text()),
            "class".to_string(),
            "notes in flowtest.md".to_string(),
        ];
        Table::new(header).with_rows(self.comparison.rows.iter().map(|r| {
            let t = self.test(r);
            vec![
                t.id.clone(),
                o.flow_text(r.reduced.total_flow_m3s),
                o.fmt(Quantity::Pressure, t.static_kpa),
                o.fmt(Quantity::Pressure, r.model_static_kpa),
                o.fmt(Quantity::Pressure, t.residual_kpa),
                o.fmt(Quantity::Pressure, r.model_residual_kpa),
                r.reduced
                    .projected_m3s
                    .map(|q| o.flow_text_down(q))
                    .unwrap_or_default(),
                r.reduced
                    .class
                    .map(|c| c.name().to_string())
                    .unwrap_or_default(),
                match r.reduced.warnings.len() + usize::from(r.hint.is_some()) {
                    0 => String::new(),
                    n => n.to_string(),
                },
            ]
        }))
    }

    fn group_line(&self, g: &crate::flowtest::calibrate::GroupFit) -> String {
        let unit = match self.network.headloss {
            HeadlossFormula::HazenWilliams => "C".to_string(),
            HeadlossFormula::DarcyWeisbach => {
                format!("roughness ({})", self.out().sym(Quantity::Diameter))
            }
        };
        if !g.identifiable {
            return format!(
                "{}: {} {} left as it was: not identifiable (no test is sensitive to its {} pipes)",
                g.name,
                unit,
                self.roughness_text(g.before),
                g.pipes
            );
        }
        format!(
            "{}: {} {} -> {}{}{} ({} pipes, {} test(s))",
            g.name,
            unit,
            self.roughness_text(g.before),
            self.roughness_text(g.after),
            g.standard_error
                .map(|s| format!(" ± {}", self.roughness_text(s)))
                .unwrap_or_default(),
            if g.at_bound { ", at a bound" } else { "" },
            g.pipes,
            g.tests.len()
        )
    }

    /// flowtest.md.
    pub fn markdown(&self) -> String {
        let mut s = self.markdown_title();
        s.push_str(&self.markdown_summary());
        s.push_str(&self.markdown_tests());
        s.push_str(&self.markdown_large_misfits());
        s.push_str(&self.markdown_test_warnings());
        if let Some((cal, column)) = self.calibration {
            s.push_str(&self.calibration_markdown(cal, column));
        }
        s.push_str(METHOD);
        s.push_str("\n## Cautions\n\n");
        for c in CAUTIONS {
            s.push_str(&format!("- {c}\n"));
        }
        s
    }

    /// The title, and what the report was made from: date, run, version, tests file, source
    /// levels and the floor the projections use.
    fn markdown_title(&self) -> String {
        format!(
            "# Field flow tests: {}\n\nGenerated {} by firemain {} (run {}). Tests: `{}`{}. Projections to a residual floor of {} ({}).\n\n",
            self.network.name,
            super::date_of(&self.generated),
            self.version,
            self.run_id,
            self.tests.file,
            self.tests
                .sources_file
                .as_ref()
                .map(|f| format!(" with source levels from `{f}`"))
                .unwrap_or_default(),
            self.floor_text(),
            self.criteria
                .as_ref()
                .map(|c| format!("from {c}"))
                .unwrap_or_else(|| "NFPA 291 §4.2.1 rating pressure".into())
        )
    }

    /// The headline and how many tests misfit by more than [`LARGE_MISFIT_KPA`].
    fn markdown_summary(&self) -> String {
        let mut s = format!("## Summary\n\n{}.\n\n", self.summary());
        let large = self
            .comparison
            .rows
            .iter()
            .filter(|r| r.hint.is_some())
            .count();
        s.push_str(&format!(
            "{large} test(s) misfit by more than {} in static or residual pressure.\n\n",
            self.p(LARGE_MISFIT_KPA)
        ));
        s
    }

    /// One row per test: field and model side by side, the drop, the flows at the floor and
    /// the class.
    fn markdown_tests(&self) -> String {
        let o = self.out();
        let (pu, qu) = (o.sym(Quantity::Pressure), o.sym(Quantity::Flow));
        let mut s = format!(
            "## Tests\n\n| test | flow hydrants | Q ({qu}) | static field / model ({pu}) | residual field / model ({pu}) | diff ({pu}) | drop | Q at floor, field / model ({qu}) | class |\n|---|---|---:|---:|---:|---:|---:|---:|---|\n"
        );
        for r in &self.comparison.rows {
            let t = self.test(r);
            s.push_str(&format!(
                "| {} | {} | {} | {} / {} | {} / {} | {} | {} % | {} / {} | {} |\n",
                t.id,
                self.flow_hydrants(t),
                o.flow_text(r.reduced.total_flow_m3s),
                o.fmt(Quantity::Pressure, t.static_kpa),
                o.fmt(Quantity::Pressure, r.model_static_kpa),
                o.fmt(Quantity::Pressure, t.residual_kpa),
                o.fmt(Quantity::Pressure, r.model_residual_kpa),
                o.fmt(Quantity::Pressure, r.residual_diff_kpa(t)),
                num(r.reduced.drop_fraction * 100.0, 0),
                r.reduced
                    .projected_m3s
                    .map(|q| o.flow_text_down(q))
                    .unwrap_or_else(|| "-".into()),
                r.model_projected_m3s
                    .map(|q| o.flow_text_down(q))
                    .unwrap_or_else(|| "-".into()),
                r.reduced
                    .class
                    .map(|c| format!("{} ({})", c.name(), c.colour()))
                    .unwrap_or_default()
            ));
        }
        s
    }

    /// Each test that misfits by more than [`LARGE_MISFIT_KPA`], with the usual causes; empty
    /// when none does.
    fn markdown_large_misfits(&self) -> String {
        let hints: Vec<String> = self
            .comparison
            .rows
            .iter()
            .filter_map(|r| {
                r.hint
                    .as_ref()
                    .map(|h| format!("- {}: {h}.\n", self.test(r).id))
            })
            .collect();
        if hints.is_empty() {
            return String::new();
        }
        format!(
            "\n## Large misfits and what usually causes them\n\n{}",
            hints.concat()
        )
    }

    /// Every warning of every test's reduction; empty when there is none.
    fn markdown_test_warnings(&self) -> String {
        let warnings: Vec<String> = self
            .comparison
            .rows
            .iter()
            .flat_map(|r| {
                let id = self.test(r).id.clone();
                r.reduced
                    .warnings
                    .iter()
                    .map(move |w| format!("- {id}: {w}.\n"))
            })
            .collect();
        if warnings.is_empty() {
            return String::new();
        }
        format!("\n## Test warnings\n\n{}", warnings.concat())
    }

    fn calibration_markdown(&self, cal: &Calibration, column: &str) -> String {
        let (lo, hi) = cal.bounds;
        let mut s = format!(
            "\n## Calibration by `{column}`\n\nOne factor per group on its pipes' roughness, fitted to the residual pressures by bounded Levenberg-Marquardt (group means bounded to {} - {}); values are length-weighted means, {} iteration(s). RMS residual misfit {} before, {} after.\n\n",
            self.roughness_text(lo),
            self.roughness_text(hi),
            cal.iterations,
            self.p(cal.rms_before_kpa),
            self.p(cal.rms_after_kpa)
        );
        for g in &cal.groups {
            s.push_str(&format!("- {}\n", self.group_line(g)));
        }
        s.push_str(&format!(
            "\nThe calibrated network is in `{CALIBRATED_NETWORK}/`: only the roughness of the fitted groups' pipes differs from the input. A fit is a hypothesis about the mains, not a finding: a group far from its table value points at a closed valve or a wrong diameter as much as at roughness; confirm before relying on it.\n"
        ));
        s
    }

    /// The README of the calibrated network folder.
    pub fn calibrated_readme(&self, cal: &Calibration, column: &str) -> String {
        let mut s = format!(
            "# Calibrated copy of {}\n\nWritten by firemain {} on {} (run {}) from the field tests in `{}` ({} test(s): {}).\n\nOnly the `roughness` column of pipes.csv differs from the input network: the roughness of every pipe of a fitted group (grouped by the `{column}` column of pipes.csv) is multiplied by the group's fitted factor, so that the group's length-weighted mean is the value below. Groups that no test is sensitive to are unchanged.\n\n",
            self.network.name,
            self.version,
            super::date_of(&self.generated),
            self.run_id,
            self.tests.file,
            self.tests.tests.len(),
            self.tests
                .tests
                .iter()
                .map(|t| t.id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        );
        for g in &cal.groups {
            s.push_str(&format!("- {}\n", self.group_line(g)));
        }
        s.push_str(&format!(
            "\nRMS residual-pressure misfit: {} before, {} after.\n",
            self.p(cal.rms_before_kpa),
            self.p(cal.rms_after_kpa)
        ));
        s
    }

    /// The output set. `network_files` are the input network's files (name, bytes), copied
    /// into the calibrated folder with calibration (pipes.csv with its roughness cells changed).
    pub fn output_set(
        &self,
        network_files: Vec<(String, Vec<u8>)>,
    ) -> Result<OutputSet, ReportError> {
        let mut files = vec![
            OutputFile {
                name: "flowtest_results.csv".into(),
                bytes: self.results_csv()?,
            },
            OutputFile {
                name: "calibration.csv".into(),
                bytes: self.calibration_csv()?,
            },
            OutputFile {
                name: "flowtest.md".into(),
                bytes: self.markdown().into_bytes(),
            },
        ];
        if let Some((cal, column)) = self.calibration {
            for (name, bytes) in network_files {
                let bytes = if name == "pipes.csv" {
                    self.calibrated_pipes_csv(&bytes, cal)?
                } else {
                    bytes
                };
                files.push(OutputFile {
                    name: format!("{CALIBRATED_NETWORK}/{name}"),
                    bytes,
                });
            }
            files.push(OutputFile {
                name: format!("{CALIBRATED_NETWORK}/README.md"),
                bytes: self.calibrated_readme(cal, column).into_bytes(),
            });
        }
        Ok(OutputSet {
            command: "flowtest",
            run_id: self.run_id.clone(),
            generated: self.generated.clone(),
            generator: format!("firemain {}", self.version),
            files,
        })
    }

    /// The input pipes.csv with the roughness cell of every changed pipe rewritten; every
    /// other byte (comments, other columns, line ends) as it was.
    pub fn calibrated_pipes_csv(
        &self,
        original: &[u8],
        cal: &Calibration,
    ) -> Result<Vec<u8>, ReportError> {
        let render = |message: String| ReportError::Render {
            what: "the calibrated pipes.csv".into(),
            message,
        };
        let spec = TableSpec {
            known: &["id", "roughness"],
            required: &["id", "roughness"],
        };
        let mut diags = Diagnostics::new();
        let table = parse_table(original, "pipes.csv", &spec, &mut diags)
            .ok_or_else(|| render(diags.to_string()))?;
        // The new text of each changed line, by 1-based line number.
        let mut changed = std::collections::HashMap::new();
        for row in table.rows() {
            let id = table.cell(row, "id");
            let cell = table.cell(row, "roughness");
            let Some(link) = cal.calibrated.link_by_id(id.text) else {
                continue;
            };
            let (LinkKind::Pipe(new), LinkKind::Pipe(old)) = (
                &cal.calibrated.links[link].kind,
                &self.network.links[link].kind,
            ) else {
                continue;
            };
            if new.roughness == old.roughness {
                continue;
            }
            changed.insert(
                row.line,
                (cell.column as usize, self.roughness_text(new.roughness)),
            );
        }
        let mut out = Vec::with_capacity(original.len());
        let body = original.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(original);
        out.extend_from_slice(&original[..original.len() - body.len()]);
        for (i, line) in body.split_inclusive(|&b| b == b'\n').enumerate() {
            match changed.get(&(i as u64 + 1)) {
                Some((column, value)) => {
                    out.extend(rewrite_cell(line, *column, value).map_err(render)?)
                }
                None => out.extend_from_slice(line),
            }
        }
        Ok(out)
    }
}

/// One CSV line with field `column` (1-based) replaced; the line end kept.
fn rewrite_cell(line: &[u8], column: usize, value: &str) -> Result<Vec<u8>, String> {
    let content_len = line
        .iter()
        .rposition(|&b| b != b'\n' && b != b'\r')
        .map_or(0, |p| p + 1);
    let (content, ending) = line.split_at(content_len);
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(content);
    let mut record = csv::ByteRecord::new();
    if !reader
        .read_byte_record(&mut record)
        .map_err(|e| e.to_string())?
    {
        return Err("a pipe row could not be read again".into());
    }
    let fields: Vec<Vec<u8>> = record
        .iter()
        .enumerate()
        .map(|(i, f)| {
            if i + 1 == column {
                value.as_bytes().to_vec()
            } else {
                f.to_vec()
            }
        })
        .collect();
    let mut w = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    w.write_record(&fields).map_err(|e| e.to_string())?;
    let mut bytes = w.into_inner().map_err(|e| e.to_string())?;
    bytes.pop(); // the writer's own line end; the original one follows
    bytes.extend_from_slice(ending);
    Ok(bytes)
}

const METHOD: &str = "
## Method and sources

- Outlet flow from the pitot reading: Q = 29.83·c·d²·√p (gpm, in, psi) or Q = 0.0666·c·d²·√p (L/min, mm, kPa), NFPA 291 §4.9.3 (metric form since the 2019 edition); outlet coefficients NFPA 291 Fig. 4.9.1 and §4.9.2.
- Pumper (4½-in) outlets without a flow tube: × the factor of NFPA 291 Table 4.10.2 by pitot pressure (read linearly between its rows).
- Flow at the floor: Q_R = Q_F·((S − floor)/(S − R))^0.54, NFPA 291 §4.13; class AA ≥ 1,500 gpm, A 1,000-1,499, B 500-999, C < 500 (NFPA 291 Chapter 5). The model's figure uses the field's test flow with the model's static and residual.
- A drop under 10 % of static makes the projection unreliable (NFPA 291-2022 §4.4.6); the 2010 edition (§4.3.6) asked for 25 %.
- The model side: each test solved at average-day demand × its demand factor, its source levels, and the measured outlet flows drawn at the flow hydrants' junctions; pressures read at the residual hydrant's junction.
- A misfit over 5 psi is large (common practice); which of static or residual is off suggests the cause (elevation or source level for static; valves, roughness or diameters for the drop).
";
