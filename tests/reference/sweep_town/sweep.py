#!/usr/bin/env python3
"""Independent hydrant fire-flow sweep of tests/data/sweep_town -> expected.csv beside this script.

Ran with: Python 3.11.7, numpy 2.4.6, scipy 1.17.1, fluids 1.3.1 (written into the CSV header).

Condition: max-day demand (every junction demand x max_day_factor from model.toml), sources at
their grades, plus a fire flow Q (gpm) drawn as an extra demand at the hydrant's junction.
Hydraulics: NODE-HEAD formulation (../netref.py): unknown junction heads, each pipe flow
Q = sign(dh) (|dh|/R)^(1/1.852) with R = 10.67 L/(C^1.852 D^4.8704) (SI inside; 1 ft = 0.3048 m,
1 in = 0.0254 m, 1 gal = 3.785411784 L), continuity solved with scipy.optimize.root ('hybr',
analytic Jacobian) to a junction imbalance below 1e-12 m^3/s. Pressure (psi) =
(head - elevation) [m] x 9.80665 / 6.894757.

For each hydrant:
  available_gpm         largest Q in [0, 8000] gpm such that EVERY junction keeps pressure >= 20
                        psi (system scope, no exemptions). Found by bisection on feasibility,
                        stopped when the bracket is narrower than 0.01 gpm; the value written is
                        the FEASIBLE end of the final bracket, so the exact limit lies in
                        [available_gpm, available_gpm + 0.01). (The script also finds the exact
                        crossing with brentq and checks it lies in that bracket.)
  static_psi            pressure at the hydrant's junction at Q = 0 (max-day demand only)
  residual_at_1000_psi  pressure at the hydrant's junction at Q = 1000 gpm
  binding_junction      junction with the lowest pressure at Q = available_gpm
The script asserts that no hydrant reaches the 8000 gpm cap and prints, for each hydrant, how far
the second-lowest junction pressure is above the binding one (so ties cannot flip the answer).

Re-run (from the repository root):
    pip install scipy numpy fluids
    python3 tests/reference/sweep_town/sweep.py
Deterministic; runs in a few seconds.
"""
import os
import sys

from scipy.optimize import brentq

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.dirname(HERE))
import netref  # noqa: E402

ROOT = os.path.abspath(os.path.join(HERE, "..", "..", ".."))
FOLDER = os.path.join(ROOT, "tests", "data", "sweep_town")
FLOOR_PSI = 20.0
CAP_GPM = 8000.0
BISECT_GPM = 0.01


class Sweep:
    def __init__(self, folder):
        self.net = netref.read_network(folder)
        assert self.net["units"] == "us"
        self.links = netref.make_links(self.net)
        self.fixed = {s["id"]: s["grade"] for s in self.net["sources"]}
        mdf = self.net["demand_factors"]["max_day_factor"]
        self.base = {j["id"]: j["demand"] * mdf for j in self.net["junctions"]}
        self.elev = {j["id"]: j["elev"] for j in self.net["junctions"]}
        self.jids = [j["id"] for j in self.net["junctions"]]
        self.x_warm = None
        self.worst_res = 0.0

    def pressures(self, junction, q_gpm):
        """psi at every junction with q_gpm extra demand at junction."""
        demands = dict(self.base)
        demands[junction] += q_gpm * netref.GPM
        solver = netref.NodeHeadSolver(self.jids, self.fixed, self.links, [], demands)
        x, res = solver.solve(x0=self.x_warm)
        self.worst_res = max(self.worst_res, res)
        self.x_warm = x
        h = solver.heads(x)
        return {j: (h[j] - self.elev[j]) * netref.UNIT_WEIGHT / netref.PSI for j in self.jids}

    def min_p(self, junction, q_gpm):
        p = self.pressures(junction, q_gpm)
        return min(p.values())

    def available(self, junction):
        if self.min_p(junction, 0.0) < FLOOR_PSI:
            return 0.0
        if self.min_p(junction, CAP_GPM) >= FLOOR_PSI:
            return CAP_GPM
        lo, hi = 0.0, CAP_GPM
        while hi - lo >= BISECT_GPM:
            mid = 0.5 * (lo + hi)
            if self.min_p(junction, mid) >= FLOOR_PSI:
                lo = mid
            else:
                hi = mid
        return lo, hi


def main():
    sw = Sweep(FOLDER)
    rows = []
    for h in sw.net["hydrants"]:
        j = h["junction"]
        sw.x_warm = None
        static = sw.pressures(j, 0.0)[j]
        resid1000 = sw.pressures(j, 1000.0)[j]
        got = sw.available(j)
        assert isinstance(got, tuple), f"hydrant {h['id']}: 0 or cap reached ({got})"
        lo, hi = got
        assert lo < CAP_GPM - 1.0
        exact = brentq(lambda q: sw.min_p(j, q) - FLOOR_PSI, lo, hi, xtol=1e-9)
        assert lo <= exact <= hi
        p = sw.pressures(j, lo)
        order = sorted(p.items(), key=lambda kv: kv[1])
        bind, second = order[0], order[1]
        kind = "own junction" if bind[0] == j else "another junction"
        print(f"{h['id']} at {j}: available {lo:.4f} gpm (exact crossing {exact:.5f}), static "
              f"{static:.3f} psi, at 1000 gpm {resid1000:.3f} psi, binding {bind[0]} ({kind}) "
              f"{bind[1]:.4f} psi, next {second[0]} +{second[1] - bind[1]:.3f} psi")
        rows.append((h["id"], j, lo, static, resid1000, bind[0]))
    print(f"largest junction continuity residual over all solves: {sw.worst_res:.2e} m^3/s")
    out = os.path.join(HERE, "expected.csv")
    with open(out, "w", newline="\n") as fh:
        fh.write("# Fire-flow sweep of tests/data/sweep_town at max-day demand (x max_day_factor), "
                 "system scope: every junction >= 20 psi, search cap 8000 gpm\n")
        fh.write("# available_gpm: feasible end of a bisection bracket narrower than 0.01 gpm "
                 "(exact limit in [available_gpm, available_gpm + 0.01))\n")
        fh.write("# static_psi: hydrant junction pressure at Q = 0; residual_at_1000_psi: same at "
                 "Q = 1000 gpm; binding_junction: lowest-pressure junction at available_gpm\n")
        fh.write("# independent node-head solution (scipy.optimize.root hybr), continuity residual "
                 f"< 1e-12 m^3/s (largest {sw.worst_res:.1e}); {netref.versions()}\n")
        fh.write("# generated by tests/reference/sweep_town/sweep.py\n")
        fh.write("hydrant,junction,available_gpm,static_psi,residual_at_1000_psi,binding_junction\n")
        for hid, j, q, s, r, b in rows:
            fh.write(f"{hid},{j},{float(q)!r},{float(s)!r},{float(r)!r},{b}\n")
    print("wrote", out)


if __name__ == "__main__":
    main()
