"""Check values for the duct model with gamma(T) and for tone -> mode candidates (REFERENCES.md
sections 70-72). Independent of the project's TypeScript: numpy 2.4 / scipy 1.17 (brentq), the
NBS Circular 564 table of gamma for air as printed in REFERENCES.md section 70.
Run: python3 tests/reference/duct_values.py
"""
import math
import numpy as np
from scipy.optimize import brentq

R = 287.05
TABLE = [(250, 1.401), (300, 1.400), (350, 1.398), (400, 1.395), (450, 1.391), (500, 1.387), (550, 1.381),
         (600, 1.376), (650, 1.370), (700, 1.364), (750, 1.359), (800, 1.354), (900, 1.344), (1000, 1.336),
         (1100, 1.331), (1200, 1.324), (1300, 1.318), (1400, 1.313), (1500, 1.309)]
TK = np.array([t for t, _ in TABLE], float)
TG = np.array([g for _, g in TABLE], float)


def gamma(t_k):
    return float(np.interp(t_k, TK, TG))  # holds the end values outside, like the model


def c_of(t_c, fixed=None):
    t = t_c + 273.15
    return math.sqrt((fixed if fixed else gamma(t)) * R * t)


def t_of(c, fixed=None):
    """Temperature (degC) with gamma(T) R T = c^2, by brentq on [1 K, 1e5 K]."""
    f = lambda t: (fixed if fixed else gamma(t)) * R * t - c * c
    return brentq(f, 1.0, 1e5, xtol=1e-12) - 273.15


def two_zone_roots(L, x1, t1, t2, count, fixed=None):
    """Roots of E3 generalised to gamma(T): xi = (rho1 c1)/(rho2 c2) = (gamma1/c1)/(gamma2/c2)."""
    c1, c2 = c_of(t1, fixed), c_of(t2, fixed)
    g1 = fixed if fixed else gamma(t1 + 273.15)
    g2 = fixed if fixed else gamma(t2 + 273.15)
    xi = (g1 / c1) / (g2 / c2)
    e3 = lambda f: xi * math.sin(2 * math.pi * f * x1 / c1) * math.cos(2 * math.pi * f * (L - x1) / c2) + \
        math.cos(2 * math.pi * f * x1 / c1) * math.sin(2 * math.pi * f * (L - x1) / c2)
    roots, f, step = [], 0.5, 0.05
    while len(roots) < count:
        if e3(f) * e3(f + step) < 0:
            roots.append(brentq(e3, f, f + step, xtol=1e-12))
        f += step
    return roots


print('gamma(T) by linear interpolation of the table:')
for t_c in (20, 150, 200, 300, 600):
    print(f'  {t_c} degC: gamma {gamma(t_c + 273.15):.6f}, c {c_of(t_c):.4f} m/s (gamma 1.4: {c_of(t_c, 1.4):.4f})')

a = 0.024
L_eff = 1.2 + 2 * 0.6133 * a
print('sec. 2 example, open-open unflanged, gamma(T):')
for t_c in (20, 150):
    print(f'  {t_c} degC: f1..3 = ' + ', '.join(f'{n * c_of(t_c) / (2 * L_eff):.4f}' for n in (1, 2, 3)))
print('  measured 167.7078 Hz (the gamma 1.4, 150 degC mode 1) read with gamma(T): mode 1 at '
      f'{t_of(167.7078 * 2 * L_eff):.4f} degC')

print('sec. 3 two-zone example with gamma(T) per zone (L 1, x1 0.25, 20/200 degC, no end correction):')
r = two_zone_roots(1.0, 0.25, 20, 200, 4)
print('  roots', ', '.join(f'{x:.4f}' for x in r))
r14 = two_zone_roots(1.0, 0.25, 20, 200, 4, fixed=1.4)
print('  (gamma 1.4 check:', ', '.join(f'{x:.4f}' for x in r14), ')')

print('candidates: 245 Hz, L 1 m, d 50 mm, open-open unflanged:')
L_eff = 1.0 + 2 * 0.6133 * 0.025
uf, uL = 0.5, 0.005
for n in (1, 2, 3):
    c = 245 * L_eff / (n / 2)
    t = t_of(c)
    tk = t + 273.15
    h = 0.5
    s = 2 / (1 + math.log(gamma(tk + h) / gamma(tk - h)) / math.log((tk + h) / (tk - h)))
    u = s * math.hypot(uf / 245, uL / L_eff)
    print(f'  n {n}: c {c:.4f} m/s, T {t:.4f} degC (gamma 1.4: {t_of(c, 1.4):.4f}), s {s:.5f}, '
          f'95 % {tk * math.exp(-1.96 * u) - 273.15:.3f} to {tk * math.exp(1.96 * u) - 273.15:.3f} degC')

print('equivalent uniform temperature of the sec. 3 modes (gamma(T), no end correction, L_eff = 1):')
mean_k = 0.25 * 293.15 + 0.75 * 473.15
for n, f in enumerate(r, start=1):
    t_eq = t_of(f * 1.0 / (n / 2))
    print(f'  mode {n}: f {f:.4f} Hz, T_eq {t_eq:.3f} degC, T_eq - mean {t_eq + 273.15 - mean_k:+.3f} K, '
          f'ln ratio {math.log((t_eq + 273.15) / mean_k):+.5f}')

print('candidates: 400 Hz in the sec. 2 tube (L 1.2 m, d 48 mm, open-open unflanged), gamma(T):')
L_eff = 1.2 + 2 * 0.6133 * 0.024
for n in (1, 2, 3, 4):
    print(f'  n {n}: T {t_of(400 * L_eff / (n / 2)):.4f} degC')

print('heater layout re-solved for the tone (sec. 3 tube; the rig is 20/260 degC, the model says 20/200):')
r260 = two_zone_roots(1.0, 0.25, 20, 260, 2)
mean260 = 0.25 * 293.15 + 0.75 * 533.15
for n, f in enumerate(r260, start=1):
    t_eq = t_of(f / (n / 2))
    print(f'  mode {n}: f {f:.4f} Hz, T_eq {t_eq:.3f} degC, mean {mean260 - 273.15:.2f} degC, '
          f'ln ratio {math.log((t_eq + 273.15) / mean260):+.5f}')
