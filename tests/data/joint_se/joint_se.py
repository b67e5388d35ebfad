"""Reference for tests/joint_fit.rs: one joint retention + conductivity fit computed
independently of porewise, with numpy 2.4 and scipy 1.17.

Case: van Genuchten (m = 1 - 1/n) with Mualem's conductivity (van Genuchten 1980, eq. 8 and
Mualem 1976), invented truth theta_r 0.06, theta_s 0.43, alpha 0.025 1/cm, n 1.6, Ks 35 cm/day,
L -0.8; 11 retention readings with normal noise sd 0.004 m3/m3 and 9 K(h) readings with
normal noise sd 0.15 in log10 K (numpy default_rng(2026)). The data are written to data.csv.

The fit: residuals theta(h) - theta_obs and log10 K(h) - log10 K_obs, each set divided by its
own standard deviation s_set = sqrt(SSE_set / (n_set (1 - k / n))), refitted with
scipy.optimize.least_squares (method "lm", unbounded, natural parameters) until the two
standard deviations change by less than 1e-13 relative. The covariance is s^2 (J'J)^-1 with J
the Jacobian of the weighted residuals by central finite differences (step 1e-6 relative) at
the solution and s^2 = SSE_w / (n - k); the standard errors are the roots of its diagonal.
Writes reference.json. Run: python3 tests/data/joint_se/joint_se.py (not run by the tests).
"""

import json
import os

import numpy as np
from scipy.optimize import least_squares

HERE = os.path.dirname(os.path.abspath(__file__))
H_THETA = np.array([0.0, 10.0, 31.6, 63.0, 100.0, 200.0, 336.5, 1000.0, 3000.0, 5000.0, 15296.0])
H_K = np.array([5.0, 15.0, 40.0, 80.0, 150.0, 250.0, 400.0, 600.0, 900.0])
TRUTH = np.array([0.06, 0.43, 0.025, 1.6, 35.0, -0.8])


def se_of(h, alpha, n):
    m = 1.0 - 1.0 / n
    return (1.0 + (alpha * h) ** n) ** (-m)


def theta(h, p):
    tr, ts, alpha, n = p[:4]
    return tr + (ts - tr) * se_of(h, alpha, n)


def log10_k(h, p):
    alpha, n, ks, l = p[2], p[3], p[4], p[5]
    m = 1.0 - 1.0 / n
    se = se_of(h, alpha, n)
    kr = se ** l * (1.0 - (1.0 - se ** (1.0 / m)) ** m) ** 2
    return np.log10(ks * kr)


def main():
    rng = np.random.default_rng(2026)
    theta_obs = theta(H_THETA, TRUTH) + 0.004 * rng.standard_normal(H_THETA.size)
    logk_obs = log10_k(H_K, TRUTH) + 0.15 * rng.standard_normal(H_K.size)
    k_obs = 10.0 ** logk_obs
    # Written with 17 significant digits; read back to use exactly what the test reads.
    with open(os.path.join(HERE, "data.csv"), "w") as f:
        f.write("set,h_cm,value\n")
        for h, t in zip(H_THETA, theta_obs):
            f.write(f"theta,{float(h)!r},{t:.17g}\n")
        for h, k in zip(H_K, k_obs):
            f.write(f"k_cm_per_day,{float(h)!r},{k:.17g}\n")
    rows = [line.strip().split(",") for line in open(os.path.join(HERE, "data.csv"))][1:]
    theta_obs = np.array([float(v) for s, _, v in rows if s == "theta"])
    logk_obs = np.log10(np.array([float(v) for s, _, v in rows if s == "k_cm_per_day"]))

    n_t, n_k = H_THETA.size, H_K.size
    n, k = n_t + n_k, 6

    def residuals(p, st, sk):
        return np.concatenate([(theta(H_THETA, p) - theta_obs) / st, (log10_k(H_K, p) - logk_obs) / sk])

    p = np.array([0.05, 0.4, 0.02, 1.5, 20.0, 0.5])
    st, sk = 0.004, 0.2
    for _ in range(200):
        p = least_squares(residuals, p, args=(st, sk), method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15).x
        sse_t = np.sum((theta(H_THETA, p) - theta_obs) ** 2)
        sse_k = np.sum((log10_k(H_K, p) - logk_obs) ** 2)
        new_t = np.sqrt(sse_t / (n_t * (1 - k / n)))
        new_k = np.sqrt(sse_k / (n_k * (1 - k / n)))
        moved = max(abs(new_t - st) / st, abs(new_k - sk) / sk)
        st, sk = new_t, new_k
        if moved < 1e-13:
            break
    r = residuals(p, st, sk)
    jac = np.empty((n, k))
    for j in range(k):
        step = 1e-6 * abs(p[j])
        up, down = p.copy(), p.copy()
        up[j] += step
        down[j] -= step
        jac[:, j] = (residuals(up, st, sk) - residuals(down, st, sk)) / (2 * step)
    s2 = r @ r / (n - k)
    cov = s2 * np.linalg.inv(jac.T @ jac)
    names = ["theta_r", "theta_s", "alpha_per_cm", "n", "ks_cm_per_day", "pore_connectivity"]
    out = {
        "source": "tests/data/joint_se/joint_se.py (numpy 2.4, scipy 1.17 least_squares, finite-difference Jacobian)",
        "names": names,
        "values": list(p),
        "standard_errors": list(np.sqrt(np.diag(cov))),
        "sigma_theta": st,
        "sigma_log10_k": sk,
        "residual_sd": float(np.sqrt(s2)),
    }
    with open(os.path.join(HERE, "reference.json"), "w") as f:
        json.dump(out, f, indent=2)
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
