//! Pressure-dependent demand: the outflow a junction delivers at a pressure, as a fraction of
//! the demand asked.
//!
//! Relation (Wagner, Shamir & Marks, "Water distribution reliability: simulation methods",
//! J. Water Resour. Plann. Manage. 114(3), 1988 — the form from memory): with x = (p − p_min) /
//! (p_serv − p_min), the delivered fraction is 0 for x ≤ 0, √x for 0 < x < 1, and 1 for x ≥ 1.
//!
//! Smoothing: √x has an infinite slope at x = 0 and a kink at x = 1, which stall Newton's
//! method. Over a band of [`SMOOTHING_BAND`] (5 % of the range) at each end the root is replaced
//! by a cubic that matches the neighbouring pieces in value and slope (common practice, no
//! source for the particular blend):
//! - lower end, 0 ≤ x ≤ δ: f = a·x² + b·x³ with a = 5/(2√δ·δ), b = −3/(2√δ·δ²): f(0) = 0,
//!   f′(0) = 0, f(δ) = √δ, f′(δ) = 1/(2√δ); f′ > 0 on (0, δ];
//! - upper end, 1 − δ ≤ x ≤ 1: the cubic Hermite from (1 − δ, √(1 − δ)) with slope
//!   1/(2√(1 − δ)) to (1, 1) with slope 0 (monotone: its end slopes over the secant slope are
//!   about 1 and 0, inside the Fritsch–Carlson region, SIAM J. Numer. Anal. 17(2), 1980).
//!
//! So nothing is delivered at or below p_min, everything at or above p_serv exactly (a state
//! whose pressures all reach p_serv is the demand-driven state, to the last bit), and f and
//! df/dp are continuous everywhere.

use super::laws::LinkLaw;

/// Width of each smoothing band, as a fraction of p_serv − p_min.
pub const SMOOTHING_BAND: f64 = 0.05;

/// Smallest p_serv − p_min accepted, m of head: a narrower range would make the relation a
/// step that Newton's method cannot follow (common practice, no source).
pub const MIN_RANGE_M: f64 = 0.1;

/// The pressures (as heads above the junction, m) between which a demand is delivered in part.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DemandRelation {
    /// Pressure head at or below which nothing is delivered, m.
    pub minimum_m: f64,
    /// Pressure head at or above which the whole demand is delivered, m.
    pub service_m: f64,
}

impl DemandRelation {
    /// The relation between `minimum_m` and `service_m`; a range narrower than
    /// [`MIN_RANGE_M`] is widened to it above the minimum.
    pub fn new(minimum_m: f64, service_m: f64) -> Self {
        DemandRelation {
            minimum_m,
            service_m: service_m.max(minimum_m + MIN_RANGE_M),
        }
    }

    /// The delivered fraction at pressure head `p_m` and its derivative, 1/m.
    pub fn fraction(&self, p_m: f64) -> (f64, f64) {
        let range = self.service_m - self.minimum_m;
        let x = (p_m - self.minimum_m) / range;
        let (f, dfdx) = smoothed_root(x);
        (f, dfdx / range)
    }
}

/// The smoothed √x of the module doc on x ∈ ℝ, with its derivative.
pub fn smoothed_root(x: f64) -> (f64, f64) {
    let d = SMOOTHING_BAND;
    if x.is_nan() || x <= 0.0 {
        (0.0, 0.0)
    } else if x >= 1.0 {
        (1.0, 0.0)
    } else if x < d {
        let s = d.sqrt();
        let a = 5.0 / (2.0 * s * d);
        let b = -3.0 / (2.0 * s * d * d);
        (a * x * x + b * x * x * x, 2.0 * a * x + 3.0 * b * x * x)
    } else if x > 1.0 - d {
        // Cubic Hermite on [x0, 1] (t from 0 to 1).
        let x0 = 1.0 - d;
        let (f0, m0) = (x0.sqrt(), 0.5 / x0.sqrt());
        let t = (x - x0) / d;
        let (t2, t3) = (t * t, t * t * t);
        let h00 = 2.0 * t3 - 3.0 * t2 + 1.0;
        let h10 = t3 - 2.0 * t2 + t;
        let h01 = -2.0 * t3 + 3.0 * t2;
        let f = h00 * f0 + h10 * d * m0 + h01;
        let dh00 = 6.0 * t2 - 6.0 * t;
        let dh10 = 3.0 * t2 - 4.0 * t + 1.0;
        let dh01 = -6.0 * t2 + 6.0 * t;
        let df = (dh00 * f0 + dh10 * d * m0 + dh01) / d;
        (f, df)
    } else {
        let r = x.sqrt();
        (r, 0.5 / r)
    }
}

/// Pressure-dependent demands of one solve: customers' demands (the junctions' base demands
/// times the demand factor) follow `customers`, the request's extra demands (fire flows)
/// follow `extra`, on the pressure after `extra_lead` where there is one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PressureDependence {
    pub customers: DemandRelation,
    pub extra: DemandRelation,
    /// A lead between an extra demand's junction and where it is drawn (a hydrant's lateral):
    /// the extra demand then follows `extra` at the junction's pressure less the lead's loss
    /// at the flow drawn.
    pub extra_lead: Option<LinkLaw>,
}

/// Newton steps at most for the flow drawn through a lead (see
/// [`PressureDependence::extra_delivered`]); each is safeguarded by bisection.
const LEAD_STEPS: usize = 60;

impl PressureDependence {
    /// The extra demand delivered of `asked` at pressure head `p_m` (m³/s), and its derivative
    /// with respect to the junction's head (m²/s).
    ///
    /// With a lead the flow q solves q = asked·f(p − L(q)), f the `extra` fraction and L the
    /// lead's loss: φ(q) = q − asked·f(p − L(q)) rises with q (L rises and f does not fall),
    /// from φ(0) ≤ 0 to φ(asked·f(p)) ≥ 0, so the root is unique and found by Newton steps
    /// kept inside that bracket. Its derivative by implicit differentiation:
    /// dq/dp = asked·f′/(1 + asked·f′·L′(q)).
    pub fn extra_delivered(&self, asked: f64, p_m: f64) -> (f64, f64) {
        let (f, slope) = self.extra.fraction(p_m);
        let Some(lead) = &self.extra_lead else {
            return (asked * f, asked * slope);
        };
        if asked <= 0.0 || f <= 0.0 {
            return (0.0, asked * slope);
        }
        let (mut lo, mut hi) = (0.0, asked * f);
        let mut q = hi;
        for _ in 0..LEAD_STEPS {
            let (loss, loss_slope) = lead.evaluate(q);
            let (fq, sq) = self.extra.fraction(p_m - loss);
            let phi = q - asked * fq;
            if phi > 0.0 {
                hi = q;
            } else {
                lo = q;
            }
            if hi - lo <= 1e-13 * asked.max(1e-9) || phi == 0.0 {
                break;
            }
            let newton = q - phi / (1.0 + asked * sq * loss_slope);
            q = if newton > lo && newton < hi {
                newton
            } else {
                0.5 * (lo + hi)
            };
        }
        let (loss, loss_slope) = lead.evaluate(q);
        let (_, sq) = self.extra.fraction(p_m - loss);
        (q, asked * sq / (1.0 + asked * sq * loss_slope))
    }
}

/// A hydrant behind a lead drawing whatever flow puts its outlet at a head: the outflow q at
/// junction `junction` with head H satisfies L(q) = H − `outlet_head_m`, L the lead's loss.
/// Held that way, the hydrant sits at its pressure floor after its lead in one solve, as a
/// junction held at the floor without a lead does. The solver treats it as a pipe from the
/// junction to the fixed outlet head (`Hydraulics::solve_behind_lead`); [`LeadOutflow::outflow`]
/// gives the flow at a head, for a solve's first iterate. L is odd and rising, so q has the
/// sign of H − `outlet_head_m`: a head below the outlet's would push water back into the main,
/// which the fire-flow search reads as no flow.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LeadOutflow {
    pub junction: usize,
    /// Head at the hydrant's outlet, after its lead, m.
    pub outlet_head_m: f64,
    pub lead: LinkLaw,
}

/// Bisection-safeguarded Newton steps at most for [`LeadOutflow::outflow`].
const OUTFLOW_STEPS: usize = 100;

impl LeadOutflow {
    /// The outflow at head `head_m`, m³/s.
    pub fn outflow(&self, head_m: f64) -> f64 {
        let drop = head_m - self.outlet_head_m;
        if !drop.is_finite() {
            return 0.0;
        }
        let target = drop.abs();
        // Bracket [0, hi] with L(hi) ≥ target, then Newton steps kept inside it.
        let (mut lo, mut hi) = (0.0_f64, 1.0e-3_f64);
        while self.lead.headloss(hi) < target && hi < 1.0e6 {
            lo = hi;
            hi *= 2.0;
        }
        let mut q = hi;
        for _ in 0..OUTFLOW_STEPS {
            let (loss, slope) = self.lead.evaluate(q);
            let phi = loss - target;
            if phi > 0.0 {
                hi = q;
            } else {
                lo = q;
            }
            if phi == 0.0 || hi - lo <= 1e-15 * hi.max(1e-12) {
                break;
            }
            let newton = q - phi / slope;
            q = if newton > lo && newton < hi {
                newton
            } else {
                0.5 * (lo + hi)
            };
        }
        q.copysign(drop)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Through a lead of loss L(q) = r·q² (a minor-loss law, h = m·|Q|·Q), with the relation
    /// at full delivery above its service pressure and √x below it, the flow drawn solves
    /// q = asked·√((p − r·q² − p_min)/(p_serv − p_min)): squared, q²·(range + asked²·r) =
    /// asked²·(p − p_min), a closed form (common practice, no source: algebra on the module
    /// doc's relation). Its derivative against a central difference.
    #[test]
    fn a_lead_lowers_the_extra_demand_to_its_closed_form() {
        let relation = DemandRelation::new(0.0, 14.0);
        let m = 2000.0;
        let pdd = PressureDependence {
            customers: relation,
            extra: relation,
            extra_lead: Some(crate::hydraulics::laws::LinkLaw::MinorLoss { m }),
        };
        let asked = 0.063;
        for p in [4.0, 8.0, 12.0] {
            let exact = (asked * asked * p / (14.0 + asked * asked * m)).sqrt();
            let (q, slope) = pdd.extra_delivered(asked, p);
            assert!((q - exact).abs() < 1e-12, "{p}: {q} vs {exact}");
            let h = 1e-6;
            let fd = (pdd.extra_delivered(asked, p + h).0 - pdd.extra_delivered(asked, p - h).0)
                / (2.0 * h);
            assert!((slope - fd).abs() < 1e-7, "{p}: {slope} vs {fd}");
            // Without the lead, more is drawn.
            assert!(relation.fraction(p).0 * asked > q);
        }
    }

    #[test]
    fn smoothing_is_continuous_in_value_and_slope_at_every_joint() {
        // The joints of the piecewise relation (module doc): 0, δ, 1 − δ, 1.
        let d = SMOOTHING_BAND;
        for joint in [0.0, d, 1.0 - d, 1.0] {
            let e = 1e-9;
            let (fl, sl) = smoothed_root(joint - e);
            let (fr, sr) = smoothed_root(joint + e);
            assert!((fl - fr).abs() < 1e-7, "value jumps at {joint}: {fl} {fr}");
            assert!((sl - sr).abs() < 1e-5, "slope jumps at {joint}: {sl} {sr}");
        }
    }

    #[test]
    fn smoothing_is_monotone_and_close_to_the_root() {
        // √x itself (Wagner, Shamir & Marks 1988, from memory) outside the bands; within them
        // the blend stays within 0.083 of it (the largest gap, 0.0821, found by a scan of the
        // lower band at 1e6 points in a separate script; the upper band's is 0.0037).
        let mut last = 0.0;
        for k in 0..=10_000 {
            let x = k as f64 / 10_000.0;
            let (f, s) = smoothed_root(x);
            assert!(f >= last - 1e-15 && s >= 0.0, "not monotone at {x}");
            assert!(
                (f - x.sqrt()).abs() < 0.083,
                "far from the root at {x}: {f}"
            );
            if (SMOOTHING_BAND..=1.0 - SMOOTHING_BAND).contains(&x) {
                assert_eq!(f, x.sqrt());
            }
            last = f;
        }
    }

    #[test]
    fn slope_matches_finite_differences() {
        let rel = DemandRelation::new(3.0, 20.0);
        for p in [3.2, 3.5, 4.0, 10.0, 19.5, 19.9] {
            let h = 1e-6;
            let fd = (rel.fraction(p + h).0 - rel.fraction(p - h).0) / (2.0 * h);
            assert!((rel.fraction(p).1 - fd).abs() < 1e-5, "at {p}");
        }
    }

    /// Through a minor-loss lead L(q) = m·|q|·q the outflow at a head drop d above the outlet
    /// is √(d/m) (algebra on the law; common practice, no source). Below the outlet's head the
    /// flow reverses.
    #[test]
    fn a_lead_outflow_inverts_the_leads_law() {
        let m = 2000.0;
        let e = LeadOutflow {
            junction: 0,
            outlet_head_m: 50.0,
            lead: crate::hydraulics::laws::LinkLaw::MinorLoss { m },
        };
        for d in [0.5, 3.0, 12.0] {
            let q = e.outflow(50.0 + d);
            let exact = (d / m).sqrt();
            assert!((q - exact).abs() <= 1e-12 * exact, "{d}: {q} vs {exact}");
            let back = e.outflow(50.0 - d);
            assert!((back + exact).abs() <= 1e-12 * exact);
        }
    }
}
