/**
 * Damping of a stable mode excited by its own noise (DESIGN.md stage 7, REFERENCES.md §7): the
 * decay rate α of x'' + 2αx' + ω0²x = ξ from a quiet record, by two estimators with 95 % intervals.
 *
 * 1. Narrow band first. x (possibly 120 s at 8–48 kHz) is mixed down by centreHz to a complex
 *    baseband z at about 8 × the search half-width (baseband.ts mixDownDecimate).
 * 2. Lorentzian + floor by Whittle likelihood. Near the peak the spectrum of z is
 *    S(f) = C/((f − f0)² + γ²) + B with γ = α/2π (half-power full width α/π). The periodogram
 *    ordinates I_k at the Fourier frequencies of the whole record are nearly independent, each
 *    S(f_k)·Exp(1) for complex data, so −ln L = Σ ln S_k + I_k/S_k (Whittle 1953, "Estimation
 *    and information in stationary time series", Ark. Mat. 2). It is minimised by Fisher scoring
 *    over (ln C, f0, ln γ, ln B) on the bins within the search band; the interval on α comes from
 *    the inverse Fisher information of ln γ, normal quantile (asymptotic likelihood theory),
 *    mapped through exp so it stays positive. REFERENCES.md §7 shows this fit nearly unbiased
 *    with a spread close to √(α/T).
 * 3. Autocorrelation envelope. For the band-passed analytic signal |R(τ)| ∝ e^{−α|τ|}; the slope
 *    of ln|R(τ)| over a lag window (from about one band-pass response time, over 1.5 e-folds)
 *    gives α; each lag is normalised by its number of products. Its interval is a delete-one-segment jackknife (Efron & Stein 1981, "The
 *    jackknife estimate of variance", Ann. Stat. 9(3)): the lag products are sums over segments,
 *    α is a smooth function of these sums, so dropping one segment at a time gives replicates
 *    whose spread estimates the variance; Student-t with K − 1 degrees of freedom.
 * 4. Combined. The Whittle estimate is asymptotically efficient (it reaches the information
 *    bound). For an efficient unbiased estimator T1 and any other unbiased T2 of the same
 *    quantity, cov(T1, T2) = var(T1), so the minimum-variance linear combination puts all the
 *    weight on T1: averaging with the autocorrelation estimate (same data, strongly correlated)
 *    cannot narrow the interval, and an inverse-variance average that assumed independence would
 *    understate it. `combined` is therefore the Lorentzian estimate, or the autocorrelation one
 *    when the Lorentzian fit fails.
 */
import { dftBand, fftInPlace, mixDownDecimate, nextPow2, type Baseband } from './baseband';
import { invertSmallMatrix, studentTQuantile, Z_975 } from './stats';
import type { DecayEstimate } from './types';

/** Result of estimateNoiseDrivenDamping: peak frequency and the decay rate by each estimator. */
export interface NoiseDrivenDamping {
  /** Frequency of the resonance peak, Hz. */
  frequencyHz: number;
  lorentzian: DecayEstimate;
  autocorrelation: DecayEstimate;
  combined: DecayEstimate;
}

/**
 * Mean-square envelope E[A²] = G/(2 ω0² α) of a stable mode x'' + 2αx' + ω0²x = ξ driven by white
 * noise of intensity G (⟨ξ(t)ξ(t+τ)⟩ = G δ(τ)); var(x) is half of it (REFERENCES.md §7(c)).
 */
export function noiseDrivenMeanSquare(p: { forcingIntensity: number; frequencyHz: number; decayRatePerS: number }): number {
  const w0 = 2 * Math.PI * p.frequencyHz;
  return p.forcingIntensity / (2 * w0 * w0 * p.decayRatePerS);
}

function invalid(reason: string): DecayEstimate {
  return { isValid: false, decayRatePerS: Number.NaN, ci95PerS: [Number.NaN, Number.NaN], reason };
}

/** Result of the Whittle fit of a Lorentzian + floor. */
export interface LorentzianFit {
  estimate: DecayEstimate;
  /** Peak position relative to the band centre, Hz. */
  offsetHz: number;
  /** Fitted floor and peak spectral density (same unit as the periodogram). */
  floorDensity: number;
  peakDensity: number;
}

/**
 * Least decrease of the Whittle negative log-likelihood worth another scoring step. A parameter
 * left this far from the optimum moves the likelihood by 1e-10, i.e. it lies within
 * √(2·1e-10) ≈ 1.4e-5 standard deviations of it (the likelihood's curvature is the Fisher
 * information).
 */
const WHITTLE_MIN_GAIN = 1e-10;
/**
 * The looser tolerance each start of the multi-start is run to before the best is taken on: starts
 * that reach the same optimum then stand within about this much of its likelihood, and optima whose
 * likelihoods differ by less are not told apart by the data (a likelihood ratio of e^0.001).
 */
const WHITTLE_START_GAIN = 1e-3;
/** Scoring iterations allowed per start. */
const WHITTLE_MAX_ITERATIONS = 200;

/** One start of the Whittle fit's multi-start: its parameters, negative log-likelihood, iterations left, and whether it stopped where going on cannot help. */
interface ScoringRun {
  th: Float64Array;
  nll: number;
  iterationsLeft: number;
  isStuck: boolean;
}

/**
 * The Whittle negative log-likelihood of S(f) = C/((f − f0)² + γ²) + B over θ = (ln C, f0, ln γ,
 * ln B), and its score and Fisher information (written into `score` and `fisher`, row-major 4×4).
 */
interface WhittleObjective {
  nll(th: Float64Array): number;
  scoreAndFisher(th: Float64Array): void;
  score: Float64Array;
  fisher: Float64Array;
}

function whittleObjective(freqHz: Float64Array, periodogram: Float64Array): WhittleObjective {
  const n = freqHz.length;
  const fisher = new Float64Array(16);
  const score = new Float64Array(4);
  const dl = new Float64Array(4);
  return {
    score,
    fisher,
    nll(th) {
      const c = Math.exp(th[0]);
      const g2 = Math.exp(2 * th[2]);
      const b = Math.exp(th[3]);
      let v = 0;
      for (let k = 0; k < n; k++) {
        const df = freqHz[k] - th[1];
        const s = c / (df * df + g2) + b;
        v += Math.log(s) + periodogram[k] / s;
      }
      return v;
    },
    scoreAndFisher(th) {
      const c = Math.exp(th[0]);
      const g2 = Math.exp(2 * th[2]);
      const b = Math.exp(th[3]);
      fisher.fill(0);
      score.fill(0);
      for (let k = 0; k < n; k++) {
        const df = freqHz[k] - th[1];
        const den = df * df + g2;
        const lor = c / den;
        const s = lor + b;
        dl[0] = lor / s;
        dl[1] = (lor * 2 * df) / den / s;
        dl[2] = (-lor * 2 * g2) / den / s;
        dl[3] = b / s;
        const u = periodogram[k] / s - 1;
        // The information is symmetric: accumulate its upper triangle (same products, same order).
        for (let a = 0; a < 4; a++) {
          score[a] += u * dl[a];
          for (let e = a; e < 4; e++) fisher[a * 4 + e] += dl[a] * dl[e];
        }
      }
      for (let a = 1; a < 4; a++) for (let e = 0; e < a; e++) fisher[a * 4 + e] = fisher[e * 4 + a];
    },
  };
}

/**
 * Fisher scoring with step halving from run.th until a scoring step promises less than minGain
 * (its quadratic model: half the score along the step; NaN stops too), a line search gains less
 * than WHITTLE_MIN_GAIN, the information is singular or WHITTLE_MAX_ITERATIONS run out; the last
 * three leave the run stuck (going on cannot help). `step` and `trial` are work arrays of 4.
 */
function descend(obj: WhittleObjective, run: ScoringRun, minGain: number, step: Float64Array, trial: Float64Array): void {
  const th = run.th;
  const score = obj.score;
  while (run.iterationsLeft > 0) {
    run.iterationsLeft--;
    obj.scoreAndFisher(th);
    const inv = invertSmallMatrix(obj.fisher, 4);
    if (inv === null) break;
    step.fill(0);
    for (let a = 0; a < 4; a++) for (let e = 0; e < 4; e++) step[a] += inv[a * 4 + e] * score[e];
    let promised = 0;
    for (let a = 0; a < 4; a++) promised += 0.5 * score[a] * step[a];
    if (!(promised > minGain)) {
      // Converged to minGain; the iteration is redone if the run goes on.
      run.iterationsLeft++;
      return;
    }
    let t = 1;
    let isAccepted = false;
    for (let h = 0; h < 30; h++) {
      let isSame = true;
      for (let a = 0; a < 4; a++) {
        trial[a] = th[a] + t * step[a];
        if (trial[a] !== th[a]) isSame = false;
      }
      // A step lost below the parameters' rounding leaves them (and their likelihood) as they are.
      const v = isSame ? run.nll : obj.nll(trial);
      if (v <= run.nll) {
        const gain = run.nll - v;
        th.set(trial);
        run.nll = v;
        isAccepted = gain > WHITTLE_MIN_GAIN;
        break;
      }
      t /= 2;
    }
    if (!isAccepted) break;
  }
  run.isStuck = true;
}

/**
 * Starting values of the Whittle fit: the peak of the periodogram smoothed by a running mean over
 * ~0.5 Hz (at least 3 bins), its bin, and the floor from the median ordinate.
 */
function whittleStart(freqHz: Float64Array, periodogram: Float64Array): { kPeak: number; floor0: number; peak0: number } {
  const n = freqHz.length;
  const binHz = Math.abs(freqHz[1] - freqHz[0]);
  const half = Math.max(1, Math.round(0.25 / binHz));
  const smooth = new Float64Array(n);
  let kPeak = 0;
  for (let k = 0; k < n; k++) {
    let s = 0;
    let c = 0;
    for (let j = Math.max(0, k - half); j <= Math.min(n - 1, k + half); j++) {
      s += periodogram[j];
      c++;
    }
    smooth[k] = s / c;
    if (smooth[k] > smooth[kPeak]) kPeak = k;
  }
  const sorted = Float64Array.from(periodogram).sort();
  // The median of an Exp(1) variable is ln 2 times its mean.
  const floor0 = Math.max(sorted[Math.floor(n / 2)] / Math.LN2, 1e-300);
  return { kPeak, floor0, peak0: smooth[kPeak] };
}

/**
 * Whittle (1953) likelihood fit of S(f) = C/((f − f0)² + γ²) + B to periodogram ordinates
 * `periodogram` at frequencies `freqHz` (complex data: each ordinate ~ S·Exp(1)); α = 2πγ in 1/s
 * with a 95 % interval from the inverse Fisher information (normal quantile, log scale).
 */
export function fitLorentzianWhittle(freqHz: Float64Array, periodogram: Float64Array): LorentzianFit {
  const n = freqHz.length;
  const fail = (reason: string): LorentzianFit => ({ estimate: invalid(reason), offsetHz: Number.NaN, floorDensity: Number.NaN, peakDensity: Number.NaN });
  if (n < 16) return fail('too few spectral bins in the search band (record too short)');
  const binHz = Math.abs(freqHz[1] - freqHz[0]);
  const { kPeak, floor0, peak0 } = whittleStart(freqHz, periodogram);
  const obj = whittleObjective(freqHz, periodogram);
  const step = new Float64Array(4);
  const trial = new Float64Array(4);
  // Multi-start over the half-width, each run to a loose tolerance; the best is then taken on to
  // the full one (the runs that share its optimum would only have matched it).
  let best: ScoringRun | null = null;
  for (const gammaHz of [0.05, 0.3, 1, 3, 8]) {
    if (gammaHz < binHz / 4) continue;
    const th = Float64Array.of(Math.log(Math.max(peak0 - floor0, peak0 * 0.5) * gammaHz * gammaHz), freqHz[kPeak], Math.log(gammaHz), Math.log(floor0));
    const run: ScoringRun = { th, nll: obj.nll(th), iterationsLeft: WHITTLE_MAX_ITERATIONS, isStuck: false };
    descend(obj, run, WHITTLE_START_GAIN, step, trial);
    if (Number.isFinite(run.nll) && (best === null || run.nll < best.nll)) best = run;
  }
  if (best !== null && !best.isStuck) descend(obj, best, WHITTLE_MIN_GAIN, step, trial);
  if (best === null) return fail("Lorentzian fit did not converge");
  return lorentzianResult(obj, best.th, freqHz);
}

/** The fit at its optimum θ: the decay rate α = 2πγ with its interval, or why there is none. */
function lorentzianResult(obj: WhittleObjective, th: Float64Array, freqHz: Float64Array): LorentzianFit {
  const n = freqHz.length;
  obj.scoreAndFisher(th);
  const fisher = obj.fisher;
  // A floor far below the Lorentzian tails carries less than one bin's worth of information
  // (Σ (B/S)² < 1): it is not identified, so treat it as zero and invert the other three.
  const isFloorIdentified = fisher[15] >= 1;
  const cov = isFloorIdentified ? invertSmallMatrix(fisher, 4) : invertSmallMatrix(leadingBlock(fisher, 4, 3), 3);
  const alpha = 2 * Math.PI * Math.exp(th[2]);
  const f0 = th[1];
  const span = Math.abs(freqHz[n - 1] - freqHz[0]);
  const lo = Math.min(freqHz[0], freqHz[n - 1]);
  const result = {
    offsetHz: f0,
    floorDensity: isFloorIdentified ? Math.exp(th[3]) : 0,
    peakDensity: Math.exp(th[0] - 2 * th[2]) + Math.exp(th[3]),
  };
  const varLogGamma = cov === null ? Number.NaN : isFloorIdentified ? cov[10] : cov[8];
  if (!(varLogGamma > 0)) return { ...result, estimate: invalid('Lorentzian fit information is singular') };
  if (f0 < lo + 0.1 * span || f0 > lo + 0.9 * span) return { ...result, estimate: invalid('spectral peak at the edge of the search band') };
  if (alpha / Math.PI > 0.5 * span) return { ...result, estimate: invalid('peak wider than the search band; widen searchHalfWidthHz') };
  const sdLog = Math.sqrt(varLogGamma);
  return {
    ...result,
    estimate: { isValid: true, decayRatePerS: alpha, ci95PerS: [alpha * Math.exp(-Z_975 * sdLog), alpha * Math.exp(Z_975 * sdLog)] },
  };
}

/** The leading k×k block of a row-major size×size matrix. */
function leadingBlock(m: Float64Array, size: number, k: number): Float64Array {
  const out = new Float64Array(k * k);
  for (let r = 0; r < k; r++) for (let c = 0; c < k; c++) out[r * k + c] = m[r * size + c];
  return out;
}

/** Least-squares slope of ln|R| against lag over [from, to] (lag indices), from lagged-product sums. */
function acfSlopePerLag(rr: Float64Array, ri: Float64Array, from: number, to: number): number {
  let st = 0;
  let sl = 0;
  let stt = 0;
  let stl = 0;
  const m = to - from + 1;
  for (let k = from; k <= to; k++) {
    const l = 0.5 * Math.log(rr[k] * rr[k] + ri[k] * ri[k]);
    st += k;
    sl += l;
    stt += k * k;
    stl += k * l;
  }
  return (m * stl - st * sl) / (m * stt - st * st);
}

/**
 * Decay rate from the autocorrelation envelope of the baseband z (complex, at rateHz):
 * band-pass with a Hann-tapered mask of half-width 2·halfWidthHz around the peak offset, lag
 * window from 0.4/halfWidthHz (where the mask's response has mostly died; checked unbiased on
 * simulation in tests/dsp/damping.test.ts) over 1.5 e-folds of |R|, slope of
 * ln|R|; 95 % interval by delete-one-segment jackknife, Student-t with K − 1 degrees of freedom.
 */
export function decayFromAutocorrelation(z: Baseband, offsetHz: number, halfWidthHz: number): DecayEstimate {
  const n = z.re.length;
  const fs = z.rateHz;
  const m = nextPow2(2 * n);
  const ar = new Float64Array(m);
  const ai = new Float64Array(m);
  ar.set(z.re);
  ai.set(z.im);
  fftInPlace(ar, ai, -1);
  const maskHalfHz = 2 * halfWidthHz;
  for (let k = 0; k < m; k++) {
    const f = (k < m / 2 ? k : k - m) * (fs / m);
    const d = Math.abs(f - offsetHz);
    const g = d < maskHalfHz ? 0.5 + 0.5 * Math.cos((Math.PI * d) / maskHalfHz) : 0;
    ar[k] *= g;
    ai[k] *= g;
  }
  fftInPlace(ar, ai, 1);
  // Band-passed signal (the padding half carries filter tails only; keep the record span).
  const br = new Float64Array(n);
  const bi = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    br[k] = ar[k] / m;
    bi[k] = ai[k] / m;
  }
  // Whole-record autocorrelation by FFT, to choose the lag window.
  ar.fill(0);
  ai.fill(0);
  ar.set(br);
  ai.set(bi);
  fftInPlace(ar, ai, -1);
  for (let k = 0; k < m; k++) {
    ar[k] = ar[k] * ar[k] + ai[k] * ai[k];
    ai[k] = 0;
  }
  fftInPlace(ar, ai, 1);
  const lagMin = Math.max(2, Math.ceil(fs / (2.5 * halfWidthHz)));
  const maxLag = Math.floor(n / 4);
  if (lagMin + 4 >= maxLag) return invalid('record too short for the autocorrelation estimate');
  const magAt = (k: number): number => Math.hypot(ar[k], ai[k]);
  // The window ends 1.5 e-folds past lagMin, placed from the first e^-1 crossing (ending it at a
  // crossing itself would favour windows where noise happens to dip, biasing α upwards).
  const target = magAt(lagMin) * Math.exp(-1);
  let lagE1 = -1;
  for (let k = lagMin + 1; k <= maxLag; k++) {
    if (magAt(k) < target) {
      lagE1 = k;
      break;
    }
  }
  const lagMax = lagE1 < 0 ? -1 : lagMin + Math.round(1.5 * (lagE1 - lagMin));
  if (lagMax < 0 || lagMax > maxLag) return invalid('autocorrelation does not decay within a quarter of the record');
  if (lagMax - lagMin < 4) return invalid('decay too fast for the search band; widen searchHalfWidthHz');
  // Lagged products per segment, for the jackknife.
  const segments = Math.min(20, Math.floor(n / (5 * lagMax)));
  if (segments < 5) return invalid('record too short for an autocorrelation interval (needs 25 × the lag window)');
  const lags = lagMax + 1;
  const segR = new Float64Array(segments * lags);
  const segI = new Float64Array(segments * lags);
  // Number of products per lag: sums are divided by it (each segment loses k pairs at lag k,
  // which would otherwise tilt ln|R| by about −K/T per second and bias α upwards).
  const segN = new Float64Array(segments * lags);
  const segLen = Math.floor(n / segments);
  for (let s = 0; s < segments; s++) {
    const a = s * segLen;
    const b = s === segments - 1 ? n : a + segLen;
    for (let k = 0; k < lags; k++) {
      let sr = 0;
      let si = 0;
      for (let i = a; i + k < b; i++) {
        // z[i + k] · conj(z[i])
        sr += br[i + k] * br[i] + bi[i + k] * bi[i];
        si += bi[i + k] * br[i] - br[i + k] * bi[i];
      }
      segR[s * lags + k] = sr;
      segI[s * lags + k] = si;
      segN[s * lags + k] = Math.max(0, b - a - k);
    }
  }
  const totR = new Float64Array(lags);
  const totI = new Float64Array(lags);
  const totN = new Float64Array(lags);
  for (let s = 0; s < segments; s++) {
    for (let k = 0; k < lags; k++) {
      totR[k] += segR[s * lags + k];
      totI[k] += segI[s * lags + k];
      totN[k] += segN[s * lags + k];
    }
  }
  const meanR = new Float64Array(lags);
  const meanI = new Float64Array(lags);
  for (let k = 0; k < lags; k++) {
    meanR[k] = totR[k] / totN[k];
    meanI[k] = totI[k] / totN[k];
  }
  const alpha = -acfSlopePerLag(meanR, meanI, lagMin, lagMax) * fs;
  const repR = new Float64Array(lags);
  const repI = new Float64Array(lags);
  const reps = new Float64Array(segments);
  let mean = 0;
  for (let s = 0; s < segments; s++) {
    for (let k = 0; k < lags; k++) {
      const count = totN[k] - segN[s * lags + k];
      repR[k] = (totR[k] - segR[s * lags + k]) / count;
      repI[k] = (totI[k] - segI[s * lags + k]) / count;
    }
    reps[s] = -acfSlopePerLag(repR, repI, lagMin, lagMax) * fs;
    mean += reps[s] / segments;
  }
  let ss = 0;
  for (let s = 0; s < segments; s++) ss += (reps[s] - mean) ** 2;
  const sd = Math.sqrt(((segments - 1) / segments) * ss);
  if (!(alpha > 0) || !Number.isFinite(sd)) return invalid('autocorrelation envelope does not decay');
  const q = studentTQuantile(0.975, segments - 1);
  return { isValid: true, decayRatePerS: alpha, ci95PerS: [alpha - q * sd, alpha + q * sd] };
}

/**
 * Decay rate α (1/s, positive) of a stable resonance near centreHz excited by broadband noise,
 * from a quiet record x at sampleRateHz: Whittle Lorentzian fit to the periodogram and the
 * autocorrelation envelope, each with a 95 % interval, and their combination (the Lorentzian
 * estimate; see the header for why). `searchHalfWidthHz` (default 20 Hz) bounds the band
 * around centreHz that holds the peak; it must exceed a few half-power widths α/π.
 */
export function estimateNoiseDrivenDamping(
  x: Float32Array,
  sampleRateHz: number,
  opts: { centreHz: number; searchHalfWidthHz?: number },
): NoiseDrivenDamping {
  const halfWidthHz = opts.searchHalfWidthHz ?? 20;
  const failAll = (reason: string): NoiseDrivenDamping => ({
    frequencyHz: Number.NaN,
    lorentzian: invalid(reason),
    autocorrelation: invalid(reason),
    combined: invalid(reason),
  });
  if (!(sampleRateHz > 0)) return failAll('sample rate must be positive');
  if (!(halfWidthHz > 0)) return failAll('searchHalfWidthHz must be positive');
  if (!(opts.centreHz - halfWidthHz > 0) || !(opts.centreHz + halfWidthHz < sampleRateHz / 2)) {
    return failAll('search band must lie between 0 Hz and half the sample rate');
  }
  const z = mixDownDecimate(x, sampleRateHz, opts.centreHz, halfWidthHz);
  const n = z.re.length;
  if (n < 64) return failAll('record too short');
  const binHz = z.rateHz / n;
  const kMax = Math.floor(halfWidthHz / binHz);
  const spec = dftBand(z.re, z.im, kMax);
  const count = 2 * kMax + 1;
  const freqHz = new Float64Array(count);
  const periodogram = new Float64Array(count);
  const norm = 1 / (n * z.rateHz);
  for (let j = 0; j < count; j++) {
    freqHz[j] = (j - kMax) * binHz;
    periodogram[j] = (spec.re[j] * spec.re[j] + spec.im[j] * spec.im[j]) * norm;
  }
  const lor = fitLorentzianWhittle(freqHz, periodogram);
  let offsetHz = lor.offsetHz;
  if (!Number.isFinite(offsetHz)) {
    let kPeak = 0;
    for (let j = 1; j < count; j++) if (periodogram[j] > periodogram[kPeak]) kPeak = j;
    offsetHz = freqHz[kPeak];
  }
  const acf = decayFromAutocorrelation(z, offsetHz, halfWidthHz);
  const combined = lor.estimate.isValid ? lor.estimate : acf;
  return { frequencyHz: opts.centreHz + offsetHz, lorentzian: lor.estimate, autocorrelation: acf, combined };
}
