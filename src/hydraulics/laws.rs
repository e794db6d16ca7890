//! The head-loss law of every link, precomputed once per network: h_from − h_to = φ(Q), with
//! its derivative dφ/dQ for the Newton step of the gradient algorithm.
//!
//! Zero and near-zero flows: Hazen-Williams and the minor-loss term have dφ/dQ → 0 as Q → 0,
//! which would make the conductance 1/(dφ/dQ) infinite (a documented failure of the gradient
//! algorithm; Elhay & Simpson, J. Hydraul. Eng. 137(10), 2011). Below a small flow Q₀ each
//! power term c·|Q|^(p−1)·Q is replaced by the odd cubic a·Q + b·Q³ that matches its value and
//! slope at Q₀ (a = c·Q₀^(p−1)·(3−p)/2, b = c·Q₀^(p−3)·(p−1)/2). The law stays continuously
//! differentiable, which keeps Newton's steps steady where loop flows hover around zero, its
//! slope at zero is positive, which keeps the matrix positive definite, and heads change by
//! less than c·Q₀^p (a fraction of a millimetre). Pump curves are linearised near zero flow.

use super::headloss::{
    darcy_friction, darcy_friction_content, darcy_weisbach_coefficient, hazen_williams_resistance,
    minor_loss_coefficient, reynolds_number, HW_FLOW_EXPONENT,
};
use crate::model::{HeadlossFormula, Link, LinkKind, ValveKind, ValveStatus};

/// Flow below which a power law is replaced by its cubic, m³/s (1e-4 m³/s = 1.6 gpm).
pub const ZERO_FLOW_M3S: f64 = 1.0e-4;

/// φ and dφ/dQ of c·|Q|^(p−1)·Q, smoothed below [`ZERO_FLOW_M3S`].
fn smoothed_power(c: f64, p: f64, q: f64) -> (f64, f64) {
    if c == 0.0 {
        return (0.0, 0.0);
    }
    let e = ZERO_FLOW_M3S;
    let a = q.abs();
    if a >= e && p == 2.0 {
        return (c * a * q, 2.0 * c * a);
    }
    if a < e {
        let (e_p1, e_p3) = zero_flow_powers(p);
        let lin = c * e_p1 * (3.0 - p) / 2.0;
        let cub = c * e_p3 * (p - 1.0) / 2.0;
        (lin * q + cub * q * q * q, lin + 3.0 * cub * q * q)
    } else {
        let k = c * a.powf(p - 1.0);
        (k * q, p * k)
    }
}

/// (ε^(p−1), ε^(p−3)) for ε = [`ZERO_FLOW_M3S`]: constants for the two exponents in use
/// (Hazen-Williams and quadratic losses), computed once, since links below ε are common in
/// a fire-flow sweep (dead ends, quiet loops) and `powf` would dominate their evaluation.
fn zero_flow_powers(p: f64) -> (f64, f64) {
    static HAZEN_WILLIAMS: std::sync::LazyLock<(f64, f64)> = std::sync::LazyLock::new(|| {
        (
            ZERO_FLOW_M3S.powf(HW_FLOW_EXPONENT - 1.0),
            ZERO_FLOW_M3S.powf(HW_FLOW_EXPONENT - 3.0),
        )
    });
    if p == HW_FLOW_EXPONENT {
        *HAZEN_WILLIAMS
    } else if p == 2.0 {
        (ZERO_FLOW_M3S, 1.0 / ZERO_FLOW_M3S)
    } else {
        (ZERO_FLOW_M3S.powf(p - 1.0), ZERO_FLOW_M3S.powf(p - 3.0))
    }
}

/// Relative flow change within which [`LinkLaw::evaluate_with`] continues |Q|^0.852 by series.
const SERIES_RANGE: f64 = 0.05;
/// Binomial coefficients C(p, k) = p(p−1)…(p−k+1)/k! of (1 + t)^p, p = 0.852, k = 1..7.
const BINOMIAL_0852: [f64; 7] = {
    const P: f64 = HW_FLOW_EXPONENT - 1.0;
    let mut c = [0.0; 7];
    let mut term = 1.0;
    let mut k = 0;
    while k < 7 {
        term = term * (P - k as f64) / (k as f64 + 1.0);
        c[k] = term;
        k += 1;
    }
    c
};

/// ∫₀^q of [`smoothed_power`].
fn smoothed_power_content(c: f64, p: f64, q: f64) -> f64 {
    if c == 0.0 {
        return 0.0;
    }
    let e = ZERO_FLOW_M3S;
    let a = q.abs();
    let lin = c * e.powf(p - 1.0) * (3.0 - p) / 2.0;
    let cub = c * e.powf(p - 3.0) * (p - 1.0) / 2.0;
    let inner = |x: f64| 0.5 * lin * x * x + 0.25 * cub * x.powi(4);
    if a < e {
        inner(a)
    } else {
        inner(e) + c * (a.powf(p + 1.0) - e.powf(p + 1.0)) / (p + 1.0)
    }
}

/// Smallest slope dφ/dQ of a conducting link, s/m². Caps the conductance of links with no loss
/// at all (zero-length pipes, loss-free open valves) at 1e6 m²/s: 1 m³/s through it loses 1 µm.
pub const MIN_SLOPE_S_PER_M2: f64 = 1.0e-6;

/// A link's law when it conducts (pipe open, pump running, valve open or throttling).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum LinkLaw {
    /// h = r·|Q|^0.852·Q + m·|Q|·Q.
    HazenWilliams { r: f64, m: f64 },
    /// h = f(Re)·d·|Q|·Q + m·|Q|·Q.
    DarcyWeisbach {
        d: f64,
        diameter_m: f64,
        relative_roughness: f64,
        m: f64,
    },
    /// Only a minor loss: h = m·|Q|·Q (valves).
    MinorLoss { m: f64 },
    /// Head gain of a pump: h_from − h_to = −(A − B·Q^c) for Q ≥ 0.
    Pump {
        shutoff_m: f64,
        b: f64,
        c: f64,
        linear_below_m3s: f64,
    },
    /// Self-loops and other links that never carry flow.
    None,
}

impl LinkLaw {
    /// The law of `link` when conducting. For valves this is the wide-open valve, or the
    /// throttle's loss coefficient.
    pub fn of(link: &Link, formula: HeadlossFormula) -> LinkLaw {
        if link.from == link.to {
            return LinkLaw::None;
        }
        match &link.kind {
            LinkKind::Pipe(p) => {
                let m = minor_loss_coefficient(p.minor_loss, p.diameter_m);
                match formula {
                    HeadlossFormula::HazenWilliams => LinkLaw::HazenWilliams {
                        r: hazen_williams_resistance(p.length_m, p.diameter_m, p.roughness),
                        m,
                    },
                    HeadlossFormula::DarcyWeisbach => LinkLaw::DarcyWeisbach {
                        d: darcy_weisbach_coefficient(p.length_m, p.diameter_m),
                        diameter_m: p.diameter_m,
                        relative_roughness: p.roughness / p.diameter_m,
                        m,
                    },
                }
            }
            LinkKind::Pump(p) => {
                let s = p.speed;
                LinkLaw::Pump {
                    shutoff_m: s * s * p.shutoff_head_m,
                    // s²·b·(Q/s)^c = b·s^(2−c)·Q^c
                    b: p.coefficient_b * s.powf(2.0 - p.exponent_c),
                    c: p.exponent_c,
                    // 1 % of the design flow: the chord there differs from the curve by a
                    // negligible head, and it bounds the slope for exponents c < 1 and c > 1.
                    linear_below_m3s: (0.01 * p.design_point.0 * s).max(ZERO_FLOW_M3S),
                }
            }
            LinkKind::Valve(v) => {
                // A throttle that regulates (status active) is its partly closed loss K =
                // setting; any valve held open has its wide-open loss.
                let k = if v.kind == ValveKind::Throttle && v.status == ValveStatus::Active {
                    v.setting
                } else {
                    v.minor_loss
                };
                LinkLaw::MinorLoss {
                    m: minor_loss_coefficient(k, v.diameter_m),
                }
            }
        }
    }

    /// φ(Q) and dφ/dQ (the slope is never below [`MIN_SLOPE_S_PER_M2`]).
    pub fn evaluate(&self, q: f64) -> (f64, f64) {
        let (phi, slope) = match *self {
            LinkLaw::HazenWilliams { r, m } => {
                let (f1, s1) = smoothed_power(r, HW_FLOW_EXPONENT, q);
                let (f2, s2) = smoothed_power(m, 2.0, q);
                (f1 + f2, s1 + s2)
            }
            LinkLaw::DarcyWeisbach {
                d,
                diameter_m,
                relative_roughness,
                m,
            } => {
                // Friction is laminar (linear in Q) near zero flow, so it needs no smoothing;
                // the floor only avoids Re = 0.
                let a = q.abs().max(1e-12);
                let re = reynolds_number(a, diameter_m);
                let (f, df_dre) = darcy_friction(re, relative_roughness);
                // d/dQ [f(Re(Q))·d·Q²] = d·(2fQ + Q²·f'·Re/Q) for Re ∝ Q.
                let slope = d * a * (2.0 * f + df_dre * re);
                let (mf, ms) = smoothed_power(m, 2.0, q);
                (f * d * a * q + mf, slope + ms)
            }
            LinkLaw::MinorLoss { m } => smoothed_power(m, 2.0, q),
            LinkLaw::Pump {
                shutoff_m,
                b,
                c,
                linear_below_m3s,
            } => {
                if q < linear_below_m3s {
                    let k = b * linear_below_m3s.powf(c - 1.0);
                    (-shutoff_m + k * q, k)
                } else {
                    let qc1 = q.powf(c - 1.0);
                    (-shutoff_m + b * qc1 * q, b * c * qc1)
                }
            }
            LinkLaw::None => (0.0, 1.0),
        };
        (phi, slope.max(MIN_SLOPE_S_PER_M2))
    }

    /// As [`LinkLaw::evaluate`], reusing the last power |Q|^0.852 of a Hazen-Williams pipe when
    /// the flow moved by less than 5 % since: |Q|^0.852 = |Q₀|^0.852·(1 + t)^0.852 with
    /// t = |Q|/|Q₀| − 1, the binomial series taken to the seventh power of t. The first term
    /// left out is below 0.0032·|t|⁸ < 1.3e-13 relative (the series alternates with falling
    /// terms), far below the solver's tolerances. In a fire-flow sweep most links move by less
    /// than 5 % per iteration, and the power dominates the cost of evaluating the laws.
    /// `memo` holds (|Q₀|, |Q₀|^0.852) of the last exact evaluation.
    pub fn evaluate_with(&self, q: f64, memo: &mut (f64, f64)) -> (f64, f64) {
        let LinkLaw::HazenWilliams { r, m } = *self else {
            return self.evaluate(q);
        };
        let a = q.abs();
        if a < ZERO_FLOW_M3S {
            return self.evaluate(q);
        }
        let (a0, p0) = *memo;
        let t = a / a0 - 1.0;
        let power = if a0 > 0.0 && t.abs() < SERIES_RANGE {
            let c = &BINOMIAL_0852;
            p0 * (1.0
                + t * (c[0]
                    + t * (c[1] + t * (c[2] + t * (c[3] + t * (c[4] + t * (c[5] + t * c[6])))))))
        } else {
            let p = a.powf(HW_FLOW_EXPONENT - 1.0);
            *memo = (a, p);
            p
        };
        let k = r * power;
        let (f2, s2) = smoothed_power(m, 2.0, q);
        (k * q + f2, HW_FLOW_EXPONENT * k + s2)
    }

    /// Head loss from → to at flow q (for reports), m.
    pub fn headloss(&self, q: f64) -> f64 {
        self.evaluate(q).0
    }

    /// The content ∫₀^q φ(x) dx (m·m³/s) of the law [`LinkLaw::evaluate`] uses, in closed form
    /// for every law (the zero-flow smoothing included): the steady state minimises the sum of
    /// the links' contents minus the fixed grades' work, under continuity, so this is the
    /// merit function of the solver's line search, and it must be the true integral for the
    /// minimum to lie at the steady state.
    pub fn content(&self, q: f64) -> f64 {
        let a = q.abs();
        let power = |c: f64, p: f64| smoothed_power_content(c, p, q);
        match *self {
            LinkLaw::HazenWilliams { r, m } => power(r, HW_FLOW_EXPONENT) + power(m, 2.0),
            LinkLaw::DarcyWeisbach {
                d,
                diameter_m,
                relative_roughness,
                m,
            } => {
                // φ is odd, so its content is even: ∫₀^q = ∫₀^|q|. With Re = k·Q the friction
                // part ∫₀^a f(Re(x))·d·x² dx is d·(a/Re)³·J(Re). evaluate's floor of 1e-12 on
                // |Q| changes nothing: laminar friction is linear in Q, 64·d·Q/k, either way.
                let friction = if a > 0.0 {
                    let re = reynolds_number(a, diameter_m);
                    d * (a / re).powi(3) * darcy_friction_content(re, relative_roughness)
                } else {
                    0.0
                };
                friction + power(m, 2.0)
            }
            LinkLaw::MinorLoss { m } => power(m, 2.0),
            LinkLaw::Pump {
                shutoff_m,
                b,
                c,
                linear_below_m3s: l,
            } => {
                if q < l {
                    -shutoff_m * q + 0.5 * b * l.powf(c - 1.0) * q * q
                } else {
                    -shutoff_m * q
                        + 0.5 * b * l.powf(c + 1.0)
                        + b * (q.powf(c + 1.0) - l.powf(c + 1.0)) / (c + 1.0)
                }
            }
            LinkLaw::None => 0.0,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn slopes_match_finite_differences() {
        let laws = [
            LinkLaw::HazenWilliams { r: 250.0, m: 3.0 },
            LinkLaw::DarcyWeisbach {
                d: 40.0,
                diameter_m: 0.2,
                relative_roughness: 1e-3,
                m: 2.0,
            },
            LinkLaw::MinorLoss { m: 5.0 },
            LinkLaw::Pump {
                shutoff_m: 60.0,
                b: 900.0,
                c: 1.8,
                linear_below_m3s: 1e-3,
            },
        ];
        for law in &laws {
            for q in [0.003, 0.05, -0.04] {
                if matches!(law, LinkLaw::Pump { .. }) && q < 0.0 {
                    continue;
                }
                let h = 1e-7;
                let fd = (law.evaluate(q + h).0 - law.evaluate(q - h).0) / (2.0 * h);
                assert_relative_eq!(law.evaluate(q).1, fd, max_relative = 1e-5);
            }
        }
    }

    #[test]
    fn memoised_power_matches_the_exact_law() {
        let law = LinkLaw::HazenWilliams { r: 250.0, m: 3.0 };
        let mut memo = (0.0, 0.0);
        // Changes from 0.04 % to 4.99 % of the last exact flow (series), and beyond (exact).
        for q in [
            0.05, 0.050_02, 0.049_97, -0.05, 0.052_49, 0.047_51, 0.3, 0.300_1, 0.31, -0.29,
        ] {
            let exact = law.evaluate(q);
            let memoised = law.evaluate_with(q, &mut memo);
            assert_relative_eq!(exact.0, memoised.0, max_relative = 2e-13);
            assert_relative_eq!(exact.1, memoised.1, max_relative = 2e-13);
        }
    }

    #[test]
    fn content_is_the_integral_of_the_law() {
        let laws = [
            LinkLaw::HazenWilliams { r: 250.0, m: 3.0 },
            LinkLaw::MinorLoss { m: 5.0 },
            LinkLaw::Pump {
                shutoff_m: 60.0,
                b: 900.0,
                c: 1.8,
                linear_below_m3s: 1e-3,
            },
        ];
        for law in &laws {
            for q in [0.0005, 0.003, 0.05] {
                let h = 1e-7;
                let fd = (law.content(q + h) - law.content(q - h)) / (2.0 * h);
                assert_relative_eq!(law.evaluate(q).0, fd, max_relative = 1e-5, epsilon = 1e-9);
            }
        }
    }

    /// ∫₀^q φ by adaptive Simpson quadrature of `evaluate`, split at the regime boundaries
    /// `breaks` (|q| values) so that each piece is smooth. Integrated from 0 to q itself, so
    /// reverse flows run backwards over φ < 0.
    fn quadrature_content(law: &LinkLaw, q: f64, breaks: &[f64]) -> f64 {
        let g = |x: f64| law.evaluate(x).0;
        let a = q.abs();
        let mut points = vec![0.0];
        points.extend(breaks.iter().copied().filter(|&b| b < a));
        points.push(a);
        let points: Vec<f64> = points.iter().map(|p| p * q.signum()).collect();
        points
            .windows(2)
            .map(|w| {
                let scale = (g(w[1]) * (w[1] - w[0])).abs();
                adaptive_simpson(&g, w[0], w[1], 1e-13 * scale)
            })
            .sum()
    }

    /// ∫ₐᵇ g by adaptive Simpson quadrature to an absolute tolerance (Lyness, "Notes on the
    /// adaptive Simpson quadrature routine", J. ACM 16(3), 1969; the Richardson term added).
    fn adaptive_simpson(g: &dyn Fn(f64) -> f64, a: f64, b: f64, tolerance: f64) -> f64 {
        fn step(
            g: &dyn Fn(f64) -> f64,
            (a, fa): (f64, f64),
            (b, fb): (f64, f64),
            (m, fm): (f64, f64),
            whole: f64,
            tolerance: f64,
            depth: u32,
        ) -> f64 {
            let (lm, rm) = (0.5 * (a + m), 0.5 * (m + b));
            let (flm, frm) = (g(lm), g(rm));
            let left = (m - a) / 6.0 * (fa + 4.0 * flm + fm);
            let right = (b - m) / 6.0 * (fm + 4.0 * frm + fb);
            let delta = left + right - whole;
            if depth == 0 || delta.abs() <= 15.0 * tolerance {
                return left + right + delta / 15.0;
            }
            step(
                g,
                (a, fa),
                (m, fm),
                (lm, flm),
                left,
                0.5 * tolerance,
                depth - 1,
            ) + step(
                g,
                (m, fm),
                (b, fb),
                (rm, frm),
                right,
                0.5 * tolerance,
                depth - 1,
            )
        }
        let m = 0.5 * (a + b);
        let (fa, fb, fm) = (g(a), g(b), g(m));
        let whole = (b - a) / 6.0 * (fa + 4.0 * fm + fb);
        step(g, (a, fa), (b, fb), (m, fm), whole, tolerance, 50)
    }

    #[test]
    fn darcy_weisbach_content_is_the_integral_of_the_law_in_every_regime() {
        // Reference: ∫₀^q φ by adaptive Simpson quadrature of `evaluate` itself (see
        // `adaptive_simpson`), split at the flows where the law changes form (Re = 2000 and
        // 4000, and the minor loss's smoothing flow), to a relative accuracy near 1e-13 (the two agree to round-off).
        // Pipes: 150 m of 200 mm, roughness 0.2 mm, 0 (smooth) and 10 mm; minor loss K = 2.
        use crate::hydraulics::headloss::{LAMINAR_RE_MAX, TURBULENT_RE_MIN};
        let diameter_m = 0.2;
        let per_re = reynolds_number(1.0, diameter_m);
        let breaks = [
            ZERO_FLOW_M3S,
            LAMINAR_RE_MAX / per_re,
            TURBULENT_RE_MIN / per_re,
        ];
        for relative_roughness in [1e-3, 0.0, 0.05] {
            let law = LinkLaw::DarcyWeisbach {
                d: darcy_weisbach_coefficient(150.0, diameter_m),
                diameter_m,
                relative_roughness,
                m: minor_loss_coefficient(2.0, diameter_m),
            };
            // Laminar (below and above the minor loss's smoothing flow), transitional,
            // turbulent from just past Re = 4000 to Re ≈ 3e6, and reverse flows.
            let flows: [f64; 11] = [
                5e-5, 2.5e-4, 4.0e-4, 5.5e-4, 6.5e-4, 3e-3, 0.05, 0.5, -2.5e-4, -5.5e-4, -0.05,
            ];
            for q in flows {
                let reference = quadrature_content(&law, q, &breaks);
                let content = law.content(q);
                assert_relative_eq!(content, reference, max_relative = 1e-11);
                // Not the old approximation f(q)·d·|q|³/3 of the friction part (2/3 of the
                // truth in laminar flow).
                assert!(content > 0.0);
            }
        }
    }

    #[test]
    fn hazen_williams_and_minor_loss_contents_match_quadrature() {
        // The closed forms against adaptive Simpson quadrature of `evaluate` (as above),
        // across the smoothing flow and in reverse.
        let laws = [
            LinkLaw::HazenWilliams { r: 250.0, m: 3.0 },
            LinkLaw::MinorLoss { m: 5.0 },
        ];
        for law in &laws {
            for q in [5e-5, 2e-4, 0.05, -0.05, -5e-5_f64] {
                let reference = quadrature_content(law, q, &[ZERO_FLOW_M3S]);
                assert_relative_eq!(law.content(q), reference, max_relative = 1e-11);
            }
        }
    }

    #[test]
    fn linearisation_is_continuous_at_the_threshold() {
        let law = LinkLaw::HazenWilliams { r: 250.0, m: 3.0 };
        let below = law.evaluate(ZERO_FLOW_M3S * (1.0 - 1e-12)).0;
        let above = law.evaluate(ZERO_FLOW_M3S).0;
        assert_relative_eq!(below, above, max_relative = 1e-9);
        assert_eq!(law.evaluate(0.0).0, 0.0);
    }
}
