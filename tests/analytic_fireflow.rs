//! The available fire flow against closed forms and the NFPA 291 flow-test projection.

mod common;
mod netkit;

use firemain::fireflow::{HydrantResult, LimitedBy, FLOOR_TOLERANCE_KPA};
use firemain::hydraulics::Tolerance;
use firemain::model::Network;
use netkit::{
    bisect, criteria, criteria_with_limits, fire_sweep, hw_resistance, NetFiles, KPA_PER_M,
    KPA_PER_PSI, M3S_PER_GPM, M_PER_FT, M_PER_IN,
};

/// The residual floor, psi: hydrants are rated at 20 psi residual (NFPA 291, Recommended
/// Practice for Water Flow Testing and Marking of Hydrants, §4.2.1).
const FLOOR_PSI: f64 = 20.0;
const MAX_DAY: f64 = 1.5;

fn floor_head_m() -> f64 {
    FLOOR_PSI * KPA_PER_PSI / KPA_PER_M
}

/// Resistance of a pipe given in US units (ft, in).
fn r_us(length_ft: f64, diameter_in: f64, c: f64) -> f64 {
    hw_resistance(length_ft * M_PER_FT, diameter_in * M_PER_IN, c)
}

/// Total flow (m³/s) through resistance `r` that leaves `head_m` of head for friction.
fn flow_for_head(r: f64, head_m: f64) -> f64 {
    (head_m / r).powf(1.0 / 1.852)
}

/// The search's promise: the answer is a verified passing flow, so not above the exact
/// limit, and within max(0.5 %, 1 gpm) of it. "Not above" is up to the floor tolerance the
/// search accepts as passing (`FLOOR_TOLERANCE_KPA`) plus the head tolerance of the solves that place a flow (`Tolerance::BRACKET`), turned
/// into flow by the closed form `exact_at(extra head)`.
fn assert_within_promise(id: &str, got: f64, exact: f64, exact_at: impl Fn(f64) -> f64) {
    let slack = FLOOR_TOLERANCE_KPA / KPA_PER_M + Tolerance::BRACKET.head_m;
    let upper = exact_at(slack);
    let tolerance = (0.005 * exact).max(M3S_PER_GPM);
    assert!(
        got <= upper && got >= exact - tolerance,
        "{id}: available {:.3} gpm vs exact {:.3} gpm (allowed [{:.3}, {:.3}])",
        got / M3S_PER_GPM,
        exact / M3S_PER_GPM,
        (exact - tolerance) / M3S_PER_GPM,
        upper / M3S_PER_GPM
    );
    assert!(
        ((got - exact) / exact).abs() <= 0.005,
        "{id}: not within 0.5 %"
    );
}

/// Reservoir R (grade ft) → one pipe (length ft, diameter in, C) → junction H (elevation ft,
/// average-day demand gpm) with hydrant FH requiring `required_gpm`, on a lead when given.
fn single_pipe_net(
    (grade_ft, z_ft): (f64, f64),
    (length_ft, d_in, c): (f64, f64, f64),
    demand_gpm: f64,
    required_gpm: f64,
    lead: Option<(f64, f64, Option<f64>)>,
) -> Network {
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", grade_ft)
        .junction("H", z_ft, demand_gpm)
        .pipe("P", "R", "H", length_ft, d_in, c);
    match lead {
        Some(lead) => f.hydrant_with_lead("FH", "H", Some(required_gpm), lead),
        None => f.hydrant("FH", "H", Some(required_gpm)),
    };
    f.load()
}

fn only_result(net: &Network) -> HydrantResult {
    let criteria = criteria(net, FLOOR_PSI, 8000.0, 1000.0);
    let mut results = fire_sweep(net, &criteria, 1);
    assert_eq!(results.len(), 1);
    results.pop().unwrap()
}

#[test]
fn single_pipe_hydrant_flow_matches_closed_form() {
    // Closed form: a hydrant junction at elevation z fed by one pipe from a reservoir of grade
    // G holds the floor while G − r (Q + D)^1.852 ≥ z + floor/γ, so the available fire flow is
    // Q = ((G − z − floor/γ)/r)^(1/1.852) − D, with D the junction's max-day demand
    // (Hazen-Williams, Williams & Hazen 1920; γ = 9.80665 kPa/m). Checked with no background
    // demand and with 100 gpm average-day demand at the hydrant (150 gpm max-day).
    let (grade_ft, z_ft) = (950.0, 800.0);
    let (length_ft, d_in, c) = (2000.0, 8.0, 120.0);
    for demand_gpm in [0.0, 100.0] {
        let net = single_pipe_net(
            (grade_ft, z_ft),
            (length_ft, d_in, c),
            demand_gpm,
            1000.0,
            None,
        );
        let r = r_us(length_ft, d_in, c);
        let background = MAX_DAY * demand_gpm * M3S_PER_GPM;
        let head = (grade_ft - z_ft) * M_PER_FT - floor_head_m();
        let exact_at = |extra: f64| flow_for_head(r, head + extra) - background;
        let exact = exact_at(0.0);
        let res = only_result(&net);
        let got = res.available_m3s.expect("available");
        assert_within_promise("FH", got, exact, exact_at);
        assert_eq!(res.limited_by, Some(LimitedBy::HydrantPressure));
        assert_eq!(res.critical_junction, Some(net.node_by_id("H").unwrap()));
        // Static pressure (max-day, no fire flow): (G − r D^1.852 − z) γ.
        let static_kpa = ((grade_ft - z_ft) * M_PER_FT - r * background.powf(1.852)) * KPA_PER_M;
        assert!((res.static_kpa.unwrap() - static_kpa).abs() < 1e-4);
    }
}

#[test]
fn hydrant_lead_lowers_the_available_flow_to_its_closed_form() {
    // Closed form: as `single_pipe_hydrant_flow_matches_closed_form`, with a lead of resistance
    // r_L between the junction and the hydrant, which carries the fire flow Q alone. The
    // hydrant holds the floor while G − r (Q + D)^1.852 − r_L Q^1.852 ≥ z + floor/γ
    // (Hazen-Williams, Williams & Hazen 1920, for both pipes in series); with D = 0,
    // Q = ((G − z − floor/γ)/(r + r_L))^(1/1.852), and with D > 0 the same equation's root.
    // The residual reported at the required flow is the hydrant's, after its lead.
    let (grade_ft, z_ft) = (950.0, 800.0);
    let (length_ft, d_in, c) = (2000.0, 8.0, 120.0);
    let (lead_ft, lead_in, lead_c) = (50.0, 6.0, 100.0);
    let required_gpm = 800.0;
    for demand_gpm in [0.0, 100.0] {
        let net = single_pipe_net(
            (grade_ft, z_ft),
            (length_ft, d_in, c),
            demand_gpm,
            required_gpm,
            Some((lead_ft, lead_in, Some(lead_c))),
        );
        let r = r_us(length_ft, d_in, c);
        let r_lead = r_us(lead_ft, lead_in, lead_c);
        let background = MAX_DAY * demand_gpm * M3S_PER_GPM;
        let head = (grade_ft - z_ft) * M_PER_FT - floor_head_m();
        let room = |q: f64, extra: f64| {
            head + extra - r * (q + background).powf(1.852) - r_lead * q.powf(1.852)
        };
        let exact_at = |extra: f64| bisect(0.0, 1.0, |q| room(q, extra));
        let exact = exact_at(0.0);
        if demand_gpm == 0.0 {
            let closed = flow_for_head(r + r_lead, head);
            assert!((exact - closed).abs() < 1e-12, "{exact} vs {closed}");
        }
        // The lead matters here: without it the limit is several per cent higher.
        assert!(flow_for_head(r, head) - background > 1.05 * exact);
        let res = only_result(&net);
        let got = res.available_m3s.expect("available");
        assert_within_promise("FH", got, exact, exact_at);
        assert_eq!(res.limited_by, Some(LimitedBy::HydrantPressure));
        assert_eq!(res.critical_junction, Some(net.node_by_id("H").unwrap()));
        let q_r = required_gpm * M3S_PER_GPM;
        let residual_kpa = ((grade_ft - z_ft) * M_PER_FT
            - r * (q_r + background).powf(1.852)
            - r_lead * q_r.powf(1.852))
            * KPA_PER_M;
        let got_residual = res.residual_kpa.expect("residual");
        assert!(
            (got_residual - residual_kpa).abs() < 0.01,
            "{got_residual} vs {residual_kpa}"
        );
        // No flow in the lead without a fire flow: the static pressure is the junction's.
        let static_kpa = ((grade_ft - z_ft) * M_PER_FT - r * background.powf(1.852)) * KPA_PER_M;
        assert!((res.static_kpa.unwrap() - static_kpa).abs() < 1e-4);
    }
}

#[test]
fn higher_junction_on_the_line_binds_first() {
    // Closed form: reservoir → pipe 1 → junction M (high ground, no demand) → pipe 2 →
    // hydrant junction H. The fire flow passes both pipes. M holds the floor while
    // G − r1 Q^1.852 ≥ z_M + floor/γ, H while G − (r1 + r2) Q^1.852 ≥ z_H + floor/γ. With M
    // 120 ft above H the limit at M is the smaller one:
    // Q = ((G − z_M − floor/γ)/r1)^(1/1.852), system-pressure-limited at M.
    let (grade_ft, z_m_ft, z_h_ft) = (1000.0, 920.0, 800.0);
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", grade_ft)
        .junction("M", z_m_ft, 0.0)
        .junction("H", z_h_ft, 0.0)
        .pipe("P1", "R", "M", 1000.0, 8.0, 120.0)
        .pipe("P2", "M", "H", 1000.0, 8.0, 120.0)
        .hydrant("FH", "H", Some(1000.0));
    let net = f.load();
    let r1 = r_us(1000.0, 8.0, 120.0);
    let r2 = r1;
    let head_m = (grade_ft - z_m_ft) * M_PER_FT - floor_head_m();
    let head_h = (grade_ft - z_h_ft) * M_PER_FT - floor_head_m();
    let exact_at = |extra: f64| flow_for_head(r1, head_m + extra);
    let exact = exact_at(0.0);
    // The hydrant's own limit is well above, so M really binds.
    assert!(flow_for_head(r1 + r2, head_h) > 1.2 * exact);
    let res = only_result(&net);
    let got = res.available_m3s.expect("available");
    assert_within_promise("FH", got, exact, exact_at);
    assert_eq!(res.limited_by, Some(LimitedBy::SystemPressure));
    assert_eq!(res.critical_junction, Some(net.node_by_id("M").unwrap()));
}

#[test]
fn flow_test_projection_agrees_with_available_flow_on_a_branched_network() {
    // NFPA 291, Recommended Practice for Water Flow Testing and Marking of Hydrants, §4.13: from
    // a flow test (static S, residual R at test flow Q_F) the flow at a target residual is
    // Q_R = Q_F ((S − R_target)/(S − R))^0.54, which assumes one source and a head loss ∝
    // Q^1.85. On a single-source tree with small background demand, the projection from
    // firemain's own static pressure and its residual at Q_F must agree with firemain's
    // available flow within a few percent (the background demand in the mains bends the
    // supply curve slightly; 3 % allowed, a tolerance chosen here).
    let mut f = NetFiles::us_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", 920.0)
        .junction("A", 790.0, 40.0)
        .junction("B", 775.0, 25.0)
        .junction("C", 760.0, 10.0)
        .junction("D", 770.0, 20.0)
        .pipe("P1", "R", "A", 3000.0, 12.0, 110.0)
        .pipe("P2", "A", "B", 2000.0, 8.0, 100.0)
        .pipe("P3", "B", "C", 1500.0, 8.0, 100.0)
        .pipe("P4", "A", "D", 1200.0, 8.0, 110.0)
        .hydrant("FB", "B", Some(1000.0))
        .hydrant("FC", "C", Some(1000.0))
        .hydrant("FD", "D", Some(1000.0));
    let net = f.load();
    let criteria = criteria(&net, FLOOR_PSI, 8000.0, 1000.0);
    let results = fire_sweep(&net, &criteria, 1);
    let floor_kpa = FLOOR_PSI * KPA_PER_PSI;
    for res in &results {
        let id = &net.hydrants[res.hydrant].id;
        assert_eq!(res.limited_by, Some(LimitedBy::HydrantPressure), "{id}");
        let s = res.static_kpa.unwrap();
        let r = res.residual_kpa.unwrap();
        // NFPA 291 (2022) §4.4.6 asks for a drop of at least 10 % of static for a reliable
        // projection; the 1000 gpm test flow gives that here.
        assert!((s - r) / s >= 0.10, "{id}: drop too small for a test");
        let q_test = res.required_m3s;
        let projected = q_test * ((s - floor_kpa) / (s - r)).powf(0.54);
        let got = res.available_m3s.unwrap();
        let rel = (got - projected) / projected;
        eprintln!(
            "{id}: available {:.1} gpm, projected {:.1} gpm ({:+.2} %), S {:.1} psi, R {:.1} psi",
            got / M3S_PER_GPM,
            projected / M3S_PER_GPM,
            100.0 * rel,
            s / KPA_PER_PSI,
            r / KPA_PER_PSI
        );
        assert!(rel.abs() < 0.03, "{id}: {:.2} % apart", 100.0 * rel);
    }
}

#[test]
fn hydrant_limit_above_the_cap_gives_the_cap() {
    // Closed form: hydrant junction J0 on the only pipe from the source, two small dead-end
    // branches below it on lower ground (J0 binds, see the single-pipe test). Its
    // hydrant-pressure limit ((G − z − floor/γ)/r)^(1/1.852) − max-day demand is about
    // 480 L/s, above the 300 L/s search cap, so the available flow is the cap, limited by it.
    // The odd numbers are a case found by the property tests; rounded values happen to pass.
    let grade = 97.46804671159394;
    let z0 = 1.965238465053185;
    let demands = [1.8740595433309655, 1.7052817393735349, 1.2514059079608344];
    let p0 = (269.0240676658647, 300.0, 80.0);
    let mut f = NetFiles::si_hw();
    f.max_day(MAX_DAY)
        .reservoir("R", grade)
        .junction("J0", z0, demands[0])
        .junction("J1", 0.0, demands[1])
        .junction("J2", 0.0, demands[2])
        .pipe("P0", "R", "J0", p0.0, p0.1, p0.2)
        .pipe(
            "P1",
            "J0",
            "J1",
            295.9329514416188,
            100.0,
            120.32433078315601,
        )
        .pipe(
            "P2",
            "J0",
            "J2",
            199.6066224204165,
            250.0,
            100.32571919553538,
        )
        .hydrant("FH", "J0", None);
    let net = f.load();
    // 140 kPa: 20 psi, quoted by NFPA 291 §4.2.1 as 1.4 bar.
    let floor_kpa = 140.0;
    let cap = 0.300;
    let background: f64 = demands.iter().sum::<f64>() * MAX_DAY / 1000.0;
    let r0 = hw_resistance(p0.0, p0.1 / 1000.0, p0.2);
    let limit = flow_for_head(r0, grade - z0 - floor_kpa / KPA_PER_M) - background;
    assert!(limit > 1.5 * cap);
    let c = criteria(&net, floor_kpa, cap * 1000.0, 30.0);
    let res = fire_sweep(&net, &c, 1).pop().unwrap();
    assert_eq!(res.limited_by, Some(LimitedBy::Cap), "{res:#?}");
    assert!((res.available_m3s.unwrap() - cap).abs() < 1e-12);
    // A cap just below the limit (the search then places the held flow first and verifies
    // the cap after it), and one just above (the hydrant's pressure binds, at the closed form).
    for (cap, binds) in [
        (0.95 * limit, LimitedBy::Cap),
        (1.05 * limit, LimitedBy::HydrantPressure),
    ] {
        let c = criteria(&net, floor_kpa, cap * 1000.0, 30.0);
        let res = fire_sweep(&net, &c, 1).pop().unwrap();
        assert_eq!(res.limited_by, Some(binds), "{res:#?}");
        let expected = if binds == LimitedBy::Cap { cap } else { limit };
        let available = res.available_m3s.unwrap();
        // Never above the closed form, and below it by no more than the verification's 0.1 %
        // offset under the held flow plus that flow's own tolerance (0.1 % of itself; see
        // `DRAWN_FLOW_RELATIVE` in the solver).
        assert!(
            available <= expected * (1.0 + 1e-9) && expected - available < 0.002 * expected,
            "{available} vs {expected}"
        );
    }
}

#[test]
fn zone_scope_and_exempt_junctions_leave_other_junctions_unconstrained() {
    // A reservoir feeds junction A (zone "low", the hydrant's) and, beyond it on a dead end
    // with no demand, junction B 30 m higher (zone "high"). With the fire at A, B's head equals
    // A's, so B reaches the floor first when it is constrained: system scope gives
    // Q = ((H_R − z_B − floor)/r)^(1/1.852); zone scope, or B exempt, leaves A itself binding,
    // Q = ((H_R − z_A − floor)/r)^(1/1.852) (Hazen-Williams, Williams & Hazen 1920, SI form;
    // the scope rules are firemain's criteria definitions, docs/criteria-format.md).
    let mut f = NetFiles::si_hw();
    f.reservoir("R", 60.0)
        .junction_in_zone("A", 0.0, 0.0, "low")
        .junction_in_zone("B", 30.0, 0.0, "high")
        .pipe("P1", "R", "A", 500.0, 300.0, 120.0)
        .pipe("P2", "A", "B", 400.0, 200.0, 120.0)
        .hydrant("HA", "A", None);
    let net = f.load();
    let floor_kpa = 140.0;
    let floor_m = floor_kpa / KPA_PER_M;
    let r = hw_resistance(500.0, 0.3, 120.0);
    let exact = |z: f64| ((60.0 - z - floor_m) / r).powf(1.0 / 1.852);
    let cases = [
        ("system", vec![], exact(30.0), LimitedBy::SystemPressure),
        ("zone", vec![], exact(0.0), LimitedBy::HydrantPressure),
        ("system", vec!["B"], exact(0.0), LimitedBy::HydrantPressure),
    ];
    for (scope, exempt, q, limit) in cases {
        let c = criteria_with_limits(&net, floor_kpa, 2000.0, 10.0, scope, &exempt, 0.0);
        let r = &fire_sweep(&net, &c, 1)[0];
        let got = r.available_m3s.expect("available");
        assert!(
            got <= q * 1.001 && got >= q * 0.995,
            "scope {scope}, exempt {exempt:?}: {got} vs {q} m³/s"
        );
        assert_eq!(
            r.limited_by,
            Some(limit),
            "scope {scope}, exempt {exempt:?}"
        );
    }
}
