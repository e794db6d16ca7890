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

    /// One end of the limit as the message shows it, in the file's units.
    fn show(&self, bound_si: f64, units: UnitSystem) -> String {
        let si_per_unit = self.quantity.map_or(1.0, |q| units.to_si(q, 1.0));
        self.show_bound_in(bound_si, si_per_unit)
    }

    /// One end of the limit (`bound_si`) in a unit of `si_per_unit` SI units, to six digits,
    /// rounded inward where the digits shown fall outside the limit: 100 km is 328083.99 ft,
    /// which six digits show as 328084, and a length of 328084 ft is refused; the message says
    /// 328083, so that the bound it shows is accepted.
    pub fn show_bound_in(&self, bound_si: f64, si_per_unit: f64) -> String {
        let in_unit = bound_si / si_per_unit;
        let shown = display_value(in_unit);
        let accepted = |text: &str| {
            text.parse::<f64>()
                .is_ok_and(|d| self.holds(d * si_per_unit))
        };
        if accepted(&shown) || !(1.0e-3..1.0e9).contains(&in_unit.abs()) {
            return shown;
        }
        // One unit of the sixth significant digit, toward the inside of the range.
        let integer_digits = in_unit.abs().log10().floor() as i32 + 1;
        let step = 10f64.powi(integer_digits - 6);
        let inward = if bound_si >= self.max_si { -step } else { step };
        let nudged = display_value(shown.parse::<f64>().unwrap_or(in_unit) + inward);
        if accepted(&nudged) {
            nudged
        } else {
            shown
        }
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
        // 1e300 in: the number is shown with an exponent, the limit in in (10 m = 393.7008 in
        // from 1 in = 25.4 mm exactly, shown rounded inward so that 393.7 in is accepted).
        let m = DIAMETER.message("diameter", 1e300, UnitSystem::Us);
        assert_eq!(
            m,
            "diameter 1e300 in is beyond any water pipe (firemain accepts between 0.0393701 and 393.7 in)"
        );
        assert!(DIAMETER.holds(393.7 * 0.0254) && !DIAMETER.holds(393.701 * 0.0254));
        // 100 km = 328083.99 ft and 10 km = 32808.399 ft (1 ft = 0.3048 m exactly): shown
        // 328083 and ±32808.3, both inside.
        assert!(PIPE_LENGTH
            .message("length", 4e5, UnitSystem::Us)
            .contains("at most 328083 ft"));
        assert!(ELEVATION
            .message("elevation", 4e4, UnitSystem::Us)
            .contains("between -32808.3 and 32808.3 ft"));
        // docs/criteria-format.md: 100 m/s = 328.08399 ft/s, shown 328.083.
        assert!(VELOCITY
            .message("max_velocity", 400.0, UnitSystem::Us)
            .contains("at most 328.083 ft/s"));
        let m = DEMAND.message("demand", -200_000.0, UnitSystem::Si);
        assert!(
            m.contains("-200000 L/s") && m.contains("between -100000 and 100000 L/s"),
            "{m}"
        );
        assert!(ELEVATION.holds(-9_999.0) && !ELEVATION.holds(10_001.0));
    }
}
