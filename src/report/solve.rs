//! Reports of one steady state (`firemain solve`): a terminal summary and result CSV files.

use super::table::{hanging, Markup, Section, Table, Terminal};
use super::{csv_bytes, num, Out, OutputFile, ReportError};
use crate::steady::{LinkResult, NodeResult, SteadyReport};
use crate::units::{Quantity, UnitSystem};

/// The terminal summary: totals, extreme pressures and velocities.
pub fn terminal(report: &SteadyReport, units: UnitSystem) -> String {
    let o = Out::new(units);
    let mut s = headline(report, o);
    s.push_str(&pressure_extremes(report, o));
    s.push_str(&fastest_pipes(report, o));
    s
}

/// The network, the condition, the solver's work, the demand and the controls' notes.
fn headline(report: &SteadyReport, o: Out) -> String {
    let mut s = String::new();
    let f = o.sym(Quantity::Flow);
    s.push_str(&hanging("Network:    ", &report.network));
    s.push_str(&format!(
        "Condition:  {} demand (x{} average day)\n",
        report.condition_label, report.demand_factor
    ));
    s.push_str(&format!(
        "Solved in:  {} iterations ({} factorizations)\n",
        report.iterations, report.factorizations
    ));
    s.push_str(&format!(
        "Demand:     {} {f} total junction demand; {} {f} net source outflow\n",
        o.fmt(Quantity::Flow, report.total_demand_m3s),
        o.fmt(Quantity::Flow, report.source_outflow_m3s)
    ));
    for note in &report.notes {
        s.push_str(&hanging(
            "Note:       ",
            &super::words::control_note(report, note),
        ));
    }
    s
}

/// The five junctions of lowest and the five of highest pressure (ties by id).
fn pressure_extremes(report: &SteadyReport, o: Out) -> String {
    let mut junctions: Vec<_> = report
        .nodes
        .iter()
        .filter(|n| n.kind == "junction")
        .filter_map(|n| n.pressure_kpa.map(|p| (p, n)))
        .collect();
    junctions.sort_by(|a, b| a.0.total_cmp(&b.0).then_with(|| a.1.id.cmp(&b.1.id)));
    let mut s = pressure_table(o, "Lowest pressures", junctions.iter().take(5).collect());
    s.push_str(&pressure_table(
        o,
        "Highest pressures",
        junctions.iter().rev().take(5).collect(),
    ));
    s
}

/// A titled table of junctions and their pressures.
fn pressure_table(o: Out, title: &str, rows: Vec<&(f64, &NodeResult)>) -> String {
    let p = o.sym(Quantity::Pressure);
    let l = o.sym(Quantity::Length);
    let header = vec![
        "junction".to_string(),
        "zone".to_string(),
        format!("elevation ({l})"),
        format!("grade ({l})"),
        format!("pressure ({p})"),
    ];
    let table = Table::new(header).with_rows(rows.into_iter().map(|(pk, n)| {
        vec![
            n.id.clone(),
            n.zone.clone().unwrap_or_default(),
            o.fmt(Quantity::Length, n.elevation_m),
            o.fmt(Quantity::Length, n.grade_m),
            o.fmt(Quantity::Pressure, *pk),
        ]
    }));
    Terminal.section(&Section::titled(title).table(table), 1)
}

/// The five pipes of highest velocity, either direction (ties by id).
fn fastest_pipes(report: &SteadyReport, o: Out) -> String {
    let mut fast: Vec<_> = report
        .links
        .iter()
        .filter(|r| r.kind == "pipe")
        .filter_map(|r| r.velocity_m_per_s.map(|v| (v.abs(), r)))
        .collect();
    fast.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.id.cmp(&b.1.id)));
    let l = o.sym(Quantity::Length);
    let header = vec![
        "pipe".to_string(),
        "from".to_string(),
        "to".to_string(),
        format!("flow ({})", o.sym(Quantity::Flow)),
        format!("velocity ({})", o.sym(Quantity::Velocity)),
        format!("headloss ({l} per 1000 {l})"),
    ];
    let table = Table::new(header).with_rows(fast.iter().take(5).map(|(v, r)| {
        vec![
            r.id.clone(),
            r.from.clone(),
            r.to.clone(),
            o.fmt(Quantity::Flow, r.flow_m3s),
            o.fmt(Quantity::Velocity, *v),
            r.headloss_per_1000.map(|h| num(h, 2)).unwrap_or_default(),
        ]
    }));
    Terminal.section(&Section::titled("Highest pipe velocities").table(table), 1)
}

/// A node's demand and supply (m³/s), both read as they are, with no sign to interpret: what
/// it takes from the network and what it delivers into it. A junction supplies nothing (its
/// demand is kept as given, whatever its sign); a source (whose `demand_m3s` is minus its net
/// outflow) that delivers water has that outflow as its supply and no demand, and a tank that
/// fills has its inflow as its demand and no supply.
fn demand_and_supply(n: &NodeResult) -> (f64, f64) {
    if n.kind == "junction" {
        (n.demand_m3s, 0.0)
    } else {
        (n.demand_m3s.max(0.0), (-n.demand_m3s).max(0.0))
    }
}

/// `node_results.csv`, `pipe_results.csv`, and where present `pump_results.csv` and
/// `valve_results.csv`.
pub fn files(report: &SteadyReport, units: UnitSystem) -> Result<Vec<OutputFile>, ReportError> {
    let o = Out::new(units);
    let l = o.sfx(Quantity::Length);
    let mut out = vec![node_results(report, o)?, pipe_results(report, o)?];
    for (kind, name, head_col) in [
        ("pump", "pump_results.csv", format!("head_{l}")),
        ("valve", "valve_results.csv", format!("headloss_{l}")),
    ] {
        out.extend(pump_or_valve_results(report, o, kind, name, head_col)?);
    }
    Ok(out)
}

/// `node_results.csv`: every node.
fn node_results(report: &SteadyReport, o: Out) -> Result<OutputFile, ReportError> {
    let (l, f, p) = (
        o.sfx(Quantity::Length),
        o.sfx(Quantity::Flow),
        o.sfx(Quantity::Pressure),
    );
    let header = vec![
        "id".to_string(),
        "kind".to_string(),
        "zone".to_string(),
        format!("elevation_{l}"),
        format!("demand_{f}"),
        format!("supply_{f}"),
        format!("grade_{l}"),
        format!("pressure_{p}"),
    ];
    let rows: Vec<Vec<String>> = report
        .nodes
        .iter()
        .map(|n| {
            let (demand, supply) = demand_and_supply(n);
            vec![
                n.id.clone(),
                n.kind.to_string(),
                n.zone.clone().unwrap_or_default(),
                o.fmt_precise(Quantity::Length, n.elevation_m),
                o.fmt_precise(Quantity::Flow, demand),
                o.fmt_precise(Quantity::Flow, supply),
                o.fmt_precise(Quantity::Length, n.grade_m),
                n.pressure_kpa
                    .map(|k| o.fmt_precise(Quantity::Pressure, k))
                    .unwrap_or_default(),
            ]
        })
        .collect();
    Ok(OutputFile {
        name: "node_results.csv".into(),
        bytes: csv_bytes(&header, &rows)?,
    })
}

/// `pipe_results.csv`: every pipe.
fn pipe_results(report: &SteadyReport, o: Out) -> Result<OutputFile, ReportError> {
    let (l, f, v) = (
        o.sfx(Quantity::Length),
        o.sfx(Quantity::Flow),
        o.sfx(Quantity::Velocity),
    );
    let header = vec![
        "id".to_string(),
        "from".to_string(),
        "to".to_string(),
        format!("flow_{f}"),
        format!("velocity_{v}"),
        format!("headloss_{l}"),
        format!("headloss_per_1000_{l}"),
        "status".to_string(),
    ];
    let rows: Vec<Vec<String>> = report
        .links
        .iter()
        .filter(|r| r.kind == "pipe")
        .map(|r| {
            vec![
                r.id.clone(),
                r.from.clone(),
                r.to.clone(),
                o.fmt_precise(Quantity::Flow, r.flow_m3s),
                r.velocity_m_per_s
                    .map(|x| o.fmt_precise(Quantity::Velocity, x))
                    .unwrap_or_default(),
                o.fmt_precise(Quantity::Length, r.headloss_m),
                r.headloss_per_1000.map(|h| num(h, 4)).unwrap_or_default(),
                r.state.name().to_string(),
            ]
        })
        .collect();
    Ok(OutputFile {
        name: "pipe_results.csv".into(),
        bytes: csv_bytes(&header, &rows)?,
    })
}

/// `name` (`pump_results.csv` or `valve_results.csv`): every link of `kind`, with its head in
/// the column `head_col`; `None` when the network has no such link.
fn pump_or_valve_results(
    report: &SteadyReport,
    o: Out,
    kind: &str,
    name: &str,
    head_col: String,
) -> Result<Option<OutputFile>, ReportError> {
    let rows: Vec<Vec<String>> = report
        .links
        .iter()
        .filter(|r| r.kind == kind)
        .map(|r| {
            vec![
                r.id.clone(),
                o.fmt_precise(Quantity::Flow, r.flow_m3s),
                o.fmt_precise(Quantity::Length, pump_or_valve_head(kind, r)),
                r.state.name().to_string(),
            ]
        })
        .collect();
    if rows.is_empty() {
        return Ok(None);
    }
    let header = vec![
        "id".to_string(),
        format!("flow_{}", o.sfx(Quantity::Flow)),
        head_col,
        "state".to_string(),
    ];
    Ok(Some(OutputFile {
        name: name.into(),
        bytes: csv_bytes(&header, &rows)?,
    }))
}

/// The head column of a pump (head added) or a valve (head lost), m.
fn pump_or_valve_head(kind: &str, r: &LinkResult) -> f64 {
    // A pump adds head only while it runs; a stopped one adds none.
    match (kind, r.state) {
        ("pump", crate::hydraulics::LinkState::Running) => -r.headloss_m,
        ("pump", _) => 0.0,
        _ => r.headloss_m,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::steady::NodeResult;

    fn node(kind: &'static str, demand_m3s: f64) -> NodeResult {
        NodeResult {
            id: "N".into(),
            kind,
            zone: None,
            elevation_m: 0.0,
            demand_m3s,
            grade_m: 0.0,
            pressure_kpa: None,
        }
    }

    // Mass balance at a node (what enters equals what leaves): common practice, no source.
    #[test]
    fn a_source_reports_its_outflow_as_supply_and_a_filling_tank_its_inflow_as_demand() {
        assert_eq!(demand_and_supply(&node("reservoir", -0.2)), (0.0, 0.2));
        assert_eq!(demand_and_supply(&node("tank", 0.05)), (0.05, 0.0));
        assert_eq!(demand_and_supply(&node("junction", 0.01)), (0.01, 0.0));
        let (d, s) = demand_and_supply(&node("tank", 0.0));
        assert!(d == 0.0 && s == 0.0);
    }
}
