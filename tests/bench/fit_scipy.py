#!/usr/bin/python3
"""SciPy reference for bench_fit_speed: fits each curve it wrote with
scipy.optimize.least_squares (trust-region reflective, bounds, analytic
Jacobian) on the same residual, weights and start, then prints a table of
times and final costs beside junco's.

    /usr/bin/python3 tests/bench/fit_scipy.py DIR     (DIR as given to bench_fit_speed)

Residual (fit_solve.hpp): r_k = (V_k - I_k*Rs - n*Vt*log1p(I_k*exp(-ln_is))) / sigma_k,
x = (ln_is, n, Rs), cost = 0.5*sum(r^2) in both programs.
"""
import json
import math
import os
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


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: fit_scipy.py DIR")
    folder = sys.argv[1]
    with open(os.path.join(folder, "summary.json")) as f:
        curves = json.load(f)
    print(f"{'curve':<12} {'points':>6} {'junco [us]':>11} {'scipy [us]':>11} {'ratio':>7} "
          f"{'junco cost':>16} {'scipy cost':>16} {'cost ok':>7}")
    worst_ratio, all_cost_ok = math.inf, True
    for c in curves:
        data = np.loadtxt(os.path.join(folder, c["file"]), delimiter=",", skiprows=1)
        v, i, sigma = data[:, 0], data[:, 1], data[:, 2]
        vt = K_B * c["temp_k"] / Q_E
        x0 = np.array(c["start"])
        reps = 30 if c["points"] > 500 else 60
        times = []
        for _ in range(reps):
            t0 = time.perf_counter()
            result = fit(v, i, sigma, vt, x0)
            times.append(time.perf_counter() - t0)
        t_scipy = float(np.median(times))
        ratio = t_scipy / c["junco_solve_s"]
        worst_ratio = min(worst_ratio, ratio)
        # "No worse": junco's cost may exceed SciPy's only by rounding (1e-9 relative).
        cost_ok = c["junco_cost"] <= result.cost * (1 + 1e-9) + 1e-12
        all_cost_ok &= cost_ok
        print(f"{c['label']:<12} {c['points']:>6} {c['junco_solve_s'] * 1e6:>11.1f} {t_scipy * 1e6:>11.1f} "
              f"{ratio:>6.1f}x {c['junco_cost']:>16.10g} {result.cost:>16.10g} {'yes' if cost_ok else 'NO':>7}")
    print(f"slowest speed-up {worst_ratio:.1f}x (target >= 10x): {'met' if worst_ratio >= 10 else 'NOT met'}; "
          f"junco cost no worse than SciPy on every curve: {'yes' if all_cost_ok else 'NO'}")
    return 0 if worst_ratio >= 10 and all_cost_ok else 1


if __name__ == "__main__":
    sys.exit(main())
