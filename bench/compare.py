#!/usr/bin/env python3
"""Runner behind bench/compare.sh (standard library only; see bench/README.md)."""

import argparse
import json
import math
import os
import platform
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
FICKFIT = os.path.join(ROOT, "target", "release", "fickfit")
SCENARIOS = ["film-uptake", "heated-rod", "depth-profiles"]


def run_fickfit(scenario, out_dir, extra=()):
    """Wall time of one `fickfit fit` process (report folder written) and its report."""
    exp = os.path.join(ROOT, "sample-data", scenario, "experiment.toml")
    cmd = [FICKFIT, "fit", exp, "--json", "--quiet", "--force", "--out", out_dir, *extra]
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    return wall, json.loads(p.stdout)


def run_scipy(scenario):
    """Wall time of one scipy_fit.py process, and its JSON (which holds the in-script fit time)."""
    cmd = [sys.executable, os.path.join(HERE, "scipy_fit.py"), scenario]
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    return wall, json.loads(p.stdout)


def machine():
    cpu = platform.processor() or ""
    try:
        with open("/proc/cpuinfo") as f:
            for line in f:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    return f"{os.cpu_count()} cores, {cpu}, load average {load:.2f}"


def fmt(x):
    return f"{x:.6g}"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--profile-repeats", type=int, default=3)
    args = ap.parse_args()
    print(f"# {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}; {machine()}")
    tmp = tempfile.mkdtemp(prefix="fickfit-bench-")
    ff_times = {s: [] for s in SCENARIOS}
    sp_times = {s: [] for s in SCENARIOS}
    sp_fit_times = {s: [] for s in SCENARIOS}
    ff_last, sp_last = {}, {}
    for r in range(args.repeats):
        for s in SCENARIOS:
            # Alternate the order inside each pair too, so neither always runs first.
            order = ("ff", "sp") if r % 2 == 0 else ("sp", "ff")
            for who in order:
                if who == "ff":
                    w, rep = run_fickfit(s, os.path.join(tmp, s))
                    ff_times[s].append(w)
                    ff_last[s] = rep
                else:
                    w, rep = run_scipy(s)
                    sp_times[s].append(w)
                    sp_fit_times[s].append(rep["wall_time_s"])
                    sp_last[s] = rep
        print(f"# round {r + 1}/{args.repeats} done", file=sys.stderr)

    print()
    print("| scenario | parameter | fickfit estimate ± SE | SciPy estimate ± SE "
          "| difference / combined SE |")
    print("| --- | --- | --- | --- | --- |")
    worst = 0.0
    for s in SCENARIOS:
        ffp = {p["name"]: p for p in ff_last[s]["parameters"]}
        for p in sp_last[s]["parameters"]:
            f = ffp[p["name"]]
            if f["unit"] != p["unit"]:
                raise SystemExit(f"{s} {p['name']}: units differ ({f['unit']} vs {p['unit']})")
            comb = math.hypot(f["std_error"], p["std_error"])
            z = (f["estimate"] - p["estimate"]) / comb
            worst = max(worst, abs(z))
            print(f"| {s} | {p['name']} [{p['unit']}] | {fmt(f['estimate'])} ± {fmt(f['std_error'])} "
                  f"| {fmt(p['estimate'])} ± {fmt(p['std_error'])} | {z:+.3f} |")
    print()
    print(f"Largest disagreement: {worst:.3f} combined standard errors.")
    print()
    print("| scenario | points | fickfit median wall (process, report written) "
          "| SciPy median fit time (in script) | SciPy median wall (process) "
          "| ratio SciPy fit / fickfit wall |")
    print("| --- | --- | --- | --- | --- | --- |")
    for s in SCENARIOS:
        ff = statistics.median(ff_times[s])
        spf = statistics.median(sp_fit_times[s])
        spw = statistics.median(sp_times[s])
        n = ff_last[s]["fit"]["n_points"]
        print(f"| {s} | {n} | {ff:.3f} s | {spf:.2f} s | {spw:.2f} s | {spf / ff:.1f}× |")
    print()
    print("| scenario | `fickfit fit --profile` median wall | profile intervals |")
    print("| --- | --- | --- |")
    for s in SCENARIOS:
        walls = []
        rep = None
        for _ in range(args.profile_repeats):
            w, rep = run_fickfit(s, os.path.join(tmp, s + "-profile"), ["--profile"])
            walls.append(w)
        got = sum(1 for p in rep["parameters"] if p.get("profile"))
        free = sum(1 for p in rep["parameters"] if not p.get("fixed"))
        print(f"| {s} | {statistics.median(walls):.3f} s | {got} of {free} parameters |")


if __name__ == "__main__":
    main()
