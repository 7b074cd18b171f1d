#!/usr/bin/env python3
"""Writes analysis-values.json: the reference values for tests/dsp/{derived,levels,crlb,fit,damping}.test.ts.

Published values are copied from docs/REFERENCES.md with their test-vector number; values computed
by a general-purpose library are computed here (numpy 2.4.6, scipy 1.17.1). Run: python3 compute_values.py
"""
import json
from scipy import stats, special

V = {}


def add(key, inputs, expected, tol, source):
    V[key] = {"inputs": inputs, "expected": expected, "tol": tol, "source": source}


o = {"frequencyHz": 170, "decayRatePerS": 5}
add("v16_dampingRatio", o, 4.680976e-3, 1e-9, "REFERENCES.md test vector 16 (sec. 5, computed with numpy 2.4)")
add("v17_qFactor", o, 106.8153, 1e-3, "REFERENCES.md test vector 17 (sec. 5)")
add("v18_halfPowerWidthHz", {"decayRatePerS": 5}, 1.591549, 1e-6, "REFERENCES.md test vector 18 (alpha/pi)")
add("v19_t60S", {"decayRatePerS": 5}, 1.381551, 1e-6, "REFERENCES.md test vector 19 (6.907755/alpha)")
add("v20_logDecrement", o, 0.0294118, 1e-7, "REFERENCES.md test vector 20 (alpha/fd)")
add("v21_doublingTimeS", {"ratePerS": 5}, 0.1386294, 1e-7, "REFERENCES.md test vector 21 (ln2/s)")
add("v22_drivingRatePerS", {"growthRatePerS": 3, "decayRatePerS": 5}, 8, 0, "REFERENCES.md test vector 22 (sec. 6)")
add("v22_normalisedGain", {"growthRatePerS": 3, "decayRatePerS": 5}, 1.6, 1e-12, "REFERENCES.md test vector 22 (sec. 6)")
add("s6_stabilityMarginPerS", {"growthRatePerS": 3, "decayRatePerS": 5}, -3, 1e-12, "REFERENCES.md sec. 6 worked example")
add("s5_eFoldingTimeS", {"decayRatePerS": 5}, 0.2, 1e-12, "REFERENCES.md sec. 5 worked example")
add("s5_halfLifeS", {"decayRatePerS": 5}, 0.138629, 1e-6, "REFERENCES.md sec. 5 worked example")
add("s5_decayDbPerS", {"decayRatePerS": 5}, 43.4294, 1e-4, "REFERENCES.md sec. 5 worked example (20 log10(e) alpha)")
add("s5_lightDampingRatio", o, 4.681027e-3, 1e-9, "REFERENCES.md sec. 5 worked example (alpha/wd)")
L = {"ratePerS": 5, "k": 5, "startAmplitude": 0.01}
add("v23_landauAt0p5", {**L, "timeS": 0.5}, 0.12093682, 1e-7, "REFERENCES.md test vector 23 (sec. 6, checked with an ODE solver there)")
add("v23_landauAt1p0", {**L, "timeS": 1.0}, 0.82932486, 1e-7, "REFERENCES.md test vector 23")
add("s6_landauAt2p0", {**L, "timeS": 2.0}, 0.99998970, 1e-7, "REFERENCES.md sec. 6 worked example")
add("v24_landauHalfTimeS", L, 0.811163, 1e-6, "REFERENCES.md test vector 24")
add("v25_meanSquareAmplitude", {"forcingIntensity": 1, "frequencyHz": 170, "decayRatePerS": 5}, 8.7648e-8, 1e-11, "REFERENCES.md test vector 25 (G/(2 w0^2 alpha))")
add("v26_noiseDrivenAlpha", {"sampleRateHz": 8000, "frequencyHz": 170, "decayRatePerS": 5, "durationS": 60}, 5.0, 1.0, "REFERENCES.md test vector 26 (sec. 7 simulation; tolerance about 3 sd)")
C = {"sampleRateHz": 8000, "frequencyHz": 170, "amplitude": 1, "durationS": 1, "snrDb": 10}
add("v27_crlbSdFrequencyHz", {**C, "ratePerS": 0}, 1.9492e-3, 0.0005, "REFERENCES.md test vector 27 (Kay 1993; crlb.py); tol relative")
add("v27_crlbSdRatePerS", {**C, "ratePerS": 0}, 1.2247e-2, 0.0005, "REFERENCES.md test vector 27; tol relative")
add("v28_crlbSdFrequencyHz", {**C, "ratePerS": -5}, 1.7836e-2, 0.0005, "REFERENCES.md test vector 28 (crlb.py); tol relative")
add("s8_crlbGrowing", {**C, "ratePerS": 5}, [1.2018e-4, 7.5552e-4], 0.0005, "REFERENCES.md sec. 8 table (T 1 s, 10 dB, sigma +5): sd f, sd sigma; tol relative")
add("s8_crlbShortDecay", {**C, "durationS": 0.5, "snrDb": 0, "ratePerS": -5}, [6.2005e-2, 3.8932e-1], 0.0005, "REFERENCES.md sec. 8 table (T 0.5 s, 0 dB, sigma -5); tol relative")
add("s8_crlbMidRef", {**C, "durationS": 0.5, "snrDb": 20, "ratePerS": -5, "refTimeS": 0.25}, [1.7765e-3, 1.1154e-2], 0.0005, "REFERENCES.md sec. 8 note (--tref mid, 0.5 s, 20 dB, sigma -5); tol relative")
add("v33_aWeightingDb", {"frequencyHz": [100, 170, 1000]}, [-19.1450, -12.5694, 0.0001], 1e-4, "REFERENCES.md test vector 33 (IEC 61672-1 analytic form)")
add("v34_aWeightingTableDb", {"frequencyHz": [31.623, 63.096, 125.89, 251.19, 501.19, 1000, 1995.3, 3981.1, 7943.3]},
    [-39.4, -26.2, -16.1, -8.6, -3.2, 0.0, 1.2, 1.0, -1.1], 0.05, "IEC 61672-1 table at exact base-10 frequencies, via REFERENCES.md sec. 11 (secondary table); tol = rounding to 0.1 dB")
add("v35_pressureOf94DbPa", {"levelDb": 94}, 1.002374, 1e-6, "REFERENCES.md test vector 35 (definition, 20 uPa)")
add("s11_levelOf1PaDb", {"pressurePa": 1}, 93.9794, 1e-4, "REFERENCES.md sec. 11")
add("s11_pressureOf114DbPa", {"levelDb": 114}, 10.02374, 1e-5, "REFERENCES.md sec. 11")
add("v37_nioshAllowedTimeH", {"levelDba": [94, 100, 88]}, [1.0, 0.25, 4.0], 1e-12, "REFERENCES.md test vector 37 and sec. 13 (NIOSH 1998)")
add("v38_nioshDosePercent", {"exposures": [[91, 2], [82, 6]]}, 137.5, 1e-9, "REFERENCES.md test vector 38 (NIOSH 1998)")
add("v38_nioshTwaDba", {"exposures": [[91, 2], [82, 6]]}, 86.383, 1e-3, "REFERENCES.md test vector 38 (NIOSH 1998)")
add("v39_lex8hDba", {"laeqDba": 94, "durationH": 1}, 84.969, 1e-3, "REFERENCES.md test vector 39 (Directive 2003/10/EC)")
add("v40_peakLevelDb", {"peakPa": 140}, 136.90, 0.01, "REFERENCES.md test vector 40 (Directive 2003/10/EC: 140 Pa ~ 137 dB(C))")
add("eu_peakLevels", {"peakPa": [112, 200]}, [135.0, 140.0], 0.05, "Directive 2003/10/EC Art. 3 via REFERENCES.md sec. 13: 112 Pa (135 dB(C)), 200 Pa (140 dB(C)); tol = rounding")
nus = [1, 2, 3, 5, 7.5, 10, 30, 100, 1e6]
add("scipy_studentT975", {"dof": nus}, [float(stats.t.ppf(0.975, n)) for n in nus], 1e-9, "scipy 1.17.1 scipy.stats.t.ppf(0.975, dof) (tests/reference/compute_values.py)")
add("scipy_chi2_99_1dof", {}, float(stats.chi2.ppf(0.99, 1)), 1e-12, "scipy 1.17.1 scipy.stats.chi2.ppf(0.99, 1)")
add("scipy_normal975", {}, float(stats.norm.ppf(0.975)), 1e-14, "scipy 1.17.1 scipy.stats.norm.ppf(0.975)")
add("scipy_betainc", {"cases": [[0.3, 2.5, 0.5], [0.8, 10, 3]]}, [float(special.betainc(2.5, 0.5, 0.3)), float(special.betainc(10, 3, 0.8))], 1e-12, "scipy 1.17.1 scipy.special.betainc(a, b, x)")
add("scipy_gammaln", {"x": [0.5, 10.3]}, [float(special.gammaln(0.5)), float(special.gammaln(10.3))], 1e-12, "scipy 1.17.1 scipy.special.gammaln")

with open("analysis-values.json", "w") as fh:
    json.dump(V, fh, indent=1)
    fh.write("\n")
print(len(V), "values written")
