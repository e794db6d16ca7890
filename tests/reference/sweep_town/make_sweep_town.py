#!/usr/bin/env python3
"""Writes the invented test network tests/data/sweep_town/ (US units, Hazen-Williams).

Ran with: Python 3.11.7 (standard library only).

An invented town (no real system):
  * a street grid of 6 streets x 8 avenues, junctions J11..J68 (street r, avenue c), blocks of
    380-720 ft; a 12-in arterial along street 3 and along avenue 2, mostly 8-in elsewhere, some
    6-in streets and a few old 4-in blocks;
  * three dead-end branches: B1-B3 (6-in, going south-west off J11), C1-C2 (6-in, south off J15)
    and the weak hill branch W1-W3 (4-in, climbing north-east off J68 to the highest ground);
  * reservoir R1 (grade 960 ft) feeding J31 through a 12-in line; tank T1 (grade 948 ft) on
    J16 through a 10-in line;
  * ground from about 820 ft (west) to 885 ft (top of the hill branch);
  * average-day demands 5-40 gpm at most junctions (a few without demand), max_day_factor 1.5;
  * 12 hydrants.
Block lengths, demands, small elevation offsets and C factors come from random.Random(SEED)
(Mersenne Twister, stable across Python versions) and are rounded before they are written.

Re-run (from the repository root), then re-run sweep.py:
    python3 tests/reference/sweep_town/make_sweep_town.py
"""
import os
import random

SEED = 4242
ROWS, COLS = 6, 8
ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", ".."))
OUT = os.path.join(ROOT, "tests", "data", "sweep_town")

# pipes whose diameter is not the default 8 in: (from, to) -> diameter in inches
SPECIAL_D = {}
for c in range(1, COLS):
    SPECIAL_D[(f"J3{c}", f"J3{c + 1}")] = 12          # arterial street 3
for r in range(1, ROWS):
    SPECIAL_D[(f"J{r}2", f"J{r + 1}2")] = 12          # arterial avenue 2
for c in range(1, COLS):
    SPECIAL_D[(f"J6{c}", f"J6{c + 1}")] = 6           # street 6 is all 6-in
    SPECIAL_D[(f"J1{c}", f"J1{c + 1}")] = 6 if c >= 4 else 8
for r in range(1, ROWS):
    SPECIAL_D[(f"J{r}8", f"J{r + 1}8")] = 6           # east avenue 6-in
SPECIAL_D.update({("J45", "J46"): 4, ("J46", "J47"): 4, ("J25", "J26"): 4, ("J55", "J56"): 4,
                  ("J46", "J56"): 4})

HYDRANTS = [
    ("H01", "J31"), ("H02", "J33"), ("H03", "J35"), ("H04", "J22"), ("H05", "J52"),
    ("H06", "J46"), ("H07", "J68"), ("H08", "W2"), ("H09", "B3"), ("H10", "C2"),
    ("H11", "J17"), ("H12", "J64"),
]


def build():
    rng = random.Random(SEED)
    junctions = []
    for r in range(1, ROWS + 1):
        for c in range(1, COLS + 1):
            j = f"J{r}{c}"
            elev = round(820.0 + 6.5 * (c - 1) + 1.5 * (r - 1) + rng.uniform(-3.0, 3.0), 1)
            demand = round(rng.uniform(5.0, 40.0), 1) if rng.random() > 0.1 else 0.0
            junctions.append([j, elev, demand, (c - 1) * 600, (r - 1) * 500])
    extra = [("B1", 816.0, 12.0, -300, -300), ("B2", 818.5, 9.5, -600, -650), ("B3", 823.0, 15.0, -900, -1000),
             ("C1", 845.5, 10.0, 2400, -500), ("C2", 851.0, 18.0, 2400, -1000),
             ("W1", 866.0, 6.0, 4500, 2900), ("W2", 872.0, 5.0, 4900, 3300), ("W3", 877.0, 4.0, 5300, 3700)]
    for e in extra:
        junctions.append(list(e))
    pipes = []
    k = 0

    def add(a, b, length, diam, cfac):
        nonlocal k
        k += 1
        pipes.append((f"P{k:03d}", a, b, length, diam, cfac))

    for r in range(1, ROWS + 1):
        for c in range(1, COLS):
            a, b = f"J{r}{c}", f"J{r}{c + 1}"
            add(a, b, round(rng.uniform(520.0, 720.0)), SPECIAL_D.get((a, b), 8), round(rng.uniform(95.0, 130.0)))
    for r in range(1, ROWS):
        for c in range(1, COLS + 1):
            a, b = f"J{r}{c}", f"J{r + 1}{c}"
            add(a, b, round(rng.uniform(380.0, 560.0)), SPECIAL_D.get((a, b), 8), round(rng.uniform(95.0, 130.0)))
    add("J11", "B1", 480, 6, 100)
    add("B1", "B2", 520, 6, 100)
    add("B2", "B3", 540, 6, 100)
    add("J15", "C1", 610, 6, 110)
    add("C1", "C2", 560, 6, 110)
    add("J68", "W1", 700, 4, 90)
    add("W1", "W2", 640, 4, 90)
    add("W2", "W3", 620, 4, 90)
    pipes.append(("PR1", "R1", "J31", 900, 12, 120))
    pipes.append(("PT1", "T1", "J16", 650, 10, 115))
    sources = [("R1", "reservoir", 960.0, -900, 1000), ("T1", "tank", 948.0, 3300, -700)]
    return junctions, pipes, sources


def write(junctions, pipes, sources):
    os.makedirs(OUT, exist_ok=True)
    with open(os.path.join(OUT, "model.toml"), "w", newline="\n") as fh:
        fh.write("# Invented street-grid town for the fire-flow sweep test; "
                 "written by tests/reference/sweep_town/make_sweep_town.py\n")
        fh.write('name = "Sweep town"\nunits = "us"\nheadloss = "hazen-williams"\n')
        fh.write("[demand]\nmax_day_factor = 1.5\npeak_hour_factor = 2.5\n")
    with open(os.path.join(OUT, "junctions.csv"), "w", newline="\n") as fh:
        fh.write("# elevation ft, demand gpm (average day)\n")
        fh.write("id,elevation,demand,x,y\n")
        for j, e, d, x, y in junctions:
            fh.write(f"{j},{e},{d},{x},{y}\n")
    with open(os.path.join(OUT, "sources.csv"), "w", newline="\n") as fh:
        fh.write("id,kind,grade,x,y\n")
        for s in sources:
            fh.write(",".join(str(v) for v in s) + "\n")
    with open(os.path.join(OUT, "pipes.csv"), "w", newline="\n") as fh:
        fh.write("# length ft, diameter in, roughness = Hazen-Williams C\n")
        fh.write("id,from,to,length,diameter,roughness\n")
        for p in pipes:
            fh.write(",".join(str(v) for v in p) + "\n")
    with open(os.path.join(OUT, "hydrants.csv"), "w", newline="\n") as fh:
        fh.write("id,junction\n")
        for h, j in HYDRANTS:
            fh.write(f"{h},{j}\n")


def main():
    write(*build())
    print("wrote", OUT)


if __name__ == "__main__":
    main()
