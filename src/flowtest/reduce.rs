//! Reduction of a field hydrant flow test by the published method: outlet flows from pitot
//! readings, the total test flow, its projection to a residual floor, and the hydrant class.
//!
//! Source of every formula: NFPA 291, *Recommended Practice for Water Flow Testing and Marking
//! of Hydrants* (2022 edition, section numbers as quoted): §4.9.3 (pitot discharge, US form; the
//! SI form added in the 2019 edition), §4.10 / Table 4.10.2 (pumper-outlet correction), §4.4.6
//! (the 10 % drop; the 2010 edition's §4.3.6 asked for 25 %), §4.13 (the 0.54 projection),
//! Chapter 5 (classes AA/A/B/C). AWWA M17 (4th ed. 2006) uses the same method.

use crate::units::{UnitSystem, KPA_PER_PSI, M3S_PER_GPM, MM_PER_IN};

/// Constant of the US pitot formula Q \[gpm\] = 29.83·c·d²·√p, d in in, p in psi (NFPA 291 §4.9.3).
pub const PITOT_US: f64 = 29.83;
/// Constant of the SI pitot formula Q [L/min] = 0.0666·c·d²·√p, d in mm, p in kPa (NFPA 291,
/// metric formula added in the 2019 edition).
pub const PITOT_SI: f64 = 0.0666;
/// Exponent of the projection Q_R = Q_F·((S − floor)/(S − R))^0.54 (NFPA 291 §4.13; 0.54 ≈ 1/1.85).
pub const PROJECTION_EXPONENT: f64 = 0.54;
/// Outlet coefficient of a flow tube or stream straightener (NFPA 291 §4.9.2): such outlets take
/// no pumper-outlet correction.
pub const FLOW_TUBE_COEFFICIENT: f64 = 0.95;
/// Outlets of this inside diameter and more are pumper (4½-in) outlets, in inches (a 2½-in hose
/// outlet is well below it; common practice, no source).
pub const PUMPER_OUTLET_MIN_IN: f64 = 4.0;
/// Pumper-outlet correction factor by pitot pressure, psi (NFPA 291 §4.10, Table 4.10.2).
pub const PUMPER_FACTORS: [(f64, f64); 6] = [
    (2.0, 0.97),
    (3.0, 0.92),
    (4.0, 0.89),
    (5.0, 0.86),
    (6.0, 0.84),
    (7.0, 0.83),
];
/// The usual range of pitot readings, psi: open more outlets above it, fewer below (common
/// practice; the 10-30 psi range is given in practice notes, not in NFPA 291 itself).
pub const PITOT_USUAL_PSI: (f64, f64) = (10.0, 30.0);
/// A pumper outlet's best accuracy is with pitot 5-10 psi (NFPA 291 §4.10.1).
pub const PITOT_PUMPER_USUAL_PSI: (f64, f64) = (5.0, 10.0);
/// Pressure drop under which a projection is unreliable, fraction of static (NFPA 291-2022 §4.4.6).
pub const MIN_DROP_FRACTION: f64 = 0.10;
/// The older, stricter drop guidance, fraction of static (NFPA 291-2010 §4.3.6).
pub const OLDER_MIN_DROP_FRACTION: f64 = 0.25;
/// A projection beyond this multiple of the tested flow is far beyond what the test showed
/// (common practice, no source: NFPA 291 only warns against extrapolating far).
pub const FAR_PROJECTION_RATIO: f64 = 2.0;

/// The hydrant class by rated capacity at 20 psi (NFPA 291 Chapter 5).
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub enum HydrantClass {
    /// 1,500 gpm or more; light blue bonnet.
    AA,
    /// 1,000-1,499 gpm; green.
    A,
    /// 500-999 gpm; orange.
    B,
    /// Under 500 gpm; red.
    C,
}

impl HydrantClass {
    /// The class of a rated flow, m³/s. Bounds are exact in gpm (NFPA 291 Chapter 5), so that an
    /// SI network gets the same class as a US one for the same flow.
    pub fn of_flow(q_m3s: f64) -> HydrantClass {
        let gpm = q_m3s / M3S_PER_GPM;
        // A flow shown as 1,500 gpm after conversion round-off stays in its class.
        let gpm = gpm + 1e-9 * gpm.abs();
        if gpm >= 1500.0 {
            HydrantClass::AA
        } else if gpm >= 1000.0 {
            HydrantClass::A
        } else if gpm >= 500.0 {
            HydrantClass::B
        } else {
            HydrantClass::C
        }
    }

    /// Every class, highest first.
    pub const ALL: [HydrantClass; 4] = [
        HydrantClass::AA,
        HydrantClass::A,
        HydrantClass::B,
        HydrantClass::C,
    ];

    /// The lowest flow of the class, m³/s (0 for C).
    pub fn lower_m3s(self) -> f64 {
        let gpm = match self {
            HydrantClass::AA => 1500.0,
            HydrantClass::A => 1000.0,
            HydrantClass::B => 500.0,
            HydrantClass::C => 0.0,
        };
        gpm * M3S_PER_GPM
    }

    pub fn name(self) -> &'static str {
        match self {
            HydrantClass::AA => "AA",
            HydrantClass::A => "A",
            HydrantClass::B => "B",
            HydrantClass::C => "C",
        }
    }

    /// The bonnet and cap colour (NFPA 291 Chapter 5).
    pub fn colour(self) -> &'static str {
        match self {
            HydrantClass::AA => "light blue",
            HydrantClass::A => "green",
            HydrantClass::B => "orange",
            HydrantClass::C => "red",
        }
    }
}

/// Flow of one open outlet from its pitot reading, m³/s, by the formula of the network's unit
/// system (so that a test reduced by hand in those units gives the same number).
/// `diameter_m` inside diameter, `coefficient` the outlet coefficient c, `pitot_kpa` the reading.
pub fn outlet_flow_m3s(
    units: UnitSystem,
    diameter_m: f64,
    coefficient: f64,
    pitot_kpa: f64,
) -> f64 {
    let p = pitot_kpa.max(0.0);
    match units {
        UnitSystem::Us => {
            let d_in = diameter_m * 1000.0 / MM_PER_IN;
            PITOT_US * coefficient * d_in * d_in * (p / KPA_PER_PSI).sqrt() * M3S_PER_GPM
        }
        UnitSystem::Si => {
            let d_mm = diameter_m * 1000.0;
            PITOT_SI * coefficient * d_mm * d_mm * p.sqrt() / 60_000.0
        }
    }
}

/// Whether an outlet takes the pumper-outlet correction: a pumper-size outlet without a flow tube.
pub fn is_pumper_outlet(diameter_m: f64, coefficient: f64) -> bool {
    diameter_m * 1000.0 / MM_PER_IN >= PUMPER_OUTLET_MIN_IN - 1e-9
        && coefficient < FLOW_TUBE_COEFFICIENT - 1e-9
}

/// The pumper-outlet correction factor at a pitot pressure (kPa): NFPA 291 Table 4.10.2, read
/// linearly between its whole-psi rows (common practice, no source), held at the end rows
/// outside them (readings outside 2-7 psi are warned about anyway).
pub fn pumper_factor(pitot_kpa: f64) -> f64 {
    let psi = pitot_kpa / KPA_PER_PSI;
    let t = &PUMPER_FACTORS;
    if psi <= t[0].0 {
        return t[0].1;
    }
    for w in t.windows(2) {
        let ((p0, f0), (p1, f1)) = (w[0], w[1]);
        if psi <= p1 {
            return f0 + (f1 - f0) * (psi - p0) / (p1 - p0);
        }
    }
    t[t.len() - 1].1
}

/// The flow projected to a residual `floor_kpa` from a test flow `q_f` (any unit; the result is
/// in the same unit) with static `s_kpa` and residual `r_kpa` (NFPA 291 §4.13). `None` when the
/// test shows no drop (r ≥ s); 0 when the floor is at or above the static pressure.
pub fn projected_flow(q_f: f64, s_kpa: f64, r_kpa: f64, floor_kpa: f64) -> Option<f64> {
    let drop = s_kpa - r_kpa;
    if !(drop > 0.0 && q_f.is_finite()) {
        return None;
    }
    let head = s_kpa - floor_kpa;
    if head <= 0.0 {
        return Some(0.0);
    }
    let q = q_f * (head / drop).powf(PROJECTION_EXPONENT);
    q.is_finite().then_some(q)
}

/// The warnings of a reduced test, in plain words. `pitots` are (pitot kPa, is pumper outlet).
pub fn reduction_warnings(
    units: UnitSystem,
    s_kpa: f64,
    r_kpa: f64,
    q_f: f64,
    projected: Option<f64>,
    pitots: &[(f64, bool)],
) -> Vec<String> {
    let mut w = Vec::new();
    let drop = if s_kpa > 0.0 {
        (s_kpa - r_kpa) / s_kpa
    } else {
        0.0
    };
    if drop < MIN_DROP_FRACTION {
        w.push(format!(
            "pressure drop {:.1} % of static, under 10 %: the projection is unreliable (NFPA 291-2022 §4.4.6); flow more outlets",
            drop * 100.0
        ));
    } else if drop < OLDER_MIN_DROP_FRACTION {
        w.push(format!(
            "pressure drop {:.1} % of static, under the 25 % of the older guidance (NFPA 291-2010 §4.3.6)",
            drop * 100.0
        ));
    }
    let p = |kpa: f64| match units {
        UnitSystem::Us => format!("{:.1} psi", kpa / KPA_PER_PSI),
        UnitSystem::Si => format!("{:.0} kPa", kpa),
    };
    for &(pitot, pumper) in pitots {
        let psi = pitot / KPA_PER_PSI;
        let (lo, hi) = if pumper {
            PITOT_PUMPER_USUAL_PSI
        } else {
            PITOT_USUAL_PSI
        };
        if psi < lo - 1e-9 || psi > hi + 1e-9 {
            let range = match units {
                UnitSystem::Us => format!("{lo:.0}-{hi:.0} psi"),
                UnitSystem::Si => format!("{:.0}-{:.0} kPa", lo * KPA_PER_PSI, hi * KPA_PER_PSI),
            };
            w.push(format!(
                "pitot reading {} outside the usual {range} for this outlet: open {} outlets",
                p(pitot),
                if psi > hi { "more" } else { "fewer" }
            ));
        }
    }
    if let Some(qr) = projected {
        if q_f > 0.0 && qr > FAR_PROJECTION_RATIO * q_f {
            w.push(format!(
                "the projection is {:.1} times the tested flow: far beyond what the test showed",
                qr / q_f
            ));
        }
    }
    w
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::Quantity;

    fn gpm(q_m3s: f64) -> f64 {
        q_m3s / M3S_PER_GPM
    }
    fn psi(p: f64) -> f64 {
        p * KPA_PER_PSI
    }
    fn inch(d: f64) -> f64 {
        UnitSystem::Us.to_si(Quantity::Diameter, d)
    }

    #[test]
    fn pitot_flow_of_a_hose_outlet_us() {
        // NFPA 291 §4.9.3: 29.83·0.90·2.5²·√45 = 1,125.6 gpm (worked in the §5.5 derivation
        // from the formula: 26.847 × 6.25 × 6.70820).
        let q = outlet_flow_m3s(UnitSystem::Us, inch(2.5), 0.90, psi(45.0));
        assert!((gpm(q) - 1125.6).abs() < 0.05, "{}", gpm(q));
        // Two 2½-in outlets at 30 psi: 2 × 919.0 = 1,838.1 gpm (same formula).
        let q = 2.0 * outlet_flow_m3s(UnitSystem::Us, inch(2.5), 0.90, psi(30.0));
        assert!((gpm(q) - 1838.1).abs() < 0.05, "{}", gpm(q));
    }

    #[test]
    fn pitot_flow_si_twin() {
        // NFPA 291-2019 metric formula: 0.0666·0.90·63.5²·√310.264 = 4,257 L/min (1,124.6 gpm;
        // the 0.1 % below the US form comes from the rounded 0.0666).
        let q = outlet_flow_m3s(UnitSystem::Si, 0.0635, 0.90, 45.0 * 6.894757);
        let lpm = q * 60_000.0;
        assert!((lpm - 4257.0).abs() < 0.5, "{lpm}");
    }

    #[test]
    fn pumper_outlet_correction() {
        // NFPA 291 §4.10, Table 4.10.2 rows.
        for (p, f) in PUMPER_FACTORS {
            assert!((pumper_factor(psi(p)) - f).abs() < 1e-12);
        }
        assert!((pumper_factor(psi(12.0)) - 0.83).abs() < 1e-12);
        assert!((pumper_factor(psi(1.0)) - 0.97).abs() < 1e-12);
        // Between rows, read linearly (common practice, no source).
        assert!((pumper_factor(psi(2.5)) - 0.945).abs() < 1e-9);
        // 4½-in, c 0.90, 8 psi: 29.83·0.90·20.25·√8 = 1,537.7 gpm, × 0.83 = 1,276.3 gpm
        // (NFPA 291 §4.9.3 and Table 4.10.2, as worked from the formula).
        let raw = outlet_flow_m3s(UnitSystem::Us, inch(4.5), 0.90, psi(8.0));
        assert!((gpm(raw) - 1537.7).abs() < 0.05, "{}", gpm(raw));
        assert!(is_pumper_outlet(inch(4.5), 0.90));
        assert!(
            !is_pumper_outlet(inch(4.5), 0.95),
            "flow tube: no correction"
        );
        assert!(!is_pumper_outlet(inch(2.5), 0.90));
        let corrected = raw * pumper_factor(psi(8.0));
        assert!((gpm(corrected) - 1276.3).abs() < 0.05, "{}", gpm(corrected));
    }

    #[test]
    fn projection_to_20_psi_and_other_floors() {
        // NFPA 291 §4.13: 1,125.6 × (52/20)^0.54 = 1,885.7 gpm (class AA); at 30 psi 1,680.3,
        // at 40 psi 1,450.8, at 0 psi 2,247.9 (worked from the formula).
        let q = |floor: f64| projected_flow(1125.6, psi(72.0), psi(52.0), psi(floor)).unwrap();
        assert!((q(20.0) - 1885.7).abs() < 0.05, "{}", q(20.0));
        assert!((q(30.0) - 1680.3).abs() < 0.05, "{}", q(30.0));
        assert!((q(40.0) - 1450.8).abs() < 0.05, "{}", q(40.0));
        // 2,247.95 computed; the worked figure 2,247.9 is cut, not rounded.
        assert!((q(0.0) - 2247.9).abs() < 0.1, "{}", q(0.0));
        assert_eq!(
            HydrantClass::of_flow(q(20.0) * M3S_PER_GPM),
            HydrantClass::AA
        );
        assert_eq!(
            projected_flow(1000.0, psi(50.0), psi(50.0), psi(20.0)),
            None
        );
        assert_eq!(
            projected_flow(1000.0, psi(15.0), psi(10.0), psi(20.0)),
            Some(0.0)
        );
    }

    #[test]
    fn projection_si_twin() {
        // The same test in kPa: 4,257 L/min × (358.52/137.89)^0.54 = 7,132 L/min at 137.9 kPa
        // (NFPA 291 §4.13; pressure units cancel).
        let q = projected_flow(4257.0, 496.42, 358.53, 137.90).unwrap();
        assert!((q - 7132.0).abs() < 1.0, "{q}");
    }

    #[test]
    fn class_boundaries() {
        // NFPA 291 Chapter 5: AA ≥ 1,500; A 1,000-1,499; B 500-999; C < 500 gpm.
        let c = |g: f64| HydrantClass::of_flow(g * M3S_PER_GPM);
        assert_eq!(c(1500.0), HydrantClass::AA);
        assert_eq!(c(1499.9), HydrantClass::A);
        assert_eq!(c(1000.0), HydrantClass::A);
        assert_eq!(c(999.9), HydrantClass::B);
        assert_eq!(c(500.0), HydrantClass::B);
        assert_eq!(c(499.9), HydrantClass::C);
        assert_eq!(c(0.0), HydrantClass::C);
        // Just above and below each bound, at the finest reporting step (0.001 gpm).
        for class in [HydrantClass::AA, HydrantClass::A, HydrantClass::B] {
            let bound = class.lower_m3s() / M3S_PER_GPM;
            assert_eq!(c(bound + 0.001), class);
            assert_ne!(c(bound - 0.001), class);
        }
        // The same bounds in L/s (× 3.785411784/60): 1,500 gpm = 94.635 L/s.
        let lps = UnitSystem::Si.to_si(Quantity::Flow, 1500.0 * 3.785411784 / 60.0);
        assert_eq!(HydrantClass::of_flow(lps), HydrantClass::AA);
        assert_eq!(HydrantClass::AA.colour(), "light blue");
    }

    #[test]
    fn warnings_for_small_drop_pitot_range_and_far_projection() {
        // 27.8 % drop (NFPA 291 worked test): no drop warning.
        let w = reduction_warnings(
            UnitSystem::Us,
            psi(72.0),
            psi(52.0),
            1125.6,
            Some(1885.7),
            &[(psi(45.0), false)],
        );
        assert_eq!(w.len(), 1, "{w:?}");
        assert!(w[0].contains("pitot reading 45.0 psi"), "{w:?}");
        // 5 % drop: unreliable (NFPA 291-2022 §4.4.6), and a projection far beyond.
        let w = reduction_warnings(
            UnitSystem::Us,
            psi(80.0),
            psi(76.0),
            500.0,
            Some(2200.0),
            &[(psi(20.0), false)],
        );
        assert!(w.iter().any(|s| s.contains("unreliable")), "{w:?}");
        assert!(w.iter().any(|s| s.contains("far beyond")), "{w:?}");
        // 20 % drop: only the older guidance (NFPA 291-2010 §4.3.6).
        let w = reduction_warnings(UnitSystem::Us, psi(80.0), psi(64.0), 800.0, None, &[]);
        assert!(w.len() == 1 && w[0].contains("25 %"), "{w:?}");
    }
}
