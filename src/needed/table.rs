//! The fire-code appendix table method, applied as its method file states it
//! (fire-flow-facts §7.2; docs/needed-fire-flow.md): the fire-flow calculation area and the
//! construction type give a row (flow, duration); dwellings have their own rows; sprinklers
//! reduce other buildings' flow to a fraction of the row's, not below a floor, with the
//! duration of the reduced flow.
//!
//! Table bounds are whole numbers and a row `[a, b]` covers the areas above a − 1 up to and
//! including b (3,601 follows 3,600; 3,600.5 ft² takes the 3,601 row, the cautious reading).
//! An area between the shipped rows is an error that names the row to add, never a guess.

use super::method::{AreaTable, DwellingFigure, TableDwelling, TableRow};
use super::{grouped, same_class, Calc, Figure, NeededFlowError, WHOLE_NUMBER_REL_TOL};
use crate::model::buildings::NO_SPRINKLERS;

pub(super) fn figure(calc: &mut Calc<'_>, t: &AreaTable) -> Result<Figure, NeededFlowError> {
    let b = calc.building;
    let mut occupancies: Vec<&str> = t.occupancies.iter().map(String::as_str).collect();
    if let Some(d) = &t.dwelling {
        for o in &d.occupancies {
            if !occupancies.iter().any(|k| same_class(k, o)) {
                occupancies.push(o);
            }
        }
    }
    let occupancy = occupancies[calc.class("occupancy", b.occupancy.as_deref(), &occupancies)?];
    let names: Vec<&str> = t.sprinklers.iter().map(|(k, _)| k.as_str()).collect();
    let sprinklers = names[calc.class("sprinklers", Some(&b.sprinklers), &names)?];
    match &t.dwelling {
        Some(d) if d.occupancies.iter().any(|o| same_class(o, occupancy)) => {
            dwelling(calc, t, d, occupancy, sprinklers)
        }
        _ => other(calc, t, sprinklers),
    }
}

/// Whether the row range `[lo, hi]` covers `area` (see the module comment).
fn covers((lo, hi): (f64, f64), area: f64) -> bool {
    area <= hi * (1.0 + WHOLE_NUMBER_REL_TOL) && (lo <= 0.0 || area > lo - 1.0)
}

fn range_text((lo, hi): (f64, f64), unit: &str) -> String {
    if hi.is_infinite() {
        format!("{} {unit} and above", grouped(lo))
    } else {
        format!("{}–{} {unit}", grouped(lo), grouped(hi))
    }
}

/// The row of the main table for the building's construction type and area.
fn lookup<'t>(
    calc: &mut Calc<'_>,
    t: &'t AreaTable,
    area: f64,
) -> Result<&'t TableRow, NeededFlowError> {
    let b = calc.building;
    let classes: Vec<&str> = t
        .columns
        .iter()
        .flat_map(|c| c.classes.iter().map(String::as_str))
        .collect();
    let class = classes[calc.class("construction", b.construction.as_deref(), &classes)?];
    let col = t
        .columns
        .iter()
        .position(|c| c.classes.iter().any(|k| k == class))
        .unwrap_or(0);
    let unit = calc.area_unit();
    let found = t
        .rows
        .iter()
        .find(|r| r.areas[col].is_some_and(|rng| covers(rng, area)));
    let Some(row) = found else {
        return Err(beyond(calc, t, col, class, area));
    };
    let range = row.areas[col]
        .map(|r| range_text(r, unit))
        .unwrap_or_default();
    let text = format!(
        "table row ({} line {}), construction `{class}` (column {}), {range}: {} for {} h",
        calc.method.file,
        row.line,
        t.columns[col].name,
        calc.flow_text(row.flow),
        grouped(row.hours)
    );
    calc.step(text);
    calc.used(&row.source);
    Ok(row)
}

/// The error for an area that no shipped row of the column covers.
fn beyond(calc: &Calc<'_>, t: &AreaTable, col: usize, class: &str, area: f64) -> NeededFlowError {
    let m = calc.method;
    let unit = calc.area_unit();
    let shipped: Vec<String> = t
        .rows
        .iter()
        .filter_map(|r| r.areas[col].map(|rng| range_text(rng, unit)))
        .collect();
    let incomplete = if m.complete {
        String::new()
    } else {
        "; the file ships only part of the table".to_string()
    };
    NeededFlowError::NotCovered {
        building: calc.building.id.clone(),
        field: "fire_flow_area",
        message: format!(
            "fire-flow area {} {unit} of construction `{class}` is in no row that {} ships for column {} (it ships {}){incomplete}",
            grouped(area),
            m.file,
            t.columns[col].name,
            shipped.join(", ")
        ),
        fix: format!(
            "add to {} the row of the table ({}, {} ed.) that covers {} {unit} in column {}, copied from a licensed copy of the code, with its source and verified = true; or give the engineer's required_flow and duration",
            m.file,
            m.document,
            m.edition,
            grouped(area),
            t.columns[col].name
        ),
    }
}

/// A building that is not a dwelling: the row's flow, reduced for sprinklers where the file
/// says so.
fn other(calc: &mut Calc<'_>, t: &AreaTable, sprinklers: &str) -> Result<Figure, NeededFlowError> {
    let area = calc.area("fire-flow calculation area")?;
    let row = lookup(calc, t, area)?;
    let reduction = t
        .reductions
        .iter()
        .find(|r| r.sprinklers.iter().any(|s| same_class(s, sprinklers)));
    let Some(red) = reduction else {
        if !same_class(sprinklers, NO_SPRINKLERS) {
            calc.step(format!(
                "sprinklers `{sprinklers}`: {} gives no reduction for this class; the table flow stands",
                calc.method.file
            ));
        }
        return Ok(Figure {
            flow: row.flow,
            hours: row.hours,
        });
    };
    let reduced = row.flow * red.fraction;
    calc.step(format!(
        "sprinklers `{sprinklers}`: {} % of {} = {}",
        grouped(red.fraction * 100.0),
        calc.flow_text(row.flow),
        calc.flow_text(reduced)
    ));
    calc.used(&red.source);
    let flow = if reduced < red.floor {
        calc.step(format!(
            "raised to the floor for sprinklers `{sprinklers}`: {}",
            calc.flow_text(red.floor)
        ));
        red.floor
    } else {
        reduced
    };
    let hours = calc.duration(&t.durations, flow);
    Ok(Figure { flow, hours })
}

/// A dwelling: its own row by area and sprinklers, a flow or a fraction of the main table's.
fn dwelling(
    calc: &mut Calc<'_>,
    t: &AreaTable,
    d: &TableDwelling,
    occupancy: &str,
    sprinklers: &str,
) -> Result<Figure, NeededFlowError> {
    let area = calc.area("fire-flow calculation area")?;
    let found = d
        .rows
        .iter()
        .find(|r| covers(r.area, area) && r.sprinklers.iter().any(|s| same_class(s, sprinklers)));
    let Some(row) = found else {
        let m = calc.method;
        return Err(NeededFlowError::NotCovered {
            building: calc.building.id.clone(),
            field: "sprinklers",
            message: format!(
                "no dwelling row of {} covers {} {} with sprinklers `{sprinklers}`",
                m.file,
                grouped(area),
                calc.area_unit()
            ),
            fix: format!(
                "check the sprinkler class, or add the dwelling row to {} from a licensed copy",
                m.file
            ),
        });
    };
    let head = format!(
        "dwelling (occupancy `{occupancy}`), {}, sprinklers `{sprinklers}`",
        range_text(row.area, calc.area_unit())
    );
    calc.used(&row.source);
    match row.figure {
        DwellingFigure::Flow(q) => {
            let hours = row.hours.unwrap_or(0.0);
            let text = format!("{head}: {} for {} h", calc.flow_text(q), grouped(hours));
            calc.step(text);
            Ok(Figure { flow: q, hours })
        }
        DwellingFigure::TableFraction(f) => {
            calc.step(format!(
                "{head}: {} % of the table flow",
                grouped(f * 100.0)
            ));
            let table_row = lookup(calc, t, area)?;
            let flow = table_row.flow * f;
            let hours = row.hours.unwrap_or(table_row.hours);
            let text = format!(
                "{} % of {} = {} for {} h",
                grouped(f * 100.0),
                calc.flow_text(table_row.flow),
                calc.flow_text(flow),
                grouped(hours)
            );
            calc.step(text);
            Ok(Figure { flow, hours })
        }
    }
}
