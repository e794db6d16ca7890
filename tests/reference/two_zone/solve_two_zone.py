#!/usr/bin/env python3
"""Independent steady state of tests/data/two_zone (pump + tank + PRV, US units) ->
expected.csv (base demand) and expected_high_demand.csv (low-zone demands x LOW_ZONE_FACTOR).

Ran with: Python 3.11.7, numpy 2.4.6, scipy 1.17.1, fluids 1.3.1 (written into each CSV header).

Demands: the average-day demands of junctions.csv as they stand (NO max-day factor).
  expected.csv               base demands
  expected_high_demand.csv   every junction with zone = low has its demand multiplied by
                             LOW_ZONE_FACTOR (= 3.0); high-zone demands unchanged
Sources at their grades.

Formulation: NODE-HEAD (../netref.py), unknowns = junction heads; link flows from the heads:
  * pipe (Hazen-Williams, SI inside): Q = sign(dh) (|dh|/R)^(1/1.852), R = 10.67 L/(C^1.852 D^4.8704)
  * pump PU1 (from = suction, to = discharge): curve head = s^2 (a - b (Q/s)^c) through the three
    points (a = shutoff head, c = ln((a - h_runout)/(a - h_design)) / ln(Q_runout/Q_design),
    b = (a - h_design)/Q_design^c, s = 1). Inverted: with rise = H_to - H_from,
    Q = s ((s^2 a - rise)/(s^2 b))^(1/c) for rise < s^2 a, else 0 (no reverse flow)
  * PRV V1 (H8 -> L1), set head = elev(L1) + setting * 6.894757 / 9.80665 (m). Each state is tried:
      regulating: head at L1 fixed at the set head; the valve flow is an extra unknown that
                  enters continuity at H8 (out) and L1 (in);
      open:       a link with loss K v^2/(2g) on the valve's own diameter (K = minor_loss);
      closed:     no link (a state whose solve leaves a junction group without any fixed head
                  has no solution and is dropped).
    and the state whose own conditions hold is kept (the script asserts exactly one does):
      regulating needs valve flow >= 0 and H8 >= set head + K v^2/(2g) at that flow;
      open needs valve flow >= 0 and head(L1) <= set head;
      closed needs head(L1) >= head(H8).
Each solve: scipy.optimize.root ('hybr', analytic Jacobian) to a junction imbalance < 1e-12 m^3/s.

Output rows kind,id,value in the network's US units (full double precision):
  head_ft       every junction, hydraulic grade, ft
  pressure_psi  every junction, psi = (head - elevation)[m] * 9.80665 / 6.894757
  flow_gpm      every pipe, the pump PU1 and the valve V1, gpm, positive from -> to
  pump_head_ft  PU1 head rise = head(to) - grade(from), ft
  valve_state   V1: regulating | open | closed (a word, not a number)

Re-run (from the repository root):
    pip install scipy numpy fluids
    python3 tests/reference/two_zone/solve_two_zone.py
Deterministic; runs in about a second.
"""
import os
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))
import netref  # noqa: E402

ROOT = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
FOLDER = os.path.join(ROOT, "tests", "data", "two_zone")
LOW_ZONE_FACTOR = 3.0


def solve_scenario(net, factor):
    assert net["units"] == "us"
    (v,) = net["valves"]
    assert v["kind"] == "prv" and v["status"] == "active"
    (pump,) = net["pumps"]
    elev = {j["id"]: j["elev"] for j in net["junctions"]}
    jids = [j["id"] for j in net["junctions"]]
    demands = {j["id"]: j["demand"] * (factor if j["zone"] == "low" else 1.0) for j in net["junctions"]}
    base_links = netref.make_links(net)
    sources = {s["id"]: s["grade"] for s in net["sources"]}
    set_head = elev[v["to"]] + v["setting"] * netref.PSI / netref.UNIT_WEIGHT
    vlink = netref.valve_link(v)

    results = {}
    for state in ("regulating", "open", "closed"):
        fixed = dict(sources)
        links = list(base_links)
        reg = []
        if state == "regulating":
            fixed[v["to"]] = set_head
            reg = [(v["id"], v["from"], v["to"])]
        elif state == "open":
            links.append(vlink)
        free = [j for j in jids if j not in fixed]
        if not netref.has_supply_everywhere(free, fixed, links):
            print(f"  state {state}: a junction group has no fixed head -> no solution")
            continue
        solver = netref.NodeHeadSolver(jids, fixed, links, reg, demands)
        x, res = solver.solve()
        h = solver.heads(x)
        q = solver.flows(x)
        qv = q.get(v["id"], 0.0)
        hu, hd = h[v["from"]], h[v["to"]]
        open_loss = vlink.loss(abs(qv))
        if state == "regulating":
            ok = qv >= 0.0 and hu >= set_head + open_loss
            why = f"valve flow {qv / netref.GPM:.3f} gpm, upstream {hu:.4f} m vs set+loss {set_head + open_loss:.4f} m"
        elif state == "open":
            ok = qv >= 0.0 and hd <= set_head
            why = f"valve flow {qv / netref.GPM:.3f} gpm, downstream {hd:.4f} m vs set {set_head:.4f} m"
        else:
            ok = hd >= hu
            why = f"downstream {hd:.4f} m vs upstream {hu:.4f} m"
        print(f"  state {state}: residual {res:.1e} m^3/s; {why} -> {'consistent' if ok else 'rejected'}")
        if ok:
            results[state] = (h, q, res)
    assert len(results) == 1, f"expected exactly one consistent PRV state, got {list(results)}"
    state, (h, q, res) = next(iter(results.items()))

    # the pump must be running on its curve: positive flow, head below shutoff
    a, b, c = netref.pump_curve(pump)
    rise = h[pump["to"]] - h[pump["from"]]
    qp = q[pump["id"]]
    assert qp > 0.0 and rise < a
    curve = a - b * qp ** c
    assert abs(curve - rise) < 1e-9, (curve, rise)
    print(f"  PRV {state}; pump {qp / netref.GPM:.3f} gpm at {rise / netref.FT:.4f} ft "
          f"(shutoff {a / netref.FT:.1f} ft)")

    rows = []
    for j in jids:
        rows.append(("head_ft", j, h[j] / netref.FT))
    for j in jids:
        rows.append(("pressure_psi", j, (h[j] - elev[j]) * netref.UNIT_WEIGHT / netref.PSI))
    for p in net["pipes"]:
        rows.append(("flow_gpm", p["id"], q[p["id"]] / netref.GPM))
    rows.append(("flow_gpm", pump["id"], qp / netref.GPM))
    rows.append(("flow_gpm", v["id"], q.get(v["id"], 0.0) / netref.GPM))
    rows.append(("pump_head_ft", pump["id"], rise / netref.FT))
    rows.append(("valve_state", v["id"], state))
    return rows, state, res, set_head


def main():
    net = netref.read_network(FOLDER)
    for factor, out in ((1.0, "expected.csv"), (LOW_ZONE_FACTOR, "expected_high_demand.csv")):
        print(f"scenario: low-zone demand factor {factor}")
        rows, state, res, set_head = solve_scenario(net, factor)
        header = [
            "Steady state of tests/data/two_zone (US units) at AVERAGE-DAY demand (no max-day factor)"
            + ("" if factor == 1.0 else
               f", with every zone = low junction demand multiplied by {factor!r} (high zone unchanged)"),
            f"PRV V1 state: {state}; set head {set_head / netref.FT!r} ft "
            f"(= elevation of L1 + 70 psi)",
            "units: head_ft ft, pressure_psi psi, flow_gpm gpm positive from -> to (pipes, pump PU1, "
            "valve V1), pump_head_ft ft (head rise of PU1), valve_state is a word",
            "independent node-head solution (junction heads unknown; PRV states tried one by one), "
            f"scipy.optimize.root hybr, continuity residual {res:.1e} m^3/s",
            netref.versions(),
            "generated by tests/reference/two_zone/solve_two_zone.py",
        ]
        netref.write_kind_id_value(os.path.join(HERE, out), header, rows)
        print(f"  wrote {out}: {len(rows)} rows")


if __name__ == "__main__":
    main()
