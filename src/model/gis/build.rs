//! From GIS features to a network: line ends snapped into junctions, hydrant and source points
//! attached to junctions or splitting pipes, with every change recorded as an [`Event`].
//!
//! Coordinates stay in the data's own units throughout; values are SI.

use std::collections::{BTreeMap, HashMap, HashSet};

use geojson::GeometryValue;
use rstar::primitives::{GeomWithData, Line};
use rstar::{RTree, AABB};

use super::mapping::Mapping;
use super::read::{attribute_number, attribute_text, feature_label, InFeature, Layer};
use crate::model::diagnostic::Diagnostics;
use crate::model::limits;
use crate::model::PipeStatus;
use crate::units::{display_value, UnitSystem};

/// What the import did to the data, one kind per row of import.csv.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Action {
    /// A line end was moved onto a junction made from another end within the snap tolerance.
    Snapped,
    /// A pipe was split (by a hydrant or a source point, or a multi-part line into parts).
    Split,
    /// A point was attached to an existing junction (a source takes the junction's place).
    Attached,
    /// A feature was left out (no geometry, zero length, both ends on one junction, too far).
    Dropped,
    /// A value the data did not give was filled in (default roughness, an id, a mean elevation).
    Guessed,
    /// An id was used twice and the later one renamed.
    Renamed,
    /// Lines that cross, or an end on another line, without a shared vertex: not joined.
    NotJoined,
}

impl Action {
    pub fn name(self) -> &'static str {
        match self {
            Action::Snapped => "snapped",
            Action::Split => "split",
            Action::Attached => "attached",
            Action::Dropped => "dropped",
            Action::Guessed => "guessed",
            Action::Renamed => "renamed",
            Action::NotJoined => "not-joined",
        }
    }

    pub const ALL: [Action; 7] = [
        Action::Snapped,
        Action::Split,
        Action::Attached,
        Action::Dropped,
        Action::Guessed,
        Action::Renamed,
        Action::NotJoined,
    ];
}

/// One change, with the feature it concerns, so that the user can fix the GIS.
#[derive(Clone, Debug, PartialEq)]
pub struct Event {
    pub action: Action,
    /// `pipes`, `hydrants`, `sources`, `elevations` or `demands`.
    pub layer: &'static str,
    /// Index of the feature in its file (or data row for CSV layers).
    pub feature: Option<usize>,
    /// The feature's id (as the GIS gives it).
    pub id: String,
    pub at: [f64; 2],
    pub detail: String,
}

/// A node being built.
#[derive(Clone, Debug)]
pub struct BNode {
    pub pos: [f64; 2],
    pub source: Option<BSource>,
    /// Elevations suggested by the pipes' end attributes, m.
    pub elevation_samples: Vec<f64>,
    pub elevation_m: Option<f64>,
    pub demand_m3s: f64,
    pub zone: Option<String>,
}

#[derive(Clone, Debug)]
pub struct BSource {
    pub id: String,
    /// `reservoir` or `tank`.
    pub kind: String,
    pub grade_m: f64,
}

/// A pipe being built: a piece of one part of one feature.
#[derive(Clone, Debug)]
pub struct BPipe {
    /// The id before any split.
    pub base_id: String,
    pub feature: usize,
    pub pts: Vec<[f64; 2]>,
    pub from: usize,
    pub to: usize,
    pub length_m: f64,
    pub diameter_m: f64,
    pub roughness: f64,
    pub minor_loss: f64,
    pub status: PipeStatus,
    pub material: Option<String>,
    /// Elevations at the first and last position, m (from the end attributes).
    pub end_elevations: [Option<f64>; 2],
    /// Where the piece starts along its unsplit line (0-1), to number split pieces in order.
    pub start_fraction: f64,
    pub end_fraction: f64,
    /// Bumped at each split, to skip the stale entries of the segment index.
    pub version: u32,
    /// The length is the line's own (no length attribute): measured again when an end moves.
    pub measured: bool,
}

#[derive(Clone, Debug)]
pub struct BHydrant {
    pub id: String,
    pub junction: usize,
    pub required_m3s: Option<f64>,
    pub class: Option<String>,
    pub pos: [f64; 2],
    pub lateral: Option<BLateral>,
}

/// A hydrant's lead from its GIS attributes, SI.
#[derive(Clone, Copy, Debug)]
pub struct BLateral {
    pub length_m: f64,
    pub diameter_m: f64,
    /// A C factor, or a Darcy-Weisbach roughness in m; `None`: hydrants.csv's default.
    pub roughness: Option<f64>,
}

/// The network being built.
#[derive(Default)]
pub struct Builder {
    pub nodes: Vec<BNode>,
    pub pipes: Vec<BPipe>,
    pub hydrants: Vec<BHydrant>,
    pub events: Vec<Event>,
    /// Junctions (not sources) by position.
    junction_index: RTree<GeomWithData<[f64; 2], usize>>,
    /// Pipe segments: (pipe, segment, pipe version).
    segment_index: RTree<Segment>,
}

/// A pipe segment in the spatial index: (pipe, segment, pipe version).
type Segment = GeomWithData<Line<[f64; 2]>, (usize, usize, u32)>;

/// A line of the pipes layer, read and checked, before the topology.
pub struct LineIn {
    pub id: String,
    pub feature: usize,
    pub parts: Vec<Vec<[f64; 2]>>,
    pub length_m: Option<f64>,
    pub diameter_m: f64,
    pub roughness: f64,
    pub minor_loss: f64,
    pub status: PipeStatus,
    pub material: Option<String>,
    pub zone: Option<String>,
    pub end_elevations: [Option<f64>; 2],
}

/// Length of a polyline, coordinate units.
pub fn polyline_length(pts: &[[f64; 2]]) -> f64 {
    pts.windows(2).map(|w| dist(w[0], w[1])).sum()
}

pub fn dist(a: [f64; 2], b: [f64; 2]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2)).sqrt()
}

/// The positions of a LineString part, consecutive repeats removed.
fn part_points(part: &[geojson::Position]) -> Option<Vec<[f64; 2]>> {
    let mut out: Vec<[f64; 2]> = Vec::with_capacity(part.len());
    for p in part {
        let s = p.as_slice();
        if s.len() < 2 || !s[0].is_finite() || !s[1].is_finite() {
            return None;
        }
        let q = [s[0], s[1]];
        if out.last() != Some(&q) {
            out.push(q);
        }
    }
    Some(out)
}

/// Units of the attributes, as factors to SI.
pub struct AttributeUnits {
    pub diameter_m: f64,
    pub length_m: f64,
    pub roughness_m: f64,
    pub elevation_m: f64,
    pub hazen_williams: bool,
}

/// Reads the pipes layer into lines; problems go to `diags`, left-out features to `events`.
pub fn read_lines(
    layer: &Layer,
    mapping: &Mapping,
    units: &AttributeUnits,
    diags: &mut Diagnostics,
    events: &mut Vec<Event>,
) -> Vec<LineIn> {
    let m = &mapping.pipes;
    let mut lines = Vec::new();
    for f in &layer.features {
        let label = feature_label(f, m.id.as_deref());
        let mut err = |what: String, fix: &str| {
            diags.error(layer.at(), format!("{label}: {what}"), fix);
        };
        let Some(parts) = line_parts(f, &label, &mut err, events) else {
            continue;
        };
        let Some(values) = pipe_values(f, mapping, units, &mut err) else {
            continue;
        };
        let id = line_id(f, m.id.as_deref(), parts[0][0], events);
        if values.guessed_roughness {
            events.push(event(
                Action::Guessed,
                "pipes",
                f,
                &id,
                parts[0][0],
                &format!(
                    "no roughness (attribute empty, material not in the table): default {} used",
                    mapping
                        .pipes
                        .default_roughness
                        .as_ref()
                        .map_or(0.0, |r| *r.get_ref())
                ),
            ));
        }
        lines.push(LineIn {
            id,
            feature: f.index,
            parts,
            length_m: values.length_m,
            diameter_m: values.diameter_m,
            roughness: values.roughness,
            minor_loss: values.minor_loss,
            status: values.status,
            material: values.material,
            zone: attribute_text(f, m.zone.as_deref()),
            end_elevations: values.end_elevations,
        });
    }
    lines
}

/// The parts of a line feature with at least two distinct positions each; `None` after an
/// error (not a line) or a drop (no geometry, zero length).
fn line_parts(
    f: &InFeature,
    label: &str,
    err: &mut impl FnMut(String, &str),
    events: &mut Vec<Event>,
) -> Option<Vec<Vec<[f64; 2]>>> {
    let raw: Vec<geojson::LineStringType> = match &f.geometry {
        None => {
            events.push(event(
                Action::Dropped,
                "pipes",
                f,
                label,
                [0.0; 2],
                "no geometry",
            ));
            return None;
        }
        Some(GeometryValue::LineString { coordinates }) => vec![coordinates.clone()],
        Some(GeometryValue::MultiLineString { coordinates }) => coordinates.clone(),
        Some(other) => {
            err(
                format!(
                    "is a {}, not a LineString or MultiLineString",
                    other.type_name()
                ),
                "the pipes layer holds lines only; move other features to their own layer",
            );
            return None;
        }
    };
    let parts: Vec<Vec<[f64; 2]>> = raw
        .iter()
        .filter_map(|p| part_points(p))
        .filter(|p| p.len() >= 2)
        .collect();
    if parts.is_empty() {
        let at = first_position(f);
        events.push(event(Action::Dropped, "pipes", f, label, at, "zero length"));
        return None;
    }
    Some(parts)
}

/// The pipe's id: the mapped attribute, else the feature's id, else `pipe-N` (reported).
fn line_id(f: &InFeature, attr: Option<&str>, at: [f64; 2], events: &mut Vec<Event>) -> String {
    attribute_text(f, attr)
        .or_else(|| f.feature_id.clone())
        .unwrap_or_else(|| {
            let id = format!("pipe-{}", f.index);
            events.push(event(
                Action::Guessed,
                "pipes",
                f,
                &id,
                at,
                "no id: named after the feature's index",
            ));
            id
        })
}

fn first_position(f: &InFeature) -> [f64; 2] {
    let p = match &f.geometry {
        Some(GeometryValue::LineString { coordinates }) => coordinates.first(),
        Some(GeometryValue::MultiLineString { coordinates }) => {
            coordinates.first().and_then(|c| c.first())
        }
        Some(GeometryValue::Point { coordinates }) => Some(coordinates),
        _ => None,
    };
    p.map(|p| {
        let s = p.as_slice();
        [
            s.first().copied().unwrap_or(0.0),
            s.get(1).copied().unwrap_or(0.0),
        ]
    })
    .unwrap_or([0.0; 2])
}

pub fn event(
    action: Action,
    layer: &'static str,
    f: &InFeature,
    id: &str,
    at: [f64; 2],
    detail: &str,
) -> Event {
    Event {
        action,
        layer,
        feature: Some(f.index),
        id: id.to_string(),
        at,
        detail: detail.to_string(),
    }
}

struct PipeValues {
    length_m: Option<f64>,
    diameter_m: f64,
    roughness: f64,
    guessed_roughness: bool,
    minor_loss: f64,
    status: PipeStatus,
    material: Option<String>,
    end_elevations: [Option<f64>; 2],
}

/// The numeric attributes of a pipe feature as given (not yet SI): diameter, length,
/// roughness, minor loss, start and end elevations.
type Numbers = [Option<f64>; 6];

/// Reads the numeric attributes; `None` after reporting one that is not a number.
fn pipe_numbers(
    f: &InFeature,
    mapping: &Mapping,
    err: &mut impl FnMut(String, &str),
) -> Option<Numbers> {
    let m = &mapping.pipes;
    let e = &mapping.elevations;
    let names: [(Option<&str>, &str); 6] = [
        (Some(m.diameter.as_str()), "diameter"),
        (m.length.as_deref(), "length"),
        (m.roughness.as_deref(), "roughness"),
        (m.minor_loss.as_deref(), "minor loss"),
        (e.start.as_deref(), "start elevation"),
        (e.end.as_deref(), "end elevation"),
    ];
    let mut out = [None; 6];
    let mut ok = true;
    for (slot, (name, what)) in out.iter_mut().zip(names) {
        let Some(name) = name else { continue };
        match attribute_number(f, name) {
            Ok(v) => *slot = v,
            Err(text) => {
                ok = false;
                err(
                    format!("{what} attribute `{name}` is {text}, not a number"),
                    "give a plain number (no unit) in the GIS",
                );
            }
        }
    }
    ok.then_some(out)
}

/// The roughness: the attribute, else the material table, else the default (guessed).
fn roughness_of(
    attribute: Option<f64>,
    material: Option<&String>,
    m: &super::mapping::PipesSection,
    err: &mut impl FnMut(String, &str),
) -> Option<(f64, bool)> {
    let (roughness, guessed) = match attribute {
        Some(r) => (Some(r), false),
        None => match material.and_then(|t| m.roughness_by_material.get(t)) {
            Some(r) => (Some(*r.get_ref()), false),
            None => (m.default_roughness.as_ref().map(|r| *r.get_ref()), true),
        },
    };
    match roughness.filter(|r| *r > 0.0) {
        Some(r) => Some((r, guessed)),
        None => {
            err(
                format!(
                    "no roughness: the attribute is empty or not above 0, and the material {} is not in [pipes.roughness_by_material]",
                    material.map(|t| format!("`{t}`")).unwrap_or_else(|| "(none)".into())
                ),
                "fill the roughness attribute, add the material to [pipes.roughness_by_material], or set [pipes] default_roughness",
            );
            None
        }
    }
}

/// Why a pipe's roughness would be refused when the imported network is read, if it would:
/// the bounds of the network loader (a Hazen-Williams C within the C factors pipes have; a
/// Darcy-Weisbach roughness at most half the diameter), so that the import never writes a
/// pipe the network files refuse. `what` names the value ("the roughness").
pub fn implausible_roughness(
    what: &str,
    roughness: f64,
    diameter_m: f64,
    hazen_williams: bool,
) -> Option<String> {
    if hazen_williams {
        (!limits::C_FACTOR.holds(roughness))
            .then(|| limits::C_FACTOR.message(what, roughness, UnitSystem::Si))
    } else {
        (roughness > limits::MAX_RELATIVE_ROUGHNESS * diameter_m).then(|| {
            format!(
                "{what} {} m is more than {} of the diameter {} m",
                display_value(roughness),
                display_value(limits::MAX_RELATIVE_ROUGHNESS),
                display_value(diameter_m)
            )
        })
    }
}

/// The status word of the attribute's text (through `[pipes.status_values]`).
fn status_of(
    text: Option<String>,
    m: &super::mapping::PipesSection,
    err: &mut impl FnMut(String, &str),
) -> Option<PipeStatus> {
    let Some(text) = text else {
        return Some(PipeStatus::Open);
    };
    let word = m.status_values.get(&text).cloned().unwrap_or(text.clone());
    match word.to_ascii_lowercase().as_str() {
        "open" => Some(PipeStatus::Open),
        "closed" => Some(PipeStatus::Closed),
        "check" => Some(PipeStatus::Check),
        _ => {
            err(
                format!("status `{text}` is not open, closed or check"),
                "add the text to [pipes.status_values] with open, closed or check",
            );
            None
        }
    }
}

/// The attributes of one pipe feature in SI; `None` after reporting an error.
fn pipe_values(
    f: &InFeature,
    mapping: &Mapping,
    units: &AttributeUnits,
    err: &mut impl FnMut(String, &str),
) -> Option<PipeValues> {
    let m = &mapping.pipes;
    let [diameter, length, roughness, minor_loss, start, end] = pipe_numbers(f, mapping, err)?;
    let Some(diameter) = diameter.filter(|d| *d > 0.0) else {
        err(
            format!(
                "diameter attribute `{}` is empty or not above 0",
                m.diameter
            ),
            "give every pipe its inside diameter",
        );
        return None;
    };
    if length.is_some_and(|l| l < 0.0) || minor_loss.is_some_and(|k| k < 0.0) {
        err(
            "a length or minor loss below 0".into(),
            "give lengths and loss coefficients of 0 or more",
        );
        return None;
    }
    let material = attribute_text(f, m.material.as_deref());
    let (roughness, guessed_roughness) = roughness_of(roughness, material.as_ref(), m, err)?;
    let roughness = if units.hazen_williams {
        roughness
    } else {
        roughness * units.roughness_m
    };
    let diameter_m = diameter * units.diameter_m;
    if !limits::DIAMETER.holds(diameter_m) {
        // At the feature, once, rather than by the network reader at each piece of the line.
        err(
            super::not_between(
                "the diameter",
                diameter_m,
                m.diameter_unit,
                limits::DIAMETER,
                limits::MIN_DIAMETER_M,
            ),
            "check the value and [pipes] diameter_unit in the mapping",
        );
        return None;
    }
    if let Some(problem) =
        implausible_roughness("the roughness", roughness, diameter_m, units.hazen_williams)
    {
        err(
            problem,
            "give the Hazen-Williams C factor (about 40 to 150), or for Darcy-Weisbach the absolute roughness in [pipes] roughness_unit (docs/gis.md)",
        );
        return None;
    }
    let status = status_of(attribute_text(f, m.status.as_deref()), m, err)?;
    Some(PipeValues {
        length_m: length.map(|l| l * units.length_m),
        diameter_m,
        roughness,
        guessed_roughness,
        minor_loss: minor_loss.unwrap_or(0.0),
        status,
        material,
        end_elevations: [
            start.map(|e| e * units.elevation_m),
            end.map(|e| e * units.elevation_m),
        ],
    })
}

impl Builder {
    /// Junctions from the line ends (ends within `tolerance` of a first end become its
    /// junction), and a pipe per line part. `metres_per_unit` turns line lengths into metres.
    pub fn from_lines(lines: &[LineIn], tolerance: f64, metres_per_unit: f64) -> Builder {
        let mut b = Builder::default();
        // Every end of every part: (position, pipe, 0 = first / 1 = last).
        let mut ends: Vec<([f64; 2], usize, usize)> = Vec::new();
        for line in lines {
            let total: f64 = line.parts.iter().map(|p| polyline_length(p)).sum();
            let multi = line.parts.len() > 1;
            for (k, part) in line.parts.iter().enumerate() {
                let geom = polyline_length(part);
                let length_m = match line.length_m {
                    Some(l) if total > 0.0 => l * geom / total,
                    _ => geom * metres_per_unit,
                };
                let pipe = b.pipes.len();
                b.pipes.push(BPipe {
                    base_id: if multi {
                        format!("{}/{}", line.id, k + 1)
                    } else {
                        line.id.clone()
                    },
                    feature: line.feature,
                    pts: part.clone(),
                    from: usize::MAX,
                    to: usize::MAX,
                    length_m,
                    diameter_m: line.diameter_m,
                    roughness: line.roughness,
                    minor_loss: line.minor_loss,
                    status: line.status,
                    material: line.material.clone(),
                    end_elevations: if multi {
                        [None, None]
                    } else {
                        line.end_elevations
                    },
                    start_fraction: 0.0,
                    end_fraction: 1.0,
                    version: 0,
                    measured: line.length_m.is_none(),
                });
                ends.push((part[0], pipe, 0));
                ends.push((part[part.len() - 1], pipe, 1));
            }
            if multi {
                b.events.push(Event {
                    action: Action::Split,
                    layer: "pipes",
                    feature: Some(line.feature),
                    id: line.id.clone(),
                    at: line.parts[0][0],
                    detail: format!(
                        "multi-part line: {} pipes {}/1 to {}/{}",
                        line.parts.len(),
                        line.id,
                        line.id,
                        line.parts.len()
                    ),
                });
            }
        }
        b.snap_ends(&ends, tolerance, metres_per_unit);
        b.zones_from_lines(lines);
        b
    }

    /// Groups line ends into junctions, first come first served. A snapped end moves onto its junction, so that the line drawn is the pipe modelled; a
    /// measured length is measured again.
    fn snap_ends(
        &mut self,
        ends: &[([f64; 2], usize, usize)],
        tolerance: f64,
        metres_per_unit: f64,
    ) {
        let tree = RTree::bulk_load(
            ends.iter()
                .enumerate()
                .map(|(i, e)| GeomWithData::new(e.0, i))
                .collect(),
        );
        let mut node_of: Vec<Option<usize>> = vec![None; ends.len()];
        for (i, &(pos, _, _)) in ends.iter().enumerate() {
            if node_of[i].is_some() {
                continue;
            }
            let node = self.nodes.len();
            self.nodes.push(BNode {
                pos,
                source: None,
                elevation_samples: Vec::new(),
                elevation_m: None,
                demand_m3s: 0.0,
                zone: None,
            });
            let mut near: Vec<usize> = tree
                .locate_within_distance(pos, tolerance * tolerance)
                .map(|g| g.data)
                .filter(|&j| node_of[j].is_none())
                .collect();
            near.sort_unstable();
            for j in near {
                node_of[j] = Some(node);
                let (at, pipe, end) = ends[j];
                let d = dist(at, pos);
                if d > 0.0 {
                    let p = &self.pipes[pipe];
                    self.events.push(Event {
                        action: Action::Snapped,
                        layer: "pipes",
                        feature: Some(p.feature),
                        id: p.base_id.clone(),
                        at,
                        detail: format!(
                            "{} end moved {} to the junction at ({}, {})",
                            if end == 0 { "first" } else { "last" },
                            short(d),
                            short(pos[0]),
                            short(pos[1])
                        ),
                    });
                }
            }
        }
        self.assign_ends(ends, &node_of, metres_per_unit);
        self.drop_loops();
        for (i, n) in self.nodes.iter().enumerate() {
            self.junction_index.insert(GeomWithData::new(n.pos, i));
        }
        for p in 0..self.pipes.len() {
            self.index_segments(p);
        }
    }

    /// Each end's pipe gets its node; the end moves onto the node, and a measured length is
    /// measured again.
    fn assign_ends(
        &mut self,
        ends: &[([f64; 2], usize, usize)],
        node_of: &[Option<usize>],
        metres_per_unit: f64,
    ) {
        for (j, &(_, pipe, end)) in ends.iter().enumerate() {
            let node = node_of[j].unwrap_or(usize::MAX);
            let pos = self.nodes.get(node).map(|n| n.pos);
            let p = &mut self.pipes[pipe];
            let last = p.pts.len() - 1;
            if end == 0 {
                p.from = node;
            } else {
                p.to = node;
            }
            if let Some(pos) = pos {
                p.pts[if end == 0 { 0 } else { last }] = pos;
            }
            if p.measured {
                p.length_m = polyline_length(&p.pts) * metres_per_unit;
            }
        }
    }

    /// Pipes whose two ends became one junction carry nothing: left out, and reported.
    fn drop_loops(&mut self) {
        let mut kept = Vec::with_capacity(self.pipes.len());
        for p in std::mem::take(&mut self.pipes) {
            if p.from == p.to {
                self.events.push(Event {
                    action: Action::Dropped,
                    layer: "pipes",
                    feature: Some(p.feature),
                    id: p.base_id.clone(),
                    at: p.pts[0],
                    detail: "both ends on one junction (a closed ring or a line shorter than the snap tolerance)".into(),
                });
            } else {
                kept.push(p);
            }
        }
        self.pipes = kept;
    }

    /// A junction takes the zone of the first pipe (in file order) ending at it that has one.
    fn zones_from_lines(&mut self, lines: &[LineIn]) {
        let zone_of: HashMap<usize, &String> = lines
            .iter()
            .filter_map(|l| l.zone.as_ref().map(|z| (l.feature, z)))
            .collect();
        for p in &self.pipes {
            let Some(zone) = zone_of.get(&p.feature) else {
                continue;
            };
            for n in [p.from, p.to] {
                if let Some(node) = self.nodes.get_mut(n) {
                    node.zone.get_or_insert_with(|| (*zone).clone());
                }
            }
        }
    }

    fn index_segments(&mut self, p: usize) {
        let pipe = &self.pipes[p];
        for (s, w) in pipe.pts.windows(2).enumerate() {
            self.segment_index.insert(GeomWithData::new(
                Line::new(w[0], w[1]),
                (p, s, pipe.version),
            ));
        }
    }

    /// Reports lines that cross without a shared vertex, and line ends that lie on another
    /// line away from its ends: firemain joins lines only at their ends, so these stay apart.
    pub fn report_not_joined(&mut self, tolerance: f64) {
        let mut pairs: HashSet<(usize, usize)> = HashSet::new();
        let mut found = Vec::new();
        for (p, pipe) in self.pipes.iter().enumerate() {
            for w in pipe.pts.windows(2) {
                let env = AABB::from_corners(w[0], w[1]);
                for other in self.segment_index.locate_in_envelope_intersecting(&env) {
                    let (q, _, _) = other.data;
                    if q <= p || pairs.contains(&(p, q)) {
                        continue;
                    }
                    let Some(x) = segment_crossing(w[0], w[1], other.geom().from, other.geom().to)
                    else {
                        continue;
                    };
                    let near_end = |pp: &BPipe| {
                        dist(x, pp.pts[0]) <= tolerance
                            || dist(x, pp.pts[pp.pts.len() - 1]) <= tolerance
                    };
                    if near_end(pipe) || near_end(&self.pipes[q]) {
                        continue;
                    }
                    pairs.insert((p, q));
                    found.push((p, q, x, false));
                }
            }
            for (end, node) in [
                (pipe.pts[0], pipe.from),
                (pipe.pts[pipe.pts.len() - 1], pipe.to),
            ] {
                for other in self
                    .segment_index
                    .locate_within_distance(end, tolerance * tolerance)
                {
                    let (q, _, _) = other.data;
                    let qp = &self.pipes[q];
                    if q == p || qp.from == node || qp.to == node || pairs.contains(&(p, q)) {
                        continue;
                    }
                    pairs.insert((p, q));
                    found.push((p, q, end, true));
                }
            }
        }
        for (p, q, x, end_on_line) in found {
            let (a, b) = (&self.pipes[p], &self.pipes[q]);
            let detail = if end_on_line {
                format!(
                    "an end of {} lies on {} away from its ends; not joined (split {} there in the GIS if they meet)",
                    a.base_id, b.base_id, b.base_id
                )
            } else {
                format!(
                    "{} and {} cross without a shared vertex; not joined (add a vertex and split both lines there in the GIS if they meet)",
                    a.base_id, b.base_id
                )
            };
            self.events.push(Event {
                action: Action::NotJoined,
                layer: "pipes",
                feature: Some(a.feature),
                id: a.base_id.clone(),
                at: x,
                detail,
            });
        }
    }

    /// The nearest junction (not a source) to `pos` within `tolerance`.
    pub fn nearest_junction(&self, pos: [f64; 2], tolerance: f64) -> Option<(usize, f64)> {
        self.junction_index
            .nearest_neighbor_iter_with_distance_2(&pos)
            .find(|(g, _)| self.nodes[g.data].source.is_none())
            .map(|(g, d2)| (g.data, d2.sqrt()))
            .filter(|(_, d)| *d <= tolerance)
    }

    /// The point nearest to `pos` on any pipe within `tolerance`: (pipe, segment, point, d).
    fn nearest_on_pipe(
        &self,
        pos: [f64; 2],
        tolerance: f64,
    ) -> Option<(usize, usize, [f64; 2], f64)> {
        self.segment_index
            .nearest_neighbor_iter_with_distance_2(&pos)
            .find(|(g, _)| {
                let (p, _, v) = g.data;
                self.pipes[p].version == v
            })
            .map(|(g, d2)| (g.data.0, g.data.1, g.geom().nearest_point(&pos), d2.sqrt()))
            .filter(|(_, _, _, d)| *d <= tolerance)
    }

    /// Where a point joins the network: an existing junction within `attach`, else a new
    /// junction splitting the nearest pipe within `split`. Returns the node and what happened.
    pub fn place_point(
        &mut self,
        pos: [f64; 2],
        attach: f64,
        split: f64,
    ) -> Option<(usize, Action, String)> {
        if let Some((node, d)) = self.nearest_junction(pos, attach) {
            return Some((
                node,
                Action::Attached,
                format!("{} from the junction", short(d)),
            ));
        }
        let (p, seg, at, d) = self.nearest_on_pipe(pos, split)?;
        let pipe = &self.pipes[p];
        let (first, last) = (pipe.pts[0], pipe.pts[pipe.pts.len() - 1]);
        // A projection onto a pipe's very end is that end's node, not a split (which would
        // make a piece of no length); a source there cannot take the point.
        for (end, node) in [(first, pipe.from), (last, pipe.to)] {
            if dist(at, end) <= SPLIT_END_EPSILON * pipe_scale(pipe) {
                if self.nodes[node].source.is_some() {
                    return None;
                }
                return Some((
                    node,
                    Action::Attached,
                    format!("{} from the pipe end", short(d)),
                ));
            }
        }
        let name = pipe.base_id.clone();
        let node = self.split_pipe(p, seg, at);
        Some((
            node,
            Action::Split,
            format!("{} from pipe {name}, split there", short(d)),
        ))
    }

    /// Splits pipe `p` at point `at` on its segment `seg`; returns the new junction.
    fn split_pipe(&mut self, p: usize, seg: usize, at: [f64; 2]) -> usize {
        let node = self.nodes.len();
        let old = self.pipes[p].clone();
        let mut first_pts: Vec<[f64; 2]> = old.pts[..=seg].to_vec();
        if first_pts.last() != Some(&at) {
            first_pts.push(at);
        }
        let mut second_pts = vec![at];
        second_pts.extend(old.pts[seg + 1..].iter().copied().filter(|q| *q != at));
        let (l1, l2) = (polyline_length(&first_pts), polyline_length(&second_pts));
        let ratio = if l1 + l2 > 0.0 { l1 / (l1 + l2) } else { 0.5 };
        let elevation = match old.end_elevations {
            [Some(a), Some(b)] => Some(a + (b - a) * ratio),
            _ => None,
        };
        let mid_fraction = old.start_fraction + (old.end_fraction - old.start_fraction) * ratio;
        self.nodes.push(BNode {
            pos: at,
            source: None,
            elevation_samples: elevation.into_iter().collect(),
            elevation_m: None,
            demand_m3s: 0.0,
            zone: self.nodes[old.from].zone.clone(),
        });
        self.junction_index.insert(GeomWithData::new(at, node));
        let second = BPipe {
            pts: second_pts,
            from: node,
            length_m: old.length_m * (1.0 - ratio),
            end_elevations: [elevation, old.end_elevations[1]],
            start_fraction: mid_fraction,
            version: 0,
            ..old.clone()
        };
        let first = &mut self.pipes[p];
        first.pts = first_pts;
        first.to = node;
        first.length_m = old.length_m * ratio;
        first.end_elevations = [old.end_elevations[0], elevation];
        first.end_fraction = mid_fraction;
        first.version += 1;
        self.index_segments(p);
        self.pipes.push(second);
        self.index_segments(self.pipes.len() - 1);
        node
    }

    /// Removes a junction from the junction index (it became a source).
    pub fn make_source(&mut self, node: usize, source: BSource) {
        let pos = self.nodes[node].pos;
        self.junction_index.remove(&GeomWithData::new(pos, node));
        self.nodes[node].source = Some(source);
    }

    /// The final pipe ids: split pieces of one line numbered `.1`, `.2`, ... along it; an id
    /// used twice renamed with `~2`, `~3`, ... (reported).
    pub fn pipe_ids(&mut self) -> Vec<String> {
        let mut groups: BTreeMap<(String, usize), Vec<usize>> = BTreeMap::new();
        for (i, p) in self.pipes.iter().enumerate() {
            groups
                .entry((p.base_id.clone(), p.feature))
                .or_default()
                .push(i);
        }
        let mut ids = vec![String::new(); self.pipes.len()];
        for ((base, _), mut members) in groups {
            if members.len() == 1 {
                ids[members[0]] = base;
            } else {
                members.sort_by(|a, b| {
                    self.pipes[*a]
                        .start_fraction
                        .total_cmp(&self.pipes[*b].start_fraction)
                });
                for (k, m) in members.iter().enumerate() {
                    ids[*m] = format!("{base}.{}", k + 1);
                }
            }
        }
        let mut seen: HashMap<String, usize> = HashMap::new();
        for (i, id) in ids.iter_mut().enumerate() {
            let count = seen.entry(id.clone()).or_insert(0);
            *count += 1;
            if *count > 1 {
                let new = format!("{id}~{count}");
                let p = &self.pipes[i];
                self.events.push(Event {
                    action: Action::Renamed,
                    layer: "pipes",
                    feature: Some(p.feature),
                    id: id.clone(),
                    at: p.pts[0],
                    detail: format!("id used by an earlier feature; this pipe is {new}"),
                });
                *id = new;
            }
        }
        ids
    }
}

/// A projection this close to a pipe's end (as a share of the pipe's extent) is the end itself:
/// splitting there would make a piece of no length.
const SPLIT_END_EPSILON: f64 = 1e-9;

fn pipe_scale(p: &BPipe) -> f64 {
    polyline_length(&p.pts).max(1.0)
}

/// The point where segments a-b and c-d cross, if they do (touching counts).
pub fn segment_crossing(a: [f64; 2], b: [f64; 2], c: [f64; 2], d: [f64; 2]) -> Option<[f64; 2]> {
    let r = [b[0] - a[0], b[1] - a[1]];
    let s = [d[0] - c[0], d[1] - c[1]];
    let denom = r[0] * s[1] - r[1] * s[0];
    if denom == 0.0 {
        return None; // parallel or collinear: not a crossing
    }
    let qp = [c[0] - a[0], c[1] - a[1]];
    let t = (qp[0] * s[1] - qp[1] * s[0]) / denom;
    let u = (qp[0] * r[1] - qp[1] * r[0]) / denom;
    ((0.0..=1.0).contains(&t) && (0.0..=1.0).contains(&u))
        .then(|| [a[0] + t * r[0], a[1] + t * r[1]])
}

/// A distance or coordinate for a message: at most 3 decimals, no trailing zeros; from 1e15 up
/// (beyond any real coordinate, where f64 has no decimals left), in scientific notation (a
/// point at 1e44 printed 45 digits; found by fuzzing).
pub fn short(x: f64) -> String {
    if !x.is_finite() {
        return String::new();
    }
    if x.abs() >= 1e15 {
        return crate::units::display_value(x);
    }
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn an_imported_roughness_obeys_the_network_files_bounds() {
        // The bounds are the loader's own (limits::C_FACTOR, MAX_RELATIVE_ROUGHNESS), so that an
        // import never writes a pipe that pipes.csv refuses: a consistency check, no source.
        assert!(implausible_roughness("r", 120.0, 0.2, true).is_none());
        assert!(implausible_roughness("r", 10.0, 0.2, true).is_none());
        assert!(implausible_roughness("r", 300.0, 0.2, true).is_some());
        assert!(implausible_roughness("r", 1e308, 0.2, true).is_some());
        assert!(implausible_roughness("r", 1.5e-6, 0.2, false).is_none());
        assert!(implausible_roughness("r", 0.1, 0.2, false).is_none());
        assert!(implausible_roughness("r", 0.11, 0.2, false).is_some());
    }

    #[test]
    fn crossing_by_hand() {
        // The diagonals of the unit square cross at its centre (coordinate geometry).
        let x = segment_crossing([0.0, 0.0], [1.0, 1.0], [0.0, 1.0], [1.0, 0.0]);
        assert_eq!(x, Some([0.5, 0.5]));
        assert_eq!(
            segment_crossing([0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [1.0, 1.0]),
            None
        );
    }

    #[test]
    fn short_numbers() {
        assert_eq!(short(1.5), "1.5");
        assert_eq!(short(2.0), "2");
        assert_eq!(short(-0.0001), "0");
    }
}
