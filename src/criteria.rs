//! Criteria sets (`criteria/*.toml`): the pressure floors, service limits and required fire
//! flows that a jurisdiction or a utility applies. Read once, converted to SI here.
//!
//! See docs/criteria-format.md for the format and DEVELOPERS.md for how to add a set.

use std::collections::BTreeMap;
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use crate::model::diagnostic::quoted;
use crate::model::limits::{self, Limit};
use crate::model::toml_input::{read_toml, span_location};
use crate::model::{Diagnostics, Location, Network};
use crate::units::{display_value, Quantity, UnitSystem};

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct CriteriaFile {
    name: String,
    reference: String,
    units: Spanned<UnitSystem>,
    service: ServiceTable,
    fire: FireTable,
    upsizing: Option<UpsizingTable>,
    calibration: Option<CalibrationTable>,
    needed_flow: Option<NeededFlowTable>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct NeededFlowTable {
    method: Spanned<String>,
    hose_lay_factor: Option<Spanned<f64>>,
    max_hose_lay: Spanned<f64>,
    max_hydrants: Spanned<i64>,
    #[serde(default)]
    classes: BTreeMap<String, Spanned<ClassFlowTable>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct ClassFlowTable {
    flow: f64,
    duration: f64,
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
    #[serde(default)]
    pressure_dependent: Option<PressureDependentTable>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct PressureDependentTable {
    minimum: Spanned<f64>,
    service: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct CalibrationTable {
    roughness_min: Spanned<f64>,
    roughness_max: Spanned<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct UpsizingTable {
    new_pipe_roughness: Option<Spanned<f64>>,
    min_main_diameter: Option<Spanned<f64>>,
}

/// Which junctions the residual floor applies to during a fire flow (report.json writes it).
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
    /// Bounds of a fitted roughness (`firemain flowtest --calibrate-by`): Hazen-Williams C, or
    /// Darcy-Weisbach roughness in m; `None` for the plausible defaults.
    pub calibration_bounds: Option<(f64, f64)>,
    /// The needed-fire-flow method and hose-lay settings of `firemain permit`, if given.
    pub needed_flow: Option<NeededFlowSettings>,
    /// `[fire] pressure_dependent`: the state of a failing hydrant at its required flow is
    /// also solved with pressure-dependent demands (see docs/fire-flow-method.md §2b).
    pub pressure_dependent: Option<PressureDependentSettings>,
    /// The file name shown in messages.
    pub file: String,
    /// Warnings about applying the set to the network (e.g. hydrant classes it does not list).
    pub warnings: Diagnostics,
}

/// The value of `[needed_flow] method` that takes the criteria's own `[needed_flow.classes]`.
pub const CRITERIA_METHOD: &str = "criteria";

/// The hose-lay factor when the criteria give none: √2 ≈ 1.414, the largest ratio of a path
/// along a rectangular street grid to the straight line between its ends (derived: the path
/// is at least |dx| + |dy|, at most √2 times the straight line when it has no detour). A
/// larger factor counts fewer hydrants within reach, the cautious side; measure the hose lay
/// where streets detour.
pub const DEFAULT_HOSE_LAY_FACTOR: f64 = std::f64::consts::SQRT_2;
/// The largest hose-lay factor and number of hydrants a criteria file may give: past these
/// the value is a slip (common practice, no source).
pub const MAX_HOSE_LAY_FACTOR: f64 = 5.0;
pub const MAX_HYDRANTS: i64 = 50;

/// `[needed_flow]`: how `firemain permit` finds a building's needed fire flow and which
/// hydrants may supply it.
#[derive(Clone, Debug)]
pub struct NeededFlowSettings {
    /// The method, loaded (from its file, or the criteria's classes).
    pub method: crate::needed::Method,
    /// Hose lay = straight-line distance × this factor (≥ 1).
    pub hose_lay_factor: f64,
    /// The longest hose lay from a hydrant to the building, m.
    pub max_hose_lay_m: f64,
    /// The most hydrants that may share a building's needed flow.
    pub max_hydrants: usize,
}

/// `[fire] pressure_dependent = { minimum = .., service = .. }`, kPa: customers' demands are
/// delivered in part between the two pressures (none at or below `minimum`, all at or above
/// `service`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PressureDependentSettings {
    pub minimum_kpa: f64,
    pub service_kpa: f64,
}

/// Where a required fire flow came from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
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
///
/// Each section is one named step of `Reader`; every problem is collected, in the order of
/// the steps, before any is reported.
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
    let mut r = Reader {
        file: &file,
        text: &text,
        units: *c.units.get_ref(),
        diags,
        warnings: Diagnostics::new(),
    };
    r.units_match(&c.units, net);
    let limits = r.pressure_limits(&c);
    let fire = r.fire_settings(&c.fire, net);
    let (new_pipe_roughness, min_main_diameter_m) = match &c.upsizing {
        Some(u) => r.upsizing(u, net),
        None => (None, None),
    };
    let calibration_bounds = c.calibration.as_ref().map(|t| r.calibration(t, net));
    let needed_flow = c.needed_flow.as_ref().and_then(|t| {
        let of = NeededFrom {
            path,
            file: &file,
            reference: &c.reference,
            units: r.units,
        };
        let (file, text) = (r.file, r.text);
        let at = |span: std::ops::Range<usize>| span_location(file, text, span);
        read_needed_flow(t, &of, &at, &mut r.diags)
    });
    let pressure_dependent = c
        .fire
        .pressure_dependent
        .as_ref()
        .map(|t| r.pressure_dependent(t));
    r.hydrant_classes(&c.fire, &fire, limits.search_cap_m3s, net);
    let Reader {
        units,
        diags,
        warnings,
        ..
    } = r;
    if diags.has_errors() {
        return Err(diags);
    }
    Ok(Criteria {
        name: c.name,
        reference: c.reference,
        units,
        service_min_kpa: limits.service_min_kpa,
        service_max_kpa: limits.service_max_kpa,
        residual_floor_kpa: limits.residual_floor_kpa,
        scope: fire.scope,
        exempt: fire.exempt,
        max_velocity_m_per_s: fire.max_velocity_m_per_s,
        search_cap_m3s: limits.search_cap_m3s,
        default_required_flow_m3s: fire.default_required_flow_m3s,
        required_flow_by_class: fire.required_flow_by_class,
        new_pipe_roughness,
        min_main_diameter_m,
        calibration_bounds,
        needed_flow,
        pressure_dependent,
        file,
        warnings,
    })
}

/// A criteria file being read: where its values are, their units, and what they raise.
struct Reader<'a> {
    file: &'a str,
    text: &'a str,
    units: UnitSystem,
    diags: Diagnostics,
    warnings: Diagnostics,
}

/// The pressures and the flow that bound every check (SI).
struct PressureLimits {
    service_min_kpa: f64,
    service_max_kpa: f64,
    residual_floor_kpa: f64,
    search_cap_m3s: f64,
}

/// What `[fire]` says besides its floor and cap (SI).
struct FireSettings {
    scope: Scope,
    exempt: Vec<String>,
    max_velocity_m_per_s: Option<f64>,
    default_required_flow_m3s: Option<f64>,
    required_flow_by_class: BTreeMap<String, f64>,
}

impl Reader<'_> {
    fn at(&self, span: std::ops::Range<usize>) -> Location {
        span_location(self.file, self.text, span)
    }

    /// A positive number within the limit of its quantity (magnitudes beyond any water system
    /// are errors too), in SI.
    fn positive(&mut self, v: &Spanned<f64>, what: &str, q: Quantity) -> f64 {
        let units = self.units;
        let x = *v.get_ref();
        if !(x.is_finite() && x > 0.0) {
            let at = self.at(v.span());
            self.diags.error(
                at,
                format!("{what} must be a positive number, got {}", display_value(x)),
                format!("give {what} in {}", units.symbol(q)),
            );
        } else if let Some(limit) = limit_of(q) {
            if !limit.holds(units.to_si(q, x)) {
                let at = self.at(v.span());
                self.diags
                    .error(at, limit.message(what, x, units), limit.fix(what, units));
            }
        }
        units.to_si(q, x)
    }

    /// The criteria's units must be the network's: values are not converted between them.
    fn units_match(&mut self, units: &Spanned<UnitSystem>, net: &Network) {
        if *units.get_ref() == net.units {
            return;
        }
        let at = self.at(units.span());
        self.diags.error(
            at,
            format!(
                "the criteria are in units \"{}\" but the network is in \"{}\"",
                self.units.name(),
                net.units.name()
            ),
            format!(
                "use a criteria set written in \"{}\" units (common-practice-us.toml and common-practice-si.toml are twins)",
                net.units.name()
            ),
        );
    }

    /// `[service]`'s two limits, `[fire]`'s floor and cap, and how the floor sits between the
    /// service limits.
    fn pressure_limits(&mut self, c: &CriteriaFile) -> PressureLimits {
        let service_min_kpa = self.positive(
            &c.service.min_pressure,
            "[service] min_pressure",
            Quantity::Pressure,
        );
        let service_max_kpa = self.positive(
            &c.service.max_pressure,
            "[service] max_pressure",
            Quantity::Pressure,
        );
        if service_max_kpa <= service_min_kpa && service_min_kpa > 0.0 && service_max_kpa > 0.0 {
            let at = self.at(c.service.max_pressure.span());
            self.diags.error(
                at,
                "[service] max_pressure must be above min_pressure",
                "check the two service limits",
            );
        }
        let limits = PressureLimits {
            service_min_kpa,
            service_max_kpa,
            residual_floor_kpa: self.positive(
                &c.fire.residual_floor,
                "[fire] residual_floor",
                Quantity::Pressure,
            ),
            search_cap_m3s: self.positive(&c.fire.search_cap, "[fire] search_cap", Quantity::Flow),
        };
        self.floor_between_service_limits(c, &limits);
        limits
    }

    /// The residual floor above the service maximum is an error (no junction that passes the
    /// service check could keep it), at or above the service minimum a warning.
    fn floor_between_service_limits(&mut self, c: &CriteriaFile, limits: &PressureLimits) {
        let pressure = |v: &Spanned<f64>| display_value(*v.get_ref());
        let psym = self.units.symbol(Quantity::Pressure);
        // Compared only when both are in range (an out-of-range value is already an error).
        let in_range = |kpa: f64| kpa > 0.0 && limits::PRESSURE.holds(kpa);
        let floor = limits.residual_floor_kpa;
        let compare = in_range(floor) && in_range(limits.service_max_kpa);
        let at = self.at(c.fire.residual_floor.span());
        if compare && floor > limits.service_max_kpa {
            self.diags.error(
                at,
                format!(
                    "[fire] residual_floor {} {psym} is above [service] max_pressure {} {psym}: no junction that passes the service check could keep it during a fire flow",
                    pressure(&c.fire.residual_floor),
                    pressure(&c.service.max_pressure),
                ),
                "check the two values and their unit; a residual floor is usually 20 psi (140 kPa)",
            );
        } else if compare && in_range(limits.service_min_kpa) && floor >= limits.service_min_kpa {
            // Common practice, no source: the fire-flow floor (e.g. 20 psi) lies below the
            // everyday service minimum (e.g. 35-40 psi).
            self.warnings.warning(
                at,
                format!(
                    "[fire] residual_floor {} {psym} is not below [service] min_pressure {} {psym} (usually the fire-flow floor is the lower one; common practice)",
                    pressure(&c.fire.residual_floor),
                    pressure(&c.service.min_pressure),
                ),
                "check the two values: a residual floor is usually 20 psi (140 kPa), a service minimum 35-40 psi",
            );
        }
    }

    /// `[fire]`'s scope, velocity limit, required flows and exempt junctions.
    fn fire_settings(&mut self, fire: &FireTable, net: &Network) -> FireSettings {
        let scope = match fire.scope.get_ref().as_str() {
            "system" => Scope::System,
            "zone" => Scope::Zone,
            other => {
                let at = self.at(fire.scope.span());
                self.diags.error(
                    at,
                    format!("unknown scope \"{other}\""),
                    "write scope = \"system\" (every junction) or \"zone\" (the hydrant's zone)",
                );
                Scope::System
            }
        };
        let max_velocity_m_per_s = match &fire.max_velocity {
            Some(v) if *v.get_ref() == 0.0 => None,
            Some(v) => Some(self.positive(v, "[fire] max_velocity", Quantity::Velocity)),
            None => None,
        };
        let default_required_flow_m3s = fire
            .default_required_flow
            .as_ref()
            .map(|v| self.positive(v, "[fire] default_required_flow", Quantity::Flow));
        let required_flow_by_class = self.required_flow_by_class(fire);
        let exempt = self.exempt_junctions(fire, net);
        FireSettings {
            scope,
            exempt,
            max_velocity_m_per_s,
            default_required_flow_m3s,
            required_flow_by_class,
        }
    }

    /// `[fire.required_flow]`, keyed by class without case; a class named twice is an error.
    fn required_flow_by_class(&mut self, fire: &FireTable) -> BTreeMap<String, f64> {
        let mut by_class = BTreeMap::new();
        for (class, v) in &fire.required_flow {
            let q = self.positive(v, &format!("[fire.required_flow] {class}"), Quantity::Flow);
            if by_class.insert(class_key(class), q).is_some() {
                let at = self.at(v.span());
                self.diags.error(
                    at,
                    format!(
                        "[fire.required_flow] names class {} twice (classes are compared without case)",
                        quoted(class)
                    ),
                    "keep one value per class",
                );
            }
        }
        by_class
    }

    /// `[fire] exempt`: each must be a junction of the network.
    fn exempt_junctions(&mut self, fire: &FireTable, net: &Network) -> Vec<String> {
        let mut exempt = Vec::new();
        for e in &fire.exempt {
            match net.node_by_id(e.get_ref()) {
                Some(j) if j < net.n_junctions => exempt.push(e.get_ref().clone()),
                _ => {
                    let at = self.at(e.span());
                    self.diags.error(
                        at,
                        format!(
                            "exempt junction {} is not a junction of the network",
                            quoted(e.get_ref())
                        ),
                        "list junction ids of the network (compared exactly)",
                    )
                }
            }
        }
        exempt
    }

    /// `[upsizing]`: the roughness of new pipe and the smallest main diameter.
    fn upsizing(&mut self, u: &UpsizingTable, net: &Network) -> (Option<f64>, Option<f64>) {
        let roughness = u.new_pipe_roughness.as_ref().map(|v| match net.headloss {
            crate::model::HeadlossFormula::DarcyWeisbach => {
                self.positive(v, "[upsizing] new_pipe_roughness", Quantity::Diameter)
            }
            crate::model::HeadlossFormula::HazenWilliams => self.new_pipe_c_factor(v),
        });
        let min_diameter = u
            .min_main_diameter
            .as_ref()
            .map(|v| self.positive(v, "[upsizing] min_main_diameter", Quantity::Diameter));
        (roughness, min_diameter)
    }

    /// A Hazen-Williams C of new pipe: positive, and within the C factors pipes have.
    fn new_pipe_c_factor(&mut self, v: &Spanned<f64>) -> f64 {
        let x = *v.get_ref();
        let fix = "give the Hazen-Williams C of new pipe (e.g. 130)";
        if !(x.is_finite() && x > 0.0) {
            let at = self.at(v.span());
            self.diags.error(
                at,
                format!(
                    "[upsizing] new_pipe_roughness must be positive, got {}",
                    display_value(x)
                ),
                fix,
            );
        } else if !limits::C_FACTOR.holds(x) {
            let what = "[upsizing] new_pipe_roughness";
            let at = self.at(v.span());
            self.diags
                .error(at, limits::C_FACTOR.message(what, x, self.units), fix);
        }
        x
    }

    /// `[calibration]`: the lowest and highest roughness a fit may reach. Hazen-Williams C has
    /// no unit; a Darcy-Weisbach roughness is a length in the diameter unit (mm or in), as in
    /// pipes.csv.
    fn calibration(&mut self, t: &CalibrationTable, net: &Network) -> (f64, f64) {
        let mut read = |v: &Spanned<f64>, what: &str| match net.headloss {
            crate::model::HeadlossFormula::DarcyWeisbach => {
                self.positive(v, what, Quantity::Diameter)
            }
            crate::model::HeadlossFormula::HazenWilliams => {
                let x = *v.get_ref();
                if !(x.is_finite() && limits::C_FACTOR.holds(x)) {
                    let at = self.at(v.span());
                    self.diags.error(
                        at,
                        limits::C_FACTOR.message(what, x, self.units),
                        "give a Hazen-Williams C (e.g. 40 and 160)",
                    );
                }
                x
            }
        };
        let lo = read(&t.roughness_min, "[calibration] roughness_min");
        let hi = read(&t.roughness_max, "[calibration] roughness_max");
        if lo.partial_cmp(&hi) != Some(std::cmp::Ordering::Less) {
            let at = self.at(t.roughness_max.span());
            self.diags.error(
                at,
                "[calibration] roughness_max must be above roughness_min",
                "give the lowest and the highest roughness a fit may reach",
            );
        }
        (lo, hi)
    }

    /// `[fire] pressure_dependent`: the pressure below which customers get nothing and the one
    /// from which they get their whole demand.
    fn pressure_dependent(&mut self, t: &PressureDependentTable) -> PressureDependentSettings {
        let units = self.units;
        let psym = units.symbol(Quantity::Pressure);
        let mut read = |v: &Spanned<f64>, what: &str| {
            let x = *v.get_ref();
            let kpa = units.to_si(Quantity::Pressure, x);
            if !(x.is_finite() && x >= 0.0 && limits::PRESSURE.holds(kpa.max(1e-9))) {
                let at = self.at(v.span());
                self.diags.error(
                    at,
                    format!(
                        "{what} must be a pressure of zero or more, got {}",
                        display_value(x)
                    ),
                    format!("give {what} in {psym}"),
                );
            }
            kpa
        };
        let minimum_kpa = read(&t.minimum, "[fire] pressure_dependent minimum");
        let service_kpa = read(&t.service, "[fire] pressure_dependent service");
        // The relation needs a range of at least 0.1 m of head (hydraulics::demand::MIN_RANGE_M).
        let min_range_kpa =
            crate::units::pressure_kpa_from_head_m(crate::hydraulics::demand::MIN_RANGE_M);
        if service_kpa.is_finite()
            && minimum_kpa.is_finite()
            && service_kpa < minimum_kpa + min_range_kpa
        {
            let pressure = |v: &Spanned<f64>| display_value(*v.get_ref());
            let at = self.at(t.service.span());
            self.diags.error(
                at,
                format!(
                    "[fire] pressure_dependent service {} {psym} must be above minimum {} {psym}",
                    pressure(&t.service),
                    pressure(&t.minimum),
                ),
                "give the pressure below which customers get nothing as minimum, and the one from which they get their whole demand as service (e.g. 5 and 20 psi)",
            );
        }
        PressureDependentSettings {
            minimum_kpa,
            service_kpa,
        }
    }

    /// Required flows above the search cap (warnings), and each hydrant's class resolved
    /// against `[fire.required_flow]`.
    fn hydrant_classes(
        &mut self,
        fire_table: &FireTable,
        fire: &FireSettings,
        search_cap_m3s: f64,
        net: &Network,
    ) {
        let (file, text) = (self.file, self.text);
        let at = |span: std::ops::Range<usize>| span_location(file, text, span);
        check_required_above_cap(
            fire_table,
            self.units,
            search_cap_m3s,
            &at,
            &mut self.warnings,
        );
        let classes: Vec<&str> = fire_table
            .required_flow
            .keys()
            .map(String::as_str)
            .collect();
        let resolution = ClassCheck {
            file,
            classes: &classes,
            by_class: &fire.required_flow_by_class,
            has_default: fire.default_required_flow_m3s.is_some(),
        };
        for h in &net.hydrants {
            resolution.check(h, &mut self.diags, &mut self.warnings);
        }
    }
}

/// What `[needed_flow]` is read against: the criteria file and its units.
struct NeededFrom<'a> {
    path: &'a Path,
    file: &'a str,
    reference: &'a str,
    units: UnitSystem,
}

/// Reads `[needed_flow]`: the method (a file resolved beside the criteria file, or the
/// criteria's own classes) and the hose-lay settings.
fn read_needed_flow(
    t: &NeededFlowTable,
    of: &NeededFrom<'_>,
    at: &dyn Fn(std::ops::Range<usize>) -> Location,
    diags: &mut Diagnostics,
) -> Option<NeededFlowSettings> {
    let units = of.units;
    let method = read_needed_method(t, of, at, diags);
    let factor = t
        .hose_lay_factor
        .as_ref()
        .map_or(DEFAULT_HOSE_LAY_FACTOR, |v| {
            let x = *v.get_ref();
            if !(x.is_finite() && (1.0..=MAX_HOSE_LAY_FACTOR).contains(&x)) {
                diags.error(
                    at(v.span()),
                    format!(
                        "[needed_flow] hose_lay_factor must be from 1 to {MAX_HOSE_LAY_FACTOR}, got {}",
                        display_value(x)
                    ),
                    "a hose lay is never shorter than the straight line: give 1.41 (a street grid), or measure the hose lays",
                );
            }
            x
        });
    let lay = *t.max_hose_lay.get_ref();
    if !(lay.is_finite()
        && lay > 0.0
        && units.to_si(Quantity::Length, lay) <= limits::MAX_PIPE_LENGTH_M)
    {
        diags.error(
            at(t.max_hose_lay.span()),
            format!(
                "[needed_flow] max_hose_lay must be a positive distance, got {}",
                display_value(lay)
            ),
            format!(
                "give the longest hose lay from a hydrant to the building in {}",
                units.symbol(Quantity::Length)
            ),
        );
    }
    let n = *t.max_hydrants.get_ref();
    if !(1..=MAX_HYDRANTS).contains(&n) {
        diags.error(
            at(t.max_hydrants.span()),
            format!("[needed_flow] max_hydrants must be a whole number from 1 to {MAX_HYDRANTS}, got {n}"),
            "give the most hydrants that may share a building's fire flow, such as 3",
        );
    }
    Some(NeededFlowSettings {
        method: method?,
        hose_lay_factor: factor,
        max_hose_lay_m: units.to_si(Quantity::Length, lay),
        max_hydrants: n.clamp(1, MAX_HYDRANTS) as usize,
    })
}

fn read_needed_method(
    t: &NeededFlowTable,
    of: &NeededFrom<'_>,
    at: &dyn Fn(std::ops::Range<usize>) -> Location,
    diags: &mut Diagnostics,
) -> Option<crate::needed::Method> {
    use crate::needed::method::{ClassFlow, Method, Rule};
    let name = t.method.get_ref().trim();
    if name != CRITERIA_METHOD {
        if let Some((class, v)) = t.classes.iter().next() {
            diags.error(
                at(v.span()),
                format!("[needed_flow.classes] gives class {}, but method is a file", quoted(class)),
                format!("write method = \"{CRITERIA_METHOD}\" to use the classes, or remove [needed_flow.classes]"),
            );
        }
        let base = of.path.parent().unwrap_or(Path::new("."));
        let method_path = base.join(name);
        return match crate::needed::load_method(&method_path, name) {
            Ok(m) => Some(m),
            Err(d) => {
                diags.error(
                    at(t.method.span()),
                    format!(
                        "the method file {} (resolved as {}) cannot be used",
                        quoted(name),
                        quoted(&method_path.display().to_string())
                    ),
                    format!("give the path of a method file relative to {}, or method = \"{CRITERIA_METHOD}\"; the problems in it follow", of.file),
                );
                diags.extend(d);
                None
            }
        };
    }
    let mut classes = Vec::new();
    for (class, v) in &t.classes {
        let ClassFlowTable { flow, duration } = *v.get_ref();
        let q = of.units.to_si(Quantity::Flow, flow);
        let flow_ok = flow.is_finite() && flow > 0.0 && limits::FLOW.holds(q);
        let duration_ok = duration.is_finite()
            && duration > 0.0
            && duration <= crate::model::buildings::MAX_DURATION_H;
        if !(flow_ok && duration_ok) {
            diags.error(
                at(v.span()),
                format!("[needed_flow.classes] {class}: flow and duration must be positive (duration in hours, at most 24)"),
                format!("write {class} = {{ flow = 1500, duration = 2 }} (flow in {}, duration in hours)", of.units.symbol(Quantity::Flow)),
            );
        }
        classes.push(ClassFlow {
            class: class.trim().to_string(),
            flow,
            hours: duration,
        });
    }
    if classes.is_empty() {
        diags.error(
            at(t.method.span()),
            format!("method = \"{CRITERIA_METHOD}\" needs [needed_flow.classes]"),
            "list each occupancy class with its flow and duration: name = { flow = 1500, duration = 2 }",
        );
        return None;
    }
    Some(Method {
        name: "the criteria's own needed flows by class".into(),
        document: of.reference.to_string(),
        edition: "as the criteria state".into(),
        section: "[needed_flow.classes]".into(),
        file: of.file.to_string(),
        units: of.units,
        complete: true,
        note: None,
        rule: Rule::Classes(classes),
    })
}

/// The limit beyond any water system of a criteria value of quantity `q`.
fn limit_of(q: Quantity) -> Option<&'static Limit> {
    match q {
        Quantity::Pressure => Some(&limits::PRESSURE),
        Quantity::Flow => Some(&limits::FLOW),
        Quantity::Velocity => Some(&limits::VELOCITY),
        Quantity::Diameter => Some(&limits::DIAMETER),
        Quantity::Length => None,
    }
}

/// Warns about required flows (the default or a class's) above the search cap: no hydrant
/// that needs one can pass, because no flow above the cap is searched.
fn check_required_above_cap(
    fire: &FireTable,
    units: UnitSystem,
    cap_m3s: f64,
    at: &dyn Fn(std::ops::Range<usize>) -> Location,
    warnings: &mut Diagnostics,
) {
    let named = fire
        .default_required_flow
        .iter()
        .map(|v| ("[fire] default_required_flow".to_string(), v))
        .chain(
            fire.required_flow
                .iter()
                .map(|(class, v)| (format!("[fire.required_flow] {class}"), v)),
        );
    let f = units.symbol(Quantity::Flow);
    for (what, v) in named {
        let q = units.to_si(Quantity::Flow, *v.get_ref());
        if q.is_finite() && q > cap_m3s && cap_m3s > 0.0 {
            warnings.warning(
                at(v.span()),
                format!(
                    "{what} {} {f} is above [fire] search_cap {} {f}: a hydrant that needs it can never pass",
                    display_value(*v.get_ref()),
                    display_value(units.from_si(Quantity::Flow, cap_m3s)),
                ),
                "raise search_cap to at least the largest required flow, or check the value",
            );
        }
    }
}

/// Resolves each hydrant's class against the criteria's `[fire.required_flow]`.
struct ClassCheck<'a> {
    file: &'a str,
    /// The class names as the criteria file writes them.
    classes: &'a [&'a str],
    by_class: &'a BTreeMap<String, f64>,
    has_default: bool,
}

impl ClassCheck<'_> {
    /// A class the criteria do not list is an error when it would decide the required flow
    /// (falling back on the default could understate the requirement: `comercial` would get
    /// the residential default), and a warning when the hydrant's own required_flow applies.
    /// A hydrant with no class takes the default; with no default either, it is an error.
    fn check(
        &self,
        h: &crate::model::Hydrant,
        diags: &mut Diagnostics,
        warnings: &mut Diagnostics,
    ) {
        let file = self.file;
        let Some(class) = &h.class else {
            if h.required_flow_m3s.is_none() && !self.has_default {
                diags.error(
                    Location::line("hydrants.csv", h.line),
                    format!(
                        "hydrant `{}` has no required_flow and no class, and {file} gives no default_required_flow",
                        h.id
                    ),
                    "add the class under [fire.required_flow], set [fire] default_required_flow, or give the hydrant a required_flow",
                );
            }
            return;
        };
        if self.by_class.contains_key(&class_key(class)) {
            return;
        }
        let location = if h.class_column > 0 {
            Location::cell("hydrants.csv", h.line, h.class_column)
        } else {
            Location::line("hydrants.csv", h.line)
        };
        let suggestion = match nearest_class(class, self.classes) {
            Some(near) => format!(" (did you mean `{near}`?)"),
            None if self.classes.is_empty() => " (it lists no classes)".to_string(),
            None => format!(
                " (it lists: {})",
                self.classes
                    .iter()
                    .map(|c| quoted(c))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        };
        let message = format!(
            "hydrant `{}` has class {}, which {file} does not list under [fire.required_flow]{suggestion}",
            h.id,
            quoted(class)
        );
        let otherwise = if self.has_default {
            "; leave the class empty to use default_required_flow"
        } else {
            ", or give the hydrant its own required_flow"
        };
        let fix = match nearest_class(class, self.classes) {
            Some(near) => format!(
                "write `{near}`, or add `{class}` under [fire.required_flow] in {file}{otherwise}"
            ),
            None => format!(
                "correct the class, or add `{class}` under [fire.required_flow] in {file}{otherwise}"
            ),
        };
        if h.required_flow_m3s.is_some() {
            warnings.warning(
                location,
                format!("{message}; its own required_flow applies"),
                fix,
            );
        } else {
            diags.error(location, message, fix);
        }
    }
}

/// The listed class nearest to `class` by edit distance (Levenshtein, without case), when it
/// is close enough to be a typing slip: at most 2 edits, or a third of the name's length.
pub(crate) fn nearest_class<'a>(class: &str, listed: &[&'a str]) -> Option<&'a str> {
    let key = class_key(class);
    listed
        .iter()
        .map(|&name| (strsim::levenshtein(&key, &class_key(name)), name))
        .filter(|&(d, _)| d <= 2 || 3 * d <= key.chars().count())
        .min_by_key(|&(d, _)| d)
        .map(|(_, name)| name)
}

/// Class names are compared without case or surrounding spaces.
fn class_key(class: &str) -> String {
    class.trim().to_lowercase()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nearest_class_suggests_only_close_names() {
        // Levenshtein distances counted by hand: comercial -> commercial is one insertion.
        let listed = ["commercial", "industrial", "residential"];
        assert_eq!(nearest_class("comercial", &listed), Some("commercial"));
        assert_eq!(nearest_class("Residental", &listed), Some("residential"));
        assert_eq!(nearest_class("school", &listed), None);
    }
}
