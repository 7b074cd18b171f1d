/**
 * How close a mode is to humming, or how hard it is driven, from a stretch of steady noise-driven
 * operation (quiet or steady hum): the linear growth rate ν of the normal form
 * du = (ν − κ|u|²)u dt + σ dW with its 95 % interval, by three routes reconciled into one
 * (REFERENCES.md §40–§42):
 * 1. the stationary amplitude PDF by maximum likelihood (dsp/envelope-statistics.ts),
 * 2. drift and diffusion of the envelope with finite-lag and band-filter corrections (same file),
 * 3. for a stable mode, the Lorentzian half-width of dsp/damping.ts (ν = −decay rate).
 *
 * The recording is mixed down around the mode (dsp/damping.ts mixDownDecimate, flat over
 * ±halfWidthHz), scaled so |u| is the tone's peak amplitude, and turned at the mean phase rate so
 * the mode sits at 0 Hz. Whole-stretch function: it allocates; it never throws.
 */
import { basebandFilter, dftBand, mixDownDecimate, type Baseband } from './baseband';
import { fitLorentzianWhittle } from './damping';
import { estimateEnvelopeStatistics, type BandFilterEffect, type ComplexEnvelope, type RouteEstimate } from './envelope-statistics';
import { incompleteBeta, Z_975 } from './stats';
import type { Interval, ModeStatistics, NoiseRegime } from './types';

/** Least stretch of steady operation for a verdict, s (issue requirement; at 20 s and |ν| = 5 1/s the interval is about ±1 1/s, REFERENCES.md §7). */
export const MODE_STATISTICS_MIN_S = 20;
/** Default half-width of the band around the mode, Hz: passes the amplitude fluctuations of a hum at ν = 10 1/s (2ν/2π ≈ 3 Hz) with room, and keeps the Lorentzian tails lost outside it below 3 % of the variance at |ν| = 10 1/s ((2/π)·(ν/2π)/W). */
export const MODE_BAND_HALF_WIDTH_HZ = 40;
/** Narrowest band the estimator accepts, half-width in Hz (narrower: the mode lies too close to 0 Hz or to half the sample rate). */
export const MODE_BAND_MIN_HALF_WIDTH_HZ = 2;
/** The band filter's normalised autocorrelation below which its own correlation is taken as gone (its share of the increments' intercept is then < 0.1 %). */
const FILTER_CORRELATION_FLOOR = 1e-3;
/**
 * Envelope rate in multiples of the half-width (mixDownDecimate's design: flat to W, stopband from
 * rate − W = 7W). Mixed down, a hum's second harmonic sits at +f and the real signal's image at −2f;
 * both must fall in the stopband, so 7W ≤ f caps the half-width (HARMONIC_WIDTH_FRACTION).
 */
export const MODE_ENVELOPE_RATE_MULTIPLE = 8;
const HARMONIC_WIDTH_FRACTION = 1 / (MODE_ENVELOPE_RATE_MULTIPLE - 1);
/** Family-wise false-alarm probability of the second-mode test. */
const SECOND_MODE_ALPHA = 1e-3;
/** Smoothing span of the second-mode test, Hz, and the shoulders' distances in smoothing spans (1, 2 and 4 Hz: a second resonance of any half-width up to ~2 Hz stands out at one of them). */
const SECOND_MODE_SMOOTH_HZ = 0.5;
const SECOND_MODE_SHOULDER_SPANS = [2, 4, 8];

export interface ModeStatisticsResult {
  isValid: boolean;
  /** Frequency of the mode (mean phase rate), Hz. */
  frequencyHz: number;
  /** Linear growth rate ν, 1/s (negative: stable) with its 95 % interval. */
  growthRatePerS: number;
  ci95PerS: Interval;
  /** κ in 1/(s·FS²) and σ² in FS²/s, FS the full-scale peak amplitude. */
  saturation: number;
  noiseIntensity: number;
  regime: NoiseRegime;
  /** Which route gave the estimate ('amplitude-pdf', 'drift-diffusion', 'lorentzian'), '+disagree' when routes disagree. */
  method: string;
  /** Why the regime is undetermined or the estimate missing. */
  reason?: string;
  routes: { pdf: RouteEstimate; driftDiffusion: RouteEstimate; lorentzian: RouteEstimate };
  durationS: number;
}

function invalidRoute(reason: string): RouteEstimate {
  return { isValid: false, growthRatePerS: Number.NaN, ci95PerS: [Number.NaN, Number.NaN], saturation: Number.NaN, noiseIntensity: Number.NaN, reason };
}

/** What the mix-down filter does to the increments (see BandFilterEffect; REFERENCES.md §41). */
export function bandFilterEffect(sampleRateHz: number, halfWidthHz: number): BandFilterEffect {
  const { h, factor } = basebandFilter(sampleRateHz, halfWidthHz, MODE_ENVELOPE_RATE_MULTIPLE);
  const taps = h.length;
  // Autocorrelation of the taps a(d), d in input samples.
  const a = new Float64Array(taps);
  for (let d = 0; d < taps; d++) {
    let r = 0;
    for (let j = 0; j + d < taps; j++) r += h[j] * h[j + d];
    a[d] = r;
  }
  const span = Math.ceil(taps / factor) + 1;
  const noiseCorrelation = new Float64Array(span);
  const wienerM2S = new Float64Array(span);
  let minLag = 1;
  for (let k = 0; k < span; k++) {
    const d0 = k * factor;
    noiseCorrelation[k] = d0 < taps ? a[d0] / a[0] : 0;
    if (k > 0 && Math.abs(noiseCorrelation[k]) >= FILTER_CORRELATION_FLOOR) minLag = k + 1;
    // G(τ) = Σ_j Σ_k h_j h_k max(0, τ − |t_j − t_k|) = a(0)τ + 2 Σ_{d≥1} a(d) max(0, τ − d/fs).
    let g = a[0] * d0;
    for (let d = 1; d < Math.min(taps, d0); d++) g += 2 * a[d] * (d0 - d);
    wienerM2S[k] = g / sampleRateHz;
  }
  // ΣΣ h_j h_k |j − k| = 2 Σ_d a(d)·d.
  let acc = 0;
  for (let d = 1; d < taps; d++) acc += a[d] * d;
  return { minLagSamples: minLag, structureOffsetS: (2 * acc) / sampleRateHz, wienerM2S, noiseCorrelation };
}

/**
 * The latest band filter's effect, kept: it depends only on the sample rate and the half-width, and
 * a live caller (dsp/live-margin.ts) estimates again and again in the same band. Read-only.
 */
let lastFilterEffect: { sampleRateHz: number; halfWidthHz: number; effect: BandFilterEffect } | null = null;

function bandFilterEffectOf(sampleRateHz: number, halfWidthHz: number): BandFilterEffect {
  const last = lastFilterEffect;
  if (last !== null && last.sampleRateHz === sampleRateHz && last.halfWidthHz === halfWidthHz) return last.effect;
  const effect = bandFilterEffect(sampleRateHz, halfWidthHz);
  lastFilterEffect = { sampleRateHz, halfWidthHz, effect };
  return effect;
}

/** Quantile of the F(d1, d2) distribution by bisection on its CDF I_{d1x/(d1x+d2)}(d1/2, d2/2) (A&S 26.6.2). */
function fQuantile(p: number, d1: number, d2: number): number {
  const cdf = (x: number): number => incompleteBeta((d1 * x) / (d1 * x + d2), d1 / 2, d2 / 2);
  let lo = 0;
  let hi = 2;
  while (cdf(hi) < p && hi < 1e6) hi *= 2;
  for (let i = 0; i < 100; i++) {
    const mid = 0.5 * (lo + hi);
    if (cdf(mid) < p) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}

/**
 * Second mode in the band: a local maximum of the periodogram smoothed over m bins that stands above
 * the mean of its two shoulders (h bins away on each side) by more than chance allows. Periodogram
 * ordinates of complex data are S·Exp(1) and nearly independent (Whittle 1953), so under a locally
 * flat or convex spectrum (a Lorentzian's skirt, a sloping floor) the ratio is at most F(2m, 4m)
 * distributed; the quantile is Bonferroni-corrected over the positions and shoulder distances
 * tested. The tone's own top is left out: twice its half-power half-width around the highest
 * smoothed bin (a Lorentzian is concave within γ/√3 of its top), at least `pedestalHz` (the
 * half-width of a hum's amplitude pedestal), plus the farthest shoulder.
 */
export function hasSecondMode(freqHz: Float64Array, periodogram: Float64Array, pedestalHz: number): boolean {
  const n = freqHz.length;
  const binHz = Math.abs(freqHz[1] - freqHz[0]);
  const m = Math.max(3, Math.round(SECOND_MODE_SMOOTH_HZ / binHz));
  const hMax = SECOND_MODE_SHOULDER_SPANS[SECOND_MODE_SHOULDER_SPANS.length - 1] * m;
  const smooth = new Float64Array(n);
  let run = 0;
  for (let k = 0; k < n; k++) {
    run += periodogram[k];
    if (k >= m) run -= periodogram[k - m];
    // smooth[k] is the mean of bins k − m + 1 … k; read it centred at k − (m − 1)/2.
    smooth[k] = k >= m - 1 ? run / m : Number.NaN;
  }
  const off = Math.floor((m - 1) / 2);
  const at = (k: number): number => smooth[k + off];
  let kTop = n >> 1;
  for (let k = 0; k + off < n; k++) if (at(k) > at(kTop)) kTop = k;
  let kl = kTop;
  let kr = kTop;
  while (kl > 0 && at(kl - 1) > 0.5 * at(kTop)) kl--;
  while (kr + off + 1 < n && at(kr + 1) > 0.5 * at(kTop)) kr++;
  const halfPowerHz = Math.max(kTop - kl, kr - kTop) * binHz;
  const exclusionHz = Math.max(2 * halfPowerHz, pedestalHz) + hMax * binHz;
  const lo = hMax + m;
  const hi = n - 1 - off - hMax;
  const tests = Math.max(1, Math.floor((hi - lo) / m) * SECOND_MODE_SHOULDER_SPANS.length);
  const q = fQuantile(1 - SECOND_MODE_ALPHA / tests, 2 * m, 4 * m);
  for (let k = lo; k <= hi; k++) {
    if (Math.abs(freqHz[k] - freqHz[kTop]) < exclusionHz) continue;
    const v = at(k);
    if (!(v >= at(k - 1) && v >= at(k + 1))) continue;
    for (const spans of SECOND_MODE_SHOULDER_SPANS) {
      const h = spans * m;
      if (v > q * 0.5 * (at(k - h) + at(k + h))) return true;
    }
  }
  return false;
}

/** Regime from the interval of ν: its sign decides where the interval allows only one (REFERENCES.md §42). */
export function regimeFromInterval(ci: Interval): NoiseRegime {
  if (ci[1] < 0) return 'stable';
  if (ci[0] > 0) return 'humming';
  return 'near-threshold';
}

/** Normal-distribution standard deviation implied by a 95 % interval. */
function sdOf(r: RouteEstimate): number {
  return (r.ci95PerS[1] - r.ci95PerS[0]) / (2 * Z_975);
}

/**
 * Reconciles the routes: the one with the narrowest interval, provided the others agree with it
 * (difference within 1.96 √(sd₁² + sd₂²), a test that is conservative because the routes share data);
 * when they disagree the interval is widened to cover every valid route's interval.
 */
export function reconcileRoutes(routes: { name: string; est: RouteEstimate }[]): { est: RouteEstimate; method: string } | null {
  const valid = routes.filter((r) => r.est.isValid);
  if (valid.length === 0) return null;
  let best = valid[0];
  for (const r of valid) if (sdOf(r.est) < sdOf(best.est)) best = r;
  const disagree = valid.some((r) => Math.abs(r.est.growthRatePerS - best.est.growthRatePerS) > Z_975 * Math.hypot(sdOf(r.est), sdOf(best.est)));
  if (!disagree) return { est: best.est, method: best.name };
  let lo = best.est.ci95PerS[0];
  let hi = best.est.ci95PerS[1];
  for (const r of valid) {
    lo = Math.min(lo, r.est.ci95PerS[0]);
    hi = Math.max(hi, r.est.ci95PerS[1]);
  }
  return { est: { ...best.est, ci95PerS: [lo, hi] }, method: `${best.name}+disagree` };
}

/**
 * Linear growth rate of the mode near centreHz from a stretch x of steady operation at sampleRateHz.
 * `isClipped` marks a stretch whose input clipped (the amplitude's upper tail is then cut and the
 * regime is not called); `halfWidthHz` bounds the band (default MODE_BAND_HALF_WIDTH_HZ, narrowed
 * to keep clear of 0 Hz and Nyquist).
 */
export function estimateModeStatistics(
  x: Float32Array,
  sampleRateHz: number,
  opts: { centreHz: number; halfWidthHz?: number; isClipped?: boolean },
): ModeStatisticsResult {
  const centre = opts.centreHz;
  const halfWidth = modeBandHalfWidth(sampleRateHz, centre, opts.halfWidthHz);
  const isBandValid = sampleRateHz > 0 && centre > 0 && halfWidth >= MODE_BAND_MIN_HALF_WIDTH_HZ;
  const z = isBandValid ? modeBaseband(x, sampleRateHz, centre, halfWidth) : { re: new Float64Array(0), im: new Float64Array(0), rateHz: 0, startS: 0 };
  return modeStatisticsOfBaseband(z, sampleRateHz, x.length / sampleRateHz, { centreHz: centre, halfWidthHz: halfWidth, isClipped: opts.isClipped });
}

/** The band's half-width around a mode at centreHz, Hz: `halfWidthHz` (default MODE_BAND_HALF_WIDTH_HZ) narrowed to keep clear of 0 Hz, the hum's harmonics and Nyquist. */
export function modeBandHalfWidth(sampleRateHz: number, centreHz: number, halfWidthHz = MODE_BAND_HALF_WIDTH_HZ): number {
  return Math.min(halfWidthHz, HARMONIC_WIDTH_FRACTION * centreHz, 0.8 * (sampleRateHz / 2 - centreHz));
}

/** The mode's complex baseband that the estimator reads: x mixed down by centreHz over ±halfWidthHz (dsp/baseband.ts), at the envelope rate of this estimator. */
export function modeBaseband(x: Float32Array, sampleRateHz: number, centreHz: number, halfWidthHz: number): Baseband {
  return mixDownDecimate(x, sampleRateHz, centreHz, halfWidthHz, MODE_ENVELOPE_RATE_MULTIPLE);
}

/**
 * estimateModeStatistics on a baseband already mixed down (modeBaseband of a stretch of
 * `durationS` at sampleRateHz, around centreHz over ±halfWidthHz): a caller that keeps the
 * baseband as audio arrives (dsp/live-margin.ts) does not mix the whole stretch again. A constant
 * phase of z changes nothing.
 */
export function modeStatisticsOfBaseband(
  z: Baseband,
  sampleRateHz: number,
  durationS: number,
  opts: { centreHz: number; halfWidthHz: number; isClipped?: boolean },
): ModeStatisticsResult {
  const centre = opts.centreHz;
  const halfWidth = opts.halfWidthHz;
  const none = invalidRoute('not computed');
  const fail = (reason: string): ModeStatisticsResult => ({
    isValid: false,
    frequencyHz: centre,
    growthRatePerS: Number.NaN,
    ci95PerS: [Number.NaN, Number.NaN],
    saturation: Number.NaN,
    noiseIntensity: Number.NaN,
    regime: 'undetermined',
    method: 'none',
    reason,
    routes: { pdf: none, driftDiffusion: none, lorentzian: none },
    durationS,
  });
  if (!(sampleRateHz > 0) || !(centre > 0) || !(halfWidth >= MODE_BAND_MIN_HALF_WIDTH_HZ)) return fail('the mode lies too close to 0 Hz or to half the sample rate');
  const n = z.re.length;
  if (n < 256) return fail('stretch too short');
  // u = 2z: a real tone of peak amplitude A mixes down to a phasor of magnitude A/2.
  let sr = 0;
  let si = 0;
  for (let t = 0; t + 1 < n; t++) {
    sr += z.re[t] * z.re[t + 1] + z.im[t] * z.im[t + 1];
    si += z.re[t] * z.im[t + 1] - z.im[t] * z.re[t + 1];
  }
  const omega = Math.atan2(si, sr); // rad per envelope sample
  const u: ComplexEnvelope = { re: new Float64Array(n), im: new Float64Array(n), rateHz: z.rateHz };
  for (let t = 0; t < n; t++) {
    const c = Math.cos(-omega * t);
    const s = Math.sin(-omega * t);
    u.re[t] = 2 * (z.re[t] * c - z.im[t] * s);
    u.im[t] = 2 * (z.re[t] * s + z.im[t] * c);
  }
  const frequencyHz = centre + (omega * z.rateHz) / (2 * Math.PI);
  const stats = estimateEnvelopeStatistics(u, bandFilterEffectOf(sampleRateHz, halfWidth));
  // Periodogram over the flat band, for the Lorentzian route and the second-mode test: computed
  // when the first of them needs it.
  let band: { freq: Float64Array; per: Float64Array } | null = null;
  const periodogram = (): { freq: Float64Array; per: Float64Array } => {
    if (band !== null) return band;
    const binHz = u.rateHz / n;
    const kMax = Math.floor(halfWidth / binHz);
    const spec = dftBand(u.re, u.im, kMax);
    const freq = new Float64Array(2 * kMax + 1);
    const per = new Float64Array(2 * kMax + 1);
    for (let j = 0; j <= 2 * kMax; j++) {
      freq[j] = (j - kMax) * binHz;
      per[j] = (spec.re[j] ** 2 + spec.im[j] ** 2) / (n * u.rateHz);
    }
    band = { freq, per };
    return band;
  };
  const best12 = reconcileRoutes([
    { name: 'amplitude-pdf', est: stats.pdf },
    { name: 'drift-diffusion', est: stats.driftDiffusion },
  ]);
  // A stable mode only (routes 1-2 say so): the Lorentzian is fitted only then. Its width reads the
  // statistically linearised rate −ν + 2κE|u|² (REFERENCES.md §42), so the saturation term from the
  // PDF route is added back, its uncertainty in quadrature.
  const isStable = best12 !== null && best12.est.ci95PerS[1] < 0 && stats.pdf.isValid && stats.pdf.saturationCi95 !== undefined;
  const lor = isStable ? fitLorentzianWhittle(periodogram().freq, periodogram().per) : null;
  let lorentzian: RouteEstimate = invalidRoute(lor?.estimate.reason ?? 'applies to a stable mode only');
  if (lor !== null && lor.estimate.isValid && stats.pdf.saturationCi95 !== undefined) {
    const shift = 2 * stats.pdf.saturation * stats.meanSquare;
    const sdShift = (stats.meanSquare * (stats.pdf.saturationCi95[1] - stats.pdf.saturationCi95[0])) / Z_975;
    const sdLor = (lor.estimate.ci95PerS[1] - lor.estimate.ci95PerS[0]) / (2 * Z_975);
    const nu = -lor.estimate.decayRatePerS + shift;
    const half = Z_975 * Math.hypot(sdLor, sdShift);
    lorentzian = { isValid: true, growthRatePerS: nu, ci95PerS: [nu - half, nu + half], saturation: stats.pdf.saturation, noiseIntensity: stats.pdf.noiseIntensity };
  }
  const routes = { pdf: stats.pdf, driftDiffusion: stats.driftDiffusion, lorentzian };
  const chosen = reconcileRoutes([
    { name: 'amplitude-pdf', est: stats.pdf },
    { name: 'drift-diffusion', est: stats.driftDiffusion },
    { name: 'lorentzian', est: lorentzian },
  ]);
  if (chosen === null) return { ...fail(stats.pdf.reason ?? 'no route gave an estimate'), routes, frequencyHz };
  let reason: string | undefined;
  if (durationS < MODE_STATISTICS_MIN_S) reason = `stretch shorter than ${MODE_STATISTICS_MIN_S} s`;
  else if (opts.isClipped) reason = 'the input clipped: the amplitude distribution is cut';
  else if (hasSecondMode(periodogram().freq, periodogram().per, stats.relaxationRatePerS / (2 * Math.PI))) reason = `a second mode or line within ±${halfWidth.toFixed(0)} Hz`;
  const pdfOrDrift = stats.pdf.isValid ? stats.pdf : stats.driftDiffusion;
  return {
    isValid: true,
    frequencyHz,
    growthRatePerS: chosen.est.growthRatePerS,
    ci95PerS: chosen.est.ci95PerS,
    saturation: Math.max(0, pdfOrDrift.saturation),
    noiseIntensity: pdfOrDrift.noiseIntensity,
    regime: reason === undefined ? regimeFromInterval(chosen.est.ci95PerS) : 'undetermined',
    method: chosen.method,
    reason,
    routes,
    durationS,
  };
}

/**
 * The report entry (types.ts ModeStatistics) for one stretch of steady operation x (at sampleRateHz,
 * spanning startS–endS of the record) around a mode near centreHz: null fields and regime
 * 'undetermined' with the reason when no route gave an estimate.
 */
export function modeStatisticsEntry(
  x: Float32Array,
  sampleRateHz: number,
  p: { centreHz: number; startS: number; endS: number; isClipped: boolean },
): ModeStatistics {
  const r = estimateModeStatistics(x, sampleRateHz, { centreHz: p.centreHz, isClipped: p.isClipped });
  const finite = (v: number): number | null => (Number.isFinite(v) ? v : null);
  const entry: ModeStatistics = {
    frequencyHz: Number.isFinite(r.frequencyHz) ? r.frequencyHz : p.centreHz,
    startS: p.startS,
    endS: p.endS,
    linearGrowthRatePerS: r.isValid ? r.growthRatePerS : null,
    linearGrowthRateCi95PerS: r.isValid && Number.isFinite(r.ci95PerS[0]) && Number.isFinite(r.ci95PerS[1]) ? [r.ci95PerS[0], r.ci95PerS[1]] : null,
    saturation: r.isValid ? finite(r.saturation) : null,
    noiseIntensity: r.isValid ? finite(r.noiseIntensity) : null,
    regime: r.regime,
    method: r.method,
  };
  if (r.reason !== undefined) entry.reason = r.reason;
  return entry;
}
