//! `firemain upsize`: its options checked against the network (the second stage of its
//! arguments), and the checks of the proposed network that its report shows.

use std::path::Path;

use super::{select_hydrants, CliError};
use crate::criteria::Criteria;
use crate::hydraulics::Hydraulics;
use crate::model::costs::load_cost_table;
use crate::model::Network;
use crate::report;
use crate::service::{service_check, ServiceReport};
use crate::units::{same_diameter, Quantity, UnitSystem};
use crate::upsizing::{CostModel, UpsizeConfig, UpsizePlan, DEFAULT_SIZES_IN, DEFAULT_SIZES_MM};
use crate::weakmains::{weak_mains, WeakMain};

/// The options of `firemain upsize` as given on the command line, in the network's units.
#[derive(Clone, Copy, Debug)]
pub struct UpsizeArgs<'a> {
    /// `--hydrant` ids (none: every hydrant).
    pub hydrants: &'a [String],
    /// `--sizes` (none: the default sizes of the network's unit system).
    pub sizes: Option<&'a [f64]>,
    /// `--costs` (none: the length × diameter proxy).
    pub costs: Option<&'a Path>,
    /// `--budget`.
    pub budget: Option<f64>,
    /// `--threads`, already checked (see [`super::check_threads`]).
    pub threads: Option<usize>,
}

impl UpsizeArgs<'_> {
    /// The planning configuration for `net`, checking in this order: the hydrants, the sizes,
    /// the cost table (readable, and pricing every size), the budget.
    pub fn to_config(&self, net: &Network) -> Result<UpsizeConfig, CliError> {
        let selected = select_hydrants(net, self.hydrants)?;
        let sizes_m = candidate_sizes_m(self.sizes, net.units)?;
        let costs = match self.costs {
            Some(path) => cost_table(path, &sizes_m, net.units)?,
            None => CostModel::LengthTimesDiameter,
        };
        if let Some(b) = self.budget {
            if !(b.is_finite() && b > 0.0) {
                return Err(CliError::Budget);
            }
        }
        Ok(UpsizeConfig {
            sizes_m,
            costs,
            hydrants: (!selected.is_empty()).then_some(selected),
            budget: self.budget,
            threads: self.threads,
        })
    }
}

/// The candidate diameters in m, ascending, each size once: `given` in the network's diameter
/// unit, or the default sizes of its unit system.
pub fn candidate_sizes_m(given: Option<&[f64]>, units: UnitSystem) -> Result<Vec<f64>, CliError> {
    let given = given.unwrap_or(match units {
        UnitSystem::Us => &DEFAULT_SIZES_IN,
        UnitSystem::Si => &DEFAULT_SIZES_MM,
    });
    if given.is_empty() || given.iter().any(|d| !(d.is_finite() && *d > 0.0)) {
        return Err(CliError::Sizes {
            unit: units.symbol(Quantity::Diameter),
        });
    }
    let mut sizes_m: Vec<f64> = given
        .iter()
        .map(|d| units.to_si(Quantity::Diameter, *d))
        .collect();
    sizes_m.sort_by(f64::total_cmp);
    sizes_m.dedup_by(|a, b| same_diameter(*a, *b));
    Ok(sizes_m)
}

/// The cost table at `path`, which must price every size of `sizes_m`.
fn cost_table(path: &Path, sizes_m: &[f64], units: UnitSystem) -> Result<CostModel, CliError> {
    let table = load_cost_table(path, units).map_err(|diagnostics| CliError::CostTable {
        path: path.to_path_buf(),
        diagnostics,
    })?;
    let costs = CostModel::Table(table);
    let unpriced = costs.unpriced(sizes_m);
    if unpriced.is_empty() {
        return Ok(costs);
    }
    let sizes: Vec<String> = unpriced
        .iter()
        .map(|&d| report::num(units.from_si(Quantity::Diameter, d), 1))
        .collect();
    Err(CliError::UnpricedSizes {
        path: path.to_path_buf(),
        sizes: sizes.join(", "),
        unit: units.symbol(Quantity::Diameter),
    })
}

/// The proposed network's service pressures and weak mains, which its report shows beside the
/// plan's hydrant results.
pub struct ProposedChecks {
    pub service: ServiceReport,
    pub weak_mains: Vec<WeakMain>,
}

/// Runs the service-pressure check on the proposed network of `plan` and ranks its weak mains.
pub fn check_proposed(plan: &UpsizePlan, criteria: &Criteria) -> Result<ProposedChecks, CliError> {
    let service = Hydraulics::new(&plan.proposed)
        .and_then(|h| service_check(&h, criteria))
        .map_err(|e| {
            CliError::solve(
                "service-pressure conditions of the proposed network",
                plan.proposed.units,
                e,
            )
        })?;
    Ok(ProposedChecks {
        service,
        weak_mains: weak_mains(&plan.proposed, criteria, &plan.after),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_are_sorted_once_each_and_must_be_positive() {
        // 8 in = 0.2032 m and 6 in = 0.1524 m exactly (1 in = 25.4 mm, the international inch).
        let sizes = candidate_sizes_m(Some(&[8.0, 6.0, 8.0]), UnitSystem::Us).unwrap();
        assert_eq!(sizes.len(), 2);
        assert!(same_diameter(sizes[0], 0.1524) && same_diameter(sizes[1], 0.2032));
        assert!(matches!(
            candidate_sizes_m(Some(&[6.0, -8.0]), UnitSystem::Us),
            Err(CliError::Sizes { unit: "in" })
        ));
        assert!(matches!(
            candidate_sizes_m(Some(&[]), UnitSystem::Si),
            Err(CliError::Sizes { unit: "mm" })
        ));
        assert_eq!(candidate_sizes_m(None, UnitSystem::Si).unwrap().len(), 9);
    }
}
