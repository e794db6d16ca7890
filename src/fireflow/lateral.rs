//! A hydrant's lead (lateral) from the main: the flowing hydrant's own pressure is its
//! junction's less the lead's head loss at the hydrant's flow (docs/fire-flow-method.md,
//! "Laterals"). Used by the single-hydrant search, the group search and the supply curves.

use crate::hydraulics::laws::LinkLaw;
use crate::model::{HeadlossFormula, Lateral, Network};
use crate::units::pressure_kpa_from_head_m;

/// The head-loss law of a lateral, by the network's formula (Hazen-Williams or Darcy-Weisbach,
/// the laws of docs/fire-flow-method.md §1, without minor loss).
pub(super) fn lateral_law(formula: HeadlossFormula, lateral: &Lateral) -> LinkLaw {
    use crate::hydraulics::headloss::{darcy_weisbach_coefficient, hazen_williams_resistance};
    match formula {
        HeadlossFormula::HazenWilliams => LinkLaw::HazenWilliams {
            r: hazen_williams_resistance(lateral.length_m, lateral.diameter_m, lateral.roughness),
            m: 0.0,
        },
        HeadlossFormula::DarcyWeisbach => LinkLaw::DarcyWeisbach {
            d: darcy_weisbach_coefficient(lateral.length_m, lateral.diameter_m),
            diameter_m: lateral.diameter_m,
            relative_roughness: lateral.roughness / lateral.diameter_m,
            m: 0.0,
        },
    }
}

/// The lead's law of hydrant `index` of `net`, when it has a lead.
pub(super) fn lead_of(net: &Network, index: usize) -> Option<LinkLaw> {
    net.hydrants[index]
        .lateral
        .map(|l| lateral_law(net.headloss, &l))
}

/// The pressure lost in a lead at flow `q_m3s`, kPa (none without a lead or a flow).
pub(super) fn lead_loss_kpa(lead: Option<&LinkLaw>, q_m3s: f64) -> f64 {
    match lead {
        Some(law) if q_m3s > 0.0 => pressure_kpa_from_head_m(law.headloss(q_m3s)),
        _ => 0.0,
    }
}

/// Head loss of a hydrant's lateral at flow `q_m3s`, m (the network's head-loss formula; the
/// zero-flow smoothing of the solver below 1e-4 m³/s).
pub fn lateral_headloss_m(formula: HeadlossFormula, lateral: &Lateral, q_m3s: f64) -> f64 {
    lateral_law(formula, lateral).headloss(q_m3s)
}
