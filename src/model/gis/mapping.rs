//! The mapping file of `firemain import geojson`: which attribute of the GIS layers gives which
//! column of the network's files, in which unit, and the tolerances of the topology. The format
//! is firemain's own; docs/gis.md describes it with a complete example.

use std::collections::BTreeMap;
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use crate::model::diagnostic::{Diagnostics, Location};
use crate::model::toml_input::{read_toml, span_location};
use crate::units::{UnitSystem, L_PER_US_GAL, M_PER_FT};

/// The whole mapping file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Mapping {
    pub network: NetworkSection,
    pub coordinates: CoordinatesSection,
    pub pipes: PipesSection,
    #[serde(default)]
    pub hydrants: HydrantsSection,
    #[serde(default)]
    pub sources: SourcesSection,
    #[serde(default)]
    pub elevations: ElevationsSection,
    #[serde(default)]
    pub demands: DemandsSection,
}

/// What goes into model.toml.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NetworkSection {
    pub name: String,
    pub units: UnitSystem,
    pub headloss: HeadlossWord,
    pub max_day_factor: Spanned<f64>,
    pub peak_hour_factor: Spanned<f64>,
    pub min_hour_factor: Option<Spanned<f64>>,
    /// Prefix of the junction ids the import makes (`J-` by default).
    pub junction_prefix: Option<String>,
}

#[derive(Clone, Copy, Debug, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum HeadlossWord {
    HazenWilliams,
    DarcyWeisbach,
}

impl HeadlossWord {
    pub fn name(self) -> &'static str {
        match self {
            HeadlossWord::HazenWilliams => "hazen-williams",
            HeadlossWord::DarcyWeisbach => "darcy-weisbach",
        }
    }
}

/// The coordinates of the layers and the tolerances, in the data's own units.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CoordinatesSection {
    /// The CRS when the files name none: `EPSG:NNNN`, or `local` for coordinates in no named CRS.
    pub crs: Option<Spanned<String>>,
    /// The unit of the coordinates; needed when the CRS is `local` or unknown to firemain.
    pub unit: Option<Spanned<LengthUnit>>,
    /// Line ends at most this far apart become one junction.
    pub snap_tolerance: Spanned<f64>,
    /// A hydrant or source point at most this far from a junction is attached to it.
    pub attach_tolerance: Spanned<f64>,
    /// Otherwise a point at most this far from a pipe splits the pipe there (default: the
    /// attach tolerance).
    pub split_tolerance: Option<Spanned<f64>>,
}

/// A unit of length, for coordinates, lengths, elevations and diameters.
#[derive(Clone, Copy, Debug, Deserialize, PartialEq, Eq)]
pub enum LengthUnit {
    #[serde(rename = "m")]
    Metre,
    #[serde(rename = "mm")]
    Millimetre,
    #[serde(rename = "ft")]
    Foot,
    /// The US survey foot, 1200/3937 m, of many US state plane systems.
    #[serde(rename = "us-ft")]
    UsSurveyFoot,
    #[serde(rename = "in")]
    Inch,
}

impl LengthUnit {
    /// Metres per unit (international foot and inch exact by the 1959 agreement; the US survey
    /// foot 1200/3937 m by its definition).
    pub fn metres(self) -> f64 {
        match self {
            LengthUnit::Metre => 1.0,
            LengthUnit::Millimetre => 1e-3,
            LengthUnit::Foot => M_PER_FT,
            LengthUnit::UsSurveyFoot => 1200.0 / 3937.0,
            LengthUnit::Inch => M_PER_FT / 12.0,
        }
    }

    pub fn symbol(self) -> &'static str {
        match self {
            LengthUnit::Metre => "m",
            LengthUnit::Millimetre => "mm",
            LengthUnit::Foot => "ft",
            LengthUnit::UsSurveyFoot => "us-ft",
            LengthUnit::Inch => "in",
        }
    }
}

/// A unit of flow, for demands and required fire flows.
#[derive(Clone, Copy, Debug, Deserialize, PartialEq, Eq)]
pub enum FlowUnit {
    #[serde(rename = "gpm")]
    Gpm,
    #[serde(rename = "L/s")]
    LitresPerSecond,
    #[serde(rename = "m3/s")]
    CubicMetresPerSecond,
}

impl FlowUnit {
    /// m³/s per unit.
    pub fn m3s(self) -> f64 {
        match self {
            FlowUnit::Gpm => L_PER_US_GAL / 1000.0 / 60.0,
            FlowUnit::LitresPerSecond => 1e-3,
            FlowUnit::CubicMetresPerSecond => 1.0,
        }
    }

    /// The unit as the mapping spells it.
    pub fn symbol(self) -> &'static str {
        match self {
            FlowUnit::Gpm => "gpm",
            FlowUnit::LitresPerSecond => "L/s",
            FlowUnit::CubicMetresPerSecond => "m3/s",
        }
    }
}

/// The pipes layer.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PipesSection {
    /// Attribute with the pipe id (else `feature id`, else `pipe-N`, reported as guessed).
    pub id: Option<String>,
    pub diameter: String,
    pub diameter_unit: LengthUnit,
    /// Attribute with the length; without it (or where empty) the length of the line.
    pub length: Option<String>,
    pub length_unit: Option<LengthUnit>,
    /// Attribute with the C factor (Hazen-Williams) or absolute roughness (Darcy-Weisbach).
    pub roughness: Option<String>,
    /// Unit of a Darcy-Weisbach roughness (attribute and tables).
    pub roughness_unit: Option<LengthUnit>,
    pub material: Option<String>,
    /// Roughness by material text (exact match after trimming), where `roughness` is empty.
    #[serde(default)]
    pub roughness_by_material: BTreeMap<String, Spanned<f64>>,
    /// Roughness where neither the attribute nor the table gives one (reported as guessed).
    pub default_roughness: Option<Spanned<f64>>,
    pub minor_loss: Option<String>,
    pub status: Option<String>,
    /// Attribute texts → `open`, `closed` or `check`; the three words are always understood.
    #[serde(default)]
    pub status_values: BTreeMap<String, String>,
    /// Attribute with the pressure zone, given to the junctions at the pipe's ends.
    pub zone: Option<String>,
}

/// The hydrants layer.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct HydrantsSection {
    pub id: Option<String>,
    pub class: Option<String>,
    pub required_flow: Option<String>,
    pub flow_unit: Option<FlowUnit>,
    /// Attribute with the length of the hydrant's lead (lateral) from the main.
    pub lateral_length: Option<String>,
    pub lateral_length_unit: Option<LengthUnit>,
    /// Attribute with the lead's inside diameter.
    pub lateral_diameter: Option<String>,
    pub lateral_diameter_unit: Option<LengthUnit>,
    /// Attribute with the lead's C factor (Hazen-Williams) or absolute roughness (Darcy-Weisbach,
    /// in `[pipes] roughness_unit`); where empty, hydrants.csv's default.
    pub lateral_roughness: Option<String>,
    /// The diameter (in `lateral_diameter_unit`) of a lead that the attributes do not give:
    /// such a hydrant gets a lead from the main to its position, as long as that distance.
    pub default_lateral_diameter: Option<Spanned<f64>>,
}

/// The sources layer.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SourcesSection {
    pub id: Option<String>,
    /// Attribute with `reservoir` or `tank`.
    pub kind: Option<String>,
    /// The kind where the attribute is absent.
    pub default_kind: Option<Spanned<String>>,
    pub grade: Option<String>,
    pub grade_unit: Option<LengthUnit>,
}

/// Where junction elevations come from.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ElevationsSection {
    /// `attributes` (of the pipes' ends) or `points` (the `--elevations` CSV file).
    pub from: Option<Spanned<ElevationSource>>,
    /// Pipe attribute with the elevation at the line's first position.
    pub start: Option<String>,
    /// Pipe attribute with the elevation at the line's last position.
    pub end: Option<String>,
    /// `nearest` or `idw` (inverse distance weighting) for `points`.
    pub method: Option<ElevationMethod>,
    /// Points used by `idw` (default 6).
    pub neighbours: Option<usize>,
    pub unit: Option<LengthUnit>,
}

#[derive(Clone, Copy, Debug, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
pub enum ElevationSource {
    Attributes,
    Points,
}

#[derive(Clone, Copy, Debug, Deserialize, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
pub enum ElevationMethod {
    Nearest,
    Idw,
}

/// The `--demands` CSV file's unit.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DemandsSection {
    pub unit: Option<FlowUnit>,
}

/// The network units' own unit of each quantity, the default where the mapping states none.
pub fn default_length(units: UnitSystem) -> LengthUnit {
    match units {
        UnitSystem::Us => LengthUnit::Foot,
        UnitSystem::Si => LengthUnit::Metre,
    }
}

pub fn default_diameter(units: UnitSystem) -> LengthUnit {
    match units {
        UnitSystem::Us => LengthUnit::Inch,
        UnitSystem::Si => LengthUnit::Millimetre,
    }
}

pub fn default_flow(units: UnitSystem) -> FlowUnit {
    match units {
        UnitSystem::Us => FlowUnit::Gpm,
        UnitSystem::Si => FlowUnit::LitresPerSecond,
    }
}

/// The mapping file's name and text: findings about a value made after parsing point at the
/// value's line and column, as the parser's own errors do.
pub struct MappingFile {
    pub name: String,
    text: String,
}

impl MappingFile {
    /// The location of the value read with span `span`.
    pub fn at(&self, span: std::ops::Range<usize>) -> Location {
        span_location(&self.name, &self.text, span)
    }

    /// The whole file, for a finding about a value the file does not give.
    pub fn whole(&self) -> Location {
        Location::file(&self.name)
    }
}

/// Reads the mapping file; problems (with line and column) go to `diags`.
pub fn read_mapping(path: &Path, diags: &mut Diagnostics) -> Option<(Mapping, MappingFile)> {
    let name = path.display().to_string();
    read_toml::<Mapping>(
        path,
        &name,
        "see docs/gis.md for the mapping file's sections and keys",
        diags,
    )
    .map(|(m, text)| (m, MappingFile { name, text }))
}
