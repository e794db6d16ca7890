//! Reading a network folder: `model.toml` and the CSV files, converted to SI once, here.
//!
//! Every problem is collected with its file, line and column; the network is built only when
//! there is no error. See docs/network-format.md for the format.

use std::collections::{BTreeSet, HashMap, HashSet};
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use super::diagnostic::{Diagnostics, Location};
use super::limits;
use super::network::{
    DemandFactors, HeadlossFormula, Hydrant, Lateral, Link, LinkKind, Network, Node, NodeKind,
    Pipe, PipeStatus, Pump, TankStorage, Valve, ValveKind, ValveStatus, DEFAULT_LATERAL_C,
    DEFAULT_LATERAL_ROUGHNESS_M,
};
use super::table::{parse_table, read_table, Cell, Cells, Row, Table, TableSpec};
use super::toml_input::{parse_toml, read_toml, span_location};
use super::{
    HYDRANTS_FILE, JUNCTIONS_FILE, MODEL_FILE, PIPES_FILE, PUMPS_FILE, SOURCES_FILE, VALVES_FILE,
};
use crate::units::{display_value, Quantity, UnitSystem};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ModelFile {
    name: String,
    units: UnitSystem,
    headloss: HeadlossName,
    /// The coordinate reference system of the x/y columns (`EPSG:NNNN`), see docs/gis.md.
    crs: Option<String>,
    demand: DemandTable,
}

#[derive(Deserialize, Clone, Copy)]
#[serde(rename_all = "kebab-case")]
enum HeadlossName {
    HazenWilliams,
    DarcyWeisbach,
}

impl HeadlossName {
    fn formula(self) -> HeadlossFormula {
        match self {
            HeadlossName::HazenWilliams => HeadlossFormula::HazenWilliams,
            HeadlossName::DarcyWeisbach => HeadlossFormula::DarcyWeisbach,
        }
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct DemandTable {
    max_day_factor: Spanned<f64>,
    peak_hour_factor: Spanned<f64>,
    min_hour_factor: Option<Spanned<f64>>,
}

const JUNCTIONS: TableSpec<'static> = TableSpec {
    known: &["id", "elevation", "demand", "zone", "x", "y"],
    required: &["id", "elevation"],
};
const SOURCES: TableSpec<'static> = TableSpec {
    known: &[
        "id",
        "kind",
        "grade",
        "x",
        "y",
        "diameter",
        "min_level",
        "max_level",
    ],
    required: &["id", "kind", "grade"],
};
/// The columns of pipes.csv (`material` is an optional extra that firemain keeps).
pub const PIPE_COLUMNS: &[&str] = &[
    "id",
    "from",
    "to",
    "length",
    "diameter",
    "roughness",
    "minor_loss",
    "status",
    "material",
];

const PIPES: TableSpec<'static> = TableSpec {
    known: PIPE_COLUMNS,
    required: &["id", "from", "to", "length", "diameter", "roughness"],
};
const HYDRANTS: TableSpec<'static> = TableSpec {
    known: &[
        "id",
        "junction",
        "required_flow",
        "class",
        "x",
        "y",
        "lateral_length",
        "lateral_diameter",
        "lateral_roughness",
    ],
    required: &["id", "junction"],
};
const PUMPS: TableSpec<'static> = TableSpec {
    known: &[
        "id",
        "from",
        "to",
        "shutoff_head",
        "design_flow",
        "design_head",
        "runout_flow",
        "runout_head",
        "speed",
        "status",
    ],
    required: &[
        "id",
        "from",
        "to",
        "shutoff_head",
        "design_flow",
        "design_head",
        "runout_flow",
        "runout_head",
    ],
};
const VALVES: TableSpec<'static> = TableSpec {
    known: &[
        "id",
        "from",
        "to",
        "kind",
        "diameter",
        "setting",
        "minor_loss",
        "status",
    ],
    required: &["id", "from", "to", "kind", "diameter"],
};

/// A network read without errors, with its warnings and notes.
#[derive(Debug)]
pub struct Loaded {
    pub network: Network,
    pub diagnostics: Diagnostics,
}

/// Where a network's files are read from: a folder, or files held in memory (a network about
/// to be written, checked before any of it is).
#[derive(Clone, Copy)]
enum Files<'a> {
    Folder(&'a Path),
    Memory(&'a [(String, Vec<u8>)]),
}

impl Files<'_> {
    fn has(&self, name: &str) -> bool {
        match self {
            Files::Folder(dir) => dir.join(name).exists(),
            Files::Memory(files) => files.iter().any(|(n, _)| n == name),
        }
    }

    fn table(&self, name: &str, spec: &TableSpec<'_>, diags: &mut Diagnostics) -> Option<Table> {
        match self {
            Files::Folder(dir) => read_table(&dir.join(name), name, spec, diags),
            Files::Memory(files) => match files.iter().find(|(n, _)| n == name) {
                Some((_, bytes)) => parse_table(bytes, name, spec, diags),
                None => {
                    diags.error(
                        Location::file(name),
                        "the file is missing",
                        "write the file",
                    );
                    None
                }
            },
        }
    }
}

/// Reads the network folder `dir`. On error, every finding (errors, warnings, notes) is returned.
pub fn load_network(dir: &Path) -> Result<Loaded, Diagnostics> {
    let mut diags = Diagnostics::new();
    if !dir.is_dir() {
        diags.error(
            Location::file(dir.display().to_string()),
            "is not a folder",
            "give the path of a network folder holding model.toml, junctions.csv, sources.csv and pipes.csv",
        );
        return Err(diags);
    }
    let Some((model, model_text)) = read_model(dir, &mut diags) else {
        return Err(diags);
    };
    let (reader, demand_factors, n_junctions, hydrants) =
        read_rows(Files::Folder(dir), &model, &model_text, diags);
    reader.into_network(model, demand_factors, n_junctions, hydrants)
}

/// Reads a network's files from their bytes, as (file name, bytes), row by row exactly as
/// [`load_network`] reads them from a folder, but without its checks of the network as a whole
/// (supply, connectivity): for a command about to write a network that its user completes
/// before analysing it (an import whose layers carry no pumps or valves). Every finding on
/// error.
pub fn read_network_rows(files: &[(String, Vec<u8>)]) -> Result<(), Diagnostics> {
    let mut diags = Diagnostics::new();
    let Some(text) = files
        .iter()
        .find(|(n, _)| n == MODEL_FILE)
        .and_then(|(_, bytes)| std::str::from_utf8(bytes).ok())
    else {
        diags.error(
            Location::file(MODEL_FILE),
            "the file is missing or not UTF-8",
            MODEL_FIX,
        );
        return Err(diags);
    };
    let Some(model) = parse_toml::<ModelFile>(text, MODEL_FILE, MODEL_FIX, &mut diags) else {
        return Err(diags);
    };
    let (reader, ..) = read_rows(Files::Memory(files), &model, text, diags);
    if reader.diags.has_errors() {
        Err(reader.diags)
    } else {
        Ok(())
    }
}

/// The reader after every row of every file, with the demand factors, the number of junctions
/// and the hydrants read.
fn read_rows(
    files: Files<'_>,
    model: &ModelFile,
    model_text: &str,
    diags: Diagnostics,
) -> (Reader, DemandFactors, usize, Vec<Hydrant>) {
    let mut reader = Reader::new(model.units, model.headloss.formula(), diags);
    let demand_factors = reader.demand_factors(&model.demand, model_text);
    let n_junctions = reader.read_nodes(files);
    reader.read_links(files, n_junctions);
    let hydrants = reader.read_hydrants(files, n_junctions);
    (reader, demand_factors, n_junctions, hydrants)
}

/// What to do about a model.toml that cannot be read.
const MODEL_FIX: &str = "a network folder needs model.toml with name, units, headloss and a [demand] table (see docs/network-format.md)";

/// Reads model.toml, with its text for the locations of its values; `None` when it cannot be
/// read (reported).
fn read_model(dir: &Path, diags: &mut Diagnostics) -> Option<(ModelFile, String)> {
    read_toml(&dir.join(MODEL_FILE), MODEL_FILE, MODEL_FIX, diags)
}

/// Nodes are read with their zone name in a side table; here the names become indices.
fn assign_zones(nodes: Vec<(Node, Option<String>)>, zones: &[String]) -> Vec<Node> {
    nodes
        .into_iter()
        .map(|(mut node, zone)| {
            node.zone = zone.and_then(|z| zones.binary_search(&z).ok());
            node
        })
        .collect()
}

struct Reader {
    units: UnitSystem,
    headloss: HeadlossFormula,
    diags: Diagnostics,
    nodes: Vec<(Node, Option<String>)>,
    node_lines: HashMap<String, (String, u64, usize)>,
    zones: BTreeSet<String>,
    links: Vec<Link>,
    link_lines: HashMap<String, (String, u64)>,
    /// A node file (junctions.csv or sources.csv) could not be read or has no rows: references
    /// to nodes are not checked, so that one bad file gives one error, not one per reference.
    nodes_unreadable: bool,
    /// Ids of node rows that had errors: references to them are not errors of their own.
    broken_nodes: HashSet<String>,
}

impl Reader {
    fn new(units: UnitSystem, headloss: HeadlossFormula, diags: Diagnostics) -> Self {
        Reader {
            units,
            headloss,
            diags,
            nodes: Vec::new(),
            node_lines: HashMap::new(),
            zones: BTreeSet::new(),
            links: Vec::new(),
            link_lines: HashMap::new(),
            nodes_unreadable: false,
            broken_nodes: HashSet::new(),
        }
    }

    /// Reads the table `name`; `None` when it cannot be read (reported).
    fn table(&mut self, files: Files<'_>, name: &str, spec: &TableSpec<'_>) -> Option<Table> {
        files.table(name, spec, &mut self.diags)
    }

    /// Reads the table `name` when the network has it: the file is optional.
    fn optional_table(
        &mut self,
        files: Files<'_>,
        name: &str,
        spec: &TableSpec<'_>,
    ) -> Option<Table> {
        if files.has(name) {
            self.table(files, name, spec)
        } else {
            None
        }
    }

    /// Reads junctions.csv and sources.csv into the nodes, junctions first; returns the number
    /// of junctions (the nodes after them are sources). Both files are read before their rows,
    /// so that whether references to nodes are checked is known before any row is.
    fn read_nodes(&mut self, files: Files<'_>) -> usize {
        let junctions = self.table(files, JUNCTIONS_FILE, &JUNCTIONS);
        let sources = self.table(files, SOURCES_FILE, &SOURCES);
        self.nodes_unreadable = [&junctions, &sources]
            .iter()
            .any(|t| t.as_ref().is_none_or(|t| t.rows().is_empty()));
        if let Some(t) = &junctions {
            self.junctions(t);
        }
        let n_junctions = self.nodes.len();
        if let Some(t) = &sources {
            self.sources(t);
        }
        n_junctions
    }

    /// Reads pipes.csv, and pumps.csv and valves.csv where the folder has them, into the links.
    fn read_links(&mut self, files: Files<'_>, n_junctions: usize) {
        if let Some(t) = self.table(files, PIPES_FILE, &PIPES) {
            self.pipes(&t);
        }
        if let Some(t) = self.optional_table(files, PUMPS_FILE, &PUMPS) {
            self.pumps(&t);
        }
        if let Some(t) = self.optional_table(files, VALVES_FILE, &VALVES) {
            self.valves(&t, n_junctions);
        }
    }

    /// Reads hydrants.csv where the folder has it; no hydrants otherwise.
    fn read_hydrants(&mut self, files: Files<'_>, n_junctions: usize) -> Vec<Hydrant> {
        match self.optional_table(files, HYDRANTS_FILE, &HYDRANTS) {
            Some(t) => self.hydrants(&t, n_junctions),
            None => Vec::new(),
        }
    }

    /// The network of what was read, checked as a whole; every finding when there is an error.
    fn into_network(
        self,
        model: ModelFile,
        demand_factors: DemandFactors,
        n_junctions: usize,
        hydrants: Vec<Hydrant>,
    ) -> Result<Loaded, Diagnostics> {
        let Reader {
            mut diags,
            nodes,
            zones,
            links,
            ..
        } = self;
        if diags.has_errors() {
            return Err(diags);
        }
        let zones: Vec<String> = zones.into_iter().collect();
        let mut network = Network::new(
            model.name,
            model.units,
            model.headloss.formula(),
            demand_factors,
            assign_zones(nodes, &zones),
            n_junctions,
            links,
            hydrants,
            zones,
        );
        network.crs = model.crs.map(|c| super::gis::crs::normalize(&c));
        super::validate::check_network(&network, &mut diags);
        if diags.has_errors() {
            return Err(diags);
        }
        Ok(Loaded {
            network,
            diagnostics: diags,
        })
    }

    fn demand_factors(&mut self, d: &DemandTable, text: &str) -> DemandFactors {
        let at = |v: &Spanned<f64>| span_location(MODEL_FILE, text, v.span());
        let check = |name: &str, v: &Spanned<f64>, diags: &mut Diagnostics| {
            let x = *v.get_ref();
            if !(x.is_finite() && x > 0.0) {
                diags.error(
                    at(v),
                    format!(
                        "[demand] {name} must be a positive number, got {}",
                        display_value(x)
                    ),
                    "give the ratio of the condition's demand to average-day demand (e.g. 1.5)",
                );
            } else if !limits::DEMAND_FACTOR.holds(x) {
                let what = format!("[demand] {name}");
                diags.error(
                    at(v),
                    limits::DEMAND_FACTOR.message(&what, x, UnitSystem::Si),
                    "give the ratio of the condition's demand to average-day demand (e.g. 1.5)",
                );
            }
        };
        check("max_day_factor", &d.max_day_factor, &mut self.diags);
        check("peak_hour_factor", &d.peak_hour_factor, &mut self.diags);
        if let Some(m) = &d.min_hour_factor {
            check("min_hour_factor", m, &mut self.diags);
        }
        let (max_day, peak_hour) = (*d.max_day_factor.get_ref(), *d.peak_hour_factor.get_ref());
        if max_day < 1.0 || peak_hour < max_day {
            self.diags.warning(
                at(&d.max_day_factor),
                format!(
                    "unusual demand factors: max-day {} and peak-hour {} (usually 1 <= max-day <= peak-hour)",
                    display_value(max_day),
                    display_value(peak_hour)
                ),
                "check [demand] in model.toml; typical values are max-day 1.5-2.0 and peak-hour 2.0-4.0 \
                 (common practice, no source)",
            );
        }
        DemandFactors {
            max_day,
            peak_hour,
            min_hour: d.min_hour_factor.as_ref().map(|m| *m.get_ref()),
        }
    }

    fn cells<'t>(&mut self, table: &'t Table, row: &'t Row) -> Cells<'t, '_> {
        Cells::new(table, row, self.units, &mut self.diags)
    }

    /// Registers a node id; an error when it is already used.
    fn claim_node_id(&mut self, id: &Cell<'_>, file: &str, index: usize) -> bool {
        if let Some((other_file, other_line, _)) = self.node_lines.get(id.text) {
            self.diags.error(
                id.location(file),
                format!(
                    "node id `{}` is used twice (also at {other_file}:{other_line})",
                    id.text
                ),
                "give every junction and source its own id",
            );
            return false;
        }
        self.node_lines
            .insert(id.text.to_string(), (file.to_string(), id.line, index));
        true
    }

    /// The link `id` from `from` to `to`, its line that of its id, unless the id is taken
    /// (then reported).
    fn claimed_link(
        &mut self,
        id: &Cell<'_>,
        file: &str,
        (from, to): (usize, usize),
        kind: LinkKind,
    ) -> Option<Link> {
        if !self.claim_link_id(id, file) {
            return None;
        }
        Some(Link {
            id: id.text.to_string(),
            from,
            to,
            kind,
            line: id.line,
        })
    }

    fn claim_link_id(&mut self, id: &Cell<'_>, file: &str) -> bool {
        if let Some((other_file, other_line)) = self.link_lines.get(id.text) {
            self.diags.error(
                id.location(file),
                format!(
                    "link id `{}` is used twice (also at {other_file}:{other_line})",
                    id.text
                ),
                "give every pipe, pump and valve its own id",
            );
            return false;
        }
        self.link_lines
            .insert(id.text.to_string(), (file.to_string(), id.line));
        true
    }

    /// Remembers the id of a node row that had errors (already reported).
    fn broken_row_id(&mut self, t: &Table, row: &Row) {
        let id = t.cell(row, "id");
        if !id.is_empty() {
            self.broken_nodes.insert(id.text.to_string());
        }
    }

    /// Remembers the ids of the node rows the table reader refused whole (already reported).
    fn refused_node_rows(&mut self, t: &Table) {
        for id in t.refused_ids() {
            self.broken_nodes.insert(id.to_string());
        }
    }

    /// Whether a reference to the unknown node `id` is only a consequence of an error already
    /// reported (an unreadable node file, or a node row with errors).
    fn knock_on(&self, id: &str) -> bool {
        self.nodes_unreadable || self.broken_nodes.contains(id)
    }

    fn node_ref(&mut self, cell: &Cell<'_>, file: &str, what: &str) -> Option<usize> {
        match self.node_lines.get(cell.text) {
            Some(&(_, _, index)) => Some(index),
            None if self.knock_on(cell.text) => None,
            None => {
                self.diags.error(
                    cell.location(file),
                    format!("{what} `{}` is not a junction or source id", cell.text),
                    "use the id of a node in junctions.csv or sources.csv (ids are compared exactly)",
                );
                None
            }
        }
    }

    fn junctions(&mut self, t: &Table) {
        let file = t.file.as_str();
        self.refused_node_rows(t);
        if t.rows().is_empty() {
            self.diags.error(
                Location::file(file),
                "there are no junctions",
                "list the network's junctions, one per row",
            );
        }
        for row in t.rows() {
            let mut c = self.cells(t, row);
            let id = c.id("id");
            let elevation = c.required_number("elevation", Quantity::Length);
            let elevation = c.within(elevation, "elevation", &limits::ELEVATION);
            let demand = c.number("demand", Quantity::Flow);
            let demand_ok =
                c.within(demand, "demand", &limits::DEMAND).is_some() || demand.is_none();
            let demand = demand.unwrap_or(0.0);
            let zone = c.text("zone").map(str::to_string);
            let position = c.position();
            let (Some(id), Some(elevation), true) = (id, elevation, demand_ok) else {
                self.broken_row_id(t, row);
                continue;
            };
            let index = self.nodes.len();
            if !self.claim_node_id(&id, file, index) {
                continue;
            }
            if let Some(z) = &zone {
                self.zones.insert(z.clone());
            }
            self.nodes.push((
                Node {
                    id: id.text.to_string(),
                    kind: NodeKind::Junction,
                    elevation_m: elevation,
                    base_demand_m3s: demand,
                    grade_m: None,
                    zone: None,
                    position,
                    line: row.line,
                    storage: None,
                },
                zone,
            ));
        }
    }

    fn sources(&mut self, t: &Table) {
        let file = t.file.as_str();
        self.refused_node_rows(t);
        if t.rows().is_empty() {
            self.diags.error(
                Location::file(file),
                "there is no source: the network needs at least one reservoir or tank",
                "add a row with id, kind (reservoir or tank) and grade",
            );
        }
        for row in t.rows() {
            let mut c = self.cells(t, row);
            let id = c.id("id");
            let kind = c.choice(
                "kind",
                &[("reservoir", NodeKind::Reservoir), ("tank", NodeKind::Tank)],
                None,
            );
            let grade = c.required_number("grade", Quantity::Length);
            let grade = c.within(grade, "grade", &limits::ELEVATION);
            let position = c.position();
            let storage = tank_storage(&mut c);
            let (Some(id), Some(kind), Some(grade), Some(storage)) = (id, kind, grade, storage)
            else {
                self.broken_row_id(t, row);
                continue;
            };
            let storage = self.check_storage(t, row, kind, grade, storage);
            let index = self.nodes.len();
            if !self.claim_node_id(&id, file, index) {
                continue;
            }
            self.nodes.push((
                Node {
                    id: id.text.to_string(),
                    kind,
                    elevation_m: grade,
                    base_demand_m3s: 0.0,
                    grade_m: Some(grade),
                    zone: None,
                    position,
                    line: row.line,
                    storage,
                },
                None,
            ));
        }
    }

    /// The storage columns against the source's kind and grade: ignored with a warning for a
    /// reservoir; for a tank, `min_level` below `max_level` and the grade between them (an
    /// error at the cell to fix; the storage is then dropped, the grade kept).
    fn check_storage(
        &mut self,
        t: &Table,
        row: &Row,
        kind: NodeKind,
        grade: f64,
        storage: TankStorage,
    ) -> Option<TankStorage> {
        let file = t.file.as_str();
        let given = storage.diameter_m.is_some()
            || storage.min_level_m.is_some()
            || storage.max_level_m.is_some();
        if !given {
            return None;
        }
        if kind != NodeKind::Tank {
            self.diags.warning(
                Location::line(file, row.line),
                "`diameter`, `min_level` and `max_level` describe a tank; a reservoir's are ignored",
                "leave them empty for a reservoir, or make the source a tank",
            );
            return None;
        }
        let units = self.units;
        let shown = |v: f64| display_value(units.from_si(Quantity::Length, v));
        let u = units.symbol(Quantity::Length);
        if let (Some(lo), Some(hi)) = (storage.min_level_m, storage.max_level_m) {
            if lo >= hi {
                self.diags.error(
                    t.cell(row, "max_level").location(file),
                    format!("`max_level` {} {u} is not above `min_level` {} {u}", shown(hi), shown(lo)),
                    "give the levels as water-surface elevations on the datum of `grade`, the highest above the lowest",
                );
                return None;
            }
        }
        let below = storage.min_level_m.filter(|&lo| grade < lo);
        let above = storage.max_level_m.filter(|&hi| grade > hi);
        if let Some(level) = below.or(above) {
            self.diags.error(
                t.cell(row, "grade").location(file),
                format!(
                    "tank grade {} {u} lies outside its levels (the {} level is {} {u})",
                    shown(grade),
                    if below.is_some() { "lowest" } else { "highest" },
                    shown(level)
                ),
                "give the grade, `min_level` and `max_level` as water-surface elevations on one datum, the grade between the two levels",
            );
            return None;
        }
        Some(storage)
    }

    /// Reads `from` and `to`; `None` if either is unknown.
    fn ends(&mut self, t: &Table, row: &Row) -> Option<(usize, usize)> {
        let file = t.file.as_str();
        let from_cell = t.cell(row, "from");
        let to_cell = t.cell(row, "to");
        let mut ok = true;
        for cell in [&from_cell, &to_cell] {
            if cell.is_empty() {
                self.diags.error(
                    cell.location(file),
                    format!("`{}` is empty", cell.column_name),
                    "name the node at this end of the element",
                );
                ok = false;
            }
        }
        if !ok {
            return None;
        }
        let from = self.node_ref(&from_cell, file, "from node");
        let to = self.node_ref(&to_cell, file, "to node");
        Some((from?, to?))
    }

    fn pipes(&mut self, t: &Table) {
        if t.rows().is_empty() {
            self.diags.error(
                Location::file(t.file.as_str()),
                "there are no pipes",
                "list the network's pipes, one per row",
            );
        }
        for row in t.rows() {
            if let Some(link) = self.pipe(t, row) {
                self.links.push(link);
            }
        }
    }

    /// The pipe of one pipes.csv row; `None` when the row has an error (reported).
    fn pipe(&mut self, t: &Table, row: &Row) -> Option<Link> {
        let file = t.file.as_str();
        let ends = self.ends(t, row);
        let headloss = self.headloss;
        let mut c = self.cells(t, row);
        let id = c.id("id");
        let cells = read_pipe_cells(&mut c, headloss);
        let pipe = checked_pipe(&mut c, headloss, cells);
        let (Some(id), Some((from, to)), Some(pipe)) = (id, ends, pipe) else {
            return None;
        };
        if pipe.length_m == 0.0
            && pipe.minor_loss == 0.0
            && pipe.status != PipeStatus::Closed
            && from != to
        {
            // h = r Q^1.852 + m Q^2 with r = m = 0: a link without any resistance has no
            // head-loss law for the solver to invert (its matrix entry would be infinite).
            let loc = t.cell(row, "length").location(file);
            self.diags.error(
                loc,
                format!(
                    "pipe `{}` has zero length and no minor loss: it has no resistance at all, which the solver cannot handle",
                    id.text
                ),
                "give the pipe's length along its route, or a minor_loss (K) for a short connection such as a fitting",
            );
            return None;
        }
        self.claimed_link(&id, file, (from, to), LinkKind::Pipe(pipe))
    }

    fn pumps(&mut self, t: &Table) {
        let file = t.file.as_str();
        for row in t.rows() {
            let ends = self.ends(t, row);
            let mut c = self.cells(t, row);
            let id = c.id("id");
            let shutoff = c.required_number("shutoff_head", Quantity::Length);
            let design_q = c.required_number("design_flow", Quantity::Flow);
            let design_h = c.required_number("design_head", Quantity::Length);
            let runout_q = c.required_number("runout_flow", Quantity::Flow);
            let runout_h = c.required_number("runout_head", Quantity::Length);
            let shutoff = c.within(shutoff, "shutoff_head", &limits::HEAD);
            let design_q = c.within(design_q, "design_flow", &limits::FLOW);
            let design_h = c.within(design_h, "design_head", &limits::HEAD);
            let runout_q = c.within(runout_q, "runout_flow", &limits::FLOW);
            let runout_h = c.within(runout_h, "runout_head", &limits::HEAD);
            let speed = c.plain("speed").unwrap_or(1.0);
            let speed = c.positive(
                Some(speed),
                "speed",
                "give the relative speed (1.0 = rated)",
            );
            let speed = c.within(speed, "speed", &limits::PUMP_SPEED);
            let on = c.choice("status", &[("on", true), ("off", false)], Some(true));
            let (Some(id), Some((from, to)), Some(a), Some(q1), Some(h1), Some(q2), Some(h2)) =
                (id, ends, shutoff, design_q, design_h, runout_q, runout_h)
            else {
                continue;
            };
            let (Some(speed), Some(on)) = (speed, on) else {
                continue;
            };
            let loc = Location::line(file, row.line);
            if from == to {
                self.diags.error(
                    loc.clone(),
                    format!("pump `{}` has the same node at both ends", id.text),
                    "connect the pump's suction (from) and discharge (to) to different nodes",
                );
                continue;
            }
            let Some((b, c_exp)) = pump_curve(a, q1, h1, q2, h2) else {
                let u = self.units;
                self.diags.error(
                    loc,
                    format!(
                        "pump `{}`: the curve points are not usable: shutoff {} {l}, design ({} {f}, {} {l}), runout ({} {f}, {} {l})",
                        id.text,
                        display_value(u.from_si(Quantity::Length, a)),
                        display_value(u.from_si(Quantity::Flow, q1)),
                        display_value(u.from_si(Quantity::Length, h1)),
                        display_value(u.from_si(Quantity::Flow, q2)),
                        display_value(u.from_si(Quantity::Length, h2)),
                        l = u.symbol(Quantity::Length),
                        f = u.symbol(Quantity::Flow),
                    ),
                    "give 0 < design_flow < runout_flow and shutoff_head > design_head > runout_head >= 0",
                );
                continue;
            };
            let pump = Pump {
                shutoff_head_m: a,
                coefficient_b: b,
                exponent_c: c_exp,
                speed,
                on,
                design_point: (q1, h1),
                runout_point: (q2, h2),
            };
            if let Some(link) = self.claimed_link(&id, file, (from, to), LinkKind::Pump(pump)) {
                self.links.push(link);
            }
        }
    }

    fn valves(&mut self, t: &Table, n_junctions: usize) {
        let mut regulated = Regulated {
            n_junctions,
            by_junction: HashMap::new(),
        };
        for row in t.rows() {
            if let Some(link) = self.valve(t, row, &mut regulated) {
                self.links.push(link);
            }
        }
    }

    /// The valve of one valves.csv row; `None` when the row has an error (reported).
    fn valve(&mut self, t: &Table, row: &Row, regulated: &mut Regulated) -> Option<Link> {
        let file = t.file.as_str();
        let ends = self.ends(t, row);
        let mut c = self.cells(t, row);
        let id = c.id("id");
        let cells = read_valve_cells(&mut c);
        let (Some(id), Some(kind), Some(status), Some((from, to)), Some(diameter)) =
            (id, cells.kind, cells.status, ends, cells.diameter)
        else {
            return None;
        };
        let minor_loss = cells.minor_loss?;
        // Read last, once the rest of the row is sound: what the setting means depends on the
        // kind and the status.
        let setting = valve_setting(&mut c, kind, status)?;
        let valve = Valve {
            kind,
            diameter_m: diameter,
            setting,
            minor_loss,
            status,
        };
        let loc = Location::line(file, row.line);
        if from == to {
            self.diags.error(
                loc,
                format!("valve `{}` has the same node at both ends", id.text),
                "connect the valve's from and to ends to different nodes",
            );
            return None;
        }
        if !self.regulate(regulated, &loc, id.text, (from, to), &valve) {
            return None;
        }
        self.claimed_link(&id, file, (from, to), LinkKind::Valve(valve))
    }

    /// Registers the junction an active PRV or PSV controls (the downstream end of a PRV, the
    /// upstream end of a PSV); an error when that end is a source or another valve controls
    /// it already. Other valves control nothing.
    fn regulate(
        &mut self,
        regulated: &mut Regulated,
        loc: &Location,
        id: &str,
        (from, to): (usize, usize),
        valve: &Valve,
    ) -> bool {
        if valve.status != ValveStatus::Active {
            return true;
        }
        let (node, side_name) = match valve.kind {
            ValveKind::Prv => (to, "downstream (to)"),
            ValveKind::Psv => (from, "upstream (from)"),
            _ => return true,
        };
        if node >= regulated.n_junctions {
            self.diags.error(
                loc.clone(),
                format!(
                    "{} `{id}`: its controlled {side_name} side is a fixed-grade source, so the setting decides nothing",
                    valve.kind.name(),
                ),
                "connect the valve to a junction on its controlled side, or make it a throttle or an open valve",
            );
            return false;
        }
        if let Some(other) = regulated.by_junction.get(&node) {
            self.diags.error(
                loc.clone(),
                format!(
                    "{} `{id}` and valve `{other}` both control the pressure at the same junction; their split of the flow is undefined",
                    valve.kind.name(),
                ),
                "keep one regulating valve per controlled junction (e.g. model parallel PRVs as one valve, or set one to closed)",
            );
            return false;
        }
        regulated.by_junction.insert(node, id.to_string());
        true
    }

    fn hydrants(&mut self, t: &Table, n_junctions: usize) -> Vec<Hydrant> {
        let mut seen: HashMap<String, u64> = HashMap::new();
        let mut out = Vec::new();
        for row in t.rows() {
            if let Some(hydrant) = self.hydrant(t, row, n_junctions, &mut seen) {
                out.push(hydrant);
            }
        }
        out
    }

    /// The hydrant of one hydrants.csv row; `None` when the row has an error (reported).
    /// `seen` holds the ids of the rows before, with their lines.
    fn hydrant(
        &mut self,
        t: &Table,
        row: &Row,
        n_junctions: usize,
        seen: &mut HashMap<String, u64>,
    ) -> Option<Hydrant> {
        let file = t.file.as_str();
        let headloss = self.headloss;
        let junction_cell = t.cell(row, "junction");
        let mut c = self.cells(t, row);
        let id = c.id("id");
        let required = required_flow(&mut c);
        let class = c.text("class").map(str::to_string);
        let class_column = t.cell(row, "class").column;
        let position = c.position();
        let lateral = lateral(&mut c, headloss);
        let junction = self.hydrant_junction(&junction_cell, file, n_junctions);
        // The id is claimed before the junction and lateral are looked at: a row with an error
        // there still holds its id, so that a later row with the same id is reported.
        let id = id?;
        if !self.claim_hydrant_id(&id, file, seen) {
            return None;
        }
        let junction = junction?;
        let lateral = lateral?;
        let required_flow_unreadable = t.has_column("required_flow")
            && !t.cell(row, "required_flow").is_empty()
            && required.is_none();
        if required_flow_unreadable {
            return None;
        }
        Some(Hydrant {
            id: id.text.to_string(),
            junction,
            required_flow_m3s: required,
            class,
            position,
            line: row.line,
            class_column,
            lateral,
        })
    }

    /// Registers a hydrant id in `seen` (ids by line); an error when it is already used.
    fn claim_hydrant_id(
        &mut self,
        id: &Cell<'_>,
        file: &str,
        seen: &mut HashMap<String, u64>,
    ) -> bool {
        if let Some(other) = seen.get(id.text) {
            self.diags.error(
                id.location(file),
                format!(
                    "hydrant id `{}` is used twice (also at line {other})",
                    id.text
                ),
                "give every hydrant its own id",
            );
            return false;
        }
        seen.insert(id.text.to_string(), id.line);
        true
    }

    /// The junction a hydrant connects to, from its `junction` cell; `None` when the cell is
    /// empty, names a source, or names no node (reported unless only a knock-on).
    fn hydrant_junction(
        &mut self,
        cell: &Cell<'_>,
        file: &str,
        n_junctions: usize,
    ) -> Option<usize> {
        if cell.is_empty() {
            self.diags.error(
                cell.location(file),
                "`junction` is empty",
                "name the junction the hydrant connects to",
            );
            return None;
        }
        match self.node_lines.get(cell.text) {
            Some(&(_, _, index)) if index < n_junctions => Some(index),
            Some(_) => {
                self.diags.error(
                    cell.location(file),
                    format!(
                        "hydrant junction `{}` is a source, not a junction",
                        cell.text
                    ),
                    "connect the hydrant to the junction of its lateral",
                );
                None
            }
            None if self.knock_on(cell.text) => None,
            None => {
                self.diags.error(
                    cell.location(file),
                    format!("hydrant junction `{}` is not a junction id", cell.text),
                    "use the id of a junction in junctions.csv (ids are compared exactly)",
                );
                None
            }
        }
    }
}

/// The cells of a pipes.csv row as read, SI, before their ranges are checked; a number is
/// `None` when its cell is empty or not a number (reported).
struct PipeCells {
    length: Option<f64>,
    diameter: Option<f64>,
    roughness: Option<f64>,
    minor_loss: f64,
    status: Option<PipeStatus>,
    material: Option<String>,
}

/// Reads the cells of a pipes.csv row. Every cell is read before any range is checked, so that
/// a row's unreadable cells are reported before its values out of range.
fn read_pipe_cells(c: &mut Cells<'_, '_>, headloss: HeadlossFormula) -> PipeCells {
    let length = c.required_number("length", Quantity::Length);
    let diameter = c.required_number("diameter", Quantity::Diameter);
    let roughness = match headloss {
        HeadlossFormula::HazenWilliams => c.required_plain("roughness"),
        HeadlossFormula::DarcyWeisbach => c.required_number("roughness", Quantity::Diameter),
    };
    let minor_loss = c.plain("minor_loss").unwrap_or(0.0);
    let status = c.choice(
        "status",
        &[
            ("open", PipeStatus::Open),
            ("closed", PipeStatus::Closed),
            ("check", PipeStatus::Check),
        ],
        Some(PipeStatus::Open),
    );
    let material = c.text("material").map(str::to_string);
    PipeCells {
        length,
        diameter,
        roughness,
        minor_loss,
        status,
        material,
    }
}

/// The pipe of a row's cells, each value checked against its range (every one, so that all
/// are reported); `None` when a cell is in error.
fn checked_pipe(
    c: &mut Cells<'_, '_>,
    headloss: HeadlossFormula,
    cells: PipeCells,
) -> Option<Pipe> {
    let length = c.non_negative(
        cells.length,
        "length",
        "give the pipe's length along its route",
    );
    let length = c.within(length, "length", &limits::PIPE_LENGTH);
    let diameter = c.positive(cells.diameter, "diameter", "give the inside diameter");
    let diameter = c.within(diameter, "diameter", &limits::DIAMETER);
    let roughness = checked_roughness(c, headloss, cells.roughness, diameter);
    let minor_loss = c.non_negative(
        Some(cells.minor_loss),
        "minor_loss",
        "give the summed loss coefficient K (0 or more)",
    );
    let minor_loss = c.within(minor_loss, "minor_loss", &limits::LOSS_COEFFICIENT);
    Some(Pipe {
        length_m: length?,
        diameter_m: diameter?,
        roughness: roughness?,
        minor_loss: minor_loss?,
        status: cells.status?,
        material: cells.material,
    })
}

/// A pipe's roughness checked as its head-loss formula reads it: a C factor within its range,
/// or an absolute roughness that fits in the pipe (`diameter`, SI, when known).
fn checked_roughness(
    c: &mut Cells<'_, '_>,
    headloss: HeadlossFormula,
    roughness: Option<f64>,
    diameter: Option<f64>,
) -> Option<f64> {
    let roughness = c.positive(
        roughness,
        "roughness",
        match headloss {
            HeadlossFormula::HazenWilliams => {
                "give the Hazen-Williams C factor (e.g. 130 for new ductile iron)"
            }
            HeadlossFormula::DarcyWeisbach => {
                "give the absolute roughness in the diameter unit (e.g. 0.0015 mm for plastic)"
            }
        },
    );
    match headloss {
        HeadlossFormula::HazenWilliams => c.within(roughness, "roughness", &limits::C_FACTOR),
        HeadlossFormula::DarcyWeisbach => relative_roughness(c, roughness, diameter),
    }
}

/// The junctions whose pressure an active PRV or PSV controls, with that valve's id: a second
/// valve at one of them is refused.
struct Regulated {
    /// The nodes from this index on are sources, which no valve can control.
    n_junctions: usize,
    by_junction: HashMap<usize, String>,
}

/// The cells of a valves.csv row whose meaning does not depend on its kind, SI, the numbers
/// checked against their ranges; `None` when a cell is empty where required or in error
/// (reported).
struct ValveCells {
    kind: Option<ValveKind>,
    status: Option<ValveStatus>,
    diameter: Option<f64>,
    minor_loss: Option<f64>,
}

/// Reads the kind, status, diameter and minor loss of a valves.csv row, in that order.
fn read_valve_cells(c: &mut Cells<'_, '_>) -> ValveCells {
    let kind = c.choice(
        "kind",
        &[
            ("prv", ValveKind::Prv),
            ("psv", ValveKind::Psv),
            ("fcv", ValveKind::Fcv),
            ("throttle", ValveKind::Throttle),
        ],
        None,
    );
    let status = c.choice(
        "status",
        &[
            ("active", ValveStatus::Active),
            ("open", ValveStatus::Open),
            ("closed", ValveStatus::Closed),
        ],
        Some(ValveStatus::Active),
    );
    let diameter = c.required_number("diameter", Quantity::Diameter);
    let diameter = c.positive(diameter, "diameter", "give the valve's inside diameter");
    let diameter = c.within(diameter, "diameter", &limits::DIAMETER);
    let minor_loss = c.plain("minor_loss").unwrap_or(0.0);
    let minor_loss = c.non_negative(
        Some(minor_loss),
        "minor_loss",
        "give the loss coefficient K of the wide-open valve (0 or more)",
    );
    let minor_loss = c.within(minor_loss, "minor_loss", &limits::LOSS_COEFFICIENT);
    ValveCells {
        kind,
        status,
        diameter,
        minor_loss,
    }
}

/// A valve's setting, SI, read as its kind means it: a pressure for a PRV or PSV, a flow for
/// an FCV, a loss coefficient for a throttle. Required of an active valve; an empty cell, or
/// one that is not a number (reported), reads as 0. `None` when negative or out of range
/// (reported).
fn valve_setting(c: &mut Cells<'_, '_>, kind: ValveKind, status: ValveStatus) -> Option<f64> {
    let setting_quantity = match kind {
        ValveKind::Prv | ValveKind::Psv => Some(Quantity::Pressure),
        ValveKind::Fcv => Some(Quantity::Flow),
        ValveKind::Throttle => None,
    };
    let setting = match (setting_quantity, status) {
        (_, ValveStatus::Active) => match setting_quantity {
            Some(q) => c.required_number("setting", q),
            None => c.required_plain("setting"),
        },
        (Some(q), _) => c.number("setting", q),
        (None, _) => c.plain("setting"),
    };
    let setting = c.non_negative(
        setting.or(Some(0.0)),
        "setting",
        "give a setting of 0 or more",
    );
    let setting_limit = match kind {
        ValveKind::Prv | ValveKind::Psv => &limits::PRESSURE,
        ValveKind::Fcv => &limits::FLOW,
        ValveKind::Throttle => &limits::LOSS_COEFFICIENT,
    };
    c.within(setting, "setting", setting_limit)
}

/// The optional `required_flow` of a hydrants.csv row, SI; `None` when empty (the criteria
/// then decide) or in error (reported).
fn required_flow(c: &mut Cells<'_, '_>) -> Option<f64> {
    let required = c.number("required_flow", Quantity::Flow)?;
    let required = c.positive(
        Some(required),
        "required_flow",
        "give the required fire flow, or leave the cell empty to use the criteria",
    );
    c.within(required, "required_flow", &limits::FLOW)
}

/// The optional lateral columns of a hydrants.csv row, SI: `Some(None)` without a lateral,
/// `None` when a cell is in error (already reported), so that the row is dropped. Length and
/// diameter go together; the roughness defaults to [`DEFAULT_LATERAL_C`] or
/// [`DEFAULT_LATERAL_ROUGHNESS_M`].
fn lateral(c: &mut Cells<'_, '_>, headloss: HeadlossFormula) -> Option<Option<Lateral>> {
    let length = c.number("lateral_length", Quantity::Length);
    let length = c.non_negative(
        length,
        "lateral_length",
        "give the lead's length from the main to the hydrant",
    );
    let length = c.within(length, "lateral_length", &limits::PIPE_LENGTH);
    let diameter = c.number("lateral_diameter", Quantity::Diameter);
    let diameter = c.positive(
        diameter,
        "lateral_diameter",
        "give the lead's inside diameter",
    );
    let diameter = c.within(diameter, "lateral_diameter", &limits::DIAMETER);
    let roughness = match headloss {
        HeadlossFormula::HazenWilliams => c.plain("lateral_roughness"),
        HeadlossFormula::DarcyWeisbach => c.number("lateral_roughness", Quantity::Diameter),
    };
    let roughness = c.positive(
        roughness,
        "lateral_roughness",
        "give the lead's roughness as for pipes.csv, or leave it empty for the default",
    );
    let roughness = match headloss {
        HeadlossFormula::HazenWilliams => {
            c.within(roughness, "lateral_roughness", &limits::C_FACTOR)
        }
        HeadlossFormula::DarcyWeisbach => roughness,
    };
    let names = ["lateral_length", "lateral_diameter", "lateral_roughness"];
    let values = [length, diameter, roughness];
    if names
        .iter()
        .zip(values)
        .any(|(n, v)| !c.cell(n).is_empty() && v.is_none())
    {
        return None;
    }
    match (length, diameter) {
        (None, None) if roughness.is_none() => Some(None),
        (Some(length_m), Some(diameter_m)) => {
            let roughness = roughness.unwrap_or(match headloss {
                HeadlossFormula::HazenWilliams => DEFAULT_LATERAL_C,
                HeadlossFormula::DarcyWeisbach => DEFAULT_LATERAL_ROUGHNESS_M,
            });
            if headloss == HeadlossFormula::DarcyWeisbach
                && roughness > limits::MAX_RELATIVE_ROUGHNESS * diameter_m
            {
                let loc = c.cell("lateral_roughness").location(c.file());
                c.diagnostics().error(
                    loc,
                    "`lateral_roughness` is more than half the lead's diameter: beyond any pipe",
                    "give the absolute roughness in the diameter unit (e.g. 0.26 mm for cast iron)",
                );
                return None;
            }
            Some(Some(Lateral {
                length_m,
                diameter_m,
                roughness,
            }))
        }
        _ => {
            let missing = if length.is_none() {
                "lateral_length"
            } else {
                "lateral_diameter"
            };
            let loc = c.cell(missing).location(c.file());
            c.diagnostics().error(
                loc,
                format!("`{missing}` is empty while the hydrant's other lateral columns are given"),
                "give both `lateral_length` and `lateral_diameter` (and optionally `lateral_roughness`), or none of them",
            );
            None
        }
    }
}

/// The optional storage columns of a sources.csv row, SI; `None` when a given cell is in error
/// (already reported), so that the row is dropped.
fn tank_storage(c: &mut Cells<'_, '_>) -> Option<TankStorage> {
    let diameter = c.number("diameter", Quantity::Length);
    let diameter = c.positive(
        diameter,
        "diameter",
        "give the tank's inside diameter in ft or m (the length unit)",
    );
    let diameter = c.within(diameter, "diameter", &limits::TANK_DIAMETER);
    let min_level = c.number("min_level", Quantity::Length);
    let min_level = c.within(min_level, "min_level", &limits::ELEVATION);
    let max_level = c.number("max_level", Quantity::Length);
    let max_level = c.within(max_level, "max_level", &limits::ELEVATION);
    let broken = |name: &str, v: Option<f64>| !c.cell(name).is_empty() && v.is_none();
    if broken("diameter", diameter)
        || broken("min_level", min_level)
        || broken("max_level", max_level)
    {
        return None;
    }
    Some(TankStorage {
        diameter_m: diameter,
        min_level_m: min_level,
        max_level_m: max_level,
    })
}

/// Fits head = a − b·q^c through the shutoff head `a` and two points (q1, h1), (q2, h2).
/// Returns (b, c), or `None` unless 0 < q1 < q2 and a > h1 > h2 >= 0.
pub fn pump_curve(a: f64, q1: f64, h1: f64, q2: f64, h2: f64) -> Option<(f64, f64)> {
    if !(q1 > 0.0 && q2 > q1 && a > h1 && h1 > h2 && h2 >= 0.0) {
        return None;
    }
    let c = ((a - h2) / (a - h1)).ln() / (q2 / q1).ln();
    let b = (a - h1) / q1.powf(c);
    (c.is_finite() && c > 0.0 && b.is_finite() && b > 0.0).then_some((b, c))
}

/// Refuses a Darcy-Weisbach roughness (SI) above [`limits::MAX_RELATIVE_ROUGHNESS`] of the
/// diameter: no roughness height exceeds the pipe's radius.
fn relative_roughness(
    c: &mut Cells<'_, '_>,
    roughness: Option<f64>,
    diameter: Option<f64>,
) -> Option<f64> {
    let (r, d) = (roughness?, diameter);
    let Some(d) = d else { return Some(r) };
    if r <= limits::MAX_RELATIVE_ROUGHNESS * d {
        return Some(r);
    }
    let loc = c.cell("roughness").location(c.file());
    let units = c.units();
    let u = units.symbol(Quantity::Diameter);
    c.diagnostics().error(
        loc,
        format!(
            "`roughness` {} {u} is more than half the diameter {} {u}: beyond any pipe (a roughness height cannot exceed the radius)",
            display_value(units.from_si(Quantity::Diameter, r)),
            display_value(units.from_si(Quantity::Diameter, d)),
        ),
        format!("Darcy-Weisbach roughness is the absolute roughness in {u}, the diameter unit (e.g. 0.0015 mm for plastic)"),
    );
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pump_curve_through_three_points() {
        // a = 100, points (1, 75) and (2, 0): c = ln(100/25)/ln 2 = 2, b = 25.
        let (b, c) = pump_curve(100.0, 1.0, 75.0, 2.0, 0.0).expect("curve");
        assert!((c - 2.0).abs() < 1e-12 && (b - 25.0).abs() < 1e-12);
        assert!(pump_curve(100.0, 2.0, 75.0, 1.0, 50.0).is_none());
        assert!(pump_curve(100.0, 1.0, 75.0, 2.0, 80.0).is_none());
    }
}
