#!/usr/bin/env python3
"""Writes the invented test networks tests/data/loop_grid/ (Hazen-Williams) and
tests/data/loop_grid_dw/ (Darcy-Weisbach, same geometry).

Ran with: Python 3.11.7 (standard library only).

The network is invented (no real system): a 6 x 6 grid of junctions J11..J66 (row, column)
joined by 60 pipes (25 independent loops), fed by reservoir R1 (grade 95 m) through pipe PR1 at
corner J11 and by tank T1 (grade 86 m, filling) through pipe PT1 at the opposite corner J66.
Elevations 10-40 m rising away from R1, demands 0-8 L/s (four junctions without demand), pipe
lengths 150-600 m, diameters 100-400 mm (larger along the edges that leave the sources),
Hazen-Williams C 80-140, one pipe with a summed minor-loss K. The Darcy-Weisbach copy gives every
pipe an absolute roughness of 0.05-1.0 mm instead of a C factor.

All numbers come from random.Random(SEED) (Mersenne Twister, stable across Python versions) and
are rounded before they are written, so the committed files are exactly what the solver reads.

Re-run (from the repository root), then re-run solve_loop_grid.py:
    python3 tests/reference/loop_grid/make_loop_grid.py
"""
import os
import random

SEED = 8
TANK_GRADE = 86.0  # low enough that T1 fills: no pipe is left near zero flow
N = 6
ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", ".."))
OUT_HW = os.path.join(ROOT, "tests", "data", "loop_grid")
OUT_DW = os.path.join(ROOT, "tests", "data", "loop_grid_dw")
ZERO_DEMAND = {"J23", "J35", "J52", "J64"}
MINOR_LOSS_PIPE = "P27"
MINOR_LOSS_K = 8.5


def jid(r, c):
    return f"J{r + 1}{c + 1}"


def build():
    rng = random.Random(SEED)
    junctions = []
    for r in range(N):
        for c in range(N):
            elev = 12.0 + 2.5 * (r + c) + rng.uniform(-2.0, 2.0)
            elev = round(min(40.0, max(10.0, elev)), 1)
            j = jid(r, c)
            demand = 0.0 if j in ZERO_DEMAND else round(rng.uniform(0.5, 8.0), 2)
            junctions.append((j, elev, demand, c * 300, (N - 1 - r) * 300))
    pipes = []
    k = 0
    edges = []
    for r in range(N):
        for c in range(N - 1):
            edges.append((jid(r, c), jid(r, c + 1), r, c, "h"))
    for r in range(N - 1):
        for c in range(N):
            edges.append((jid(r, c), jid(r + 1, c), r, c, "v"))
    for a, b, r, c, hv in edges:
        k += 1
        pid = f"P{k:02d}"
        length = round(rng.uniform(150.0, 600.0))
        trunk = (hv == "h" and r in (0, N - 1)) or (hv == "v" and c in (0, N - 1))
        if trunk:
            diam = rng.choice([200, 250, 300])
        else:
            diam = rng.choice([100, 100, 150, 150, 200, 250])
        cfac = round(rng.uniform(80.0, 140.0))
        rough = round(rng.uniform(0.05, 1.0), 2)
        ml = MINOR_LOSS_K if pid == MINOR_LOSS_PIPE else 0.0
        pipes.append((pid, a, b, length, diam, cfac, rough, ml))
    pipes.append(("PR1", "R1", jid(0, 0), 300, 400, 120, 0.1, 0.0))
    pipes.append(("PT1", jid(N - 1, N - 1), "T1", 250, 300, 110, 0.3, 0.0))
    sources = [("R1", "reservoir", 95.0, -300, (N - 1) * 300), ("T1", "tank", TANK_GRADE, N * 300, -300)]
    return junctions, pipes, sources


def write(folder, dw, junctions, pipes, sources):
    os.makedirs(folder, exist_ok=True)
    name = "Loop grid (Darcy-Weisbach)" if dw else "Loop grid"
    with open(os.path.join(folder, "model.toml"), "w", newline="\n") as fh:
        fh.write("# Invented 6 x 6 grid test network; written by tests/reference/loop_grid/make_loop_grid.py\n")
        fh.write(f'name = "{name}"\nunits = "si"\n')
        fh.write(f'headloss = "{"darcy-weisbach" if dw else "hazen-williams"}"\n')
        fh.write("[demand]\nmax_day_factor = 1.5\npeak_hour_factor = 2.5\n")
    with open(os.path.join(folder, "junctions.csv"), "w", newline="\n") as fh:
        fh.write("# elevation m, demand L/s (average day)\n")
        fh.write("id,elevation,demand,x,y\n")
        for j, e, d, x, y in junctions:
            fh.write(f"{j},{e},{d},{x},{y}\n")
    with open(os.path.join(folder, "sources.csv"), "w", newline="\n") as fh:
        fh.write("id,kind,grade,x,y\n")
        for s in sources:
            fh.write(",".join(str(v) for v in s) + "\n")
    with open(os.path.join(folder, "pipes.csv"), "w", newline="\n") as fh:
        if dw:
            fh.write("# length m, diameter mm, roughness = absolute roughness in mm\n")
        else:
            fh.write("# length m, diameter mm, roughness = Hazen-Williams C\n")
        fh.write("id,from,to,length,diameter,roughness,minor_loss\n")
        for pid, a, b, length, diam, cfac, rough, ml in pipes:
            rr = rough if dw else cfac
            mls = "" if ml == 0.0 else f"{ml}"
            fh.write(f"{pid},{a},{b},{length},{diam},{rr},{mls}\n")


def main():
    junctions, pipes, sources = build()
    write(OUT_HW, False, junctions, pipes, sources)
    write(OUT_DW, True, junctions, pipes, sources)
    print("wrote", OUT_HW, "and", OUT_DW)


if __name__ == "__main__":
    main()
