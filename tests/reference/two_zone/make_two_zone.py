#!/usr/bin/env python3
"""Writes the invented test network tests/data/two_zone/ (US units, Hazen-Williams).

Ran with: Python 3.11.7 (standard library only). All numbers are written out by hand below.

An invented two-zone system (no real system):
  * reservoir R1 (grade 800 ft) -> pump PU1 (three-point curve, speed left at its default 1)
    -> high zone H1..H8 (ground 760-810 ft, two loops) with tank T1 (grade 935 ft) on H7;
  * a long 8-in feeder H5 -> H8 brings water to the pressure-reducing valve V1 (6 in, active,
    setting 70 psi, wide-open K = 5) from H8 into the low zone L1..L6 (ground 700-730 ft,
    two loops). The low zone has no other supply.
  * average-day demands on both zones (junctions.csv, column zone = high | low).

Re-run (from the repository root), then re-run solve_two_zone.py:
    python3 tests/reference/two_zone/make_two_zone.py
"""
import os

ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", ".."))
OUT = os.path.join(ROOT, "tests", "data", "two_zone")

MODEL = """# Invented two-zone test network (pump, tank, PRV); written by tests/reference/two_zone/make_two_zone.py
name = "Two zone"
units = "us"
headloss = "hazen-williams"
[demand]
max_day_factor = 1.5
peak_hour_factor = 2.5
"""

JUNCTIONS = """# elevation ft, demand gpm (average day)
id,elevation,demand,zone,x,y
H1,770,0,high,0,0
H2,775,150,high,800,0
H3,790,120,high,2000,0
H4,800,100,high,3000,0
H5,785,90,high,800,-1100
H6,795,110,high,2000,-1100
H7,810,80,high,3000,-1100
H8,760,20,high,800,-3600
L1,720,40,low,800,-3900
L2,715,80,low,1700,-3900
L3,705,90,low,2700,-3900
L4,700,70,low,2700,-4700
L5,710,60,low,1700,-4700
L6,730,50,low,800,-4700
"""

SOURCES = """id,kind,grade,x,y
R1,reservoir,800,-300,0
T1,tank,935,3600,-1100
"""

PIPES = """# length ft, diameter in, roughness = Hazen-Williams C
id,from,to,length,diameter,roughness,minor_loss,status
HP1,H1,H2,800,12,120,,
HP2,H2,H3,1200,10,115,,
HP3,H3,H4,1000,8,110,,
HP4,H4,H7,900,10,115,,
HP5,H2,H5,1100,8,110,,
HP6,H5,H6,1000,8,105,,
HP7,H6,H7,1300,8,110,,
HP8,H3,H6,900,8,100,,
HP9,H7,T1,600,12,120,,
HP10,H5,H8,2500,8,100,,
LP1,L1,L2,900,8,110,,
LP2,L2,L3,1000,8,110,,
LP3,L3,L4,800,6,100,,
LP4,L4,L5,900,6,100,,
LP5,L5,L2,1100,6,100,,
LP6,L1,L6,700,6,105,,
LP7,L6,L5,1000,6,105,,
"""

PUMPS = """# heads ft, flows gpm; speed and status left empty (defaults 1 and on)
id,from,to,shutoff_head,design_flow,design_head,runout_flow,runout_head,speed,status
PU1,R1,H1,220,1000,170,1600,110,,
"""

VALVES = """# diameter in, setting psi (pressure held at the downstream junction L1), minor_loss = K wide open
id,from,to,kind,diameter,setting,minor_loss,status
V1,H8,L1,prv,6,70,5,active
"""


def main():
    os.makedirs(OUT, exist_ok=True)
    for name, text in (("model.toml", MODEL), ("junctions.csv", JUNCTIONS), ("sources.csv", SOURCES),
                       ("pipes.csv", PIPES), ("pumps.csv", PUMPS), ("valves.csv", VALVES)):
        with open(os.path.join(OUT, name), "w", newline="\n") as fh:
            fh.write(text)
    print("wrote", OUT)


if __name__ == "__main__":
    main()
