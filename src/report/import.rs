//! The report of `firemain import geojson`: import.md (counts, then every change by kind) and
//! import.csv (one row per change), so that the user can fix the GIS rather than the CSV files.

use crate::model::gis::build::{short, Action, Event};
use crate::model::gis::Summary;

use super::{csv_bytes, ReportError};

/// Columns of import.csv.
pub const IMPORT_COLUMNS: [&str; 7] = ["action", "layer", "feature", "id", "x", "y", "detail"];

/// import.csv: one row per change, in the order the import made them.
pub fn import_csv(events: &[Event]) -> Result<Vec<u8>, ReportError> {
    let header: Vec<String> = IMPORT_COLUMNS.iter().map(|s| s.to_string()).collect();
    let rows: Vec<Vec<String>> = events
        .iter()
        .map(|e| {
            vec![
                e.action.name().to_string(),
                e.layer.to_string(),
                e.feature.map(|f| f.to_string()).unwrap_or_default(),
                e.id.clone(),
                short(e.at[0]),
                short(e.at[1]),
                e.detail.clone(),
            ]
        })
        .collect();
    csv_bytes(&header, &rows)
}

/// What each kind of change means, for the report.
fn meaning(a: Action) -> &'static str {
    match a {
        Action::Snapped => "line ends moved onto a junction within the snap tolerance",
        Action::Split => "pipes split by a hydrant or source point, or multi-part lines",
        Action::Attached => "points attached to an existing junction",
        Action::Dropped => "features left out",
        Action::Guessed => "values filled in that the data did not give",
        Action::Renamed => "ids used twice, the later one renamed",
        Action::NotJoined => "lines that cross or touch without a shared vertex (not joined)",
    }
}

/// A Markdown table cell: pipes and line breaks escaped.
fn cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// import.md.
pub fn import_md(summary: &Summary, events: &[Event], generated: &str, run_id: &str) -> String {
    let mut s = format!("# Import of {}\n\n", cell(&summary.name));
    s += &format!("Run {run_id}, {generated}.\n\n");
    s += &format!(
        "- CRS: {}; coordinates in {} (kept as x, y in the network's files)\n",
        summary
            .crs
            .as_deref()
            .map(|c| format!("`{c}`"))
            .unwrap_or_else(|| "none (local coordinates)".into()),
        summary.coordinate_unit
    );
    s += &format!(
        "- Read: {} pipe feature(s), {} hydrant feature(s), {} source feature(s)\n",
        summary.pipe_features, summary.hydrant_features, summary.source_features
    );
    s += &format!(
        "- Made: {} junction(s), {} source(s), {} pipe(s), {} hydrant(s)\n",
        summary.junctions, summary.sources, summary.pipes, summary.hydrants
    );
    s += &format!("- Files: {}\n\n", summary.files.join(", "));
    s += "## Changes\n\n| change | count | meaning |\n|---|---|---|\n";
    for a in Action::ALL {
        let n = events.iter().filter(|e| e.action == a).count();
        s += &format!("| {} | {n} | {} |\n", a.name(), meaning(a));
    }
    for a in Action::ALL {
        let list: Vec<&Event> = events.iter().filter(|e| e.action == a).collect();
        if list.is_empty() {
            continue;
        }
        s += &format!(
            "\n## {}\n\n| layer | feature | id | x | y | detail |\n|---|---|---|---|---|---|\n",
            a.name()
        );
        for e in list {
            s += &format!(
                "| {} | {} | {} | {} | {} | {} |\n",
                e.layer,
                e.feature.map(|f| f.to_string()).unwrap_or_default(),
                cell(&e.id),
                short(e.at[0]),
                short(e.at[1]),
                cell(&e.detail)
            );
        }
    }
    s += "\nFeature numbers count from 0 in the order of the file. Fix these in the GIS and import again rather than editing the CSV files.\n";
    s
}
