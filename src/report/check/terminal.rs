//! The terminal output of the check: the summary block, the compliance table and the top weak
//! mains.

use super::CheckReport;
use crate::fireflow::Outcome;
use crate::report::num;
use crate::report::table::{hanging, Markup, Section, Terminal};
use crate::units::Quantity;
use crate::weakmains::WeakReason;

impl CheckReport<'_> {
    /// The summary block printed first on the terminal.
    pub fn summary(&self) -> String {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut s = String::new();
        s.push_str(&hanging("Network:    ", &self.network.name));
        s.push_str(&hanging("Criteria:   ", &self.criteria.name));
        s.push_str(&hanging("Reference:  ", &self.criteria.reference));
        s.push_str(&hanging("Condition:  ", &self.condition_line()));
        s.push_str(&hanging(
            "Hydrants:   ",
            &format!(
                "{} analysed{}: {} pass, {} fail, {} error",
                self.results.len(),
                if self.partial { " (selected)" } else { "" },
                self.count(Outcome::Pass),
                self.count(Outcome::Fail),
                self.count(Outcome::Error)
            ),
        ));
        let weakest: Vec<String> = self
            .by_margin()
            .into_iter()
            .filter(|r| r.outcome != Outcome::Pass)
            .take(5)
            .map(|r| match r.margin_m3s() {
                Some(m) => format!("{} ({} {f} short)", self.hydrant_id(r), o.flow_text_up(-m)),
                None => format!("{} (error)", self.hydrant_id(r)),
            })
            .collect();
        if !weakest.is_empty() {
            s.push_str(&hanging("Weakest:    ", &weakest.join(", ")));
        }
        let exceptions = self.service.exceptions().count();
        s.push_str(&hanging(
            "Service:    ",
            &format!(
                "{} of {} junctions outside {}-{} {} (peak hour x{}, {} x{})",
                exceptions,
                self.service.rows.len(),
                num(o.pressure(self.criteria.service_min_kpa), 0),
                num(o.pressure(self.criteria.service_max_kpa), 0),
                o.sym(Quantity::Pressure),
                self.service.peak_hour_factor,
                self.service.low_condition.name(),
                self.service.low_demand_factor
            ),
        ));
        s.push_str(&hanging(
            "",
            "Screening estimates from a model: confirm with field flow tests; the fire code official and a licensed engineer decide.",
        ));
        s
    }

    /// The compliance table for the terminal, sorted by margin. The hydrant's junction and the
    /// source of its required flow are left to report.md and fireflow.csv, so that the table
    /// fits the terminal's width on one line per hydrant.
    pub fn terminal_table(&self) -> String {
        let section = Section::titled(
            "Compliance table (sorted by margin, weakest first; junction and requirement in report.md)",
        )
        .table(
            self.compliance_table(self.by_margin())
                .without_columns(&["junction", "requirement"]),
        );
        Terminal.section(&section, 1)
    }

    /// The top weak mains for the terminal.
    pub fn terminal_weak_mains(&self) -> String {
        if self.weak_mains.is_empty() {
            return String::new();
        }
        let mut table = self.weak_mains_table();
        for (row, w) in table.rows.iter_mut().zip(self.weak_mains) {
            if let Some(cell) = row.last_mut() {
                *cell = w
                    .reasons
                    .iter()
                    .map(|r| self.short_reason(r))
                    .collect::<Vec<_>>()
                    .join("; ");
            }
        }
        let section = Section::titled(format!(
            "Weak mains (supply paths of failing hydrants at their required flow; {} in all, reasons in full in weak_mains.csv)",
            self.weak_mains.len()
        ))
        .table(table);
        Terminal.section(&section, 1)
    }

    /// A reason in a few words, for the terminal's width; weak_mains.csv and report.md say it
    /// in full.
    fn short_reason(&self, r: &WeakReason) -> String {
        let o = self.out();
        match r {
            WeakReason::HighUnitHeadloss { .. } => "high head loss".into(),
            WeakReason::HighVelocity { limit_m_per_s, .. } => format!(
                "over {} {}",
                num(o.velocity(*limit_m_per_s), 1),
                o.sym(Quantity::Velocity)
            ),
            WeakReason::SmallDiameter { minimum_m, .. } => format!(
                "under {} {}",
                num(o.diameter(*minimum_m), 0),
                o.sym(Quantity::Diameter)
            ),
            WeakReason::LowRoughnessCoefficient { c } => format!("low C ({})", num(*c, 0)),
        }
    }
}
