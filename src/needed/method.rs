//! Needed-fire-flow method files (`criteria/methods/*.toml`, docs/needed-fire-flow.md): the
//! coefficients, limits, rounding steps and tables of a published method, each with its source
//! and whether it was checked against the document, read and checked here with
//! file:line:column diagnostics. No number of any method is a constant of the code.
//!
//! A method's figures are kept in the units its file declares (`units`), because its rounding
//! steps, limits and table bounds are defined in them (250 gpm steps, 3,600 ft² bounds); a
//! building's area enters in SI and the needed flow leaves in SI (`needed::needed_fire_flow`).

use std::collections::BTreeMap;
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use crate::model::diagnostic::quoted;
use crate::model::toml_input::{parse_toml, read_toml, span_location};
use crate::model::{Diagnostics, Location};
use crate::units::UnitSystem;

const FIX: &str = "see docs/needed-fire-flow.md for the keys of a method file";

/// Where a figure of a method comes from, and whether it was checked against that document.
#[derive(Clone, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct Source {
    pub text: String,
    /// `false`: from memory or otherwise unchecked; shown as unverified on every result.
    pub verified: bool,
}

/// One figure with its source.
#[derive(Clone, Debug, PartialEq)]
pub struct Datum {
    pub value: f64,
    pub source: Source,
}

/// One band of an ordered list: applies to values up to and including `up_to` (above the
/// previous band's); the last band has no bound.
#[derive(Clone, Debug, PartialEq)]
pub struct Band {
    pub up_to: Option<f64>,
    pub value: f64,
    pub source: Source,
}

/// A class name with its factor (construction F, occupancy O).
#[derive(Clone, Debug, PartialEq)]
pub struct Factor {
    pub class: String,
    pub value: f64,
    pub source: Source,
}

/// A method: which document, edition and section it is, and its rule.
#[derive(Clone, Debug, PartialEq)]
pub struct Method {
    pub name: String,
    pub document: String,
    pub edition: String,
    pub section: String,
    /// The file name shown in messages (the criteria file for `method = "criteria"`).
    pub file: String,
    /// The units of every figure of the method (flows gpm | L/s, areas ft² | m²,
    /// distances ft | m; durations are hours in both).
    pub units: UnitSystem,
    /// Whether the file ships the whole of its table (`false`: some rows must be added).
    pub complete: bool,
    pub note: Option<String>,
    pub rule: Rule,
}

impl Method {
    /// One line naming the method for reports: name (document, edition, section).
    pub fn label(&self) -> String {
        format!(
            "{} ({}, {} ed., {})",
            self.name, self.document, self.edition, self.section
        )
    }

    /// The sprinkler classes the method knows, with what each means.
    pub fn sprinkler_classes(&self) -> Vec<(&str, &str)> {
        let list = match &self.rule {
            Rule::Insurance(r) => &r.sprinklers,
            Rule::AreaTable(r) => &r.sprinklers,
            Rule::Classes(_) => return Vec::new(),
        };
        list.iter().map(|(a, b)| (a.as_str(), b.as_str())).collect()
    }

    /// The duration bands (flow in the method's unit → hours), where the method has them.
    pub fn durations(&self) -> Option<&[Band]> {
        match &self.rule {
            Rule::Insurance(r) => Some(&r.durations),
            Rule::AreaTable(r) => Some(&r.durations),
            Rule::Classes(_) => None,
        }
    }
}

/// How a method turns a building into a needed flow.
#[derive(Clone, Debug, PartialEq)]
pub enum Rule {
    /// NFF = C · O · (1 + (X+P)), C = k · F · √A, with roundings and limits (insurance rating).
    Insurance(Box<Insurance>),
    /// A table of fire-flow area by construction type → flow and duration (fire code appendix).
    AreaTable(AreaTable),
    /// The criteria's own flow and duration per occupancy class.
    Classes(Vec<ClassFlow>),
}

/// The insurance-rating formula's figures.
#[derive(Clone, Debug, PartialEq)]
pub struct Insurance {
    /// k of C = k · F · √A.
    pub area_coefficient: Datum,
    pub construction: Vec<Factor>,
    /// C is rounded to the nearest multiple of this.
    pub c_step: Datum,
    pub c_minimum: Datum,
    /// Largest C by construction class.
    pub c_maximum: Vec<(Vec<String>, Datum)>,
    /// Largest C of a one-storey building, whatever its class.
    pub c_maximum_one_storey: Datum,
    pub occupancy: Vec<Factor>,
    /// Cap of (X+P).
    pub exposure_cap: Datum,
    /// Rounding step of the NFF by its unrounded value.
    pub nff_rounding: Vec<Band>,
    pub nff_minimum: Datum,
    pub nff_maximum: Datum,
    pub dwelling: Option<SeparationDwelling>,
    /// Duration (h) by needed flow.
    pub durations: Vec<Band>,
    /// Sprinkler classes (name, meaning); the formula gives them no credit.
    pub sprinklers: Vec<(String, String)>,
}

/// One- and two-family dwellings by distance to the nearest building.
#[derive(Clone, Debug, PartialEq)]
pub struct SeparationDwelling {
    /// The occupancy class that selects this rule.
    pub occupancy: String,
    pub max_stories: u32,
    /// Needed flow by separation distance.
    pub rows: Vec<Band>,
}

/// The fire-code appendix table.
#[derive(Clone, Debug, PartialEq)]
pub struct AreaTable {
    pub columns: Vec<Column>,
    pub rows: Vec<TableRow>,
    /// Duration (h) by flow, for flows that are not a row's (reduced flows, engineer's flows).
    pub durations: Vec<Band>,
    pub occupancies: Vec<String>,
    pub sprinklers: Vec<(String, String)>,
    pub dwelling: Option<TableDwelling>,
    pub reductions: Vec<Reduction>,
}

/// A column of area bounds and the construction types it serves.
#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    pub name: String,
    pub classes: Vec<String>,
}

/// A table row: per column, the areas it covers (`None`: not shipped for that column).
#[derive(Clone, Debug, PartialEq)]
pub struct TableRow {
    pub flow: f64,
    pub hours: f64,
    pub areas: Vec<Option<(f64, f64)>>,
    pub source: Source,
    /// Line of the row in the file, for messages.
    pub line: u64,
}

/// Dwellings (one- and two-family, townhouses) in the table method.
#[derive(Clone, Debug, PartialEq)]
pub struct TableDwelling {
    pub occupancies: Vec<String>,
    pub rows: Vec<DwellingRow>,
}

/// A dwelling row: an area range and sprinkler classes → a flow, or a fraction of the main
/// table's flow; the duration given, or the main table's.
#[derive(Clone, Debug, PartialEq)]
pub struct DwellingRow {
    pub area: (f64, f64),
    pub sprinklers: Vec<String>,
    pub figure: DwellingFigure,
    pub hours: Option<f64>,
    pub source: Source,
}

#[derive(Clone, Copy, Debug, PartialEq)]
pub enum DwellingFigure {
    Flow(f64),
    TableFraction(f64),
}

/// A sprinkler reduction: the flow is `fraction` of the table's, not below `floor`.
#[derive(Clone, Debug, PartialEq)]
pub struct Reduction {
    pub sprinklers: Vec<String>,
    pub fraction: f64,
    pub floor: f64,
    pub source: Source,
}

/// The criteria's own flow and duration for an occupancy class.
#[derive(Clone, Debug, PartialEq)]
pub struct ClassFlow {
    pub class: String,
    pub flow: f64,
    pub hours: f64,
}

// ---------------------------------------------------------------------------------------
// The file as written.

#[derive(Deserialize)]
struct KindOnly {
    kind: Spanned<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawValue {
    value: Spanned<f64>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFactor {
    class: Spanned<String>,
    value: Spanned<f64>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBand {
    up_to: Option<Spanned<f64>>,
    value: Spanned<f64>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawClassLimit {
    classes: Vec<Spanned<String>>,
    value: Spanned<f64>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSeparationDwelling {
    occupancy: Spanned<String>,
    max_stories: Spanned<u32>,
    row: Vec<RawBand>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawInsurance {
    #[allow(dead_code)]
    kind: String,
    name: String,
    document: String,
    edition: String,
    section: String,
    units: UnitSystem,
    complete: bool,
    note: Option<String>,
    area_coefficient: RawValue,
    construction: Vec<RawFactor>,
    c_rounding: RawValue,
    c_minimum: RawValue,
    c_maximum: Vec<RawClassLimit>,
    c_maximum_one_storey: RawValue,
    occupancy: Vec<RawFactor>,
    exposure_cap: RawValue,
    nff_rounding: Vec<RawBand>,
    nff_minimum: RawValue,
    nff_maximum: RawValue,
    dwelling: Option<RawSeparationDwelling>,
    duration: Vec<RawBand>,
    sprinklers: BTreeMap<String, String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawColumn {
    name: Spanned<String>,
    classes: Vec<Spanned<String>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRow {
    flow: Spanned<f64>,
    hours: Spanned<f64>,
    areas: Spanned<BTreeMap<String, Spanned<Vec<f64>>>>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDwellingRow {
    area: Spanned<Vec<f64>>,
    sprinklers: Vec<Spanned<String>>,
    flow: Option<Spanned<f64>>,
    table_fraction: Option<Spanned<f64>>,
    hours: Option<Spanned<f64>>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTableDwelling {
    occupancies: Vec<Spanned<String>>,
    row: Vec<Spanned<RawDwellingRow>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawReduction {
    sprinklers: Vec<Spanned<String>>,
    fraction: Spanned<f64>,
    floor: Spanned<f64>,
    source: String,
    verified: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawTable {
    #[allow(dead_code)]
    kind: String,
    name: String,
    document: String,
    edition: String,
    section: String,
    units: UnitSystem,
    complete: bool,
    note: Option<String>,
    column: Vec<RawColumn>,
    row: Vec<Spanned<RawRow>>,
    duration: Vec<RawBand>,
    occupancies: Vec<Spanned<String>>,
    sprinklers: BTreeMap<String, String>,
    dwelling: Option<RawTableDwelling>,
    #[serde(default)]
    sprinkler_reduction: Vec<RawReduction>,
}

/// The kinds of method file.
pub const KIND_INSURANCE: &str = "insurance-formula";
pub const KIND_TABLE: &str = "area-table";

/// Reads and checks the method file at `path` (shown as `file` in messages).
pub fn load_method(path: &Path, file: &str) -> Result<Method, Diagnostics> {
    let mut diags = Diagnostics::new();
    let Some((kind, text)) = read_toml::<KindOnly>(path, file, FIX, &mut diags) else {
        return Err(diags);
    };
    parse_kind(&text, file, kind, diags)
}

/// Reads and checks a method from TOML text; separate from [`load_method`] for tests.
pub fn parse_method(text: &str, file: &str) -> Result<Method, Diagnostics> {
    let mut diags = Diagnostics::new();
    let Some(kind) = parse_toml::<KindOnly>(text, file, FIX, &mut diags) else {
        return Err(diags);
    };
    parse_kind(text, file, kind, diags)
}

fn parse_kind(
    text: &str,
    file: &str,
    kind: KindOnly,
    mut diags: Diagnostics,
) -> Result<Method, Diagnostics> {
    let mut ck = Checker {
        file,
        text,
        diags: &mut diags,
    };
    let method = match kind.kind.get_ref().as_str() {
        KIND_INSURANCE => {
            parse_toml::<RawInsurance>(text, file, FIX, ck.diags).map(|raw| ck.insurance(raw))
        }
        KIND_TABLE => parse_toml::<RawTable>(text, file, FIX, ck.diags).map(|raw| ck.table(raw)),
        other => {
            let at = ck.at(kind.kind.span());
            ck.diags.error(
                at,
                format!("unknown method kind {}", quoted(other)),
                format!("write kind = \"{KIND_INSURANCE}\" or \"{KIND_TABLE}\""),
            );
            None
        }
    };
    match method {
        Some(m) if !diags.has_errors() => Ok(m),
        _ => Err(diags),
    }
}

/// Checks the figures of a method file as they are turned into a [`Method`].
struct Checker<'a> {
    file: &'a str,
    text: &'a str,
    diags: &'a mut Diagnostics,
}

fn source(text: String, verified: bool) -> Source {
    Source { text, verified }
}

impl Checker<'_> {
    fn at(&self, span: std::ops::Range<usize>) -> Location {
        span_location(self.file, self.text, span)
    }

    /// A positive finite number; an error at its place otherwise.
    fn positive(&mut self, v: &Spanned<f64>, what: &str) -> f64 {
        let x = *v.get_ref();
        if !(x.is_finite() && x > 0.0) {
            let at = self.at(v.span());
            self.diags.error(
                at,
                format!(
                    "{what} must be a positive number, got {}",
                    crate::units::display_value(x)
                ),
                "give the figure as the document prints it",
            );
        }
        x
    }

    fn datum(&mut self, v: RawValue, what: &str) -> Datum {
        Datum {
            value: self.positive(&v.value, what),
            source: source(v.source, v.verified),
        }
    }

    fn factors(&mut self, raw: Vec<RawFactor>, what: &str) -> Vec<Factor> {
        let mut out: Vec<Factor> = Vec::new();
        for f in raw {
            let value = self.positive(&f.value, what);
            let class = f.class.get_ref().trim().to_string();
            if out.iter().any(|o| same_class(&o.class, &class)) {
                let at = self.at(f.class.span());
                self.diags.error(
                    at,
                    format!("{what} class {} is listed twice", quoted(&class)),
                    "keep one row per class (classes are compared without case)",
                );
            }
            out.push(Factor {
                class,
                value,
                source: source(f.source, f.verified),
            });
        }
        out
    }

    /// Bands in increasing order of `up_to`, the last without one.
    fn bands(&mut self, raw: Vec<RawBand>, what: &str, whole_at: usize) -> Vec<Band> {
        let n = raw.len();
        let mut out: Vec<Band> = Vec::new();
        for (i, b) in raw.into_iter().enumerate() {
            let value = self.positive(&b.value, what);
            let up_to = b.up_to.as_ref().map(|u| self.positive(u, what));
            let last = i + 1 == n;
            let previous = out.last().and_then(|p: &Band| p.up_to);
            let place = b.up_to.as_ref().map_or(b.value.span(), |u| u.span());
            match (up_to, last) {
                (Some(_), true) | (None, false) => {
                    let at = self.at(place);
                    self.diags.error(
                        at,
                        format!("in {what}, only the last band goes without `up_to`"),
                        "give every band but the last an `up_to`, in increasing order",
                    );
                }
                (Some(u), false) if previous.is_some_and(|p| u <= p) => {
                    let at = self.at(place);
                    self.diags.error(
                        at,
                        format!("{what}: `up_to` values must increase"),
                        "list the bands from the smallest to the largest",
                    );
                }
                _ => {}
            }
            out.push(Band {
                up_to,
                value,
                source: source(b.source, b.verified),
            });
        }
        if out.is_empty() {
            self.diags.error(
                Location::line(self.file, whole_at as u64),
                format!("{what} has no bands"),
                "give at least one band (the last without `up_to`)",
            );
        }
        out
    }

    /// In steps: the construction and occupancy factors, the largest C by construction class
    /// (every class capped once), the dwelling rule, then the figures of the formula.
    fn insurance(&mut self, raw: RawInsurance) -> Method {
        let construction = self.factors(raw.construction, "[[construction]]");
        let occupancy = self.factors(raw.occupancy, "[[occupancy]]");
        let c_maximum = self.c_maximum(raw.c_maximum, &construction);
        self.check_every_class_capped(&construction, &c_maximum);
        let dwelling = raw
            .dwelling
            .map(|d| self.separation_dwelling(d, &occupancy));
        let rule = Insurance {
            area_coefficient: self.datum(raw.area_coefficient, "area_coefficient"),
            c_step: self.datum(raw.c_rounding, "c_rounding"),
            c_minimum: self.datum(raw.c_minimum, "c_minimum"),
            c_maximum,
            c_maximum_one_storey: self.datum(raw.c_maximum_one_storey, "c_maximum_one_storey"),
            exposure_cap: self.datum(raw.exposure_cap, "exposure_cap"),
            nff_rounding: self.bands(raw.nff_rounding, "[[nff_rounding]]", 1),
            nff_minimum: self.datum(raw.nff_minimum, "nff_minimum"),
            nff_maximum: self.datum(raw.nff_maximum, "nff_maximum"),
            durations: self.bands(raw.duration, "[[duration]]", 1),
            construction,
            occupancy,
            dwelling,
            sprinklers: self.sprinklers(raw.sprinklers),
        };
        Method {
            name: raw.name,
            document: raw.document,
            edition: raw.edition,
            section: raw.section,
            file: self.file.to_string(),
            units: raw.units,
            complete: raw.complete,
            note: raw.note,
            rule: Rule::Insurance(Box::new(rule)),
        }
    }

    /// The `[[c_maximum]]` rows, each naming classes that `[[construction]]` rows give.
    fn c_maximum(
        &mut self,
        raw: Vec<RawClassLimit>,
        construction: &[Factor],
    ) -> Vec<(Vec<String>, Datum)> {
        let mut c_maximum = Vec::new();
        for limit in raw {
            let mut classes = Vec::new();
            for c in &limit.classes {
                if !construction
                    .iter()
                    .any(|f| same_class(&f.class, c.get_ref()))
                {
                    let at = self.at(c.span());
                    self.diags.error(
                        at,
                        format!(
                            "[[c_maximum]] names class {}, which no [[construction]] row gives",
                            quoted(c.get_ref())
                        ),
                        "name construction classes as the [[construction]] rows do",
                    );
                }
                classes.push(c.get_ref().trim().to_string());
            }
            let value = self.positive(&limit.value, "[[c_maximum]] value");
            c_maximum.push((
                classes,
                Datum {
                    value,
                    source: source(limit.source, limit.verified),
                },
            ));
        }
        c_maximum
    }

    /// Every construction class has its largest C in some `[[c_maximum]]` row.
    fn check_every_class_capped(
        &mut self,
        construction: &[Factor],
        c_maximum: &[(Vec<String>, Datum)],
    ) {
        for f in construction {
            if !c_maximum
                .iter()
                .any(|(cs, _)| cs.iter().any(|c| same_class(c, &f.class)))
            {
                self.diags.error(
                    Location::file(self.file),
                    format!(
                        "construction class {} has no [[c_maximum]]",
                        quoted(&f.class)
                    ),
                    "list every construction class in one [[c_maximum]] row",
                );
            }
        }
    }

    /// The `[dwelling]` rule: its bands by separation, under an occupancy name of its own and
    /// for at least one storey.
    fn separation_dwelling(
        &mut self,
        d: RawSeparationDwelling,
        occupancy: &[Factor],
    ) -> SeparationDwelling {
        let rows = self.bands(d.row, "[[dwelling.row]]", 1);
        if occupancy
            .iter()
            .any(|o| same_class(&o.class, d.occupancy.get_ref()))
        {
            let at = self.at(d.occupancy.span());
            self.diags.error(
                at,
                "the dwelling occupancy is also an [[occupancy]] class",
                "give the dwelling rule its own occupancy name, such as \"dwelling\"",
            );
        }
        if *d.max_stories.get_ref() == 0 {
            let at = self.at(d.max_stories.span());
            self.diags.error(
                at,
                "[dwelling] max_stories must be at least 1",
                "give the largest number of storeys the dwelling rule covers",
            );
        }
        SeparationDwelling {
            occupancy: d.occupancy.get_ref().trim().to_string(),
            max_stories: *d.max_stories.get_ref(),
            rows,
        }
    }

    fn sprinklers(&mut self, raw: BTreeMap<String, String>) -> Vec<(String, String)> {
        if !raw
            .keys()
            .any(|k| same_class(k, crate::model::buildings::NO_SPRINKLERS))
        {
            self.diags.error(
                Location::file(self.file),
                "[sprinklers] does not list `none` (the class of an empty sprinklers cell)",
                "add none = \"no automatic sprinkler system\" under [sprinklers]",
            );
        }
        raw.into_iter().collect()
    }

    /// In steps: the columns, the rows, the durations and sprinkler classes, the dwelling rule
    /// and the sprinkler reductions (each naming sprinkler classes that are checked against
    /// `[sprinklers]` once both are read).
    fn table(&mut self, raw: RawTable) -> Method {
        let columns = columns(&raw.column);
        self.check_columns(&raw.column);
        let rows = self.rows(&raw.row, &columns);
        let durations = self.bands(raw.duration, "[[duration]]", 1);
        let sprinklers = self.sprinklers(raw.sprinklers);
        let mut unknown_sprinklers = Vec::new();
        let dwelling = raw
            .dwelling
            .map(|d| self.table_dwelling(d, &sprinklers, &mut unknown_sprinklers));
        let reductions = self.reductions(
            raw.sprinkler_reduction,
            &sprinklers,
            &mut unknown_sprinklers,
        );
        self.report_unknown_sprinklers(unknown_sprinklers);
        Method {
            name: raw.name,
            document: raw.document,
            edition: raw.edition,
            section: raw.section,
            file: self.file.to_string(),
            units: raw.units,
            complete: raw.complete,
            note: raw.note,
            rule: Rule::AreaTable(AreaTable {
                columns,
                rows,
                durations,
                occupancies: trimmed(&raw.occupancies),
                sprinklers,
                dwelling,
                reductions,
            }),
        }
    }

    /// The table's dwelling rule; the sprinkler classes its rows name that `[sprinklers]`
    /// does not list are added to `unknown`.
    fn table_dwelling(
        &mut self,
        d: RawTableDwelling,
        sprinklers: &[(String, String)],
        unknown: &mut Vec<(String, std::ops::Range<usize>)>,
    ) -> TableDwelling {
        TableDwelling {
            occupancies: trimmed(&d.occupancies),
            rows: d
                .row
                .into_iter()
                .filter_map(|r| {
                    let span = r.span();
                    let r = r.into_inner();
                    unknown_sprinklers(&r.sprinklers, sprinklers, unknown);
                    self.dwelling_row(r, span)
                })
                .collect(),
        }
    }

    /// The `[[sprinkler_reduction]]` rows; the sprinkler classes they name that
    /// `[sprinklers]` does not list are added to `unknown`.
    fn reductions(
        &mut self,
        raw: Vec<RawReduction>,
        sprinklers: &[(String, String)],
        unknown: &mut Vec<(String, std::ops::Range<usize>)>,
    ) -> Vec<Reduction> {
        let mut reductions = Vec::new();
        for r in raw {
            unknown_sprinklers(&r.sprinklers, sprinklers, unknown);
            let fraction = self.positive(&r.fraction, "[[sprinkler_reduction]] fraction");
            if fraction > 1.0 {
                let at = self.at(r.fraction.span());
                self.diags.error(
                    at,
                    "a sprinkler reduction's fraction is the share of the table flow that remains, at most 1",
                    "write 0.25 for \"25 % of the table value\"",
                );
            }
            reductions.push(Reduction {
                sprinklers: trimmed(&r.sprinklers),
                fraction,
                floor: self.positive(&r.floor, "[[sprinkler_reduction]] floor"),
                source: source(r.source, r.verified),
            });
        }
        reductions
    }

    /// One error per sprinkler class named outside `[sprinklers]` but not listed there, in
    /// the order they were met.
    fn report_unknown_sprinklers(&mut self, unknown: Vec<(String, std::ops::Range<usize>)>) {
        for (s, span) in unknown {
            let at = self.at(span);
            self.diags.error(
                at,
                format!(
                    "sprinkler class {} is not listed under [sprinklers]",
                    quoted(&s)
                ),
                "list the class under [sprinklers] with what it means, or correct the name",
            );
        }
    }

    fn check_columns(&mut self, raw: &[RawColumn]) {
        let mut seen: Vec<&str> = Vec::new();
        for c in raw {
            for class in &c.classes {
                if seen.iter().any(|s| same_class(s, class.get_ref())) {
                    let at = self.at(class.span());
                    self.diags.error(
                        at,
                        format!(
                            "construction type {} is in two columns",
                            quoted(class.get_ref())
                        ),
                        "list every construction type in one column",
                    );
                }
                seen.push(class.get_ref());
            }
        }
    }

    /// The table rows: flows increasing; in each column, areas increasing without overlap.
    fn rows(&mut self, raw: &[Spanned<RawRow>], columns: &[Column]) -> Vec<TableRow> {
        let mut rows: Vec<TableRow> = Vec::new();
        for r in raw {
            let line = span_location(self.file, self.text, r.span())
                .line
                .unwrap_or(0);
            let r = r.get_ref();
            let flow = self.positive(&r.flow, "a row's flow");
            let hours = self.positive(&r.hours, "a row's hours");
            if rows.last().is_some_and(|p| flow <= p.flow) {
                let at = self.at(r.flow.span());
                self.diags.error(
                    at,
                    "the rows' flows must increase",
                    "list the rows from the smallest flow to the largest",
                );
            }
            let mut areas = vec![None; columns.len()];
            for (name, range) in r.areas.get_ref() {
                let Some(i) = columns.iter().position(|c| same_class(&c.name, name)) else {
                    let at = self.at(r.areas.span());
                    self.diags.error(
                        at,
                        format!(
                            "the row names column {}, which no [[column]] gives",
                            quoted(name)
                        ),
                        "name the columns as the [[column]] tables do",
                    );
                    continue;
                };
                let Some((lo, hi)) = self.range(range) else {
                    continue;
                };
                let previous = rows.iter().rev().find_map(|p| p.areas[i]);
                if previous.is_some_and(|(_, p_hi)| lo <= p_hi) {
                    let at = self.at(range.span());
                    self.diags.error(
                        at,
                        format!(
                            "in column {}, this row's areas overlap an earlier row's",
                            quoted(name)
                        ),
                        "each row starts above the previous row's last area (3,601 after 3,600)",
                    );
                }
                areas[i] = Some((lo, hi));
            }
            rows.push(TableRow {
                flow,
                hours,
                areas,
                source: source(r.source.clone(), r.verified),
                line,
            });
        }
        rows
    }

    /// `[from, to]`, 0 ≤ from ≤ to; `inf` for "and above".
    fn range(&mut self, v: &Spanned<Vec<f64>>) -> Option<(f64, f64)> {
        match v.get_ref().as_slice() {
            &[lo, hi] if lo >= 0.0 && lo.is_finite() && hi >= lo && !hi.is_nan() => Some((lo, hi)),
            _ => {
                let at = self.at(v.span());
                self.diags.error(
                    at,
                    "an area range is two numbers [from, to] with from ≤ to",
                    "write `[0, 3600]`, or `[85101, inf]` for \"85,101 and above\"",
                );
                None
            }
        }
    }

    fn dwelling_row(
        &mut self,
        r: RawDwellingRow,
        span: std::ops::Range<usize>,
    ) -> Option<DwellingRow> {
        let area = self.range(&r.area)?;
        let figure = match (&r.flow, &r.table_fraction) {
            (Some(f), None) => DwellingFigure::Flow(self.positive(f, "a dwelling row's flow")),
            (None, Some(f)) => {
                DwellingFigure::TableFraction(self.positive(f, "a dwelling row's table_fraction"))
            }
            _ => {
                let at = self.at(span);
                self.diags.error(
                    at,
                    "a dwelling row gives either `flow` or `table_fraction`",
                    "give `flow` (with `hours`) or `table_fraction` (the share of the main table's flow)",
                );
                return None;
            }
        };
        if matches!(figure, DwellingFigure::Flow(_)) && r.hours.is_none() {
            let at = self.at(span);
            self.diags.error(
                at,
                "a dwelling row with a `flow` needs its `hours`",
                "give the duration in hours",
            );
        }
        Some(DwellingRow {
            area,
            sprinklers: r
                .sprinklers
                .iter()
                .map(|s| s.get_ref().trim().to_string())
                .collect(),
            figure,
            hours: r
                .hours
                .as_ref()
                .map(|h| self.positive(h, "a dwelling row's hours")),
            source: source(r.source, r.verified),
        })
    }
}

/// The table's columns as written: each name with its construction types, trimmed.
fn columns(raw: &[RawColumn]) -> Vec<Column> {
    raw.iter()
        .map(|c| Column {
            name: c.name.get_ref().trim().to_string(),
            classes: trimmed(&c.classes),
        })
        .collect()
}

/// The names of a list, without their surrounding spaces.
fn trimmed(names: &[Spanned<String>]) -> Vec<String> {
    names
        .iter()
        .map(|s| s.get_ref().trim().to_string())
        .collect()
}

/// Adds to `unknown` each class of `named` (with its place) that `sprinklers` does not list.
fn unknown_sprinklers(
    named: &[Spanned<String>],
    sprinklers: &[(String, String)],
    unknown: &mut Vec<(String, std::ops::Range<usize>)>,
) {
    for s in named {
        if !sprinklers.iter().any(|(k, _)| same_class(k, s.get_ref())) {
            unknown.push((s.get_ref().clone(), s.span()));
        }
    }
}

/// Class names are compared without case or surrounding spaces.
pub fn same_class(a: &str, b: &str) -> bool {
    a.trim().eq_ignore_ascii_case(b.trim())
}
