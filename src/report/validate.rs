//! Report of `firemain validate`: the findings, then a summary of the network.

use super::table::{hanging, Markup, Section, Table, Terminal};
use super::{num, Out};
use crate::model::validate::NetworkSummary;
use crate::model::{Diagnostics, Network, Severity};
use crate::units::{Quantity, UnitSystem};

/// Findings shown per severity before the rest are only counted; a broken export can produce
/// one error per row.
const SHOWN_PER_SEVERITY: usize = 200;
/// Errors shown before the rest are only counted: past a screenful, more errors of the same
/// kind help nobody, and the first ones usually explain the rest.
const SHOWN_ERRORS: usize = 50;

/// The findings, errors first, with counts.
pub fn diagnostics(diags: &Diagnostics) -> String {
    listing(diags, SHOWN_PER_SEVERITY, "")
}

/// The findings of a network that loaded, as the analysis commands show them: the first few
/// warnings and notes, and where to see the rest.
pub fn diagnostics_brief(diags: &Diagnostics) -> String {
    listing(diags, 5, " (run `firemain validate` to list them all)")
}

fn listing(diags: &Diagnostics, shown: usize, more_hint: &str) -> String {
    let mut s = String::new();
    for severity in [Severity::Error, Severity::Warning, Severity::Note] {
        let items: Vec<_> = diags.iter().filter(|d| d.severity == severity).collect();
        let shown = if severity == Severity::Error {
            SHOWN_ERRORS
        } else {
            shown
        };
        for d in items.iter().take(shown) {
            s.push_str(&format!("{d}\n"));
        }
        if items.len() > shown {
            s.push_str(&format!(
                "... and {} more {}s{more_hint}\n",
                items.len() - shown,
                severity
            ));
        }
    }
    s.push_str(&format!(
        "{} error(s), {} warning(s), {} note(s).{}\n",
        diags.count(Severity::Error),
        diags.count(Severity::Warning),
        diags.count(Severity::Note),
        if diags.count(Severity::Warning) > 0 {
            " Plausibility warnings are common practice, not a published standard."
        } else {
            ""
        }
    ));
    s
}

/// The network summary: counts, zones and feeds, demand, length of main by diameter.
pub fn summary(net: &Network, sum: &NetworkSummary) -> String {
    let o = Out::new(net.units);
    let units: UnitSystem = net.units;
    let mut s = String::new();
    s.push_str(&hanging("Network:   ", &net.name));
    s.push_str(&format!(
        "Units:     {} ({}); head loss: {}\n",
        units.name(),
        [
            Quantity::Length,
            Quantity::Diameter,
            Quantity::Flow,
            Quantity::Pressure
        ]
        .iter()
        .map(|q| units.symbol(*q))
        .collect::<Vec<_>>()
        .join(", "),
        net.headloss.name()
    ));
    s.push_str(&hanging(
        "Elements:  ",
        &format!(
            "{} junctions, {} reservoirs, {} tanks, {} pipes, {} pumps, {} valves, {} hydrants, {} zones",
            sum.junctions, sum.reservoirs, sum.tanks, sum.pipes, sum.pumps, sum.valves, sum.hydrants, sum.zones.len()
        ),
    ));
    let f = o.sym(Quantity::Flow);
    s.push_str(&format!(
        "Demand:    {} {f} average day; x{} max day = {} {f}; x{} peak hour = {} {f}\n",
        o.fmt(Quantity::Flow, sum.total_demand_m3s),
        net.demand_factors.max_day,
        o.fmt(
            Quantity::Flow,
            sum.total_demand_m3s * net.demand_factors.max_day
        ),
        net.demand_factors.peak_hour,
        o.fmt(
            Quantity::Flow,
            sum.total_demand_m3s * net.demand_factors.peak_hour
        ),
    ));
    s.push_str(&zones_section(sum));
    s.push_str(&length_section(&o, sum));
    s
}

/// The zones and what feeds each (empty when the network has no zones).
fn zones_section(sum: &NetworkSummary) -> String {
    let mut s = String::new();
    if !sum.zones.is_empty() {
        let header = vec!["zone".to_string(), "junctions".into(), "fed by".into()];
        let table = Table::new(header).with_rows(sum.zones.iter().map(|z| {
            vec![
                z.name.clone(),
                z.junctions.to_string(),
                if z.feeds.is_empty() {
                    "(none)".to_string()
                } else {
                    z.feeds.join(", ")
                },
            ]
        }));
        s.push_str(&Terminal.section(&Section::titled("Zones").table(table), 1));
    }
    s
}

/// Length of pipe by diameter, with each diameter's share and the total.
fn length_section(o: &Out, sum: &NetworkSummary) -> String {
    let mut s = String::new();
    let l = o.sym(Quantity::Length);
    let mut table = Table::new(vec![
        format!("diameter ({})", o.sym(Quantity::Diameter)),
        format!("length ({l})"),
        "share".to_string(),
    ]);
    let total: f64 = sum.length_by_diameter_m.iter().map(|(_, len)| len).sum();
    for (d, len) in &sum.length_by_diameter_m {
        table.push(vec![
            num(o.diameter(*d), 1),
            num(o.length(*len), 0),
            format!("{}%", num(100.0 * len / total.max(f64::MIN_POSITIVE), 1)),
        ]);
    }
    table.push(vec![
        "total".to_string(),
        num(o.length(total), 0),
        "100%".into(),
    ]);
    s.push_str(&Terminal.section(
        &Section::titled("Length of pipe by diameter").table(table),
        1,
    ));
    s
}
