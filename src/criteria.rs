//! Criteria sets (`criteria/*.toml`): the pressure floors, service limits and required fire
//! flows that a jurisdiction or a utility applies. Read once, converted to SI here.
//!
//! See docs/criteria-format.md for the format and DEVELOPERS.md for how to add a set.

use std::collections::BTreeMap;
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use crate::model::toml_input::{read_toml, span_location};
use crate::model::{Diagnostics, Location, Network};
use crate::units::{Quantity, UnitSystem};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct CriteriaFile {
    name: String,
    reference: String,
    units: Spanned<UnitSystem>,
    service: ServiceTable,
    fire: FireTable,
    upsizing: Option<UpsizingTable>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ServiceTable {
    min_pressure: Spanned<f64>,
    max_pressure: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct FireTable {
    residual_floor: Spanned<f64>,
    scope: Spanned<String>,
    #[serde(default)]
    exempt: Vec<Spanned<String>>,
    #[serde(default)]
    max_velocity: Option<Spanned<f64>>,
    search_cap: Spanned<f64>,
    default_required_flow: Option<Spanned<f64>>,
    #[serde(default)]
    required_flow: BTreeMap<String, Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct UpsizingTable {
    new_pipe_roughness: Option<Spanned<f64>>,
    min_main_diameter: Option<Spanned<f64>>,
}

/// Which junctions the residual floor applies to during a fire flow.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Scope {
    /// Every junction of the network.
    System,
    /// The junctions of the hydrant's zone.
    Zone,
}

/// A criteria set, SI units.
#[derive(Clone, Debug)]
pub struct Criteria {
    pub name: String,
    pub reference: String,
    /// Units the file was written in (must be the network's).
    pub units: UnitSystem,
    /// Lowest service pressure under peak-hour demand, kPa.
    pub service_min_kpa: f64,
    /// Highest service pressure under minimum-hour demand, kPa.
    pub service_max_kpa: f64,
    /// Residual-pressure floor during fire flow, kPa.
    pub residual_floor_kpa: f64,
    pub scope: Scope,
    /// Junction ids never constrained.
    pub exempt: Vec<String>,
    /// Pipe-velocity limit during fire flow, m/s.
    pub max_velocity_m_per_s: Option<f64>,
    /// Largest fire flow searched, m³/s.
    pub search_cap_m3s: f64,
    pub default_required_flow_m3s: Option<f64>,
    /// Required fire flow by hydrant class, m³/s.
    pub required_flow_by_class: BTreeMap<String, f64>,
    /// Hazen-Williams C (or Darcy-Weisbach roughness, m) of new pipe, if given.
    pub new_pipe_roughness: Option<f64>,
    /// Smallest main that should serve a hydrant, m.
    pub min_main_diameter_m: Option<f64>,
    /// The file name shown in messages.
    pub file: String,
    /// Warnings about applying the set to the network (e.g. hydrant classes it does not list).
    pub warnings: Diagnostics,
}

/// Where a required fire flow came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RequiredSource {
    Hydrant,
    Class,
    Default,
}

impl Criteria {
    /// The required fire flow of a hydrant (m³/s): its own, else its class's, else the default.
    pub fn required_flow(&self, hydrant: &crate::model::Hydrant) -> Option<(f64, RequiredSource)> {
        if let Some(q) = hydrant.required_flow_m3s {
            return Some((q, RequiredSource::Hydrant));
        }
        if let Some(q) = hydrant
            .class
            .as_ref()
            .and_then(|c| self.required_flow_by_class.get(&class_key(c)))
        {
            return Some((*q, RequiredSource::Class));
        }
        self.default_required_flow_m3s
            .map(|q| (q, RequiredSource::Default))
    }
}

/// Reads a criteria file and checks it against the network it will be applied to.
pub fn load_criteria(path: &Path, net: &Network) -> Result<Criteria, Diagnostics> {
    let file = path.display().to_string();
    let mut diags = Diagnostics::new();
    let parsed: Option<(CriteriaFile, String)> = read_toml(
        path,
        &file,
        "see docs/criteria-format.md for the keys of a criteria file",
        &mut diags,
    );
    let Some((c, text)) = parsed else {
        return Err(diags);
    };
    let at = |span: std::ops::Range<usize>| span_location(&file, &text, span);
    let units = *c.units.get_ref();
    if units != net.units {
        diags.error(
            at(c.units.span()),
            format!(
                "the criteria are in units \"{}\" but the network is in \"{}\"",
                units.name(),
                net.units.name()
            ),
            format!(
                "use a criteria set written in \"{}\" units (common-practice-us.toml and common-practice-si.toml are twins)",
                net.units.name()
            ),
        );
    }
    let positive = |v: &Spanned<f64>, what: &str, q: Quantity, diags: &mut Diagnostics| {
        let x = *v.get_ref();
        if !(x.is_finite() && x > 0.0) {
            diags.error(
                at(v.span()),
                format!("{what} must be a positive number, got {x}"),
                format!("give {what} in {}", units.symbol(q)),
            );
        }
        units.to_si(q, x)
    };
    let service_min_kpa = positive(
        &c.service.min_pressure,
        "[service] min_pressure",
        Quantity::Pressure,
        &mut diags,
    );
    let service_max_kpa = positive(
        &c.service.max_pressure,
        "[service] max_pressure",
        Quantity::Pressure,
        &mut diags,
    );
    if service_max_kpa <= service_min_kpa {
        diags.error(
            at(c.service.max_pressure.span()),
            "[service] max_pressure must be above min_pressure",
            "check the two service limits",
        );
    }
    let residual_floor_kpa = positive(
        &c.fire.residual_floor,
        "[fire] residual_floor",
        Quantity::Pressure,
        &mut diags,
    );
    let search_cap_m3s = positive(
        &c.fire.search_cap,
        "[fire] search_cap",
        Quantity::Flow,
        &mut diags,
    );
    let scope = match c.fire.scope.get_ref().as_str() {
        "system" => Scope::System,
        "zone" => Scope::Zone,
        other => {
            diags.error(
                at(c.fire.scope.span()),
                format!("unknown scope \"{other}\""),
                "write scope = \"system\" (every junction) or \"zone\" (the hydrant's zone)",
            );
            Scope::System
        }
    };
    let max_velocity_m_per_s = match &c.fire.max_velocity {
        Some(v) if *v.get_ref() == 0.0 => None,
        Some(v) => Some(positive(
            v,
            "[fire] max_velocity",
            Quantity::Velocity,
            &mut diags,
        )),
        None => None,
    };
    let default_required_flow_m3s = c.fire.default_required_flow.as_ref().map(|v| {
        positive(
            v,
            "[fire] default_required_flow",
            Quantity::Flow,
            &mut diags,
        )
    });
    let mut required_flow_by_class = BTreeMap::new();
    for (class, v) in &c.fire.required_flow {
        let q = positive(
            v,
            &format!("[fire.required_flow] {class}"),
            Quantity::Flow,
            &mut diags,
        );
        if required_flow_by_class.insert(class_key(class), q).is_some() {
            diags.error(
                at(v.span()),
                format!("[fire.required_flow] names class `{class}` twice (classes are compared without case)"),
                "keep one value per class",
            );
        }
    }
    let mut exempt = Vec::new();
    for e in &c.fire.exempt {
        match net.node_by_id(e.get_ref()) {
            Some(j) if j < net.n_junctions => exempt.push(e.get_ref().clone()),
            _ => diags.error(
                at(e.span()),
                format!(
                    "exempt junction `{}` is not a junction of the network",
                    e.get_ref()
                ),
                "list junction ids of the network (compared exactly)",
            ),
        }
    }
    let (new_pipe_roughness, min_main_diameter_m) = match &c.upsizing {
        Some(u) => (
            u.new_pipe_roughness.as_ref().map(|v| {
                let q = match net.headloss {
                    crate::model::HeadlossFormula::HazenWilliams => None,
                    crate::model::HeadlossFormula::DarcyWeisbach => Some(Quantity::Diameter),
                };
                match q {
                    Some(q) => positive(v, "[upsizing] new_pipe_roughness", q, &mut diags),
                    None => {
                        let x = *v.get_ref();
                        if !(x.is_finite() && x > 0.0) {
                            diags.error(
                                at(v.span()),
                                format!("[upsizing] new_pipe_roughness must be positive, got {x}"),
                                "give the Hazen-Williams C of new pipe (e.g. 130)",
                            );
                        }
                        x
                    }
                }
            }),
            u.min_main_diameter.as_ref().map(|v| {
                positive(
                    v,
                    "[upsizing] min_main_diameter",
                    Quantity::Diameter,
                    &mut diags,
                )
            }),
        ),
        None => (None, None),
    };

    // Every hydrant needs a required flow; a class the set does not list falls back on the
    // default, which deserves a word.
    let mut warnings = Diagnostics::new();
    for h in &net.hydrants {
        let class_known = h
            .class
            .as_ref()
            .is_some_and(|c| required_flow_by_class.contains_key(&class_key(c)));
        if let (Some(class), false, None, Some(_)) = (
            &h.class,
            class_known,
            h.required_flow_m3s,
            default_required_flow_m3s,
        ) {
            warnings.warning(
                Location::line("hydrants.csv", h.line),
                format!(
                    "hydrant `{}` has class `{class}`, which {file} does not list: its default_required_flow applies",
                    h.id
                ),
                "add the class under [fire.required_flow], or correct the class name",
            );
        }
        if h.required_flow_m3s.is_none() && !class_known && default_required_flow_m3s.is_none() {
            diags.error(
                Location::line("hydrants.csv", h.line),
                match &h.class {
                    Some(class) => format!(
                        "hydrant `{}` has class `{class}`, which {file} does not list, and the criteria give no default_required_flow",
                        h.id
                    ),
                    None => format!(
                        "hydrant `{}` has no required_flow and no class, and {file} gives no default_required_flow",
                        h.id
                    ),
                },
                "add the class under [fire.required_flow], set [fire] default_required_flow, or give the hydrant a required_flow",
            );
        }
    }
    if diags.has_errors() {
        return Err(diags);
    }
    Ok(Criteria {
        name: c.name,
        reference: c.reference,
        units,
        service_min_kpa,
        service_max_kpa,
        residual_floor_kpa,
        scope,
        exempt,
        max_velocity_m_per_s,
        search_cap_m3s,
        default_required_flow_m3s,
        required_flow_by_class,
        new_pipe_roughness,
        min_main_diameter_m,
        file,
        warnings,
    })
}

/// Class names are compared without case or surrounding spaces.
fn class_key(class: &str) -> String {
    class.trim().to_lowercase()
}
