//! `firemain import geojson`: a network folder from GIS layers (GeoJSON pipes, hydrants and
//! sources, a TOML mapping of their attributes, optional elevation and demand points).
//!
//! Reading and checking are here; the topology is [`build`]; the network's files are written by
//! [`mod@write`]; the report of what was changed (import.md, import.csv) is `report::import`.
//! docs/gis.md describes the mapping format and every rule.

pub mod build;
pub mod crs;
pub mod elevation;
pub mod mapping;
pub mod read;
pub mod write;

use std::path::Path;

use geojson::GeometryValue;

use crate::model::diagnostic::{quoted, Diagnostics, Location};
use crate::model::limits;
use crate::model::table::{read_table, TableSpec};
use crate::units::display_value;
use build::{
    event, implausible_roughness, short, Action, AttributeUnits, BHydrant, BLateral, BSource,
    Builder, Event,
};
use mapping::{
    default_diameter, default_flow, default_length, ElevationMethod, ElevationSource, HeadlossWord,
    LengthUnit, Mapping, MappingFile,
};
use read::{attribute_number, attribute_text, feature_label, read_layer, InFeature, Layer};

/// The files given to the import.
pub struct ImportInputs<'a> {
    pub pipes: &'a Path,
    pub hydrants: Option<&'a Path>,
    pub sources: Option<&'a Path>,
    pub elevations: Option<&'a Path>,
    pub demands: Option<&'a Path>,
    pub mapping: &'a Path,
}

/// An import's result: the network folder's files and what was changed on the way.
pub struct Imported {
    /// (file name, bytes) of model.toml, junctions.csv, sources.csv, pipes.csv, hydrants.csv.
    pub network_files: Vec<(String, Vec<u8>)>,
    pub events: Vec<Event>,
    pub summary: Summary,
}

/// Counts and facts for the report's head.
pub struct Summary {
    pub name: String,
    pub crs: Option<String>,
    pub coordinate_unit: String,
    pub pipe_features: usize,
    pub hydrant_features: usize,
    pub source_features: usize,
    pub junctions: usize,
    pub sources: usize,
    pub pipes: usize,
    pub hydrants: usize,
    pub files: Vec<String>,
}

/// Default number of survey points for inverse distance weighting (common practice, no source:
/// enough to smooth one noisy point, few enough to stay local).
pub const DEFAULT_IDW_NEIGHBOURS: usize = 6;

/// The mapping and the layers as read.
struct Inputs {
    mapping: Mapping,
    mapping_file: MappingFile,
    pipes: Layer,
    hydrants: Option<Layer>,
    sources: Option<Layer>,
}

/// Reads the mapping and the layers; `None` after any error.
fn read_inputs(inputs: &ImportInputs<'_>, diags: &mut Diagnostics) -> Option<Inputs> {
    let (mapping, mapping_file) = mapping::read_mapping(inputs.mapping, diags)?;
    check_mapping(&mapping, &mapping_file, diags);
    let pipes = read_layer(inputs.pipes, diags);
    let hydrants = inputs.hydrants.and_then(|p| read_layer(p, diags));
    let sources = inputs.sources.and_then(|p| read_layer(p, diags));
    if diags.has_errors() {
        return None;
    }
    Some(Inputs {
        mapping,
        mapping_file,
        pipes: pipes?,
        hydrants,
        sources,
    })
}

/// Reads the layers and the mapping, builds the network, and renders its files.
pub fn import_geojson(inputs: &ImportInputs<'_>) -> Result<Imported, Diagnostics> {
    let mut diags = Diagnostics::new();
    let Some(read) = read_inputs(inputs, &mut diags) else {
        return Err(diags);
    };
    let Inputs {
        mapping,
        mapping_file,
        pipes,
        hydrants,
        sources,
    } = &read;
    let layers: Vec<&Layer> = [Some(pipes), hydrants.as_ref(), sources.as_ref()]
        .into_iter()
        .flatten()
        .collect();
    let Some((crs, metres_per_unit)) = resolve_crs(&layers, mapping, mapping_file, &mut diags)
    else {
        return Err(diags);
    };
    let b = build_network(&read, inputs, metres_per_unit, &mut diags);
    if diags.has_errors() {
        return Err(diags);
    }
    let mut b = b;
    let pipe_ids = b.pipe_ids();
    let sources_at = sources
        .as_ref()
        .map_or_else(|| mapping_file.whole(), |l| Location::file(l.file.clone()));
    let (network_files, junctions) = write::network_files(
        &b,
        &pipe_ids,
        mapping,
        crs.as_deref(),
        sources_at,
        &mut diags,
    );
    if diags.has_errors() {
        return Err(diags);
    }
    // The files are read as the network reader will read them, before any is written: a value
    // it refuses that the layers' own checks let through is reported here, with the row it
    // would have been, and nothing is written (a folder the tool itself refuses would be a
    // half-finished output).
    if let Err(refused) = crate::model::read_network_rows(&network_files) {
        report_refused_rows(&network_files, &refused, &read, &mut diags);
        return Err(diags);
    }
    let summary = Summary {
        name: mapping.network.name.clone(),
        crs,
        coordinate_unit: coordinate_unit_text(metres_per_unit),
        pipe_features: pipes.features.len(),
        hydrant_features: hydrants.as_ref().map_or(0, |l| l.features.len()),
        source_features: sources.as_ref().map_or(0, |l| l.features.len()),
        junctions,
        sources: b.nodes.iter().filter(|n| n.source.is_some()).count(),
        pipes: b.pipes.len(),
        hydrants: b.hydrants.len(),
        files: network_files.iter().map(|(n, _)| n.clone()).collect(),
    };
    Ok(Imported {
        network_files,
        events: b.events,
        summary,
    })
}

/// The network reader's errors on the rendered files, each at the layer (or mapping) its file
/// comes from, with the row that was refused: its id names the feature.
fn report_refused_rows(
    files: &[(String, Vec<u8>)],
    refused: &Diagnostics,
    read: &Inputs,
    diags: &mut Diagnostics,
) {
    use crate::model::diagnostic::Severity;
    for d in refused.iter().filter(|d| d.severity == Severity::Error) {
        let file = d.location.file.as_str();
        let at = match file {
            crate::model::HYDRANTS_FILE => read.hydrants.as_ref().map(|l| l.at()),
            crate::model::SOURCES_FILE => read.sources.as_ref().map(|l| l.at()),
            crate::model::MODEL_FILE => Some(read.mapping_file.whole()),
            _ => None,
        }
        .unwrap_or_else(|| read.pipes.at());
        let row = d.location.line.and_then(|line| {
            let (_, bytes) = files.iter().find(|(n, _)| n == file)?;
            let text = String::from_utf8_lossy(bytes);
            let row = text
                .lines()
                .nth(usize::try_from(line).ok()?.checked_sub(1)?)?;
            Some(format!(" (its row `{}`)", row.trim()))
        });
        diags.error(
            at,
            format!(
                "the imported {file} would be refused when read{}: {}",
                row.unwrap_or_default(),
                d.message
            ),
            format!(
                "correct the feature in the GIS or the mapping; the reader says: {}",
                d.fix.as_deref().unwrap_or("check the value")
            ),
        );
    }
}

/// The topology, sources, hydrants, elevations and demands; problems go to `diags`.
fn build_network(
    read: &Inputs,
    inputs: &ImportInputs<'_>,
    metres_per_unit: f64,
    diags: &mut Diagnostics,
) -> Builder {
    let mapping = &read.mapping;
    let units = attribute_units(mapping);
    let mut events = Vec::new();
    let lines = build::read_lines(&read.pipes, mapping, &units, diags, &mut events);
    if diags.has_errors() {
        return Builder::default();
    }
    let c = &mapping.coordinates;
    let snap_tolerance = *c.snap_tolerance.get_ref();
    let attach_tolerance = *c.attach_tolerance.get_ref();
    let split_tolerance = c
        .split_tolerance
        .as_ref()
        .map_or(attach_tolerance, |s| *s.get_ref());
    let mut b = Builder::from_lines(&lines, snap_tolerance, metres_per_unit);
    b.events.splice(0..0, events);
    b.report_not_joined(snap_tolerance);
    if let Some(layer) = &read.sources {
        place_sources(
            &mut b,
            layer,
            mapping,
            attach_tolerance,
            split_tolerance,
            diags,
        );
    }
    if let Some(layer) = &read.hydrants {
        place_hydrants(
            &mut b,
            layer,
            mapping,
            [attach_tolerance, split_tolerance, metres_per_unit],
            diags,
        );
    }
    if !b.nodes.iter().any(|n| n.source.is_some()) && !diags.has_errors() {
        diags.error(
            Location::file(read.pipes.file.clone()),
            "the network has no source",
            "give --sources with the reservoirs and tanks as points at the ends of their pipes",
        );
    }
    elevations(
        &mut b,
        mapping,
        &read.mapping_file,
        inputs.elevations,
        diags,
    );
    if let Some(path) = inputs.demands {
        demands(&mut b, mapping, path, diags);
    }
    b
}

fn coordinate_unit_text(metres_per_unit: f64) -> String {
    for u in [
        mapping::LengthUnit::Metre,
        mapping::LengthUnit::Foot,
        mapping::LengthUnit::UsSurveyFoot,
    ] {
        if (u.metres() - metres_per_unit).abs() < 1e-12 {
            return u.symbol().to_string();
        }
    }
    format!("{} m", short(metres_per_unit))
}

/// Values of the mapping that TOML's types do not bound, each reported at its line and column.
fn check_mapping(m: &Mapping, file: &MappingFile, diags: &mut Diagnostics) {
    let c = &m.coordinates;
    for (name, v) in [
        ("[coordinates] snap_tolerance", Some(&c.snap_tolerance)),
        ("[coordinates] attach_tolerance", Some(&c.attach_tolerance)),
        ("[coordinates] split_tolerance", c.split_tolerance.as_ref()),
    ] {
        let Some(v) = v else { continue };
        let x = *v.get_ref();
        if !(x.is_finite() && x >= 0.0) {
            diags.error(
                file.at(v.span()),
                format!(
                    "{name} is {}, not a distance of 0 or more",
                    display_value(x)
                ),
                "give the tolerance in the data's coordinate units",
            );
        }
    }
    let n = &m.network;
    for (name, v) in [
        ("max_day_factor", Some(&n.max_day_factor)),
        ("peak_hour_factor", Some(&n.peak_hour_factor)),
        ("min_hour_factor", n.min_hour_factor.as_ref()),
    ] {
        let Some(v) = v else { continue };
        let x = *v.get_ref();
        if !(x.is_finite() && x > 0.0 && x <= 100.0) {
            diags.error(
                file.at(v.span()),
                format!(
                    "[network] {name} is {}, not a ratio above 0 and at most 100",
                    display_value(x)
                ),
                "give the ratio of the condition's demand to average-day demand (e.g. 1.5)",
            );
        }
    }
    check_mapping_roughness(m, file, diags);
    if let Some(d) = &m.hydrants.default_lateral_diameter {
        let unit = m
            .hydrants
            .lateral_diameter_unit
            .unwrap_or(default_diameter(m.network.units));
        let x = *d.get_ref();
        if !limits::DIAMETER.holds(x * unit.metres()) {
            diags.error(
                file.at(d.span()),
                not_between(
                    "[hydrants] default_lateral_diameter",
                    x * unit.metres(),
                    unit,
                    limits::DIAMETER,
                    limits::MIN_DIAMETER_M,
                ),
                "give the leads' inside diameter in [hydrants] lateral_diameter_unit (e.g. 6 in)",
            );
        }
    }
    if let Some(k) = &m.sources.default_kind {
        let kind = k.get_ref();
        if kind != "reservoir" && kind != "tank" {
            diags.error(
                file.at(k.span()),
                format!(
                    "[sources] default_kind is {}, not reservoir or tank",
                    quoted(kind)
                ),
                "write reservoir or tank",
            );
        }
    }
    if let Some(from) = &m.elevations.from {
        if *from.get_ref() == ElevationSource::Attributes
            && m.elevations.start.is_none()
            && m.elevations.end.is_none()
        {
            diags.error(
                file.at(from.span()),
                "[elevations] from = \"attributes\" names neither `start` nor `end`",
                "name the pipe attributes with the elevations at the line's first and last positions",
            );
        }
    }
}

/// The roughness values the mapping gives (`default_roughness`, `[pipes.roughness_by_material]`):
/// a Hazen-Williams C within the C factors pipes have, or a Darcy-Weisbach roughness above 0
/// and at most the largest main's diameter (each pipe's roughness against its own diameter is
/// checked when the network is read).
fn check_mapping_roughness(m: &Mapping, file: &MappingFile, diags: &mut Diagnostics) {
    let AttributeUnits {
        hazen_williams,
        roughness_m,
        ..
    } = attribute_units(m);
    let named = m
        .pipes
        .default_roughness
        .iter()
        .map(|v| ("[pipes] default_roughness".to_string(), v))
        .chain(
            m.pipes
                .roughness_by_material
                .iter()
                .map(|(material, v)| (format!("[pipes.roughness_by_material] {material}"), v)),
        );
    for (name, v) in named {
        let x = *v.get_ref();
        let problem = if hazen_williams {
            if !x.is_finite() {
                Some(format!(
                    "{name} is {}, not a Hazen-Williams C factor",
                    display_value(x)
                ))
            } else {
                (!limits::C_FACTOR.holds(x))
                    .then(|| limits::C_FACTOR.message(&name, x, m.network.units))
            }
        } else {
            (!(x.is_finite() && x > 0.0 && x * roughness_m <= limits::MAX_DIAMETER_M)).then(|| {
                format!(
                    "{name} is {}, not an absolute roughness above 0 and at most a main's diameter",
                    display_value(x)
                )
            })
        };
        if let Some(problem) = problem {
            let fix = if hazen_williams {
                "give the C factor of the pipe (about 40 for badly tuberculated iron to 150 for plastic)"
            } else {
                "give the absolute roughness in [pipes] roughness_unit (e.g. 0.0015 mm for plastic)"
            };
            diags.error(file.at(v.span()), problem, fix);
        }
    }
}

/// The CRS of the layers (named in the files, else in the mapping) and the metres per
/// coordinate unit. A geographic CRS is refused: lengths in degrees would be wrong.
fn resolve_crs(
    layers: &[&Layer],
    mapping: &Mapping,
    mapping_file: &MappingFile,
    diags: &mut Diagnostics,
) -> Option<(Option<String>, f64)> {
    let c = &mapping.coordinates;
    // Where a missing coordinate unit is reported: at the mapping's `crs` when it decided the
    // CRS, else the whole mapping file (the CRS came from a layer).
    let mut unit_missing_at = mapping_file.whole();
    let crs = match named_crs(layers, diags)? {
        Some(crs) => crs,
        None => match &c.crs {
            Some(text) => {
                unit_missing_at = mapping_file.at(text.span());
                let text = text.get_ref();
                if text.eq_ignore_ascii_case("local") {
                    None
                } else {
                    Some(crs::normalize(text))
                }
            }
            None => {
                diags.error(
                    Location::file(layers[0].file.clone()),
                    "the file names no CRS, and RFC 7946 reads coordinates without one as WGS 84 longitude/latitude in degrees",
                    format!("state the data's projected CRS in {} ([coordinates] crs = \"EPSG:NNNN\"), or crs = \"local\" for coordinates in no named CRS", mapping_file.name),
                );
                return None;
            }
        },
    };
    let metres = metres_per_unit(
        crs.as_deref(),
        c.unit.as_ref(),
        &layers[0].file,
        mapping_file,
        unit_missing_at,
        diags,
    )?;
    Some((crs, metres))
}

/// The CRS the layers' `crs` members name: `Some(None)` when none has a member, `None` after
/// reporting layers that disagree.
fn named_crs(layers: &[&Layer], diags: &mut Diagnostics) -> Option<Option<Option<String>>> {
    let mut named: Option<(Option<String>, &str)> = None;
    for layer in layers {
        let Some(member) = &layer.crs else { continue };
        let short = member.as_deref().map(crs::normalize);
        match &named {
            Some((first, file)) if *first != short => {
                diags.error(
                    Location::file(layer.file.clone()),
                    format!(
                        "the CRS {} differs from {}'s {}",
                        short.as_deref().unwrap_or("null"),
                        file,
                        first.as_deref().unwrap_or("null")
                    ),
                    "export every layer in the same projected CRS",
                );
                return None;
            }
            Some(_) => {}
            None => named = Some((short, &layer.file)),
        }
    }
    Some(named.map(|(crs, _)| crs))
}

/// Metres per coordinate unit: the CRS's own unit when firemain knows the CRS (a contradicting
/// `[coordinates] unit` is an error, at the unit), else the mapping's; a geographic CRS is
/// refused. A missing unit is reported at `unit_missing_at`.
fn metres_per_unit(
    crs: Option<&str>,
    unit: Option<&toml::Spanned<mapping::LengthUnit>>,
    layer_file: &str,
    mapping_file: &MappingFile,
    unit_missing_at: Location,
    diags: &mut Diagnostics,
) -> Option<f64> {
    let stated = unit.map(|u| u.get_ref().metres());
    match crs.map_or(crs::CrsKind::Unknown, crs::kind) {
        crs::CrsKind::Geographic => {
            diags.error(
                Location::file(layer_file),
                format!(
                    "the data is in the geographic CRS {} (longitude/latitude in degrees): pipe lengths and tolerances cannot be measured in degrees",
                    crs.unwrap_or("")
                ),
                "project the data first (e.g. to the local state plane or UTM zone) and export the layers again",
            );
            None
        }
        crs::CrsKind::Projected { metres_per_unit } => match (unit, stated) {
            (Some(u), Some(s)) if (s - metres_per_unit).abs() > 1e-9 * metres_per_unit => {
                diags.error(
                    mapping_file.at(u.span()),
                    format!(
                        "[coordinates] unit gives {} m per unit, but {} is in units of {} m",
                        ten_decimals(s),
                        crs.unwrap_or(""),
                        ten_decimals(metres_per_unit)
                    ),
                    "leave [coordinates] unit out (the CRS decides it) or correct it",
                );
                None
            }
            _ => Some(metres_per_unit),
        },
        crs::CrsKind::Unknown => {
            if stated.is_none() {
                diags.error(
                    unit_missing_at,
                    format!(
                        "the unit of the coordinates is not known ({})",
                        match crs {
                            Some(name) => format!("firemain does not know the CRS {name}"),
                            None => "the data names no CRS".into(),
                        }
                    ),
                    "state it in [coordinates] unit = \"ft\", \"us-ft\" or \"m\"",
                );
            }
            stated
        }
    }
}

fn attribute_units(m: &Mapping) -> AttributeUnits {
    let units = m.network.units;
    let diameter = m.pipes.diameter_unit;
    AttributeUnits {
        diameter_m: diameter.metres(),
        length_m: m
            .pipes
            .length_unit
            .unwrap_or(default_length(units))
            .metres(),
        roughness_m: m
            .pipes
            .roughness_unit
            .unwrap_or(default_diameter(units))
            .metres(),
        elevation_m: m.elevations.unit.unwrap_or(default_length(units)).metres(),
        hazen_williams: m.network.headloss == HeadlossWord::HazenWilliams,
    }
}

/// The position of a Point feature; an error for any other geometry.
fn point_of(
    f: &InFeature,
    layer: &Layer,
    label: &str,
    diags: &mut Diagnostics,
) -> Option<[f64; 2]> {
    let p = match &f.geometry {
        Some(GeometryValue::Point { coordinates }) => Some(coordinates.as_slice().to_vec()),
        Some(GeometryValue::MultiPoint { coordinates }) if coordinates.len() == 1 => {
            Some(coordinates[0].as_slice().to_vec())
        }
        _ => None,
    };
    match p {
        Some(s) if s.len() >= 2 && s[0].is_finite() && s[1].is_finite() => Some([s[0], s[1]]),
        _ => {
            diags.error(
                layer.at(),
                format!(
                    "{label}: is {}, not a Point",
                    f.geometry
                        .as_ref()
                        .map_or("without geometry", |g| g.type_name())
                ),
                "give every feature of this layer one point",
            );
            None
        }
    }
}

fn place_sources(
    b: &mut Builder,
    layer: &Layer,
    mapping: &Mapping,
    attach: f64,
    split: f64,
    diags: &mut Diagnostics,
) {
    let m = &mapping.sources;
    let length_m = m
        .grade_unit
        .unwrap_or(default_length(mapping.network.units))
        .metres();
    for f in &layer.features {
        let label = feature_label(f, m.id.as_deref());
        let Some(pos) = point_of(f, layer, &label, diags) else {
            continue;
        };
        let id = attribute_text(f, m.id.as_deref()).or_else(|| f.feature_id.clone());
        let kind = attribute_text(f, m.kind.as_deref())
            .map(|k| k.to_ascii_lowercase())
            .or_else(|| m.default_kind.as_ref().map(|k| k.get_ref().clone()));
        let grade = m
            .grade
            .as_deref()
            .map(|g| attribute_number(f, g))
            .unwrap_or(Ok(None));
        let (Some(id), Some(kind), Ok(Some(grade))) = (id, kind, grade) else {
            diags.error(
                layer.at(),
                format!("{label}: a source needs an id, a kind and a grade"),
                "map [sources] id, kind (or default_kind) and grade to attributes that every source fills",
            );
            continue;
        };
        if kind != "reservoir" && kind != "tank" {
            diags.error(
                layer.at(),
                format!("{label}: kind `{kind}` is not reservoir or tank"),
                "write reservoir or tank in the kind attribute",
            );
            continue;
        }
        let Some((node, action, detail)) = b.place_point(pos, attach, split) else {
            diags.error(
                layer.at(),
                format!(
                    "{label}: no pipe within the split tolerance {} of the source",
                    short(split)
                ),
                "move the source onto the end of its pipe in the GIS, or raise [coordinates] split_tolerance",
            );
            continue;
        };
        b.make_source(
            node,
            BSource {
                id: id.clone(),
                kind,
                grade_m: grade * length_m,
            },
        );
        b.events.push(event(
            action,
            "sources",
            f,
            &id,
            pos,
            &format!("source {detail}"),
        ));
    }
}

/// Hydrants at their junctions (attached or splitting a pipe); `[attach, split, metres per
/// coordinate unit]`.
fn place_hydrants(
    b: &mut Builder,
    layer: &Layer,
    mapping: &Mapping,
    [attach, split, metres_per_unit]: [f64; 3],
    diags: &mut Diagnostics,
) {
    let m = &mapping.hydrants;
    let flow = m
        .flow_unit
        .unwrap_or(default_flow(mapping.network.units))
        .m3s();
    let mut taken = std::collections::HashSet::new();
    for f in &layer.features {
        let label = feature_label(f, m.id.as_deref());
        let Some(pos) = point_of(f, layer, &label, diags) else {
            continue;
        };
        let id = match attribute_text(f, m.id.as_deref()).or_else(|| f.feature_id.clone()) {
            Some(id) => id,
            None => {
                let id = format!("hydrant-{}", f.index);
                b.events.push(event(
                    Action::Guessed,
                    "hydrants",
                    f,
                    &id,
                    pos,
                    "no id: named after the feature's index",
                ));
                id
            }
        };
        let Some(required) =
            required_flow(f, m.required_flow.as_deref(), flow, &label, layer, diags)
        else {
            continue;
        };
        let Some(lateral) = lateral_of(f, mapping, &label, layer, diags) else {
            continue;
        };
        let id = unique_hydrant_id(b, &mut taken, id, f, pos);
        match b.place_point(pos, attach, split) {
            Some((junction, action, detail)) => {
                b.events.push(event(
                    action,
                    "hydrants",
                    f,
                    &id,
                    pos,
                    &format!("hydrant {detail}"),
                ));
                let lateral = match lateral {
                    Some(given) => Some(given),
                    None => {
                        let offset_m = build::dist(pos, b.nodes[junction].pos) * metres_per_unit;
                        let Some(lead) = lead_from_position(b, f, &id, pos, offset_m, mapping)
                        else {
                            diags.error(
                                layer.at(),
                                format!(
                                    "{label}: the lead from the main to the hydrant would be {} m long, more than any pipe",
                                    display_value(offset_m)
                                ),
                                "check the hydrant's position and [coordinates] unit",
                            );
                            continue;
                        };
                        lead
                    }
                };
                b.hydrants.push(BHydrant {
                    id,
                    junction,
                    required_m3s: required,
                    class: attribute_text(f, m.class.as_deref()),
                    pos,
                    lateral,
                });
            }
            None => b.events.push(event(
                Action::Dropped,
                "hydrants",
                f,
                &id,
                pos,
                &format!(
                    "no junction within {} and no pipe within {}: left out",
                    short(attach),
                    short(split)
                ),
            )),
        }
    }
}

/// The lead of a hydrant whose attributes give none, where the mapping gives
/// `default_lateral_diameter`: from its junction on the main to its position (`offset_m`
/// long), reported as guessed; `Some(None)` without a default or where the hydrant sits on
/// its junction; `None` where the lead would be longer than any pipe.
fn lead_from_position(
    b: &mut Builder,
    f: &InFeature,
    id: &str,
    pos: [f64; 2],
    offset_m: f64,
    mapping: &Mapping,
) -> Option<Option<BLateral>> {
    let m = &mapping.hydrants;
    let Some(diameter) = m.default_lateral_diameter.as_ref().map(|d| *d.get_ref()) else {
        return Some(None);
    };
    if offset_m <= 0.0 {
        return Some(None);
    }
    if !limits::PIPE_LENGTH.holds(offset_m) {
        return None;
    }
    let units = mapping.network.units;
    let length_unit = m.lateral_length_unit.unwrap_or(default_length(units));
    let diameter_unit = m.lateral_diameter_unit.unwrap_or(default_diameter(units));
    b.events.push(event(
        Action::Guessed,
        "hydrants",
        f,
        id,
        pos,
        &format!(
            "no lead attributes: a lead of {} {} (the hydrant's distance to the main) and the default diameter {} {}",
            display_value(offset_m / length_unit.metres()),
            length_unit.symbol(),
            display_value(diameter),
            diameter_unit.symbol()
        ),
    ));
    Some(Some(BLateral {
        length_m: offset_m,
        diameter_m: diameter * diameter_unit.metres(),
        roughness: None,
    }))
}

/// A hydrant's own required flow, m³/s (`Some(None)`: none given); `None` after an error.
fn required_flow(
    f: &InFeature,
    attribute: Option<&str>,
    m3s_per_unit: f64,
    label: &str,
    layer: &Layer,
    diags: &mut Diagnostics,
) -> Option<Option<f64>> {
    match attribute.map(|a| attribute_number(f, a)) {
        None | Some(Ok(None)) => Some(None),
        Some(Ok(Some(q))) if q > 0.0 => Some(Some(q * m3s_per_unit)),
        Some(Ok(Some(q))) => {
            diags.error(
                layer.at(),
                format!("{label}: required flow {q} is not above 0"),
                "leave it empty to use the criteria's flow for the class",
            );
            None
        }
        Some(Err(text)) => {
            diags.error(
                layer.at(),
                format!("{label}: required flow {text} is not a number"),
                "give a plain number (no unit) in the GIS",
            );
            None
        }
    }
}

/// A hydrant's lead from the attributes `[hydrants]` maps (`Some(None)`: none given); `None`
/// after an error. The checks are those hydrants.csv's lateral columns get, so that the import
/// never writes a lead the network's own reading would refuse.
fn lateral_of(
    f: &InFeature,
    mapping: &Mapping,
    label: &str,
    layer: &Layer,
    diags: &mut Diagnostics,
) -> Option<Option<BLateral>> {
    let m = &mapping.hydrants;
    let units = mapping.network.units;
    let mut number = |attribute: Option<&str>, what: &str| -> Result<Option<f64>, ()> {
        match attribute.map(|a| attribute_number(f, a)) {
            None | Some(Ok(None)) => Ok(None),
            Some(Ok(Some(x))) => Ok(Some(x)),
            Some(Err(text)) => {
                diags.error(
                    layer.at(),
                    format!("{label}: lateral {what} {text} is not a number"),
                    "give a plain number (no unit) in the GIS, or leave it empty",
                );
                Err(())
            }
        }
    };
    let length = number(m.lateral_length.as_deref(), "length");
    let diameter = number(m.lateral_diameter.as_deref(), "diameter");
    let roughness = number(m.lateral_roughness.as_deref(), "roughness");
    let (Ok(length), Ok(diameter), Ok(roughness)) = (length, diameter, roughness) else {
        return None;
    };
    let length_unit = m.lateral_length_unit.unwrap_or(default_length(units));
    let diameter_unit = m.lateral_diameter_unit.unwrap_or(default_diameter(units));
    let length_m = length.map(|l| l * length_unit.metres());
    let diameter_m = diameter.map(|d| d * diameter_unit.metres());
    let hazen_williams = mapping.network.headloss == HeadlossWord::HazenWilliams;
    let roughness = roughness.map(|r| {
        if hazen_williams {
            r
        } else {
            r * attribute_units(mapping).roughness_m
        }
    });
    let (length_m, diameter_m) = match (length_m, diameter_m) {
        (None, None) if roughness.is_none() => return Some(None),
        (Some(l), Some(d)) => (l, d),
        (l, _) => {
            let (given, missing) = if l.is_none() {
                ("diameter", "length")
            } else {
                ("length", "diameter")
            };
            diags.error(
                layer.at(),
                format!("{label}: the lead's {missing} is empty while its {given} or roughness is given"),
                "fill both the lateral length and diameter attributes (the roughness is optional), or neither",
            );
            return None;
        }
    };
    let lateral = BLateral {
        length_m,
        diameter_m,
        roughness,
    };
    let problem = lateral_problem(&lateral, length_unit, diameter_unit, hazen_williams);
    if let Some(problem) = problem {
        diags.error(
            layer.at(),
            format!("{label}: {problem}"),
            "correct the lead's attributes in the GIS, or the units in [hydrants] (docs/gis.md)",
        );
        return None;
    }
    Some(Some(lateral))
}

/// "`what` V u is not between A and B u": a length or diameter of `si` metres outside `limit`
/// (from `min_si` up), in a unit of the mapping's, the bounds as the limit shows them.
pub(super) fn not_between(
    what: &str,
    si: f64,
    unit: LengthUnit,
    limit: limits::Limit,
    min_si: f64,
) -> String {
    format!(
        "{what} {} {u} is not between {} and {} {u}",
        display_value(si / unit.metres()),
        limit.show_bound_in(min_si, unit.metres()),
        limit.show_bound_in(limit.max_si, unit.metres()),
        u = unit.symbol()
    )
}

/// Why hydrants.csv would refuse `lateral`, if it would; lengths and diameters in the
/// attributes' own units, as the GIS shows them.
fn lateral_problem(
    lateral: &BLateral,
    length_unit: LengthUnit,
    diameter_unit: LengthUnit,
    hazen_williams: bool,
) -> Option<String> {
    let BLateral {
        length_m,
        diameter_m,
        roughness,
    } = *lateral;
    if !(length_m >= 0.0 && limits::PIPE_LENGTH.holds(length_m)) {
        Some(not_between(
            "the lateral length",
            length_m,
            length_unit,
            limits::PIPE_LENGTH,
            0.0,
        ))
    } else if !limits::DIAMETER.holds(diameter_m) {
        Some(not_between(
            "the lateral diameter",
            diameter_m,
            diameter_unit,
            limits::DIAMETER,
            limits::MIN_DIAMETER_M,
        ))
    } else {
        roughness.and_then(|r| {
            if r > 0.0 {
                implausible_roughness("the lateral roughness", r, diameter_m, hazen_williams)
            } else {
                Some(format!(
                    "the lateral roughness {} is not above 0",
                    display_value(r)
                ))
            }
        })
    }
}

/// `id`, or `id~2`, `id~3`, ... when an earlier hydrant has it (reported): hydrants.csv needs
/// unique ids.
fn unique_hydrant_id(
    b: &mut Builder,
    taken: &mut std::collections::HashSet<String>,
    id: String,
    f: &InFeature,
    pos: [f64; 2],
) -> String {
    if taken.insert(id.clone()) {
        return id;
    }
    let new = (2..)
        .map(|k| format!("{id}~{k}"))
        .find(|c| !taken.contains(c))
        .unwrap_or_default();
    taken.insert(new.clone());
    b.events.push(event(
        Action::Renamed,
        "hydrants",
        f,
        &id,
        pos,
        &format!("id used by an earlier hydrant; this one is {new}"),
    ));
    new
}

/// Every junction's elevation, from the pipes' end attributes or the survey points; a
/// junction left without one is an error.
fn elevations(
    b: &mut Builder,
    mapping: &Mapping,
    mapping_file: &MappingFile,
    points: Option<&Path>,
    diags: &mut Diagnostics,
) {
    // Samples from the pipes' end attributes.
    let ends: Vec<(usize, Option<f64>)> = b
        .pipes
        .iter()
        .flat_map(|p| [(p.from, p.end_elevations[0]), (p.to, p.end_elevations[1])])
        .collect();
    for (node, e) in ends {
        if let Some(e) = e {
            b.nodes[node].elevation_samples.push(e);
        }
    }
    let e = &mapping.elevations;
    let from = e.from.as_ref().map(|f| *f.get_ref());
    // A finding about the elevations is at the `from` that chose their source.
    let from_at = e
        .from
        .as_ref()
        .map_or_else(|| mapping_file.whole(), |f| mapping_file.at(f.span()));
    match from {
        Some(ElevationSource::Attributes) => elevations_from_samples(b),
        Some(ElevationSource::Points) => {
            let Some(path) = points else {
                diags.error(
                    from_at,
                    "[elevations] from = \"points\" but no --elevations file was given",
                    "give --elevations FILE (a CSV with columns x, y, elevation)",
                );
                return;
            };
            if !elevations_from_points(b, mapping, path, diags) {
                return;
            }
        }
        None => {}
    }
    let at = match (from, points) {
        (Some(ElevationSource::Points), Some(p)) => Location::file(p.display().to_string()),
        _ => from_at,
    };
    report_missing_elevations(b, at, diags);
}

/// Each junction's elevation interpolated from the survey points in `path` (nearest point or
/// inverse distance weighting, as `[elevations]` asks); false when the file cannot be read.
fn elevations_from_points(
    b: &mut Builder,
    mapping: &Mapping,
    path: &Path,
    diags: &mut Diagnostics,
) -> bool {
    let e = &mapping.elevations;
    let length_unit = e.unit.unwrap_or(default_length(mapping.network.units));
    let unit = length_unit.metres();
    let largest = (limits::MAX_ABS_ELEVATION_M / unit, length_unit.symbol());
    let Some(pts) = read_points(path, "elevation", largest, diags) else {
        return false;
    };
    let index = elevation::ElevationPoints::new(&pts);
    let k = e.neighbours.unwrap_or(DEFAULT_IDW_NEIGHBOURS);
    for n in b.nodes.iter_mut().filter(|n| n.source.is_none()) {
        let v = match e.method.unwrap_or(ElevationMethod::Nearest) {
            ElevationMethod::Nearest => index.nearest(n.pos[0], n.pos[1]),
            ElevationMethod::Idw => index.idw(n.pos[0], n.pos[1], k),
        };
        n.elevation_m = v.map(|v| v * unit);
    }
    true
}

/// One error for every junction still without an elevation, at `at`, listing the first 20
/// by their coordinates.
fn report_missing_elevations(b: &Builder, at: Location, diags: &mut Diagnostics) {
    let missing: Vec<String> = b
        .nodes
        .iter()
        .filter(|n| n.source.is_none() && n.elevation_m.is_none())
        .map(|n| format!("({}, {})", short(n.pos[0]), short(n.pos[1])))
        .collect();
    if missing.is_empty() {
        return;
    }
    let shown = missing
        .iter()
        .take(20)
        .cloned()
        .collect::<Vec<_>>()
        .join(", ");
    let more = if missing.len() > 20 {
        format!(" and {} more", missing.len() - 20)
    } else {
        String::new()
    };
    diags.error(
        at,
        format!(
            "{} junction(s) have no elevation, at {shown}{more}",
            missing.len()
        ),
        "set [elevations] from = \"attributes\" (with start/end pipe attributes filled at every line end) or \"points\" with an --elevations CSV",
    );
}

fn elevations_from_samples(b: &mut Builder) {
    let mut guessed = Vec::new();
    for n in b.nodes.iter_mut().filter(|n| n.source.is_none()) {
        let s = &n.elevation_samples;
        if s.is_empty() {
            continue;
        }
        let mean = s.iter().sum::<f64>() / s.len() as f64;
        let (lo, hi) = s
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
                (a.min(x), b.max(x))
            });
        if hi > lo {
            guessed.push((n.pos, lo, hi));
        }
        n.elevation_m = Some(mean);
    }
    for (pos, lo, hi) in guessed {
        b.events.push(Event {
            action: Action::Guessed,
            layer: "elevations",
            feature: None,
            id: String::new(),
            at: pos,
            detail: format!(
                "the pipe ends here give elevations from {} m to {} m: their mean is used",
                short(lo),
                short(hi)
            ),
        });
    }
}

/// Reads a CSV of points with columns x, y and `value`, located diagnostics on error.
/// The points (x, y, value) of a CSV point table; a value beyond `largest` (its magnitude in
/// the file's unit, and that unit) is refused at its cell, as the network files would refuse
/// the junction it goes to.
fn read_points(
    path: &Path,
    value: &str,
    largest: (f64, &str),
    diags: &mut Diagnostics,
) -> Option<Vec<(f64, f64, f64)>> {
    let file = path.display().to_string();
    let known = ["x", "y", value];
    let spec = TableSpec {
        known: &known,
        required: &known,
    };
    let table = read_table(path, &file, &spec, diags)?;
    let mut out = Vec::new();
    for row in table.rows() {
        let mut vals = [0.0; 3];
        let mut ok = true;
        for (i, name) in known.iter().enumerate() {
            let cell = table.cell(row, name);
            match cell.text.parse::<f64>() {
                Ok(v) if v.is_finite() => vals[i] = v,
                _ => {
                    ok = false;
                    diags.error(
                        cell.location(&file),
                        format!("`{name}` is `{}`, not a number", cell.text),
                        "give plain numbers: x and y in the data's coordinate units",
                    );
                }
            }
        }
        let (bound, unit) = largest;
        if ok && vals[2].abs() > bound {
            ok = false;
            diags.error(
                table.cell(row, value).location(&file),
                format!(
                    "`{value}` {} {unit} is beyond any water system (firemain accepts between {} and {} {unit})",
                    display_value(vals[2]),
                    display_value(-bound),
                    display_value(bound)
                ),
                "check the value and the unit the mapping gives the file",
            );
        }
        if ok {
            out.push((vals[0], vals[1], vals[2]));
        }
    }
    (!diags.has_errors()).then_some(out)
}

/// Adds each demand point's demand to the nearest junction.
fn demands(b: &mut Builder, mapping: &Mapping, path: &Path, diags: &mut Diagnostics) {
    let flow_unit = mapping
        .demands
        .unit
        .unwrap_or(default_flow(mapping.network.units));
    let unit = flow_unit.m3s();
    let largest = (limits::MAX_FLOW_M3S / unit, flow_unit.symbol());
    let Some(pts) = read_points(path, "demand", largest, diags) else {
        return;
    };
    let far = *mapping.coordinates.attach_tolerance.get_ref();
    for (i, &(x, y, q)) in pts.iter().enumerate() {
        let Some((node, d)) = b.nearest_junction([x, y], f64::INFINITY) else {
            continue;
        };
        b.nodes[node].demand_m3s += q * unit;
        if d > far {
            b.events.push(Event {
                action: Action::Guessed,
                layer: "demands",
                feature: Some(i),
                id: String::new(),
                at: [x, y],
                detail: format!(
                    "demand point {} from its nearest junction (more than the attach tolerance)",
                    short(d)
                ),
            });
        }
    }
}

/// A length per unit to ten decimals, trailing zeros dropped: enough to tell the international
/// foot (0.3048 m) from the US survey foot (0.3048006096 m), which the message is about.
fn ten_decimals(x: f64) -> String {
    let s = format!("{x:.10}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}
