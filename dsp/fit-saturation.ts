/**
 * Growth into a limit cycle (docs/DESIGN.md "Segment fitting"): the Stuart–Landau and generalised
 * saturation models of the envelope power (fit-saturation-shape.ts), seen through the envelope's
 * own kernel when one is given, fitted by the weighted least-squares machinery of fit-irls.ts (the
 * header of fit.ts derives the weights, the effective sample count and the interval), and the
 * choice between the saturation fit and the early exponential for a rise into a limit.
 */
import { fitExponential, invalidRateFit } from './fit';
import {
  blockMeans,
  covarianceAt,
  fitIrls,
  polish,
  prepare,
  rssOf,
  START_MAX_SAMPLES,
  type FitState,
  type IrlsResult,
  type Prepared,
} from './fit-irls';
import type { GridSpec } from './fit-grid';
import { RESTART_STEPS, type ShapeModel } from './fit-shape';
import { KernelTaps, overBlocks, saturationShape, smoothedShape, type EnvelopeKernel } from './fit-saturation-shape';
import { CHI2_1DOF_99, studentTQuantile } from './stats';
import type { EnvelopeSeries, RateFit, SaturationFit } from './types';

/**
 * Relative rounding error of a model's values: the running products of fit.ts stay within
 * RESTART_STEPS units in the last place, and the arithmetic after them adds a few more (×4).
 */
const MODEL_ROUNDING = 4 * RESTART_STEPS * Number.EPSILON;

/**
 * The weighted RSS that rounding alone leaves, Σ w·(MODEL_ROUNDING·y)²: a drop in RSS below it
 * between two models is not evidence for either (on a noise-free record both fits sit there, and
 * the likelihood-ratio test would otherwise compare two rounding errors).
 */
function roundingRss(d: Prepared, w: Float64Array): number {
  let sum = 0;
  for (let i = 0; i < d.n; i++) sum += w[i] * d.y[i] * d.y[i];
  return MODEL_ROUNDING * MODEL_ROUNDING * sum;
}

/**
 * How far the flexible fit's polish may fall short of its optimum when it stops early: the drop
 * still to come is taken to be at most this many times the drop the quadratic model predicts for
 * the next, lightly damped step. Measured over 860 of these polishes (the unit tests' saturation
 * records, sharp knees and corners included, and the bench's 1-hour records of varied cycles):
 * at most 1.2 times; near an optimum the steps converge quadratically and it is far less.
 */
const SETTLED_FACTOR = 10;

/** Quantities of a saturation fit shared by both saturation models. */
interface SaturationCandidate {
  fit: IrlsResult;
  p: number;
}

function saturationGrid(d: Prepared): GridSpec {
  const spanS = d.t[d.n - 1] - d.t[0];
  const rates = new Float64Array(28);
  // 2·s·span from 1 to 300: log-spaced.
  for (let j = 0; j < rates.length; j++) rates[j] = (0.5 * Math.exp((Math.log(300) * j) / (rates.length - 1))) / spanS;
  const centres = new Float64Array(33);
  for (let j = 0; j < centres.length; j++) centres[j] = d.t[0] - 0.25 * spanS + (1.5 * spanS * j) / (centres.length - 1);
  return { values: [rates, centres] };
}

/**
 * Fits growth into a limit cycle to the envelope power: Stuart–Landau closed form
 * A² = A∞² / (1 + exp(−2 s (t − t_c))) + N² (Landau 1944; Stuart 1960, J. Fluid Mech. 9, 353;
 * REFERENCES.md §6), where s is the linear growth rate (1/s) and A∞ the limit amplitude. When the
 * data reject that shape (likelihood-ratio test on the weighted residuals, corrected by N_eff,
 * at the 1 % level), the flexible form A² = A∞²·(1 + exp(−p s (t − t_c)))^(−2/p) from
 * dA/dt = sA(1 − (A/A∞)^p) is used and `model` is 'generalised-saturation'.
 * `halfTimeS` is when A = A∞/2; `amplitudeAtRef` is the fitted A (background excluded) at the
 * first sample time. With `kernel` (the known low-pass the amplitude went through, EnvelopeKernel)
 * the curve is fitted as seen through it, and s, A∞, the half-limit time describe the amplitude
 * before it: a knee the low-pass has rounded then neither biases s nor reads as a softer knee.
 */
export function fitSaturation(series: EnvelopeSeries, opts?: { backgroundPower?: number; kernel?: EnvelopeKernel }): SaturationFit {
  return fitSaturationWithShape(series, opts).fit;
}

/** A saturation fit with its curve's rate s (1/s), knee sharpness p and centre t_c (s), also when no interval could be given (NaN where no curve was fitted). */
interface ShapedSaturation {
  fit: SaturationFit;
  ratePerS: number;
  p: number;
  tcS: number;
}

/** fitSaturation, also returning the fitted curve's p and t_c. */
function fitSaturationWithShape(series: EnvelopeSeries, opts?: { backgroundPower?: number; kernel?: EnvelopeKernel }): ShapedSaturation {
  const ref = series.timeS.length > 0 ? series.timeS[0] : 0;
  const failFit = (reason: string, nEff: number): SaturationFit => ({
    ...invalidRateFit(reason, ref, nEff),
    model: 'stuart-landau',
    limitAmplitude: Number.NaN,
    halfTimeS: Number.NaN,
  });
  const fail = (reason: string, nEff: number): ShapedSaturation => ({ fit: failFit(reason, nEff), ratePerS: Number.NaN, p: Number.NaN, tcS: Number.NaN });
  const d = prepare(series);
  if (typeof d === 'string') return fail(d, 0);
  const fixedBg = opts?.backgroundPower ?? null;
  if (fixedBg !== null && !(fixedBg >= 0)) return fail('backgroundPower must be ≥ 0', d.nEff);
  if (d.nEff - 5 < 1) return fail(`record too short for the envelope bandwidth (N_eff = ${d.nEff.toFixed(1)})`, d.nEff);
  const kernel = opts?.kernel;
  if (kernel !== undefined) {
    let sum = 0;
    for (let k = 0; k < kernel.weights.length; k++) sum += kernel.weights[k];
    if (kernel.weights.length === 0 || !(sum > 0) || !(kernel.spacingS > 0) || !Number.isFinite(sum + kernel.spacingS)) {
      return fail('kernel must have taps with a positive sum and a positive spacingS', d.nEff);
    }
  }
  // Seen through the kernel when one is given; the grid only seeks the basin, without it (K× cheaper).
  const taps = kernel === undefined ? null : new KernelTaps(kernel);
  const through = (p: number | null): ShapeModel => overBlocks(taps === null ? saturationShape(p) : smoothedShape(saturationShape(p, true), taps), series);
  const grid = saturationGrid(d);
  const landau = fitIrls(d, through(2), grid, fixedBg, null, saturationShape(2, false, d.n));
  if (landau === null) return fail('no tone above the background', d.nEff);
  let chosen: SaturationCandidate = { fit: landau, p: 2 };
  let model: SaturationFit['model'] = 'stuart-landau';

  // Flexible model, started from the Stuart–Landau solution at several knee sharpness values,
  // compared with the same weights (nested models: p = 2 is the Stuart–Landau case). The starts
  // only pick the basin, as the grid does: they run on block means without the kernel.
  const general = through(null);
  const thin = d.n > START_MAX_SAMPLES ? blockMeans(d, landau.weights, START_MAX_SAMPLES) : { d, w: landau.weights };
  const startModel = saturationShape(null);
  const fromLandau = (p: number): Float64Array => {
    const params = new Float64Array(5);
    params[0] = landau.state.params[0];
    params[1] = landau.state.params[1];
    params[2] = landau.state.params[2];
    params[3] = Math.log(p);
    params[4] = landau.state.params[3];
    return params;
  };
  let bestStart: FitState | null = null;
  for (const p of [0.5, 1, 2, 4, 8, 16, 32]) {
    const start: FitState = { params: fromLandau(p), isBackgroundFixed: fixedBg !== null, rss: Number.POSITIVE_INFINITY };
    // A few steps from each start tell the basins apart; only the best start is polished fully.
    polish(thin.d, thin.w, startModel, start, 5);
    if (start.rss < (bestStart?.rss ?? Number.POSITIVE_INFINITY)) bestStart = start;
  }
  // Likelihood-ratio test of the flexible model against Stuart–Landau (nested: one parameter more),
  // with the same weights; true when a flexible fit of weighted RSS `rss` would be preferred.
  const inflation = d.n / d.nEff;
  const nFreeGeneral = fixedBg === null ? 5 : 4;
  const floorRss = roundingRss(d, landau.weights);
  const isPreferred = (rss: number): boolean => {
    const dispersion = rss / (d.n - nFreeGeneral * inflation);
    const statistic = (landau.state.rss - rss) / (dispersion * inflation);
    return statistic > CHI2_1DOF_99 && landau.state.rss - rss > floorRss;
  };
  let bestGeneral: IrlsResult | null = null;
  if (bestStart !== null) {
    // The cheap start may sit in a basin that the full data, through the kernel, rate worse than
    // the Stuart–Landau solution itself (the flexible model at p = 2, whose weighted RSS under
    // these weights the Stuart–Landau fit ended on): then start from that solution.
    if (!(rssOf(d, landau.weights, general, bestStart.params) <= landau.state.rss)) bestStart.params = fromLandau(2);
    bestGeneral = { state: bestStart, weights: landau.weights, cov: null, nFree: 0, dispersion: Number.NaN, nEff: d.nEff };
    // The polish only answers the test: it stops once even SETTLED_FACTOR times the drop its next
    // step predicts would leave the flexible fit rejected (the statistic falls as the RSS rises,
    // and grows without bound as it falls to 0).
    polish(d, landau.weights, general, bestGeneral.state, undefined, (rss, predicted) => {
      const reachable = rss - SETTLED_FACTOR * predicted;
      return reachable > 0 && !isPreferred(reachable);
    });
  }
  if (bestGeneral !== null && Number.isFinite(bestGeneral.state.rss)) {
    if (isPreferred(bestGeneral.state.rss)) {
      const refit = fitIrls(d, general, { values: [] }, fixedBg, bestGeneral.state);
      if (refit !== null) {
        chosen = { fit: refit, p: Math.exp(refit.state.params[3]) };
        model = 'generalised-saturation';
      }
    }
  }
  if (model === 'generalised-saturation') {
    chosen = conditionOnUnresolvedKnee(d, chosen, through, fixedBg);
    // A flexible fit the data do not identify gives way to the Stuart–Landau one.
    if (unidentifiedRate(d, chosen, 3) !== null) {
      chosen = { fit: landau, p: 2 };
      model = 'stuart-landau';
    }
  }
  const k = model === 'stuart-landau' ? 2 : 3;
  const params = chosen.fit.state.params;
  const s = params[1];
  const tc = params[2];
  const limitPower = Math.exp(params[0]);
  const bg = params[k + 1];
  const p = chosen.p;
  if (!(s > 0)) return fail('no growth found', d.nEff);
  const q = quantile975(chosen.fit);
  const unidentified = unidentifiedRate(d, chosen, k, q);
  if (unidentified !== null) return { fit: { ...failFit(unidentified, d.nEff), model }, ratePerS: s, p, tcS: tc };
  const sdRate = Math.sqrt(chosen.fit.cov![1 * chosen.fit.nFree + 1]);
  const atRef = saturationShape(p).evaluate(Float64Array.of(ref), 1, Float64Array.of(s, tc), false).g[0];
  const fit: SaturationFit = {
    isValid: true,
    ratePerS: s,
    ci95PerS: [s - q * sdRate, s + q * sdRate],
    amplitudeAtRef: Math.sqrt(limitPower * atRef),
    refTimeS: ref,
    backgroundPower: bg,
    nEffective: chosen.fit.nEff,
    model,
    limitAmplitude: Math.sqrt(limitPower),
    // (1 + e^{−p s (t − tc)})^{−1/p} = 1/2  ⇔  t = tc − ln(2^p − 1)/(p s); p = 2 gives ln 3/(2 s).
    // Written ln 2/s + ln(1 − 2^{−p})/(p s): finite for any p > 0, ln 2/s as p grows without bound.
    halfTimeS: tc - Math.LN2 / s - Math.log1p(-(2 ** -p)) / (p * s),
  };
  return { fit, ratePerS: s, p, tcS: tc };
}

/** Student-t 0.975 quantile of a fit's interval: N_eff − (free parameters) degrees of freedom, at least 1. */
function quantile975(fit: IrlsResult): number {
  return studentTQuantile(0.975, Math.max(1, fit.nEff - fit.nFree));
}

/**
 * Why the data do not identify a saturation fit's rate s (its parameters [ln A∞², s, t_c, (ln p,)
 * N²], k the index of N²), or null when they do. Not identified:
 * - no covariance (JᵀWJ singular), or a rate variance or 95 % interval that is not finite;
 * - a rate, or a 95 % interval, reaching past the fastest rise the envelope band resolves. On
 *   every saturation curve d ln A²/dt = 2 s (1 − q) ≤ 2 s (header of this file), and a
 *   non-negative kernel keeps that bound (the derivative of Σ h_k a(t − τ_k) is at most
 *   s·Σ h_k a(t − τ_k)), so the mean power A² + N² takes at least ln(1 + A∞²/N²)/(2 s) to climb
 *   from the background to the limit. The envelope's samples are independent only 1/(2B) apart
 *   (the kernel's equivalent duration, header), so for s > B·ln(1 + A∞²/N²) the whole rise lies
 *   within one independent sample: it reads as a step, and every faster rate predicts the same
 *   data. An interval that reaches past that rate has not bounded s either.
 */
function unidentifiedRate(d: Prepared, c: SaturationCandidate, k: number, q = quantile975(c.fit)): string | null {
  if (c.fit.cov === null) return 'fit covariance is singular';
  const params = c.fit.state.params;
  const s = params[1];
  const half = q * Math.sqrt(c.fit.cov[1 * c.fit.nFree + 1]);
  if (!Number.isFinite(s + half)) return 'rate variance undefined';
  const fastest = d.bandwidthHz * Math.log1p(Math.exp(params[0]) / params[k + 1]);
  if (s + half > fastest) return 'rate not resolved by the envelope band (the rise reads as a step)';
  return null;
}

/**
 * The rate's interval of a generalised-saturation fit whose knee is sharper than the samples
 * resolve: conditional on the knee sharpness p instead of marginal over it. The knee turns over a
 * time of about 1/(p·s); when that is under one sample interval Δt (p·s·Δt ≥ 1), every larger p
 * predicts the same samples (a corner), so the likelihood is flat in ln p towards +∞ and its
 * curvature there is not information but a numerical remnant. The linearised covariance
 * φ̂·(JᵀWJ)⁻¹ then couples s to that flat direction (correlations of ±0.6–0.97 measured on sharp
 * knees through a Blackman kernel) and states an sd of the rate up to 4× the scatter the fits
 * actually show. The profile likelihood of s over p (maximised over p for each s) is, on that flat
 * stretch, the likelihood at a fixed p, whose curvature in s is the conditional information
 * (profile likelihood for nuisance parameters, Pawitan 2001, In All Likelihood; from memory),
 * so the covariance is taken with p held at its estimate: the same weights, residuals and
 * correlation correction, one free parameter fewer. A knee the samples do resolve keeps the
 * marginal covariance. The correlation correction (n/N_eff, or the residuals' Geyer time when
 * longer) is applied as before, once: on these records it stayed at the band's value n/N_eff, so
 * it was not the source of the wide intervals.
 */
function conditionOnUnresolvedKnee(
  d: Prepared,
  chosen: SaturationCandidate,
  through: (p: number | null) => ShapeModel,
  fixedBg: number | null,
): SaturationCandidate {
  const params = chosen.fit.state.params;
  const s = params[1];
  const p = Math.exp(params[3]);
  if (!(p > 0) || !(s > 0) || p * s * d.spacingS < 1) return chosen;
  const corner: FitState = { params: Float64Array.of(params[0], s, params[2], params[4]), isBackgroundFixed: fixedBg !== null, rss: chosen.fit.state.rss };
  const conditional = covarianceAt(d, through(p), corner, chosen.fit.weights, fixedBg);
  return { fit: { ...chosen.fit, ...conditional }, p: chosen.p };
}

/** Power fraction of the limit below which the rise counts as small-amplitude (Stuart–Landau departs from the exponential there by < 1 %). */
export const EARLY_LIMIT_FRACTION = 0.01;

/** The rate a growth into a limit cycle reports, and the fits it was chosen from. */
export interface GrowthIntoLimitFit {
  /** The fit whose rate and interval are reported. */
  rate: RateFit;
  /** Which model produced `rate`. */
  model: 'exponential' | 'stuart-landau' | 'generalised-saturation';
  /** The saturation fit over the whole series (limit amplitude, half-limit time). */
  saturation: SaturationFit;
  /** Exponential fit of the small-amplitude part (power below EARLY_LIMIT_FRACTION of the limit); null when too short. */
  early: RateFit | null;
}

/**
 * Linear growth rate of a rise into a limit cycle, 1/s, with its 95 % interval. A saturation
 * model fixes the linear rate only through the shape it assumes for the knee; a source whose
 * nonlinearity is not the cubic of Stuart–Landau (a heat release following a modified King's law
 * barely saturates at small amplitude and then bends sharply) pulls that rate away from the
 * truth while the shape still fits within the noise. The small-amplitude part of the rise (power
 * below EARLY_LIMIT_FRACTION of the fitted limit) measures the linear rate without any knee
 * model. The saturation fit is kept when its rate agrees with that part's (difference within the
 * root-sum-square of the two 95 % half-widths, a test at about the 5 % level for independent
 * estimates and more lenient for these positively correlated ones) and is the more precise;
 * otherwise the early exponential is reported. Same rule for both saturation models.
 */
export function fitGrowthIntoLimit(series: EnvelopeSeries, opts?: { backgroundPower?: number; kernel?: EnvelopeKernel }): GrowthIntoLimitFit {
  const shaped = fitSaturationWithShape(series, opts);
  const expOpts = opts?.backgroundPower === undefined ? {} : { backgroundPower: opts.backgroundPower };
  const saturation = shaped.fit;
  const n = Math.min(series.timeS.length, series.power.length);
  // End of the small-amplitude part: where the fitted curve reaches the fraction of its limit,
  // (1 + e^{−z})^{−2/p} = f ⇔ z = −ln(f^{−p/2} − 1), t = t_c + z/(p s). Cutting on the fitted
  // curve, not at the first sample above the fraction, keeps the noise from choosing the cut
  // (a cut at the first high sample keeps only samples that happened to be low: a rate biased low).
  let endS = Number.NaN;
  const sRate = shaped.ratePerS;
  if (saturation.isValid && sRate > 0 && shaped.p > 0 && Number.isFinite(shaped.tcS)) {
    // ln(e^x − 1) = x + ln(1 − e^{−x}), x = (p/2)·ln(1/f), over p s: finite for any p > 0, ln(1/f)/(2 s) as p grows without bound.
    const halfLn = 0.5 * Math.log(1 / EARLY_LIMIT_FRACTION);
    endS = shaped.tcS - halfLn / sRate - Math.log1p(-Math.exp(-shaped.p * halfLn)) / (shaped.p * sRate);
  } else {
    // No valid curve: the fraction of the mean of the last tenth of the record, on a running mean of 5 samples.
    const from = Math.floor(0.9 * n);
    let sum = 0;
    for (let i = from; i < n; i++) sum += series.power[i];
    const limitPower = n > from ? sum / (n - from) : Number.NaN;
    for (let i = 2; i + 2 < n && Number.isNaN(endS); i++) {
      const m = (series.power[i - 2] + series.power[i - 1] + series.power[i] + series.power[i + 1] + series.power[i + 2]) / 5;
      if (m > EARLY_LIMIT_FRACTION * limitPower) endS = series.timeS[i];
    }
  }
  let k1 = 0;
  while (k1 < n && series.timeS[k1] <= endS) k1++;
  const refTimeS = n > 0 ? series.timeS[0] : 0;
  const early =
    k1 >= 6
      ? fitExponential({ timeS: series.timeS.subarray(0, k1), power: series.power.subarray(0, k1), bandwidthHz: series.bandwidthHz }, { ...expOpts, refTimeS })
      : null;
  const half = (f: RateFit): number => 0.5 * (f.ci95PerS[1] - f.ci95PerS[0]);
  const isEarlyUsable = early !== null && early.isValid && early.ratePerS > 0;
  const agrees =
    saturation.isValid &&
    isEarlyUsable &&
    Math.abs(saturation.ratePerS - early.ratePerS) <= Math.hypot(half(saturation), half(early)) &&
    half(saturation) <= half(early);
  if (isEarlyUsable && !agrees) return { rate: early, model: 'exponential', saturation, early };
  return { rate: saturation, model: saturation.model, saturation, early };
}

/**
 * Stuart–Landau amplitude dA/dt = sA − kA³ in closed form (Landau 1944; Stuart 1960; REFERENCES.md
 * §6): A(t) = A0·e^{s τ} / √(1 + (k A0²/s)(e^{2 s τ} − 1)), τ = t − startS; limit A∞ = √(s/k).
 */
export function landauAmplitude(
  timeS: number,
  p: { ratePerS: number; cubicCoefficient: number; startAmplitude: number; startS?: number },
): number {
  const tau = timeS - (p.startS ?? 0);
  const a0 = p.startAmplitude;
  const s = p.ratePerS;
  // Written with e^{−2sτ} so that large τ does not overflow.
  const e = Math.exp(-2 * s * tau);
  return a0 / Math.sqrt(e + ((p.cubicCoefficient * a0 * a0) / s) * (1 - e));
}

/** Time (s) at which the Stuart–Landau amplitude reaches A∞/2: t0 + ln((A∞²/A0² − 1)/3)/(2 s) (REFERENCES.md §6). */
export function landauHalfLimitTimeS(p: { ratePerS: number; cubicCoefficient: number; startAmplitude: number; startS?: number }): number {
  const limit2 = p.ratePerS / p.cubicCoefficient;
  return (p.startS ?? 0) + Math.log((limit2 / (p.startAmplitude * p.startAmplitude) - 1) / 3) / (2 * p.ratePerS);
}
