//! Service pressures under normal demand: every junction at or above the criteria's minimum
//! under peak-hour demand, and at or below its maximum under minimum-hour demand (average-day
//! demand when the network gives no minimum-hour factor).

use crate::criteria::Criteria;
use crate::hydraulics::{Hydraulics, SolveError};
use crate::steady::{control_notes, solve_condition, Condition, ControlNote};

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ServiceResult {
    Pass,
    /// Below the minimum at peak hour.
    Low,
    /// Above the maximum at low demand.
    High,
}

impl ServiceResult {
    pub fn name(self) -> &'static str {
        match self {
            ServiceResult::Pass => "pass",
            ServiceResult::Low => "low",
            ServiceResult::High => "high",
        }
    }
}

/// One junction's service pressures, kPa.
#[derive(Clone, Debug)]
pub struct ServiceRow {
    pub junction: usize,
    /// `None` when the junction is cut off from every source in that condition.
    pub peak_hour_kpa: Option<f64>,
    pub low_demand_kpa: Option<f64>,
    pub result: ServiceResult,
    /// Also above the maximum at low demand (when `result` is `Low`).
    pub also_high: bool,
}

/// The service-pressure check of a network.
#[derive(Clone, Debug)]
pub struct ServiceReport {
    pub peak_hour_factor: f64,
    /// The low-demand condition used: min-hour, or average-day without a min-hour factor.
    pub low_condition: Condition,
    pub low_demand_factor: f64,
    pub rows: Vec<ServiceRow>,
    /// Notes about controls in either condition.
    pub notes: Vec<ServiceNote>,
}

/// A note about the controls in one of the service conditions.
#[derive(Clone, Debug)]
pub struct ServiceNote {
    pub condition: Condition,
    pub note: ControlNote,
}

impl ServiceReport {
    pub fn exceptions(&self) -> impl Iterator<Item = &ServiceRow> {
        self.rows.iter().filter(|r| r.result != ServiceResult::Pass)
    }
}

/// Solves peak-hour and low-demand conditions and checks every junction.
pub fn service_check(
    hydraulics: &Hydraulics<'_>,
    criteria: &Criteria,
) -> Result<ServiceReport, SolveError> {
    let net = hydraulics.network();
    let low_condition = if net.demand_factors.min_hour.is_some() {
        Condition::MinHour
    } else {
        Condition::Average
    };
    let peak = solve_condition(hydraulics, Condition::PeakHour)?;
    let low = solve_condition(hydraulics, low_condition)?;
    let mut notes = Vec::new();
    for (condition, sol) in [(Condition::PeakHour, &peak), (low_condition, &low)] {
        for note in control_notes(hydraulics, sol) {
            notes.push(ServiceNote { condition, note });
        }
    }
    let cut = |sol: &crate::hydraulics::Solution| {
        let mut v = vec![false; net.n_junctions];
        for &j in &sol.isolated {
            v[j] = true;
        }
        v
    };
    let (peak_cut, low_cut) = (cut(&peak), cut(&low));
    let rows = (0..net.n_junctions)
        .map(|j| {
            let p = (!peak_cut[j]).then(|| peak.pressure_kpa(net, j));
            let l = (!low_cut[j]).then(|| low.pressure_kpa(net, j));
            // A junction cut off from every source has no service at all: it counts as low.
            let low_fail = p.is_none_or(|p| p < criteria.service_min_kpa);
            let high_fail = l.is_some_and(|l| l > criteria.service_max_kpa);
            ServiceRow {
                junction: j,
                peak_hour_kpa: p,
                low_demand_kpa: l,
                result: if low_fail {
                    ServiceResult::Low
                } else if high_fail {
                    ServiceResult::High
                } else {
                    ServiceResult::Pass
                },
                also_high: low_fail && high_fail,
            }
        })
        .collect();
    Ok(ServiceReport {
        peak_hour_factor: Condition::PeakHour.factor(net),
        low_condition,
        low_demand_factor: low_condition.factor(net),
        rows,
        notes,
    })
}
