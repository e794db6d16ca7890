//! The network folder's files of an import, in the network's units (docs/network-format.md).

use std::collections::HashSet;

use super::build::{BLateral, Builder};
use super::mapping::{HeadlossWord, Mapping};
use crate::model::diagnostic::{Diagnostics, Location};
use crate::model::{
    PipeStatus, HYDRANTS_FILE, JUNCTIONS_FILE, MODEL_FILE, PIPES_FILE, SOURCES_FILE,
};
use crate::units::{Quantity, UnitSystem};

/// A number for an input file: the shortest text that reads back to the value rounded to nine
/// decimals (8 in converted to metres and back is written `8`).
fn plain(value: f64) -> String {
    if !value.is_finite() {
        return String::new();
    }
    let rounded = (value * 1e9).round() / 1e9;
    format!("{}", if rounded == 0.0 { 0.0 } else { rounded })
}

fn csv(comment: &str, header: &[&str], rows: &[Vec<String>]) -> Result<Vec<u8>, String> {
    let mut out = Vec::new();
    for line in comment.lines() {
        out.extend_from_slice(format!("# {line}\n").as_bytes());
    }
    let mut w = csv::Writer::from_writer(out);
    w.write_record(header).map_err(|e| e.to_string())?;
    for r in rows {
        w.write_record(r).map_err(|e| e.to_string())?;
    }
    w.into_inner().map_err(|e| e.to_string())
}

/// A TOML string literal.
fn toml_string(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

/// model.toml, junctions.csv, sources.csv, pipes.csv and (with hydrants) hydrants.csv; and the
/// number of junctions. Junction ids are `prefix` + a number in the order the junctions were
/// made (line ends in file order, then the splits). A node id used twice is reported at
/// `sources_at` (the sources layer, whose ids are the ones that can collide).
pub fn network_files(
    b: &Builder,
    pipe_ids: &[String],
    mapping: &Mapping,
    crs: Option<&str>,
    sources_at: Location,
    diags: &mut Diagnostics,
) -> (Vec<(String, Vec<u8>)>, usize) {
    let u = mapping.network.units;
    let prefix = mapping.network.junction_prefix.as_deref().unwrap_or("J-");
    let n_junctions = b.nodes.iter().filter(|n| n.source.is_none()).count();
    let width = n_junctions.to_string().len().max(4);
    let mut ids = Vec::with_capacity(b.nodes.len());
    let mut k = 0;
    for n in &b.nodes {
        match &n.source {
            Some(s) => ids.push(s.id.clone()),
            None => {
                k += 1;
                ids.push(format!("{prefix}{k:0width$}"));
            }
        }
    }
    let mut seen = HashSet::new();
    for id in &ids {
        if !seen.insert(id.as_str()) {
            diags.error(
                sources_at,
                format!(
                    "node id {} is used twice (a source's id, or two sources with one id)",
                    crate::model::diagnostic::quoted(id)
                ),
                "give every source its own id, or choose another [network] junction_prefix",
            );
            return (Vec::new(), 0);
        }
    }
    let mut files = Vec::new();
    let mut push = |name: &str, bytes: Result<Vec<u8>, String>| match bytes {
        Ok(bytes) => files.push((name.to_string(), bytes)),
        Err(e) => diags.error(Location::file(name), e, "report this as a bug"),
    };
    push(MODEL_FILE, Ok(model_toml(mapping, crs).into_bytes()));
    push(JUNCTIONS_FILE, junctions_csv(b, &ids, u));
    push(SOURCES_FILE, sources_csv(b, &ids, u));
    push(PIPES_FILE, pipes_csv(b, &ids, pipe_ids, mapping));
    if !b.hydrants.is_empty() {
        let hw = mapping.network.headloss == HeadlossWord::HazenWilliams;
        push(HYDRANTS_FILE, hydrants_csv(b, &ids, u, hw));
    }
    (files, n_junctions)
}

fn model_toml(mapping: &Mapping, crs: Option<&str>) -> String {
    let n = &mapping.network;
    let mut s = String::from("# written by firemain import geojson\n");
    s += &format!("name = {}\n", toml_string(&n.name));
    s += &format!(
        "units = \"{}\"\n",
        match n.units {
            UnitSystem::Us => "us",
            UnitSystem::Si => "si",
        }
    );
    s += &format!("headloss = \"{}\"\n", n.headloss.name());
    if let Some(crs) = crs {
        s += &format!("crs = {}\n", toml_string(crs));
    }
    s += "\n[demand]\n";
    s += &format!("max_day_factor = {}\n", plain(*n.max_day_factor.get_ref()));
    s += &format!(
        "peak_hour_factor = {}\n",
        plain(*n.peak_hour_factor.get_ref())
    );
    if let Some(m) = &n.min_hour_factor {
        s += &format!("min_hour_factor = {}\n", plain(*m.get_ref()));
    }
    s
}

fn junctions_csv(b: &Builder, ids: &[String], u: UnitSystem) -> Result<Vec<u8>, String> {
    let rows: Vec<Vec<String>> = b
        .nodes
        .iter()
        .zip(ids)
        .filter(|(n, _)| n.source.is_none())
        .map(|(n, id)| {
            vec![
                id.clone(),
                plain(u.from_si(Quantity::Length, n.elevation_m.unwrap_or(0.0))),
                plain(u.from_si(Quantity::Flow, n.demand_m3s)),
                n.zone.clone().unwrap_or_default(),
                plain(n.pos[0]),
                plain(n.pos[1]),
            ]
        })
        .collect();
    csv(
        &format!(
            "written by firemain import geojson\nelevation {}, demand {} (average day); x, y in the data's coordinates",
            u.symbol(Quantity::Length),
            u.symbol(Quantity::Flow)
        ),
        &["id", "elevation", "demand", "zone", "x", "y"],
        &rows,
    )
}

fn sources_csv(b: &Builder, ids: &[String], u: UnitSystem) -> Result<Vec<u8>, String> {
    let rows: Vec<Vec<String>> = b
        .nodes
        .iter()
        .zip(ids)
        .filter_map(|(n, id)| {
            n.source.as_ref().map(|s| {
                vec![
                    id.clone(),
                    s.kind.clone(),
                    plain(u.from_si(Quantity::Length, s.grade_m)),
                    plain(n.pos[0]),
                    plain(n.pos[1]),
                ]
            })
        })
        .collect();
    csv(
        &format!(
            "written by firemain import geojson\ngrade {}",
            u.symbol(Quantity::Length)
        ),
        &["id", "kind", "grade", "x", "y"],
        &rows,
    )
}

fn pipes_csv(
    b: &Builder,
    ids: &[String],
    pipe_ids: &[String],
    mapping: &Mapping,
) -> Result<Vec<u8>, String> {
    let u = mapping.network.units;
    let hw = mapping.network.headloss == HeadlossWord::HazenWilliams;
    let rows: Vec<Vec<String>> = b
        .pipes
        .iter()
        .zip(pipe_ids)
        .map(|(p, id)| {
            vec![
                id.clone(),
                ids[p.from].clone(),
                ids[p.to].clone(),
                plain(u.from_si(Quantity::Length, p.length_m)),
                plain(u.from_si(Quantity::Diameter, p.diameter_m)),
                plain(if hw {
                    p.roughness
                } else {
                    u.from_si(Quantity::Diameter, p.roughness)
                }),
                plain(p.minor_loss),
                match p.status {
                    PipeStatus::Open => "open",
                    PipeStatus::Closed => "closed",
                    PipeStatus::Check => "check",
                }
                .to_string(),
                p.material.clone().unwrap_or_default(),
            ]
        })
        .collect();
    csv(
        &format!(
            "written by firemain import geojson\nlength {}, diameter {}, roughness = {}",
            u.symbol(Quantity::Length),
            u.symbol(Quantity::Diameter),
            roughness_words(u, hw)
        ),
        crate::model::load::PIPE_COLUMNS,
        &rows,
    )
}

fn hydrants_csv(b: &Builder, ids: &[String], u: UnitSystem, hw: bool) -> Result<Vec<u8>, String> {
    // The lead's columns only when some hydrant has one: hydrants.csv reads them as optional.
    let leads = b.hydrants.iter().any(|h| h.lateral.is_some());
    let rows: Vec<Vec<String>> = b
        .hydrants
        .iter()
        .map(|h| {
            let mut row = vec![
                h.id.clone(),
                ids[h.junction].clone(),
                h.required_m3s
                    .map(|q| plain(u.from_si(Quantity::Flow, q)))
                    .unwrap_or_default(),
                h.class.clone().unwrap_or_default(),
                plain(h.pos[0]),
                plain(h.pos[1]),
            ];
            if leads {
                row.extend(lateral_cells(h.lateral.as_ref(), u, hw));
            }
            row
        })
        .collect();
    let mut columns = vec!["id", "junction", "required_flow", "class", "x", "y"];
    let mut units = format!(
        "required_flow {} (empty: the criteria's value for the class)",
        u.symbol(Quantity::Flow)
    );
    if leads {
        columns.extend(["lateral_length", "lateral_diameter", "lateral_roughness"]);
        units += &format!(
            "; lateral_length {}, lateral_diameter {}, lateral_roughness = {} (empty: the default)",
            u.symbol(Quantity::Length),
            u.symbol(Quantity::Diameter),
            roughness_words(u, hw)
        );
    }
    csv(
        &format!("written by firemain import geojson\n{units}"),
        &columns,
        &rows,
    )
}

/// What a roughness column holds, for a file's header comment.
fn roughness_words(u: UnitSystem, hw: bool) -> String {
    if hw {
        "Hazen-Williams C".to_string()
    } else {
        format!("absolute roughness in {}", u.symbol(Quantity::Diameter))
    }
}

/// A hydrant's lateral cells in the network's units; empty without a lead.
fn lateral_cells(lateral: Option<&BLateral>, u: UnitSystem, hw: bool) -> [String; 3] {
    let Some(l) = lateral else {
        return Default::default();
    };
    [
        plain(u.from_si(Quantity::Length, l.length_m)),
        plain(u.from_si(Quantity::Diameter, l.diameter_m)),
        l.roughness
            .map(|r| {
                plain(if hw {
                    r
                } else {
                    u.from_si(Quantity::Diameter, r)
                })
            })
            .unwrap_or_default(),
    ]
}
