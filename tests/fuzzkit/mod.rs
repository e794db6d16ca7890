//! The fuzzing rules and the loaders they are applied to, shared by the stable harness
//! (`tests/fuzz_loaders.rs`, within `cargo test`) and the coverage-guided targets (`fuzz/`,
//! which includes this file by `#[path]`), so that both judge a case by one definition.
//!
//! A case is one input file's bytes, put in place of that file in a copy of the demo town (or
//! of the small GIS layers in `tests/data/fuzz-seeds/gis/`) and loaded through the library.
//! Every outcome must be:
//! - no panic;
//! - on failure, every error located: a file always, and a line for CSV tables (a few
//!   whole-file findings are listed in `FILE_LEVEL`);
//! - no NaN or infinity, and no number of more than 40 digits, in any message (text the input
//!   itself holds, quoted in the message, excepted);
//! - on success, finite numbers in what was loaded, and (for networks) a steady solve that
//!   either fails with an error or gives finite heads and flows.
//!
//! Common practice, no source: the properties are firemain's own rules (docs/ARCHITECTURE.md,
//! "Invariants"). The seed files are invented data, never check values.
#![allow(dead_code)]

use std::path::{Path, PathBuf};

use firemain::criteria::load_criteria;
use firemain::fireflow::lateral_headloss_m;
use firemain::hydraulics::{Hydraulics, SolveRequest};
use firemain::journal::read_journal;
use firemain::model::buildings::load_buildings;
use firemain::model::costs::load_cost_table;
use firemain::model::flowtests::load_flowtests;
use firemain::model::gis::{import_geojson, ImportInputs};
use firemain::model::project::load_project;
use firemain::model::{load_network, Diagnostics, Network, Severity};

/// The demo town, relative to the repository root.
pub const DEMO: &str = "examples/demo-town";
pub const CRITERIA: &str = "criteria/cedar-county-demo.toml";
pub const METHOD: &str = "criteria/methods/fire-code-appendix-b-2015.toml";
/// Seeds of the inputs the demo town has no file for (cost table, GIS layers, journal).
pub const SEEDS: &str = "tests/data/fuzz-seeds";

/// Text outside `...` and "..." quotes: what the program wrote, not the input it quotes. Inside
/// "...", a backslash escapes the next character (the parsers quote strings as Rust's `{:?}`
/// does, `"a\"b"`).
pub fn unquoted(message: &str) -> String {
    let mut out = String::new();
    let mut quote: Option<char> = None;
    let mut escaped = false;
    for c in message.chars() {
        match quote {
            Some('"') if escaped => escaped = false,
            Some('"') if c == '\\' => escaped = true,
            Some(q) if c == q => quote = None,
            Some(_) => {}
            None if matches!(c, '`' | '"') => quote = Some(c),
            None => out.push(c),
        }
    }
    out
}

/// A problem with a message: NaN or infinity, or a number of more than 40 digits, written by
/// the program itself.
pub fn bad_number(message: &str) -> Option<String> {
    let text = unquoted(message);
    for word in text.split(|c: char| !(c.is_alphanumeric() || c == '.' || c == '-')) {
        let w = word
            .trim_matches(|c: char| c == '.' || c == '-')
            .to_ascii_lowercase();
        if matches!(w.as_str(), "nan" | "inf" | "infinity") {
            return Some(format!("non-finite number `{word}`"));
        }
        let digits = w.chars().filter(char::is_ascii_digit).count();
        if digits > 40
            && w.chars()
                .all(|c| c.is_ascii_digit() || c == '.' || c == 'e')
        {
            return Some(format!("{digits}-digit number"));
        }
    }
    None
}

/// Findings that concern a whole file, legitimately without a line (the file's absence,
/// emptiness, size or encoding, a missing header or column, a table without rows, points an
/// elevations file lacks for some line ends).
pub const FILE_LEVEL: &[&str] = &[
    "empty",
    "have no elevation",
    "no header",
    "not found",
    "cannot read",
    "missing",
    "UTF-8",
    "larger than",
    "no rows",
    "there are no",
    "has no",
    "no junction",
    "no source",
    "no pipe",
    "not a folder",
    "not connected",
    "reach",
    "semicolon",
    "delimiter",
];

/// Checks the diagnostics of a load: every error located, no bad number in any message.
pub fn check_diagnostics(diags: &Diagnostics, csv: bool) -> Result<(), String> {
    for d in diags.iter() {
        let text = d.to_string();
        if d.location.file.is_empty() {
            return Err(format!("unlocated: {text}"));
        }
        if csv
            && d.severity == Severity::Error
            && d.location.line.is_none()
            && !FILE_LEVEL.iter().any(|k| d.message.contains(k))
        {
            return Err(format!("error without a line: {text}"));
        }
        // The location is a path the user chose (a method file named in the criteria, say):
        // only the message and the fix are the program's words.
        let words = format!("{} {}", d.message, d.fix.as_deref().unwrap_or(""));
        if let Some(why) = bad_number(&words) {
            return Err(format!("{why} in: {text}"));
        }
    }
    Ok(())
}

/// Every loaded number finite, and a steady solve that fails cleanly or gives finite numbers.
pub fn check_network(net: &Network) -> Result<(), String> {
    for n in &net.nodes {
        let g = n.grade_m.unwrap_or(0.0);
        if !(n.elevation_m.is_finite() && n.base_demand_m3s.is_finite() && g.is_finite()) {
            return Err(format!("non-finite number at node {}", n.id));
        }
    }
    for l in &net.links {
        if let Some(d) = l.diameter_m() {
            if !(d.is_finite() && d > 0.0) {
                return Err(format!("diameter {d} in link {}", l.id));
            }
        }
    }
    for hy in &net.hydrants {
        if let Some(l) = &hy.lateral {
            let ok = l.length_m.is_finite()
                && l.length_m >= 0.0
                && l.diameter_m.is_finite()
                && l.diameter_m > 0.0
                && l.roughness.is_finite()
                && l.roughness > 0.0;
            if !ok {
                return Err(format!("lateral {l:?} of hydrant {}", hy.id));
            }
            // The lead's loss at a large fire flow (0.5 m³/s, about 8,000 gpm) is a finite
            // number of metres.
            let loss = lateral_headloss_m(net.headloss, l, 0.5);
            if !(loss.is_finite() && loss >= 0.0) {
                return Err(format!("lead loss {loss} m at hydrant {}", hy.id));
            }
        }
    }
    let Ok(h) = Hydraulics::new(net) else {
        return Ok(());
    };
    let mut ws = h.workspace();
    let request = SolveRequest {
        demand_factor: net.demand_factors.max_day,
        extra_demand: &[],
        fixed_head: None,
    };
    if let Ok(sol) = h.solve(&mut ws, &request, &h.cold_start()) {
        if sol
            .heads_m
            .iter()
            .chain(&sol.flows_m3s)
            .any(|v| !v.is_finite())
        {
            return Err("a solve returned a non-finite head or flow".into());
        }
    }
    Ok(())
}

/// Loads a network folder and checks it (the rules above, CSV tables located by line).
pub fn check_network_folder(dir: &Path) -> Result<(), String> {
    match load_network(dir) {
        Ok(loaded) => {
            check_diagnostics(&loaded.diagnostics, true)?;
            check_network(&loaded.network)
        }
        Err(diags) => check_diagnostics(&diags, true),
    }
}

/// The files of `from` ending in one of `endings`, copied into `to`.
fn copy_files(from: &Path, to: &Path, endings: &[&str]) {
    std::fs::create_dir_all(to).expect("mkdir");
    for entry in std::fs::read_dir(from).expect("seed folder") {
        let entry = entry.expect("entry");
        let name = entry.file_name();
        let name = name.to_string_lossy();
        if entry.path().is_file() && endings.iter().any(|e| name.ends_with(e)) {
            std::fs::copy(entry.path(), to.join(&*name)).expect("copy");
        }
    }
}

/// A temporary folder holding copies of every seed: the demo town in `demo/` (with the
/// criteria's method in `demo/methods/`), the GIS layers in `gis/`, the other seeds in
/// `other/`. A case overwrites its own target's file only, so one workspace serves any number
/// of cases of one target.
pub struct Workspace {
    dir: tempfile::TempDir,
    /// The repository root the seeds were copied from.
    root: PathBuf,
}

impl Workspace {
    pub fn new(root: &Path) -> Self {
        let dir = tempfile::tempdir().expect("tempdir");
        let demo = dir.path().join("demo");
        copy_files(&root.join(DEMO), &demo, &[".csv", ".toml"]);
        let methods = demo.join("methods");
        std::fs::create_dir_all(&methods).expect("mkdir");
        std::fs::copy(
            root.join(METHOD),
            methods.join("fire-code-appendix-b-2015.toml"),
        )
        .expect("copy method");
        copy_files(
            &root.join(SEEDS).join("gis"),
            &dir.path().join("gis"),
            &[".geojson", ".toml", ".csv"],
        );
        copy_files(
            &root.join(SEEDS),
            &dir.path().join("other"),
            &[".csv", ".jsonl"],
        );
        Workspace {
            dir,
            root: root.to_path_buf(),
        }
    }

    pub fn demo(&self) -> PathBuf {
        self.dir.path().join("demo")
    }

    pub fn gis(&self) -> PathBuf {
        self.dir.path().join("gis")
    }

    pub fn other(&self) -> PathBuf {
        self.dir.path().join("other")
    }
}

/// The demo town's network, loaded once by each harness (criteria, buildings, flow tests and
/// cost tables are read against it).
pub fn demo_network(root: &Path) -> Network {
    load_network(&root.join(DEMO)).expect("demo loads").network
}

/// One input file to fuzz: its name, its seed, and how it is loaded and checked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Target {
    /// A file of the network folder.
    NetworkFile(&'static str),
    Criteria,
    Method,
    Project,
    Buildings,
    FlowTests,
    FlowTestSources,
    /// `upsize --costs FILE`.
    Costs,
    /// `import geojson`: the pipes layer, the hydrants layer, the mapping, the elevation
    /// points and the demand points.
    GisPipes,
    GisHydrants,
    GisMapping,
    GisElevations,
    GisDemands,
    /// A sweep's journal or partial (`check --resume`, `merge`).
    Journal,
}

/// Every target, in the order of the stable harness (its first 13 are the original ones).
pub const TARGETS: [Target; 20] = [
    Target::NetworkFile("model.toml"),
    Target::NetworkFile("junctions.csv"),
    Target::NetworkFile("sources.csv"),
    Target::NetworkFile("pipes.csv"),
    Target::NetworkFile("hydrants.csv"),
    Target::NetworkFile("pumps.csv"),
    Target::NetworkFile("valves.csv"),
    Target::Criteria,
    Target::Method,
    Target::Project,
    Target::Buildings,
    Target::FlowTests,
    Target::FlowTestSources,
    Target::Costs,
    Target::GisPipes,
    Target::GisHydrants,
    Target::GisMapping,
    Target::GisElevations,
    Target::GisDemands,
    Target::Journal,
];

impl Target {
    /// The file's name: the folder of its regression cases in tests/data/fuzz-regressions/.
    pub fn name(self) -> String {
        match self {
            Target::NetworkFile(f) => f.to_string(),
            Target::Criteria => "criteria.toml".into(),
            Target::Method => "method.toml".into(),
            Target::Project => "project.toml".into(),
            Target::Buildings => "buildings.csv".into(),
            Target::FlowTests => "flowtests.csv".into(),
            Target::FlowTestSources => "flowtest_sources.csv".into(),
            Target::Costs => "costs.csv".into(),
            Target::GisPipes => "pipes.geojson".into(),
            Target::GisHydrants => "hydrants.geojson".into(),
            Target::GisMapping => "mapping.toml".into(),
            Target::GisElevations => "elevations.csv".into(),
            Target::GisDemands => "demands.csv".into(),
            Target::Journal => "journal.jsonl".into(),
        }
    }

    /// The target named `name` (its file name).
    pub fn by_name(name: &str) -> Option<Target> {
        TARGETS.iter().copied().find(|t| t.name() == name)
    }

    /// The seed file, relative to the repository root.
    pub fn seed_path(self) -> PathBuf {
        let demo = Path::new(DEMO);
        let seeds = Path::new(SEEDS);
        match self {
            // The demo's hydrants have no leads: the seed adds them, so that the lateral
            // columns are mutated too.
            Target::NetworkFile("hydrants.csv") => seeds.join("hydrants.csv"),
            Target::NetworkFile(f) => demo.join(f),
            Target::Criteria => CRITERIA.into(),
            Target::Method => METHOD.into(),
            Target::Project => demo.join("project.toml"),
            Target::Buildings => demo.join("buildings.csv"),
            Target::FlowTests => demo.join("flowtests.csv"),
            Target::FlowTestSources => demo.join("flowtest_sources.csv"),
            Target::Costs => seeds.join("costs.csv"),
            Target::GisPipes
            | Target::GisHydrants
            | Target::GisMapping
            | Target::GisElevations
            | Target::GisDemands => seeds.join("gis").join(self.name()),
            Target::Journal => seeds.join("journal.jsonl"),
        }
    }

    /// Whether the file is a CSV table (whose errors must name a line).
    pub fn is_csv(self) -> bool {
        self.name().ends_with(".csv")
    }

    /// Loads `bytes` as this target's file (every other file as seeded) and checks the
    /// outcome. `demo` is the demo town's network as loaded by [`demo_network`].
    pub fn run(self, ws: &Workspace, bytes: &[u8], demo: &Network) -> Result<(), String> {
        let d = ws.demo();
        let csv = self.is_csv();
        let write = |path: &Path| std::fs::write(path, bytes).expect("write case");
        match self {
            Target::NetworkFile(f) => {
                write(&d.join(f));
                check_network_folder(&d)
            }
            Target::Criteria => {
                let path = d.join("criteria.toml");
                write(&path);
                match load_criteria(&path, demo) {
                    Ok(c) => {
                        check_diagnostics(&c.warnings, false)?;
                        let numbers = [
                            c.residual_floor_kpa,
                            c.search_cap_m3s,
                            c.service_min_kpa,
                            c.service_max_kpa,
                        ];
                        if numbers.iter().any(|v| !v.is_finite()) {
                            return Err("criteria loaded a non-finite number".into());
                        }
                        Ok(())
                    }
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Method => {
                let text = String::from_utf8_lossy(bytes);
                match firemain::needed::method::parse_method(&text, "method.toml") {
                    Ok(_) => Ok(()),
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Project => {
                let path = d.join("project.toml");
                write(&path);
                match load_project(&path) {
                    Ok(_) => Ok(()),
                    Err(diags) => check_diagnostics(&diags, false),
                }
            }
            Target::Buildings => {
                let path = d.join("buildings.csv");
                write(&path);
                match load_buildings(&path, demo.units) {
                    Ok(b) => check_diagnostics(&b.diagnostics, csv),
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
            Target::FlowTests | Target::FlowTestSources => {
                write(&d.join(self.name()));
                match load_flowtests(&d.join("flowtests.csv"), demo) {
                    Ok(t) => check_diagnostics(&t.diagnostics, csv),
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
            Target::Costs => {
                let path = ws.other().join("costs.csv");
                write(&path);
                match load_cost_table(&path, demo.units) {
                    Ok(rows) => {
                        if rows.iter().any(|&(d, c)| !(d.is_finite() && c.is_finite())) {
                            return Err("the cost table loaded a non-finite number".into());
                        }
                        Ok(())
                    }
                    Err(diags) => check_diagnostics(&diags, csv),
                }
            }
            Target::GisPipes
            | Target::GisHydrants
            | Target::GisMapping
            | Target::GisElevations
            | Target::GisDemands => {
                write(&ws.gis().join(self.name()));
                run_import(ws, csv)
            }
            Target::Journal => {
                let path = ws.other().join("journal.jsonl");
                write(&path);
                match read_journal(&path) {
                    Ok(_) => Ok(()),
                    Err(e) => match bad_number(&e.to_string()) {
                        Some(why) => Err(format!("{why} in: {e}")),
                        None => Ok(()),
                    },
                }
            }
        }
    }
}

/// `import geojson` of the GIS workspace; on success, the network folder it makes is loaded
/// and checked like any other.
fn run_import(ws: &Workspace, csv: bool) -> Result<(), String> {
    let g = ws.gis();
    let (pipes, hydrants, sources) = (
        g.join("pipes.geojson"),
        g.join("hydrants.geojson"),
        g.join("sources.geojson"),
    );
    let (elevations, demands, mapping) = (
        g.join("elevations.csv"),
        g.join("demands.csv"),
        g.join("mapping.toml"),
    );
    let inputs = ImportInputs {
        pipes: &pipes,
        hydrants: Some(&hydrants),
        sources: Some(&sources),
        elevations: Some(&elevations),
        demands: Some(&demands),
        mapping: &mapping,
    };
    match import_geojson(&inputs) {
        Ok(imported) => {
            for e in &imported.events {
                if let Some(why) = bad_number(&e.detail) {
                    return Err(format!("{why} in the import's note: {}", e.detail));
                }
                if !(e.at[0].is_finite() && e.at[1].is_finite()) {
                    return Err(format!("non-finite position of the note: {}", e.detail));
                }
            }
            let net = g.join("net");
            std::fs::create_dir_all(&net).expect("mkdir");
            for entry in std::fs::read_dir(&net).expect("net folder").flatten() {
                std::fs::remove_file(entry.path()).expect("clear net folder");
            }
            for (name, bytes) in &imported.network_files {
                std::fs::write(net.join(name), bytes).expect("write imported file");
            }
            check_network_folder(&net)
        }
        // GeoJSON and TOML errors carry a line where the parser gives one; only the CSV
        // point tables must always name one.
        Err(diags) => check_diagnostics(&diags, csv),
    }
}
