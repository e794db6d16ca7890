//! Reading a pipe cost table (`firemain upsize --costs FILE`): CSV with columns `diameter`
//! (in the network's diameter unit) and `cost_per_length` (cost per the network's length unit,
//! in whatever currency the table uses).

use std::path::Path;

use super::diagnostic::{Diagnostics, Location};
use super::table::{read_table, Cells, TableSpec};
use crate::units::{same_diameter, Quantity, UnitSystem};

const COSTS: TableSpec<'static> = TableSpec {
    known: &["diameter", "cost_per_length"],
    required: &["diameter", "cost_per_length"],
};

/// Reads the cost table: (diameter m, cost per m), ascending diameter.
pub fn load_cost_table(path: &Path, units: UnitSystem) -> Result<Vec<(f64, f64)>, Diagnostics> {
    let file = path.display().to_string();
    let mut diags = Diagnostics::new();
    let Some(table) = read_table(path, &file, &COSTS, &mut diags) else {
        return Err(diags);
    };
    let mut rows = Vec::new();
    for row in table.rows() {
        let mut c = Cells::new(&table, row, units, &mut diags);
        let diameter = c.positive_plain(
            "diameter",
            &format!(
                "give the inside diameter in {}",
                units.symbol(Quantity::Diameter)
            ),
        );
        let cost = c.positive_plain(
            "cost_per_length",
            &format!(
                "give the cost per {} of pipe laid",
                units.symbol(Quantity::Length)
            ),
        );
        if let (Some(diameter), Some(cost)) = (diameter, cost) {
            let d = units.to_si(Quantity::Diameter, diameter);
            // Cost per length unit -> cost per metre.
            let per_m = cost / units.to_si(Quantity::Length, 1.0);
            if !(d.is_finite() && per_m.is_finite()) {
                // Only numbers near the largest f64 overflow in the conversion (found by fuzzing).
                diags.error(
                    Location::line(file.clone(), row.line),
                    format!(
                        "diameter {} or cost {} is too large",
                        crate::units::display_value(diameter),
                        crate::units::display_value(cost)
                    ),
                    "give the diameter and the cost per length as plain numbers of sensible size",
                );
                continue;
            }
            if rows.iter().any(|&(e, _): &(f64, f64)| same_diameter(e, d)) {
                diags.error(
                    Location::line(file.clone(), row.line),
                    format!(
                        "diameter {} appears twice",
                        crate::units::display_value(diameter)
                    ),
                    "give each diameter once",
                );
            }
            rows.push((d, per_m));
        }
    }
    if rows.is_empty() && !diags.has_errors() {
        diags.error(
            Location::file(file),
            "the cost table has no rows",
            "add one row per candidate diameter: diameter, cost_per_length",
        );
    }
    if diags.has_errors() {
        return Err(diags);
    }
    rows.sort_by(|a, b| a.0.total_cmp(&b.0));
    Ok(rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load(text: &str) -> Result<Vec<(f64, f64)>, Diagnostics> {
        let dir = tempfile::tempdir().expect("temporary folder");
        let path = dir.path().join("costs.csv");
        std::fs::write(&path, text).expect("write the table");
        load_cost_table(&path, UnitSystem::Us)
    }

    #[test]
    fn reads_sorted_rows_in_si() {
        // 1 in = 0.0254 m and 1 ft = 0.3048 m exactly (NIST SP 811, 2008, appendix B).
        let rows = load("diameter,cost_per_length\n12,305\n8,152.4\n").expect("table");
        assert_eq!(rows.len(), 2);
        assert!((rows[0].0 - 8.0 * 0.0254).abs() < 1e-12);
        assert!((rows[0].1 - 152.4 / 0.3048).abs() < 1e-9);
        assert!((rows[1].0 - 12.0 * 0.0254).abs() < 1e-12);
    }

    #[test]
    fn every_bad_cell_is_located_with_a_fix() {
        // Wording pinned by this test (common practice, no source).
        let d = load("diameter,cost_per_length\nx,10\n8,-1\n8,5\n8,6\n").expect_err("errors");
        let text = d.to_string();
        for expected in [
            "costs.csv:2:1: error: `x` is not a positive number (column `diameter`); fix: give the inside diameter in in",
            "costs.csv:3:2: error: `-1` is not a positive number (column `cost_per_length`); fix: give the cost per ft of pipe laid",
            "costs.csv:5: error: diameter 8 appears twice; fix: give each diameter once",
        ] {
            assert!(text.contains(expected), "missing `{expected}` in:\n{text}");
        }
        // 1e308 per ft is more than the largest f64 per m (IEEE 754-2008, binary64: about
        // 1.8e308): a located error, not an infinite cost.
        let d = load("diameter,cost_per_length\n8,1e308\n").expect_err("too large");
        assert!(
            d.to_string()
                .contains("costs.csv:2: error: diameter 8 or cost 1e308 is too large"),
            "{d}"
        );
        let d = load("diameter,cost_per_length\n").expect_err("no rows");
        assert!(d.to_string().contains("the cost table has no rows"), "{d}");
    }
}
