#!/usr/bin/env python3
"""The bundled sample fits written as a script with NumPy and SciPy only, for a side-by-side with
fickfit (see bench/README.md).

Each scenario is the physics of its sample-data/*/experiment.toml, solved by the method of lines:
uniform finite volumes in x, scipy.integrate.solve_ivp (BDF, tight tolerances, the constant
tridiagonal Jacobian passed as a sparse matrix) in t, inside scipy.optimize.least_squares (trust
region, bounds, forward-difference Jacobian). Standard errors come from the Jacobian at the
solution, cov = (J^T J)^-1 with residuals already divided by sigma (absolute weighting, sigma
trusted as given, as fickfit's default). Log-transformed parameters are fitted as log p and their
standard error is p * SE(log p) (first-order propagation).

Usage: scipy_fit.py SCENARIO [--cells N]   prints one JSON object on standard output.
SCENARIO is film-uptake, heated-rod or depth-profiles.
"""

import argparse
import csv
import json
import os
import sys
import time

import numpy as np
from scipy import sparse
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

HERE = os.path.dirname(os.path.abspath(__file__))
SAMPLES = os.path.join(os.path.dirname(HERE), "sample-data")

RTOL = 1e-9  # solve_ivp relative tolerance
DIFF_STEP = 1e-6  # relative step of the finite-difference Jacobian


def read_csv(path):
    """Rows of numbers of a CSV file with '#' comment lines and one header line."""
    with open(path, newline="") as f:
        lines = [ln for ln in f if not ln.startswith("#")]
    reader = csv.reader(lines)
    header = next(reader)
    rows = np.array([[float(v) for v in r] for r in reader if r])
    return header, rows


def tridiagonal_operator(n, dx, d, left, right):
    """Matrix A and vector b of dU/dt = A U + b for constant D on n uniform cells of width dx.

    left / right: ("dirichlet",) with the flux D (u_b - U_0)/(dx/2), ("robin", h) with
    J = (u_out - U_0)/(1/h + dx/(2D)), or ("sealed",). The returned b_left / b_right are the
    coefficients of the boundary value (b = b_left u_left + b_right u_right).
    """
    main = np.full(n, -2.0 * d / dx**2)
    off = np.full(n - 1, d / dx**2)
    bl = np.zeros(n)
    br = np.zeros(n)
    for end, idx, bvec in ((left, 0, bl), (right, n - 1, br)):
        main[idx] += d / dx**2  # remove the missing neighbour
        if end[0] == "dirichlet":
            g = d / (dx / 2.0)
        elif end[0] == "robin":
            g = 1.0 / (1.0 / end[1] + dx / (2.0 * d))
        else:
            g = 0.0
        main[idx] -= g / dx
        bvec[idx] = g / dx
    a = sparse.diags([off, main, off], [-1, 0, 1], format="csc")
    return a, bl, br


def covariance_se(res, log_mask):
    """Standard errors of the parameters (natural units) from least_squares' Jacobian."""
    jac = res.jac
    cov = np.linalg.inv(jac.T @ jac)
    se = np.sqrt(np.diag(cov))
    x = res.x.copy()
    est = x.copy()
    est[log_mask] = np.exp(x[log_mask])
    se = np.where(log_mask, est * se, se)
    return est, se


def film_uptake(cells):
    """Water sorption then desorption of a 120 um film, surface transfer h at both faces.

    Symmetric about the mid-plane, so half the film (60 um) is modelled with a sealed centre.
    Fractional uptake F = (M_t - M_0)/(M_inf_eq - M_0); mass = m0 + M_inf * F per run.
    Parameters: log D, log h, M_inf and m0 for each run (mg).
    """
    folder = os.path.join(SAMPLES, "film-uptake")
    runs = []
    for name, c_init, c_out in (("sorption", 0.0, 33.0), ("desorption", 33.0, 0.0)):
        _, rows = read_csv(os.path.join(folder, f"data-{name}.csv"))
        runs.append((rows[:, 0] * 3600.0, rows[:, 1], c_init, c_out))
    sigma = 0.002  # mg
    half = 60e-6
    n = cells
    dx = half / n
    # The last solve of each run, so that moving only a scale or offset solves nothing again.
    cache = {}

    def uptake(k, d, h):
        hit = cache.get(k)
        if hit is not None and hit[0] == (d, h):
            return hit[1]
        t, _, c_init, c_out = runs[k]
        a, bl, _ = tridiagonal_operator(n, dx, d, ("robin", h), ("sealed",))
        b = bl * c_out
        sol = solve_ivp(
            lambda _t, u: a @ u + b,
            (0.0, t[-1]),
            np.full(n, c_init),
            method="BDF",
            t_eval=t,
            jac=a,
            rtol=RTOL,
            atol=RTOL * 33.0,
        )
        m = sol.y.sum(axis=0) * dx
        frac = (m - c_init * half) / (c_out * half - c_init * half)
        cache[k] = ((d, h), frac)
        return frac

    def residuals(x):
        d, h = np.exp(x[0]), np.exp(x[1])
        out = []
        for k, (_, y, _, _) in enumerate(runs):
            scale, offset = x[2 + 2 * k], x[3 + 2 * k]
            out.append((offset + scale * uptake(k, d, h) - y) / sigma)
        return np.concatenate(out)

    x0 = np.array([np.log(1e-12), np.log(1e-8), 0.3, 15.0, -0.3, 15.5])
    lower = [np.log(1e-16), np.log(1e-12), -np.inf, -np.inf, -np.inf, -np.inf]
    upper = [np.log(1e-9), np.inf, np.inf, np.inf, np.inf, np.inf]
    res = least_squares(
        residuals, x0, bounds=(lower, upper), x_scale="jac", diff_step=DIFF_STEP,
        xtol=1e-12, ftol=1e-12, gtol=1e-12,
    )
    log_mask = np.array([True, True, False, False, False, False])
    est, se = covariance_se(res, log_mask)
    names = ["D", "h", "M_inf[sorption]", "m0[sorption]", "M_inf[desorption]", "m0[desorption]"]
    units = ["m2/s", "m/s", "mg", "mg", "mg", "mg"]
    return names, units, est, se, res


def heated_rod(cells):
    """300 mm rod: heater-face temperature table at x = 0 (linear interpolation, held after the
    last row), surface transfer h = 2e-6 m/s to 21.5 degC at x = L, lateral loss
    -m (u - 21.5), initial 21.5 degC. Four sensors at 25, 75, 125, 175 mm read by linear
    interpolation between cell centres. Parameters: log alpha (mm2/s), m_loss (1/s, linear).
    """
    folder = os.path.join(SAMPLES, "heated-rod")
    _, heater = read_csv(os.path.join(folder, "heater.csv"))
    _, rows = read_csv(os.path.join(folder, "sensors.csv"))
    t = rows[:, 0]
    y = rows[:, 1:5]
    sigma = 0.1
    length = 0.3
    ambient = 21.5
    n = cells
    dx = length / n
    centres = (np.arange(n) + 0.5) * dx
    sensors = np.array([0.025, 0.075, 0.125, 0.175])
    # Linear interpolation weights between neighbouring centres.
    j = np.searchsorted(centres, sensors) - 1
    w = (sensors - centres[j]) / dx
    # Integrate piecewise between heater rows so that every kink of the forcing is a step end.
    breaks = [tb for tb in heater[:, 0] if 0.0 < tb < t[-1]]
    edges = np.concatenate([[0.0], breaks, [t[-1]]])

    def heater_value(tt):
        return np.interp(tt, heater[:, 0], heater[:, 1])

    def model(alpha, m):
        a, bl, br = tridiagonal_operator(n, dx, alpha, ("dirichlet",), ("robin", 2e-6))
        a = (a - m * sparse.identity(n, format="csc")).tocsc()
        const = br * ambient + m * ambient
        u = np.full(n, ambient)
        out = np.empty((len(t), n))
        for t0, t1 in zip(edges[:-1], edges[1:]):
            sel = (t >= t0) & (t <= t1)
            # Outputs of this piece plus its end, whose state starts the next piece.
            t_eval = np.union1d(t[sel], [t1])
            sol = solve_ivp(
                lambda tt, uu: a @ uu + bl * heater_value(tt) + const,
                (t0, t1),
                u,
                method="BDF",
                t_eval=t_eval,
                jac=a,
                rtol=RTOL,
                atol=RTOL * 90.0,
            )
            keep = np.isin(t_eval, t[sel])
            out[sel] = sol.y[:, keep].T
            u = sol.y[:, -1]
        return out[:, j] * (1.0 - w) + out[:, j + 1] * w

    def residuals(x):
        alpha = np.exp(x[0]) * 1e-6
        return ((model(alpha, x[1]) - y) / sigma).ravel()

    x0 = np.array([np.log(40.0), 5e-3])
    res = least_squares(
        residuals, x0, bounds=([np.log(1.0), 0.0], [np.log(1000.0), 0.1]), x_scale="jac",
        diff_step=DIFF_STEP, xtol=1e-12, ftol=1e-12, gtol=1e-12,
    )
    est, se = covariance_se(res, np.array([True, False]))
    return ["alpha", "m_loss"], ["mm2/s", "1/s"], est, se, res


def depth_profiles(cells):
    """3 mm coupon: surface value C_s held at x = 0 from t = 0, back face sealed, initial C_0.
    Profiles at 1, 4, 9 h; the value at a depth is interpolated linearly between cell centres
    and, before the first centre, toward the face value C_s. Parameters: log D, C_s, C_0.
    """
    folder = os.path.join(SAMPLES, "depth-profiles")
    _, rows = read_csv(os.path.join(folder, "profiles.csv"))
    t_rows = rows[:, 0] * 3600.0
    x_rows = rows[:, 1] * 1e-6
    y = rows[:, 2]
    sigma = 8.0
    times = np.unique(t_rows)
    t_index = np.searchsorted(times, t_rows)
    length = 3e-3
    n = cells
    dx = length / n
    # Node positions: the face (value C_s) then the cell centres.
    nodes = np.concatenate([[0.0], (np.arange(n) + 0.5) * dx])
    j = np.clip(np.searchsorted(nodes, x_rows, side="right") - 1, 0, n - 1)
    w = (x_rows - nodes[j]) / (nodes[j + 1] - nodes[j])

    def model(d, cs, c0):
        a, bl, _ = tridiagonal_operator(n, dx, d, ("dirichlet",), ("sealed",))
        b = bl * cs
        sol = solve_ivp(
            lambda _t, u: a @ u + b,
            (0.0, times[-1]),
            np.full(n, c0),
            method="BDF",
            t_eval=times,
            jac=a,
            rtol=RTOL,
            atol=RTOL * 1000.0,
        )
        full = np.vstack([np.full(len(times), cs), sol.y])  # node values, face first
        return full[j, t_index] * (1.0 - w) + full[j + 1, t_index] * w

    def residuals(x):
        return (model(np.exp(x[0]), x[1], x[2]) - y) / sigma

    x0 = np.array([np.log(5e-12), 800.0, 100.0])
    res = least_squares(
        residuals, x0, bounds=([np.log(1e-16), 0.0, 0.0], [np.inf, np.inf, np.inf]),
        x_scale="jac", diff_step=DIFF_STEP, xtol=1e-12, ftol=1e-12, gtol=1e-12,
    )
    est, se = covariance_se(res, np.array([True, False, False]))
    return ["D", "C_s", "C_0"], ["m2/s", "mol/m3", "mol/m3"], est, se, res


SCENARIOS = {
    "film-uptake": (film_uptake, 200),
    "heated-rod": (heated_rod, 300),
    "depth-profiles": (depth_profiles, 600),
}


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("scenario", choices=sorted(SCENARIOS))
    ap.add_argument("--cells", type=int, default=None, help="uniform cells (default per scenario)")
    args = ap.parse_args()
    func, default_cells = SCENARIOS[args.scenario]
    cells = args.cells or default_cells
    start = time.perf_counter()
    names, units, est, se, res = func(cells)
    wall = time.perf_counter() - start
    chi2 = float(res.fun @ res.fun)
    out = {
        "scenario": args.scenario,
        "cells": cells,
        "wall_time_s": wall,
        "evaluations": int(res.nfev),
        "jacobian_evaluations": int(res.njev) if res.njev is not None else None,
        "chi2": chi2,
        "n_points": int(res.fun.size),
        "status": int(res.status),
        "message": res.message,
        "parameters": [
            {"name": nm, "unit": u, "estimate": float(e), "std_error": float(s)}
            for nm, u, e, s in zip(names, units, est, se)
        ],
    }
    # Reporting units: alpha is fitted in mm2/s already; M_inf and m0 in mg.
    json.dump(out, sys.stdout, indent=1)
    sys.stdout.write("\n")


if __name__ == "__main__":
    main()
