#!/usr/bin/env python3
"""Generate the invented demo network "Cedar Hollow" (examples/demo-town/).

Cedar Hollow is an invented town: no real place, utility or data set. Every
number here is made up for the demo, chosen to look like an ordinary small US
system (about 10,500 people). Do not use it as a check value.

Standard library only; deterministic (fixed seed), so re-running gives the
same files byte for byte:

    python3 examples/demo-town/generate.py

writes model.toml, junctions.csv, sources.csv, pipes.csv, hydrants.csv,
pumps.csv and valves.csv beside this script. Units: us (ft, in, gpm, psi);
head loss: Hazen-Williams (roughness = C factor).

Layout (x east, y north, ft). Street grid of 360 ft x 330 ft blocks, grid
column i (x = 360 i) and row j (y = 330 j); junction ids J-iijj:
  main zone  i 5-20, j 0-9 (and the older westside blocks i 1-4, j 0-6):
             gravity zone fed by the Pine Ridge reservoir R-1 (south-east)
             and the elevated tank T-1 (south-west); 12-16 in loop on
             i = 5, i = 20, j = 0 and j = 8. Orchard Heights (i 10-12,
             j 8-9) is its high spot.
  downtown   i 9-13, j 3-6: 1890s-1910s unlined cast iron, C 55; 6 in on
             Main Street (j = 5), 4 in elsewhere.
  old town   i 7-15, j 1-7 around downtown: unlined cast iron, 6 in
             east-west and 4 in cross streets. Depot Street: 6 in dead end.
  industry   i 16-20, j 0-3: ductile iron 8-10 in on the 16 in loop.
  high zone  Knob Hill, i 11-20, j 10-15: pumped from R-1 by pump station
             PS-1 (duty pump PU-1, standby PU-2, check valve CV-1), with the
             hilltop tank T-2.
  low zone   Cedar Creek bottoms, i 0-4, j 7-15: fed from the high zone down
             Bluff Road (J-B1..J-B5) through the pressure-reducing valve PRV-1.
  boundary   BV-1 (Creek Road, main/low) and BV-2 (Knob Hill Road,
             main/high): closed valves.
  dead end   Quarry Road: a 6 in main running 2,500 ft south-west out of the
             grid to the gravel yard.
See README.md for what the checks find.
"""

import math
import os
import random

HERE = os.path.dirname(os.path.abspath(__file__))
SEED = 20240611
rng = random.Random(SEED)

DX, DY = 360.0, 330.0

# ---------------------------------------------------------------- grid nodes
nodes = {}  # id -> dict(id, x, y, elev, demand, zone, area)
order = []


def add_node(nid, x, y, elev, zone, area):
    assert nid not in nodes, nid
    nodes[nid] = dict(id=nid, x=x, y=y, elev=elev, zone=zone, area=area, demand=0.0)
    order.append(nid)


def gid(i, j):
    return "J-%02d%02d" % (i, j)


def grid_zone(i, j):
    """Zone of grid point (i, j), or None where there is no street node."""
    if 5 <= i <= 20 and 0 <= j <= 9:
        return "main"
    if 1 <= i <= 4 and 0 <= j <= 6:
        return "main"
    if 0 <= i <= 4 and 7 <= j <= 15:
        return "low"
    if 11 <= i <= 20 and 10 <= j <= 15:
        return "high"
    return None


# blocks without a street node: the town park, the creek meander, a steep slope
MISSING = {
    (16, 5), (17, 5), (16, 6), (17, 6),   # Hollow Park
    (1, 0),                               # creek
    (0, 15), (4, 15),                     # creek bottom, not built
    (20, 15), (11, 15), (19, 15),         # steep east and west faces of Knob Hill
    (11, 10), (20, 14),
}


def area_of(i, j, zone):
    if zone == "main":
        if 9 <= i <= 13 and 3 <= j <= 6:
            return "downtown"
        if 7 <= i <= 15 and 1 <= j <= 7:
            return "oldtown"
        if 16 <= i <= 20 and 0 <= j <= 3:
            return "industry"
        if i <= 4:
            return "westside"
        return "residential"
    return zone


def elevation(i, j, zone, x, y):
    if zone == "main":
        ramp = min(1.0, x / 2500.0)
        e = 701.0 + 0.0025 * x + y * (0.003 + 0.0085 * ramp)
        # Orchard Heights: the shoulder of Knob Hill, left in the main zone
        e += 34.0 * math.exp(-((x - 3960.0) ** 2 + (y - 2970.0) ** 2) / (2 * 700.0 ** 2))
    elif zone == "low":
        e = 700.0 - 0.0035 * (y - 2310.0) + 0.0035 * x
    else:  # high: Knob Hill
        e = 770.0 + 26.0 * math.exp(-((x - 5400.0) ** 2 + (y - 5000.0) ** 2) / (2 * 1300.0 ** 2))
    return e + rng.uniform(-1.5, 1.5)


for j in range(0, 16):
    for i in range(0, 21):
        z = grid_zone(i, j)
        if z is None or (i, j) in MISSING:
            continue
        x = i * DX + rng.uniform(-25, 25)
        y = j * DY + rng.uniform(-25, 25)
        add_node(gid(i, j), round(x), round(y), round(elevation(i, j, z, x, y), 1), z, area_of(i, j, z))

# ------------------------------------------------------------- extra nodes
# Quarry Road: dead-end 6 in main from J-0200 (south-west corner) across the creek to the gravel yard
quarry = []
qx, qy, qe = nodes["J-0200"]["x"] - 360, nodes["J-0200"]["y"] - 60, 699.0
for k in range(1, 7):
    qx -= 300 + 25 * k
    qy -= 180 + 10 * k
    qe -= 2.2
    nid = "J-Q%d" % k
    add_node(nid, round(qx), round(qy), round(qe, 1), "main", "quarry")
    quarry.append(nid)

# Depot Street: old 6 in dead end east from old town, past Hollow Park, to the feed mill at the rail depot
add_node("J-D1", nodes["J-1505"]["x"] + 340, nodes["J-1505"]["y"] + 120, round(nodes["J-1505"]["elev"] + 1.0, 1), "main", "oldtown")
add_node("J-D2", nodes["J-D1"]["x"] + 350, nodes["J-D1"]["y"] + 60, round(nodes["J-D1"]["elev"] + 1.5, 1), "main", "oldtown")

# cul-de-sacs: (id, attach-to, dx, dy, elevation change)
CULS = [
    ("J-C01", "J-0800", 40, -380, -2.0),   # Ash Court
    ("J-C02", "J-1409", -30, 300, 4.0),    # Linden Court, up the hill flank
    ("J-C03", "J-0203", -380, 20, -3.0),   # Willow Court
    ("J-C04", "J-1315", 60, 360, -3.0),    # Summit Court (Knob Hill)
    ("J-C05", "J-1715", -40, 340, -4.0),   # Ridge View Court
    ("J-C06", "J-2010", 360, 40, -6.0),    # Crest Court
    ("J-C07", "J-0114", -60, 360, -1.5),   # Heron Court (low zone)
    ("J-C08", "J-0010", -380, 30, -1.0),   # Mill Court (low zone)
]
for cid, at, ddx, ddy, de in CULS:
    a = nodes[at]
    add_node(cid, a["x"] + ddx, a["y"] + ddy, round(a["elev"] + de, 1), a["zone"], a["area"])
# second node on Linden Court and Summit Court (longer courts)
add_node("J-C02B", nodes["J-C02"]["x"] + 20, nodes["J-C02"]["y"] + 250, round(nodes["J-C02"]["elev"] + 3.0, 1), "main", "residential")
add_node("J-C04B", nodes["J-C04"]["x"] + 280, nodes["J-C04"]["y"] + 60, round(nodes["J-C04"]["elev"] - 2.0, 1), "high", "high")

# Bluff Road: high-zone main down the west face of Knob Hill to the PRV vault
BLUFF = [("J-B1", 3650, 4330, 757.0), ("J-B2", 3250, 4310, 741.0),
         ("J-B3", 2850, 4300, 724.0), ("J-B4", 2400, 4290, 710.0),
         ("J-B5", 1980, 4280, 702.0)]
for nid, x, y, e in BLUFF:
    add_node(nid, x, y, e, "high", "bluff")
add_node("J-PRVD", 1930, 4285, 701.5, "low", "low")   # PRV vault, downstream side

# Pump station PS-1 at the foot of Pine Ridge and the high-zone supply main
add_node("J-PSS", 7760, 120, 732.0, "main", "station")   # suction header
add_node("J-PSD", 7775, 125, 732.0, "high", "station")   # pump discharge header
add_node("J-PSH", 7790, 130, 732.0, "high", "station")   # downstream of the check valve
HT = [("J-HT1", 7850, 1150, 738.0), ("J-HT2", 7880, 2150, 748.0), ("J-HT3", 7700, 3150, 771.0)]
for nid, x, y, e in HT:
    add_node(nid, x, y, e, "high", "transmission")

# ------------------------------------------------------------------ sources
SOURCES = [
    # id, kind, grade ft, x, y, diameter ft, min_level ft, max_level ft (tank geometry for
    # the storage check of `firemain permit`; levels are water-surface elevations)
    ("R-1", "reservoir", 873.0, 7700, 300, None, None, None),  # Pine Ridge reservoir (ground storage on the ridge)
    ("T-1", "tank", 869.0, 1690, 170, 60.0, 851.0, 887.0),     # Westside elevated tank, mid level
    ("T-2", "tank", 941.0, 5500, 5250, 30.0, 933.0, 949.0),    # Knob Hill tank, mid level
]

# -------------------------------------------------------------------- pipes
pipes = []
used_pairs = set()

def length(a, b, wiggle=True):
    na, nb = nodes.get(a), nodes.get(b)
    ax, ay = (na["x"], na["y"]) if na else src_xy[a]
    bx, by = (nb["x"], nb["y"]) if nb else src_xy[b]
    d = math.hypot(ax - bx, ay - by)
    if wiggle:
        d *= 1.0 + rng.uniform(0.0, 0.06)
    return max(5, int(round(d / 5.0)) * 5)


src_xy = {s[0]: (s[3], s[4]) for s in SOURCES}


def add_pipe(a, b, dia, c, material, minor=None, status=None, length_ft=None):
    key = frozenset((a, b))
    assert key not in used_pairs, (a, b)
    used_pairs.add(key)
    L = length_ft if length_ft is not None else length(a, b)
    pipes.append(dict(id=None, a=a, b=b, L=L, d=dia, c=c, k=minor, status=status, material=material))


def on_ring(i1, j1, i2, j2):
    """Main-zone transmission loop: j = 0 (south), j = 8 (north), i = 5 (west), i = 20 (east)."""
    if grid_zone(i1, j1) != "main":
        return False
    if j1 == j2:
        return j1 in (0, 8) and min(i1, i2) >= 5 and max(i1, i2) <= 20
    return i1 in (5, 20) and min(j1, j2) >= 0 and max(j1, j2) <= 8


def on_spine(i1, j1, i2, j2):
    """High-zone 12 in main from the supply main to the hilltop tank."""
    if grid_zone(i1, j1) != "high":
        return False
    if j1 == j2:
        return j1 == 10 and min(i1, i2) >= 15
    return i1 == 15 and max(j1, j2) <= 15


def on_trunk(i1, j1, i2, j2):
    """Low-zone 8 in trunk down Creek Road (i = 4) from the PRV vault."""
    return grid_zone(i1, j1) == "low" and i1 == i2 == 4


def pipe_spec(i1, j1, i2, j2):
    """Diameter, C and material of the street main between two grid nodes of one zone."""
    z = grid_zone(i1, j1)
    horizontal = j1 == j2
    a1, a2 = area_of(i1, j1, z), area_of(i2, j2, z)
    if z == "main":
        if on_ring(i1, j1, i2, j2):
            if (horizontal and j1 == 0 and min(i1, i2) >= 13) or (not horizontal and i1 == 20 and max(j1, j2) <= 4):
                return 16, rng.choice([125, 130]), "DI"
            return 12, rng.choice([110, 115, 120]), "CI-lined"
        if a1 == "downtown" and a2 == "downtown":
            # 1890s-1910s mains, heavily tuberculated: 6 in on Main Street (j = 5),
            # 4 in on every other downtown street
            if horizontal and j1 == 5:
                return 6, 55, "CI-unlined"
            return 4, 55, "CI-unlined"
        if a1 in ("downtown", "oldtown") and a2 in ("downtown", "oldtown"):
            # old town around downtown: 6 in on the east-west streets, 4 in on the cross streets
            if not horizontal:
                return 4, rng.choice([55, 58, 60]), "CI-unlined"
            return 6, rng.choice([55, 58, 60, 62]), "CI-unlined"
        if a1 == "industry" and a2 == "industry":
            if j1 >= 2 and j2 >= 2:
                return 8, rng.choice([120, 125]), "DI"
            return 10, rng.choice([120, 125]), "DI"
        if a1 == "westside" or a2 == "westside":
            # 1950s: lined cast iron, 6 in on the cross streets
            return (6 if not horizontal else 8), rng.choice([95, 100, 105]), "CI-lined"
        # 1960s-70s residential: 6 in asbestos-cement cross streets; newer 8 in PVC / DI
        if not horizontal and i1 <= 15:
            return 6, rng.choice([115, 120, 125]), "AC"
        if (i1 + j1) % 3 == 0:
            return 8, rng.choice([120, 125, 130]), "DI"
        return 8, rng.choice([140, 145, 150]), "PVC"
    if z == "high":
        if on_spine(i1, j1, i2, j2):
            return 12, 130, "DI"
        if not horizontal and (i1 + j1) % 2 == 1:
            return 6, rng.choice([140, 145]), "PVC"
        return 8, rng.choice([140, 145, 150]), "PVC"
    # low zone (1960s asbestos-cement, newer PVC on the north end, 8 in trunk on Creek Road i = 4)
    if (j1 >= 12 and j2 >= 12) or (not horizontal and i1 == 4):
        return 8, rng.choice([140, 145]), "PVC"
    return 6, rng.choice([115, 120, 125]), "AC"


# street links that do not exist (blocks closed by the creek, the rail spur, the school grounds)
NO_LINK = {
    ((7, 9), (8, 9)), ((10, 9), (10, 8)), ((13, 9), (14, 9)), ((18, 6), (18, 7)),
    ((6, 2), (6, 3)), ((19, 4), (19, 5)), ((8, 1), (9, 1)), ((12, 0), (12, 1)),
    ((2, 4), (3, 4)), ((1, 9), (2, 9)), ((3, 11), (3, 12)), ((1, 13), (2, 13)),
    ((13, 12), (14, 12)), ((17, 11), (17, 12)), ((12, 13), (12, 14)), ((18, 13), (19, 13)),
    ((16, 14), (16, 15)), ((14, 10), (14, 11)), ((20, 11), (20, 12)),
    ((15, 8), (15, 9)), ((6, 9), (5, 9)), ((11, 7), (11, 8)),
}
NO_LINK = {frozenset(p) for p in NO_LINK}
# downtown keeps every street; elsewhere some blocks have no main on one side
# (T intersections, curving subdivision streets): drop links at random while
# every zone stays connected.
DROP_P = {"main": 0.22, "high": 0.35, "low": 0.25}
drop_rng = random.Random(SEED + 1)

candidates = []
for j in range(0, 16):
    for i in range(0, 21):
        a = gid(i, j)
        if a not in nodes:
            continue
        for (i2, j2) in ((i + 1, j), (i, j + 1)):
            b = gid(i2, j2)
            if b not in nodes or nodes[a]["zone"] != nodes[b]["zone"]:
                continue
            if frozenset(((i, j), (i2, j2))) in NO_LINK:
                continue
            candidates.append((i, j, i2, j2))


def connected(links):
    adj = {}
    for (i, j, i2, j2) in links:
        adj.setdefault((i, j), []).append((i2, j2))
        adj.setdefault((i2, j2), []).append((i, j))
    grid_nodes = {(int(k[2:4]), int(k[4:6])) for k in nodes if k[2:6].isdigit() and len(k) == 6}
    if set(adj) != grid_nodes:
        return False
    # one component per zone
    seen, comps = set(), 0
    for start in adj:
        if start in seen:
            continue
        comps += 1
        stack = [start]
        seen.add(start)
        while stack:
            n = stack.pop()
            for m in adj[n]:
                if m not in seen:
                    seen.add(m)
                    stack.append(m)
    return comps == 3


kept = list(candidates)
for link in candidates:
    (i, j, i2, j2) = link
    z = grid_zone(i, j)
    area = area_of(i, j, z)
    area2 = area_of(i2, j2, z)
    if on_ring(*link) or on_spine(*link) or on_trunk(*link) or "downtown" in (area, area2) or "oldtown" in (area, area2):
        continue
    if drop_rng.random() < DROP_P[z]:
        trial = [l for l in kept if l != link]
        if connected(trial):
            kept = trial
assert connected(kept)
for (i, j, i2, j2) in kept:
    d, c, m = pipe_spec(i, j, i2, j2)
    add_pipe(gid(i, j), gid(i2, j2), d, c, m)

# the south-west blocks join the main grid at i = 4/5
# (already linked by the loop above where both are "main")

# Quarry Road, 6 in unlined cast iron (1950s), dead end
prev = "J-0200"
for nid in quarry:
    add_pipe(prev, nid, 6, rng.choice([85, 90]), "CI-unlined")
    prev = nid

# Depot Street, 6 in unlined cast iron (1910s), dead end
add_pipe("J-1505", "J-D1", 6, 60, "CI-unlined")
add_pipe("J-D1", "J-D2", 6, 60, "CI-unlined")

# cul-de-sacs
for cid, at, *_ in CULS:
    zone = nodes[at]["zone"]
    if zone == "main":
        add_pipe(at, cid, 6, 140, "PVC")
    elif zone == "high":
        add_pipe(at, cid, 8, 150, "PVC")
    else:
        add_pipe(at, cid, 6, 120, "AC")
add_pipe("J-C02", "J-C02B", 6, 140, "PVC")
add_pipe("J-C04", "J-C04B", 6, 150, "PVC")

# Bluff Road 10 in ductile iron from Knob Hill down to the PRV vault
prev = "J-1213"
for nid, *_ in BLUFF:
    add_pipe(prev, nid, 10, 130, "DI")
    prev = nid
# PRV vault outlet into the low-zone grid
add_pipe("J-PRVD", "J-0413", 10, 130, "DI")

# sources' own mains
add_pipe("R-1", "J-2001", 16, 120, "DI", minor=1.0, length_ft=1050)   # reservoir outlet main down Pine Ridge
add_pipe("J-0501", "T-1", 12, 120, "DI", minor=1.5)          # tank riser and short main
add_pipe("J-1515", "T-2", 12, 130, "DI", minor=1.5)          # hilltop tank main

# pump station: suction main, check valve on the discharge, supply main up Knob Hill
add_pipe("R-1", "J-PSS", 16, 130, "DI", minor=0.5, length_ft=80)
add_pipe("J-PSD", "J-PSH", 12, 130, "DI", minor=2.5, status="check", length_ft=15)
prev = "J-PSH"
for nid, *_ in HT:
    add_pipe(prev, nid, 12, 130, "DI")
    prev = nid
add_pipe("J-HT3", "J-2010", 12, 130, "DI")

# number the pipes
for n, p in enumerate(pipes, start=1):
    p["id"] = "P-%03d" % n
for p in pipes:
    if p["status"] == "check":
        p["id"] = "CV-1"

# ------------------------------------------------------------------ demands
# average-day demand, gpm: about 2.5-4 gpm per residential street node
BASE = {"downtown": (4.0, 7.0), "oldtown": (3.0, 4.5), "industry": (3.0, 6.0),
        "westside": (2.5, 3.5), "residential": (3.0, 4.2), "high": (3.0, 4.2),
        "low": (2.5, 3.8), "quarry": (0.5, 1.0), "bluff": (0.8, 1.2),
        "station": (0.0, 0.0), "transmission": (0.0, 0.0)}
for nid in order:
    lo, hi = BASE[nodes[nid]["area"]]
    nodes[nid]["demand"] = round(rng.uniform(lo, hi), 1) if hi > 0 else 0.0

# larger users (average-day gpm on top of the street demand)
BIG = {
    "J-1801": 70.0,   # Hollow Valley Creamery
    "J-2002": 28.0,   # Cedar Hollow Cold Storage (warehouse)
    "J-1703": 18.0,   # Ridge Line Plastics
    "J-1106": 16.0,   # Commercial Hotel and downtown laundry
    "J-0708": 14.0,   # Cedar Hollow High School
    "J-1311": 12.0,   # Knob Hill Care Center (nursing home)
    "J-0809": 10.0,   # County hospital clinic
    "J-Q6": 12.0,     # gravel yard and ready-mix plant
}
for nid, q in BIG.items():
    nodes[nid]["demand"] = round(nodes[nid]["demand"] + q, 1)

# ----------------------------------------------------------------- hydrants
hyd = []  # (junction, class, required_flow or None)
DOWNTOWN_H = [(9, 3), (13, 3), (9, 5), (10, 5), (11, 5), (12, 5), (13, 5), (9, 6), (13, 6)]
for (i, j) in DOWNTOWN_H:
    hyd.append((gid(i, j), "commercial", None))
for (i, j) in [(7, 2), (15, 4), (8, 7), (14, 7)]:
    hyd.append((gid(i, j), "commercial", None))
INDUSTRY_H = [(16, 0), (18, 0), (20, 0), (17, 1), (16, 2), (19, 2), (18, 3)]
for (i, j) in INDUSTRY_H:
    hyd.append((gid(i, j), "industrial", None))
hyd.append(("J-D2", "commercial", None))     # feed mill, end of Depot Street
hyd.append(("J-Q2", "residential", None))
hyd.append(("J-Q4", "residential", None))
hyd.append(("J-Q6", "industrial", None))
# residential hydrants at one intersection in five, staggered (roughly 500-800 ft apart)
for j in range(0, 16):
    for i in range(0, 21):
        nid = gid(i, j)
        if nid not in nodes:
            continue
        area = nodes[nid]["area"]
        if area in ("downtown", "oldtown", "industry"):
            continue
        if (i + 2 * j) % 5 == 0:
            hyd.append((nid, "residential", None))
hyd.append(("J-C02B", "residential", None))
hyd.append(("J-C04B", "residential", None))
hyd.append(("J-B3", "residential", None))
# special cases with their own required flow
SPECIAL = {"J-0708": ("commercial", 2500),   # high school
           "J-2002": ("industrial", 3500),   # cold-storage warehouse
           "J-1311": ("commercial", 2000)}   # Knob Hill Care Center (nursing home)
seen = {h[0] for h in hyd}
for nid, (cls, q) in SPECIAL.items():
    if nid in seen:
        hyd = [(a, b, c) if a != nid else (a, cls, q) for (a, b, c) in hyd]
    else:
        hyd.append((nid, cls, q))


# ------------------------------------------------------------------ writing
def fmt(v):
    if v is None:
        return ""
    if isinstance(v, float):
        s = ("%.1f" % v)
        return s
    return str(v)


def write(name, header_comment, columns, rows):
    path = os.path.join(HERE, name)
    with open(path, "w", newline="\n") as f:
        for line in header_comment:
            f.write("# " + line + "\n")
        f.write(",".join(columns) + "\n")
        for r in rows:
            f.write(",".join(fmt(v) for v in r) + "\n")


GEN = "written by generate.py (invented data for the demo; do not edit by hand)"

with open(os.path.join(HERE, "model.toml"), "w", newline="\n") as f:
    f.write("# Invented demo town; " + GEN + "\n")
    f.write('name = "Cedar Hollow (invented demo town)"\n')
    f.write('units = "us"\n')
    f.write('headloss = "hazen-williams"\n')
    f.write("[demand]\n")
    f.write("max_day_factor = 1.7\n")
    f.write("peak_hour_factor = 2.8\n")
    f.write("min_hour_factor = 0.4\n")

write("junctions.csv", [GEN, "elevation ft, demand gpm (average day)"],
      ["id", "elevation", "demand", "zone", "x", "y"],
      [(n["id"], n["elev"], n["demand"], n["zone"], n["x"], n["y"]) for n in (nodes[k] for k in order)])

write("sources.csv", [GEN, "grade ft (fixed: reservoir water level, tank water level at mid range); tank diameter ft, min_level and max_level ft (water-surface elevations)"],
      ["id", "kind", "grade", "x", "y", "diameter", "min_level", "max_level"],
      [tuple("" if v is None else v for v in s) for s in SOURCES])

write("pipes.csv", [GEN, "length ft, diameter in (nominal), roughness = Hazen-Williams C, minor_loss = summed K"],
      ["id", "from", "to", "length", "diameter", "roughness", "minor_loss", "status", "material"],
      [(p["id"], p["a"], p["b"], p["L"], p["d"], p["c"], p["k"], p["status"], p["material"]) for p in pipes])

hrows = []
for n, (nid, cls, q) in enumerate(hyd, start=101):
    nd = nodes[nid]
    hrows.append(("HYD-%d" % n, nid, q, cls, nd["x"] + 15, nd["y"] + 12))
write("hydrants.csv", [GEN, "required_flow gpm (empty: the criteria's value for the class)"],
      ["id", "junction", "required_flow", "class", "x", "y"], hrows)

write("pumps.csv", [GEN, "heads ft, flows gpm; PU-1 duty, PU-2 standby (off)"],
      ["id", "from", "to", "shutoff_head", "design_flow", "design_head", "runout_flow", "runout_head", "speed", "status"],
      [("PU-1", "J-PSS", "J-PSD", 108, 1100, 80, 1700, 52, None, "on"),
       ("PU-2", "J-PSS", "J-PSD", 108, 1100, 80, 1700, 52, None, "off")])

write("valves.csv", [GEN, "diameter in, setting psi for the PRV (held at its downstream junction), minor_loss = K wide open"],
      ["id", "from", "to", "kind", "diameter", "setting", "minor_loss", "status"],
      [("PRV-1", "J-B5", "J-PRVD", "prv", 8, 62, 4.5, "active"),
       ("BV-1", "J-0206", "J-0207", "throttle", 8, None, 0.2, "closed"),
       ("BV-2", "J-1209", "J-1210", "throttle", 8, None, 0.2, "closed")])

if __name__ == "__main__":
    tot = sum(n["demand"] for n in nodes.values())
    byz = {}
    for n in nodes.values():
        byz.setdefault(n["zone"], [0, 0.0])
        byz[n["zone"]][0] += 1
        byz[n["zone"]][1] += n["demand"]
    print("junctions", len(nodes), "pipes", len(pipes), "hydrants", len(hyd), "demand %.1f gpm" % tot)
    for z, (c, q) in sorted(byz.items()):
        print("  zone %-5s %3d junctions %7.1f gpm" % (z, c, q))
