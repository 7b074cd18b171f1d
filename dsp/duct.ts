/**
 * Duct acoustics: end corrections, plane-wave mode frequencies and mode shapes of straight ducts
 * with uniform, two-zone (heater) or piecewise temperature, and the Rayleigh reading for a compact
 * heater. Gas properties and input ranges live in dsp/gas.ts (re-exported here); a measured tone →
 * mode candidates and gas temperature in dsp/duct-match.ts. Every input is checked against its
 * physical range before any computation, and every loop has a bound. Lengths in m, temperatures
 * in °C (K where the name says so), frequencies in Hz.
 *
 * Orientation: x runs from the upstream (lower) end x = 0 to the downstream (upper) end x = L; a
 * heater sits at heaterPositionM from the upstream end. For 'open-closed' ducts the closed end is
 * the upstream one by default (an appliance flue: closed at the burner, open at the top); set
 * `closedEnd: 'downstream'` for the other way round.
 */
import type { DuctGeometry } from './types';
import {
  AIR,
  checkGasTemperatureC,
  checkRange,
  DIAMETER_RANGE_M,
  gammaAtK,
  gammaTableTopC,
  LENGTH_RANGE_M,
  ABSOLUTE_ZERO_C,
  speedOfSoundMPerS,
  type GasProperties,
} from './gas';

export * from './gas';

/** First cut-on root of a circular duct, j'₁₁ = 1.8412 (first zero of J₁'; common practice). */
export const FIRST_CROSS_MODE_ROOT = 1.8412;

/** Most modes predicted at once. */
export const MAX_MODE_COUNT = 200;

/** Most points of a temperature profile and most zones it is cut into (bounds the transfer-matrix work). */
export const MAX_PROFILE_POINTS = 10000;
export const MAX_PROFILE_ZONES = 4000;

function checkPositive(name: string, value: number, unit: string): void {
  if (!Number.isFinite(value) || value <= 0) throw new RangeError(`${name} must be a positive finite number of ${unit}, got ${value}`);
}

export type OpenEndKind = DuctGeometry['openEnd'];
export type EndsKind = DuctGeometry['ends'];

/**
 * Low-frequency end correction of an open circular pipe end, m: unflanged 0.6133 a (Levine &
 * Schwinger 1948, "On the radiation of sound from an unflanged circular pipe", Phys. Rev. 73),
 * infinite flange 0.8216 a (Norris & Sheng 1989, J. Sound Vib. 135 — from memory), none 0.
 */
export function endCorrectionM(radiusM: number, kind: OpenEndKind): number {
  checkPositive('radiusM', radiusM, 'm');
  if (kind === 'unflanged') return 0.6133 * radiusM;
  if (kind === 'flanged') return 0.8216 * radiusM;
  return 0;
}

/** A stretch of duct at one gas temperature. */
export interface TemperatureZone {
  lengthM: number;
  temperatureC: number;
}

/** The duct as the solver sees it: geometry, gas, and zones from upstream to downstream. */
export interface DuctModel {
  lengthM: number;
  diameterM: number;
  ends: EndsKind;
  openEnd: OpenEndKind;
  /** For 'open-closed': which end is closed (default 'upstream'). */
  closedEnd?: 'upstream' | 'downstream';
  zones: TemperatureZone[];
  gas: GasProperties;
}

/** Checks a geometry and returns the duct model (one zone, or two with a heater). Throws RangeError naming the parameter. */
export function ductModelFromGeometry(geom: DuctGeometry, gas: GasProperties = AIR): DuctModel {
  checkRange('lengthM', geom.lengthM, LENGTH_RANGE_M, 'm');
  checkRange('diameterM', geom.diameterM, DIAMETER_RANGE_M, 'm');
  checkGasTemperatureC('gasTemperatureC', geom.gasTemperatureC);
  const base = { lengthM: geom.lengthM, diameterM: geom.diameterM, ends: geom.ends, openEnd: geom.openEnd, gas, ...(geom.closedEnd ? { closedEnd: geom.closedEnd } : {}) };
  const hasHeater = geom.heaterPositionM !== undefined || geom.hotTemperatureC !== undefined;
  if (!hasHeater) return { ...base, zones: [{ lengthM: geom.lengthM, temperatureC: geom.gasTemperatureC }] };
  const x1 = geom.heaterPositionM;
  const hot = geom.hotTemperatureC;
  if (x1 === undefined) throw new RangeError('heaterPositionM is required when hotTemperatureC is given');
  if (hot === undefined) throw new RangeError('hotTemperatureC is required when heaterPositionM is given');
  if (!Number.isFinite(x1) || x1 <= 0 || x1 >= geom.lengthM) {
    throw new RangeError(`heaterPositionM must lie inside the duct (0 < x < ${geom.lengthM} m), got ${x1} m`);
  }
  checkGasTemperatureC('hotTemperatureC', hot);
  return {
    ...base,
    zones: [
      { lengthM: x1, temperatureC: geom.gasTemperatureC },
      { lengthM: geom.lengthM - x1, temperatureC: hot },
    ],
  };
}

/** A measured temperature point of a profile: position from the upstream end (m) and temperature (°C). */
export interface ProfilePoint {
  xM: number;
  temperatureC: number;
}

/**
 * Zones for a piecewise-linear temperature profile through the given points (constant beyond the
 * first and last point), cut into `segmentCount` equal zones at their mid-point temperature.
 */
export function zonesFromProfile(points: ProfilePoint[], lengthM: number, segmentCount = 400): TemperatureZone[] {
  checkRange('lengthM', lengthM, LENGTH_RANGE_M, 'm');
  if (points.length === 0) throw new RangeError('profile needs at least one point');
  if (points.length > MAX_PROFILE_POINTS) throw new RangeError(`profile must have at most ${MAX_PROFILE_POINTS} points, got ${points.length}`);
  if (!Number.isInteger(segmentCount) || segmentCount < 1 || segmentCount > MAX_PROFILE_ZONES) {
    throw new RangeError(`segmentCount must be an integer from 1 to ${MAX_PROFILE_ZONES}, got ${segmentCount}`);
  }
  for (let i = 0; i < points.length; i++) {
    const p = points[i];
    if (!Number.isFinite(p.xM) || p.xM < 0 || p.xM > lengthM) {
      throw new RangeError(`profile point ${i + 1}: x must lie within the duct (0 to ${lengthM} m), got ${p.xM} m`);
    }
    checkGasTemperatureC(`profile point ${i + 1} temperature`, p.temperatureC);
    if (i > 0 && p.xM <= points[i - 1].xM) throw new RangeError(`profile point ${i + 1}: x must increase from point to point`);
  }
  const at = (x: number): number => {
    if (x <= points[0].xM) return points[0].temperatureC;
    for (let i = 1; i < points.length; i++) {
      if (x <= points[i].xM) {
        const a = points[i - 1];
        const b = points[i];
        return a.temperatureC + ((b.temperatureC - a.temperatureC) * (x - a.xM)) / (b.xM - a.xM);
      }
    }
    return points[points.length - 1].temperatureC;
  };
  const zones: TemperatureZone[] = [];
  const dx = lengthM / segmentCount;
  for (let i = 0; i < segmentCount; i++) zones.push({ lengthM: dx, temperatureC: at((i + 0.5) * dx) });
  return zones;
}

/** Which ends are open: [upstream, downstream]. */
function openFlags(model: DuctModel): [boolean, boolean] {
  if (model.ends === 'open-open') return [true, true];
  if (model.ends === 'closed-closed') return [false, false];
  return model.closedEnd === 'downstream' ? [true, false] : [false, true];
}

/** Length of the uniform duct plus the end corrections of its open ends, m. */
export function effectiveLengthM(model: DuctModel): number {
  const [up, down] = openFlags(model);
  const d = endCorrectionM(model.diameterM / 2, model.openEnd);
  return model.lengthM + (up ? d : 0) + (down ? d : 0);
}

/** Mode number n → wavenumber-length factor κ with f = κ c / L_eff: n/2 for like ends, (2n − 1)/4 for open–closed. */
export function modeFactor(ends: EndsKind, n: number): number {
  return ends === 'open-closed' ? (2 * n - 1) / 4 : n / 2;
}

/** Zones including the end-correction stubs (at the temperature of the end they extend). */
function acousticZones(model: DuctModel): TemperatureZone[] {
  const [up, down] = openFlags(model);
  const d = endCorrectionM(model.diameterM / 2, model.openEnd);
  const zones = model.zones.map((z) => ({ ...z }));
  if (up && d > 0) zones.unshift({ lengthM: d, temperatureC: zones[0].temperatureC });
  if (down && d > 0) zones.push({ lengthM: d, temperatureC: zones[zones.length - 1].temperatureC });
  return zones;
}

interface PreparedZone {
  lengthM: number;
  cMPerS: number;
  /** Characteristic impedance up to the mean pressure: ρc = p̄ γ / c (ρ = p̄ / (R T), c² = γ R T), so ρc ∝ γ(T) / c. */
  impedance: number;
}

/** Checks the model (geometry ranges, zones, at most MAX_PROFILE_ZONES) and returns its zones with c and impedance, end stubs included. */
function prepare(model: DuctModel): PreparedZone[] {
  checkRange('lengthM', model.lengthM, LENGTH_RANGE_M, 'm');
  checkRange('diameterM', model.diameterM, DIAMETER_RANGE_M, 'm');
  if (model.zones.length < 1 || model.zones.length > MAX_PROFILE_ZONES) {
    throw new RangeError(`zones must number from 1 to ${MAX_PROFILE_ZONES}, got ${model.zones.length}`);
  }
  let total = 0;
  for (const z of model.zones) {
    checkPositive('zone lengthM', z.lengthM, 'm');
    checkGasTemperatureC('zone temperatureC', z.temperatureC);
    total += z.lengthM;
  }
  if (Math.abs(total - model.lengthM) > 1e-6 * model.lengthM) throw new RangeError(`zones must add up to lengthM (${model.lengthM} m), got ${total} m`);
  return acousticZones(model).map((z) => {
    const c = speedOfSoundMPerS(z.temperatureC, model.gas);
    return { lengthM: z.lengthM, cMPerS: c, impedance: gammaAtK(model.gas, z.temperatureC - ABSOLUTE_ZERO_C) / c };
  });
}

/** Length-weighted mean gas temperature of the model's zones, °C. */
export function meanTemperatureC(model: DuctModel): number {
  let sum = 0;
  let len = 0;
  for (const z of model.zones) {
    sum += z.lengthM * z.temperatureC;
    len += z.lengthM;
  }
  return sum / len;
}

/**
 * Plane-wave transfer matrix of one zone (time factor exp(iωt), u = i v so all entries are real):
 * p₂ = cos(kl) p₁ + Z sin(kl) v₁, v₂ = −sin(kl)/Z p₁ + cos(kl) v₁ (Munjal, "Acoustics of Ducts and
 * Mufflers" — from memory; REFERENCES.md §3 matrix form). Writes into state[0..1].
 */
function propagate(state: Float64Array, zone: PreparedZone, freqHz: number, lengthM: number): void {
  const kl = ((2 * Math.PI * freqHz) / zone.cMPerS) * lengthM;
  const cs = Math.cos(kl);
  const sn = Math.sin(kl);
  const p = state[0];
  const v = state[1];
  state[0] = cs * p + zone.impedance * sn * v;
  state[1] = (-sn / zone.impedance) * p + cs * v;
}

function residual(zones: PreparedZone[], up: boolean, down: boolean, freqHz: number, state: Float64Array): number {
  state[0] = up ? 0 : 1;
  state[1] = up ? 1 : 0;
  for (const z of zones) propagate(state, z, freqHz, z.lengthM);
  return down ? state[0] : state[1];
}

/** The end-condition residual (p(L) for an open downstream end, velocity for a closed one) at freqHz; zero at a mode. */
export function ductResidual(model: DuctModel, freqHz: number): number {
  const [up, down] = openFlags(model);
  return residual(prepare(model), up, down, freqHz, new Float64Array(2));
}

/** Brent's method (Brent 1973, "Algorithms for Minimization without Derivatives", ch. 4) on a bracket [a, b] with f(a) f(b) ≤ 0. */
export function brentRoot(f: (x: number) => number, a: number, b: number, tolX = 1e-12, maxIter = 200): number {
  let fa = f(a);
  let fb = f(b);
  if (fa === 0) return a;
  if (fb === 0) return b;
  if (fa * fb > 0) throw new RangeError('root finder: the interval does not bracket a root');
  let c = a;
  let fc = fa;
  let d = b - a;
  let e = d;
  for (let iter = 0; iter < maxIter; iter++) {
    if (fb * fc > 0) {
      c = a;
      fc = fa;
      d = b - a;
      e = d;
    }
    if (Math.abs(fc) < Math.abs(fb)) {
      a = b;
      b = c;
      c = a;
      fa = fb;
      fb = fc;
      fc = fa;
    }
    const tol = 2 * Number.EPSILON * Math.abs(b) + 0.5 * tolX;
    const m = 0.5 * (c - b);
    if (Math.abs(m) <= tol || fb === 0) return b;
    if (Math.abs(e) >= tol && Math.abs(fa) > Math.abs(fb)) {
      const s = fb / fa;
      let p: number;
      let q: number;
      if (a === c) {
        p = 2 * m * s;
        q = 1 - s;
      } else {
        const qq = fa / fc;
        const r = fb / fc;
        p = s * (2 * m * qq * (qq - r) - (b - a) * (r - 1));
        q = (qq - 1) * (r - 1) * (s - 1);
      }
      if (p > 0) q = -q;
      else p = -p;
      if (2 * p < Math.min(3 * m * q - Math.abs(tol * q), Math.abs(e * q))) {
        e = d;
        d = p / q;
      } else {
        d = m;
        e = m;
      }
    } else {
      d = m;
      e = m;
    }
    a = b;
    fa = fb;
    b += Math.abs(d) > tol ? d : m > 0 ? tol : -tol;
    fb = f(b);
  }
  throw new RangeError(`root finder did not converge within ${maxIter} iterations`);
}

export interface DuctMode {
  /** Mode number, 1 = lowest (non-zero) mode. */
  n: number;
  frequencyHz: number;
  /** True when the mode lies above the first cross-mode cut-on (plane-wave model no longer valid). */
  isAboveCutOn: boolean;
}

export interface ModePrediction {
  modes: DuctMode[];
  /** Length plus end corrections, m. */
  effectiveLengthM: number;
  /** First cross-mode cut-on, 1.84 c/(π d) at the coldest zone, Hz. */
  cutOnHz: number;
  /** How the modes were found: closed form for one zone, transfer matrices otherwise. */
  method: 'closed-form' | 'transfer-matrix';
  warnings: string[];
}

/** First cross-mode cut-on of a circular duct, Hz: f = 1.8412 c / (π d) (common practice). */
export function cutOnFrequencyHz(cMPerS: number, diameterM: number): number {
  return (FIRST_CROSS_MODE_ROOT * cMPerS) / (Math.PI * diameterM);
}

/**
 * The lowest `count` plane-wave modes. One zone: f_n = κ_n c / L_eff (open–open and closed–closed
 * κ = n/2, open–closed κ = (2n − 1)/4; REFERENCES.md §2). Several zones: roots of the end
 * condition of the transfer-matrix chain, found by scanning and Brent's method (REFERENCES.md §3,
 * eq. E3 and its matrix form). Throws RangeError when the root finder fails.
 */
export function predictModes(model: DuctModel, count: number): ModePrediction {
  if (!Number.isInteger(count) || count < 1 || count > MAX_MODE_COUNT) throw new RangeError(`count must be an integer from 1 to ${MAX_MODE_COUNT}, got ${count}`);
  const zones = prepare(model);
  const cMin = Math.min(...zones.map((z) => z.cMPerS));
  const cutOnHz = cutOnFrequencyHz(cMin, model.diameterM);
  const lEff = effectiveLengthM(model);
  const freqs: number[] = [];
  let method: ModePrediction['method'];
  if (model.zones.length === 1) {
    method = 'closed-form';
    for (let n = 1; n <= count; n++) freqs.push((modeFactor(model.ends, n) * zones[0].cMPerS) / lEff);
  } else {
    method = 'transfer-matrix';
    const [up, down] = openFlags(model);
    const state = new Float64Array(2);
    const g = (f: number): number => residual(zones, up, down, f, state);
    // Mode spacing is at least about c_min / (2 L_eff) (travel time bounded by the slowest zone); scan finer than that.
    // The scan is bounded: with the gas and geometry ranges checked, fMax / step ≤ 128 (count + 2) c_max / c_min,
    // at most about 1.7e5 steps (c_max / c_min ≤ 6.5 over GAS_TEMPERATURE_RANGE_C).
    const step = cMin / (2 * lEff) / 64;
    const fMax = (count + 2) * (Math.max(...zones.map((z) => z.cMPerS)) / lEff);
    const maxSteps = Math.ceil(fMax / step) + 1;
    let fPrev = step / 2;
    let gPrev = g(fPrev);
    for (let i = 0; i < maxSteps && freqs.length < count; i++) {
      const f = fPrev + step;
      const gf = g(f);
      if (gf === 0) {
        freqs.push(f);
      } else if (gPrev * gf < 0) {
        freqs.push(brentRoot(g, fPrev, f, 1e-10 * f));
      }
      fPrev = f;
      gPrev = gf;
    }
    if (freqs.length < count) throw new RangeError(`root finder found only ${freqs.length} of ${count} modes below ${fMax.toFixed(1)} Hz`);
  }
  const warnings: string[] = [];
  const modes = freqs.map((frequencyHz, i) => ({ n: i + 1, frequencyHz, isAboveCutOn: frequencyHz >= cutOnHz }));
  const above = modes.filter((m) => m.isAboveCutOn);
  if (above.length > 0) {
    warnings.push(
      `modes from n = ${above[0].n} lie above the first cross-mode cut-on ${cutOnHz.toFixed(1)} Hz (1.84 c/(π d)): the plane-wave model does not hold there`,
    );
  }
  if (model.diameterM > 0.5 * model.lengthM) warnings.push(`the diameter (${model.diameterM} m) is comparable to the length (${model.lengthM} m): end corrections and plane waves are rough`);
  const gammaTop = gammaTableTopC(model.gas);
  const hottest = Math.max(...model.zones.map((z) => z.temperatureC));
  if (hottest > gammaTop) {
    warnings.push(`γ of the gas is tabulated up to ${gammaTop.toFixed(0)} °C and held at its last value above (gas at ${hottest.toFixed(0)} °C), where the true γ is lower: the speed of sound there is slightly overestimated`);
  }
  return { modes, effectiveLengthM: lEff, cutOnHz, method, warnings };
}

export interface ModeShape {
  /** Positions along the physical duct from the upstream end, m. */
  xM: Float64Array;
  /** Pressure amplitude, normalised to a largest magnitude of 1. */
  pressure: Float64Array;
  /** Acoustic velocity amplitude (in quadrature with pressure), normalised to a largest magnitude of 1. */
  velocity: Float64Array;
}

/** Pressure and velocity shapes of the mode at freqHz at `pointCount` evenly spaced points of the physical duct. */
export function modeShape(model: DuctModel, freqHz: number, pointCount = 101): ModeShape {
  if (!Number.isInteger(pointCount) || pointCount < 2 || pointCount > 100000) throw new RangeError(`pointCount must be an integer from 2 to 100000, got ${pointCount}`);
  const xM = new Float64Array(pointCount);
  for (let i = 0; i < pointCount; i++) xM[i] = (model.lengthM * i) / (pointCount - 1);
  const { pressure, velocity } = sampleShape(model, freqHz, xM);
  normalise(pressure);
  normalise(velocity);
  return { xM, pressure, velocity };
}

/** Raw pressure and velocity (velocity scaled by the upstream impedance) at ascending positions xM of the physical duct. */
function sampleShape(model: DuctModel, freqHz: number, xM: Float64Array): { pressure: Float64Array; velocity: Float64Array } {
  checkRange('freqHz', freqHz, { min: Number.MIN_VALUE, max: 1e12 }, 'Hz');
  const zones = prepare(model);
  const [up] = openFlags(model);
  const stub = up ? endCorrectionM(model.diameterM / 2, model.openEnd) : 0;
  const pressure = new Float64Array(xM.length);
  const velocity = new Float64Array(xM.length);
  const state = new Float64Array(2);
  // Walk the acoustic chain (upstream stub first); record the state at each physical sample point.
  state[0] = up ? 0 : 1;
  state[1] = up ? 1 : 0;
  let zoneIdx = 0;
  let zoneStart = 0;
  let pos = 0; // position along the acoustic chain, m
  const z0 = zones[0].impedance;
  for (let i = 0; i < xM.length; i++) {
    const target = xM[i] + stub;
    while (zoneIdx < zones.length - 1 && target > zoneStart + zones[zoneIdx].lengthM) {
      propagate(state, zones[zoneIdx], freqHz, zoneStart + zones[zoneIdx].lengthM - pos);
      zoneStart += zones[zoneIdx].lengthM;
      pos = zoneStart;
      zoneIdx++;
    }
    propagate(state, zones[zoneIdx], freqHz, target - pos);
    pos = target;
    pressure[i] = state[0];
    velocity[i] = state[1] * z0;
  }
  return { pressure, velocity };
}

function normalise(a: Float64Array): void {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  if (m > 0) for (let i = 0; i < a.length; i++) a[i] /= m;
}

export type MeanFlow = 'upward' | 'downward' | 'none';

export interface RayleighReading {
  /** Normalised index p̂(x)·û(x) (largest magnitudes scaled to 1) times the flow sign: > 0 drives, < 0 damps. −0.5 … +0.5 for a uniform open–open duct. */
  index: number;
  reading: 'drives' | 'damps' | 'neutral';
  /** Plain-language explanation. */
  message: string;
}

/**
 * Rayleigh reading for a compact heater at heaterXM whose heat release follows the acoustic
 * velocity with a thermal lag 0 < ωτ < π (King's law with a mean flow). The cycle integral of p′q′
 * is then ∝ p̂(x) û(x) sin(ωτ): for an open–open uniform duct 0.5 sin(2πx/L) — driving in the lower
 * half with upward flow, largest at L/4 (Rayleigh 1878, Nature 18; REFERENCES.md §4). With no mean
 * flow the first harmonic of sqrt(|u′|) vanishes and there is no linear driving (King 1914 — from
 * memory; REFERENCES.md §4). Downward flow reverses the sign.
 */
export function rayleighReading(model: DuctModel, freqHz: number, heaterXM: number, flow: MeanFlow): RayleighReading {
  if (!Number.isFinite(heaterXM) || heaterXM < 0 || heaterXM > model.lengthM) {
    throw new RangeError(`heaterXM must lie inside the duct (0 to ${model.lengthM} m), got ${heaterXM} m`);
  }
  if (flow === 'none') {
    return { index: 0, reading: 'neutral', message: 'no mean flow through the heater: its heat release has no component at the tone frequency, so no driving' };
  }
  // Normalise by the largest magnitudes along the duct (fine grid plus the heater point itself).
  const n = 801;
  const xs = new Float64Array(n + 1);
  for (let i = 0; i < n; i++) xs[i] = (model.lengthM * i) / (n - 1);
  xs[n] = heaterXM;
  xs.sort();
  const shape = sampleShape(model, freqHz, xs);
  let pMax = 0;
  let uMax = 0;
  let iHeater = 0;
  for (let i = 0; i < xs.length; i++) {
    pMax = Math.max(pMax, Math.abs(shape.pressure[i]));
    uMax = Math.max(uMax, Math.abs(shape.velocity[i]));
    if (xs[i] === heaterXM) iHeater = i;
  }
  const p = shape.pressure[iHeater] / pMax;
  const u = shape.velocity[iHeater] / uMax;
  const raw = p * u * (flow === 'upward' ? 1 : -1);
  const index = Math.abs(raw) < 1e-9 ? 0 : raw;
  const reading = index > 0 ? 'drives' : index < 0 ? 'damps' : 'neutral';
  const where = reading === 'drives' ? 'adds heat in phase with pressure: it drives this mode' : reading === 'damps' ? 'adds heat out of phase with pressure: it damps this mode' : 'sits at a pressure or velocity node: no driving';
  return { index, reading, message: `heater ${where} (Rayleigh index ${index.toFixed(3)} of ±0.5 for a uniform open–open duct)` };
}
