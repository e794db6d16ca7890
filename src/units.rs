//! Physical constants and unit conversions: the one place where firemain's numbers are named.
//!
//! Everything inside firemain is SI (m, m³/s, kPa, m/s). Input files are converted once when they
//! are read (`model`), and results once when they are written (`report`), with the functions here.
//! Anyone can reproduce a firemain result from the formulas in `hydraulics` and these constants.

use serde::Deserialize;

/// Standard gravity, m/s² (CGPM 1901; exact by definition).
pub const GRAVITY_M_PER_S2: f64 = 9.80665;

/// Unit weight of water in kPa per metre of head: ρ g with ρ = 1000 kg/m³ and standard gravity.
/// Gives 0.43353 psi/ft, the trade's "2.31 ft per psi".
pub const KPA_PER_M_OF_HEAD: f64 = 9.80665;

/// Kinematic viscosity of water at about 20 °C, m²/s (International Critical Tables give 1.004e-6
/// at 20 °C; 1.0e-6 is the usual rounded design value).
pub const WATER_KINEMATIC_VISCOSITY_M2_PER_S: f64 = 1.0e-6;

/// 1 ft = 0.3048 m (exact, international foot).
pub const M_PER_FT: f64 = 0.3048;
/// 1 in = 25.4 mm (exact).
pub const MM_PER_IN: f64 = 25.4;
/// 1 ft² = 0.09290304 m² (exact: the square of [`M_PER_FT`]). Building areas only; no other
/// area crosses the edge of the program, so it is not a [`Quantity`].
pub const M2_PER_FT2: f64 = M_PER_FT * M_PER_FT;
/// 1 US gallon = 3.785411784 L (exact, 231 in³).
pub const L_PER_US_GAL: f64 = 3.785411784;
/// 1 psi = 6.894757 kPa (NFPA 24 Annex D conversion; 6.894757293 to more digits).
pub const KPA_PER_PSI: f64 = 6.894757;

/// m³/s per US gallon per minute.
pub const M3S_PER_GPM: f64 = L_PER_US_GAL / 1000.0 / 60.0;

/// The unit system of a network or criteria file: every number in its files uses it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum UnitSystem {
    /// ft, in, gpm, psi, ft/s.
    Us,
    /// m, mm, L/s, kPa, m/s.
    Si,
}

/// A kind of physical quantity that crosses the edge of the program.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Lengths, elevations, grades and heads: ft | m.
    Length,
    /// Pipe and valve diameters, and Darcy-Weisbach roughness: in | mm.
    Diameter,
    /// Flows and demands: gpm | L/s.
    Flow,
    /// Pressures: psi | kPa.
    Pressure,
    /// Velocities: ft/s | m/s.
    Velocity,
}

impl UnitSystem {
    /// Factor that turns a value in this system's unit of `q` into SI (m, m, m³/s, kPa, m/s).
    fn si_factor(self, q: Quantity) -> f64 {
        match (self, q) {
            (UnitSystem::Us, Quantity::Length) => M_PER_FT,
            (UnitSystem::Us, Quantity::Diameter) => MM_PER_IN / 1000.0,
            (UnitSystem::Us, Quantity::Flow) => M3S_PER_GPM,
            (UnitSystem::Us, Quantity::Pressure) => KPA_PER_PSI,
            (UnitSystem::Us, Quantity::Velocity) => M_PER_FT,
            (UnitSystem::Si, Quantity::Length) => 1.0,
            (UnitSystem::Si, Quantity::Diameter) => 1.0e-3,
            (UnitSystem::Si, Quantity::Flow) => 1.0e-3,
            (UnitSystem::Si, Quantity::Pressure) => 1.0,
            (UnitSystem::Si, Quantity::Velocity) => 1.0,
        }
    }

    /// Converts a value given in this system's unit of `q` to SI.
    pub fn to_si(self, q: Quantity, value: f64) -> f64 {
        value * self.si_factor(q)
    }

    /// Converts an SI value to this system's unit of `q`.
    pub fn from_si(self, q: Quantity, value_si: f64) -> f64 {
        value_si / self.si_factor(q)
    }

    /// The unit as people write it: `ft`, `in`, `gpm`, `psi`, `ft/s` | `m`, `mm`, `L/s`, `kPa`, `m/s`.
    pub fn symbol(self, q: Quantity) -> &'static str {
        match (self, q) {
            (UnitSystem::Us, Quantity::Length) => "ft",
            (UnitSystem::Us, Quantity::Diameter) => "in",
            (UnitSystem::Us, Quantity::Flow) => "gpm",
            (UnitSystem::Us, Quantity::Pressure) => "psi",
            (UnitSystem::Us, Quantity::Velocity) => "ft/s",
            (UnitSystem::Si, Quantity::Length) => "m",
            (UnitSystem::Si, Quantity::Diameter) => "mm",
            (UnitSystem::Si, Quantity::Flow) => "L/s",
            (UnitSystem::Si, Quantity::Pressure) => "kPa",
            (UnitSystem::Si, Quantity::Velocity) => "m/s",
        }
    }

    /// The unit as a column-name suffix: `ft`, `in`, `gpm`, `psi`, `fps` | `m`, `mm`, `lps`, `kpa`, `mps`.
    pub fn suffix(self, q: Quantity) -> &'static str {
        match (self, q) {
            (UnitSystem::Us, Quantity::Velocity) => "fps",
            (UnitSystem::Si, Quantity::Flow) => "lps",
            (UnitSystem::Si, Quantity::Pressure) => "kpa",
            (UnitSystem::Si, Quantity::Velocity) => "mps",
            _ => self.symbol(q),
        }
    }

    /// `"us"` or `"si"`, as written in the files.
    pub fn name(self) -> &'static str {
        match self {
            UnitSystem::Us => "us",
            UnitSystem::Si => "si",
        }
    }
}

/// A number as messages show it: at most six significant digits without trailing zeros, and an
/// exponent for magnitudes from a billion up or below a thousandth (`1e300`, not 301 digits).
/// A value that is not a finite number (only ever one a file gave, as TOML spells it: `nan`,
/// `inf`) is quoted as written, so that no message states NaN or an infinity as a figure.
pub fn display_value(x: f64) -> String {
    if x.is_nan() {
        return "`nan`".to_string();
    }
    if x.is_infinite() {
        return if x > 0.0 { "`inf`" } else { "`-inf`" }.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let a = x.abs();
    if !(1.0e-3..1.0e9).contains(&a) {
        let s = format!("{x:.5e}");
        let (mantissa, exponent) = s.split_once('e').unwrap_or((&s, "0"));
        let mantissa = trim_zeros(mantissa);
        return format!("{mantissa}e{exponent}");
    }
    let integer_digits = a.log10().floor() as i32 + 1;
    let decimals = (6 - integer_digits).max(0) as usize;
    trim_zeros(&format!("{x:.decimals$}")).to_string()
}

fn trim_zeros(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

/// Pressure in kPa from a head above the point, in metres of water.
pub fn pressure_kpa_from_head_m(head_m: f64) -> f64 {
    head_m * KPA_PER_M_OF_HEAD
}

/// Head in metres of water from a pressure in kPa.
pub fn head_m_from_pressure_kpa(pressure_kpa: f64) -> f64 {
    pressure_kpa / KPA_PER_M_OF_HEAD
}

/// Relative tolerance under which two diameters are the same size (candidate sizes, cost-table
/// rows, a pipe's diameter). Sizes are typed with a few decimals in in or mm and become metres
/// through one multiplication, which rounds at about 1e-16 of the value; the finest steps
/// between sizes anyone means to tell apart (1/8 in at 1 in, 0.1 mm at 50 mm) are above 1e-3.
/// A millionth sits far from both, so the same size typed twice, or in two units, matches and
/// two real sizes never do (common practice, no source).
pub const SAME_DIAMETER_REL_TOL: f64 = 1e-6;

/// Whether diameters `a` and `b` (same unit) are the same size, within
/// [`SAME_DIAMETER_REL_TOL`] of the larger.
pub fn same_diameter(a: f64, b: f64) -> bool {
    (a - b).abs() <= SAME_DIAMETER_REL_TOL * a.abs().max(b.abs())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn trade_rule_of_2_31_ft_per_psi() {
        // 2.31 ft of water per psi; 0.433 psi per ft (fire-flow trade rule of thumb, common practice,
        // no source; the exact value at 1000 kg/m³ and standard gravity is 2.3067 ft/psi).
        let ft_per_psi = head_m_from_pressure_kpa(KPA_PER_PSI) / M_PER_FT;
        assert_relative_eq!(ft_per_psi, 2.3067, max_relative = 1e-4);
        let psi_per_ft = pressure_kpa_from_head_m(M_PER_FT) / KPA_PER_PSI;
        assert_relative_eq!(psi_per_ft, 0.43353, max_relative = 1e-4);
    }

    #[test]
    fn flow_conversions_match_published_factors() {
        // 1 L/s = 15.8503 gpm; 1 cfs = 448.831 gpm (NIST SP 811, Appendix B, from the exact
        // definitions of the US gallon and the foot).
        let gpm_per_lps = 1.0e-3 / M3S_PER_GPM;
        assert_relative_eq!(gpm_per_lps, 15.8503, max_relative = 1e-5);
        let gpm_per_cfs = M_PER_FT.powi(3) / M3S_PER_GPM;
        assert_relative_eq!(gpm_per_cfs, 448.831, max_relative = 1e-5);
    }

    #[test]
    fn display_value_never_runs_to_hundreds_of_digits() {
        // common practice, no source: the shapes firemain's messages promise.
        assert_eq!(display_value(1e300), "1e300");
        assert_eq!(display_value(-2.5e12), "-2.5e12");
        assert_eq!(display_value(1.0e-7), "1e-7");
        assert_eq!(display_value(200.0), "200");
        assert_eq!(display_value(0.11), "0.11");
        assert_eq!(display_value(393.7007874), "393.701");
        assert_eq!(display_value(328083.99), "328084");
        assert_eq!(display_value(0.0), "0");
        assert_eq!(display_value(-0.0), "0");
        // Never NaN or an infinity as a figure: the file's spelling, quoted.
        assert_eq!(display_value(f64::NAN), "`nan`");
        assert_eq!(display_value(f64::INFINITY), "`inf`");
        assert_eq!(display_value(f64::NEG_INFINITY), "`-inf`");
    }

    #[test]
    fn round_trip_every_quantity() {
        let all = [
            Quantity::Length,
            Quantity::Diameter,
            Quantity::Flow,
            Quantity::Pressure,
            Quantity::Velocity,
        ];
        for units in [UnitSystem::Us, UnitSystem::Si] {
            for q in all {
                let v = 123.456;
                assert_relative_eq!(units.from_si(q, units.to_si(q, v)), v, max_relative = 1e-14);
            }
        }
        assert_eq!(UnitSystem::Si.suffix(Quantity::Flow), "lps");
        assert_eq!(UnitSystem::Us.suffix(Quantity::Velocity), "fps");
    }

    #[test]
    fn same_diameter_matches_one_size_in_two_units_and_parts_real_sizes() {
        // 6 in = 152.4 mm exactly (1 in = 25.4 mm, the international inch); 6 and 6 1/8 in are
        // two sizes (common practice, no source).
        let six_in = UnitSystem::Us.to_si(Quantity::Diameter, 6.0);
        let mm = UnitSystem::Si.to_si(Quantity::Diameter, 152.4);
        assert!(same_diameter(six_in, mm));
        assert!(!same_diameter(
            six_in,
            UnitSystem::Us.to_si(Quantity::Diameter, 6.125)
        ));
        assert!(!same_diameter(0.15, 0.150001));
    }
}
