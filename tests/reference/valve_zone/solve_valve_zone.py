#!/usr/bin/env python3
"""Independent steady states and fire flows of tests/data/valve_zone -> expected.csv, of
tests/data/valve_check -> expected_check.csv, of tests/data/valve_flat -> expected_flat.csv and
of tests/data/valve_pump -> expected_pump.csv, of tests/data/valve_two_prv ->
expected_two_prv.csv, of tests/data/valve_fcv -> expected_fcv.csv and of
tests/data/valve_fcv_reopen, valve_fcv_open and valve_prv_band -> expected_fcv_reopen.csv,
expected_fcv_open.csv and expected_prv_band.csv, beside this script.

Ran with: Python 3.11.7, numpy 2.4.6, scipy 1.17.1, fluids 1.3.1 (written into the CSV header).

The networks: a looped main (R1, J1-J5) and one zone (J6, J7, J8) fed by a PRV (J3 -> J6, holding
J6) and by a PSV (J2 -> J8, holding J2); valve_check adds a second reservoir (R3) behind a
check-valve pipe into J4 (states open: flow from -> to >= 0; closed: H_to >= H_from);
valve_flat has that reservoir and the PRV, with a plain pipe in the PSV's place; valve_pump is
valve_check with a booster pump (JS -> J5, from a suction reservoir) in place of the pipe J1 -> J5.
A pump is running (its flow one more unknown, its curve head = s^2 a - b s^(2-c) q|q|^(c-1)
through the three points one more equation; q >= 0) or off (no link; rise >= shutoff s^2 a).
valve_two_prv is another layout: a looped main (M1-M4) and a looped zone (Z1-Z4) fed by two PRVs
(M2 -> Z1, M4 -> Z3) and a PSV (M3 -> Z2); valve_fcv is that layout with a flow control valve
(M1 -> Z4) as a fourth feed, and valve_fcv_reopen and valve_fcv_open the same with other numbers
(valve_prv_band: without the PSV, with a plain pipe Z4 -> M1). Demands x max_day_factor (1.5) or x peak_hour_factor
(2.5) from model.toml; a fire flow is one extra demand at the hydrant's junction.

Formulation: NODE-HEAD (../netref.py): unknown junction heads (offsets from the source grade),
every pipe's flow an explicit function of its end heads, Q = sign(dh) (|dh|/R)^(1/1.852),
R = 10.67 L/(C^1.852 D^4.8704); continuity at every junction solved with scipy.optimize.root
('hybr', analytic Jacobian) to an imbalance below 1e-12 m^3/s (where hybr stalls, Newton's method
with step halving on the imbalance, from the same start and from the combination's last
solution, to 1e-10 m^3/s; the script fails if neither gets there). A different formulation from the
gradient algorithm of the Rust code, and no iteration between the valves: EVERY combination of
valve states (and check-valve and pump states) is solved on its own and kept only when each valve's own
conditions hold:

  set head: PRV  elevation(to)   + setting x 6.894757 / 9.80665 m (held at its downstream end)
            PSV  elevation(from) + setting x 6.894757 / 9.80665 m (held at its upstream end)
  open loss: K v^2 / (2g) on the valve's diameter (K = minor_loss)
  PRV  regulating: H_to = set, the valve flow q an unknown (out of `from`, into `to`),
               q >= 0 and H_from >= set + open loss(q)
       open:   a link with the open loss; q >= 0 (H_from >= H_to) and H_to <= set
       closed: no link; H_to >= set or H_to >= H_from
  PSV  regulating: H_from = set, q an unknown, q >= 0 and H_to <= set - open loss(q)
       open:   a link with the open loss; q >= 0 and H_from >= set
       closed: no link; H_from <= set or H_to >= H_from
  FCV  regulating: its setting's flow leaves `from` and enters `to` (a demand and a supply),
               H_from - H_to >= open loss(setting)
       open:   a link with the open loss; q <= setting (either direction)
  (conditions checked with 1e-9 m and 1e-12 m^3/s of slack; a combination that leaves a group
  of junctions without a fixed head has no solution and is skipped; solutions of different
  combinations whose heads agree within 1e-7 m are one steady state, met at a state change)

So the script finds every steady state the valves' rules allow, not one reached by iterating,
and it states how many there are. Common practice, no source, for the valve rules (the usual
textbook description of pressure-reducing and pressure-sustaining valves).

Fire flow (criteria/common-practice-us.toml): floor 20 psi at EVERY junction, search cap 8000 gpm.
available_gpm is the first crossing: the largest Q such that every flow in [0, Q] keeps every
junction at or above the floor in every steady state found. Scanned on a 10 gpm grid from 0 to
8000 gpm (the lowest pressure over all steady states at each flow), then bisected between the
last passing and the first failing grid flow to a bracket narrower than 0.001 gpm; the value
written is the passing end of that bracket. Between grid flows with the same valve states every
head falls as the fire flow rises, so the grid cannot step over a dip there; where the states
change between two grid flows the script also scans that interval at 0.1 gpm.

Rows kind,id,value (US units, full double precision); the files other than expected.csv have
the max_day scenario and the hydrant rows:
  <scenario>_head_ft, junction   head (ft) in the scenario's one steady state
  <scenario>_state, valve        regulating | open | closed
  <scenario>_flow_gpm, valve     valve flow (gpm, from -> to)
    scenarios: max_day (no fire flow), peak_hour (no fire flow), fire_J6_1300 (max day + 1300 gpm
    at J6), fire_J6_1000 (max day + 1000 gpm at J6)
  available_gpm, hydrant         as above
  binding_junction, hydrant      the lowest-pressure junction just above available_gpm
  states_at_available, hydrant   the valves' states at available_gpm, e.g. PRV=open;PSV=regulating
  steady_states_most, hydrant    the largest number of distinct steady states met at any flow of
                                 the scan (1 = unique everywhere)

Re-run (from the repository root):
    pip install scipy==1.17.1 numpy==2.4.6 fluids==1.3.1
    python3 tests/reference/valve_zone/solve_valve_zone.py
    python3 tests/reference/valve_zone/solve_valve_zone.py FOLDER   # prints another network's
                                                                    # available flows, writes nothing
Deterministic; runs in about fifteen minutes (most of it valve_pump's 36 combinations and
the 54 of each FCV network).
"""
import itertools
import math
import os
import sys

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))
import netref  # noqa: E402

ROOT = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
FLOOR_PSI = 20.0
CAP_GPM = 8000.0
GRID_GPM = 10.0
FINE_GPM = 0.1
BISECT_GPM = 0.001
# Newton's fallback stops at round-off, which lies above 1e-12 m^3/s near 2,000 gpm and where a
# pump runs at its shutoff head with pipes at zero flow beside it (2e-11 m^3/s, 3e-7 gpm)
FALLBACK_TOL = 1e-10
HEAD_SLACK = 1e-9
FLOW_SLACK = 1e-12
SAME_STATE_M = 1e-7
STATES = ("regulating", "open", "closed")
FCV_STATES = ("regulating", "open")
CHECK_STATES = ("open", "closed")
PUMP_STATES = ("running", "off")
# weight of a running pump's energy equation (m) beside the continuity equations (m^3/s)
PUMP_ROW_SCALE = 1e-3


class PumpNodeHeadSolver(netref.NodeHeadSolver):
    """The node-head solver with the flow of every running pump as one more unknown and its
    curve as one more equation, H_to - H_from = s^2 a - b s^(2-c) q|q|^(c-1) (odd beyond zero
    flow, so that the equations stay smooth; a running pump with reverse flow breaks its rule).
    Inverting the curve for the flow instead (netref's pump link) puts an infinite slope at the
    shutoff head, where Newton's method stalls."""

    def __init__(self, junction_ids, fixed, links, reg, demands, pumps):
        super().__init__(junction_ids, fixed, links, reg, demands)
        self.pumps = pumps
        self.n_base = self.n_unknown
        self.n_unknown += len(pumps)

    def eval(self, x):
        nb, nj = self.n_base, len(self.jids)
        saved, self.n_unknown = self.n_unknown, nb
        Fb, Jb = super().eval(x[:nb])
        self.n_unknown = saved
        F = np.zeros(nj + len(self.pumps))
        J = np.zeros((nj + len(self.pumps), self.n_unknown))
        F[:nj], J[:nj, :nb] = Fb, Jb
        h = self._offsets(x)
        for k, p in enumerate(self.pumps):
            c_q = nb + k
            q = x[c_q]
            for node, sign in ((p.i, -1.0), (p.j, 1.0)):
                if node in self.row:
                    F[self.row[node]] += sign * q
                    J[self.row[node], c_q] += sign
            r = nj + k
            curve = p.s * p.s * p.a - p.b * p.s ** (2.0 - p.c) * q * abs(q) ** (p.c - 1.0)
            F[r] = PUMP_ROW_SCALE * ((h[p.j] - h[p.i]) - curve)
            J[r, c_q] = PUMP_ROW_SCALE * p.b * p.s ** (2.0 - p.c) * p.c * abs(q) ** (p.c - 1.0)
            for node, sign in ((p.j, 1.0), (p.i, -1.0)):
                if node in self.col:
                    J[r, self.col[node]] += PUMP_ROW_SCALE * sign
        return F, J

    def initial_guess(self):
        # the pumps as netref's linear stand-ins (conductance 1, lift = design head) for the
        # heads, and their design flows
        base = netref.NodeHeadSolver(self.jids, {k: v + self.ref for k, v in self.fixed.items()},
                                     self.links + self.pumps, self.reg, self.demands)
        x = base.initial_guess()
        return np.concatenate([x + (base.ref - self.ref) * (np.arange(len(x)) < len(self.free)),
                               [p.design_flow for p in self.pumps]])

    def flows(self, x):
        out = super().flows(x[:self.n_base])
        for k, p in enumerate(self.pumps):
            out[p.id] = x[self.n_base + k]
        return out


def damped_newton(solver, x, steps=400):
    """Newton's method on the node-head equations, each step halved until the Euclidean norm
    of the junction imbalances falls (Armijo's rule, 1e-4). Returns (x, largest imbalance)."""
    F, J = solver.eval(x)
    for _ in range(steps):
        if np.max(np.abs(F)) < 1e-13:
            break
        dx = np.linalg.solve(J, -F)
        t, norm = 1.0, np.linalg.norm(F)
        while t > 1e-10:
            F_new, J_new = solver.eval(x + t * dx)
            if np.linalg.norm(F_new) < norm * (1.0 - 1e-4 * t):
                break
            t *= 0.5
        else:
            break
        x, F, J = x + t * dx, F_new, J_new
    return x, float(np.max(np.abs(F)))


class ValveZone:
    def __init__(self, folder):
        self.net = netref.read_network(folder)
        assert self.net["units"] == "us"
        # check-valve pipes are elements with states of their own (open or closed)
        checks = [p for p in self.net["pipes"] if p["status"] == "check"]
        for p in checks:
            p["status"] = "open"
        self.links = [l for l in netref.make_links(self.net) if l.id not in {p["id"] for p in checks}]
        self.checks = [l for l in netref.make_links(self.net) if l.id in {p["id"] for p in checks}]
        # pumps too: running (on their curve) or off (no flow)
        design = {p["id"]: p["design_flow"] for p in self.net["pumps"]}
        self.pumps = [l for l in self.links if l.id in design]
        for l in self.pumps:
            l.design_flow = design[l.id]
        self.links = [l for l in self.links if l.id not in design]
        self.sources = {s["id"]: s["grade"] for s in self.net["sources"]}
        self.elev = {j["id"]: j["elev"] for j in self.net["junctions"]}
        self.jids = [j["id"] for j in self.net["junctions"]]
        self.base = {j["id"]: j["demand"] for j in self.net["junctions"]}
        # flow control valves: (valve, setting m^3/s, the open valve as a link)
        self.fcvs = [(v, v["setting"] * netref.GPM, netref.valve_link(v))
                     for v in self.net["valves"] if v["kind"] == "fcv"]
        assert all(v["status"] == "active" for v, _, _ in self.fcvs)
        self.valves = []
        for v in self.net["valves"]:
            if v["kind"] == "fcv":
                continue
            held = v["to"] if v["kind"] == "prv" else v["from"]
            assert v["kind"] in ("prv", "psv") and v["status"] == "active"
            set_head = self.elev[held] + v["setting"] * netref.PSI / netref.UNIT_WEIGHT
            self.valves.append((v, set_head, netref.valve_link(v)))
        self.worst_res = 0.0
        self.solves = 0
        self.last = {}

    def demands(self, factor, at=None, q_gpm=0.0):
        d = {j: q * factor for j, q in self.base.items()}
        if at is not None:
            d[at] += q_gpm * netref.GPM
        return d

    def combinations(self):
        """Every combination of states: one per PRV/PSV, then one per check-valve pipe, pump
        and FCV."""
        return itertools.product(*([STATES] * len(self.valves) + [CHECK_STATES] * len(self.checks)
                                   + [PUMP_STATES] * len(self.pumps)
                                   + [FCV_STATES] * len(self.fcvs)))

    def _fcv_states(self, combo):
        return zip(self.fcvs, combo[len(self.valves) + len(self.checks) + len(self.pumps):])

    def _solve_combo(self, combo, demands, others=()):
        fixed = dict(self.sources)
        links = list(self.links)
        reg = []
        for (v, set_head, vlink), state in zip(self.valves, combo):
            if state == "regulating":
                held = v["to"] if v["kind"] == "prv" else v["from"]
                if held in fixed:
                    return None  # two valves holding one junction: not a combination here
                fixed[held] = set_head
                reg.append((v["id"], v["from"], v["to"]))
            elif state == "open":
                links.append(vlink)
        for link, state in zip(self.checks, combo[len(self.valves):]):
            if state == "open":
                links.append(link)
        pumps = [p for p, state in zip(self.pumps, combo[len(self.valves) + len(self.checks):])
                 if state == "running"]
        demands = dict(demands)
        for (v, setting, vlink), state in self._fcv_states(combo):
            if state == "regulating":
                demands[v["from"]] = demands.get(v["from"], 0.0) + setting
                demands[v["to"]] = demands.get(v["to"], 0.0) - setting
            else:
                links.append(vlink)
        free = [j for j in self.jids if j not in fixed]
        if not netref.has_supply_everywhere(free, fixed, links + pumps):
            return None
        if pumps:
            solver = PumpNodeHeadSolver(self.jids, fixed, links, reg, demands, pumps)
        else:
            solver = netref.NodeHeadSolver(self.jids, fixed, links, reg, demands)
        # hybr from the linear network's heads; where it stalls (the node-head system is stiff
        # next to pipes with almost no head difference), Newton's method with step halving on
        # the imbalance, from the same start, from this combination's last solution and, when
        # those fail too, from the heads of the other combinations solved at these demands
        try:
            x, res = solver.solve()
        except RuntimeError:
            starts = [solver.initial_guess()] + ([self.last[combo]] if combo in self.last else [])
            for h in others:
                heads = [h[j] - solver.ref for j in solver.free]
                starts.append(np.array(heads + [0.0] * (solver.n_unknown - len(heads))))
            for x0 in starts:
                x, res = damped_newton(solver, x0)
                if res < FALLBACK_TOL:
                    break
            else:
                raise RuntimeError(f"{combo}: no solve from {len(starts)} starts")
        self.last[combo] = x
        self.solves += 1
        self.worst_res = max(self.worst_res, res)
        return solver.heads(x), solver.flows(x)

    def _consistent(self, combo, h, q):
        for (v, set_head, vlink), state in zip(self.valves, combo):
            hu, hd = h[v["from"]], h[v["to"]]
            qv = q.get(v["id"], 0.0)
            loss = vlink.loss(abs(qv))
            prv = v["kind"] == "prv"
            if state == "regulating":
                ok = qv >= -FLOW_SLACK and (
                    hu >= set_head + loss - HEAD_SLACK if prv else hd <= set_head - loss + HEAD_SLACK
                )
            elif state == "open":
                ok = qv >= -FLOW_SLACK and (
                    hd <= set_head + HEAD_SLACK if prv else hu >= set_head - HEAD_SLACK
                )
            else:
                ok = hd >= hu - HEAD_SLACK or (
                    hd >= set_head - HEAD_SLACK if prv else hu <= set_head + HEAD_SLACK
                )
            if not ok:
                return False
        for link, state in zip(self.checks, combo[len(self.valves):]):
            hu, hd = h[link.i], h[link.j]
            ok = q[link.id] >= -FLOW_SLACK if state == "open" else hd >= hu - HEAD_SLACK
            if not ok:
                return False
        for p, state in zip(self.pumps, combo[len(self.valves) + len(self.checks):]):
            rise, shutoff = h[p.j] - h[p.i], p.s * p.s * p.a
            ok = q[p.id] >= -FLOW_SLACK if state == "running" else rise >= shutoff - HEAD_SLACK
            if not ok:
                return False
        for (v, setting, vlink), state in self._fcv_states(combo):
            if state == "regulating":
                ok = h[v["from"]] - h[v["to"]] >= vlink.loss(setting) - HEAD_SLACK
            else:
                ok = q[v["id"]] <= setting + FLOW_SLACK
            if not ok:
                return False
        return True

    def steady_states(self, demands):
        """Every distinct steady state: list of (combo, heads, flows)."""
        found, solved, deferred, results = [], [], [], []
        for combo in self.combinations():
            try:
                sol = self._solve_combo(combo, demands)
            except RuntimeError:
                deferred.append(combo)  # tried again below, also from the others' heads
                continue
            results.append((combo, sol))
            if sol is not None:
                solved.append(sol[0])
        for combo in deferred:
            results.append((combo, self._solve_combo(combo, demands, solved)))
        for combo, sol in results:
            if sol is None:
                continue
            h, q = sol
            if not self._consistent(combo, h, q):
                continue
            if any(max(abs(h[j] - g[j]) for j in self.jids) < SAME_STATE_M for _, g, _ in found):
                continue
            found.append((combo, h, q))
        return found

    def pressures_psi(self, h):
        return {j: (h[j] - self.elev[j]) * netref.UNIT_WEIGHT / netref.PSI for j in self.jids}

    def margin(self, at, q_gpm):
        """(lowest pressure - floor over every junction and steady state, psi; states; count)."""
        found = self.steady_states(self.demands(self.net["demand_factors"]["max_day_factor"], at, q_gpm))
        if not found:
            raise RuntimeError(f"no steady state at {q_gpm} gpm at {at}")
        worst = min(min(self.pressures_psi(h).values()) for _, h, _ in found) - FLOOR_PSI
        combos = sorted({c for c, _, _ in found})
        return worst, combos, len(found)

    def available(self, at):
        most = 0
        prev_q, prev = 0.0, self.margin(at, 0.0)
        most = max(most, prev[2])
        if prev[0] < 0.0:
            return 0.0, most
        q = 0.0
        while q < CAP_GPM:
            q = min(q + GRID_GPM, CAP_GPM)
            cur = self.margin(at, q)
            most = max(most, cur[2])
            if cur[1] != prev[1] and cur[0] >= 0.0:
                # states changed inside the step: scan it finely for a dip below the floor
                f = prev_q
                while f + FINE_GPM < q:
                    f += FINE_GPM
                    m = self.margin(at, f)
                    most = max(most, m[2])
                    if m[0] < 0.0:
                        cur, q = m, f
                        break
                    prev_q, prev = f, m
            if cur[0] < 0.0:
                lo, hi = prev_q, q
                while hi - lo >= BISECT_GPM:
                    mid = 0.5 * (lo + hi)
                    m = self.margin(at, mid)
                    most = max(most, m[2])
                    if m[0] >= 0.0:
                        lo = mid
                    else:
                        hi = mid
                return lo, most
            prev_q, prev = q, cur
        return CAP_GPM, most


def describe(combo, zone):
    ids = ([v["id"] for v, _, _ in zone.valves] + [l.id for l in zone.checks]
           + [p.id for p in zone.pumps] + [v["id"] for v, _, _ in zone.fcvs])
    return ";".join(f"{i}={s}" for i, s in zip(ids, combo))


def scenario_rows(zone, name, demands):
    found = zone.steady_states(demands)
    assert len(found) == 1, f"{name}: {len(found)} steady states: {[c for c, _, _ in found]}"
    combo, h, q = found[0]
    print(f"  {name}: {describe(combo, zone)}")
    rows = [(f"{name}_head_ft", j, h[j] / netref.FT) for j in zone.jids]
    for (v, _, _), s in zip(zone.valves, combo):
        rows.append((f"{name}_state", v["id"], s))
        rows.append((f"{name}_flow_gpm", v["id"], q.get(v["id"], 0.0) / netref.GPM))
    for (v, setting, _), s in zone._fcv_states(combo):
        rows.append((f"{name}_state", v["id"], s))
        flow = setting if s == "regulating" else q.get(v["id"], 0.0)
        rows.append((f"{name}_flow_gpm", v["id"], flow / netref.GPM))
    return rows


def survey(folder):
    """Prints the available flow of every hydrant of another network folder (nothing written)."""
    zone = ValveZone(folder)
    for hyd in zone.net["hydrants"]:
        q, most = zone.available(hyd["junction"])
        print(f"  {hyd['id']}: {q:.3f} gpm, steady states at most {most}")


def hydrant_rows(zone):
    f = zone.net["demand_factors"]
    rows = []
    for hyd in zone.net["hydrants"]:
        at = hyd["junction"]
        q, most = zone.available(at)
        found = zone.steady_states(zone.demands(f["max_day_factor"], at, q))
        above = zone.steady_states(zone.demands(f["max_day_factor"], at, q + BISECT_GPM))
        p = {}
        for _, h, _ in above:
            for j, v in zone.pressures_psi(h).items():
                p[j] = min(p.get(j, v), v)
        binding = min(p, key=p.get)
        states = "|".join(describe(c, zone) for c, _, _ in found)
        print(f"  {hyd['id']}: {q:.3f} gpm, binding {binding}, {states}, steady states at most {most}")
        rows += [("available_gpm", hyd["id"], q), ("binding_junction", hyd["id"], binding),
                 ("states_at_available", hyd["id"], states), ("steady_states_most", hyd["id"], most)]
    return rows


def write(zone, name, out, rows):
    header = [
        f"Steady states and fire flows of tests/data/{name} (US units): every combination of "
        + ("PRV/PSV/check-valve/pump" if zone.pumps else "PRV/PSV/check-valve")
        + ("/FCV" if zone.fcvs else "")
        + " states solved and kept when its own rules hold",
        "scenarios at demand x max_day_factor (1.5) or x peak_hour_factor (2.5); fire flows: floor "
        "20 psi at every junction, cap 8000 gpm, first crossing, bracket < 0.001 gpm (passing end)",
        "units: head ft, flow gpm (from -> to), available gpm; states are words",
        f"independent node-head solution, scipy.optimize.root hybr, {zone.solves} solves, "
        f"largest continuity residual {zone.worst_res:.1e} m^3/s",
        netref.versions(),
        "generated by tests/reference/valve_zone/solve_valve_zone.py",
    ]
    netref.write_kind_id_value(os.path.join(HERE, out), header, rows)
    print(f"wrote {out}: {len(rows)} rows, {zone.solves} solves")


def main():
    if len(sys.argv) > 1:
        survey(sys.argv[1])
        return
    print("valve_zone")
    zone = ValveZone(os.path.join(ROOT, "tests", "data", "valve_zone"))
    f = zone.net["demand_factors"]
    rows = []
    rows += scenario_rows(zone, "max_day", zone.demands(f["max_day_factor"]))
    rows += scenario_rows(zone, "peak_hour", zone.demands(f["peak_hour_factor"]))
    rows += scenario_rows(zone, "fire_J6_1000", zone.demands(f["max_day_factor"], "J6", 1000.0))
    rows += scenario_rows(zone, "fire_J6_1300", zone.demands(f["max_day_factor"], "J6", 1300.0))
    rows += hydrant_rows(zone)
    write(zone, "valve_zone", "expected.csv", rows)
    for name, out in (("valve_check", "expected_check.csv"), ("valve_flat", "expected_flat.csv"),
                      ("valve_pump", "expected_pump.csv"), ("valve_two_prv", "expected_two_prv.csv"),
                      ("valve_fcv", "expected_fcv.csv"),
                      ("valve_fcv_reopen", "expected_fcv_reopen.csv"),
                      ("valve_fcv_open", "expected_fcv_open.csv"),
                      ("valve_prv_band", "expected_prv_band.csv")):
        print(name)
        zone = ValveZone(os.path.join(ROOT, "tests", "data", name))
        f = zone.net["demand_factors"]
        rows = scenario_rows(zone, "max_day", zone.demands(f["max_day_factor"]))
        rows += hydrant_rows(zone)
        write(zone, name, out, rows)

if __name__ == "__main__":
    main()
