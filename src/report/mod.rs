//! Reports: pure renderers (data in, bytes out) and the one place that writes files.
//!
//! Values arrive in SI and leave in the network's units, always with the unit in the column
//! name or header. The files of one run are written as one set (see [`write_outputs`]): every
//! file is staged first, and only when all are staged are they put in place, the run's manifest
//! last.

pub mod check;
pub mod flowtest;
pub mod geojson;
pub mod html;
pub mod import;
pub mod permit;
pub mod set;
pub mod solve;
pub mod table;
pub mod upsize;
pub mod validate;
pub mod words;

use std::path::{Path, PathBuf};

use thiserror::Error;

use crate::model::{Diagnostic, Diagnostics, Severity};
use crate::units::{Quantity, UnitSystem};

pub use set::{
    check_output_path, create_output_folder, manifest_name, mask_run, new_run_id, write_outputs,
    OutputFile, OutputSet, MANIFEST_PREFIX,
};

#[derive(Debug, Error)]
pub enum ReportError {
    #[error("cannot create the output folder {path}: {source}; fix: give --out a folder that exists or can be created (no part of its path may be a file)")]
    CreateDir {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("cannot write {path}: {source}")]
    Write {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("cannot write the output file {path}: a folder of that name is in the way (move or remove that folder, or give --out another folder)")]
    InTheWay { path: PathBuf },
    /// `--out` names an existing file.
    #[error("the output folder {path} is a file; fix: give --out the path of a folder (a new one, or one that holds earlier results)")]
    OutIsFile { path: PathBuf },
    #[error(
        "cannot write {name}: an output file name must be a relative path inside the output folder"
    )]
    BadName { name: String },
    #[error("the output folder {0} is the network folder; choose another folder so that no input file can be overwritten")]
    OutputIsInput(PathBuf),
    #[error("cannot render {what}: {message}")]
    Render { what: String, message: String },
    /// A failure while the set was staged or put in place, after which every file of the folder
    /// is as it was before the run.
    #[error(
        "{cause}; no output file was replaced: the files in {dir} are those of the previous run"
    )]
    SetNotWritten {
        dir: PathBuf,
        cause: Box<ReportError>,
    },
    /// A failure while the set was put in place, and the previous files could not all be put
    /// back. The manifest is absent, so a reader can tell that the folder holds no whole set.
    #[error("{cause}; the previous files in {dir} could not all be restored ({detail}): the folder now mixes two runs and has no manifest; run the command again")]
    SetMixed {
        dir: PathBuf,
        cause: Box<ReportError>,
        detail: String,
    },
}

/// Whether two paths name the same existing folder.
pub fn is_same_folder(a: &Path, b: &Path) -> bool {
    matches!((a.canonicalize(), b.canonicalize()), (Ok(x), Ok(y)) if x == y)
}

/// The input warnings a report lists: the plausibility warnings of the network and of the
/// criteria, in that order (notes, such as ignored columns, are left to `firemain validate`).
pub fn input_warnings(network: &Diagnostics, criteria: &Diagnostics) -> Vec<Diagnostic> {
    network
        .iter()
        .chain(criteria.iter())
        .filter(|d| d.severity == Severity::Warning)
        .cloned()
        .collect()
}

/// The "Input warnings" section of a report: every plausibility warning with its location and
/// fix, or a line saying there were none.
pub fn input_warnings_section(warnings: &[Diagnostic]) -> table::Section {
    let section = table::Section::titled("Input warnings");
    if warnings.is_empty() {
        return section
            .paragraph("None: the network and criteria files raised no plausibility warning.");
    }
    section
        .paragraph(format!(
            "{} plausibility warning(s) about the input files (common practice, not a published standard); the analysis went ahead, but check each:",
            warnings.len()
        ))
        .list(warnings.iter().map(|d| {
            let text = format!(
                ": {}{}",
                d.message,
                d.fix
                    .as_ref()
                    .map(|f| format!("; fix: {f}"))
                    .unwrap_or_default()
            );
            with_code_spans(table::Text::new().code(d.location.to_string()), &text)
        }))
}

/// Appends `text` to `t`, its backquoted parts (ids and values in a diagnostic's message, such as
/// `P001`) as code spans, so that every format draws them as literal text.
pub fn with_code_spans(mut t: table::Text, text: &str) -> table::Text {
    let parts: Vec<&str> = text.split('`').collect();
    // An unpaired backquote is plain text.
    let paired = parts.len() % 2 == 1;
    for (k, part) in parts.iter().enumerate() {
        if part.is_empty() {
            continue;
        }
        if k % 2 == 1 && (paired || k + 1 < parts.len()) {
            t = t.code(*part);
        } else if k % 2 == 1 {
            t = t.plain(format!("`{part}"));
        } else {
            t = t.plain(*part);
        }
    }
    t
}

/// The title block of a report (`--project`): the project's facts, then its free notes.
pub fn project_section(p: &crate::model::project::Project) -> table::Section {
    let section = table::Section::titled("Project").table(table::Table::facts(p.rows()));
    if p.notes.is_empty() {
        return section;
    }
    section.list(p.notes.iter().map(|n| table::Text::from(n.as_str())))
}

/// One input warning in `report.json`.
#[derive(serde::Serialize)]
pub struct JsonInputWarning {
    pub file: String,
    pub line: Option<u64>,
    pub column: Option<u64>,
    pub message: String,
    pub fix: Option<String>,
}

impl From<&Diagnostic> for JsonInputWarning {
    fn from(d: &Diagnostic) -> Self {
        JsonInputWarning {
            file: d.location.file.clone(),
            line: d.location.line,
            column: d.location.column,
            message: d.message.clone(),
            fix: d.fix.clone(),
        }
    }
}

/// The date of a run as documents show it: the `YYYY-MM-DD` of `generated` (an RFC 3339
/// timestamp in UTC, so this is the analysis date in UTC). The full timestamp stays in
/// report.json and the manifests. A text of another form is returned whole.
pub fn date_of(generated: &str) -> &str {
    let b = generated.as_bytes();
    let is_date = b.len() >= 10
        && b[..10].iter().enumerate().all(|(i, c)| match i {
            4 | 7 => *c == b'-',
            _ => c.is_ascii_digit(),
        })
        && b.get(10).is_none_or(|c| *c == b'T');
    if is_date {
        &generated[..10]
    } else {
        generated
    }
}

/// A number with fixed decimals; empty for a non-finite value (which the analyses never
/// produce, but no report may ever print NaN).
pub fn num(value: f64, decimals: usize) -> String {
    // Beyond any quantity of a water system (1e15 gpm, psi, ft ...), a figure is written with an
    // exponent rather than as a run of digits (common practice, no source); no input within
    // the loaders' limits gets there.
    if value.is_finite() && value.abs() >= 1.0e15 {
        return crate::units::display_value(value);
    }
    if value.is_finite() {
        let s = format!("{value:.decimals$}");
        // Avoid "-0.00".
        if s.trim_start_matches('-')
            .chars()
            .all(|c| c == '0' || c == '.')
        {
            s.trim_start_matches('-').to_string()
        } else {
            s
        }
    } else {
        String::new()
    }
}

/// A number for an input file: the shortest text that reads back to the value rounded to
/// nine decimals (so that 8 in converted to metres and back is written `8`).
pub fn plain_number(value: f64) -> String {
    if !value.is_finite() {
        return String::new();
    }
    let rounded = (value * 1e9).round() / 1e9;
    format!("{}", if rounded == 0.0 { 0.0 } else { rounded })
}

/// Conversions and labels for output in a network's units.
#[derive(Clone, Copy, Debug)]
pub struct Out {
    pub units: UnitSystem,
}

impl Out {
    pub fn new(units: UnitSystem) -> Self {
        Out { units }
    }

    pub fn length(&self, m: f64) -> f64 {
        self.units.from_si(Quantity::Length, m)
    }
    pub fn diameter(&self, m: f64) -> f64 {
        self.units.from_si(Quantity::Diameter, m)
    }
    pub fn flow(&self, m3s: f64) -> f64 {
        self.units.from_si(Quantity::Flow, m3s)
    }
    pub fn pressure(&self, kpa: f64) -> f64 {
        self.units.from_si(Quantity::Pressure, kpa)
    }
    pub fn velocity(&self, mps: f64) -> f64 {
        self.units.from_si(Quantity::Velocity, mps)
    }

    /// Column-name suffix of a quantity: `gpm`, `psi`, `ft` ...
    pub fn sfx(&self, q: Quantity) -> &'static str {
        self.units.suffix(q)
    }
    /// Unit symbol of a quantity: `gpm`, `psi`, `L/s` ...
    pub fn sym(&self, q: Quantity) -> &'static str {
        self.units.symbol(q)
    }

    /// Decimals that suit a quantity in these units.
    pub fn decimals(&self, q: Quantity) -> usize {
        match (self.units, q) {
            (_, Quantity::Length) => 2,
            (UnitSystem::Us, Quantity::Diameter) => 2,
            (UnitSystem::Si, Quantity::Diameter) => 1,
            (UnitSystem::Us, Quantity::Flow) => 1,
            (UnitSystem::Si, Quantity::Flow) => 2,
            (UnitSystem::Us, Quantity::Pressure) => 1,
            (UnitSystem::Si, Quantity::Pressure) => 0,
            (_, Quantity::Velocity) => 2,
        }
    }

    /// A flow for tables and text: whole gpm, or L/s to 0.1 (whole L/s would hide a 0.5 L/s
    /// shortfall behind equal-looking numbers).
    pub fn flow_text(&self, m3s: f64) -> String {
        num(self.flow(m3s), self.flow_decimals())
    }

    /// An available flow (or a margin over the required flow) for tables and text, rounded
    /// down to the shown decimals: the figure printed is never above the flow verified (every
    /// flow below an available flow meets the constraints, by its first-crossing definition).
    /// The 1e-6 forgives the round-off of the unit conversion.
    pub fn flow_text_down(&self, m3s: f64) -> String {
        let decimals = self.flow_decimals();
        let scale = 10f64.powi(decimals as i32);
        num(((self.flow(m3s) * scale) + 1e-6).floor() / scale, decimals)
    }

    /// A shortfall (required minus available flow) rounded up to the shown decimals, for the
    /// same reason as [`Out::flow_text_down`].
    pub fn flow_text_up(&self, m3s: f64) -> String {
        let decimals = self.flow_decimals();
        let scale = 10f64.powi(decimals as i32);
        num(((self.flow(m3s) * scale) - 1e-6).ceil() / scale, decimals)
    }

    /// The volume a flow (m³/s) carries in one hour, in US gallons or m³, with its unit
    /// (1 US gal = 3.785411784 L, `units`): a customer shortfall worded as water not delivered.
    pub fn hourly_volume(&self, m3s: f64) -> (String, &'static str) {
        let m3 = m3s * 3600.0;
        match self.units {
            UnitSystem::Us => (num(m3 / (crate::units::M3S_PER_GPM * 60.0), 0), "gal"),
            UnitSystem::Si => (num(m3, 1), "m3"),
        }
    }

    fn flow_decimals(&self) -> usize {
        match self.units {
            UnitSystem::Us => 0,
            UnitSystem::Si => 1,
        }
    }

    /// An SI value formatted in these units.
    pub fn fmt(&self, q: Quantity, si: f64) -> String {
        num(self.units.from_si(q, si), self.decimals(q))
    }

    /// An SI value formatted in these units with extra precision (CSV files).
    pub fn fmt_precise(&self, q: Quantity, si: f64) -> String {
        num(self.units.from_si(q, si), self.decimals(q) + 2)
    }
}

/// Renders rows as CSV bytes.
pub fn csv_bytes(header: &[String], rows: &[Vec<String>]) -> Result<Vec<u8>, ReportError> {
    let render = || -> Result<Vec<u8>, csv::Error> {
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(header)?;
        for r in rows {
            w.write_record(r)?;
        }
        w.into_inner().map_err(|e| e.into_error().into())
    };
    render().map_err(|e| ReportError::Render {
        what: "CSV".into(),
        message: e.to_string(),
    })
}

/// The plain-words cautions every report carries.
pub const CAUTIONS: &[&str] = &[
    "These results are screening estimates from a steady-state, demand-driven model. They are only as good as the model's data and calibration (pipe sizes, roughness, valve positions, elevations, source levels, demands).",
    "Confirm them with field hydrant flow tests before relying on them.",
    "Drawing fire flow lowers pressures elsewhere in the system and risks backflow and contamination where pressures fall low.",
    "The local fire code official and a licensed professional engineer decide what is required and whether it is met; this report is a screening aid, not an approval.",
];

#[cfg(test)]
mod tests {
    use super::*;

    // RFC 3339, section 5.6 (full-date "T" full-time): common practice, no further source.
    #[test]
    fn date_of_keeps_the_full_date_of_a_timestamp() {
        assert_eq!(date_of("2025-12-02T23:59:59Z"), "2025-12-02");
        assert_eq!(date_of("2025-12-02"), "2025-12-02");
        assert_eq!(date_of("yesterday"), "yesterday");
        assert_eq!(date_of("2025-12-0"), "2025-12-0");
    }

    #[test]
    fn numbers_never_print_nan_or_negative_zero() {
        assert_eq!(num(f64::NAN, 2), "");
        assert_eq!(num(f64::INFINITY, 2), "");
        assert_eq!(num(-0.0001, 2), "0.00");
        assert_eq!(num(-1.234, 1), "-1.2");
        // Never a run of hundreds of digits (common practice, no source).
        assert_eq!(num(1e300, 2), "1e300");
        assert_eq!(num(-2.5e16, 1), "-2.5e16");
        assert_eq!(num(123456789.0, 1), "123456789.0");
    }
}
