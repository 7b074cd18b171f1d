/**
 * A measured tone → which duct mode it can be, and the gas temperature each mode implies.
 *
 * A single frequency fits mode n of a duct at one gas temperature for every n, so the temperature
 * decides the mode. Each mode gives a candidate: the uniform gas temperature that puts it exactly at
 * the measured frequency, with a 95 % interval. A candidate is plausible when that temperature lies
 * in PLAUSIBLE_GAS_TEMPERATURE_C and the mode is a plane wave (below the first cross mode); the best
 * plausible one is the one nearest (in log frequency) to the modes predicted at the temperatures
 * the model was given, and more than one plausible candidate is flagged as ambiguous.
 */
import {
  ABSOLUTE_ZERO_C,
  brentRoot,
  checkRange,
  effectiveLengthM,
  FIRST_CROSS_MODE_ROOT,
  GAS_TEMPERATURE_RANGE_C,
  MAX_MODE_COUNT,
  meanTemperatureC,
  modeFactor,
  PLAUSIBLE_GAS_TEMPERATURE_C,
  predictModes,
  temperatureForSpeedC,
  temperatureSensitivityToSpeed,
  type DuctModel,
  type PhysicalRange,
} from './duct';

/**
 * Measured tones the match accepts, Hz: from 0.01 Hz (below the lowest mode of any duct in range: a
 * 500 m quarter-wave flue at −190 °C, c ≈ 182 m/s, hums at 0.09 Hz) to 100 kHz (beyond the 96 kHz
 * Nyquist frequency of a 192 kHz recording).
 */
export const MEASURED_FREQUENCY_RANGE_HZ: PhysicalRange = { min: 0.01, max: 100000 };

/** Two-sided 95 % coverage factor of a normal distribution (GUM JCGM 100:2008 §G.3 — from memory). */
const COVERAGE_95 = 1.96;

export interface ModeCandidate {
  /** Mode number, 1 = lowest. */
  n: number;
  /** Frequency of mode n at the temperatures the model was given, Hz, and the tone's deviation from it, (measured − predicted) / predicted. */
  predictedHz: number;
  relativeDeviation: number;
  /**
   * Uniform gas temperature that puts mode n exactly at the measured frequency, °C. For a duct with
   * zones (heater, profile) an equivalent uniform temperature, not the temperature of any zone.
   */
  temperatureC: number;
  /** Standard uncertainty of that temperature, K (measurement, and for zones the model error). */
  temperatureStdK: number;
  /** 95 % interval, °C; computed on ln T, so it never reaches absolute zero. */
  temperatureCi95C: [number, number];
  /** Half-width of the model error for a duct with zones, K (0 for a uniform duct): see matchMeasuredFrequency. */
  modelErrorK: number;
  /** Mode n lies above the first cross-mode cut-on (not a plane wave) at any gas temperature. */
  isAboveCutOn: boolean;
  /** Temperature within PLAUSIBLE_GAS_TEMPERATURE_C and a plane-wave mode. */
  plausible: boolean;
}

export interface MeasuredMatch {
  /** Every mode whose implied temperature lies within GAS_TEMPERATURE_RANGE_C, ascending in n (descending in temperature). */
  candidates: ModeCandidate[];
  /** The plausible candidate nearest in log frequency to the model's prediction; null when none is plausible. */
  best: ModeCandidate | null;
  /** More than one candidate is plausible: the gas temperature decides the mode. */
  isAmbiguous: boolean;
  /** The duct has zones of different temperature: temperatures are equivalent uniform ones. */
  isEquivalentTemperature: boolean;
  /** PLAUSIBLE_GAS_TEMPERATURE_C as [min, max], °C. */
  plausibleRangeC: [number, number];
  warnings: string[];
}

/** Standard uncertainties of the measured frequency (Hz) and of the duct length (m). */
export interface MatchUncertainty {
  frequencyStdHz: number;
  lengthStdM: number;
}

/** Number of plane-wave modes: κ_n < 1.8412 L_eff / (π d), whatever the (uniform) temperature, since both sides scale with c. */
function planeWaveModeCount(model: DuctModel, lEff: number): number {
  const kappaMax = (FIRST_CROSS_MODE_ROOT * lEff) / (Math.PI * model.diameterM);
  let n = 0;
  while (n < MAX_MODE_COUNT && modeFactor(model.ends, n + 1) < kappaMax) n++;
  return n;
}

/** Default standard uncertainties of a match: a tone read to about ±0.5 Hz, a length to ±5 mm (common practice for a tape and a phone spectrum). */
export const DEFAULT_MATCH_UNCERTAINTY: MatchUncertainty = { frequencyStdHz: 0.5, lengthStdM: 0.005 };

/**
 * Candidate modes for a measured tone. For mode n, c = f L_eff / κ_n and T solves γ(T) R T = c²
 * (REFERENCES.md §1, §2, §70). Uncertainty, first order on ln T (GUM JCGM 100:2008 §5.1 — from
 * memory): u(ln c) = sqrt((u_f/f)² + (u_L/L_eff)²), u(ln T) = s · u(ln c) with s = d ln T / d ln c
 * (2 for a constant γ); end corrections are taken as exact. The interval is T·exp(±1.96 u(ln T)).
 *
 * Model error for a duct with zones: the equivalent uniform temperature of mode n differs from the
 * length-weighted mean temperature T̄ by a factor ρ_n = T_eq,n / T̄ that the model gives for its
 * layout (stratificationLnError; REFERENCES.md §71: in the §3 tube, 20/200 °C, mode 1 reads 44 K
 * below the mean, mode 2 5 K; the gap grows with the temperature contrast). The layout is an
 * idealisation (a sharp step at the heater, uniform zones), so the sign is not trusted: ln ρ_n is
 * taken as a rectangular error of half-width |ln ρ_n|, standard uncertainty |ln ρ_n| / √3 (GUM
 * §4.3.7), added in quadrature to u(ln T). The 95 % half-width, 1.13 |ln ρ_n| and more, then covers
 * the length-weighted mean of the layout.
 *
 * `count` is the least number of modes considered; all plane-wave modes are (up to MAX_MODE_COUNT).
 */
export function matchMeasuredFrequency(
  model: DuctModel,
  measuredHz: number,
  uncertainty: MatchUncertainty = DEFAULT_MATCH_UNCERTAINTY,
  count = 12,
): MeasuredMatch {
  checkRange('measuredHz', measuredHz, MEASURED_FREQUENCY_RANGE_HZ, 'Hz');
  // A standard uncertainty as large as the quantity says nothing; the bound keeps exp(1.96 u) finite.
  checkRange('frequencyStdHz', uncertainty.frequencyStdHz, { min: 0, max: measuredHz }, 'Hz');
  checkRange('lengthStdM', uncertainty.lengthStdM, { min: 0, max: model.lengthM }, 'm');
  if (!Number.isInteger(count) || count < 1 || count > MAX_MODE_COUNT) throw new RangeError(`count must be an integer from 1 to ${MAX_MODE_COUNT}, got ${count}`);
  const lEff = effectiveLengthM(model);
  const planeWave = planeWaveModeCount(model, lEff);
  const modeCount = Math.min(MAX_MODE_COUNT, Math.max(count, planeWave));
  const pred = predictModes(model, modeCount);
  const isEquivalent = new Set(model.zones.map((z) => z.temperatureC)).size > 1;
  const meanK = meanTemperatureC(model) - ABSOLUTE_ZERO_C;
  const uLnC = Math.hypot(uncertainty.frequencyStdHz / measuredHz, uncertainty.lengthStdM / lEff);
  const candidates: ModeCandidate[] = [];
  for (const mode of pred.modes) {
    const kappa = modeFactor(model.ends, mode.n);
    const tC = temperatureForSpeedC((measuredHz * lEff) / kappa, model.gas);
    if (tC > GAS_TEMPERATURE_RANGE_C.max) continue;
    if (tC < GAS_TEMPERATURE_RANGE_C.min) break; // T falls with n: no later mode comes back into range
    const tK = tC - ABSOLUTE_ZERO_C;
    const isAboveCutOn = mode.n > planeWave;
    const isPlausibleT = tC >= PLAUSIBLE_GAS_TEMPERATURE_C.min && tC <= PLAUSIBLE_GAS_TEMPERATURE_C.max;
    let lnModel = 0;
    if (isEquivalent) {
      // The layout solved for the tone only where it matters (plausible plane-wave candidates): a few transfer-matrix solves each.
      const solveFor = !isAboveCutOn && isPlausibleT ? measuredHz : null;
      lnModel = Math.abs(stratificationLnError(model, mode.n, mode.frequencyHz, solveFor, lEff, meanK));
    }
    const uLnT = Math.hypot(temperatureSensitivityToSpeed(tC, model.gas) * uLnC, lnModel / Math.sqrt(3));
    candidates.push({
      n: mode.n,
      predictedHz: mode.frequencyHz,
      relativeDeviation: (measuredHz - mode.frequencyHz) / mode.frequencyHz,
      temperatureC: tC,
      temperatureStdK: tK * uLnT,
      temperatureCi95C: [tK * Math.exp(-COVERAGE_95 * uLnT) + ABSOLUTE_ZERO_C, tK * Math.exp(COVERAGE_95 * uLnT) + ABSOLUTE_ZERO_C],
      modelErrorK: tK * lnModel,
      isAboveCutOn,
      plausible: !isAboveCutOn && isPlausibleT,
    });
  }
  const plausible = candidates.filter((c) => c.plausible);
  let best: ModeCandidate | null = null;
  for (const c of plausible) if (!best || Math.abs(Math.log(1 + c.relativeDeviation)) < Math.abs(Math.log(1 + best.relativeDeviation))) best = c;
  const warnings = pred.warnings.filter((w) => !/cut-on/.test(w));
  const range = `${PLAUSIBLE_GAS_TEMPERATURE_C.min} to ${PLAUSIBLE_GAS_TEMPERATURE_C.max} °C`;
  if (!best) {
    warnings.push(`no plane-wave mode of this duct is at ${measuredHz} Hz at a plausible gas temperature (${range}): check the length, the ends and whether the tone comes from this duct`);
  }
  if (plausible.length > 1) {
    const list = plausible.map((c) => `mode ${c.n} at ${c.temperatureC.toFixed(0)} °C`).join(', ');
    warnings.push(`${plausible.length} modes fit at plausible gas temperatures (${list}): the gas temperature decides which; mode ${best?.n} is nearest the temperatures entered`);
  }
  if (isEquivalent) {
    warnings.push('the duct has zones of different temperature: each inferred temperature is an equivalent uniform one, and its interval is widened by the model error to cover the mean gas temperature');
  }
  return {
    candidates,
    best,
    isAmbiguous: plausible.length > 1,
    isEquivalentTemperature: isEquivalent,
    plausibleRangeC: [PLAUSIBLE_GAS_TEMPERATURE_C.min, PLAUSIBLE_GAS_TEMPERATURE_C.max],
    warnings,
  };
}

/**
 * ln(T_eq,n / T̄) for the model's layout, T̄ the length-weighted mean temperature (K). With a heater
 * (two zones) and a measured tone, the hot-zone temperature is first re-solved (Brent, 0.01 K) so
 * that mode n sits at the tone: the typed hot temperature is a guess, and the gap grows with the
 * contrast (REFERENCES.md §71). Otherwise (a measured profile, or no solution inside
 * GAS_TEMPERATURE_RANGE_C) the layout as given, with the model's own f_n.
 */
function stratificationLnError(model: DuctModel, n: number, modelHz: number, measuredHz: number | null, lEff: number, meanK: number): number {
  const kappa = modeFactor(model.ends, n);
  const lnGap = (m: DuctModel, fHz: number, tMeanK: number): number => Math.log((temperatureForSpeedC((fHz * lEff) / kappa, m.gas) - ABSOLUTE_ZERO_C) / tMeanK);
  const given = lnGap(model, modelHz, meanK);
  if (measuredHz === null || model.zones.length !== 2) return given;
  const withHot = (hotC: number): DuctModel => ({ ...model, zones: [model.zones[0], { ...model.zones[1], temperatureC: hotC }] });
  const modeHz = (hotC: number): number => predictModes(withHot(hotC), n).modes[n - 1].frequencyHz;
  try {
    const lo = GAS_TEMPERATURE_RANGE_C.min;
    const hi = GAS_TEMPERATURE_RANGE_C.max;
    if ((modeHz(lo) - measuredHz) * (modeHz(hi) - measuredHz) > 0) return given;
    const hotC = brentRoot((h) => modeHz(h) - measuredHz, lo, hi, 0.01, 100);
    const solved = withHot(hotC);
    return lnGap(solved, measuredHz, meanTemperatureC(solved) - ABSOLUTE_ZERO_C);
  } catch {
    return given; // a root finder that fails here leaves the layout as given
  }
}
