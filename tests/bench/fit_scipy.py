#!/usr/bin/python3
"""SciPy reference for bench_fit_speed, interleaved with it: each round runs
the C++ benchmark (which writes the curves and junco's times into a fresh
directory), then times SciPy on the same curves, so both see the same machine
load. Per curve the figures are medians over the rounds of each round's median.

* solve: scipy.optimize.least_squares (trust-region reflective, bounds,
  analytic Jacobian) on the same residual, weights and start as junco's one
  weighted solve (solve_weighted).
* full fit: SciPy doing what fit_forward does: the weighted linear start
  (V on ln I, 1, I; one 4-robust-sigma trim), then up to 4 solves with the
  effective-variance weights refreshed from each solve until the parameters
  move < 1e-7, then the covariance (J'J)^-1. junco's fit_forward also screens
  the readings and writes its warnings; SciPy skips those (a few us).

    /usr/bin/python3 tests/bench/fit_scipy.py BENCH_BIN DIR [ROUNDS]
      (BENCH_BIN = build/<preset>/bin/bench_fit_speed; or tests/bench/run_fit_bench.sh)

Residual (fit_solve.hpp): r_k = (V_k - I_k*Rs - n*Vt*log1p(I_k*exp(-ln_is))) / sigma_k,
x = (ln_is, n, Rs), cost = 0.5*sum(r^2) in both programs.
"""
import json
import math
import os

# Single-threaded BLAS, as junco is: on a busy 2-core machine BLAS worker threads
# spinning against each other made SciPy several times slower than it is.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
import subprocess
import sys
import time

import numpy as np
from scipy.optimize import least_squares

K_B, Q_E = 1.380649e-23, 1.602176634e-19  # exact, SI 2019 (as fitting/diode.hpp)
LOWER = [-80.0, 0.5, 0.0]  # bounds as fitting/fit_solve.hpp
UPPER = [-2.0, 4.0, 1e6]


def fit(v, i, sigma, vt, x0):
    def residual(x):
        u = i * np.exp(-x[0])
        return (v - i * x[2] - x[1] * vt * np.log1p(u)) / sigma

    def jacobian(x):
        u = i * np.exp(-x[0])
        return np.column_stack(
            (x[1] * vt * u / (1.0 + u) / sigma, -vt * np.log1p(u) / sigma, -i / sigma))

    return least_squares(residual, x0, jac=jacobian, bounds=(LOWER, UPPER), method="trf",
                         ftol=1e-12, xtol=1e-12, gtol=1e-14, max_nfev=2000)


SQRT3 = math.sqrt(3.0)
ACC = (5e-4, 1e-4, 2e-3, 1e-9)  # default AccuracyModel (fitting/extract.hpp): v_rel, v_abs, i_rel, i_abs


def sigma_eff(v, i, vt, x):
    """residual_sigma_v without a shunt: sqrt(u_V^2 + (dV/dI * u_I)^2)."""
    u_v = (ACC[0] * np.abs(v) + ACC[1]) / SQRT3
    u_i = (ACC[2] * np.abs(i) + ACC[3]) / SQRT3
    dvdi = x[2] + x[1] * vt / (i + math.exp(x[0]))
    return np.hypot(u_v, dvdi * u_i)


def linear_start(v, i, sigma, vt):
    def regress(use):
        w = 1.0 / sigma[use]
        a = np.column_stack((np.log(i[use]) * w, w, i[use] * w))
        c = np.linalg.lstsq(a, v[use] * w, rcond=None)[0]
        return c
    use = np.ones(len(v), dtype=bool)
    c = regress(use)
    z = np.abs(v - (c[0] * np.log(i) + c[1] + c[2] * i)) / sigma
    c = regress(z <= max(4.0 * 1.4826 * np.median(z), 3.0))
    n = min(max(c[0] / vt, 0.55), 3.95)
    rs = max(c[2], 0.0)
    ln_is = float(np.median(np.log(i) - (v - i * rs) / (n * vt)))
    return np.array([ln_is, n, rs])


def full_fit(v, i, vt):
    x = linear_start(v, i, (ACC[0] * np.abs(v) + ACC[1]) / SQRT3, vt)
    for _ in range(4):
        result = fit(v, i, sigma_eff(v, i, vt, x), vt, x)
        change = max(abs(result.x[0] - x[0]), abs(result.x[1] - x[1]) / x[1],
                     abs(result.x[2] - x[2]) / max(x[2], 1e-6))
        x = result.x
        if change < 1e-7:
            result = fit(v, i, sigma_eff(v, i, vt, x), vt, x)
            break
    cov = np.linalg.inv(result.jac.T @ result.jac)
    return result, cov


def median_time(reps, f):
    times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        f()
        times.append(time.perf_counter() - t0)
    return float(np.median(times))


def scipy_round(folder):
    with open(os.path.join(folder, "summary.json")) as f:
        curves = json.load(f)
    for c in curves:
        data = np.loadtxt(os.path.join(folder, c["file"]), delimiter=",", skiprows=1)
        v, i, sigma = data[:, 0], data[:, 1], data[:, 2]
        vt = K_B * c["temp_k"] / Q_E
        x0 = np.array(c["start"])
        reps = 30 if c["points"] > 500 else 60
        c["scipy_solve_s"] = median_time(reps, lambda: fit(v, i, sigma, vt, x0))
        c["scipy_full_s"] = median_time(max(reps // 3, 10), lambda: full_fit(v, i, vt))
        c["scipy_cost"] = float(fit(v, i, sigma, vt, x0).cost)
    return curves


def main():
    if len(sys.argv) not in (3, 4):
        sys.exit("usage: fit_scipy.py BENCH_BIN DIR [ROUNDS]")
    bench, folder = sys.argv[1], sys.argv[2]
    rounds = int(sys.argv[3]) if len(sys.argv) == 4 else 5
    per_round = []
    for r in range(rounds):
        sub = os.path.join(folder, f"round{r}")
        subprocess.run([bench, sub], check=True, stdout=subprocess.DEVNULL)
        per_round.append(scipy_round(sub))
    med = lambda key, k: float(np.median([rnd[k][key] for rnd in per_round]))
    print(f"{rounds} interleaved rounds; medians")
    print(f"{'curve':<12} {'points':>6} {'junco':>8} {'scipy':>8} {'ratio':>7} | {'junco':>8} {'scipy':>8} {'ratio':>7} | "
          f"{'junco cost':>16} {'scipy cost':>16} {'ok':>3}")
    print(f"{'':<12} {'':>6} {'solve us':>8} {'solve us':>8} {'':>7} | {'full us':>8} {'full us':>8} {'':>7} |")
    worst_ratio, worst_full, all_cost_ok = math.inf, math.inf, True
    for k, c in enumerate(per_round[0]):
        js, ss = med("junco_solve_s", k), med("scipy_solve_s", k)
        jf, sf = med("junco_fit_forward_s", k), med("scipy_full_s", k)
        ratio, ratio_full = ss / js, sf / jf
        worst_ratio, worst_full = min(worst_ratio, ratio), min(worst_full, ratio_full)
        # "No worse": junco's cost may exceed SciPy's only by rounding (1e-9 relative), in every round.
        cost_ok = all(rnd[k]["junco_cost"] <= rnd[k]["scipy_cost"] * (1 + 1e-9) + 1e-12 for rnd in per_round)
        all_cost_ok &= cost_ok
        print(f"{c['label']:<12} {c['points']:>6} {js * 1e6:>8.1f} {ss * 1e6:>8.1f} {ratio:>6.1f}x | {jf * 1e6:>8.1f} "
              f"{sf * 1e6:>8.1f} {ratio_full:>6.1f}x | {c['junco_cost']:>16.10g} {c['scipy_cost']:>16.10g} "
              f"{'yes' if cost_ok else 'NO':>3}")
    print(f"slowest solve speed-up {worst_ratio:.1f}x (target >= 10x): {'met' if worst_ratio >= 10 else 'NOT met'}; "
          f"slowest full-fit speed-up {worst_full:.1f}x; "
          f"junco cost no worse than SciPy on every curve: {'yes' if all_cost_ok else 'NO'}")
    return 0 if worst_ratio >= 10 and all_cost_ok else 1


if __name__ == "__main__":
    sys.exit(main())
