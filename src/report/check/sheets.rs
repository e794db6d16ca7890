//! Per-hydrant sheets of report.html: for each failing hydrant (and each one asked for with
//! `--hydrant`), its figures, its modelled supply curve drawn on the Q^1.85 abscissa with the
//! floor, the required and the available flow marked, the solved points as a table, and the
//! field flow tests read at that hydrant.

use super::{CheckReport, FieldCurve};
use crate::fireflow::{HydrantResult, SupplyCurve};
use crate::flowtest::reduce::HydrantClass;
use crate::report::html::svg::{supply_chart, Series, Shape, SupplyChart};
use crate::report::html::{escape, Html};
use crate::report::num;
use crate::report::table::{Align, Markup, Table};
use crate::units::Quantity;

impl CheckReport<'_> {
    /// The sheets section, or nothing when no curve was computed.
    pub(super) fn sheets_html(&self) -> String {
        if self.curves.is_empty() {
            return String::new();
        }
        let mut s = String::from(
            "<section id=\"hydrant-sheets\" class=\"level1 major\">\n<h2>Hydrant sheets</h2>\n<p>For each failing hydrant (and each hydrant asked for): its modelled supply curve, every point an ordinary solve of the model at max-day demand plus that fire flow at the hydrant, none extrapolated. The abscissa is proportional to the flow to the power 1.85, so that a supply through one main plots as a straight line (NFPA 291, 2022 ed., §4.13). Pressures below the floor, and below zero, are what a demand-driven model computes: a real hydrant would deliver less flow instead.</p>\n",
        );
        for curve in self.curves {
            if let Some(r) = self.results.iter().find(|r| r.hydrant == curve.hydrant) {
                s.push_str(&self.sheet(r, curve));
            }
        }
        s.push_str("</section>\n");
        s
    }

    fn sheet(&self, r: &HydrantResult, curve: &SupplyCurve) -> String {
        let id = self.hydrant_id(r);
        let field = self.field_curves_at(r.hydrant);
        format!(
            "<section class=\"sheet level2\" id=\"sheet-{}\">\n<h3>Hydrant {}: <span class=\"{}\">{}</span></h3>\n{}<figure>\n{}<figcaption>Modelled supply curve of hydrant {}{}.</figcaption>\n</figure>\n{}{}</section>\n",
            r.hydrant,
            escape(id),
            if r.outcome == crate::fireflow::Outcome::Pass { "" } else { "fail-text" },
            r.outcome.name(),
            Html.table(&self.sheet_facts(r)),
            supply_chart(&self.chart(r, curve, &field)),
            escape(id),
            self.field_caption(&field),
            Html.table(&self.curve_table(curve)),
            self.unsolved_html(curve)
        )
    }

    fn sheet_facts(&self, r: &HydrantResult) -> Table {
        let o = self.out();
        let (f, p) = (o.sym(Quantity::Flow), o.sym(Quantity::Pressure));
        let row = self.table_row(r);
        let class = r
            .available_m3s
            .map(|q| HydrantClass::of_flow(q).name().to_string())
            .unwrap_or_else(|| "-".into());
        let rows = [
            ("Zone / junction", format!("{} / {}", row[1], row[2])),
            ("Requirement", row[3].clone()),
            ("Required flow", format!("{} {f}", row[4])),
            (
                "Available flow",
                format!("{} {f} (rating class {class})", row[5]),
            ),
            ("Margin", format!("{} {f}", row[6])),
            ("Static pressure", format!("{} {p}", row[7])),
            ("Residual at the required flow", format!("{} {p}", row[8])),
            ("Limited by", format!("{} {}", row[9], row[10])),
            ("Notes", self.notes_text(r)),
        ];
        Table::untitled().with_rows(
            rows.into_iter()
                .filter(|(_, v)| !v.is_empty())
                .map(|(k, v)| vec![k.to_string(), v]),
        )
    }

    fn chart(&self, r: &HydrantResult, curve: &SupplyCurve, field: &[&FieldCurve]) -> SupplyChart {
        let o = self.out();
        let (f, p) = (o.sym(Quantity::Flow), o.sym(Quantity::Pressure));
        let net = self.network;
        let at_hydrant = curve
            .points
            .iter()
            .map(|c| (o.flow(c.flow_m3s), o.pressure(c.hydrant_kpa)))
            .collect();
        let mut series = vec![Series {
            label: format!("at the hydrant (junction {})", net.nodes[r.junction].id),
            points: at_hydrant,
            colour: "#1f3a93",
            dash: Some(""),
            marker: Shape::Circle,
            projection: false,
        }];
        if let Some(j) = curve.critical_junction.filter(|&j| j != r.junction) {
            series.push(Series {
                label: format!("at the critical junction {}", net.nodes[j].id),
                points: curve
                    .points
                    .iter()
                    .filter_map(|c| c.critical_kpa.map(|k| (o.flow(c.flow_m3s), o.pressure(k))))
                    .collect(),
                colour: "#b35c00",
                dash: Some("6 4"),
                marker: Shape::Square,
                projection: false,
            });
        }
        for t in field {
            series.extend(self.field_series(t));
        }
        let mut flows = vec![(
            o.flow(r.required_m3s),
            format!("required {} {f}", o.flow_text_down(r.required_m3s)),
            true,
        )];
        if let Some(q) = r.available_m3s {
            flows.push((
                o.flow(q),
                format!("available {} {f}", o.flow_text_down(q)),
                false,
            ));
        }
        let floor = o.pressure(self.criteria.residual_floor_kpa);
        SupplyChart {
            series,
            flow_label: format!("fire flow at the hydrant ({f}), scale of flow^1.85"),
            pressure_label: format!("pressure ({p})"),
            floor: (floor, format!("floor {} {p}", num(floor, 1))),
            flows,
        }
    }

    /// A field test's readings (markers) and its projection to the floor (a straight line on
    /// this abscissa, NFPA 291 §4.13).
    fn field_series(&self, t: &FieldCurve) -> Vec<Series> {
        let o = self.out();
        let mut series = vec![Series {
            label: format!("field test {}", t.test),
            points: vec![
                (0.0, o.pressure(t.static_kpa)),
                (o.flow(t.flow_m3s), o.pressure(t.residual_kpa)),
            ],
            colour: "#000000",
            dash: None,
            marker: Shape::Triangle,
            projection: false,
        }];
        if let Some(q) = t.projected_m3s {
            series.push(Series {
                label: format!("field test {}, projected to the floor", t.test),
                points: vec![
                    (0.0, o.pressure(t.static_kpa)),
                    (o.flow(q), o.pressure(self.criteria.residual_floor_kpa)),
                ],
                colour: "#555555",
                dash: Some("2 3"),
                marker: Shape::Triangle,
                projection: true,
            });
        }
        series
    }

    /// The caption's words on the field tests drawn, with each projected flow (which may lie
    /// beyond the chart).
    fn field_caption(&self, field: &[&FieldCurve]) -> String {
        if field.is_empty() {
            return String::new();
        }
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let tests: Vec<String> = field
            .iter()
            .map(|t| match t.projected_m3s {
                Some(q) => format!(
                    "{} projects {} {f} at the floor",
                    t.test,
                    o.flow_text_down(q)
                ),
                None => format!("{} has no pressure drop to project", t.test),
            })
            .collect();
        format!(
            "; triangles: field flow test readings at this hydrant (static, and residual at the test flow), dotted: their projection to the floor (NFPA 291 §4.13), clipped at the chart's edge: {}",
            tests.join("; ")
        )
    }

    fn field_curves_at(&self, hydrant: usize) -> Vec<&FieldCurve> {
        self.field_tests
            .map(|f| f.curves.iter().filter(|c| c.hydrant == hydrant).collect())
            .unwrap_or_default()
    }

    /// The solved points, so that every figure on the chart can be read.
    fn curve_table(&self, curve: &SupplyCurve) -> Table {
        let o = self.out();
        let (f, p) = (o.sym(Quantity::Flow), o.sym(Quantity::Pressure));
        let net = self.network;
        let mut t = Table::new(vec![
            format!("fire flow ({f})"),
            format!("at the hydrant ({p})"),
            format!("at the critical junction ({p})"),
            format!("lowest constrained ({p})"),
            "lowest at".into(),
        ])
        .with_rows(curve.points.iter().map(|c| {
            vec![
                o.flow_text_down(c.flow_m3s),
                num(o.pressure(c.hydrant_kpa), 1),
                c.critical_kpa
                    .map(|k| num(o.pressure(k), 1))
                    .unwrap_or_default(),
                num(o.pressure(c.lowest_kpa), 1),
                net.nodes[c.lowest_junction].id.clone(),
            ]
        }));
        t.align = vec![
            Align::Right,
            Align::Right,
            Align::Right,
            Align::Right,
            Align::Left,
        ];
        t
    }

    fn unsolved_html(&self, curve: &SupplyCurve) -> String {
        if curve.unsolved.is_empty() {
            return String::new();
        }
        let o = self.out();
        let mut s = String::from("<p>Flows without a solution (not drawn):</p>\n<ul>\n");
        for (q, reason) in &curve.unsolved {
            s.push_str(&format!(
                "<li>{} {}: {}</li>\n",
                o.flow_text_down(*q),
                o.sym(Quantity::Flow),
                escape(reason)
            ));
        }
        s.push_str("</ul>\n");
        s
    }
}
