/**
 * Fits of the tone envelope (DESIGN.md stage 6): exponential growth or decay, and growth into a
 * limit cycle (Stuart–Landau, or a more flexible saturation when the data reject that shape),
 * each with a 95 % interval on the linear rate.
 *
 * Derivation (kept next to the code it justifies)
 * -----------------------------------------------
 * Data. The pipeline demodulates the tone (heterodyne + low-pass, one-sided noise-equivalent
 * bandwidth B = `series.bandwidthHz`) and hands over the mean-square envelope y_i = |z_i|² at
 * times t_i, with z_i = a(t_i)·e^{iφ} + n_i: tone amplitude a(t) plus the band noise n_i, a
 * circular complex Gaussian of power N² = E|n|².
 *
 * Model. E[y_i] = a²(t_i) + N² exactly, whatever the SNR, because the cross term 2a·Re(n) has
 * zero mean. Exponential: a² = P0·exp(2 s (t − t_ref)). Saturation: the Stuart–Landau equation
 * dA/dt = sA − kA³ (Landau 1944; Stuart 1960) integrates to a logistic curve in A²,
 * A² = A∞² / (1 + exp(−2 s (t − t_c))), t_c the time at which A² = A∞²/2 (REFERENCES.md §6). The
 * flexible form dA/dt = sA(1 − (A/A∞)^p) integrates the same way in u = (A/A∞)^p:
 * A² = A∞²·(1 + exp(−p s (t − t_c)))^(−2/p); p = 2 is Stuart–Landau, larger p a sharper knee.
 * In every form s is the small-amplitude (linear) rate: early on A² ∝ exp(2 s t).
 *
 * Noise. y is a scaled noncentral chi-square variable with 2 degrees of freedom, variance
 * Var(y) = 2a²N² + N⁴ = N²(2m − N²), m = E[y]. We use the quasi-likelihood approximation: keep
 * this mean–variance relation, drop the higher moments, and scale it by a dispersion φ fitted
 * from the residuals (φ absorbs any extra smoothing of y by the pipeline and mild model error).
 * The estimating equations Σ (y − m)/V(m)·∂m/∂θ = 0 are solved by iteratively reweighted least
 * squares (weights 1/V(m̂) from the previous iterate), each pass by a grid over the nonlinear
 * parameters with the linear ones (amplitude, background) solved in closed form, then
 * Levenberg–Marquardt polish. Because E[y] = m holds exactly, the fit is not biased by the noise
 * floor, unlike a straight line through ln y, which bends towards the floor (and towards the
 * limit cycle) at the ends of its window.
 *
 * Correlation and N_eff. Neighbouring envelope samples share noise. For complex noise through
 * a low-pass H, the integral of the normalised autocorrelation of n is
 * τ_int = |H(0)|² / ∫|H(f)|² df = 1/(2B) (two-sided integral over f, B one-sided noise-equivalent
 * bandwidth). The term |n|² has correlation |ρ|², whose integral is also 1/(2B) for an ideal
 * low-pass and smaller for smoother ones (so the choice below is conservative there). A record
 * of duration D therefore holds N_eff = 2·B·D independent samples (at most n). When the fit's
 * regressors vary slowly over τ_int, the sandwich covariance of weighted least squares reduces
 * to cov(θ̂) ≈ φ·(JᵀWJ)⁻¹·n/N_eff, and E[RSS] ≈ φ·(n − p·n/N_eff), which fixes φ̂. The interval
 * is s ± t(0.975, N_eff − p)·sd(s), Student-t with N_eff − p degrees of freedom. Its coverage
 * is checked on simulation in tests/dsp/fit.test.ts and by the bench.
 * The band fixes the shortest correlation, not the longest: a noise-driven resonance narrower
 * than the band (the quiet hum of a duct below threshold, which keeps being forced while the tone
 * grows) or a drift the model does not follow keeps the residuals correlated for longer. So n/N_eff
 * is replaced by the residuals' own integrated correlation time when that is longer (Geyer's
 * initial positive sequence estimator, see residualCorrelationTime), N_eff shrinking accordingly.
 *
 * The envelope low-pass itself. The model describes the tone's amplitude, but y is the amplitude
 * after the demodulator's low-pass, which rounds a knee whose time scale 1/(2s) is not long
 * against the filter's response. Measured here on noise-free Stuart–Landau curves through a
 * Blackman FIR of noise bandwidth B (the flexible model absorbs part of the rounding): rate bias
 * −0.4 % at B = 0.7·s, −1.5 % at B = 0.33·s, −7 % at B = 0.17·s. A knee rounded this way also
 * reads as a softer knee (p < 2), so at high SNR the model choice below may switch for that
 * reason; the remedy is an envelope bandwidth of at least the growth rate in hertz.
 */
import type { GridSpec } from './fit-grid';
import { fitIrls, prepare } from './fit-irls';
import { memoised, RESTART_STEPS, ShapeBuffers, UniformPrefix, type ShapeModel, type ShapeValues } from './fit-shape';
import { studentTQuantile } from './stats';
import type { EnvelopeSeries, Interval, RateFit, SaturationFit } from './types';

export { effectiveSampleCount } from './fit-irls';

/** Largest |exponent| for which exp() and its running product stay far from overflow and underflow. */
const MAX_STEPPED_EXPONENT = 600;

/**
 * g = exp(2 s (t − tm)); θ = [s]. On a uniform grid of times g_i = g_0·r^i with r = exp(2 s Δ):
 * one exponential per RESTART_STEPS samples instead of one per sample.
 */
class ExponentialShape implements ShapeModel {
  readonly nNonlinear = 1;
  private readonly tm: number;
  private readonly buffers: ShapeBuffers;
  private readonly prefix = new UniformPrefix();

  constructor(tm: number, capacity: number) {
    this.tm = tm;
    this.buffers = new ShapeBuffers(1, capacity);
  }

  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues {
    const tm = this.tm;
    const v = this.buffers.get(n, withGrad);
    // Locals for the buffers: the loops below then read no property per time.
    const values = v.g;
    const s2 = 2 * theta[0];
    let from = 0;
    const m = this.prefix.of(t, n);
    if (m > 2 && Math.max(Math.abs(s2 * (t[0] - tm)), Math.abs(s2 * (t[m - 1] - tm))) < MAX_STEPPED_EXPONENT) {
      const ratio = Math.exp((s2 * (t[m - 1] - t[0])) / (m - 1));
      // Blocks of RESTART_STEPS samples, each opened by an exact exponential.
      for (let i0 = 0; i0 < m; i0 += RESTART_STEPS) {
        let g = Math.exp(s2 * (t[i0] - tm));
        values[i0] = g;
        const i1 = Math.min(m, i0 + RESTART_STEPS);
        for (let i = i0 + 1; i < i1; i++) {
          g *= ratio;
          values[i] = g;
        }
      }
      from = m;
    }
    for (let i = from; i < n; i++) values[i] = Math.exp(s2 * (t[i] - tm));
    if (withGrad) {
      const grad = v.grad;
      for (let i = 0; i < n; i++) grad[i] = 2 * (t[i] - tm) * values[i];
    }
    return v;
  }
}

/** The exponential shape about tm, with a memory of its last evaluation; buffers for `capacity` times (ShapeBuffers). */
function exponentialShape(tm: number, capacity: number): ShapeModel {
  return memoised(new ExponentialShape(tm, capacity));
}

export function invalidRateFit(reason: string, refTimeS: number, nEffective: number): RateFit {
  return {
    isValid: false,
    ratePerS: Number.NaN,
    ci95PerS: [Number.NaN, Number.NaN],
    amplitudeAtRef: Number.NaN,
    refTimeS,
    backgroundPower: Number.NaN,
    nEffective,
    reason,
  };
}

/** Rates whose e-folding covers more than this many times the record are outside what the record can tell. */
const MAX_RATE_TIMES_SPAN = 150;

/** Points of the exponential's rate grid. */
const RATE_GRID_POINTS = 241;

/** s·span = ±(e^v − 1) for v evenly spaced, dense near 0, up to ±MAX_RATE_TIMES_SPAN: the rate grid times the span, the same for every fit. */
const RATE_GRID_TIMES_SPAN = ((count: number): Float64Array => {
  const out = new Float64Array(count);
  const vMax = Math.log(MAX_RATE_TIMES_SPAN + 1);
  for (let j = 0; j < count; j++) {
    const v = -vMax + (2 * vMax * j) / (count - 1);
    out[j] = Math.sign(v) * (Math.exp(Math.abs(v)) - 1);
  }
  return out;
})(RATE_GRID_POINTS);

/** Rate grid of a record spanning spanS, 1/s. */
function rateGrid(spanS: number): Float64Array {
  const out = new Float64Array(RATE_GRID_POINTS);
  for (let j = 0; j < RATE_GRID_POINTS; j++) out[j] = RATE_GRID_TIMES_SPAN[j] / spanS;
  return out;
}

/**
 * Fits A²(t) = P0·exp(2 s (t − ref)) + N² to the envelope power by quasi-likelihood (see the
 * header of this file): s in 1/s (positive grows), P0 = A² at ref, N² the background power in the
 * band, fixed when `backgroundPower` is given and fitted (≥ 0) otherwise. The 95 % interval on s
 * is Student-t with N_eff − p degrees of freedom, N_eff = 2·bandwidthHz·duration.
 * `refTimeS` defaults to the first sample time.
 */
export function fitExponential(series: EnvelopeSeries, opts?: { backgroundPower?: number; refTimeS?: number }): RateFit {
  const refTimeS = opts?.refTimeS ?? (series.timeS.length > 0 ? series.timeS[0] : 0);
  const d = prepare(series);
  if (typeof d === 'string') return invalidRateFit(d, refTimeS, 0);
  const fixedBg = opts?.backgroundPower ?? null;
  if (fixedBg !== null && !(fixedBg >= 0)) return invalidRateFit('backgroundPower must be ≥ 0', refTimeS, d.nEff);
  const nParams = fixedBg === null ? 3 : 2;
  if (d.nEff - nParams < 1) return invalidRateFit(`record too short for the envelope bandwidth (N_eff = ${d.nEff.toFixed(1)})`, refTimeS, d.nEff);
  const t0 = d.t[0];
  const spanS = d.t[d.n - 1] - t0;
  const tm = t0 + spanS / 2;
  const model = exponentialShape(tm, d.n);
  const grid: GridSpec = { values: [rateGrid(spanS)] };
  const fit = fitIrls(d, model, grid, fixedBg, null);
  if (fit === null) return invalidRateFit('no tone above the background', refTimeS, d.nEff);
  const s = fit.state.params[1];
  const p0Mid = Math.exp(fit.state.params[0]);
  const bg = fit.state.params[2];
  if (Math.abs(s) * spanS >= MAX_RATE_TIMES_SPAN * 0.999) return invalidRateFit('rate outside the range the record can resolve', refTimeS, d.nEff);
  if (fit.cov === null) return invalidRateFit('fit covariance is singular', refTimeS, d.nEff);
  const sdRate = Math.sqrt(fit.cov[1 * fit.nFree + 1]);
  const q = studentTQuantile(0.975, Math.max(1, fit.nEff - fit.nFree));
  const ci: Interval = [s - q * sdRate, s + q * sdRate];
  return {
    isValid: Number.isFinite(sdRate),
    ratePerS: s,
    ci95PerS: ci,
    amplitudeAtRef: Math.sqrt(p0Mid * Math.exp(2 * s * (refTimeS - tm))),
    refTimeS,
    backgroundPower: bg,
    nEffective: fit.nEff,
    ...(Number.isFinite(sdRate) ? {} : { reason: 'rate variance undefined' }),
  };
}

/**
 * Time (s) at which a fitted growth curve meets the background: A²(t) = N² (the onset of
 * DESIGN.md). Exponential fit: t = ref + ln(N²/A_ref²)/(2 s). Stuart–Landau fit, exactly on the
 * logistic: from A² = A∞²/(1 + e^{−2s(t − tc)}) at ref and at the crossing,
 * t = ref − ln((A∞²/N² − 1)/(A∞²/A_ref² − 1))/(2 s). Generalised saturation: its early part is
 * A² ≈ A∞²·e^{2s(t − tc)}, so the exponential form applies where the background lies well below
 * the limit cycle. NaN when there is no background, no growth, or the background is above A∞².
 */
export function backgroundCrossingTimeS(fit: RateFit | SaturationFit): number {
  if (!fit.isValid || !(fit.ratePerS > 0) || !(fit.backgroundPower > 0) || !(fit.amplitudeAtRef > 0)) return Number.NaN;
  const refPower = fit.amplitudeAtRef * fit.amplitudeAtRef;
  if ('model' in fit && fit.model === 'stuart-landau') {
    const limitPower = fit.limitAmplitude * fit.limitAmplitude;
    if (!(limitPower > fit.backgroundPower) || !(limitPower > refPower)) return Number.NaN;
    return fit.refTimeS - Math.log((limitPower / fit.backgroundPower - 1) / (limitPower / refPower - 1)) / (2 * fit.ratePerS);
  }
  return fit.refTimeS + Math.log(fit.backgroundPower / refPower) / (2 * fit.ratePerS);
}

/**
 * Naive straight line through ln A = ½ ln y against t (ordinary least squares), returning the
 * slope in 1/s. Common practice, kept only as the baseline the tests show to be biased when
 * the window runs into the noise floor or into saturation; not used by the pipeline.
 */
export function fitLogLine(series: EnvelopeSeries): number {
  const n = series.timeS.length;
  let st = 0;
  let sl = 0;
  let stt = 0;
  let stl = 0;
  let m = 0;
  for (let i = 0; i < n; i++) {
    if (!(series.power[i] > 0)) continue;
    const t = series.timeS[i];
    const l = 0.5 * Math.log(series.power[i]);
    st += t;
    sl += l;
    stt += t * t;
    stl += t * l;
    m++;
  }
  return (m * stl - st * sl) / (m * stt - st * st);
}
