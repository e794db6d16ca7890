//! The needed fire flow of a building, from a method stated as data (docs/needed-fire-flow.md):
//! the insurance-rating formula, the fire-code appendix table, or the criteria's own classes.
//!
//! Every figure comes with the steps that produced it, one line a reviewer can check each, and
//! the sources of the figures used, unverified ones marked so. An engineer's figure in the
//! buildings file replaces the method's, and the steps say so.

mod insurance;
pub mod method;
mod table;

use crate::model::buildings::{area_from_si, area_symbol, Building, Buildings, S_PER_H};
use crate::model::Diagnostics;
use crate::units::{Quantity, UnitSystem};

pub use method::{load_method, parse_method, Method, Rule, Source};
use method::{same_class, Band};

/// Relative tolerance under which an area or a rounded flow is taken as the whole number it
/// is next to. Areas cross a unit conversion twice (ft² → m² → ft²), which moves them by about
/// 1e-16 of their value; 3,600 ft² must stay in the 3,600 ft² row, and 1,875 gpm must round
/// as a half. The finest distinction the tables draw is 1 ft² in 300,000 ft² (3e-6).
pub const WHOLE_NUMBER_REL_TOL: f64 = 1e-9;

/// One line of an explanation.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Step {
    pub text: String,
}

/// A building's needed fire flow, SI, with how it was found.
#[derive(Clone, Debug, PartialEq)]
pub struct NeededFlow {
    pub flow_m3s: f64,
    pub duration_s: f64,
    /// The method's label (name, document, edition, section), or "engineer's figure".
    pub method: String,
    pub steps: Vec<Step>,
    /// The sources of the method's figures that were used (none for an engineer's figure).
    pub sources: Vec<Source>,
    /// Whether an engineer's figure (buildings file) replaced the method's flow or duration.
    pub engineer: bool,
}

impl NeededFlow {
    /// Whether every figure of the method that was used has been checked against its source.
    pub fn all_verified(&self) -> bool {
        self.sources.iter().all(|s| s.verified)
    }

    /// The volume the supply must give over the duration, m³.
    pub fn volume_m3(&self) -> f64 {
        self.flow_m3s * self.duration_s
    }
}

/// Why a method gives a building no figure. `field` names the buildings-file column to fix.
#[derive(Clone, Debug, PartialEq, thiserror::Error)]
pub enum NeededFlowError {
    #[error("building `{building}` has no {field}, which {method} needs")]
    Missing {
        building: String,
        field: &'static str,
        method: String,
        fix: String,
    },
    /// `detail`: which file does not know the class, and the nearest name it knows.
    #[error("building `{building}` has {field} `{class}`, {detail}")]
    UnknownClass {
        building: String,
        field: &'static str,
        class: String,
        detail: String,
        fix: String,
    },
    #[error("building `{building}`: {message}")]
    NotCovered {
        building: String,
        field: &'static str,
        message: String,
        fix: String,
    },
}

impl NeededFlowError {
    /// The buildings-file column the problem is in.
    pub fn field(&self) -> &'static str {
        match self {
            NeededFlowError::Missing { field, .. }
            | NeededFlowError::UnknownClass { field, .. }
            | NeededFlowError::NotCovered { field, .. } => field,
        }
    }

    /// How to fix it.
    pub fn fix(&self) -> &str {
        match self {
            NeededFlowError::Missing { fix, .. }
            | NeededFlowError::UnknownClass { fix, .. }
            | NeededFlowError::NotCovered { fix, .. } => fix,
        }
    }
}

/// The needed fire flow of `building` by `method`, steps shown in the network's `units`
/// (the method's own arithmetic in the method's units, converted where they differ).
/// An engineer's `required_flow` or `duration` in the buildings file wins.
pub fn needed_fire_flow(
    building: &Building,
    method: &Method,
    units: UnitSystem,
) -> Result<NeededFlow, NeededFlowError> {
    let mut calc = Calc::new(building, method, units);
    let figure = calc.figure();
    if building.required_flow_m3s.is_none() && building.duration_s.is_none() {
        let figure = figure?;
        return Ok(calc.finish(figure.flow, figure.hours, false));
    }
    engineer(calc, figure)
}

/// Checks every building against the method: class names (with the nearest known name), the
/// fields the method needs, areas beyond the shipped rows. Errors are located at the cell.
pub fn check_buildings(buildings: &Buildings, method: &Method) -> Diagnostics {
    let mut diags = Diagnostics::new();
    for b in &buildings.buildings {
        if let Err(e) = needed_fire_flow(b, method, buildings.units) {
            diags.error(
                buildings.location(b, e.field()),
                e.to_string(),
                e.fix().to_string(),
            );
        }
    }
    diags
}

/// A needed flow (method units) and duration (h) before the explanation is closed.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Figure {
    flow: f64,
    hours: f64,
}

/// The engineer's figure replaces the method's; the method's is shown beside it when it has
/// one, and a figure below the method's is said to be so.
fn engineer(
    mut calc: Calc<'_>,
    figure: Result<Figure, NeededFlowError>,
) -> Result<NeededFlow, NeededFlowError> {
    let b = calc.building;
    let m = calc.method;
    let own_flow = b
        .required_flow_m3s
        .map(|q| m.units.from_si(Quantity::Flow, q));
    let own_hours = b.duration_s.map(|s| s / S_PER_H);
    let method_figure = match &figure {
        Ok(f) => format!(
            "the method gives {} for {}",
            calc.flow_text(f.flow),
            hours_text(f.hours)
        ),
        Err(e) => format!("the method gives no figure ({e})"),
    };
    let flow = match (own_flow, &figure) {
        (Some(q), _) => q,
        (None, Ok(f)) => f.flow,
        (None, Err(e)) => return Err(e.clone()),
    };
    let hours = match (own_hours, &figure) {
        (Some(h), _) => h,
        (None, Ok(f)) if own_flow.is_none() => f.hours,
        (None, _) => match m.durations() {
            Some(bands) => calc.duration(bands, flow),
            None => {
                return Err(NeededFlowError::Missing {
                    building: b.id.clone(),
                    field: "duration",
                    method: format!("an engineer's required_flow with {}", m.file),
                    fix: "give the duration in hours beside the engineer's required_flow".into(),
                })
            }
        },
    };
    calc.steps.clear();
    calc.sources.clear();
    if let Some(q) = own_flow {
        let text = format!(
            "engineer's figure: {} (required_flow in the buildings file)",
            calc.flow_text(q)
        );
        calc.step(text);
    }
    if let Some(h) = own_hours {
        calc.step(format!(
            "engineer's figure: duration {} (duration in the buildings file)",
            hours_text(h)
        ));
    }
    calc.step(format!("for comparison, {method_figure}"));
    if let (Ok(f), Some(q)) = (&figure, own_flow) {
        if q < f.flow * (1.0 - WHOLE_NUMBER_REL_TOL) {
            calc.step(
                "note: the engineer's flow is below the method's; the reviewer should see why",
            );
        }
    }
    if let (Ok(f), Some(h)) = (&figure, own_hours) {
        if h < f.hours * (1.0 - WHOLE_NUMBER_REL_TOL) {
            calc.step("note: the engineer's duration is shorter than the method's");
        }
    }
    Ok(calc.finish(flow, hours, true))
}

/// The explanation being written, and what the rules need of the building.
struct Calc<'a> {
    building: &'a Building,
    method: &'a Method,
    /// The network's units, for showing figures.
    units: UnitSystem,
    steps: Vec<Step>,
    sources: Vec<Source>,
}

impl<'a> Calc<'a> {
    fn new(building: &'a Building, method: &'a Method, units: UnitSystem) -> Self {
        Calc {
            building,
            method,
            units,
            steps: Vec::new(),
            sources: Vec::new(),
        }
    }

    fn figure(&mut self) -> Result<Figure, NeededFlowError> {
        let m = self.method;
        match &m.rule {
            Rule::Insurance(r) => insurance::figure(self, r),
            Rule::AreaTable(r) => table::figure(self, r),
            Rule::Classes(classes) => self.classes(classes),
        }
    }

    fn step(&mut self, text: impl Into<String>) {
        self.steps.push(Step { text: text.into() });
    }

    /// Records that a figure from `source` was used.
    fn used(&mut self, source: &Source) {
        if !self.sources.contains(source) {
            self.sources.push(source.clone());
        }
    }

    fn finish(mut self, flow: f64, hours: f64, engineer: bool) -> NeededFlow {
        let m = self.method;
        let text = format!(
            "needed fire flow: {} for {}",
            self.flow_text(flow),
            hours_text(hours)
        );
        self.step(text);
        let mut sources = std::mem::take(&mut self.sources);
        for s in &sources {
            let verified = if s.verified {
                "verified: yes".to_string()
            } else {
                "verified: no — from memory; confirm against the code the official adopts"
                    .to_string()
            };
            self.step(format!("source: {}; {verified}", s.text));
        }
        if !m.complete && !engineer {
            self.step(format!(
                "{} ships only part of its table; rows must be completed from a licensed copy",
                m.file
            ));
        }
        sources.sort();
        NeededFlow {
            flow_m3s: m.units.to_si(Quantity::Flow, flow),
            duration_s: hours * S_PER_H,
            method: if engineer {
                format!("engineer's figure (buildings file); method {}", m.label())
            } else {
                m.label()
            },
            steps: self.steps,
            sources,
            engineer,
        }
    }

    /// A flow in the method's units as text, with the network's units beside it when they
    /// differ: `2,000 gpm` or `2,000 gpm (126.2 L/s)`.
    fn flow_text(&self, flow: f64) -> String {
        let m = self.method.units;
        let main = format!("{} {}", grouped(flow), m.symbol(Quantity::Flow));
        if m == self.units {
            return main;
        }
        let other = self
            .units
            .from_si(Quantity::Flow, m.to_si(Quantity::Flow, flow));
        format!(
            "{main} ({} {})",
            grouped(other),
            self.units.symbol(Quantity::Flow)
        )
    }

    fn area_unit(&self) -> &'static str {
        area_symbol(self.method.units)
    }

    /// The building's area in the method's units, as a whole number when it is one.
    fn area(&mut self, name: &str) -> Result<f64, NeededFlowError> {
        let b = self.building;
        let Some(a) = b.fire_flow_area_m2 else {
            return Err(self.missing(
                "fire_flow_area",
                format!("give the {name} in {}", area_symbol(self.units)),
            ));
        };
        let area = snap(area_from_si(self.method.units, a));
        if self.units != self.method.units {
            let shown = area_from_si(self.units, a);
            self.step(format!(
                "{name}: {} {} = {} {}",
                grouped(shown),
                area_symbol(self.units),
                grouped(area),
                self.area_unit()
            ));
        }
        Ok(area)
    }

    fn missing(&self, field: &'static str, fix: String) -> NeededFlowError {
        NeededFlowError::Missing {
            building: self.building.id.clone(),
            field,
            method: self.method.file.clone(),
            fix,
        }
    }

    /// The index in `known` of the building's class in column `field`.
    fn class(
        &self,
        field: &'static str,
        value: Option<&str>,
        known: &[&str],
    ) -> Result<usize, NeededFlowError> {
        let Some(value) = value else {
            return Err(self.missing(field, format!("write one of: {}", known.join(", "))));
        };
        if let Some(i) = known.iter().position(|k| same_class(k, value)) {
            return Ok(i);
        }
        // A name that differs only in punctuation ("VB" for "V-B") first, then the nearest
        // by edit distance.
        let bare = |s: &str| -> String {
            s.chars()
                .filter(|c| c.is_alphanumeric())
                .flat_map(char::to_lowercase)
                .collect()
        };
        let near = known
            .iter()
            .find(|k| bare(k) == bare(value))
            .copied()
            .or_else(|| crate::criteria::nearest_class(value, known));
        let file = self.method.file.clone();
        Err(NeededFlowError::UnknownClass {
            building: self.building.id.clone(),
            field,
            class: value.to_string(),
            detail: match near {
                Some(n) => format!("which {file} does not know (did you mean `{n}`?)"),
                None => format!("which {file} does not know"),
            },
            fix: match near {
                Some(n) => format!("write `{n}`; {file} knows: {}", known.join(", ")),
                None => format!("write one of: {}", known.join(", ")),
            },
        })
    }

    /// The band of `bands` for `x` and a step; the duration (h) of a flow.
    fn duration(&mut self, bands: &[Band], flow: f64) -> f64 {
        let (band, bound) = band_for(bands, flow);
        let hours = band.value;
        let unit = self.method.units.symbol(Quantity::Flow);
        self.step(format!("duration {} ({bound} {unit})", hours_text(hours)));
        self.used(&band.source.clone());
        hours
    }

    fn classes(&mut self, classes: &[method::ClassFlow]) -> Result<Figure, NeededFlowError> {
        let names: Vec<&str> = classes.iter().map(|c| c.class.as_str()).collect();
        let i = self.class("occupancy", self.building.occupancy.as_deref(), &names)?;
        let c = &classes[i];
        let text = format!(
            "occupancy class `{}` in {} [needed_flow.classes]: {} for {}",
            c.class,
            self.method.file,
            self.flow_text(c.flow),
            hours_text(c.hours)
        );
        self.step(text);
        Ok(Figure {
            flow: c.flow,
            hours: c.hours,
        })
    }
}

/// The band that holds `x` (up to and including its `up_to`) and the bound in words
/// ("≤ 2,500", "> 3,500"). Bands are checked when the method is read: increasing, the last
/// open, never empty.
fn band_for(bands: &[Band], x: f64) -> (&Band, String) {
    let mut below = None;
    for b in bands {
        match b.up_to {
            Some(u) if x <= u * (1.0 + WHOLE_NUMBER_REL_TOL) => {
                return (b, format!("≤ {}", grouped(u)))
            }
            Some(u) => below = Some(u),
            None => {
                let bound =
                    below.map_or_else(|| "any".to_string(), |u| format!("> {}", grouped(u)));
                return (b, bound);
            }
        }
    }
    // Unreachable for a checked method (the last band is open); the largest band is the
    // cautious answer for a duration or a rounding step.
    let last = &bands[bands.len() - 1];
    (last, format!("> {}", grouped(last.up_to.unwrap_or(0.0))))
}

/// `x` rounded to the nearest multiple of `step`, a half rounded up (common practice, no
/// source: the method documents say "nearest" without saying which way a half goes).
pub fn round_half_up(x: f64, step: f64) -> f64 {
    let q = x / step;
    (q + 0.5 + q.abs() * WHOLE_NUMBER_REL_TOL).floor() * step
}

/// `x` as the whole number it is within [`WHOLE_NUMBER_REL_TOL`] of, else `x`.
fn snap(x: f64) -> f64 {
    let r = x.round();
    if (x - r).abs() <= x.abs() * WHOLE_NUMBER_REL_TOL {
        r
    } else {
        x
    }
}

/// Hours as text: `2 h`, `0.5 h`.
fn hours_text(h: f64) -> String {
    format!("{} h", grouped(h))
}

/// A number with thousands separators and at most two decimals: `1,800`, `0.6`, `1,234.57`.
pub fn grouped(x: f64) -> String {
    if !x.is_finite() {
        return "—".to_string();
    }
    let text = format!("{:.2}", x.abs());
    let (int, frac) = text.split_once('.').unwrap_or((&text, ""));
    let frac = frac.trim_end_matches('0');
    let mut out = String::new();
    for (i, ch) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            out.push(',');
        }
        out.push(ch);
    }
    if !frac.is_empty() {
        out.push('.');
        out.push_str(frac);
    }
    if x < 0.0 && out.chars().any(|c| c.is_ascii_digit() && c != '0') {
        out.insert(0, '-');
    }
    out
}

#[cfg(test)]
mod tests;
