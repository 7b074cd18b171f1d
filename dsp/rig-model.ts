/**
 * Reduced-order heated-tube model: the rig, its mode shapes and its linear stability (the
 * characteristic equation, every mode's growth rate, the first mode to go unstable). The time
 * series and the demo scenarios are in dsp/rig-sim.ts.
 *
 * Galerkin expansion of the acoustic field of a tube in its
 * duct modes with a compact heat source whose heat release follows a time-lagged, modified King's
 * law, after K. Balasubramanian & R. I. Sujith 2008, "Thermoacoustic instability in a Rijke tube:
 * non-normality and nonlinearity", Phys. Fluids 20, 044103 (model form and default parameters from
 * memory), building on M. A. Heckl 1990, "Non-linear acoustic effects in the Rijke tube", Acustica
 * 72 (from memory). Dimensionless form (time in units of L/c₀, x in units of L):
 *
 *   u′ = Σ η_j U_j(x),  p′ ∝ −Σ (η̇_j / k_j) P_j(x)
 *   η̈_j + 2 ζ_j ω_j η̇_j + k_j² η_j = −k_j K P_j(x_f) [ sqrt|1/3 + u′_f(t − τ)| − sqrt(1/3) ]
 *
 * open–open: U_j = cos(jπx), P_j = sin(jπx), k_j = ω_j = jπ; closed (x = 0) – open (x = 1):
 * U_j = sin(k_j x), P_j = −cos(k_j x), k_j = (j − ½)π. Modal damping
 * ζ_j = (c₁ ω_j/ω₁ + c₂ sqrt(ω₁/ω_j)) / (2π) (Matveev's frequency-dependent damping as used by
 * Balasubramanian & Sujith; c₁ = 0.1, c₂ = 0.06 from memory).
 *
 * This file gives the linear growth rate and frequency of each mode from the characteristic
 * equation of the linearised delay system, solved in the complex plane (dsp/rig-sim.ts integrates
 * the time series for a switched heater power).
 * Physical units: time scale L/c₀ with c₀ from the gas temperature (dsp/gas.ts), with γ = 1.4 unless
 * a gas is given: the model's damping constants are from memory, and γ(T) would move c₀ by 0.005 %
 * at 20 °C and 0.16 % at 120 °C (the demo recordings), well inside them.
 */
import { AIR_FIXED_GAMMA, checkRange, LENGTH_RANGE_M, speedOfSoundMPerS, type GasProperties } from './duct';

export type RigEnds = 'open-open' | 'closed-open';

/** Physical set-up of the rig. */
export interface RigParams {
  /** Tube length, m. */
  lengthM: number;
  /** Mean gas temperature, °C (sets c₀ and the time scale L/c₀). */
  gasTemperatureC: number;
  /** 'open-open' (bench tube) or 'closed-open' (closed at the upstream end: a flue). */
  ends: RigEnds;
  /** Heater position from the upstream end, m. */
  heaterPositionM: number;
  /** Heat-release time lag, s, up to MAX_HEAT_LAG_S. Default 0.2 L/c₀ (Balasubramanian & Sujith's τ = 0.2, from memory). */
  heatLagS?: number;
  /** Number of Galerkin modes (default 10). */
  modeCount?: number;
  /** Damping coefficients c₁, c₂ (defaults 0.1 and 0.06). */
  dampingC1?: number;
  dampingC2?: number;
  gas?: GasProperties;
}

/** Validated rig in dimensionless form, plus its scales. */
export interface Rig {
  params: RigParams;
  cMPerS: number;
  /** Time scale L/c₀, s. */
  timeScaleS: number;
  /** Dimensionless heater position x_f and lag τ. */
  xf: number;
  tau: number;
  k: Float64Array;
  zeta: Float64Array;
  /** Mode shapes at the heater: U_j(x_f), P_j(x_f). */
  uAtHeater: Float64Array;
  pAtHeater: Float64Array;
}

/**
 * Largest heater power K (dimensionless) the model takes: five times the range Balasubramanian &
 * Sujith explore (K up to about 2, from memory). It bounds the continuation in K (40 steps per unit).
 */
export const MAX_HEATER_POWER = 10;

/** Longest heat-release lag, s: heater and flame lags are milliseconds to tens of milliseconds; the bound caps the lag buffer at lag × rate × substeps values. */
export const MAX_HEAT_LAG_S = 1;

/** Velocity mode shape U_j at dimensionless x. */
export function velocityShape(ends: RigEnds, k: number, x: number): number {
  return ends === 'open-open' ? Math.cos(k * x) : Math.sin(k * x);
}

/** Pressure mode shape P_j at dimensionless x (p′ ∝ −η̇_j P_j / k_j). */
export function pressureShape(ends: RigEnds, k: number, x: number): number {
  return ends === 'open-open' ? Math.sin(k * x) : -Math.cos(k * x);
}

/** Validates the parameters and builds the dimensionless rig. Throws RangeError naming the parameter. */
export function createRig(params: RigParams): Rig {
  checkRange('lengthM', params.lengthM, LENGTH_RANGE_M, 'm');
  const gas = params.gas ?? AIR_FIXED_GAMMA;
  const cMPerS = speedOfSoundMPerS(params.gasTemperatureC, gas);
  if (!Number.isFinite(params.heaterPositionM) || params.heaterPositionM <= 0 || params.heaterPositionM >= params.lengthM) {
    throw new RangeError(`heaterPositionM must lie inside the tube (0 < x < ${params.lengthM} m), got ${params.heaterPositionM} m`);
  }
  const timeScaleS = params.lengthM / cMPerS;
  const lagS = params.heatLagS ?? 0.2 * timeScaleS;
  if (!Number.isFinite(lagS) || lagS <= 0 || lagS > MAX_HEAT_LAG_S) throw new RangeError(`heatLagS must lie above 0 and up to ${MAX_HEAT_LAG_S} s, got ${lagS} s`);
  const n = params.modeCount ?? 10;
  if (!Number.isInteger(n) || n < 1 || n > 40) throw new RangeError(`modeCount must be an integer from 1 to 40, got ${n}`);
  const c1 = params.dampingC1 ?? 0.1;
  const c2 = params.dampingC2 ?? 0.06;
  if (!Number.isFinite(c1) || c1 < 0) throw new RangeError(`dampingC1 must be a non-negative number, got ${c1}`);
  if (!Number.isFinite(c2) || c2 < 0) throw new RangeError(`dampingC2 must be a non-negative number, got ${c2}`);
  const xf = params.heaterPositionM / params.lengthM;
  const k = new Float64Array(n);
  const zeta = new Float64Array(n);
  const uAtHeater = new Float64Array(n);
  const pAtHeater = new Float64Array(n);
  for (let j = 0; j < n; j++) {
    k[j] = params.ends === 'open-open' ? (j + 1) * Math.PI : (j + 0.5) * Math.PI;
    const r = k[j] / k[0];
    zeta[j] = (c1 * r + c2 / Math.sqrt(r)) / (2 * Math.PI);
    uAtHeater[j] = velocityShape(params.ends, k[j], xf);
    pAtHeater[j] = pressureShape(params.ends, k[j], xf);
  }
  return { params, cMPerS, timeScaleS, xf, tau: lagS / timeScaleS, k, zeta, uAtHeater, pAtHeater };
}

/** One linear mode of the heated tube: growth rate (1/s, > 0 grows) and frequency (Hz). */
export interface LinearMode {
  n: number;
  growthRatePerS: number;
  frequencyHz: number;
  /** False for a root on the real axis (a conjugate pair that met there): it grows or decays without oscillating, so it is no tone. */
  isOscillating: boolean;
}

/**
 * A root is non-oscillating when its dimensionless angular frequency |Im σ| is below this. Newton
 * stops at 1e-12 relative, so a root on the real axis keeps |Im σ| at rounding level; 1e-8 lies far
 * above that and far below any acoustic mode (k ≥ π/2).
 */
const REAL_ROOT_IMAG = 1e-8;

/** Continuation steps per unit of heater power (each a Newton solve from the previous root). */
const CONTINUATION_STEPS_PER_POWER = 40;

type C = [number, number];
const cmul = (a: C, b: C): C => [a[0] * b[0] - a[1] * b[1], a[0] * b[1] + a[1] * b[0]];
const cdiv = (a: C, b: C): C => {
  const d = b[0] * b[0] + b[1] * b[1];
  return [(a[0] * b[0] + a[1] * b[1]) / d, (a[1] * b[0] - a[0] * b[1]) / d];
};
const cexpNeg = (s: C, tau: number): C => {
  const m = Math.exp(-s[0] * tau);
  return [m * Math.cos(s[1] * tau), -m * Math.sin(s[1] * tau)];
};

/**
 * Characteristic function of the linearised model for mode m (dimensionless σ):
 * H_m(σ) = D_m(σ) + e^{−στ} [g_m + D_m Σ_{j≠m} g_j / D_j], D_j = σ² + 2ζ_jω_jσ + k_j²,
 * g_j = (√3/2) K k_j P_j(x_f) U_j(x_f) (√3/2 = slope of sqrt(1/3 + u) at u = 0). Its zeros are
 * those of 1 + e^{−στ} Σ g_j/D_j = 0 (the rank-one delay coupling), with the pole of mode m removed
 * so that continuation from K = 0 starts at H_m = D_m.
 */
export function characteristic(rig: Rig, heaterPower: number, m: number, s: C): C {
  const n = rig.k.length;
  const d = (j: number): C => [s[0] * s[0] - s[1] * s[1] + 2 * rig.zeta[j] * rig.k[j] * s[0] + rig.k[j] * rig.k[j], 2 * s[0] * s[1] + 2 * rig.zeta[j] * rig.k[j] * s[1]];
  const g = (j: number): number => (Math.sqrt(3) / 2) * heaterPower * rig.k[j] * rig.pAtHeater[j] * rig.uAtHeater[j];
  const dm = d(m);
  let sum: C = [0, 0];
  for (let j = 0; j < n; j++) {
    if (j === m) continue;
    const t = cdiv([g(j), 0], d(j));
    sum = [sum[0] + t[0], sum[1] + t[1]];
  }
  const inner = cmul(dm, sum);
  const e = cexpNeg(s, rig.tau);
  const bracket: C = [g(m) + inner[0], inner[1]];
  const eb = cmul(e, bracket);
  return [dm[0] + eb[0], dm[1] + eb[1]];
}

/** Newton's method in the complex plane with a central-difference derivative (H is analytic). */
function newton(f: (s: C) => C, start: C, tol = 1e-12, maxIter = 60): C | null {
  let s: C = [start[0], start[1]];
  for (let it = 0; it < maxIter; it++) {
    const v = f(s);
    const h = 1e-6 * Math.max(1, Math.hypot(s[0], s[1]));
    const fp = f([s[0] + h, s[1]]);
    const fm = f([s[0] - h, s[1]]);
    const der: C = [(fp[0] - fm[0]) / (2 * h), (fp[1] - fm[1]) / (2 * h)];
    if (!Number.isFinite(der[0]) || (der[0] === 0 && der[1] === 0)) return null;
    const step = cdiv(v, der);
    s = [s[0] - step[0], s[1] - step[1]];
    if (!Number.isFinite(s[0]) || !Number.isFinite(s[1])) return null;
    if (Math.hypot(step[0], step[1]) < tol * Math.max(1, Math.hypot(s[0], s[1]))) return s;
  }
  return null;
}

/** Throws a RangeError naming heaterPower unless it lies in [0, MAX_HEATER_POWER]. */
export function checkHeaterPower(heaterPower: number): void {
  if (!Number.isFinite(heaterPower) || heaterPower < 0 || heaterPower > MAX_HEATER_POWER) {
    throw new RangeError(`heaterPower must lie from 0 to ${MAX_HEATER_POWER}, got ${heaterPower}`);
  }
}

/** Root of mode m at K = 0: the damped acoustic mode σ = −ζk + i k sqrt(1 − ζ²). */
function coldRoot(rig: Rig, m: number): C {
  return [-rig.zeta[m] * rig.k[m], rig.k[m] * Math.sqrt(1 - rig.zeta[m] * rig.zeta[m])];
}

/** Newton's method for mode m at heater power kp from the nearby root `from`; RangeError if it fails. */
function rootAt(rig: Rig, m: number, kp: number, from: C): C {
  const next = newton((z) => characteristic(rig, kp, m, z), from);
  if (next === null) throw new RangeError(`root finder did not converge for mode ${m + 1} at heater power ${kp.toFixed(4)}`);
  return next;
}

function toMode(rig: Rig, m: number, s: C): LinearMode {
  return { n: m + 1, growthRatePerS: s[0] / rig.timeScaleS, frequencyHz: Math.abs(s[1]) / (2 * Math.PI * rig.timeScaleS), isOscillating: Math.abs(s[1]) > REAL_ROOT_IMAG };
}

/**
 * Linear growth rates and frequencies of the first `count` modes (default all) at heater power K
 * (dimensionless, Balasubramanian & Sujith's K), by Newton's method on the characteristic function
 * with continuation in K from the damped acoustic modes at K = 0. Throws RangeError when it fails to converge.
 */
export function linearModes(rig: Rig, heaterPower: number, count = rig.k.length): LinearMode[] {
  checkHeaterPower(heaterPower);
  const out: LinearMode[] = [];
  const n = Math.min(count, rig.k.length);
  for (let m = 0; m < n; m++) {
    let s = coldRoot(rig, m);
    const steps = heaterPower === 0 ? 1 : Math.max(8, Math.ceil(heaterPower * CONTINUATION_STEPS_PER_POWER));
    for (let i = 1; i <= steps; i++) s = rootAt(rig, m, (heaterPower * i) / steps, s);
    out.push(toMode(rig, m, s));
  }
  return out;
}

/** The oscillating mode with the largest growth rate (the one that hums first, or decays slowest); mode 1 if none oscillates. */
export function leadingMode(modes: LinearMode[]): LinearMode {
  let best: LinearMode | null = null;
  for (const m of modes) if (m.isOscillating && (!best || m.growthRatePerS > best.growthRatePerS)) best = m;
  return best ?? modes[0];
}

/** Where the tube first hums: heater power, the mode and its frequency there. */
export interface FirstInstability {
  heaterPower: number;
  n: number;
  frequencyHz: number;
}

/**
 * The lowest heater power at which any oscillating mode turns unstable (a conjugate pair crosses
 * into the right half-plane: a Hopf point), over all Galerkin modes: continuation on a grid of
 * 1/40 in K, then bisection (60 halvings) inside the first grid step where a mode is oscillating
 * and growing. Roots on the real axis are not tones and do not count. Null if no mode hums up to maxPower.
 */
export function firstInstability(rig: Rig, maxPower = MAX_HEATER_POWER): FirstInstability | null {
  checkHeaterPower(maxPower);
  const n = rig.k.length;
  const roots: C[] = [];
  for (let m = 0; m < n; m++) roots.push(coldRoot(rig, m));
  const hums = (s: C): boolean => s[0] >= 0 && Math.abs(s[1]) > REAL_ROOT_IMAG;
  const gridSteps = Math.ceil(maxPower * CONTINUATION_STEPS_PER_POWER);
  for (let i = 1; i <= gridSteps; i++) {
    const kLo = (maxPower * (i - 1)) / gridSteps;
    const kHi = (maxPower * i) / gridSteps;
    let found: FirstInstability | null = null;
    for (let m = 0; m < n; m++) {
      const from = roots[m];
      const atHi = rootAt(rig, m, kHi, from);
      if (hums(atHi) && !hums(from)) {
        let lo = kLo;
        let hi = kHi;
        let sHi = atHi;
        for (let it = 0; it < 60; it++) {
          const mid = 0.5 * (lo + hi);
          const sMid = rootAt(rig, m, mid, from);
          if (hums(sMid)) {
            hi = mid;
            sHi = sMid;
          } else lo = mid;
        }
        if (!found || hi < found.heaterPower) found = { heaterPower: hi, n: m + 1, frequencyHz: Math.abs(sHi[1]) / (2 * Math.PI * rig.timeScaleS) };
      }
      roots[m] = atHi;
    }
    if (found) return found;
  }
  return null;
}
