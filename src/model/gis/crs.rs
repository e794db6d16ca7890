//! Coordinate reference systems: reading a CRS name, telling geographic from projected, and the
//! transformation of projected x/y to WGS 84 longitude/latitude for GeoJSON output.
//!
//! Definitions and transformations come from `proj4rs` (a pure-Rust port of PROJ.4) with the
//! EPSG definitions of `crs-definitions`; firemain holds no projection formula of its own.

use proj4rs::Proj;

/// A CRS named by an authority code, kept in model.toml in the short form `EPSG:2276`.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CrsName(pub String);

/// What firemain knows about a CRS.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum CrsKind {
    /// Longitude/latitude in degrees: lengths cannot be measured from the coordinates.
    Geographic,
    /// Projected, with metres per coordinate unit.
    Projected { metres_per_unit: f64 },
    /// A name that `proj4rs` does not know (a local or a private CRS).
    Unknown,
}

/// The short form (`EPSG:2276`, `OGC:CRS84`) of a CRS name as GeoJSON files and GIS write it:
/// `EPSG:2276`, `urn:ogc:def:crs:EPSG::2276`, `urn:ogc:def:crs:EPSG:6.3:2276`,
/// `urn:ogc:def:crs:OGC:1.3:CRS84`. Any other text is kept as it is (trimmed).
pub fn normalize(name: &str) -> String {
    let name = name.trim();
    let lower = name.to_ascii_lowercase();
    if let Some(rest) = lower.strip_prefix("urn:ogc:def:crs:") {
        // authority:version:code, the version possibly empty.
        let parts: Vec<&str> = rest.split(':').collect();
        if parts.len() >= 2 {
            let authority = parts[0].to_ascii_uppercase();
            let code = parts[parts.len() - 1].to_ascii_uppercase();
            return format!("{authority}:{code}");
        }
    }
    if let Some((authority, code)) = name.split_once(':') {
        if authority.eq_ignore_ascii_case("epsg") || authority.eq_ignore_ascii_case("ogc") {
            return format!(
                "{}:{}",
                authority.to_ascii_uppercase(),
                code.trim().to_ascii_uppercase()
            );
        }
    }
    name.to_string()
}

/// The EPSG code of a short name `EPSG:NNNN`.
pub fn epsg_code(short: &str) -> Option<u16> {
    short.strip_prefix("EPSG:")?.parse().ok()
}

/// The `proj4rs` definition of a short name, if it knows it.
fn proj_of(short: &str) -> Option<Proj> {
    if short == "OGC:CRS84" {
        return Proj::from_proj_string("+proj=longlat +datum=WGS84 +no_defs").ok();
    }
    Proj::from_epsg_code(epsg_code(short)?).ok()
}

/// What kind of CRS `short` (see [`normalize`]) names.
pub fn kind(short: &str) -> CrsKind {
    match proj_of(short) {
        Some(p) if p.is_latlong() => CrsKind::Geographic,
        Some(p) if p.is_geocent() => CrsKind::Unknown,
        Some(p) => CrsKind::Projected {
            metres_per_unit: p.to_meter(),
        },
        None => CrsKind::Unknown,
    }
}

/// The GeoJSON 2008 `crs` member's name for a short name (`urn:ogc:def:crs:EPSG::2276`).
pub fn urn(short: &str) -> String {
    match short.split_once(':') {
        Some(("EPSG", code)) => format!("urn:ogc:def:crs:EPSG::{code}"),
        Some(("OGC", code)) => {
            format!("urn:ogc:def:crs:OGC:1.3:{code}")
        }
        _ => short.to_string(),
    }
}

/// Projected x/y in a CRS → WGS 84 longitude/latitude in degrees.
pub struct ToWgs84 {
    source: Proj,
    target: Proj,
}

impl ToWgs84 {
    /// The transformation from the projected CRS `short`; `None` when `proj4rs` does not know
    /// the CRS or it is not a projected one.
    pub fn new(short: &str) -> Option<Self> {
        let source = proj_of(short)?;
        if source.is_latlong() || source.is_geocent() {
            return None;
        }
        let target = Proj::from_proj_string("+proj=longlat +datum=WGS84 +no_defs").ok()?;
        Some(ToWgs84 { source, target })
    }

    /// (longitude, latitude) in degrees of the point (x, y) in the CRS's own units; `None` when
    /// the transformation fails or gives a non-finite result.
    pub fn apply(&self, x: f64, y: f64) -> Option<(f64, f64)> {
        // proj4rs takes projected coordinates in the CRS's own units (it applies the unit's
        // to-metre factor itself) and gives geographic ones in radians.
        let mut p = (x, y, 0.0);
        proj4rs::transform::transform(&self.source, &self.target, &mut p).ok()?;
        let (lon, lat) = (p.0.to_degrees(), p.1.to_degrees());
        (lon.is_finite() && lat.is_finite()).then_some((lon, lat))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_normalized() {
        assert_eq!(normalize("urn:ogc:def:crs:EPSG::2276"), "EPSG:2276");
        assert_eq!(normalize("urn:ogc:def:crs:EPSG:6.3:2276"), "EPSG:2276");
        assert_eq!(normalize("urn:ogc:def:crs:OGC:1.3:CRS84"), "OGC:CRS84");
        assert_eq!(normalize("epsg:32633"), "EPSG:32633");
        assert_eq!(urn("EPSG:2276"), "urn:ogc:def:crs:EPSG::2276");
    }

    #[test]
    fn geographic_and_projected_are_told_apart() {
        assert_eq!(kind("EPSG:4326"), CrsKind::Geographic);
        assert_eq!(kind("OGC:CRS84"), CrsKind::Geographic);
        assert_eq!(kind("LOCAL:town"), CrsKind::Unknown);
        // EPSG:2276 is in US survey feet: 1200/3937 m (the US survey foot's definition,
        // NIST Handbook 44, Appendix C, 1959 note).
        match kind("EPSG:2276") {
            CrsKind::Projected { metres_per_unit } => {
                assert!((metres_per_unit - 1200.0 / 3937.0).abs() < 1e-9)
            }
            other => panic!("EPSG:2276 read as {other:?}"),
        }
    }

    #[test]
    fn false_origin_maps_to_the_natural_origin() {
        // UTM zone 33N (EPSG:32633): the point at the false easting 500000 m on the equator is
        // on the zone's central meridian 15°E (UTM definition: central meridian 6° × zone − 183°,
        // false easting 500 km, false northing 0 in the north).
        let t = ToWgs84::new("EPSG:32633").expect("UTM 33N is known");
        let (lon, lat) = t.apply(500_000.0, 0.0).expect("transforms");
        assert!((lon - 15.0).abs() < 1e-9 && lat.abs() < 1e-9, "{lon} {lat}");
        // EPSG:2276 (Texas North Central, US survey feet): the false origin (x0 = 600000 m,
        // y0 = 2000000 m, as stated in the CRS's definition) is the natural origin 98°30'W,
        // 31°40'N.
        let t = ToWgs84::new("EPSG:2276").expect("EPSG:2276 is known");
        let ft = 1200.0 / 3937.0;
        let (lon, lat) = t
            .apply(600_000.0 / ft, 2_000_000.0 / ft)
            .expect("transforms");
        assert!((lon + 98.5).abs() < 1e-7, "{lon}");
        assert!((lat - (31.0 + 40.0 / 60.0)).abs() < 1e-7, "{lat}");
        assert!(ToWgs84::new("EPSG:4326").is_none());
    }
}
