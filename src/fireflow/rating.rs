//! The rating classes of hydrants by their flow at the rating pressure: NFPA 291,
//! *Recommended Practice for Water Flow Testing and Marking of Hydrants* (2022 ed.), Chapter 5
//! (classification and marking): Class AA 1,500 gpm or more, Class A 1,000 to 1,499 gpm,
//! Class B 500 to 999 gpm, Class C below 500 gpm; in its metric figures 5,678 / 3,785 /
//! 1,893 L/min (the gpm values times 3.785, rounded). A US network is classified by the gpm
//! boundaries and an SI network by the L/min ones, so that a class agrees with the figures the
//! user reads in their own units.

use crate::units::{Quantity, UnitSystem};

/// A hydrant's rating class.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub enum RatingClass {
    C,
    B,
    A,
    AA,
}

impl RatingClass {
    pub fn name(self) -> &'static str {
        match self {
            RatingClass::AA => "AA",
            RatingClass::A => "A",
            RatingClass::B => "B",
            RatingClass::C => "C",
        }
    }

    /// Every class, highest first.
    pub const ALL: [RatingClass; 4] = [
        RatingClass::AA,
        RatingClass::A,
        RatingClass::B,
        RatingClass::C,
    ];

    /// The lower bound of the class: gpm for US networks, L/min for SI ones (0 for C).
    pub fn lower_bound(self, units: UnitSystem) -> f64 {
        let (gpm, lpm) = match self {
            RatingClass::AA => (1500.0, 5678.0),
            RatingClass::A => (1000.0, 3785.0),
            RatingClass::B => (500.0, 1893.0),
            RatingClass::C => (0.0, 0.0),
        };
        match units {
            UnitSystem::Us => gpm,
            UnitSystem::Si => lpm,
        }
    }

    /// The lower bound in m³/s.
    pub fn lower_m3s(self, units: UnitSystem) -> f64 {
        match units {
            UnitSystem::Us => units.to_si(Quantity::Flow, self.lower_bound(units)),
            UnitSystem::Si => self.lower_bound(units) / 60_000.0,
        }
    }
}

/// The class of a flow (m³/s) in a network of `units`. The flow is taken to gpm (or L/min) and
/// rounded to 0.001 first, so that a flow reported as exactly 1,500.000 gpm is Class AA however
/// its last bits fell in the conversion.
pub fn rating_class(flow_m3s: f64, units: UnitSystem) -> RatingClass {
    let value = match units {
        UnitSystem::Us => units.from_si(Quantity::Flow, flow_m3s),
        UnitSystem::Si => flow_m3s * 60_000.0,
    };
    let value = (value * 1000.0).round() / 1000.0;
    RatingClass::ALL
        .into_iter()
        .find(|c| value >= c.lower_bound(units))
        .unwrap_or(RatingClass::C)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn gpm(q: f64) -> f64 {
        UnitSystem::Us.to_si(Quantity::Flow, q)
    }

    // Class boundaries of NFPA 291 (2022 ed.), Chapter 5: AA >= 1,500 gpm, A 1,000-1,499,
    // B 500-999, C < 500.
    #[test]
    fn boundaries_at_and_around_500_1000_1500_gpm() {
        let cases = [
            (0.0, RatingClass::C),
            (499.999, RatingClass::C),
            (500.0, RatingClass::B),
            (500.001, RatingClass::B),
            (999.999, RatingClass::B),
            (1000.0, RatingClass::A),
            (1499.999, RatingClass::A),
            (1500.0, RatingClass::AA),
            (1500.001, RatingClass::AA),
            (5000.0, RatingClass::AA),
        ];
        for (q, class) in cases {
            assert_eq!(rating_class(gpm(q), UnitSystem::Us), class, "{q} gpm");
        }
    }

    // The metric boundaries of the same classes (NFPA 291, 2022 ed., Chapter 5, as quoted):
    // 1,893 / 3,785 / 5,678 L/min; at and just below each.
    #[test]
    fn litres_per_minute_boundaries_for_si_networks() {
        let lpm = |q: f64| rating_class(q / 60_000.0, UnitSystem::Si);
        assert_eq!(lpm(1892.999), RatingClass::C);
        assert_eq!(lpm(1893.0), RatingClass::B);
        assert_eq!(lpm(3784.999), RatingClass::B);
        assert_eq!(lpm(3785.0), RatingClass::A);
        assert_eq!(lpm(5677.999), RatingClass::A);
        assert_eq!(lpm(5678.0), RatingClass::AA);
    }
}
