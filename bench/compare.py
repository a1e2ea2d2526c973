#!/usr/bin/env python3
"""Runner behind bench/compare.sh (standard library only; see bench/README.md).

For every bundled scenario: runs `fickfit fit` (Jacobian intervals, report folder written) and
bench/scipy_fit.py alternately --repeats times, then `fickfit fit --profile` --profile-repeats
times, and prints Markdown tables: both estimates with their standard errors and the difference
in combined standard errors; median wall times and the ratio; the profile times; and whether
the speed targets are met.
"""

import argparse
import json
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(HERE)
FICKFIT = os.path.join(ROOT, "target", "release", "fickfit")
SCENARIOS = [
    "film-uptake",
    "heated-rod",
    "depth-profiles",
    "coating-substrate",
    "bead-sorption",
    "permeation-membrane",
    "periodic-rod",
    "anneal-series/1173K",
    "anneal-series/1223K",
    "anneal-series/1273K",
]
# Targets stated in docs/performance.md.
FIT_TARGET_S = 0.2
RATIO_TARGET = 30.0
PROFILE_TARGET_S = 2.0


def run_fickfit(scenario, out_dir, extra=()):
    """Wall time of one plain `fickfit fit --quiet` process (report folder written) and the
    report.json it wrote."""
    exp = os.path.join(ROOT, "sample-data", scenario, "experiment.toml")
    cmd = [FICKFIT, "fit", exp, "--quiet", "--force", "--out", out_dir, *extra]
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True)
    wall = time.perf_counter() - t0
    with open(os.path.join(out_dir, "report.json")) as f:
        return wall, json.load(f)


def run_scipy(scenario):
    """Wall time of one scipy_fit.py process, and its JSON (which holds the in-script fit time)."""
    cmd = [sys.executable, os.path.join(HERE, "scipy_fit.py"), scenario]
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, check=True)
    wall = time.perf_counter() - t0
    return wall, json.loads(p.stdout)


def shell(cmd):
    try:
        return subprocess.run(cmd, shell=True, capture_output=True, text=True,
                              cwd=ROOT).stdout.strip()
    except OSError as e:
        return f"({cmd}: {e})"


def header():
    """The lines that say when, on what and with which versions the figures were taken."""
    versions = subprocess.run(
        [sys.executable, "-c",
         "import numpy, scipy, platform; "
         "print('Python', platform.python_version(), 'NumPy', numpy.__version__, "
         "'SciPy', scipy.__version__)"],
        capture_output=True, text=True).stdout.strip()
    commit = shell("git rev-parse --short HEAD")
    src_commit = shell("git log -1 --format=%h -- src Cargo.toml Cargo.lock")
    dirty = " (with uncommitted changes)" if shell("git status --porcelain -- src Cargo.toml") else ""
    lines = [
        f"# {time.strftime('%Y-%m-%d %H:%M UTC', time.gmtime())}",
        f"# fickfit: {shell(FICKFIT + ' --version')}, commit {commit}{dirty} (src/ last changed "
        f"in {src_commit}), release build",
        f"# {versions}",
        "# lscpu | head:",
    ]
    lines += ["#   " + ln for ln in shell("lscpu | head").splitlines()]
    return "\n".join(lines)


def fmt(x):
    return f"{x:.6g}"


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--profile-repeats", type=int, default=3)
    ap.add_argument("--raw", help="also write every wall time to this JSON file")
    args = ap.parse_args()
    print(header())
    print(f"# uptime before: {shell('uptime')}")
    tmp = tempfile.mkdtemp(prefix="fickfit-bench-")

    def out_dir(s, suffix=""):
        return os.path.join(tmp, s.replace("/", "_") + suffix)

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
                    w, rep = run_fickfit(s, out_dir(s))
                    ff_times[s].append(w)
                    ff_last[s] = rep
                else:
                    w, rep = run_scipy(s)
                    sp_times[s].append(w)
                    sp_fit_times[s].append(rep["wall_time_s"])
                    sp_last[s] = rep
        print(f"# round {r + 1}/{args.repeats} done", file=sys.stderr)

    prof_times, prof_last = {}, {}
    for s in SCENARIOS:
        walls = []
        for _ in range(args.profile_repeats):
            w, prof_last[s] = run_fickfit(s, out_dir(s, "-profile"), ["--profile"])
            walls.append(w)
        prof_times[s] = walls
    print("# profile runs done", file=sys.stderr)
    print(f"# uptime after: {shell('uptime')}")
    if args.raw:
        with open(args.raw, "w") as f:
            json.dump({"fickfit_fit": ff_times, "fickfit_profile": prof_times,
                       "scipy_fit_in_script": sp_fit_times, "scipy_process": sp_times}, f, indent=1)
        print(f"# every wall time: {args.raw}")
    print(f"# {args.repeats} rounds of fit pairs, {args.profile_repeats} profile runs per "
          "scenario; medians below")

    print()
    print("| scenario | parameter | fickfit estimate ± SE | SciPy estimate ± SE "
          "| difference / combined SE | SE ratio SciPy / fickfit |")
    print("| --- | --- | --- | --- | --- | --- |")
    worst = (0.0, "")
    for s in SCENARIOS:
        ffp = {p["name"]: p for p in ff_last[s]["parameters"]}
        for p in sp_last[s]["parameters"]:
            f = ffp[p["name"]]
            if f["unit"] != p["unit"]:
                raise SystemExit(f"{s} {p['name']}: units differ ({f['unit']} vs {p['unit']})")
            comb = math.hypot(f["std_error"], p["std_error"])
            z = (f["estimate"] - p["estimate"]) / comb
            if abs(z) > abs(worst[0]):
                worst = (z, f"{s} {p['name']}")
            print(f"| {s} | {p['name']} [{p['unit']}] | {fmt(f['estimate'])} ± {fmt(f['std_error'])} "
                  f"| {fmt(p['estimate'])} ± {fmt(p['std_error'])} | {z:+.3f} "
                  f"| {p['std_error'] / f['std_error']:.4f} |")
    print()
    print(f"Largest disagreement: {worst[0]:+.3f} combined standard errors ({worst[1]}).")

    print()
    print("| scenario | points | SciPy cells | fickfit fit (Jacobian intervals) "
          "| fickfit fit --profile | profile intervals "
          "| SciPy fit (in script) | SciPy process | ratio SciPy fit / fickfit fit "
          f"| targets met (fit < {FIT_TARGET_S} s, ≥ {RATIO_TARGET:.0f}×, profile < "
          f"{PROFILE_TARGET_S} s) |")
    print("| --- | --- | --- | --- | --- | --- | --- | --- | --- | --- |")
    met = {"fit": 0, "ratio": 0, "profile": 0}
    for s in SCENARIOS:
        ff = statistics.median(ff_times[s])
        pr = statistics.median(prof_times[s])
        spf = statistics.median(sp_fit_times[s])
        spw = statistics.median(sp_times[s])
        ratio = spf / ff
        params = prof_last[s]["parameters"]
        # A profile interval with a null end did not cross the threshold: not counted.
        got = sum(1 for p in params if p.get("profile") and p["profile"].get("low") is not None
                  and p["profile"].get("high") is not None)
        free = sum(1 for p in params if not p.get("fixed"))
        ok = (ff < FIT_TARGET_S, ratio >= RATIO_TARGET, pr < PROFILE_TARGET_S and got == free)
        for key, v in zip(("fit", "ratio", "profile"), ok):
            met[key] += v
        n = ff_last[s]["fit"]["n_points"]
        marks = ", ".join("yes" if v else "no" for v in ok)
        print(f"| {s} | {n} | {sp_last[s]['cells']} | {ff:.4f} s | {pr:.4f} s | {got} of {free} "
              f"| {spf:.2f} s | {spw:.2f} s | {ratio:.1f}× | {marks} |")
    k = len(SCENARIOS)
    print()
    print(f"Targets: fit with Jacobian intervals under {FIT_TARGET_S} s on {met['fit']} of {k}; "
          f"SciPy fit at least {RATIO_TARGET:.0f}× slower on {met['ratio']} of {k}; "
          f"profile intervals for every parameter under {PROFILE_TARGET_S} s on "
          f"{met['profile']} of {k}.")


if __name__ == "__main__":
    main()
