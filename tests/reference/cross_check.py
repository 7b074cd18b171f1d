#!/usr/bin/env python3
"""Independent scipy implementations of the two likelihood fits, for the agreement tests.

whittle-case.json: Lorentzian + floor fitted to the stored periodogram by the Whittle likelihood
(-log L = sum ln S + I/S), minimised with scipy.optimize.minimize (Nelder-Mead, as in the sec. 7
script of REFERENCES.md), from a start independent of the TypeScript code. Writes expected.decayRatePerS
and expected.offsetHz.

exponential-case.json (three cases): the quasi-likelihood fit of dsp/fit.ts (mean A^2 = P0 exp(2 s (t - tm)) + N^2,
variance N^2 (2 m - N^2), iteratively reweighted), solved with scipy.optimize.least_squares (bounds
N^2 >= 0), with the covariance phi (J'WJ)^-1 n/N_eff, phi = RSS/(n - p n/N_eff), N_eff = 2 B D and a
Student-t quantile from scipy.stats. Writes expected.ratePerS, expected.ci95PerS, expected.backgroundPower.

Run: python3 cross_check.py   (numpy 2.4.6, scipy 1.17.1)
"""
import json

import numpy as np
from scipy import optimize, stats


def whittle():
    case = json.load(open("whittle-case.json"))
    f = np.array(case["freqHz"])
    I = np.array(case["periodogram"])

    def nll(p):
        S = np.exp(p[0]) / ((f - p[1]) ** 2 + np.exp(2 * p[2])) + np.exp(p[3])
        return np.sum(np.log(S) + I / S)

    k = np.argmax(np.convolve(I, np.ones(9) / 9, mode="same"))
    best = None
    for g in (0.3, 1.0, 3.0):
        p0 = [np.log(I[k] * g * g), f[k], np.log(g), np.log(np.median(I) / np.log(2))]
        r = optimize.minimize(nll, p0, method="Nelder-Mead",
                              options={"xatol": 1e-10, "fatol": 1e-10, "maxiter": 20000, "maxfev": 40000})
        if best is None or r.fun < best.fun:
            best = r
    case["expected"] = {"decayRatePerS": float(2 * np.pi * np.exp(best.x[2])), "offsetHz": float(best.x[1])}
    json.dump(case, open("whittle-case.json", "w"))
    print("whittle", case["expected"])


def exponential_one(case):
    t = np.array(case["timeS"])
    y = np.array(case["power"])
    B = case["bandwidthHz"]
    n = len(t)
    tm = (t[0] + t[-1]) / 2
    dt = (t[-1] - t[0]) / (n - 1)
    n_eff = min(n, 2 * B * n * dt)

    def model(p):
        return np.exp(p[0]) * np.exp(2 * p[1] * (t - tm)) + p[2]

    # Start: straight line through ln y over the upper half of the values (independent of the TS grid).
    m = y > np.median(y)
    slope, icept = np.polyfit(t[m] - tm, np.log(y[m]), 1)
    p = np.array([icept, slope / 2, np.min(y)])
    w = 1 / np.maximum(y, 1e-12) ** 2
    for _ in range(50):
        res = optimize.least_squares(lambda q: np.sqrt(w) * (y - model(q)), p,
                                     bounds=([-np.inf, -np.inf, 0], [np.inf, np.inf, np.inf]),
                                     xtol=1e-14, ftol=1e-14, gtol=1e-14)
        change = np.max(np.abs(res.x - p))
        p = res.x
        mu = model(p)
        bg = max(p[2], 1e-12 * y.max())
        w = 1 / np.maximum(bg * (2 * mu - bg), bg * bg)
        w = w / w.mean()
        if change < 1e-12:
            break
    mu = model(p)
    e = np.exp(p[0]) * np.exp(2 * p[1] * (t - tm))
    # A background at its bound (0) is not a free parameter (active set): drop it from J, as dsp/fit.ts does.
    at_bound = p[2] <= 1e-15 * y.max()
    J = np.column_stack([e, 2 * (t - tm) * e] + ([] if at_bound else [np.ones(n)]))
    k = J.shape[1]
    rss = np.sum(w * (y - mu) ** 2)
    infl = n / n_eff
    phi = rss / (n - k * infl)
    cov = np.linalg.inv(J.T @ (w[:, None] * J)) * phi * infl
    q = stats.t.ppf(0.975, n_eff - k)
    sd = np.sqrt(cov[1, 1])
    case["expected"] = {"ratePerS": float(p[1]), "ci95PerS": [float(p[1] - q * sd), float(p[1] + q * sd)],
                        "backgroundPower": float(p[2]), "nEffective": float(n_eff)}
    print("exponential", case["expected"])


def exponential():
    data = json.load(open("exponential-case.json"))
    for case in data["cases"]:
        exponential_one(case)
    json.dump(data, open("exponential-case.json", "w"))


whittle()
exponential()
