//! Reading field hydrant flow tests: `flowtests.csv` and the optional `flowtest_sources.csv`
//! beside it (our format, see docs/flow-tests.md), converted to SI once, here.
//!
//! One row per flowing outlet; rows with the same `test` form one test. Every problem is a
//! diagnostic with file, line, column and a fix, as for the network files.

use std::collections::{HashMap, HashSet};
use std::path::Path;

use super::diagnostic::{Diagnostics, Location};
use super::limits;
use super::network::Network;
use super::table::{read_table, Cell, Row, Table, TableSpec};
use crate::units::{display_value, Quantity, UnitSystem};

/// The file name of the optional per-test source levels, looked for beside the tests file.
pub const FLOWTEST_SOURCES: &str = "flowtest_sources.csv";

const TESTS: TableSpec<'static> = TableSpec {
    known: &[
        "test",
        "date",
        "residual_hydrant",
        "static_pressure",
        "residual_pressure",
        "flow_hydrant",
        "outlet_diameter",
        "outlet_coefficient",
        "pitot_pressure",
        "measured_flow",
        "demand_factor",
        "notes",
    ],
    required: &[
        "test",
        "residual_hydrant",
        "static_pressure",
        "residual_pressure",
        "flow_hydrant",
    ],
};
const SOURCES: TableSpec<'static> = TableSpec {
    known: &["test", "source", "grade"],
    required: &["test", "source", "grade"],
};

/// Outlet coefficients outside this range are errors: NFPA 291 Fig. 4.9.1 gives 0.70-0.90 and
/// §4.9.2 0.95 for a flow tube; anything outside 0.5-1.0 is a typing error.
pub const COEFFICIENT_RANGE: (f64, f64) = (0.5, 1.0);
/// Outlet diameters outside this range (in) are warned about: hydrant outlets are 2½ or 4½ in
/// (common practice, no source).
pub const OUTLET_DIAMETER_IN: (f64, f64) = (1.5, 6.0);

/// How the flow of one outlet was measured.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum OutletReading {
    /// A pitot reading at an open outlet: inside diameter (m), outlet coefficient, pitot kPa.
    Pitot {
        diameter_m: f64,
        coefficient: f64,
        pitot_kpa: f64,
    },
    /// A flow meter or diffuser reading, m³/s.
    Metered { flow_m3s: f64 },
}

/// One flowing outlet of a test.
#[derive(Clone, Debug, PartialEq)]
pub struct Outlet {
    /// Index into [`Network::hydrants`].
    pub hydrant: usize,
    pub reading: OutletReading,
    pub line: u64,
}

/// One field test: a residual hydrant and its flowing outlets.
#[derive(Clone, Debug, PartialEq)]
pub struct FlowTest {
    pub id: String,
    pub date: Option<String>,
    /// Index into [`Network::hydrants`].
    pub residual_hydrant: usize,
    pub static_kpa: f64,
    pub residual_kpa: f64,
    /// Multiplier of average-day demand for the hour of the test.
    pub demand_factor: f64,
    pub outlets: Vec<Outlet>,
    /// Source grades at the time of the test: (node index, grade m).
    pub source_grades: Vec<(usize, f64)>,
    pub notes: String,
    /// Line of the test's first row.
    pub line: u64,
}

/// The tests of a file, with its name for messages.
#[derive(Clone, Debug)]
pub struct FlowTests {
    pub file: String,
    pub tests: Vec<FlowTest>,
    /// Whether a flowtest_sources.csv was read.
    pub sources_file: Option<String>,
}

/// A file of tests read without errors, with its warnings and notes.
#[derive(Debug)]
pub struct LoadedTests {
    pub tests: FlowTests,
    pub diagnostics: Diagnostics,
}

/// Reads the tests at `path` for `net`, and `flowtest_sources.csv` beside it when present.
pub fn load_flowtests(path: &Path, net: &Network) -> Result<LoadedTests, Diagnostics> {
    let mut diags = Diagnostics::new();
    let file = path
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string());
    let Some(table) = read_table(path, &file, &TESTS, &mut diags) else {
        return Err(diags);
    };
    let mut tests = read_tests(&table, net, &mut diags);
    if table.rows().is_empty() {
        diags.error(
            Location::file(&file),
            "there are no tests",
            "list one row per flowing outlet (see docs/flow-tests.md)",
        );
    }
    let sources_path = path
        .parent()
        .map(|p| p.join(FLOWTEST_SOURCES))
        .filter(|p| p.exists());
    let sources_file = sources_path.as_ref().map(|_| FLOWTEST_SOURCES.to_string());
    if let Some(sp) = &sources_path {
        if let Some(t) = read_table(sp, FLOWTEST_SOURCES, &SOURCES, &mut diags) {
            // A test refused for an error of its own is still a test of the file: its source
            // grades are not reported as naming an unknown test on top of that error.
            let named: HashSet<String> = table
                .rows()
                .iter()
                .map(|row| table.cell(row, "test").text.trim().to_string())
                .collect();
            read_sources(&t, net, &named, &mut tests, &mut diags);
        }
    }
    if diags.has_errors() {
        return Err(diags);
    }
    Ok(LoadedTests {
        tests: FlowTests {
            file,
            tests,
            sources_file,
        },
        diagnostics: diags,
    })
}

/// One row's cells with unit conversion and diagnostics.
struct RowReader<'a, 'd> {
    table: &'a Table,
    row: &'a Row,
    units: UnitSystem,
    diags: &'d mut Diagnostics,
}

impl<'a> RowReader<'a, '_> {
    fn cell(&self, name: &'a str) -> Cell<'a> {
        self.table.cell(self.row, name)
    }

    fn at(&self, name: &'a str) -> Location {
        self.cell(name).location(&self.table.file)
    }

    fn text(&self, name: &'a str) -> Option<&'a str> {
        let c = self.cell(name);
        (!c.is_empty()).then_some(c.text)
    }

    fn required_text(&mut self, name: &'a str, fix: &str) -> Option<&'a str> {
        let t = self.text(name);
        if t.is_none() {
            let loc = self.at(name);
            self.diags
                .error(loc, format!("`{name}` is empty"), fix.to_string());
        }
        t
    }

    /// A number as written (no conversion); `None` when empty or not a finite number.
    fn plain(&mut self, name: &'a str) -> Option<f64> {
        let c = self.cell(name);
        if c.is_empty() {
            return None;
        }
        match c.text.parse::<f64>() {
            Ok(v) if v.is_finite() => Some(v),
            _ => {
                let loc = self.at(name);
                self.diags.error(
                    loc,
                    format!("`{}` is not a finite number (column `{name}`)", c.text),
                    "write a plain decimal number such as 12.5 or 1.25e1",
                );
                None
            }
        }
    }

    /// A positive number in the file's unit of `q`, converted to SI.
    fn positive(&mut self, name: &'a str, q: Quantity, fix: &str) -> Option<f64> {
        let v = self.plain(name)?;
        if v > 0.0 {
            let si = self.units.to_si(q, v);
            let limit = match q {
                Quantity::Pressure => &limits::PRESSURE,
                Quantity::Flow => &limits::FLOW,
                Quantity::Diameter => &limits::DIAMETER,
                _ => return Some(si),
            };
            if limit.holds(si) {
                return Some(si);
            }
            let (loc, what) = (self.at(name), format!("`{name}`"));
            self.diags.error(
                loc,
                limit.message(&what, v, self.units),
                limit.fix(&what, self.units),
            );
            return None;
        }
        let loc = self.at(name);
        self.diags.error(
            loc,
            format!("`{name}` must be positive, got {}", display_value(v)),
            fix.to_string(),
        );
        None
    }

    fn hydrant(&mut self, name: &'a str, net: &Network) -> Option<usize> {
        let id = self.required_text(name, "give the hydrant id as in hydrants.csv")?;
        match net.hydrant_by_id(id) {
            Some(h) => Some(h),
            None => {
                let loc = self.at(name);
                let near = net
                    .hydrants
                    .iter()
                    .map(|h| (strsim::jaro_winkler(&h.id, id), h.id.as_str()))
                    .filter(|(s, _)| *s > 0.85)
                    .max_by(|a, b| a.0.total_cmp(&b.0))
                    .map(|(_, h)| format!(" (did you mean `{h}`?)"))
                    .unwrap_or_default();
                self.diags.error(
                    loc,
                    format!("`{id}` is not a hydrant id of the network{near}"),
                    "use the id of a hydrant in hydrants.csv (ids are compared exactly)",
                );
                None
            }
        }
    }
}

/// The values a test's rows share, with the line that first gave them.
struct Shared {
    date: Option<String>,
    residual_hydrant: Option<usize>,
    static_kpa: Option<f64>,
    residual_kpa: Option<f64>,
    demand_factor: Option<f64>,
}

const SHARED_FIX: &str =
    "give a test's shared values (date, residual hydrant, pressures, demand factor) once, or the same on every row; a blank cell repeats the first row";

/// Reads the rows into tests, in the order of their first row.
fn read_tests(t: &Table, net: &Network, diags: &mut Diagnostics) -> Vec<FlowTest> {
    let mut order: Vec<String> = Vec::new();
    let mut by_id: HashMap<String, (FlowTest, Shared, bool)> = HashMap::new();
    for row in t.rows() {
        let mut r = RowReader {
            table: t,
            row,
            units: net.units,
            diags,
        };
        let Some(id) = r.required_text("test", "give every row the id of its test") else {
            continue;
        };
        let shared = read_shared(&mut r, net);
        let outlet = read_outlet(&mut r, net);
        let notes = r.text("notes").unwrap_or("").to_string();
        let entry = by_id.entry(id.to_string()).or_insert_with(|| {
            order.push(id.to_string());
            (
                FlowTest {
                    id: id.to_string(),
                    date: None,
                    residual_hydrant: usize::MAX,
                    static_kpa: f64::NAN,
                    residual_kpa: f64::NAN,
                    demand_factor: 1.0,
                    outlets: Vec::new(),
                    source_grades: Vec::new(),
                    notes: String::new(),
                    line: row.line,
                },
                Shared {
                    date: None,
                    residual_hydrant: None,
                    static_kpa: None,
                    residual_kpa: None,
                    demand_factor: None,
                },
                true,
            )
        });
        merge_shared(&mut entry.1, shared, t, row, diags);
        if !notes.is_empty() {
            if !entry.0.notes.is_empty() {
                entry.0.notes.push_str("; ");
            }
            entry.0.notes.push_str(&notes);
        }
        match outlet {
            Some(o) => entry.0.outlets.push(o),
            None => entry.2 = false,
        }
    }
    let mut tests = Vec::new();
    for id in order {
        let Some((mut test, shared, ok)) = by_id.remove(&id) else {
            continue;
        };
        if finish_test(&mut test, shared, t, net, diags) && ok {
            tests.push(test);
        }
    }
    tests
}

/// Reads one row's shared values (each may be blank on later rows).
fn read_shared(r: &mut RowReader<'_, '_>, net: &Network) -> Shared {
    let pressure_fix =
        "give the pressure read at the residual hydrant, in the network's pressure unit";
    let residual_hydrant = if r.text("residual_hydrant").is_some() {
        r.hydrant("residual_hydrant", net)
    } else {
        None
    };
    let static_kpa = r.positive("static_pressure", Quantity::Pressure, pressure_fix);
    let residual_kpa = r
        .plain("residual_pressure")
        .map(|v| r.units.to_si(Quantity::Pressure, v));
    if let Some(p) = residual_kpa {
        if p < 0.0 {
            let loc = r.at("residual_pressure");
            r.diags.error(
                loc,
                "`residual_pressure` is negative",
                "give the gauge pressure read at the residual hydrant while the outlets flowed",
            );
        }
    }
    let demand_factor = r.plain("demand_factor");
    if let Some(f) = demand_factor {
        if !(f > 0.0 && limits::DEMAND_FACTOR.holds(f)) {
            let loc = r.at("demand_factor");
            r.diags.error(
                loc,
                limits::DEMAND_FACTOR.message("`demand_factor`", f, UnitSystem::Si),
                "give the ratio of the demand at the hour of the test to average-day demand (blank: 1)",
            );
        }
    }
    Shared {
        date: r.text("date").map(str::to_string),
        residual_hydrant,
        static_kpa,
        residual_kpa: residual_kpa.filter(|p| *p >= 0.0),
        demand_factor: demand_factor.filter(|f| *f > 0.0 && limits::DEMAND_FACTOR.holds(*f)),
    }
}

/// Takes the row's shared values into the test's, reporting values that differ from an
/// earlier row.
fn merge_shared(
    into: &mut Shared,
    row_values: Shared,
    t: &Table,
    row: &Row,
    diags: &mut Diagnostics,
) {
    fn merge<T: PartialEq + Clone>(
        slot: &mut Option<T>,
        value: Option<T>,
        name: &str,
        t: &Table,
        row: &Row,
        diags: &mut Diagnostics,
    ) {
        match (slot.as_ref(), value) {
            (None, v) => *slot = v,
            (Some(a), Some(b)) if *a != b => diags.error(
                t.cell(row, name).location(&t.file),
                format!("`{name}` differs from an earlier row of the same test"),
                SHARED_FIX,
            ),
            _ => {}
        }
    }
    merge(&mut into.date, row_values.date, "date", t, row, diags);
    merge(
        &mut into.residual_hydrant,
        row_values.residual_hydrant,
        "residual_hydrant",
        t,
        row,
        diags,
    );
    merge(
        &mut into.static_kpa,
        row_values.static_kpa,
        "static_pressure",
        t,
        row,
        diags,
    );
    merge(
        &mut into.residual_kpa,
        row_values.residual_kpa,
        "residual_pressure",
        t,
        row,
        diags,
    );
    merge(
        &mut into.demand_factor,
        row_values.demand_factor,
        "demand_factor",
        t,
        row,
        diags,
    );
}

/// Reads one row's flowing outlet: a pitot reading or a measured flow.
fn read_outlet(r: &mut RowReader<'_, '_>, net: &Network) -> Option<Outlet> {
    let hydrant = r.hydrant("flow_hydrant", net);
    let metered = r.text("measured_flow").is_some();
    let pitot_given = ["outlet_diameter", "outlet_coefficient", "pitot_pressure"]
        .iter()
        .any(|c| r.text(c).is_some());
    let line = r.row.line;
    let reading = match (metered, pitot_given) {
        (true, true) => {
            let loc = r.at("measured_flow");
            r.diags.error(
                loc,
                "both a measured flow and pitot columns are given for this outlet",
                "give either `measured_flow` (meter or diffuser) or the pitot columns (outlet_diameter, outlet_coefficient, pitot_pressure), not both",
            );
            None
        }
        (false, false) => {
            r.diags.error(
                Location::line(&r.table.file, line),
                "this outlet has neither a pitot reading nor a measured flow",
                "give outlet_diameter, outlet_coefficient and pitot_pressure, or measured_flow",
            );
            None
        }
        (true, false) => r
            .positive(
                "measured_flow",
                Quantity::Flow,
                "give the flow read at the outlet's meter or diffuser, in the network's flow unit",
            )
            .map(|flow_m3s| OutletReading::Metered { flow_m3s }),
        (false, true) => read_pitot(r),
    };
    Some(Outlet {
        hydrant: hydrant?,
        reading: reading?,
        line,
    })
}

fn read_pitot(r: &mut RowReader<'_, '_>) -> Option<OutletReading> {
    let d_fix = "give the outlet's inside diameter in the network's diameter unit (2.5 in / 63.5 mm for a hose outlet, 4.5 in / 114.3 mm for a pumper outlet)";
    if r.text("outlet_diameter").is_none() {
        let loc = r.at("outlet_diameter");
        r.diags.error(loc, "`outlet_diameter` is empty", d_fix);
    }
    let diameter = r.positive("outlet_diameter", Quantity::Diameter, d_fix);
    if let Some(d) = diameter {
        let inches = UnitSystem::Us.from_si(Quantity::Diameter, d);
        if inches < OUTLET_DIAMETER_IN.0 || inches > OUTLET_DIAMETER_IN.1 {
            let loc = r.at("outlet_diameter");
            r.diags.warning(
                loc,
                format!(
                    "outlet diameter {} {} is not a hydrant outlet size",
                    r.cell("outlet_diameter").text,
                    r.units.symbol(Quantity::Diameter)
                ),
                "check the unit: hydrant outlets are 2.5 or 4.5 in (63.5 or 114.3 mm)",
            );
        }
    }
    let c_fix = "give the outlet coefficient: 0.90 smooth rounded outlet, 0.80 square sharp-edged, 0.70 square projecting into the barrel, 0.95 with a flow tube (NFPA 291 Fig. 4.9.1, §4.9.2)";
    let coefficient = match r.plain("outlet_coefficient") {
        None => {
            if r.text("outlet_coefficient").is_none() {
                let loc = r.at("outlet_coefficient");
                r.diags.error(loc, "`outlet_coefficient` is empty", c_fix);
            }
            None
        }
        Some(c) if c < COEFFICIENT_RANGE.0 || c > COEFFICIENT_RANGE.1 => {
            let loc = r.at("outlet_coefficient");
            r.diags.error(
                loc,
                format!("outlet coefficient {} is outside 0.5-1.0", display_value(c)),
                c_fix,
            );
            None
        }
        Some(c) => Some(c),
    };
    let p_fix = "give the pitot (velocity) pressure read in the stream, in the network's pressure unit; a zero reading means the outlet did not flow: leave the row out";
    if r.text("pitot_pressure").is_none() {
        let loc = r.at("pitot_pressure");
        r.diags.error(loc, "`pitot_pressure` is empty", p_fix);
    }
    let pitot = r.positive("pitot_pressure", Quantity::Pressure, p_fix);
    Some(OutletReading::Pitot {
        diameter_m: diameter?,
        coefficient: coefficient?,
        pitot_kpa: pitot?,
    })
}

/// Checks a test's shared values and fills them in; `false` on errors.
fn finish_test(
    test: &mut FlowTest,
    shared: Shared,
    t: &Table,
    net: &Network,
    diags: &mut Diagnostics,
) -> bool {
    let at = Location::line(&t.file, test.line);
    let mut ok = true;
    let mut missing = |what: &str, fix: &str, diags: &mut Diagnostics| {
        diags.error(
            at.clone(),
            format!("test `{}` has no {what}", test.id),
            fix.to_string(),
        );
        ok = false;
    };
    match shared.residual_hydrant {
        Some(h) => test.residual_hydrant = h,
        None => missing(
            "residual hydrant",
            "give `residual_hydrant` on the test's first row",
            diags,
        ),
    }
    match shared.static_kpa {
        Some(p) => test.static_kpa = p,
        None => missing(
            "static pressure",
            "give `static_pressure` on the test's first row",
            diags,
        ),
    }
    match shared.residual_kpa {
        Some(p) => test.residual_kpa = p,
        None => missing(
            "residual pressure",
            "give `residual_pressure` on the test's first row",
            diags,
        ),
    }
    test.demand_factor = shared.demand_factor.unwrap_or(1.0);
    test.date = shared.date;
    if !ok {
        return false;
    }
    if test.residual_kpa >= test.static_kpa {
        let row = t.rows().iter().find(|r| r.line == test.line);
        let loc = row
            .map(|r| t.cell(r, "residual_pressure").location(&t.file))
            .unwrap_or(at.clone());
        diags.error(
            loc,
            format!(
                "test `{}`: the residual pressure is not below the static pressure",
                test.id
            ),
            "check the two readings: the residual is read while the outlets flow and must be lower than the static",
        );
        return false;
    }
    if let Some(o) = test
        .outlets
        .iter()
        .find(|o| o.hydrant == test.residual_hydrant)
    {
        diags.error(
            Location::line(&t.file, o.line),
            format!(
                "test `{}`: hydrant `{}` is both the residual hydrant and a flow hydrant",
                test.id, net.hydrants[o.hydrant].id
            ),
            "read static and residual pressure at a hydrant that does not flow (NFPA 291 Fig. 4.4.4)",
        );
        return false;
    }
    true
}

/// Reads per-test source grades into the tests.
/// `named` holds every test id of the tests file, including those of tests refused for errors.
fn read_sources(
    t: &Table,
    net: &Network,
    named: &HashSet<String>,
    tests: &mut [FlowTest],
    diags: &mut Diagnostics,
) {
    let index: HashMap<String, usize> = tests
        .iter()
        .enumerate()
        .map(|(i, x)| (x.id.clone(), i))
        .collect();
    let mut seen: HashMap<(String, usize), u64> = HashMap::new();
    for row in t.rows() {
        let mut r = RowReader {
            table: t,
            row,
            units: net.units,
            diags,
        };
        if let Some((ti, node, grade)) = source_row(&mut r, net, named, &index, &mut seen) {
            tests[ti].source_grades.push((node, grade));
        }
    }
}

/// One row of the sources file: (index of its test, source node, grade in m), or `None`
/// when the row is refused (with its error) or names a test refused for errors of its own.
fn source_row<'a>(
    r: &mut RowReader<'a, '_>,
    net: &Network,
    named: &HashSet<String>,
    index: &HashMap<String, usize>,
    seen: &mut HashMap<(String, usize), u64>,
) -> Option<(usize, usize, f64)> {
    let test = r.required_text("test", "give the id of a test in the tests file");
    let source = r.required_text(
        "source",
        "give the id of a reservoir or tank in sources.csv",
    );
    let grade = r.plain("grade").map(|g| r.units.to_si(Quantity::Length, g));
    if r.text("grade").is_none() {
        let loc = r.at("grade");
        r.diags.error(
            loc,
            "`grade` is empty",
            "give the water-surface grade of the source at the time of the test",
        );
    }
    let (test, source, grade) = (test?, source?, grade?);
    let Some(&ti) = index.get(test) else {
        if !named.contains(test) {
            let loc = r.at("test");
            r.diags.error(
                loc,
                format!("`{test}` is not a test of the tests file"),
                "use a test id of the tests file (ids are compared exactly)",
            );
        }
        return None;
    };
    let node = net
        .node_by_id(source)
        .filter(|&n| !net.nodes[n].is_junction());
    let Some(node) = node else {
        let loc = r.at("source");
        r.diags.error(
            loc,
            format!("`{source}` is not a reservoir or tank of sources.csv"),
            "use the id of a source in sources.csv",
        );
        return None;
    };
    if let Some(first) = seen.insert((test.to_string(), node), r.row.line) {
        let loc = r.at("source");
        r.diags.error(
            loc,
            format!("source `{source}` is given twice for test `{test}` (also on line {first})"),
            "give each source's grade once per test",
        );
        return None;
    }
    if !limits::ELEVATION.holds(grade) {
        let loc = r.at("grade");
        r.diags.error(
            loc,
            format!("grade `{}` is not plausible", r.cell("grade").text),
            "give the grade (elevation of the water surface) in the network's length unit",
        );
        return None;
    }
    Some((ti, node, grade))
}

/// The label of every pipe in column `column` of the network's pipes.csv: (link index, label),
/// pipes with an empty cell left out. An error when the column is absent.
pub fn pipe_labels(
    dir: &Path,
    column: &str,
    net: &Network,
) -> Result<Vec<(usize, String)>, Diagnostics> {
    let column = column.trim().to_ascii_lowercase();
    let known = ["id", column.as_str()];
    let spec = TableSpec {
        known: &known,
        required: &["id"],
    };
    let mut diags = Diagnostics::new();
    let Some(t) = read_table(&dir.join("pipes.csv"), "pipes.csv", &spec, &mut diags) else {
        return Err(diags);
    };
    if !t.has_column(&column) {
        let mut d = Diagnostics::new();
        d.error(
            Location::file("pipes.csv"),
            format!("--calibrate-by {column}: pipes.csv has no column `{column}`"),
            "name a column of pipes.csv (e.g. material), or add a column such as `group` that names each pipe's group",
        );
        return Err(d);
    }
    let mut labels = Vec::new();
    for row in t.rows() {
        let id = t.cell(row, "id");
        let label = t.cell(row, &column);
        if let (Some(link), false) = (net.link_by_id(id.text), label.is_empty()) {
            labels.push((link, label.text.to_string()));
        }
    }
    Ok(labels)
}
