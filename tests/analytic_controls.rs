//! Pumps, pressure-reducing and flow-control valves and check valves against closed forms.

mod common;
mod netkit;

use firemain::hydraulics::LinkState;
use firemain::model::Network;
use netkit::{bisect, hw_flow, hw_resistance, minor_loss, solve, NetFiles, KPA_PER_M};

/// Heads to 1e-6 m (the solver converges to 1e-6 m, `Tolerance::STEADY`).
const HEAD_TOL: f64 = 1e-6;

fn node(net: &Network, id: &str) -> usize {
    net.node_by_id(id).unwrap_or_else(|| panic!("no node {id}"))
}

fn link(net: &Network, id: &str) -> usize {
    net.link_by_id(id).unwrap_or_else(|| panic!("no link {id}"))
}

/// The pump curve head = s² (a − b (Q/s)^c) through shutoff head a, design point (q1, h1) and
/// runout point (q2, h2): c = ln((a − h2)/(a − h1)) / ln(q2/q1), b = (a − h1)/q1^c (our pump
/// format, docs/network-format.md §10 pumps.csv); the speed scaling is the pump affinity laws, Q ∝
/// N and H ∝ N² (from memory; as stated in pump texts such as Karassik et al., Pump Handbook).
fn pump_head(a: f64, design: (f64, f64), runout: (f64, f64), s: f64, q: f64) -> f64 {
    let c = ((a - runout.1) / (a - design.1)).ln() / (runout.0 / design.0).ln();
    let b = (a - design.1) / design.0.powf(c);
    s * s * (a - b * (q / s).powf(c))
}

// Pump PU1: shutoff 50 m, design 50 L/s at 40 m, runout 80 L/s at 25 m.
const SHUTOFF: f64 = 50.0;
const DESIGN: (f64, f64) = (0.050, 40.0);
const RUNOUT: (f64, f64) = (0.080, 25.0);

/// Lower reservoir (100 m) → pump → junction J → pipe → upper reservoir (130 m).
fn pump_between_reservoirs(speed: f64) -> Network {
    let mut f = NetFiles::si_hw();
    f.reservoir("LOW", 100.0)
        .reservoir("HIGH", 130.0)
        .junction("J", 95.0, 0.0)
        .pump(
            "PU1",
            "LOW",
            "J",
            SHUTOFF,
            (DESIGN.0 * 1000.0, DESIGN.1),
            (RUNOUT.0 * 1000.0, RUNOUT.1),
            speed,
        )
        .pipe("P", "J", "HIGH", 1500.0, 250.0, 120.0);
    f.load()
}

#[test]
fn pump_operating_point_is_where_pump_and_system_curves_meet() {
    // Closed form: the operating point solves pump head(Q) = static lift + r Q^1.852 (the
    // system curve: 30 m lift plus the Hazen-Williams loss, Williams & Hazen 1920), solved here
    // by bisection. Checked at full speed and at 0.9 speed (affinity-scaled curve).
    let r = hw_resistance(1500.0, 0.25, 120.0);
    for speed in [1.0, 0.9] {
        let net = pump_between_reservoirs(speed);
        let sol = solve(&net, 1.0, &[]);
        let q = bisect(0.0, 0.2, |q| {
            pump_head(SHUTOFF, DESIGN, RUNOUT, speed, q) - 30.0 - r * q.powf(1.852)
        });
        let pu = link(&net, "PU1");
        let got = sol.flows_m3s[pu];
        assert!(
            ((got - q) / q).abs() < 1e-3,
            "speed {speed}: pump flow {got} vs {q} m³/s"
        );
        assert_eq!(sol.states[pu], LinkState::Running);
        let j = node(&net, "J");
        let head = 100.0 + pump_head(SHUTOFF, DESIGN, RUNOUT, speed, q);
        assert!(
            (sol.heads_m[j] - head).abs() < 1e-3,
            "speed {speed}: head at J"
        );
    }
}

#[test]
fn half_speed_pump_has_a_quarter_of_the_shutoff_head() {
    // Affinity laws: H ∝ N², so at half speed the shutoff head is a quarter (from memory; pump
    // affinity laws as in Karassik et al., Pump Handbook). With the pump feeding a dead end
    // (no demand), it runs at zero flow and the dead end sits at suction grade + shutoff head.
    let mut heads = Vec::new();
    for speed in [1.0, 0.5] {
        let mut f = NetFiles::si_hw();
        f.reservoir("LOW", 100.0).junction("J", 95.0, 0.0).pump(
            "PU1",
            "LOW",
            "J",
            SHUTOFF,
            (DESIGN.0 * 1000.0, DESIGN.1),
            (RUNOUT.0 * 1000.0, RUNOUT.1),
            speed,
        );
        // A second junction on a pipe keeps the pipes table non-empty; it is a dead end too.
        f.junction("K", 95.0, 0.0)
            .pipe("P", "J", "K", 100.0, 150.0, 120.0);
        let net = f.load();
        let sol = solve(&net, 1.0, &[]);
        let pu = link(&net, "PU1");
        assert!(sol.flows_m3s[pu].abs() < 1e-9);
        heads.push(sol.heads_m[node(&net, "J")] - 100.0);
    }
    assert!(
        (heads[0] - SHUTOFF).abs() < HEAD_TOL,
        "full speed {}",
        heads[0]
    );
    assert!(
        (heads[1] - SHUTOFF / 4.0).abs() < HEAD_TOL,
        "half speed {}",
        heads[1]
    );
    // At half speed the 30 m lift between the reservoirs is above the 12.5 m shutoff head:
    // the pump can deliver nothing.
    let net = pump_between_reservoirs(0.5);
    let sol = solve(&net, 1.0, &[]);
    let pu = link(&net, "PU1");
    assert_eq!(sol.states[pu], LinkState::NoFlow);
    assert!(sol.flows_m3s[pu].abs() < 1e-9);
    assert!((sol.heads_m[node(&net, "J")] - 130.0).abs() < HEAD_TOL);
}

/// Set head of the PRV: elevation of B (10 m) + 300 kPa / 9.80665 kPa/m (docs/network-format.md §3
/// Units and §11 valves.csv).
fn prv_set_head() -> f64 {
    10.0 + 300.0 / KPA_PER_M
}

/// Source (grade `upstream`) → P1 → A → PRV V (200 mm, 300 kPa, K = 3) → B (30 L/s) → P2 →
/// C (10 L/s); with `downstream`, a second source feeds B through P3.
fn prv_network(upstream: f64, downstream: Option<f64>) -> Network {
    let mut f = NetFiles::si_hw();
    f.reservoir("UP", upstream)
        .junction("A", 20.0, 0.0)
        .junction("B", 10.0, 30.0)
        .junction("C", 5.0, 10.0)
        .pipe("P1", "UP", "A", 500.0, 300.0, 120.0)
        .valve("V", "A", "B", "prv", 200.0, 300.0, 3.0)
        .pipe("P2", "B", "C", 400.0, 150.0, 110.0);
    if let Some(grade) = downstream {
        f.reservoir("DOWN", grade)
            .pipe("P3", "DOWN", "B", 300.0, 250.0, 120.0);
    }
    f.load()
}

#[test]
fn prv_holds_its_setting_while_the_upstream_grade_is_high_enough() {
    // A regulating PRV holds the downstream junction at its set head (definition of the device,
    // docs/network-format.md §11 valves.csv). Everything downstream follows: H_C = H_B − r2
    // Q_C^1.852; the valve passes the whole downstream demand, and A = grade − r1 Q^1.852.
    let net = prv_network(100.0, None);
    let sol = solve(&net, 1.0, &[]);
    let v = link(&net, "V");
    assert_eq!(sol.states[v], LinkState::Regulating);
    let (a, b, c) = (node(&net, "A"), node(&net, "B"), node(&net, "C"));
    assert!((sol.heads_m[b] - prv_set_head()).abs() < HEAD_TOL);
    assert!((sol.pressure_kpa(&net, b) - 300.0).abs() < 1e-5);
    assert!((sol.flows_m3s[v] - 0.040).abs() < 1e-9);
    let r1 = hw_resistance(500.0, 0.3, 120.0);
    let r2 = hw_resistance(400.0, 0.15, 110.0);
    assert!((sol.heads_m[a] - (100.0 - r1 * 0.04_f64.powf(1.852))).abs() < HEAD_TOL);
    assert!((sol.heads_m[c] - (prv_set_head() - r2 * 0.01_f64.powf(1.852))).abs() < HEAD_TOL);
}

#[test]
fn prv_goes_wide_open_when_the_upstream_grade_is_too_low() {
    // With the upstream grade (38 m) below set head (40.59 m) + losses the valve cannot regulate:
    // it acts as an open valve with loss K v²/(2g) (minor-loss form, docs/network-format.md §11
    // valves.csv): H_B = grade − r1 Q^1.852 − K v²/(2g), Q = 40 L/s.
    let net = prv_network(38.0, None);
    let sol = solve(&net, 1.0, &[]);
    let v = link(&net, "V");
    assert_eq!(sol.states[v], LinkState::Open);
    let q: f64 = 0.040;
    let r1 = hw_resistance(500.0, 0.3, 120.0);
    let expected = 38.0 - r1 * q.powf(1.852) - minor_loss(3.0, 0.2, q);
    let b = node(&net, "B");
    assert!(
        (sol.heads_m[b] - expected).abs() < HEAD_TOL,
        "{} vs {expected}",
        sol.heads_m[b]
    );
    assert!(sol.heads_m[b] < prv_set_head());
    assert!((sol.flows_m3s[v] - q).abs() < 1e-9);
}

#[test]
fn prv_closes_when_the_downstream_grade_is_above_the_upstream_grade() {
    // A second source (120 m) on the downstream side, above the upstream grade (100 m): the PRV
    // passes no reverse flow and closes (docs/network-format.md §11 valves.csv). Then A sits at the
    // upstream grade (no flow in P1) and B, C are fed from the downstream source alone: H_B = 120 −
    // r3 (Q_B + Q_C)^1.852.
    let net = prv_network(100.0, Some(120.0));
    let sol = solve(&net, 1.0, &[]);
    let v = link(&net, "V");
    assert_eq!(sol.states[v], LinkState::Closed);
    assert!(sol.flows_m3s[v].abs() < 1e-12);
    let (a, b) = (node(&net, "A"), node(&net, "B"));
    assert!((sol.heads_m[a] - 100.0).abs() < HEAD_TOL);
    let r3 = hw_resistance(300.0, 0.25, 120.0);
    let expected = 120.0 - r3 * 0.04_f64.powf(1.852);
    assert!((sol.heads_m[b] - expected).abs() < HEAD_TOL);
    assert!(sol.heads_m[b] > sol.heads_m[a]);
}

/// Source 100 m → P1 → A → FCV (200 mm, K = 2) → B → P2 → source 60 m.
fn fcv_network(setting_lps: f64) -> Network {
    let mut f = NetFiles::si_hw();
    f.reservoir("R1", 100.0)
        .reservoir("R2", 60.0)
        .junction("A", 10.0, 0.0)
        .junction("B", 10.0, 0.0)
        .pipe("P1", "R1", "A", 800.0, 250.0, 120.0)
        .valve("V", "A", "B", "fcv", 200.0, setting_lps, 2.0)
        .pipe("P2", "B", "R2", 800.0, 250.0, 120.0);
    f.load()
}

#[test]
fn fcv_limits_the_flow_to_its_setting() {
    // Unregulated, the 40 m between the sources would drive about 115 L/s through the line (closed
    // form below); an FCV set to 40 L/s holds exactly that (definition of the device,
    // docs/network-format.md §11 valves.csv), and the heads follow from Hazen-Williams on either
    // side.
    let r = hw_resistance(800.0, 0.25, 120.0);
    let unregulated = bisect(0.0, 1.0, |q| {
        40.0 - 2.0 * r * q.powf(1.852) - minor_loss(2.0, 0.2, q)
    });
    assert!(unregulated > 0.1);
    let net = fcv_network(40.0);
    let sol = solve(&net, 1.0, &[]);
    let v = link(&net, "V");
    assert_eq!(sol.states[v], LinkState::Regulating);
    assert!((sol.flows_m3s[v] - 0.040).abs() < 1e-9);
    let (a, b) = (node(&net, "A"), node(&net, "B"));
    assert!((sol.heads_m[a] - (100.0 - r * 0.04_f64.powf(1.852))).abs() < HEAD_TOL);
    assert!((sol.heads_m[b] - (60.0 + r * 0.04_f64.powf(1.852))).abs() < HEAD_TOL);

    // Set above the unregulated flow, the valve stays open and the line carries the
    // unregulated flow, found by bisection on 40 m = 2 r Q^1.852 + K v²/(2g).
    let net = fcv_network(200.0);
    let sol = solve(&net, 1.0, &[]);
    assert_eq!(sol.states[v], LinkState::Open);
    assert!(
        ((sol.flows_m3s[v] - unregulated) / unregulated).abs() < 1e-6,
        "{} vs {unregulated}",
        sol.flows_m3s[v]
    );
}

#[test]
fn check_valve_pipe_closes_against_reverse_head() {
    // A junction fed from a 100 m source through a plain pipe, and connected to a second
    // source through a check-valve pipe (flow only from → to, docs/network-format.md §8 pipes.csv).
    let r1 = hw_resistance(600.0, 0.2, 120.0);
    let r2 = hw_resistance(400.0, 0.15, 120.0);
    let demand = 0.020;
    for second in [50.0, 105.0] {
        let mut f = NetFiles::si_hw();
        f.reservoir("R1", 100.0)
            .reservoir("R2", second)
            .junction("J", 10.0, demand * 1000.0)
            .pipe("P1", "R1", "J", 600.0, 200.0, 120.0)
            .check_pipe("CV", "R2", "J", 400.0, 150.0, 120.0);
        let net = f.load();
        let sol = solve(&net, 1.0, &[]);
        let cv = link(&net, "CV");
        let j = node(&net, "J");
        if second < 100.0 {
            // The junction (≈ 99 m) is above the 50 m source: the reverse head closes the
            // check valve, and J is fed by P1 alone: H = 100 − r1 D^1.852.
            assert_eq!(sol.states[cv], LinkState::Closed);
            assert!(sol.flows_m3s[cv].abs() < 1e-12);
            let expected = 100.0 - r1 * demand.powf(1.852);
            assert!((sol.heads_m[j] - expected).abs() < HEAD_TOL);
        } else {
            // Forward head: the check valve conducts, and continuity at J (two sources, one
            // equation in H) is solved by bisection.
            assert_eq!(sol.states[cv], LinkState::Open);
            let h = bisect(0.0, 105.0, |h| {
                hw_flow(r1, 100.0 - h) + hw_flow(r2, second - h) - demand
            });
            assert!((sol.heads_m[j] - h).abs() < HEAD_TOL);
            assert!(sol.flows_m3s[cv] > 0.0);
        }
    }
}

#[test]
fn fire_flow_notes_the_flow_at_which_the_prv_goes_wide_open() {
    // A fire at the PRV's downstream junction B draws more through the valve until the upstream
    // grade can no longer hold the set head plus the open valve's loss: the valve then runs wide
    // open (device definition, docs/network-format.md §11 valves.csv). The valve flow Q* at that
    // point solves 100 − r1 Q*^1.852 − K v²/(2g) = H_set (bisection here); the fire flow then is Q*
    // minus the downstream demands (30 + 10 L/s). The search locates it by bisection to 1/32 of the
    // available flow (docs/fire-flow-method.md §2).
    let mut f = NetFiles::si_hw();
    f.reservoir("UP", 100.0)
        .junction("A", 20.0, 0.0)
        .junction("B", 10.0, 30.0)
        .junction("C", 5.0, 10.0)
        .pipe("P1", "UP", "A", 500.0, 300.0, 120.0)
        .valve("V", "A", "B", "prv", 200.0, 300.0, 3.0)
        .pipe("P2", "B", "C", 400.0, 150.0, 110.0)
        .hydrant("HB", "B", None);
    let net = f.load();
    let r1 = hw_resistance(500.0, 0.3, 120.0);
    let q_star = bisect(0.04, 1.0, |q| {
        100.0 - r1 * q.powf(1.852) - minor_loss(3.0, 0.2, q) - prv_set_head()
    });
    let fire_at_opening = q_star - 0.040;
    let c = netkit::criteria(&net, 140.0, 500.0, 10.0);
    let r = &netkit::fire_sweep(&net, &c, 1)[0];
    let available = r.available_m3s.expect("available");
    assert!(
        available > fire_at_opening,
        "the valve opens below the available flow"
    );
    let v = link(&net, "V");
    let note = r
        .notes
        .iter()
        .find_map(|n| match n {
            firemain::fireflow::HydrantNote::StateChanged {
                link,
                from,
                to,
                at_flow_m3s,
            } if *link == v => Some((*from, *to, *at_flow_m3s)),
            _ => None,
        })
        .expect("a note on the valve's state change");
    assert_eq!((note.0, note.1), (LinkState::Regulating, LinkState::Open));
    assert!(
        (note.2 - fire_at_opening).abs() <= available / 32.0 + 1e-6,
        "noted at {} m³/s, opens at {fire_at_opening} m³/s",
        note.2
    );
}
