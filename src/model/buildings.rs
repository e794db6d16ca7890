//! Reading `buildings.csv` (our format, see docs/buildings-format.md): the buildings of a permit
//! application, with what a needed-fire-flow method asks of them, converted to SI once, here.
//!
//! The class names (construction, occupancy, sprinklers) are kept as written: which names are
//! valid depends on the method the criteria choose, so they are checked against it later
//! (`needed::check_buildings`), where both files are loaded. Every problem found here is a
//! diagnostic with file, line, column and a fix, as for the network files.

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use super::diagnostic::{Diagnostics, Location};
use super::limits;
use super::table::{parse_table, read_table, Cells, Table, TableSpec};
use crate::units::{Quantity, UnitSystem, M2_PER_FT2};

/// The file name a permit application's buildings are usually given in.
pub const BUILDINGS_FILE: &str = "buildings.csv";

const SPEC: TableSpec<'static> = TableSpec {
    known: &[
        "id",
        "name",
        "construction",
        "fire_flow_area",
        "stories",
        "occupancy",
        "exposure",
        "separation",
        "sprinklers",
        "x",
        "y",
        "required_flow",
        "duration",
        "notes",
    ],
    required: &["id", "construction", "fire_flow_area", "occupancy"],
};

/// The largest fire-flow area, m² (about 108 million ft²). The largest buildings under one roof
/// have a few million m² of floor (from memory); a larger value is a typing slip or a wrong unit.
pub const MAX_AREA_M2: f64 = 1.0e7;
/// The most storeys a building row may give (the tallest buildings have about 160, from memory).
pub const MAX_STORIES: f64 = 300.0;
/// The longest duration an engineer's figure may give, hours. Published durations run ½-4 h
/// (fire-flow-facts §7.3); a value past a day is a minutes-for-hours slip.
pub const MAX_DURATION_H: f64 = 24.0;
/// Seconds per hour: durations are written in hours and kept in seconds.
pub const S_PER_H: f64 = 3600.0;

/// The sprinkler class of an empty `sprinklers` cell: no credit for sprinklers is the
/// cautious reading of a blank.
pub const NO_SPRINKLERS: &str = "none";

/// One building of a permit application, SI units. Fields a method does not use may be empty;
/// which ones a method needs is checked against it (`needed::check_buildings`).
#[derive(Clone, Debug, PartialEq)]
pub struct Building {
    pub id: String,
    pub name: String,
    /// Construction class as the method names it (e.g. `V-B`, `joisted-masonry`).
    pub construction: Option<String>,
    /// The method's area: fire-flow calculation area or effective area, m².
    pub fire_flow_area_m2: Option<f64>,
    pub stories: Option<u32>,
    /// Occupancy class as the method names it (e.g. `B`, `C-3`, `dwelling`).
    pub occupancy: Option<String>,
    /// Exposure and communication (X+P) of the insurance-rating formula, a plain number.
    pub exposure: Option<f64>,
    /// Distance to the nearest other building, m (one- and two-family dwellings).
    pub separation_m: Option<f64>,
    /// Sprinkler class as the method names it; `none` when the cell is empty.
    pub sprinklers: String,
    /// Map coordinates in the network's coordinate system (network length unit).
    pub position: Option<[f64; 2]>,
    /// An engineer's required flow, m³/s: replaces the method's figure.
    pub required_flow_m3s: Option<f64>,
    /// An engineer's duration, s: replaces the method's duration.
    pub duration_s: Option<f64>,
    pub notes: String,
    /// Line in the file.
    pub line: u64,
}

/// The buildings of a file, with what is needed to locate findings about them.
#[derive(Clone, Debug)]
pub struct Buildings {
    /// The file name shown in messages.
    pub file: String,
    /// The units the file is written in (the network's).
    pub units: UnitSystem,
    pub buildings: Vec<Building>,
    /// Column number (1-based) of each column present, by lower-case name.
    columns: BTreeMap<String, u64>,
}

impl Buildings {
    /// Where the cell of `column` of `building` is (the line alone when the column is absent).
    pub fn location(&self, building: &Building, column: &str) -> Location {
        match self.columns.get(column) {
            Some(&c) => Location::cell(&self.file, building.line, c),
            None => Location::line(&self.file, building.line),
        }
    }

    /// The building with id `id`.
    pub fn by_id(&self, id: &str) -> Option<&Building> {
        self.buildings.iter().find(|b| b.id == id)
    }
}

/// A buildings file read without errors, with its warnings and notes.
#[derive(Debug)]
pub struct LoadedBuildings {
    pub buildings: Buildings,
    pub diagnostics: Diagnostics,
}

/// Reads the buildings file at `path`, written in the network's `units`.
pub fn load_buildings(path: &Path, units: UnitSystem) -> Result<LoadedBuildings, Diagnostics> {
    let mut diags = Diagnostics::new();
    let file = path
        .file_name()
        .map(|f| f.to_string_lossy().into_owned())
        .unwrap_or_else(|| path.display().to_string());
    let Some(table) = read_table(path, &file, &SPEC, &mut diags) else {
        return Err(diags);
    };
    finish(table, units, diags)
}

/// Reads buildings from CSV bytes; separate from [`load_buildings`] so tests can feed bytes.
pub fn parse_buildings(
    bytes: &[u8],
    file: &str,
    units: UnitSystem,
) -> Result<LoadedBuildings, Diagnostics> {
    let mut diags = Diagnostics::new();
    let Some(table) = parse_table(bytes, file, &SPEC, &mut diags) else {
        return Err(diags);
    };
    finish(table, units, diags)
}

fn finish(
    table: Table,
    units: UnitSystem,
    mut diags: Diagnostics,
) -> Result<LoadedBuildings, Diagnostics> {
    let mut buildings = Vec::new();
    let mut seen: HashMap<String, u64> = HashMap::new();
    for row in table.rows() {
        let mut c = Cells::new(&table, row, units, &mut diags);
        let Some(b) = read_row(&mut c, row.line) else {
            continue;
        };
        if let Some(first) = seen.insert(b.id.clone(), b.line) {
            let loc = table.cell(row, "id").location(&table.file);
            diags.error(
                loc,
                format!(
                    "building id `{}` is used twice (first on line {first})",
                    b.id
                ),
                "give every building its own id",
            );
            continue;
        }
        buildings.push(b);
    }
    if table.rows().is_empty() {
        diags.error(
            Location::file(&table.file),
            "there are no buildings",
            "list one row per building (see docs/buildings-format.md)",
        );
    }
    if diags.has_errors() {
        return Err(diags);
    }
    let columns = SPEC
        .known
        .iter()
        .filter_map(|&name| {
            let cell = table.rows().first().map(|r| table.cell(r, name))?;
            (cell.column > 0).then(|| (name.to_string(), cell.column))
        })
        .collect();
    Ok(LoadedBuildings {
        buildings: Buildings {
            file: table.file,
            units,
            buildings,
            columns,
        },
        diagnostics: diags,
    })
}

/// One row; `None` when the id is missing (other problems are recorded and the row kept, so
/// that every problem of the file is reported at once; the caller refuses the file then).
fn read_row(c: &mut Cells<'_, '_>, line: u64) -> Option<Building> {
    let id = c.id("id")?.text.to_string();
    let units = c.units();
    let area_unit = area_symbol(units);
    let area = c.plain("fire_flow_area");
    let area = c.positive(
        area,
        "fire_flow_area",
        &format!("give the fire-flow area in {area_unit}"),
    );
    let fire_flow_area_m2 = area.and_then(|a| {
        let m2 = area_to_si(units, a);
        if m2 <= MAX_AREA_M2 {
            return Some(m2);
        }
        let loc = c.cell("fire_flow_area").location(c.file());
        c.diagnostics().error(
            loc,
            format!(
                "`fire_flow_area` {} {area_unit} is larger than any building",
                crate::units::display_value(a)
            ),
            format!("check the value and its unit ({area_unit}, the network's units)"),
        );
        None
    });
    let stories = read_stories(c);
    let exposure = c.plain("exposure");
    let exposure = c.non_negative(
        exposure,
        "exposure",
        "give the exposure and communication charge (X+P) as a plain number such as 0.2",
    );
    let separation = c.number("separation", Quantity::Length);
    let separation_m = c.non_negative(
        separation,
        "separation",
        &format!(
            "give the distance to the nearest building in {}",
            units.symbol(Quantity::Length)
        ),
    );
    let flow = c.number("required_flow", Quantity::Flow);
    let flow = c.positive(
        flow,
        "required_flow",
        &format!(
            "give the engineer's required fire flow in {}, or leave the cell empty",
            units.symbol(Quantity::Flow)
        ),
    );
    let required_flow_m3s = c.within(flow, "required_flow", &limits::FLOW);
    let duration_s = read_duration(c);
    let text = |c: &Cells<'_, '_>, name| c.text(name).map(str::to_string);
    Some(Building {
        name: text(c, "name").unwrap_or_default(),
        construction: text(c, "construction"),
        fire_flow_area_m2,
        stories,
        occupancy: text(c, "occupancy"),
        exposure,
        separation_m,
        sprinklers: text(c, "sprinklers").unwrap_or_else(|| NO_SPRINKLERS.to_string()),
        position: c.position(),
        required_flow_m3s,
        duration_s,
        notes: text(c, "notes").unwrap_or_default(),
        line,
        id,
    })
}

fn read_stories(c: &mut Cells<'_, '_>) -> Option<u32> {
    let v = c.plain("stories")?;
    if v.fract() == 0.0 && (1.0..=MAX_STORIES).contains(&v) {
        return Some(v as u32);
    }
    let loc = c.cell("stories").location(c.file());
    c.diagnostics().error(
        loc,
        format!(
            "`stories` must be a whole number from 1 to {MAX_STORIES}, got {}",
            crate::units::display_value(v)
        ),
        "give the number of storeys above grade, such as 2",
    );
    None
}

fn read_duration(c: &mut Cells<'_, '_>) -> Option<f64> {
    let h = c.plain("duration");
    let h = c.positive(
        h,
        "duration",
        "give the engineer's duration in hours (such as 2), or leave the cell empty",
    )?;
    if h <= MAX_DURATION_H {
        return Some(h * S_PER_H);
    }
    let loc = c.cell("duration").location(c.file());
    c.diagnostics().error(
        loc,
        format!(
            "`duration` {} h is longer than any fire-flow duration (they run ½ to 4 hours)",
            crate::units::display_value(h)
        ),
        "give the duration in hours, not minutes",
    );
    None
}

/// m² from an area in the file's units (ft² or m²).
pub fn area_to_si(units: UnitSystem, area: f64) -> f64 {
    match units {
        UnitSystem::Us => area * M2_PER_FT2,
        UnitSystem::Si => area,
    }
}

/// An area in `units` (ft² or m²) from m².
pub fn area_from_si(units: UnitSystem, area_m2: f64) -> f64 {
    match units {
        UnitSystem::Us => area_m2 / M2_PER_FT2,
        UnitSystem::Si => area_m2,
    }
}

/// The area unit of a unit system.
pub fn area_symbol(units: UnitSystem) -> &'static str {
    match units {
        UnitSystem::Us => "ft²",
        UnitSystem::Si => "m²",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str = "id,name,construction,fire_flow_area,stories,occupancy,exposure,sprinklers,x,y,required_flow,duration,notes\n";

    fn parse(rows: &str) -> Result<LoadedBuildings, Diagnostics> {
        parse_buildings(
            format!("{HEADER}{rows}").as_bytes(),
            "buildings.csv",
            UnitSystem::Us,
        )
    }

    #[test]
    fn reads_a_row_in_si_with_defaults() {
        let b = parse("B1,Shop,V-B,5000,1,M,,,10,20,,,corner lot\n").expect("reads");
        let b = &b.buildings.buildings[0];
        // 1 ft = 0.3048 m exactly, so 5,000 ft² = 464.5152 m² (exact conversion).
        assert!((b.fire_flow_area_m2.unwrap() - 464.5152).abs() < 1e-9);
        assert_eq!(b.sprinklers, "none");
        assert_eq!(b.stories, Some(1));
        assert_eq!(b.position, Some([10.0, 20.0]));
        assert_eq!(b.notes, "corner lot");
    }

    #[test]
    fn bad_number_is_located() {
        let d = parse("B1,Shop,V-B,5,000,1,M,,,,,,,\n").unwrap_err();
        assert!(d.to_string().contains("buildings.csv:2"), "{d}");
        let d = parse("B1,Shop,V-B,5k,1,M,,,,,,,\n").unwrap_err();
        assert!(
            d.to_string()
                .contains("buildings.csv:2:4: error: `5k` is not a finite number"),
            "{d}"
        );
        let d = parse("B1,Shop,V-B,5000,1.5,M,,,,,,,\n").unwrap_err();
        assert!(d.to_string().contains("buildings.csv:2:5"), "{d}");
        let d = parse("B1,Shop,V-B,5000,1,M,,,,,,120,\n").unwrap_err();
        assert!(
            d.to_string().contains("buildings.csv:2:12") && d.to_string().contains("minutes"),
            "{d}"
        );
    }

    #[test]
    fn missing_column_and_duplicate_id() {
        let d = parse_buildings(
            b"id,construction,occupancy\nB1,V-B,M\n",
            "buildings.csv",
            UnitSystem::Us,
        )
        .unwrap_err();
        assert!(
            d.to_string()
                .contains("buildings.csv:1: error: required column `fire_flow_area` is missing"),
            "{d}"
        );
        let d = parse("B1,,V-B,5000,1,M,,,,,,,\nB1,,V-B,6000,1,M,,,,,,,\n").unwrap_err();
        assert!(
            d.to_string()
                .contains("buildings.csv:3:1: error: building id `B1` is used twice"),
            "{d}"
        );
    }
}
