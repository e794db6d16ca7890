#!/usr/bin/env python3
"""Inputs for the flow-test calibration benchmark (docs/performance.md, "Flow-test calibration").

Copies a synthetic network (examples/synthetic.rs) to OUT, adds a `group` column to pipes.csv
(five groups: DI, PVC, STL, and the CI pipes split in two by id parity) and writes OUT/flowtests.csv
with 50 invented tests: every 50th hydrant in file order is a residual hydrant, its nearest other
hydrant flows two 2.5-in outlets (c 0.90) at a pitot pressure of 20 psi; the static pressure is
the model's at average day (from `firemain solve --condition average --out`, given as SOLVED) and
the residual 10 psi below it. The numbers are invented, for timing only; nothing checks them.

    cargo run --release --example synthetic -- --junctions 10000 --seed 1 --out /tmp/n10k
    ./target/release/firemain solve /tmp/n10k --condition average --out /tmp/n10k-solve
    python3 benches/flowtest/make_inputs.py /tmp/n10k /tmp/n10k-solve /tmp/n10k-ft
    ./target/release/firemain flowtest /tmp/n10k-ft --tests /tmp/n10k-ft/flowtests.csv \\
        --calibrate-by group --quiet
"""
import csv
import math
import shutil
import sys
from pathlib import Path

TESTS = 50


def main(net: Path, solved: Path, out: Path) -> None:
    if out.exists():
        sys.exit(f"{out} exists; give a new folder")
    shutil.copytree(net, out)
    with open(net / "pipes.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    for i, r in enumerate(rows):
        m = r["material"]
        r["group"] = f"CI-{'even' if i % 2 == 0 else 'odd'}" if m == "CI" else m
    with open(out / "pipes.csv", "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=list(rows[0].keys()))
        w.writeheader()
        w.writerows(rows)
    with open(net / "hydrants.csv", newline="") as f:
        hydrants = list(csv.DictReader(f))
    with open(solved / "node_results.csv", newline="") as f:
        pressure = {r["id"]: float(r["pressure_psi"]) for r in csv.DictReader(f)}
    step = max(1, len(hydrants) // TESTS)
    lines = ["test,date,residual_hydrant,static_pressure,residual_pressure,flow_hydrant,"
             "outlet_diameter,outlet_coefficient,pitot_pressure,measured_flow,demand_factor,notes"]
    for k in range(TESTS):
        h = hydrants[(k * step) % len(hydrants)]
        x, y = float(h["x"]), float(h["y"])
        near = min((o for o in hydrants if o["id"] != h["id"]),
                   key=lambda o: math.hypot(float(o["x"]) - x, float(o["y"]) - y))
        static = pressure[h["junction"]]
        t = f"T{k + 1:02d}"
        lines.append(f"{t},2026-06-01,{h['id']},{static:.1f},{static - 10:.1f},{near['id']},2.5,0.9,20,,1,")
        lines.append(f"{t},,,,,{near['id']},2.5,0.9,20,,,")
    (out / "flowtests.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    if len(sys.argv) != 4:
        sys.exit(__doc__)
    main(Path(sys.argv[1]), Path(sys.argv[2]), Path(sys.argv[3]))
