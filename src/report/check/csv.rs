//! The CSV files of the check: `fireflow.csv`, `service.csv` and `weak_mains.csv`.

use super::{pipe_facts, CheckReport};
use crate::report::{csv_bytes, num, ReportError};
use crate::units::Quantity;

impl CheckReport<'_> {
    /// `fireflow.csv`.
    pub fn fireflow_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (f, p) = (o.sfx(Quantity::Flow), o.sfx(Quantity::Pressure));
        let mut header: Vec<String> = vec![
            "hydrant".into(),
            "junction".into(),
            "zone".into(),
            format!("required_flow_{f}"),
            format!("available_flow_{f}"),
            format!("static_pressure_{p}"),
            format!("residual_pressure_{p}"),
            format!("min_pressure_{p}"),
            "min_pressure_junction".into(),
            "critical_junction".into(),
            "limited_by".into(),
            "result".into(),
            "notes".into(),
        ];
        let pdd = self.criteria.pressure_dependent.is_some();
        if pdd {
            let (_, vol) = o.hourly_volume(0.0);
            header.extend([
                format!("pressure_dependent_fire_flow_delivered_{f}"),
                format!("pressure_dependent_hydrant_pressure_{p}"),
                "pressure_dependent_junctions_losing_service".into(),
                format!("pressure_dependent_customer_volume_short_per_hour_{vol}"),
            ]);
        }
        let flow = |q: Option<f64>| {
            q.map(|q| o.fmt_precise(Quantity::Flow, q))
                .unwrap_or_default()
        };
        let pressure = |k: Option<f64>| {
            k.map(|k| o.fmt_precise(Quantity::Pressure, k))
                .unwrap_or_default()
        };
        let rows: Vec<Vec<String>> = self
            .results
            .iter()
            .map(|r| {
                let mut row = vec![
                    self.hydrant_id(r).to_string(),
                    self.network.nodes[r.junction].id.clone(),
                    self.zone(r),
                    flow(Some(r.required_m3s)),
                    flow(r.available_m3s),
                    pressure(r.static_kpa),
                    pressure(r.residual_kpa),
                    pressure(r.min_pressure_kpa),
                    self.node_id(r.min_pressure_junction),
                    self.node_id(r.critical_junction),
                    r.limited_by.map(|l| l.name()).unwrap_or("").to_string(),
                    r.outcome.name().to_string(),
                    self.notes_text(r),
                ];
                if pdd {
                    // Empty for hydrants that pass (their demand-driven state is physical).
                    row.extend(match &r.delivered {
                        Some(d) => vec![
                            flow(Some(d.fire_flow_m3s)),
                            pressure(Some(d.hydrant_kpa)),
                            d.short.len().to_string(),
                            o.hourly_volume(d.customer_shortfall_m3s).0,
                        ],
                        None => vec![String::new(); 4],
                    });
                }
                row
            })
            .collect();
        csv_bytes(&header, &rows)
    }
    /// `service.csv`.
    pub fn service_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (l, p) = (o.sfx(Quantity::Length), o.sfx(Quantity::Pressure));
        let header: Vec<String> = vec![
            "junction".into(),
            "zone".into(),
            format!("elevation_{l}"),
            format!("pressure_peak_hour_{p}"),
            format!("pressure_low_demand_{p}"),
            "result".into(),
            "notes".into(),
        ];
        let rows: Vec<Vec<String>> = self
            .service
            .rows
            .iter()
            .map(|r| {
                let node = &self.network.nodes[r.junction];
                vec![
                    node.id.clone(),
                    self.network
                        .zone_name(r.junction)
                        .unwrap_or_default()
                        .to_string(),
                    o.fmt_precise(Quantity::Length, node.elevation_m),
                    r.peak_hour_kpa
                        .map(|k| o.fmt_precise(Quantity::Pressure, k))
                        .unwrap_or_default(),
                    r.low_demand_kpa
                        .map(|k| o.fmt_precise(Quantity::Pressure, k))
                        .unwrap_or_default(),
                    r.result.name().to_string(),
                    self.service_note(r),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }

    /// `weak_mains.csv`.
    pub fn weak_mains_csv(&self) -> Result<Vec<u8>, ReportError> {
        let o = self.out();
        let (d, l, v) = (
            o.sfx(Quantity::Diameter),
            o.sfx(Quantity::Length),
            o.sfx(Quantity::Velocity),
        );
        let header: Vec<String> = vec![
            "pipe".into(),
            format!("diameter_{d}"),
            format!("length_{l}"),
            "material_or_class".into(),
            "hydrants_limited".into(),
            format!("worst_unit_headloss_{l}"),
            format!("max_velocity_{v}"),
            "reasons".into(),
        ];
        let rows: Vec<Vec<String>> = self
            .weak_mains
            .iter()
            .map(|w| {
                let link = &self.network.links[w.link];
                let (dia, len, material) = pipe_facts(link);
                vec![
                    link.id.clone(),
                    o.fmt(Quantity::Diameter, dia),
                    o.fmt(Quantity::Length, len),
                    material,
                    w.hydrants_limited.to_string(),
                    num(w.worst_unit_headloss, 2),
                    o.fmt_precise(Quantity::Velocity, w.max_velocity_m_per_s),
                    w.reasons
                        .iter()
                        .map(|r| self.reason_text(r))
                        .collect::<Vec<_>>()
                        .join("; "),
                ]
            })
            .collect();
        csv_bytes(&header, &rows)
    }
}
