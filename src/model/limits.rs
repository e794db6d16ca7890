//! Hard limits on input values: magnitudes that no water system has. A value beyond one is a
//! typing slip or a wrong unit, and it would drive the solver into overflow or an ill-conditioned
//! matrix, so it is an error (the plausibility *warnings* of `validate` catch values that are
//! merely unusual).
//!
//! Every limit is common practice, no source: each is chosen an order of magnitude or more past
//! the largest real value firemain's authors know of (noted beside it, from memory), so that no
//! real network is refused.

use crate::units::{display_value, Quantity, UnitSystem, KPA_PER_M_OF_HEAD};

/// The largest pipe or valve inside diameter, m. The largest water-supply tunnels are about
/// 7 m across (from memory).
pub const MAX_DIAMETER_M: f64 = 10.0;
/// The smallest pipe, valve or hydrant-lead inside diameter, m (1 mm). The narrowest service
/// lines are about 3/4 in, 19 mm (from memory); a diameter far below a millimetre is a unit
/// slip, and at 1e-300 m a pipe's head-loss law overflows to infinity.
pub const MIN_DIAMETER_M: f64 = 1e-3;
/// The longest pipe between two nodes, m (100 km). Long aqueducts are modelled as many pipes
/// between junctions; a distribution main between two junctions is rarely over a few km.
pub const MAX_PIPE_LENGTH_M: f64 = 100_000.0;
/// The largest elevation, grade or pump head in either direction, m. The highest mountain is
/// 8,849 m and no water system lies below the Dead Sea shore at about −430 m (from memory).
pub const MAX_ABS_ELEVATION_M: f64 = 10_000.0;
/// The largest demand, fire flow or pump flow, m³/s (1.6 million gpm). The largest water
/// treatment plants deliver some 20-30 m³/s (from memory).
pub const MAX_FLOW_M3S: f64 = 100.0;
/// The largest pressure, kPa: a column of water as high as [`MAX_ABS_ELEVATION_M`]
/// (about 98,000 kPa, 14,200 psi). Ductile-iron pipe is rated for about 2,400 kPa.
pub const MAX_PRESSURE_KPA: f64 = MAX_ABS_ELEVATION_M * KPA_PER_M_OF_HEAD;
/// The largest velocity limit of a criteria set, m/s. Fire-flow velocity limits are a few m/s.
pub const MAX_VELOCITY_M_PER_S: f64 = 100.0;
/// The Hazen-Williams C factors that describe some pipe. Published tables run from about 40
/// (badly tuberculated iron) to about 150-160 (plastic); C = 0.011 is a Manning n, not a C.
pub const HAZEN_WILLIAMS_C: (f64, f64) = (10.0, 200.0);
/// The largest Darcy-Weisbach roughness as a fraction of the diameter: a roughness height cannot
/// exceed the pipe's radius (the Moody chart ends at 0.05).
pub const MAX_RELATIVE_ROUGHNESS: f64 = 0.5;
/// The largest loss coefficient K. A gate valve an eighth open has K of some hundreds; a valve
/// that passes nothing is `closed`, not a K of 1e300.
pub const MAX_LOSS_COEFFICIENT: f64 = 1.0e6;
/// The largest relative pump speed (1.0 = rated). Variable-speed drives rarely exceed 1.2.
pub const MAX_PUMP_SPEED: f64 = 10.0;
/// The largest demand factor (ratio to average-day demand). Peak-hour factors run 2-4.
pub const MAX_DEMAND_FACTOR: f64 = 100.0;

/// The range a value must fall in, SI units.
#[derive(Clone, Copy, Debug)]
pub struct Limit {
    /// The quantity, for converting to the file's units; `None` for plain numbers.
    pub quantity: Option<Quantity>,
    pub min_si: f64,
    pub max_si: f64,
    /// "any water main", "any water system": what the value would be beyond.
    pub beyond: &'static str,
    /// How to fix a plain number (quantities get "check the value and its unit").
    pub hint: &'static str,
}

impl Limit {
    const fn at_most(quantity: Option<Quantity>, max_si: f64, beyond: &'static str) -> Limit {
        Limit {
            quantity,
            min_si: f64::NEG_INFINITY,
            max_si,
            beyond,
            hint: "",
        }
    }

    const fn within(quantity: Option<Quantity>, bound_si: f64, beyond: &'static str) -> Limit {
        Limit {
            quantity,
            min_si: -bound_si,
            max_si: bound_si,
            beyond,
            hint: "",
        }
    }

    const fn between(
        quantity: Option<Quantity>,
        min_si: f64,
        max_si: f64,
        beyond: &'static str,
    ) -> Limit {
        Limit {
            quantity,
            min_si,
            max_si,
            beyond,
            hint: "",
        }
    }

    const fn hint(mut self, hint: &'static str) -> Limit {
        self.hint = hint;
        self
    }

    pub fn holds(&self, value_si: f64) -> bool {
        value_si >= self.min_si && value_si <= self.max_si
    }

    fn show(&self, value_si: f64, units: UnitSystem) -> String {
        let v = match self.quantity {
            Some(q) => units.from_si(q, value_si),
            None => value_si,
        };
        display_value(v)
    }

    fn unit(&self, units: UnitSystem) -> String {
        self.quantity
            .map(|q| format!(" {}", units.symbol(q)))
            .unwrap_or_default()
    }

    /// What is wrong with `value` (outside the limit), given as written in the file's units
    /// (not converted: 1e308 psi would overflow to infinity in kPa).
    pub fn message(&self, what: &str, value: f64, units: UnitSystem) -> String {
        let u = self.unit(units);
        let range = if self.min_si == f64::NEG_INFINITY {
            format!("at most {}{u}", self.show(self.max_si, units))
        } else {
            format!(
                "between {} and {}{u}",
                self.show(self.min_si, units),
                self.show(self.max_si, units)
            )
        };
        format!(
            "{what} {}{u} is beyond {} (firemain accepts {range})",
            display_value(value),
            self.beyond
        )
    }

    /// How to fix a value outside the limit.
    pub fn fix(&self, what: &str, units: UnitSystem) -> String {
        match self.quantity {
            Some(q) => format!(
                "check the value and its unit: with units = \"{}\" the file gives {what} in {}",
                units.name(),
                unit_word(units, q)
            ),
            None if !self.hint.is_empty() => self.hint.to_string(),
            None => format!("check the value of {what}; it is probably a typing slip"),
        }
    }
}

/// The unit spelt out, for a fix that reads well ("in inches", not "in in").
fn unit_word(units: UnitSystem, q: Quantity) -> &'static str {
    match (units, q) {
        (UnitSystem::Us, Quantity::Length) => "feet",
        (UnitSystem::Us, Quantity::Diameter) => "inches",
        (UnitSystem::Si, Quantity::Length) => "metres",
        (UnitSystem::Si, Quantity::Diameter) => "millimetres",
        _ => units.symbol(q),
    }
}

pub const DIAMETER: Limit = Limit::between(
    Some(Quantity::Diameter),
    MIN_DIAMETER_M,
    MAX_DIAMETER_M,
    "any water pipe",
);
/// The largest tank diameter, m. The largest ground storage tanks are about 100 m across (from
/// memory).
pub const TANK_DIAMETER: Limit = Limit::at_most(Some(Quantity::Length), 1000.0, "any storage tank");
pub const PIPE_LENGTH: Limit = Limit::at_most(
    Some(Quantity::Length),
    MAX_PIPE_LENGTH_M,
    "any water main between two junctions",
);
pub const ELEVATION: Limit = Limit::within(
    Some(Quantity::Length),
    MAX_ABS_ELEVATION_M,
    "any water system",
);
pub const HEAD: Limit = Limit::at_most(Some(Quantity::Length), MAX_ABS_ELEVATION_M, "any pump");
pub const DEMAND: Limit = Limit::within(Some(Quantity::Flow), MAX_FLOW_M3S, "any water system");
pub const FLOW: Limit = Limit::at_most(Some(Quantity::Flow), MAX_FLOW_M3S, "any water system");
pub const PRESSURE: Limit = Limit::at_most(
    Some(Quantity::Pressure),
    MAX_PRESSURE_KPA,
    "any water system",
);
pub const VELOCITY: Limit = Limit::at_most(
    Some(Quantity::Velocity),
    MAX_VELOCITY_M_PER_S,
    "any water system",
);
pub const C_FACTOR: Limit = Limit {
    quantity: None,
    min_si: HAZEN_WILLIAMS_C.0,
    max_si: HAZEN_WILLIAMS_C.1,
    beyond: "any pipe's Hazen-Williams C",
    hint: "give the Hazen-Williams C factor: about 40 for badly tuberculated iron to 150 for plastic (a value near 0.01 is a Manning n, not a C)",
};
pub const LOSS_COEFFICIENT: Limit = Limit::at_most(
    None,
    MAX_LOSS_COEFFICIENT,
    "any fitting or valve that passes water",
)
.hint("give the loss coefficient K; a valve that passes no water is `closed`");
pub const PUMP_SPEED: Limit = Limit::at_most(None, MAX_PUMP_SPEED, "any pump drive")
    .hint("give the relative speed (1.0 = the speed of the curve)");
pub const DEMAND_FACTOR: Limit = Limit::at_most(None, MAX_DEMAND_FACTOR, "any demand pattern")
    .hint("give the ratio of the condition's demand to average-day demand (e.g. 1.5)");

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn messages_are_in_the_files_units_and_short() {
        // 1e300 in: the number is shown with an exponent, the limit in in (10 m = 393.701 in,
        // from 1 in = 25.4 mm exactly).
        let m = DIAMETER.message("diameter", 1e300, UnitSystem::Us);
        assert_eq!(
            m,
            "diameter 1e300 in is beyond any water pipe (firemain accepts between 0.0393701 and 393.701 in)"
        );
        let m = DEMAND.message("demand", -200_000.0, UnitSystem::Si);
        assert!(
            m.contains("-200000 L/s") && m.contains("between -100000 and 100000 L/s"),
            "{m}"
        );
        assert!(ELEVATION.holds(-9_999.0) && !ELEVATION.holds(10_001.0));
    }
}
