#!/usr/bin/env python3
"""Independent standard errors for tests/reference_fits.rs (se_check test).

Fits van Genuchten (m = 1 - 1/n) to the invented points in se_check_points.csv with SciPy's
curve_fit (MINPACK Levenberg-Marquardt, tight tolerances), then recomputes the covariance
s^2 (J'J)^-1 with numpy from a complex-step Jacobian (exact to rounding) at that optimum.
Writes se_check.json beside this script; the Rust test compares its own fit against it.
Run: python3 tests/data/se_check.py   (needs numpy and scipy; not run by CI)
"""
import csv
import json
import os

import numpy as np
from scipy.optimize import curve_fit

HERE = os.path.dirname(os.path.abspath(__file__))


def vg(h, tr, ts, a, n):
    return tr + (ts - tr) * (1.0 + (a * h) ** n) ** (-(1.0 - 1.0 / n))


def main():
    rows = list(csv.DictReader(open(os.path.join(HERE, "se_check_points.csv"))))
    h = np.array([float(r["suction_cm"]) for r in rows])
    th = np.array([float(r["theta"]) for r in rows])
    p0 = [0.05, 0.41, 0.05, 1.8]
    p, pcov = curve_fit(vg, h, th, p0=p0, ftol=1e-15, xtol=1e-15, gtol=1e-15, maxfev=100000)
    # Complex-step Jacobian: Im f(p + i e_k eps) / eps.
    eps = 1e-30
    jac = np.empty((len(h), 4))
    hc = h.astype(complex)
    for k in range(4):
        q = p.astype(complex)
        q[k] += 1j * eps
        jac[:, k] = np.imag(vg(hc, *q)) / eps
    r = th - vg(h, *p)
    sse = float(r @ r)
    dof = len(h) - 4
    cov = sse / dof * np.linalg.inv(jac.T @ jac)
    out = {
        "source": "tests/data/se_check.py (SciPy curve_fit + numpy complex-step covariance)",
        "names": ["theta_r", "theta_s", "alpha_per_cm", "n"],
        "values": [float(v) for v in p],
        "se": [float(v) for v in np.sqrt(np.diag(cov))],
        "se_curve_fit": [float(v) for v in np.sqrt(np.diag(pcov))],
        "sse": sse,
    }
    with open(os.path.join(HERE, "se_check.json"), "w") as f:
        json.dump(out, f, indent=2)
        f.write("\n")
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
