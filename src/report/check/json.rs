//! `report.json`: everything the other formats show, machine-readable.

use serde::Serialize;

use super::{CheckReport, FieldTestSummary};
use crate::criteria::Scope;
use crate::fireflow::delivered::{DeliveredState, ShortJunction};
use crate::fireflow::supply_paths::PipeShare;
use crate::fireflow::{HydrantResult, Outcome, SweepStats};
use crate::report::{JsonInputWarning, Out, ReportError, CAUTIONS};
use crate::service::ServiceRow;
use crate::units::Quantity;
use crate::weakmains::WeakMain;

/// Version of the layout of `report.json`; raised on any incompatible change.
pub const JSON_SCHEMA_VERSION: u32 = 1;

impl CheckReport<'_> {
    /// `report.json`: everything above, machine-readable.
    pub fn json(&self, stats: Option<&SweepStats>) -> Result<Vec<u8>, ReportError> {
        let doc = JsonReport {
            schema_version: JSON_SCHEMA_VERSION,
            generator: format!("firemain {}", self.version),
            generated: self.generated.clone(),
            run_id: self.run_id.clone(),
            units: JsonUnits::of(self.out()),
            network: self.network.name.clone(),
            criteria: self.json_criteria(),
            demand_factors: self.json_demand_factors(),
            summary: self.json_summary(),
            input_warnings: self.input_warnings.iter().map(Into::into).collect(),
            field_tests: self.field_tests.map(|f| JsonFieldTests::of(f, self.out())),
            hydrants: self.results.iter().map(|r| self.json_hydrant(r)).collect(),
            service: self
                .service
                .rows
                .iter()
                .map(|r| self.json_service(r))
                .collect(),
            weak_mains: self
                .weak_mains
                .iter()
                .map(|w| self.json_weak_main(w))
                .collect(),
            service_notes: self.service_notes(),
            sweep: stats.map(JsonStats::of),
            cautions: CAUTIONS.to_vec(),
        };
        serde_json::to_vec_pretty(&doc).map_err(|e| ReportError::Render {
            what: "report.json".into(),
            message: e.to_string(),
        })
    }

    /// The criteria in the report's units.
    fn json_criteria(&self) -> JsonCriteria {
        let o = self.out();
        JsonCriteria {
            name: self.criteria.name.clone(),
            reference: self.criteria.reference.clone(),
            residual_floor: round(o.pressure(self.criteria.residual_floor_kpa), 4),
            scope: self.criteria.scope,
            search_cap: round(o.flow(self.criteria.search_cap_m3s), 4),
            max_velocity: self
                .criteria
                .max_velocity_m_per_s
                .map(|v| round(o.velocity(v), 4)),
            service_min_pressure: round(o.pressure(self.criteria.service_min_kpa), 4),
            service_max_pressure: round(o.pressure(self.criteria.service_max_kpa), 4),
            pressure_dependent: self.criteria.pressure_dependent.map(|pd| JsonPddCriteria {
                minimum: round(o.pressure(pd.minimum_kpa), 4),
                service: round(o.pressure(pd.service_kpa), 4),
                modes: "available_flow, residual_pressure, min_pressure and supply_paths are demand-driven; pressure_dependent_at_required_flow is pressure-dependent, and weak_mains are ranked from it",
            }),
        }
    }

    fn json_demand_factors(&self) -> JsonDemand {
        JsonDemand {
            max_day: self.network.demand_factors.max_day,
            peak_hour: self.service.peak_hour_factor,
            low_demand_condition: self.service.low_condition.name(),
            low_demand: self.service.low_demand_factor,
        }
    }

    fn json_summary(&self) -> JsonSummary {
        JsonSummary {
            hydrants: self.results.len(),
            pass: self.count(Outcome::Pass),
            fail: self.count(Outcome::Fail),
            error: self.count(Outcome::Error),
            service_exceptions: self.service.exceptions().count(),
            partial: self.partial,
        }
    }

    /// One hydrant's result, with its supply paths and pressure-dependent state when it fails.
    fn json_hydrant(&self, r: &HydrantResult) -> JsonHydrant {
        let o = self.out();
        JsonHydrant {
            hydrant: self.hydrant_id(r).to_string(),
            junction: self.network.nodes[r.junction].id.clone(),
            zone: self.network.zone_name(r.junction).map(str::to_string),
            requirement: self.required_label(r),
            required_flow: round(o.flow(r.required_m3s), 4),
            available_flow: optional_flow(o, r.available_m3s),
            static_pressure: optional_pressure(o, r.static_kpa),
            residual_pressure: optional_pressure(o, r.residual_kpa),
            min_pressure: optional_pressure(o, r.min_pressure_kpa),
            min_pressure_junction: r
                .min_pressure_junction
                .map(|j| self.network.nodes[j].id.clone()),
            critical_junction: r
                .critical_junction
                .map(|j| self.network.nodes[j].id.clone()),
            critical_pipe: r.critical_link.map(|i| self.network.links[i].id.clone()),
            limited_by: r.limited_by.map(|l| l.name()),
            result: r.outcome.name(),
            notes: r.notes.iter().map(|n| self.note_text(n)).collect(),
            supply_paths: r.supply_paths.iter().map(|p| self.json_share(p)).collect(),
            pressure_dependent_at_required_flow: r
                .delivered
                .as_ref()
                .map(|d| self.json_delivered(d)),
        }
    }

    /// A supply-path pipe of a failing hydrant.
    fn json_share(&self, p: &PipeShare) -> JsonShare {
        JsonShare {
            pipe: self.network.links[p.link].id.clone(),
            share: round(p.share, 4),
            unit_headloss: round(p.unit_headloss, 4),
            velocity: round(self.out().velocity(p.velocity_m_per_s), 4),
        }
    }

    /// A failing hydrant's state at its required flow with pressure-dependent demands.
    fn json_delivered(&self, d: &DeliveredState) -> JsonDelivered {
        let o = self.out();
        let (volume, volume_unit) = o.hourly_volume(d.customer_shortfall_m3s);
        JsonDelivered {
            mode: "pressure-dependent",
            fire_flow_delivered: round(o.flow(d.fire_flow_m3s), 4),
            hydrant_pressure: round(o.pressure(d.hydrant_kpa), 4),
            min_customer_pressure: d.min_customer_kpa.map(|(_, p)| round(o.pressure(p), 4)),
            min_customer_junction: d
                .min_customer_kpa
                .map(|(j, _)| self.network.nodes[j].id.clone()),
            customer_shortfall: round(o.flow(d.customer_shortfall_m3s), 4),
            customer_volume_short_per_hour: volume,
            volume_unit,
            junctions_losing_service: d.short.iter().map(|j| self.json_short(j)).collect(),
        }
    }

    /// A junction that loses service in the pressure-dependent state.
    fn json_short(&self, j: &ShortJunction) -> JsonShort {
        let o = self.out();
        JsonShort {
            junction: self.network.nodes[j.junction].id.clone(),
            asked: round(o.flow(j.asked_m3s), 4),
            delivered: round(o.flow(j.delivered_m3s), 4),
            pressure: round(o.pressure(j.pressure_kpa), 4),
        }
    }

    fn json_service(&self, r: &ServiceRow) -> JsonService {
        let o = self.out();
        JsonService {
            junction: self.network.nodes[r.junction].id.clone(),
            zone: self.network.zone_name(r.junction).map(str::to_string),
            pressure_peak_hour: optional_pressure(o, r.peak_hour_kpa),
            pressure_low_demand: optional_pressure(o, r.low_demand_kpa),
            result: r.result.name(),
        }
    }

    fn json_weak_main(&self, w: &WeakMain) -> JsonWeakMain {
        JsonWeakMain {
            pipe: self.network.links[w.link].id.clone(),
            hydrants_limited: w.hydrants_limited,
            worst_share: round(w.worst_share, 4),
            worst_unit_headloss: round(w.worst_unit_headloss, 4),
            max_velocity: round(self.out().velocity(w.max_velocity_m_per_s), 4),
            reasons: w.reasons.iter().map(|r| self.reason_text(r)).collect(),
        }
    }
}

impl JsonUnits {
    fn of(o: Out) -> Self {
        JsonUnits {
            flow: o.sym(Quantity::Flow),
            pressure: o.sym(Quantity::Pressure),
            length: o.sym(Quantity::Length),
            velocity: o.sym(Quantity::Velocity),
        }
    }
}

impl JsonFieldTests {
    fn of(f: &FieldTestSummary, o: Out) -> Self {
        JsonFieldTests {
            file: f.file.clone(),
            tests: f.tests,
            rms_static_misfit: round(o.pressure(f.rms_static_kpa), 4),
            rms_residual_misfit: round(o.pressure(f.rms_residual_kpa), 4),
            worst_test: f.worst.as_ref().map(|(id, _)| id.clone()),
            worst_residual_misfit: f.worst.as_ref().map(|(_, d)| round(o.pressure(*d), 4)),
        }
    }
}

impl JsonStats {
    fn of(s: &SweepStats) -> Self {
        JsonStats {
            solves: s.solves,
            factorizations: s.factorizations,
            factorizations_per_hydrant_mean: round(s.factorizations_per_hydrant_mean, 3),
            factorizations_per_hydrant_max: s.factorizations_per_hydrant_max,
        }
    }
}

/// A flow in the report's unit, rounded as every JSON number; `null` stays `null`.
fn optional_flow(o: Out, q: Option<f64>) -> Option<f64> {
    q.map(|q| round(o.flow(q), 4))
}

/// A pressure in the report's unit, rounded as every JSON number; `null` stays `null`.
fn optional_pressure(o: Out, p: Option<f64>) -> Option<f64> {
    p.map(|p| round(o.pressure(p), 4))
}

/// Rounds for JSON so that files do not carry solver noise in the last digits.
fn round(v: f64, decimals: i32) -> f64 {
    let k = 10f64.powi(decimals);
    let r = (v * k).round() / k;
    if r == 0.0 {
        0.0
    } else {
        r
    }
}

#[derive(Serialize)]
struct JsonReport {
    schema_version: u32,
    generator: String,
    generated: String,
    run_id: String,
    units: JsonUnits,
    network: String,
    criteria: JsonCriteria,
    demand_factors: JsonDemand,
    summary: JsonSummary,
    input_warnings: Vec<JsonInputWarning>,
    /// The model against field flow tests (`check --tests`); `null` when none were given.
    field_tests: Option<JsonFieldTests>,
    hydrants: Vec<JsonHydrant>,
    service: Vec<JsonService>,
    weak_mains: Vec<JsonWeakMain>,
    service_notes: Vec<String>,
    /// Work counters; `null` unless --stats (they are not part of the result).
    sweep: Option<JsonStats>,
    cautions: Vec<&'static str>,
}

/// Pressures in the report's pressure unit, modelled minus measured.
#[derive(Serialize)]
struct JsonFieldTests {
    file: String,
    tests: usize,
    rms_static_misfit: f64,
    rms_residual_misfit: f64,
    worst_test: Option<String>,
    worst_residual_misfit: Option<f64>,
}

#[derive(Serialize)]
struct JsonUnits {
    flow: &'static str,
    pressure: &'static str,
    length: &'static str,
    velocity: &'static str,
}

#[derive(Serialize)]
struct JsonCriteria {
    name: String,
    reference: String,
    residual_floor: f64,
    scope: Scope,
    search_cap: f64,
    max_velocity: Option<f64>,
    service_min_pressure: f64,
    service_max_pressure: f64,
    /// `[fire] pressure_dependent`; absent when not set.
    #[serde(skip_serializing_if = "Option::is_none")]
    pressure_dependent: Option<JsonPddCriteria>,
}

#[derive(Serialize)]
struct JsonPddCriteria {
    minimum: f64,
    service: f64,
    /// Which figures each mode produced.
    modes: &'static str,
}

/// A failing hydrant at its required flow with pressure-dependent demands.
#[derive(Serialize)]
struct JsonDelivered {
    mode: &'static str,
    fire_flow_delivered: f64,
    hydrant_pressure: f64,
    min_customer_pressure: Option<f64>,
    min_customer_junction: Option<String>,
    customer_shortfall: f64,
    /// The shortfall over one hour, in `volume_unit` (gal | m3), as text.
    customer_volume_short_per_hour: String,
    volume_unit: &'static str,
    junctions_losing_service: Vec<JsonShort>,
}

#[derive(Serialize)]
struct JsonShort {
    junction: String,
    asked: f64,
    delivered: f64,
    pressure: f64,
}

#[derive(Serialize)]
struct JsonDemand {
    max_day: f64,
    peak_hour: f64,
    low_demand_condition: &'static str,
    low_demand: f64,
}

#[derive(Serialize)]
struct JsonSummary {
    hydrants: usize,
    pass: usize,
    fail: usize,
    error: usize,
    service_exceptions: usize,
    partial: bool,
}

#[derive(Serialize)]
struct JsonHydrant {
    hydrant: String,
    junction: String,
    zone: Option<String>,
    requirement: String,
    required_flow: f64,
    available_flow: Option<f64>,
    static_pressure: Option<f64>,
    residual_pressure: Option<f64>,
    min_pressure: Option<f64>,
    min_pressure_junction: Option<String>,
    critical_junction: Option<String>,
    critical_pipe: Option<String>,
    limited_by: Option<&'static str>,
    result: &'static str,
    notes: Vec<String>,
    /// Failing hydrants: supply-path pipes by share of head loss (unit head loss per 1000
    /// length units).
    supply_paths: Vec<JsonShare>,
    /// With `[fire] pressure_dependent`, failing hydrants only; absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pressure_dependent_at_required_flow: Option<JsonDelivered>,
}

#[derive(Serialize)]
struct JsonShare {
    pipe: String,
    share: f64,
    unit_headloss: f64,
    velocity: f64,
}

#[derive(Serialize)]
struct JsonWeakMain {
    pipe: String,
    hydrants_limited: usize,
    worst_share: f64,
    worst_unit_headloss: f64,
    max_velocity: f64,
    reasons: Vec<String>,
}

#[derive(Serialize)]
struct JsonService {
    junction: String,
    zone: Option<String>,
    pressure_peak_hour: Option<f64>,
    pressure_low_demand: Option<f64>,
    result: &'static str,
}

#[derive(Serialize)]
struct JsonStats {
    solves: u64,
    factorizations: u64,
    factorizations_per_hydrant_mean: f64,
    factorizations_per_hydrant_max: u32,
}
