//! Reading a GeoJSON layer: a FeatureCollection, its CRS member, and typed attribute access
//! whose every problem names the file, the feature (index and id) and what to fix.

use std::path::Path;

use geojson::{Feature, GeometryValue, JsonObject, JsonValue};

use crate::model::diagnostic::{Diagnostics, Location};
use crate::model::table::MAX_INPUT_BYTES;

/// One layer as read.
pub struct Layer {
    /// The path as given, for messages.
    pub file: String,
    pub features: Vec<InFeature>,
    /// The CRS member: `None` when absent, `Some(None)` for `"crs": null` (the 2008 form's "no
    /// CRS can be assumed"), `Some(Some(name))` for a named CRS.
    pub crs: Option<Option<String>>,
}

/// One feature: its index in the file (0-based), its properties and its geometry.
pub struct InFeature {
    pub index: usize,
    /// The feature's `id` member, as text.
    pub feature_id: Option<String>,
    pub properties: JsonObject,
    pub geometry: Option<GeometryValue>,
}

impl Layer {
    /// The location of a feature, for a diagnostic.
    pub fn at(&self) -> Location {
        Location::file(self.file.clone())
    }
}

/// How a feature is named in messages: `feature 3 (id "P-7")`, the id taken from `id_attr` or
/// the feature's `id` member.
pub fn feature_label(f: &InFeature, id_attr: Option<&str>) -> String {
    match attribute_text(f, id_attr).or_else(|| f.feature_id.clone()) {
        Some(id) => format!("feature {} (id `{id}`)", f.index),
        None => format!("feature {}", f.index),
    }
}

/// An attribute as text: strings trimmed, numbers as written; `None` when absent, null or empty.
pub fn attribute_text(f: &InFeature, name: Option<&str>) -> Option<String> {
    let v = f.properties.get(name?)?;
    let text = match v {
        JsonValue::String(s) => s.trim().to_string(),
        JsonValue::Number(n) => n.to_string(),
        JsonValue::Bool(b) => b.to_string(),
        _ => return None,
    };
    (!text.is_empty()).then_some(text)
}

/// An attribute as a finite number (a JSON number, or a string holding one). `Ok(None)` when
/// absent, null or empty; `Err(text)` when it is something else.
pub fn attribute_number(f: &InFeature, name: &str) -> Result<Option<f64>, String> {
    match f.properties.get(name) {
        None | Some(JsonValue::Null) => Ok(None),
        Some(JsonValue::Number(n)) => match n.as_f64() {
            Some(x) if x.is_finite() => Ok(Some(x)),
            _ => Err(n.to_string()),
        },
        Some(JsonValue::String(s)) if s.trim().is_empty() => Ok(None),
        Some(JsonValue::String(s)) => match s.trim().parse::<f64>() {
            Ok(x) if x.is_finite() => Ok(Some(x)),
            _ => Err(format!("\"{s}\"")),
        },
        Some(other) => Err(other.to_string()),
    }
}

/// Reads `path` as a GeoJSON FeatureCollection. A JSON syntax error is reported at its line and
/// column; a feature that is not valid GeoJSON at its index.
pub fn read_layer(path: &Path, diags: &mut Diagnostics) -> Option<Layer> {
    let file = path.display().to_string();
    let text = match read_text(path) {
        Ok(t) => t,
        Err(message) => {
            diags.error(
                Location::file(&file),
                message,
                "check the path and that the file is a GeoJSON file",
            );
            return None;
        }
    };
    parse_layer(&text, &file, diags)
}

fn read_text(path: &Path) -> Result<String, String> {
    let meta = std::fs::metadata(path).map_err(|e| format!("cannot read the file: {e}"))?;
    if !meta.is_file() {
        return Err("is not a regular file".into());
    }
    if meta.len() > MAX_INPUT_BYTES {
        return Err(format!(
            "the file is {} bytes, more than the {} bytes firemain reads",
            meta.len(),
            MAX_INPUT_BYTES
        ));
    }
    let bytes = std::fs::read(path).map_err(|e| format!("cannot read the file: {e}"))?;
    let bytes = bytes
        .strip_prefix(b"\xEF\xBB\xBF")
        .map(<[u8]>::to_vec)
        .unwrap_or(bytes);
    String::from_utf8(bytes).map_err(|_| "the text is not valid UTF-8".to_string())
}

/// Parses GeoJSON text (shown as `file`); separate from [`read_layer`] so tests can feed text.
pub fn parse_layer(text: &str, file: &str, diags: &mut Diagnostics) -> Option<Layer> {
    let value: JsonValue = match serde_json::from_str(text) {
        Ok(v) => v,
        Err(e) => {
            diags.error(
                Location::cell(file, e.line() as u64, e.column() as u64),
                format!("not valid JSON: {e}"),
                "export the layer again as GeoJSON, or correct the text at this line and column",
            );
            return None;
        }
    };
    let JsonValue::Object(mut object) = value else {
        diags.error(
            Location::file(file),
            "the file is not a GeoJSON object",
            "export the layer as a GeoJSON FeatureCollection",
        );
        return None;
    };
    if object.get("type").and_then(JsonValue::as_str) != Some("FeatureCollection") {
        diags.error(
            Location::file(file),
            "the file is not a GeoJSON FeatureCollection (its `type` is not \"FeatureCollection\")",
            "export the layer as a FeatureCollection of features",
        );
        return None;
    }
    let crs = object.get("crs").map(crs_member);
    if crs == Some(None) && object.get("crs").is_some_and(|c| !c.is_null()) {
        diags.error(
            Location::file(file),
            "the `crs` member does not name a CRS (only the form {\"type\": \"name\", \"properties\": {\"name\": ...}} is read)",
            "export the layer with its CRS named (e.g. urn:ogc:def:crs:EPSG::2276), or state it in the mapping's [coordinates] crs and remove the member",
        );
        return None;
    }
    let Some(JsonValue::Array(raw)) = object.remove("features") else {
        diags.error(
            Location::file(file),
            "the FeatureCollection has no `features` array",
            "export the layer as a FeatureCollection of features",
        );
        return None;
    };
    let mut features = Vec::with_capacity(raw.len());
    for (index, v) in raw.into_iter().enumerate() {
        let id_hint = v
            .get("id")
            .map(|id| id.to_string().trim_matches('"').to_string());
        match serde_json::from_value::<Feature>(v) {
            Ok(f) => features.push(InFeature {
                index,
                feature_id: f.id.map(|id| match id {
                    geojson::feature::Id::String(s) => s,
                    geojson::feature::Id::Number(n) => n.to_string(),
                }),
                properties: f.properties.unwrap_or_default(),
                geometry: f.geometry.map(|g| g.value),
            }),
            Err(e) => {
                let who = match id_hint {
                    Some(id) => format!("feature {index} (id `{id}`)"),
                    None => format!("feature {index}"),
                };
                diags.error(
                    Location::file(file),
                    format!("{who} is not a valid GeoJSON feature: {e}"),
                    "check the feature's geometry in the GIS (every position needs two numbers)",
                );
            }
        }
    }
    Some(Layer {
        file: file.to_string(),
        features,
        crs,
    })
}

/// The name in a 2008-style `crs` member (`{"type": "name", "properties": {"name": ...}}`);
/// `None` for `null` or a form without a name.
fn crs_member(v: &JsonValue) -> Option<String> {
    v.get("properties")?
        .get("name")?
        .as_str()
        .map(|s| s.trim().to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn syntax_error_has_line_and_column() {
        let mut d = Diagnostics::new();
        let text = "{\n  \"type\": \"FeatureCollection\",\n  \"features\": [ , ]\n}";
        assert!(parse_layer(text, "pipes.geojson", &mut d).is_none());
        let first = d.iter().next().expect("an error");
        assert_eq!(first.location.line, Some(3));
        assert!(first.location.column.is_some());
    }

    #[test]
    fn bad_feature_is_named_by_index_and_id() {
        let mut d = Diagnostics::new();
        let text = r#"{"type":"FeatureCollection","features":[
          {"type":"Feature","id":"A","properties":{},"geometry":{"type":"LineString","coordinates":[[0,0],[1,1]]}},
          {"type":"Feature","id":"B","properties":{},"geometry":{"type":"LineString","coordinates":[["x",0]]}}]}"#;
        let layer = parse_layer(text, "pipes.geojson", &mut d).expect("a layer");
        assert_eq!(layer.features.len(), 1);
        let msg = d.iter().next().expect("an error").message.clone();
        assert!(msg.contains("feature 1 (id `B`)"), "{msg}");
    }

    #[test]
    fn crs_member_forms() {
        let mut d = Diagnostics::new();
        let named = r#"{"type":"FeatureCollection","crs":{"type":"name","properties":{"name":"urn:ogc:def:crs:EPSG::2276"}},"features":[]}"#;
        let l = parse_layer(named, "f", &mut d).expect("layer");
        assert_eq!(l.crs, Some(Some("urn:ogc:def:crs:EPSG::2276".into())));
        let null = r#"{"type":"FeatureCollection","crs":null,"features":[]}"#;
        assert_eq!(
            parse_layer(null, "f", &mut d).expect("layer").crs,
            Some(None)
        );
        let none = r#"{"type":"FeatureCollection","features":[]}"#;
        assert_eq!(parse_layer(none, "f", &mut d).expect("layer").crs, None);
    }
}
