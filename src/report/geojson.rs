//! GeoJSON twins of the result tables (`--geojson`): each CSV file of a run with a spatial key
//! (a hydrant, a junction or a pipe) is also written as a FeatureCollection whose features carry
//! every column of the CSV row as properties. Pure renderers: data in, bytes out.
//!
//! Coordinates (docs/gis.md, "GeoJSON output"): RFC 7946 §4 requires WGS 84 longitude and
//! latitude. When model.toml names a projected CRS that `proj4rs` can transform, the positions
//! are transformed to WGS 84 and the file has no `crs` member, as RFC 7946 asks. Otherwise the
//! network's own x/y are written with the 2008 GeoJSON form's `crs` member naming the CRS (or
//! `"crs": null`, "no CRS can be assumed", for a network without one): RFC 7946 §4 allows
//! readers to ignore that member, and GIS programs read it.

use crate::model::gis::crs::{self, ToWgs84};
use crate::model::Network;

use super::{OutputFile, OutputSet, ReportError};

/// Decimals of a WGS 84 longitude or latitude: 7 decimals are about 1 cm on the ground, finer
/// than any pipe position (RFC 7946 §11.2 discusses precision).
const DEGREE_DECIMALS: usize = 7;

/// Where the positions of a network go in a GeoJSON file.
pub enum Placement {
    /// The network names no CRS: its x/y, and `"crs": null`.
    Local,
    /// A CRS that cannot be transformed here: its x/y, and the CRS named in a `crs` member.
    Named(String),
    /// Transformed to WGS 84 longitude/latitude (RFC 7946).
    Wgs84(Box<ToWgs84>),
}

impl Placement {
    pub fn of(net: &Network) -> Placement {
        match &net.crs {
            None => Placement::Local,
            Some(name) => match ToWgs84::new(name) {
                Some(t) => Placement::Wgs84(Box::new(t)),
                None => Placement::Named(name.clone()),
            },
        }
    }

    /// The JSON text of a position, or `None` when it cannot be placed.
    fn position(&self, p: [f64; 2]) -> Option<String> {
        match self {
            Placement::Wgs84(t) => {
                let (lon, lat) = t.apply(p[0], p[1])?;
                Some(format!("[{lon:.d$},{lat:.d$}]", d = DEGREE_DECIMALS))
            }
            _ => Some(format!("[{},{}]", json_number(p[0])?, json_number(p[1])?)),
        }
    }

    /// The `crs` member and its comma, or nothing for WGS 84.
    fn crs_member(&self) -> String {
        match self {
            Placement::Local => "\"crs\":null,\n".into(),
            Placement::Named(name) => format!(
                "\"crs\":{{\"type\":\"name\",\"properties\":{{\"name\":{}}}}},\n",
                json_string(&crs::urn(name))
            ),
            Placement::Wgs84(_) => String::new(),
        }
    }
}

/// What the rows of a CSV file are.
#[derive(Clone, Copy)]
enum Key {
    Hydrant,
    Node,
    Link,
}

/// The CSV files that have a GeoJSON twin: (file name, key column, what the key names).
const TWINS: &[(&str, &str, Key)] = &[
    ("fireflow.csv", "hydrant", Key::Hydrant),
    ("service.csv", "junction", Key::Node),
    ("weak_mains.csv", "pipe", Key::Link),
    ("node_results.csv", "id", Key::Node),
    ("pipe_results.csv", "id", Key::Link),
    ("pump_results.csv", "id", Key::Link),
    ("valve_results.csv", "id", Key::Link),
    ("upsize_plan.csv", "pipe", Key::Link),
    ("upsize_hydrants.csv", "hydrant", Key::Hydrant),
    ("weak_mains_after.csv", "pipe", Key::Link),
];

/// Columns that hold names, never numbers, even when a name looks like one (`101`).
const TEXT_COLUMNS: &[&str] = &[
    "id",
    "hydrant",
    "junction",
    "pipe",
    "from",
    "to",
    "zone",
    "kind",
    "min_pressure_junction",
    "critical_junction",
    "material_or_class",
];

/// The set with a `.geojson` twin added after each CSV file of `TWINS` it holds.
pub fn with_twins(mut set: OutputSet, net: &Network) -> Result<OutputSet, ReportError> {
    let placement = Placement::of(net);
    let mut files = Vec::with_capacity(set.files.len() * 2);
    for f in std::mem::take(&mut set.files) {
        let twin = TWINS
            .iter()
            .find(|(name, _, _)| *name == f.name)
            .map(|&(name, key, kind)| {
                twin(&f.bytes, key, kind, net, &placement).map(|bytes| OutputFile {
                    name: name.replace(".csv", ".geojson"),
                    bytes,
                })
            })
            .transpose()?;
        files.push(f);
        files.extend(twin);
    }
    set.files = files;
    Ok(set)
}

/// A FeatureCollection of the rows of `csv`, placed by the element its `key` column names.
fn twin(
    csv: &[u8],
    key: &str,
    kind: Key,
    net: &Network,
    placement: &Placement,
) -> Result<Vec<u8>, ReportError> {
    let render = |message: String| ReportError::Render {
        what: "GeoJSON".into(),
        message,
    };
    let mut reader = csv::ReaderBuilder::new().from_reader(csv);
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| render(e.to_string()))?
        .iter()
        .map(str::to_string)
        .collect();
    let rows: Vec<Vec<String>> = reader
        .records()
        .map(|r| r.map(|r| r.iter().map(str::to_string).collect()))
        .collect::<Result<_, _>>()
        .map_err(|e| render(e.to_string()))?;
    let key_col = header
        .iter()
        .position(|h| h == key)
        .ok_or_else(|| render(format!("no `{key}` column")))?;
    let numeric: Vec<bool> = (0..header.len())
        .map(|c| {
            !TEXT_COLUMNS.contains(&header[c].as_str())
                && rows
                    .iter()
                    .all(|r| r[c].is_empty() || r[c].parse::<f64>().is_ok_and(f64::is_finite))
        })
        .collect();
    let mut out = String::from("{\"type\":\"FeatureCollection\",\n");
    out += &placement.crs_member();
    out += "\"features\":[\n";
    for (i, row) in rows.iter().enumerate() {
        let geometry = geometry(&row[key_col], kind, net, placement)
            .ok_or_else(|| render(format!("`{}` cannot be placed", row[key_col])))?;
        let props: Vec<String> = header
            .iter()
            .zip(row)
            .zip(&numeric)
            .map(|((h, v), &num)| {
                let value = if v.is_empty() {
                    "null".to_string()
                } else if num {
                    v.parse::<f64>()
                        .ok()
                        .and_then(json_number)
                        .unwrap_or_else(|| "null".into())
                } else {
                    json_string(v)
                };
                format!("{}:{value}", json_string(h))
            })
            .collect();
        out += &format!(
            "{{\"type\":\"Feature\",\"geometry\":{geometry},\"properties\":{{{}}}}}{}\n",
            props.join(","),
            if i + 1 < rows.len() { "," } else { "" }
        );
    }
    out += "]}\n";
    Ok(out.into_bytes())
}

/// The geometry of the element `id`: a Point for a hydrant or a node, a LineString from one end
/// node to the other for a link (firemain keeps no vertices between), `null` where the network
/// has no position; `None` when a position cannot be transformed.
fn geometry(id: &str, kind: Key, net: &Network, placement: &Placement) -> Option<String> {
    let point = |p: Option<[f64; 2]>| -> Option<String> {
        match p {
            None => Some("null".into()),
            Some(p) => Some(format!(
                "{{\"type\":\"Point\",\"coordinates\":{}}}",
                placement.position(p)?
            )),
        }
    };
    match kind {
        Key::Hydrant => {
            let h = net.hydrant_by_id(id).map(|h| &net.hydrants[h]);
            point(h.and_then(|h| h.position.or(net.nodes[h.junction].position)))
        }
        Key::Node => point(net.node_by_id(id).and_then(|n| net.nodes[n].position)),
        Key::Link => {
            let link = net.link_by_id(id).map(|l| &net.links[l]);
            match link.and_then(|l| Some((net.nodes[l.from].position?, net.nodes[l.to].position?)))
            {
                None => Some("null".into()),
                Some((a, b)) => Some(format!(
                    "{{\"type\":\"LineString\",\"coordinates\":[{},{}]}}",
                    placement.position(a)?,
                    placement.position(b)?
                )),
            }
        }
    }
}

fn json_string(s: &str) -> String {
    serde_json::to_string(s).unwrap_or_else(|_| "\"\"".into())
}

/// A finite number as JSON; `None` for NaN or infinity (never written).
fn json_number(x: f64) -> Option<String> {
    x.is_finite().then(|| {
        let s = format!("{x}");
        if s == "-0" {
            "0".into()
        } else {
            s
        }
    })
}
