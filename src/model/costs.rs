//! Reading a pipe cost table (`firemain upsize --costs FILE`): CSV with columns `diameter`
//! (in the network's diameter unit) and `cost_per_length` (cost per the network's length unit,
//! in whatever currency the table uses).

use std::path::Path;

use super::diagnostic::{Diagnostics, Location};
use super::table::{read_table, TableSpec};
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
        let mut parsed = [0.0; 2];
        let mut ok = true;
        for (k, name) in ["diameter", "cost_per_length"].into_iter().enumerate() {
            let cell = table.cell(row, name);
            match cell.text.parse::<f64>() {
                Ok(v) if v.is_finite() && v > 0.0 => parsed[k] = v,
                _ => {
                    diags.error(
                        cell.location(&file),
                        format!("`{}` is not a positive number (column `{name}`)", cell.text),
                        match name {
                            "diameter" => format!(
                                "give the inside diameter in {}",
                                units.symbol(Quantity::Diameter)
                            ),
                            _ => format!(
                                "give the cost per {} of pipe laid",
                                units.symbol(Quantity::Length)
                            ),
                        },
                    );
                    ok = false;
                }
            }
        }
        if ok {
            let d = units.to_si(Quantity::Diameter, parsed[0]);
            // Cost per length unit -> cost per metre.
            let per_m = parsed[1] / units.to_si(Quantity::Length, 1.0);
            if rows.iter().any(|&(e, _): &(f64, f64)| same_diameter(e, d)) {
                diags.error(
                    Location::line(file.clone(), row.line),
                    format!("diameter {} appears twice", parsed[0]),
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
