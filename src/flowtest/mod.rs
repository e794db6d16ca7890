//! Field hydrant flow tests (`firemain flowtest`): reduce them by the published method
//! ([`reduce`]), compare them with the model ([`compare`]), and fit the roughness of pipe groups
//! to them ([`calibrate`]). No I/O: tests and network in, results out.

pub mod calibrate;
pub mod compare;
pub mod reduce;

use crate::model::flowtests::{FlowTest, OutletReading};
use crate::model::Network;
use reduce::HydrantClass;

/// The residual floor of a projection when no criteria are given: 20 psi, the rating pressure
/// of NFPA 291 §4.2.1, kPa.
pub const DEFAULT_FLOOR_KPA: f64 = 20.0 * crate::units::KPA_PER_PSI;

/// One test reduced from its field readings, SI.
#[derive(Clone, Debug)]
pub struct Reduced {
    /// Flow of each outlet, m³/s, in the order of the test's outlets (pumper correction applied).
    pub outlet_flows_m3s: Vec<f64>,
    /// Total test flow Q_F, m³/s.
    pub total_flow_m3s: f64,
    /// Pressure drop as a fraction of static.
    pub drop_fraction: f64,
    /// The flow projected to the floor, m³/s (`None` without a drop).
    pub projected_m3s: Option<f64>,
    pub class: Option<HydrantClass>,
    pub warnings: Vec<String>,
}

/// Reduces one test: outlet flows (NFPA 291 §4.9.3, §4.10), total flow, the projection to
/// `floor_kpa` (§4.13) and the class of that projection (Chapter 5), with warnings.
pub fn reduce_test(net: &Network, test: &FlowTest, floor_kpa: f64) -> Reduced {
    let mut pitots = Vec::new();
    let outlet_flows_m3s: Vec<f64> = test
        .outlets
        .iter()
        .map(|o| match o.reading {
            OutletReading::Metered { flow_m3s } => flow_m3s,
            OutletReading::Pitot {
                diameter_m,
                coefficient,
                pitot_kpa,
            } => {
                let raw = reduce::outlet_flow_m3s(net.units, diameter_m, coefficient, pitot_kpa);
                let pumper = reduce::is_pumper_outlet(diameter_m, coefficient);
                pitots.push((pitot_kpa, pumper));
                if pumper {
                    raw * reduce::pumper_factor(pitot_kpa)
                } else {
                    raw
                }
            }
        })
        .collect();
    let total: f64 = outlet_flows_m3s.iter().sum();
    let projected = reduce::projected_flow(total, test.static_kpa, test.residual_kpa, floor_kpa);
    let warnings = reduce::reduction_warnings(
        net.units,
        test.static_kpa,
        test.residual_kpa,
        total,
        projected,
        &pitots,
    );
    Reduced {
        outlet_flows_m3s,
        total_flow_m3s: total,
        drop_fraction: (test.static_kpa - test.residual_kpa) / test.static_kpa,
        projected_m3s: projected,
        class: projected.map(HydrantClass::of_flow),
        warnings,
    }
}
