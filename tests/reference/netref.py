"""Shared helpers for the network reference scripts in tests/reference/.

Ran with: Python 3.11.7, numpy 2.4.6, scipy 1.17.1, fluids 1.3.1.

This module is imported by the scripts beside it (loop_grid/, sweep_town/, two_zone/); it is not a
fixture itself. It holds

  * a reader for the network folder format (model.toml + CSV files; csv module only; header row,
    columns in any order, lines starting with '#' are comments, empty cell = default, unknown
    columns ignored), converting everything to SI on input;
  * a NODE-HEAD steady-state solver: the unknowns are the junction heads (plus the through-flow of
    every PRV that is currently taken as regulating). Every link's flow is an explicit function of
    the heads at its two ends, obtained by inverting the link's head-loss law, and the equations
    are continuity at every junction. The system is solved with scipy.optimize.root (MINPACK
    'hybr', analytic Jacobian). This is deliberately a different formulation from the gradient
    (Todini-Pilati) algorithm used by the Rust code, which carries the link flows as unknowns.

Physics (as fixed for the project):
  * Hazen-Williams (SI): h = 10.67 L Q^1.852 / (C^1.852 D^4.8704)
  * Darcy-Weisbach: h = f (L/D) v^2/(2g), f from fluids.friction.Colebrook for Re >= 2000,
    f = 64/Re below; nu = 1.0e-6 m^2/s
  * minor loss h = K v^2/(2g), g = 9.80665 m/s^2
  * pressure = (head - elevation) * 9.80665 kPa/m
  * pump: head = s^2 (a - b (Q/s)^c) through the three curve points
"""
import csv
import io
import math
import os
import tomllib

import numpy as np
from fluids.friction import Colebrook
from scipy.optimize import brentq, root

G = 9.80665            # m/s^2
UNIT_WEIGHT = 9.80665  # kPa per m of head
NU = 1.0e-6            # m^2/s
FT = 0.3048            # m
INCH = 0.0254          # m
GAL = 3.785411784e-3   # m^3
PSI = 6.894757         # kPa
GPM = GAL / 60.0       # m^3/s
LPS = 1.0e-3           # m^3/s
HW_K = 10.67
HW_EXP = 1.852
HW_DEXP = 4.8704
RE_LAMINAR = 2000.0


# ----------------------------------------------------------------------------------------------
# reading
# ----------------------------------------------------------------------------------------------
def read_table(path):
    """Rows of a CSV file as dicts (stripped strings). '#' lines and blank lines are skipped."""
    with open(path, newline="") as fh:
        lines = [ln for ln in fh if ln.strip() and not ln.startswith("#")]
    reader = csv.reader(io.StringIO("".join(lines)))
    header = [h.strip() for h in next(reader)]
    rows = []
    for rec in reader:
        rec = [c.strip() for c in rec] + [""] * (len(header) - len(rec))
        rows.append(dict(zip(header, rec)))
    return rows


def _num(row, key, default=None):
    v = row.get(key, "")
    if v == "":
        if default is None:
            raise ValueError(f"missing value for {key} in {row}")
        return default
    return float(v)


def _str(row, key, default):
    v = row.get(key, "")
    return v if v != "" else default


def read_network(folder):
    """Read a network folder; return a dict with everything in SI (m, m^3/s, m diameters)."""
    with open(os.path.join(folder, "model.toml"), "rb") as fh:
        model = tomllib.load(fh)
    units = model.get("units", "us")
    headloss = model.get("headloss", "hazen-williams")
    if units == "us":
        L, Dm, Qm, Pk = FT, INCH, GPM, PSI
    elif units == "si":
        L, Dm, Qm, Pk = 1.0, 1e-3, LPS, 1.0
    else:
        raise ValueError(units)
    net = {
        "name": model.get("name", ""),
        "units": units,
        "headloss": headloss,
        "demand_factors": model.get("demand", {}),
        "len_unit": L, "flow_unit": Qm, "pressure_unit_kpa": Pk,
        "junctions": [], "sources": [], "pipes": [], "pumps": [], "valves": [], "hydrants": [],
    }
    for r in read_table(os.path.join(folder, "junctions.csv")):
        net["junctions"].append({"id": r["id"], "elev": _num(r, "elevation") * L,
                                 "demand": _num(r, "demand", 0.0) * Qm,
                                 "zone": _str(r, "zone", "")})
    for r in read_table(os.path.join(folder, "sources.csv")):
        net["sources"].append({"id": r["id"], "kind": r["kind"], "grade": _num(r, "grade") * L})
    for r in read_table(os.path.join(folder, "pipes.csv")):
        rough = _num(r, "roughness")
        if headloss == "darcy-weisbach":
            rough = rough * Dm  # absolute roughness in the diameter unit
        net["pipes"].append({"id": r["id"], "from": r["from"], "to": r["to"],
                             "length": _num(r, "length") * L, "diameter": _num(r, "diameter") * Dm,
                             "roughness": rough, "minor_loss": _num(r, "minor_loss", 0.0),
                             "status": _str(r, "status", "open")})
    p = os.path.join(folder, "pumps.csv")
    if os.path.exists(p):
        for r in read_table(p):
            net["pumps"].append({
                "id": r["id"], "from": r["from"], "to": r["to"],
                "shutoff_head": _num(r, "shutoff_head") * L,
                "design_flow": _num(r, "design_flow") * Qm, "design_head": _num(r, "design_head") * L,
                "runout_flow": _num(r, "runout_flow") * Qm, "runout_head": _num(r, "runout_head") * L,
                "speed": _num(r, "speed", 1.0), "status": _str(r, "status", "on")})
    p = os.path.join(folder, "valves.csv")
    if os.path.exists(p):
        for r in read_table(p):
            net["valves"].append({"id": r["id"], "from": r["from"], "to": r["to"], "kind": r["kind"],
                                  "diameter": _num(r, "diameter") * Dm,
                                  "setting": _num(r, "setting"),  # network units (pressure for prv)
                                  "minor_loss": _num(r, "minor_loss", 0.0),
                                  "status": _str(r, "status", "active")})
    p = os.path.join(folder, "hydrants.csv")
    if os.path.exists(p):
        for r in read_table(p):
            net["hydrants"].append({"id": r["id"], "junction": r["junction"]})
    return net


def pump_curve(p):
    """(a, b, c) of head = a - b Q^c in SI from the three points."""
    a = p["shutoff_head"]
    c = math.log((a - p["runout_head"]) / (a - p["design_head"])) / math.log(p["runout_flow"] / p["design_flow"])
    b = (a - p["design_head"]) / p["design_flow"] ** c
    return a, b, c


# ----------------------------------------------------------------------------------------------
# link laws: flow as a function of the head difference, with its derivative
# ----------------------------------------------------------------------------------------------
def area(d):
    return math.pi * d * d / 4.0


def darcy_f(re, ed):
    if re < RE_LAMINAR:
        return 64.0 / re
    return Colebrook(re, ed)


def _darcy_dfdre(re, ed, f):
    """df/dRe from implicit differentiation of Colebrook (turbulent branch) or 64/Re."""
    if re < RE_LAMINAR:
        return -64.0 / (re * re)
    x = 1.0 / math.sqrt(f)
    u = ed / 3.7 + 2.51 * x / re
    dFdx = 1.0 + 2.0 / math.log(10.0) * (2.51 / re) / u
    dFdre = 2.0 / math.log(10.0) * (-2.51 * x / (re * re)) / u
    dxdre = -dFdre / dFdx
    return -2.0 * x ** -3 * dxdre


class Link:
    """A two-ended element whose flow (from -> to, m^3/s) is a function of the end heads."""

    def __init__(self, lid, kind, i, j, **kw):
        self.id, self.kind, self.i, self.j = lid, kind, i, j
        self.__dict__.update(kw)

    # ---- head loss as a function of |Q| (pipes and open valves) ----
    def loss(self, q):
        if self.kind == "hw":
            return self.R * q ** HW_EXP + self.M * q * q
        if self.kind == "dw":
            if q == 0.0:
                return 0.0
            re = 4.0 * q / (math.pi * self.D * NU)
            f = darcy_f(re, self.eD)
            return (f * self.LD + self.K) * q * q / (2.0 * G * self.A ** 2)
        if self.kind == "valve":
            return self.M * q * q
        raise ValueError(self.kind)

    def dloss(self, q):
        if self.kind == "hw":
            return HW_EXP * self.R * q ** (HW_EXP - 1.0) + 2.0 * self.M * q
        if self.kind == "dw":
            re = 4.0 * q / (math.pi * self.D * NU)
            f = darcy_f(re, self.eD)
            dfdq = _darcy_dfdre(re, self.eD, f) * 4.0 / (math.pi * self.D * NU)
            c = 1.0 / (2.0 * G * self.A ** 2)
            return (f * self.LD + self.K) * 2.0 * q * c + dfdq * self.LD * q * q * c
        if self.kind == "valve":
            return 2.0 * self.M * q
        raise ValueError(self.kind)

    def q_of_dh(self, dh):
        """|Q| such that loss(|Q|) = |dh| (pipes, open valves)."""
        h = abs(dh)
        if h == 0.0:
            return 0.0
        if self.kind == "hw" and self.M == 0.0:
            return (h / self.R) ** (1.0 / HW_EXP)
        if self.kind == "valve":
            return math.sqrt(h / self.M)
        if self.kind == "hw":
            hi = min((h / self.R) ** (1.0 / HW_EXP), math.sqrt(h / self.M))
            return brentq(lambda q: self.loss(q) - h, 0.0, hi, xtol=1e-300, rtol=8.9e-16, maxiter=400)
        # darcy-weisbach: expand an upper bracket, then brentq
        hi = math.sqrt(h * 2.0 * G * self.A ** 2 / (self.K + 0.005 * self.LD))
        while self.loss(hi) < h:
            hi *= 2.0
        return brentq(lambda q: self.loss(q) - h, 0.0, hi, xtol=1e-300, rtol=8.9e-16, maxiter=400)

    def flow(self, hi_, hj_):
        """(Q, dQ/dH_i, dQ/dH_j), Q positive from i to j."""
        if self.kind == "pump":
            s, a, b, c = self.s, self.a, self.b, self.c
            rise = hj_ - hi_
            room = s * s * a - rise
            if room <= 0.0:
                return 0.0, 0.0, 0.0
            q = s * (room / (s * s * b)) ** (1.0 / c)
            dq_drise = -q / (c * room)
            return q, -dq_drise, dq_drise
        dh = hi_ - hj_
        q = self.q_of_dh(dh)
        if q == 0.0:
            # derivative is unbounded at zero flow for Hazen-Williams; use a large finite slope
            qq = self.q_of_dh(1e-12)
            g = qq / 1e-12
        else:
            g = 1.0 / self.dloss(q)
        q = math.copysign(q, dh)
        return q, g, -g


def make_links(net):
    """Links from the network (SI); returns (links, valves) with PRVs kept apart."""
    links = []
    dw = net["headloss"] == "darcy-weisbach"
    for p in net["pipes"]:
        if p["status"] == "closed":
            continue
        if p["status"] != "open":
            raise NotImplementedError("status " + p["status"])
        D, Lg = p["diameter"], p["length"]
        A = area(D)
        M = p["minor_loss"] / (2.0 * G * A * A)
        if dw:
            links.append(Link(p["id"], "dw", p["from"], p["to"], D=D, A=A, LD=Lg / D,
                              eD=p["roughness"] / D, K=p["minor_loss"], M=M))
        else:
            R = HW_K * Lg / (p["roughness"] ** HW_EXP * D ** HW_DEXP)
            links.append(Link(p["id"], "hw", p["from"], p["to"], R=R, M=M, D=D))
    for p in net["pumps"]:
        if p["status"] == "off":
            continue
        a, b, c = pump_curve(p)
        links.append(Link(p["id"], "pump", p["from"], p["to"], a=a, b=b, c=c, s=p["speed"],
                          design_head=p["design_head"]))
    return links


def valve_link(v):
    A = area(v["diameter"])
    return Link(v["id"], "valve", v["from"], v["to"], M=v["minor_loss"] / (2.0 * G * A * A), D=v["diameter"])


# ----------------------------------------------------------------------------------------------
# the node-head solve
# ----------------------------------------------------------------------------------------------
class NodeHeadSolver:
    """Unknowns: heads of the free junctions, plus the flow of every regulating PRV.

    fixed: dict node id -> head (sources, and the downstream junction of a regulating PRV)
    links: Link list (pipes, pumps, open valves)
    regulating: list of (valve id, from id, to id) whose flow is an unknown injection
    demands: dict junction id -> demand (m^3/s)
    """

    def __init__(self, junction_ids, fixed, links, regulating, demands):
        self.jids = list(junction_ids)
        # all heads are handled as offsets from a reference head (the mean fixed head): the
        # unknowns stay small, so head differences keep their precision (a pipe with a tiny head
        # difference can have a large conductance dQ/ddh)
        self.ref = float(np.mean(list(fixed.values())))
        self.fixed = {k: v - self.ref for k, v in fixed.items()}
        self.free = [j for j in self.jids if j not in self.fixed]
        self.col = {j: k for k, j in enumerate(self.free)}
        self.row = {j: k for k, j in enumerate(self.jids)}
        self.links = links
        self.reg = regulating
        self.demands = demands
        self.n_unknown = len(self.free) + len(self.reg)
        known = set(self.jids) | set(self.fixed)
        for l in links:
            assert l.i in known and l.j in known, (l.id, l.i, l.j)

    def _offsets(self, x):
        h = dict(self.fixed)
        for j, k in self.col.items():
            h[j] = x[k]
        return h

    def heads(self, x):
        """Absolute heads (m) of all nodes."""
        return {k: v + self.ref for k, v in self._offsets(x).items()}

    def eval(self, x):
        h = self._offsets(x)
        F = np.zeros(len(self.jids))
        J = np.zeros((len(self.jids), self.n_unknown))
        for j in self.jids:
            F[self.row[j]] -= self.demands.get(j, 0.0)
        for l in self.links:
            q, gi, gj = l.flow(h[l.i], h[l.j])
            for node, sign in ((l.i, -1.0), (l.j, 1.0)):
                if node in self.row:
                    r = self.row[node]
                    F[r] += sign * q
                    if l.i in self.col:
                        J[r, self.col[l.i]] += sign * gi
                    if l.j in self.col:
                        J[r, self.col[l.j]] += sign * gj
        for k, (vid, a, b) in enumerate(self.reg):
            c = len(self.free) + k
            q = x[c]
            F[self.row[a]] -= q
            J[self.row[a], c] -= 1.0
            F[self.row[b]] += q
            J[self.row[b], c] += 1.0
        return F, J

    def flows(self, x):
        h = self._offsets(x)
        out = {l.id: l.flow(h[l.i], h[l.j])[0] for l in self.links}
        for k, (vid, a, b) in enumerate(self.reg):
            out[vid] = x[len(self.free) + k]
        return out

    def initial_guess(self):
        """Linear network: each link as a conductance sized for ~1 m/s (pumps add design head)."""
        n = self.n_unknown
        A = np.zeros((len(self.jids), n))
        rhs = np.zeros(len(self.jids))
        for j in self.jids:
            rhs[self.row[j]] += self.demands.get(j, 0.0)
        for l in self.links:
            if l.kind == "pump":
                gcond, lift = 1.0, l.s * l.s * l.design_head
            else:
                q0 = area(l.D) * 1.0
                gcond, lift = q0 / l.loss(q0), 0.0
            # Q = gcond * (H_i + lift - H_j)
            for node, sign in ((l.i, -1.0), (l.j, 1.0)):
                if node not in self.row:
                    continue
                r = self.row[node]
                const = 0.0
                for end, s2 in ((l.i, 1.0), (l.j, -1.0)):
                    if end in self.col:
                        A[r, self.col[end]] += sign * gcond * s2
                    else:
                        const += self.fixed[end] * s2
                const += lift
                rhs[r] -= sign * gcond * const
        for k, (vid, a, b) in enumerate(self.reg):
            c = len(self.free) + k
            A[self.row[a], c] -= 1.0
            A[self.row[b], c] += 1.0
        return np.linalg.solve(A, rhs)

    def solve(self, x0=None, tol=1e-12):
        """Solve continuity; returns (x, largest junction imbalance in m^3/s).

        x holds head offsets from self.ref (use heads(x) for absolute heads) followed by the
        regulating-valve flows. scipy.optimize.root (MINPACK hybrj, analytic Jacobian) does the
        solve; if the imbalance is not yet below tol, a few plain Newton steps with the same
        analytic Jacobian finish it.
        """
        if x0 is None:
            x0 = self.initial_guess()
        sol = root(self.eval, np.asarray(x0, dtype=float), jac=True, method="hybr",
                   options={"xtol": 1e-15, "maxfev": 20000})
        x = sol.x
        F, J = self.eval(x)
        res = float(np.max(np.abs(F)))
        self.newton_steps = 0
        for _ in range(8):
            if res < tol:
                break
            x_new = x - np.linalg.solve(J, F)
            F_new, J_new = self.eval(x_new)
            res_new = float(np.max(np.abs(F_new)))
            if not res_new < res:
                break
            x, F, J, res = x_new, F_new, J_new, res_new
            self.newton_steps += 1
        if not res < tol:
            raise RuntimeError(f"node-head solve did not reach {tol}: residual {res} ({sol.message})")
        return x, res


def has_supply_everywhere(jids, fixed, links):
    """True if every junction is connected (through links) to a fixed-head node. A regulating
    valve is not a link here: its flow is set by the junction it holds, so the part behind its
    other end needs a head of its own (else that part's heads are not determined)."""
    adj = {}
    for l in links:
        adj.setdefault(l.i, set()).add(l.j)
        adj.setdefault(l.j, set()).add(l.i)
    seen = set(fixed)
    stack = list(fixed)
    while stack:
        n = stack.pop()
        for m in adj.get(n, ()):
            if m not in seen:
                seen.add(m)
                stack.append(m)
    return all(j in seen for j in jids)


# ----------------------------------------------------------------------------------------------
# output
# ----------------------------------------------------------------------------------------------
def versions():
    import sys
    import fluids
    import scipy
    return (f"Python {sys.version.split()[0]}, numpy {np.__version__}, scipy {scipy.__version__}, "
            f"fluids {fluids.__version__}")


def write_kind_id_value(path, header_lines, rows):
    with open(path, "w", newline="\n") as fh:
        for ln in header_lines:
            fh.write("# " + ln + "\n")
        fh.write("kind,id,value\n")
        for kind, i, v in rows:
            if isinstance(v, (float, np.floating)):
                fh.write(f"{kind},{i},{float(v)!r}\n")
            else:
                fh.write(f"{kind},{i},{v}\n")
