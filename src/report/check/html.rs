//! The check report as one self-contained HTML page (`report.html`): the sections of report.md
//! in the same order, with the figures a reviewer reads first: the network map coloured by a
//! choice of the user's, a histogram of available flows, and a sheet with the modelled supply
//! curve of each failing hydrant.

use std::collections::BTreeMap;

use super::CheckReport;
use crate::fireflow::{HydrantResult, Outcome};
use crate::flowtest::reduce::HydrantClass as RatingClass;
use crate::model::LinkKind;
use crate::report::html::svg::{
    histogram, network_map, Colouring, Histogram, MapData, MapHydrant, MapPipe, Shape, SymbolKey,
};
use crate::report::html::{escape, page, Html};
use crate::report::num;
use crate::report::table::Markup;
use crate::units::{Quantity, UnitSystem};

/// Marking colours of the rating classes (NFPA 291, 2022 ed., Chapter 5: light blue, green,
/// orange, red), and the grey of a hydrant with no verified flow.
fn class_colour(class: Option<RatingClass>) -> &'static str {
    match class {
        Some(RatingClass::AA) => "#7cc7f0",
        Some(RatingClass::A) => "#2e9d47",
        Some(RatingClass::B) => "#f28c28",
        Some(RatingClass::C) => "#d62828",
        None => "#9e9e9e",
    }
}

/// Colour-blind-safe sequential colours, low to high (ColorBrewer YlGnBu 5-class, Brewer,
/// colorbrewer2.org): pipe diameters.
const SEQUENTIAL: [&str; 5] = ["#7fcdbb", "#41b6c4", "#1d91c0", "#225ea8", "#0c2c84"];
/// Colour-blind-safe diverging colours, good to bad (ColorBrewer RdYlBu 5-class without its
/// pale middle): velocities, head losses and weak-main ranks.
const GOOD_TO_BAD: [&str; 4] = ["#2c7bb6", "#abd9e9", "#fdae61", "#d7191c"];

/// Diameter class boundaries: 6, 8, 12 and 16 in (150, 200, 300 and 400 mm).
fn diameter_bounds(units: UnitSystem) -> [f64; 4] {
    match units {
        UnitSystem::Us => [6.0, 8.0, 12.0, 16.0],
        UnitSystem::Si => [150.0, 200.0, 300.0, 400.0],
    }
}

/// Velocity class boundaries: 2, 5 and 8 ft/s (0.6, 1.5 and 2.4 m/s).
fn velocity_bounds(units: UnitSystem) -> [f64; 3] {
    match units {
        UnitSystem::Us => [2.0, 5.0, 8.0],
        UnitSystem::Si => [0.6, 1.5, 2.4],
    }
}

/// Unit head-loss class boundaries, per 1000 length units (the same in ft/1000 ft and m/km).
const UNIT_HEADLOSS_BOUNDS: [f64; 3] = [3.0, 10.0, 20.0];
/// Weak-main rank class boundaries (rank 1-3, 4-10, 11-25, beyond).
const RANK_BOUNDS: [f64; 3] = [3.5, 10.5, 25.5];

/// The class index of `v` among increasing `bounds` (0 below the first).
fn class_of(v: f64, bounds: &[f64]) -> usize {
    bounds.iter().take_while(|&&b| v >= b).count()
}

/// Legend texts for classes cut at `bounds`, e.g. "below 6", "6 to 8", "16 and over".
fn bound_labels(bounds: &[f64], unit: &str, decimals: usize) -> Vec<String> {
    let f = |v: f64| num(v, decimals);
    let mut labels = vec![format!("below {} {unit}", f(bounds[0]))];
    for w in bounds.windows(2) {
        labels.push(format!("{} to {} {unit}", f(w[0]), f(w[1])));
    }
    labels.push(format!("{} {unit} and over", f(bounds[bounds.len() - 1])));
    labels
}

impl CheckReport<'_> {
    /// `report.html`: the page a plan reviewer reads or prints to PDF.
    pub fn html(&self) -> String {
        let doc = self.document();
        let mut body = format!("<h1>{}</h1>\n", escape(&doc.title));
        for section in &doc.sections {
            body.push_str(&Html.section(section, 1));
            if section.title.as_deref() == Some("Summary") {
                body.push_str(&self.figures_html());
            }
        }
        body.push_str(&self.sheets_html());
        page(&doc.title, &body)
    }

    /// The map and the histogram of available flows, as a section of their own.
    fn figures_html(&self) -> String {
        let o = self.out();
        format!(
            "<section id=\"map\" class=\"level1 major\">\n<h2>Network map</h2>\n<figure>\n{}<figcaption>Pipes drawn from the junction coordinates (x, y); hydrants filled with the marking colour of the rating class of their available flow (NFPA 291, 2022 ed., Chapter 5); {} Zoom with the mouse wheel, drag to pan, double-click to return.</figcaption>\n</figure>\n</section>\n<section id=\"distribution\" class=\"level1\">\n<h2>Available fire flows</h2>\n<figure>\n{}<figcaption>Hydrants by available fire flow ({}); dashed lines at the rating class boundaries. Hydrants without a verified flow ({}) are not counted.</figcaption>\n</figure>\n</section>\n",
            network_map(&self.map_data()),
            escape(&self.rating_note()),
            histogram(&self.available_histogram()),
            o.sym(Quantity::Flow),
            self.results
                .iter()
                .filter(|r| r.available_m3s.is_none())
                .count()
        )
    }

    /// What the class of a hydrant on this map means, given the criteria's floor.
    fn rating_note(&self) -> String {
        let o = self.out();
        let floor = o.pressure(self.criteria.residual_floor_kpa);
        let rating = o.pressure(crate::units::KPA_PER_PSI * 20.0);
        let same = (floor - rating).abs() < 0.05 * rating;
        let p = o.sym(Quantity::Pressure);
        format!(
            "the class is of the screening flow at the criteria's floor ({} {p}){}; failing hydrants are triangles with a heavy outline and hydrants without a verified flow dashed squares, so the map reads without colour.",
            num(floor, 1),
            if same {
                String::new()
            } else {
                format!(
                    ", not at the {} {p} of a hydrant's rating: indicative only",
                    num(rating, 1)
                )
            },
        )
    }

    fn hydrant_symbol(&self, r: &HydrantResult) -> (Shape, Option<RatingClass>) {
        let class = r.available_m3s.map(RatingClass::of_flow);
        let shape = match (r.outcome, class) {
            (_, None) | (Outcome::Error, _) => Shape::Square,
            (Outcome::Fail, _) => Shape::Triangle,
            (Outcome::Pass, _) => Shape::Circle,
        };
        (shape, class)
    }

    fn hydrant_title(&self, r: &HydrantResult) -> String {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let available = r
            .available_m3s
            .map(|q| format!("{} {f}", o.flow_text_down(q)))
            .unwrap_or_else(|| "none verified".into());
        let class = r
            .available_m3s
            .map(|q| format!(", class {}", RatingClass::of_flow(q).name()))
            .unwrap_or_default();
        format!(
            "{}: {}; required {} {f}, available {available}{class}; limited by {}",
            self.hydrant_id(r),
            r.outcome.name(),
            o.flow_text_down(r.required_m3s),
            r.limited_by.map(|l| l.name()).unwrap_or("-")
        )
    }

    /// The map's data: pipes with their classes in each colouring, hydrants with symbols.
    fn map_data(&self) -> MapData {
        let net = self.network;
        let units = net.units;
        let o = self.out();
        let d_unit = o.sym(Quantity::Diameter);
        let d_bounds = diameter_bounds(units);
        let envelope = self.failing_envelope();
        let rank: BTreeMap<usize, usize> = self
            .weak_mains
            .iter()
            .enumerate()
            .map(|(k, w)| (w.link, k + 1))
            .collect();
        let mut pipes = Vec::new();
        for (i, link) in net.links.iter().enumerate() {
            let (Some(a), Some(b)) = (net.nodes[link.from].position, net.nodes[link.to].position)
            else {
                continue;
            };
            let diameter = match &link.kind {
                LinkKind::Pipe(p) => Some(o.diameter(p.diameter_m)),
                _ => None,
            };
            let d_class = diameter.map(|d| class_of(d, &d_bounds));
            let (velocity, headloss) = envelope.get(&i).copied().unzip();
            pipes.push(MapPipe {
                from: a,
                to: b,
                width: d_class.map_or(0, |c| c),
                classes: vec![
                    d_class,
                    rank.get(&i).map(|&k| class_of(k as f64, &RANK_BOUNDS)),
                    velocity.map(|v| class_of(o.velocity(v), &velocity_bounds(units))),
                    headloss.map(|h| class_of(h, &UNIT_HEADLOSS_BOUNDS)),
                ],
            });
        }
        let widths = bound_labels(&d_bounds, d_unit, 0)
            .into_iter()
            .zip([1.0, 1.6, 2.4, 3.4, 4.6])
            .collect();
        MapData {
            pipes,
            widths,
            colourings: self.colourings(),
            hydrants: self.map_hydrants(),
            hydrant_keys: self.hydrant_keys(),
            sources: net
                .sources()
                .iter()
                .filter_map(|n| n.position.map(|p| (p, n.id.clone())))
                .collect(),
            scale: self.scale(),
            scale_note: "No scale bar: the coordinates do not match the pipe lengths (they may be in another unit or a geographic system).".into(),
        }
    }

    fn colourings(&self) -> Vec<Colouring> {
        let units = self.network.units;
        let o = self.out();
        let l = o.sym(Quantity::Length);
        let classes = |labels: Vec<String>, colours: &[&'static str]| {
            labels.into_iter().zip(colours.iter().copied()).collect()
        };
        let failing = self.count(Outcome::Fail);
        let under = if failing == 0 {
            "no hydrant fails, so no pipe has a value".to_string()
        } else {
            format!("the largest over the {failing} failing hydrant(s), each at its required flow with max-day demand, for the pipes on their supply paths")
        };
        vec![
            Colouring {
                label: "diameter".into(),
                classes: classes(
                    bound_labels(&diameter_bounds(units), o.sym(Quantity::Diameter), 0),
                    &SEQUENTIAL,
                ),
                no_value: "pump or valve".into(),
                note: String::new(),
            },
            Colouring {
                label: "weak-main rank".into(),
                classes: classes(
                    vec![
                        "rank 1-3".into(),
                        "rank 4-10".into(),
                        "rank 11-25".into(),
                        "rank 26 and beyond".into(),
                    ],
                    &[GOOD_TO_BAD[3], GOOD_TO_BAD[2], GOOD_TO_BAD[1], GOOD_TO_BAD[0]],
                ),
                no_value: "not a weak main".into(),
                note: "Rank in the weak-mains table (1 = the main that limits the failing hydrants most).".into(),
            },
            Colouring {
                label: "velocity".into(),
                classes: classes(
                    bound_labels(&velocity_bounds(units), o.sym(Quantity::Velocity), 0),
                    &GOOD_TO_BAD,
                ),
                no_value: "no value".into(),
                note: format!("Velocity: {under}."),
            },
            Colouring {
                label: "unit head loss".into(),
                classes: classes(
                    bound_labels(&UNIT_HEADLOSS_BOUNDS, &format!("{l}/1000 {l}"), 0),
                    &GOOD_TO_BAD,
                ),
                no_value: "no value".into(),
                note: format!("Unit head loss: {under}."),
            },
        ]
    }

    /// Per pipe, the largest velocity (m/s) and unit head loss (per 1000) over the failing
    /// hydrants' supply-path pipes at their required flows.
    fn failing_envelope(&self) -> BTreeMap<usize, (f64, f64)> {
        let mut envelope: BTreeMap<usize, (f64, f64)> = BTreeMap::new();
        for r in self.results.iter().filter(|r| r.outcome == Outcome::Fail) {
            for p in &r.supply_paths {
                let e = envelope.entry(p.link).or_insert((0.0, 0.0));
                e.0 = e.0.max(p.velocity_m_per_s.abs());
                e.1 = e.1.max(p.unit_headloss.abs());
            }
        }
        envelope
    }

    fn map_hydrants(&self) -> Vec<MapHydrant> {
        let net = self.network;
        self.results
            .iter()
            .filter_map(|r| {
                let at = net.hydrants[r.hydrant]
                    .position
                    .or(net.nodes[r.junction].position)?;
                let (shape, class) = self.hydrant_symbol(r);
                Some(MapHydrant {
                    at,
                    shape,
                    fill: class_colour(class),
                    title: self.hydrant_title(r),
                })
            })
            .collect()
    }

    fn hydrant_keys(&self) -> Vec<SymbolKey> {
        let o = self.out();
        let f = o.sym(Quantity::Flow);
        let mut keys: Vec<SymbolKey> = RatingClass::ALL
            .into_iter()
            .map(|c| SymbolKey {
                shape: Shape::Circle,
                fill: class_colour(Some(c)),
                text: match c {
                    RatingClass::C => format!(
                        "class C, below {} {f}",
                        o.flow_text_down(RatingClass::B.lower_m3s())
                    ),
                    c => format!(
                        "class {}, {} {f} or more",
                        c.name(),
                        o.flow_text_down(c.lower_m3s())
                    ),
                },
            })
            .collect();
        keys.push(SymbolKey {
            shape: Shape::Triangle,
            fill: "#ffffff",
            text: "fails (filled by its class)".into(),
        });
        keys.push(SymbolKey {
            shape: Shape::Square,
            fill: class_colour(None),
            text: "no verified flow (error)".into(),
        });
        keys
    }

    /// The scale bar, when the coordinates are in the network's length unit: the median ratio of
    /// a pipe's stated length to the distance between its ends is near 1 (a drawn pipe bends, so
    /// a ratio of 1 to 1.5 is normal).
    fn scale(&self) -> Option<(String, f64)> {
        let net = self.network;
        let mut ratios: Vec<f64> = net
            .links
            .iter()
            .filter_map(|l| {
                let (LinkKind::Pipe(p), Some(a), Some(b)) = (
                    &l.kind,
                    net.nodes[l.from].position,
                    net.nodes[l.to].position,
                ) else {
                    return None;
                };
                let drawn = ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)).sqrt();
                let stated = self.out().length(p.length_m);
                (drawn > 0.0 && stated > 0.0).then(|| stated / drawn)
            })
            .collect();
        if ratios.is_empty() {
            return None;
        }
        ratios.sort_by(f64::total_cmp);
        let median = ratios[ratios.len() / 2];
        (0.8..=2.0)
            .contains(&median)
            .then(|| (self.out().sym(Quantity::Length).to_string(), 1.0))
    }

    /// Available flows in bins of round width, with the rating class boundaries marked.
    fn available_histogram(&self) -> Histogram {
        let o = self.out();
        let flows: Vec<f64> = self
            .results
            .iter()
            .filter_map(|r| r.available_m3s.map(|q| o.flow(q)))
            .collect();
        let top = flows.iter().copied().fold(0.0, f64::max).max(1.0);
        let step = crate::report::html::svg::ticks(0.0, top)
            .get(1)
            .copied()
            .unwrap_or(top)
            / 4.0;
        let bins = ((top / step).floor() as usize + 1).max(1);
        let mut counts = vec![0usize; bins];
        for q in flows {
            counts[((q / step).floor() as usize).min(bins - 1)] += 1;
        }
        Histogram {
            edges: (0..=bins).map(|k| k as f64 * step).collect(),
            counts,
            x_label: format!("available fire flow ({})", o.sym(Quantity::Flow)),
            marks: [RatingClass::B, RatingClass::A, RatingClass::AA]
                .into_iter()
                .map(|c| (o.flow(c.lower_m3s()), format!("class {}", c.name())))
                .collect(),
        }
    }
}
