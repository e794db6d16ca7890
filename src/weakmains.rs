//! Weak mains: the pipes that starve failing hydrants, aggregated over all of them.
//!
//! Downstream of the fire-flow search: each failing hydrant's result carries the shares of the
//! head lost on its binding junction's supply paths ([`crate::fireflow::supply_paths`]); this
//! module sums them per pipe and flags the pipes whose size, roughness or velocity explain it.

use crate::criteria::Criteria;
use crate::fireflow::{HydrantResult, Outcome};
use crate::model::{HeadlossFormula, LinkKind, Network};
use crate::units::{Quantity, UnitSystem};

/// Unit head loss under fire flow above which a main is flagged, m per 1000 m (= ft per
/// 1000 ft): 10 per 1000 (common practice, no source).
pub const HIGH_UNIT_HEADLOSS: f64 = 10.0;
/// Hazen-Williams C below which a main is flagged as very rough: tuberculation, or a partly
/// closed valve (common practice, no source).
pub const LOW_HW_C: f64 = 80.0;
/// Velocity flagged when the criteria set no limit: 10 ft/s ≈ 3 m/s during fire flow (common
/// practice, no source).
pub const DEFAULT_VELOCITY_FLAG_M_PER_S: f64 = 3.048;
/// Smallest main that should serve hydrants when the criteria do not say: 6 in / 150 mm
/// (common practice; state standards commonly require 6 in, some utilities 8 in).
pub fn default_min_main_diameter_m(units: UnitSystem) -> f64 {
    match units {
        UnitSystem::Us => units.to_si(Quantity::Diameter, 6.0),
        UnitSystem::Si => 0.150,
    }
}

/// Why a main is flagged.
#[derive(Clone, Debug, PartialEq)]
pub enum WeakReason {
    /// Unit head loss under fire flow above [`HIGH_UNIT_HEADLOSS`].
    HighUnitHeadloss { per_1000: f64 },
    /// Velocity above the criteria's limit (or the common-practice flag without one).
    HighVelocity {
        velocity_m_per_s: f64,
        limit_m_per_s: f64,
        /// Whether the limit is the criteria's (else the common-practice flag).
        criteria_limit: bool,
    },
    /// Diameter below the minimum main size for hydrants.
    SmallDiameter { diameter_m: f64, minimum_m: f64 },
    /// Very low Hazen-Williams C.
    LowRoughnessCoefficient { c: f64 },
}

/// A main that limits failing hydrants, aggregated over all of them.
#[derive(Clone, Debug)]
pub struct WeakMain {
    pub link: usize,
    /// Failing hydrants whose supply paths it is on (among their largest shares).
    pub hydrants_limited: usize,
    /// The largest share of a hydrant's head loss it carries.
    pub worst_share: f64,
    /// Its shares summed over the failing hydrants: the ranking key (how much of the failing
    /// hydrants' pressure deficits is spent in this pipe).
    pub total_share: f64,
    pub worst_unit_headloss: f64,
    pub max_velocity_m_per_s: f64,
    pub reasons: Vec<WeakReason>,
}

/// Shares below this are not counted as limiting a hydrant (1 %).
const MIN_SHARE: f64 = 0.01;

/// Aggregates the supply-path pipes of every failing hydrant, ranked by their shares summed
/// over the failing hydrants.
pub fn weak_mains(net: &Network, criteria: &Criteria, results: &[HydrantResult]) -> Vec<WeakMain> {
    let mut by_link: std::collections::BTreeMap<usize, WeakMain> = Default::default();
    for r in results.iter().filter(|r| r.outcome == Outcome::Fail) {
        // With pressure-dependent demands, the physical state at the required flow (no
        // impossible velocities from demands a real system would not deliver).
        let shares = r
            .delivered
            .as_ref()
            .map_or(&r.supply_paths, |d| &d.supply_paths);
        for s in shares.iter().filter(|s| s.share >= MIN_SHARE) {
            let e = by_link.entry(s.link).or_insert(WeakMain {
                link: s.link,
                hydrants_limited: 0,
                worst_share: 0.0,
                total_share: 0.0,
                worst_unit_headloss: 0.0,
                max_velocity_m_per_s: 0.0,
                reasons: Vec::new(),
            });
            e.hydrants_limited += 1;
            e.worst_share = e.worst_share.max(s.share);
            e.total_share += s.share;
            e.worst_unit_headloss = e.worst_unit_headloss.max(s.unit_headloss);
            e.max_velocity_m_per_s = e.max_velocity_m_per_s.max(s.velocity_m_per_s);
        }
    }
    let min_main = criteria
        .min_main_diameter_m
        .unwrap_or_else(|| default_min_main_diameter_m(net.units));
    let velocity_limit = criteria
        .max_velocity_m_per_s
        .unwrap_or(DEFAULT_VELOCITY_FLAG_M_PER_S);
    let mut out: Vec<WeakMain> = by_link
        .into_values()
        .map(|mut w| {
            let LinkKind::Pipe(p) = &net.links[w.link].kind else {
                return w;
            };
            if w.worst_unit_headloss > HIGH_UNIT_HEADLOSS {
                w.reasons.push(WeakReason::HighUnitHeadloss {
                    per_1000: w.worst_unit_headloss,
                });
            }
            if w.max_velocity_m_per_s > velocity_limit {
                w.reasons.push(WeakReason::HighVelocity {
                    velocity_m_per_s: w.max_velocity_m_per_s,
                    limit_m_per_s: velocity_limit,
                    criteria_limit: criteria.max_velocity_m_per_s.is_some(),
                });
            }
            if p.diameter_m < min_main - 1e-9 {
                w.reasons.push(WeakReason::SmallDiameter {
                    diameter_m: p.diameter_m,
                    minimum_m: min_main,
                });
            }
            if net.headloss == HeadlossFormula::HazenWilliams && p.roughness < LOW_HW_C {
                w.reasons
                    .push(WeakReason::LowRoughnessCoefficient { c: p.roughness });
            }
            w
        })
        .collect();
    out.sort_by(|a, b| {
        b.total_share
            .total_cmp(&a.total_share)
            .then(a.link.cmp(&b.link))
    });
    out
}
