//! The terminal output of the check: the summary block, the compliance table and the top weak
//! mains.

use super::CheckReport;
use crate::fireflow::Outcome;
use crate::report::num;
use crate::report::table::{Markup, Section, Terminal};
use crate::units::Quantity;

impl CheckReport<'_> {
    /// The summary block printed first on the terminal.
    pub fn summary(&self) -> String {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut s = String::new();
        s.push_str(&format!("Network:    {}\n", self.network.name));
        s.push_str(&format!("Criteria:   {}\n", self.criteria.name));
        s.push_str(&format!("Reference:  {}\n", self.criteria.reference));
        s.push_str(&format!("Condition:  {}\n", self.condition_line()));
        s.push_str(&format!(
            "Hydrants:   {} analysed{}: {} pass, {} fail, {} error\n",
            self.results.len(),
            if self.partial { " (selected)" } else { "" },
            self.count(Outcome::Pass),
            self.count(Outcome::Fail),
            self.count(Outcome::Error)
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
            s.push_str(&format!("Weakest:    {}\n", weakest.join(", ")));
        }
        let exceptions = self.service.exceptions().count();
        s.push_str(&format!(
            "Service:    {} of {} junctions outside {}-{} {} (peak hour x{}, {} x{})\n",
            exceptions,
            self.service.rows.len(),
            num(o.pressure(self.criteria.service_min_kpa), 0),
            num(o.pressure(self.criteria.service_max_kpa), 0),
            o.sym(Quantity::Pressure),
            self.service.peak_hour_factor,
            self.service.low_condition.name(),
            self.service.low_demand_factor
        ));
        s.push_str(
            "Screening estimates from a model: confirm with field flow tests; the fire code official and a licensed engineer decide.\n",
        );
        s
    }

    /// The compliance table for the terminal, sorted by margin.
    pub fn terminal_table(&self) -> String {
        let section = Section::titled("Compliance table (sorted by margin, weakest first)")
            .table(self.compliance_table(self.by_margin()));
        Terminal.section(&section, 1)
    }

    /// The top weak mains for the terminal.
    pub fn terminal_weak_mains(&self) -> String {
        if self.weak_mains.is_empty() {
            return String::new();
        }
        let section = Section::titled(format!(
            "Weak mains (pipes on the supply paths of failing hydrants, at their required flow; {} in all, see weak_mains.csv)",
            self.weak_mains.len()
        ))
        .table(self.weak_mains_table());
        Terminal.section(&section, 1)
    }
}
