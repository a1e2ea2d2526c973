#!/usr/bin/env python3
"""How `fickfit fit` scales with the number of data points and with the number of cells.

Data: a sorption curve of a 100 um film (both faces at a fixed value), Crank's plane-sheet
series (The Mathematics of Diffusion, 1975, eq. 4.18) with D = 3e-13 m2/s, M_inf = 0.8 mg,
balance offset 12.5 mg and seeded Gaussian noise of 0.002 mg, logged at N equally spaced times
up to D t / L^2 = 1 (a balance logging at a fixed rate). Invented numbers. The fit is D, M_inf
and the offset, with Jacobian intervals and the full report folder.

- points: N = 10^3, 10^4, 10^5, 10^6 on the default grid;
- cells: N = 10^3 with `[solver] uniform_cells` = 100, 200, 400, 800, 1600, 3200.

For each run it prints the wall time and peak memory (`/usr/bin/time`, best of REPEATS runs),
the report folder's size and the fitted D. Uses only the Python standard library.

Usage: bench/scaling.py [--repeats R] [--max-points N] [--binary PATH]
"""

import argparse
import math
import os
import random
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)

L = 100e-6
D = 3e-13
M_INF = 0.8
M0 = 12.5
SIGMA = 0.002


def uptake(tau):
    """Crank (1975) eq. 4.18, plane sheet, both faces at a fixed value."""
    s = 0.0
    for n in range(400):
        k = (2 * n + 1) ** 2 * math.pi ** 2
        term = 8.0 / k * math.exp(-k * tau)
        s += term
        if term < 1e-18:
            break
    return 1.0 - s


def write_case(folder, n, cells=None):
    rng = random.Random(1)
    t_end = L * L / D
    # The series converges slowly at tiny tau; tabulate it on a fine grid of tau and interpolate
    # linearly in sqrt(tau) (error far below the noise), so 10^6 points take seconds.
    grid = [((k / 20000.0) ** 2) for k in range(20001)]
    table = [uptake(max(g, 1e-12)) for g in grid]

    def fraction(tau):
        x = math.sqrt(tau) * 20000.0
        i = min(int(x), 19999)
        w = x - i
        return table[i] * (1 - w) + table[i + 1] * w

    with open(os.path.join(folder, "uptake.csv"), "w") as f:
        f.write("time [s],mass [mg]\n")
        for k in range(n):
            t = t_end * (k + 1) / n
            m = M0 + M_INF * fraction(D * t / (L * L)) + rng.gauss(0.0, SIGMA)
            f.write(f"{t:.6f},{m:.6f}\n")
    solver = f"\n[solver]\nuniform_cells = {cells}\n" if cells else ""
    with open(os.path.join(folder, "uptake.toml"), "w") as f:
        f.write(f'''title = "Scaling study: {n} points"
[sample]
shape = "slab"
value_unit = "mg/cm3"
thickness = "100 um"
diffusivity = "D"
[ends.left]
value = 1.0
[ends.right]
value = 1.0
[initial]
value = 0.0
[parameters.D]
lower = "1e-18 m2/s"
upper = "1e-8 m2/s"
transform = "log"
[parameters.M_inf]
unit = "mg"
[parameters.m0]
unit = "mg"
[[datasets]]
name = "uptake"
file = "uptake.csv"
layout = "time_series"
observe = "fractional_uptake"
time_column = "time"
value_column = "mass"
sigma = "0.002 mg"
weighting = "absolute"
scale = "M_inf"
offset = "m0"
{solver}''')
    return os.path.join(folder, "uptake.toml")


def run(binary, experiment, out):
    """(wall s, peak KB, report bytes, D) of one `fickfit fit`."""
    cmd = ["/usr/bin/time", "-f", "%e %M", binary, "fit", experiment, "--out", out, "--force",
           "--quiet"]
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        raise SystemExit(f"fickfit failed on {experiment}:\n{p.stderr}")
    wall, peak = p.stderr.strip().splitlines()[-1].split()
    size = sum(os.path.getsize(os.path.join(out, f)) for f in os.listdir(out))
    import json
    with open(os.path.join(out, "report.json")) as f:
        report = json.load(f)
    d = next(x for x in report["parameters"] if x["name"] == "D")
    return float(wall), int(peak), size, d["estimate_si"]


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--max-points", type=int, default=1_000_000)
    ap.add_argument("--binary", default=os.path.join(ROOT, "target", "release", "fickfit"))
    args = ap.parse_args()
    if not os.path.exists(args.binary):
        raise SystemExit(f"{args.binary} is missing: run `cargo build --release` first")
    work = tempfile.mkdtemp(prefix="fickfit-scaling-")
    try:
        print(f"# uptime: {open('/proc/loadavg').read().strip()}")
        print("| points | cells | wall (best of %d) | peak memory | report folder | D [m2/s] |" % args.repeats)
        print("| --- | --- | --- | --- | --- | --- |")
        cases = [(n, None) for n in (1_000, 10_000, 100_000, 1_000_000) if n <= args.max_points]
        cases += [(1_000, c) for c in (100, 200, 400, 800, 1600, 3200)]
        for n, cells in cases:
            folder = os.path.join(work, f"n{n}-c{cells}")
            os.makedirs(folder)
            exp = write_case(folder, n, cells)
            best = None
            for _ in range(args.repeats):
                r = run(args.binary, exp, os.path.join(folder, "report"))
                if best is None or r[0] < best[0]:
                    best = r
            wall, peak, size, d = best
            print(f"| {n} | {cells or 'default (436)'} | {wall:.2f} s | {peak / 1024:.1f} MB "
                  f"| {size / 1e6:.2f} MB | {d:.5e} |", flush=True)
            shutil.rmtree(folder)
        print(f"# uptime: {open('/proc/loadavg').read().strip()}")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
