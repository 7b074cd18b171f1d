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
import type { EnvelopeSeries, Interval, RateFit, SaturationFit } from './types';

/** Standard normal 0.975 quantile (Abramowitz & Stegun 1964, Table 26.5). */
export const Z_975 = 1.959963984540054;

/** 0.99 quantile of the chi-square distribution with 1 degree of freedom (= 2.5758²; A&S Table 26.8). */
export const CHI2_1DOF_99 = 6.634896601021214;

// ---------------------------------------------------------------------------------------------
// Small statistics helpers (exported for the damping estimators and the bench)

/** Coefficients of the Lanczos approximation, g = 7, 9 terms. */
const LANCZOS = [
  0.99999999999980993, 676.5203681218851, -1259.1392167224028, 771.32342877765313, -176.61502916214059,
  12.507343278686905, -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7,
];

/** Natural log of the gamma function, x > 0 (Lanczos 1964 approximation, g = 7, 9 terms). */
export function logGamma(x: number): number {
  const c = LANCZOS;
  if (x < 0.5) return Math.log(Math.PI / Math.abs(Math.sin(Math.PI * x))) - logGamma(1 - x);
  const xx = x - 1;
  let a = c[0];
  const t = xx + 7.5;
  for (let i = 1; i < 9; i++) a += c[i] / (xx + i);
  return 0.5 * Math.log(2 * Math.PI) + (xx + 0.5) * Math.log(t) - t + Math.log(a);
}

/** Continued fraction of the incomplete beta function (modified Lentz; Press et al. 2007, Numerical Recipes 3rd ed., §6.4). */
function betaContinuedFraction(a: number, b: number, x: number): number {
  const tiny = 1e-300;
  let c = 1;
  let d = 1 - ((a + b) * x) / (a + 1);
  if (Math.abs(d) < tiny) d = tiny;
  d = 1 / d;
  let h = d;
  for (let m = 1; m <= 300; m++) {
    const m2 = 2 * m;
    let aa = (m * (b - m) * x) / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = (-(a + m) * (a + b + m) * x) / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d;
    if (Math.abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (Math.abs(c) < tiny) c = tiny;
    d = 1 / d;
    const del = d * c;
    h *= del;
    if (Math.abs(del - 1) < 1e-15) break;
  }
  return h;
}

/** Regularised incomplete beta I_x(a, b), 0 ≤ x ≤ 1 (Press et al. 2007, Numerical Recipes, §6.4). */
export function incompleteBeta(x: number, a: number, b: number): number {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const lnFront = logGamma(a + b) - logGamma(a) - logGamma(b) + a * Math.log(x) + b * Math.log(1 - x);
  if (x < (a + 1) / (a + b + 2)) return (Math.exp(lnFront) * betaContinuedFraction(a, b, x)) / a;
  return 1 - (Math.exp(lnFront) * betaContinuedFraction(b, a, 1 - x)) / b;
}

/** Student-t cumulative distribution P(T ≤ t) for ν > 0 degrees of freedom (A&S 1964, 26.7.1 via 26.5.27). */
export function studentTCdf(t: number, dof: number): number {
  const tail = 0.5 * incompleteBeta(dof / (dof + t * t), dof / 2, 0.5);
  return t >= 0 ? 1 - tail : tail;
}

/**
 * Quantile of the Student-t distribution (p in (0.5, 1)), ν > 0 (real ν allowed): Newton's method
 * on the CDF with the density f(t) = Γ((ν+1)/2)/(√(νπ) Γ(ν/2))·(1 + t²/ν)^(−(ν+1)/2) (A&S 1964,
 * 26.7.1), kept inside a bracket that bisection narrows whenever a Newton step would leave it.
 */
export function studentTQuantile(p: number, dof: number): number {
  if (!(dof > 0)) return Number.NaN;
  let lo = 0;
  let hi = 1;
  while (studentTCdf(hi, dof) < p && hi < 1e12) hi *= 2;
  const logNorm = logGamma((dof + 1) / 2) - logGamma(dof / 2) - 0.5 * Math.log(dof * Math.PI);
  let t = 0.5 * (lo + hi);
  for (let i = 0; i < 200; i++) {
    const excess = studentTCdf(t, dof) - p;
    if (excess === 0) return t;
    if (excess < 0) lo = t;
    else hi = t;
    const density = Math.exp(logNorm - ((dof + 1) / 2) * Math.log1p((t * t) / dof));
    let next = t - excess / density;
    if (!(next > lo && next < hi)) next = 0.5 * (lo + hi);
    if (Math.abs(next - t) <= 1e-14 * next || hi - lo <= 1e-14 * hi) return next;
    t = next;
  }
  return t;
}

/** Inverts a small symmetric positive-definite matrix (row-major, size k) by Gauss–Jordan with pivoting; null if singular. */
export function invertSmallMatrix(m: Float64Array, k: number): Float64Array | null {
  const a = Float64Array.from(m);
  const inv = new Float64Array(k * k);
  for (let i = 0; i < k; i++) inv[i * k + i] = 1;
  for (let col = 0; col < k; col++) {
    let piv = col;
    for (let r = col + 1; r < k; r++) if (Math.abs(a[r * k + col]) > Math.abs(a[piv * k + col])) piv = r;
    const pv = a[piv * k + col];
    if (!(Math.abs(pv) > 0) || !Number.isFinite(pv)) return null;
    if (piv !== col) {
      for (let j = 0; j < k; j++) {
        let tmp = a[col * k + j];
        a[col * k + j] = a[piv * k + j];
        a[piv * k + j] = tmp;
        tmp = inv[col * k + j];
        inv[col * k + j] = inv[piv * k + j];
        inv[piv * k + j] = tmp;
      }
    }
    for (let j = 0; j < k; j++) {
      a[col * k + j] /= pv;
      inv[col * k + j] /= pv;
    }
    for (let r = 0; r < k; r++) {
      if (r === col) continue;
      const f = a[r * k + col];
      if (f === 0) continue;
      for (let j = 0; j < k; j++) {
        a[r * k + j] -= f * a[col * k + j];
        inv[r * k + j] -= f * inv[col * k + j];
      }
    }
  }
  return inv;
}

/**
 * Effective number of independent envelope samples: N_eff = min(n, 2·B·D), B the one-sided
 * noise-equivalent bandwidth of the envelope low-pass (Hz), D = n·Δt the span the n samples
 * cover (s). Derivation in the header of this file.
 */
export function effectiveSampleCount(n: number, sampleSpacingS: number, bandwidthHz: number): number {
  return Math.min(n, 2 * bandwidthHz * n * sampleSpacingS);
}

// ---------------------------------------------------------------------------------------------
// The envelope models (mean of y) with analytic gradients

/**
 * A model of the tone's mean-square envelope without background: value and gradient with respect
 * to the nonlinear parameters, times the amplitude parameter. The background N² enters linearly.
 * Each model evaluates a whole series in one loop of its own (no call per sample).
 */
interface ShapeModel {
  /** Number of nonlinear parameters (after ln L). */
  nNonlinear: number;
  /**
   * Unit-amplitude shape g at the first n times of `t` and, when asked, ∂g/∂θ_j at index
   * i·nNonlinear + j: buffers owned by the model, valid until its next evaluation.
   */
  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues;
}

interface ShapeValues {
  g: Float64Array;
  grad: Float64Array;
}

/** Output buffers of a model's evaluations, grown to the longest series seen. */
function shapeBuffers(nNonlinear: number): (n: number) => ShapeValues {
  const values: ShapeValues = { g: new Float64Array(0), grad: new Float64Array(0) };
  return (n) => {
    if (values.g.length < n) {
      values.g = new Float64Array(n);
      values.grad = new Float64Array(n * nNonlinear);
    }
    return values;
  };
}

/** g = exp(2 s (t − tm)); θ = [s]. */
function exponentialShape(tm: number): ShapeModel {
  const buffers = shapeBuffers(1);
  return {
    nNonlinear: 1,
    evaluate(t, n, theta, withGrad) {
      const v = buffers(n);
      const s2 = 2 * theta[0];
      for (let i = 0; i < n; i++) {
        const g = Math.exp(s2 * (t[i] - tm));
        v.g[i] = g;
        if (withGrad) v.grad[i] = 2 * (t[i] - tm) * g;
      }
      return v;
    },
  };
}

/**
 * g = q^(2/p), q = logistic(p s (t − tc)) = 1/(1 + e^(−z)); θ = [s, tc] with p fixed (2 =
 * Stuart–Landau, g = q), or [s, tc, ln p]. q, 1 − q and ln q come from the one exponential
 * e^(−|z|), so nothing overflows; below the knee (2/p)·ln q is written 2 s (t − tc) − (2/p)·ln(1 +
 * e^z), which stays exact as p grows without bound (a knee sharper than any sample resolves:
 * the limit is an exponential up to t_c and the level A∞² after it).
 */
function saturationShape(fixedP: number | null): ShapeModel {
  const nn = fixedP === null ? 3 : 2;
  const buffers = shapeBuffers(nn);
  return {
    nNonlinear: nn,
    evaluate(t, n, theta, withGrad) {
      const v = buffers(n);
      const s = theta[0];
      const tc = theta[1];
      const p = fixedP === null ? Math.exp(theta[2]) : fixedP;
      const isLandau = p === 2 && fixedP !== null;
      const ps = p * s;
      const twoOverP = 2 / p;
      for (let i = 0; i < n; i++) {
        const dt = t[i] - tc;
        const z = ps * dt;
        const e = Math.exp(-Math.abs(z));
        const inv = 1 / (1 + e);
        const isUpper = z >= 0;
        const oneMinusQ = isUpper ? e * inv : inv;
        // u = (2/p)·ln q.
        let g: number;
        let u = 0;
        if (isLandau) g = isUpper ? inv : e * inv;
        else {
          const tail = twoOverP * Math.log1p(e);
          u = isUpper ? -tail : 2 * s * dt - tail;
          g = Math.exp(u);
        }
        v.g[i] = g;
        if (!withGrad) continue;
        v.grad[i * nn] = 2 * g * oneMinusQ * dt;
        v.grad[i * nn + 1] = -2 * g * oneMinusQ * s;
        if (fixedP === null) v.grad[i * nn + 2] = g * (2 * oneMinusQ * s * dt - u);
      }
      return v;
    },
  };
}

/**
 * A known low-pass applied to the tone's amplitude before the power is taken: taps h_k (any
 * scale; normalised to Σh = 1 here) at offsets (k − (K − 1)/2)·spacingS, i.e. centred on the
 * output time. The pipeline's envelope is |Σ h_k z(t − τ_k)|² for the complex demodulated tone z;
 * while the tone's phase is steady over the kernel (frequency within a small part of the band of
 * the demodulator's centre), its mean is (Σ h_k a(t − τ_k))² + N².
 */
export interface EnvelopeKernel {
  weights: ArrayLike<number>;
  spacingS: number;
}

/** Most kernel taps the smoothed model evaluates per sample. */
const MAX_KERNEL_TAPS = 24;

/**
 * The model seen through an amplitude kernel: G(t) = (Σ h_k √g(t − τ_k))², with
 * ∂G/∂θ = 2·(Σ h_k √g_k)·Σ h_k (∂g_k/∂θ)/(2√g_k). L·G is then the mean power of the smoothed
 * amplitude √L·√g. The inner model is evaluated at the times the taps need (TapPlan), √g and
 * ∂√g/∂θ once per such time, and each sample sums its taps from there.
 */
function smoothedShape(inner: ShapeModel, kernel: EnvelopeKernel): ShapeModel {
  const n = kernel.weights.length;
  // Long kernels are merged into at most MAX_KERNEL_TAPS groups, each at its weighted centre (a
  // midpoint rule: the amplitude is smooth over one group, whose error is second order in its width).
  const group = Math.ceil(n / MAX_KERNEL_TAPS);
  const taps = Math.ceil(n / group);
  const h = new Float64Array(taps);
  const offsets = new Float64Array(taps);
  let sum = 0;
  for (let k = 0; k < n; k++) sum += kernel.weights[k];
  for (let j = 0; j < taps; j++) {
    let w = 0;
    let wt = 0;
    for (let k = j * group; k < Math.min(n, (j + 1) * group); k++) {
      w += kernel.weights[k];
      wt += kernel.weights[k] * (k - (n - 1) / 2) * kernel.spacingS;
    }
    h[j] = w / sum;
    offsets[j] = w !== 0 ? wt / w : (j * group + (group - 1) / 2 - (n - 1) / 2) * kernel.spacingS;
  }
  const nn = inner.nNonlinear;
  const buffers = shapeBuffers(nn);
  const planOf = tapPlanner(offsets, group === 1 ? kernel.spacingS : 0);
  let root = new Float64Array(0);
  let rootGrad = new Float64Array(0);
  return {
    nNonlinear: nn,
    evaluate(t, count, theta, withGrad) {
      const plan = planOf(t, count);
      const len = plan.times.length;
      const at = inner.evaluate(plan.times, len, theta, withGrad);
      if (root.length < len) {
        root = new Float64Array(len);
        rootGrad = new Float64Array(len * nn);
      }
      // √g and ∂√g/∂θ = (∂g/∂θ)/(2√g) per tap time; a tap where g ≤ 0 adds nothing.
      for (let m = 0; m < len; m++) {
        const g = at.g[m];
        const r = g > 0 ? Math.sqrt(g) : 0;
        root[m] = r;
        if (withGrad) for (let j = 0; j < nn; j++) rootGrad[m * nn + j] = r > 0 ? at.grad[m * nn + j] / (2 * r) : 0;
      }
      const v = buffers(count);
      const idx = plan.index;
      const stride = plan.stride;
      for (let i = 0; i < count; i++) {
        const base = i * stride;
        let amp = 0;
        for (let k = 0; k < taps; k++) amp += h[k] * root[idx[base + k]];
        v.g[i] = amp * amp;
        if (!withGrad) continue;
        for (let j = 0; j < nn; j++) {
          let a = 0;
          for (let k = 0; k < taps; k++) a += h[k] * rootGrad[idx[base + k] * nn + j];
          v.grad[i * nn + j] = 2 * amp * a;
        }
      }
      return v;
    },
  };
}

/** The times at which the taps of a series' samples read the inner model: tap k of sample i reads times[index[i·stride + k]]. */
interface TapPlan {
  times: Float64Array;
  index: Int32Array;
  stride: number;
}

/**
 * For kernel taps at `offsets`, a function giving the tap plan of a series of sample times (the
 * plan of the latest series is kept). When the taps lie `spacingS` apart (0: they do not) and
 * every sample time falls on that spacing's grid, the taps share one grid of times: the
 * envelope series are block means of envelope samples on the kernel's own clock, so the inner
 * model is evaluated once per clock tick the series spans instead of once per tap and sample.
 * Otherwise every tap of every sample has its own time t_i − τ_k.
 */
function tapPlanner(offsets: Float64Array, spacingS: number): (t: Float64Array, n: number) => TapPlan {
  const taps = offsets.length;
  let lastT: Float64Array | null = null;
  let lastN = -1;
  let last: TapPlan = { times: new Float64Array(0), index: new Int32Array(0), stride: taps };
  const tolerance = 1e-6;
  let isUniform = spacingS > 0;
  for (let k = 1; k < taps && isUniform; k++) if (Math.abs((offsets[k] - offsets[0]) / spacingS - k) > tolerance) isUniform = false;
  const onGrid = (t: Float64Array, n: number): TapPlan | null => {
    if (!isUniform || n < 2) return null;
    // Tap k of a sample at t reads t − τ_k = start + (m + taps − 1 − k)·spacing, m its grid position.
    const start = t[0] - offsets[taps - 1];
    const len = Math.round((t[n - 1] - offsets[0] - start) / spacingS) + 1;
    if (!(len > 0) || len > n * taps) return null;
    const index = new Int32Array(n * taps);
    for (let i = 0; i < n; i++) {
      const pos = (t[i] - offsets[taps - 1] - start) / spacingS;
      const m = Math.round(pos);
      if (Math.abs(pos - m) > tolerance || m < 0 || m + taps > len) return null;
      for (let k = 0; k < taps; k++) index[i * taps + k] = m + taps - 1 - k;
    }
    const times = new Float64Array(len);
    for (let m = 0; m < len; m++) times[m] = start + m * spacingS;
    return { times, index, stride: taps };
  };
  return (t, n) => {
    if (t === lastT && n === lastN) return last;
    lastT = t;
    lastN = n;
    const shared = onGrid(t, n);
    if (shared !== null) {
      last = shared;
      return last;
    }
    const times = new Float64Array(n * taps);
    const index = new Int32Array(n * taps);
    for (let i = 0; i < n; i++) {
      for (let k = 0; k < taps; k++) {
        times[i * taps + k] = t[i] - offsets[k];
        index[i * taps + k] = i * taps + k;
      }
    }
    last = { times, index, stride: taps };
    return last;
  };
}

// ---------------------------------------------------------------------------------------------
// Weighted least squares machinery

interface FitState {
  /** Full parameter vector: [ln L, nonlinear..., N²]. */
  params: Float64Array;
  isBackgroundFixed: boolean;
  rss: number;
}

interface Prepared {
  t: Float64Array;
  y: Float64Array;
  n: number;
  spacingS: number;
  nEff: number;
  /** One-sided noise-equivalent bandwidth of the envelope low-pass, Hz. */
  bandwidthHz: number;
}

function prepare(series: EnvelopeSeries): Prepared | string {
  const n = series.timeS.length;
  if (series.power.length !== n) return 'timeS and power differ in length';
  if (n < 6) return 'too few envelope samples (need at least 6)';
  if (!(series.bandwidthHz > 0) || !Number.isFinite(series.bandwidthHz)) return 'bandwidthHz must be a positive number';
  for (let i = 0; i < n; i++) {
    if (!Number.isFinite(series.timeS[i]) || !Number.isFinite(series.power[i])) return 'non-finite envelope sample';
    if (series.power[i] < 0) return 'negative envelope power';
    if (i > 0 && !(series.timeS[i] > series.timeS[i - 1])) return 'times must increase';
  }
  const spacingS = (series.timeS[n - 1] - series.timeS[0]) / (n - 1);
  return { t: series.timeS, y: series.power, n, spacingS, nEff: effectiveSampleCount(n, spacingS, series.bandwidthHz), bandwidthHz: series.bandwidthHz };
}

/** Variance function of the envelope power: V(m) = N²(2m − N²), floored for a noise-free record. */
function varianceOf(m: number, bg: number, bgFloor: number): number {
  const b = Math.max(bg, bgFloor);
  return Math.max(b * (2 * m - b), b * b);
}

/**
 * For fixed nonlinear parameters: weighted linear fit of y ≈ L·g + N² with L > 0, N² ≥ 0 (or N²
 * fixed). Writes ln L and N² into `out`; returns the weighted RSS (Infinity if L ≤ 0).
 */
function solveLinear(
  d: Prepared,
  w: Float64Array,
  g: Float64Array,
  fixedBg: number | null,
  out: { lnL: number; bg: number },
): number {
  let sw = 0;
  let sg = 0;
  let sy = 0;
  let sgg = 0;
  let sgy = 0;
  for (let i = 0; i < d.n; i++) {
    const wi = w[i];
    sw += wi;
    sg += wi * g[i];
    sy += wi * d.y[i];
    sgg += wi * g[i] * g[i];
    sgy += wi * g[i] * d.y[i];
  }
  let amp: number;
  let bg: number;
  if (fixedBg !== null) {
    bg = fixedBg;
    amp = (sgy - bg * sg) / sgg;
  } else {
    const det = sw * sgg - sg * sg;
    amp = det > 0 ? (sw * sgy - sg * sy) / det : Number.NaN;
    bg = det > 0 ? (sgg * sy - sg * sgy) / det : Number.NaN;
    if (!(bg >= 0)) {
      bg = 0;
      amp = sgy / sgg;
    }
  }
  if (!(amp > 0) || !Number.isFinite(amp)) return Number.POSITIVE_INFINITY;
  let rss = 0;
  for (let i = 0; i < d.n; i++) {
    const r = d.y[i] - amp * g[i] - bg;
    rss += w[i] * r * r;
  }
  out.lnL = Math.log(amp);
  out.bg = bg;
  return rss;
}

/** Weighted RSS of a full parameter vector. */
function rssOf(d: Prepared, w: Float64Array, model: ShapeModel, params: Float64Array): number {
  const k = model.nNonlinear;
  const amp = Math.exp(params[0]);
  const bg = params[k + 1];
  const g = model.evaluate(d.t, d.n, params.subarray(1, k + 1), false).g;
  let rss = 0;
  for (let i = 0; i < d.n; i++) {
    const r = d.y[i] - amp * g[i] - bg;
    rss += w[i] * r * r;
  }
  return Number.isFinite(rss) ? rss : Number.POSITIVE_INFINITY;
}

/**
 * Jacobian products JᵀWJ and JᵀWr for the full parameter vector (free parameters only); returns
 * the weighted RSS at the same parameters (Infinity when not finite), from the same residuals.
 */
function normalEquations(
  d: Prepared,
  w: Float64Array,
  model: ShapeModel,
  params: Float64Array,
  nFree: number,
  jtj: Float64Array,
  jtr: Float64Array,
): number {
  const k = model.nNonlinear;
  const amp = Math.exp(params[0]);
  const bg = params[k + 1];
  const v = model.evaluate(d.t, d.n, params.subarray(1, k + 1), true);
  const row = new Float64Array(nFree);
  jtj.fill(0);
  jtr.fill(0);
  let rss = 0;
  for (let i = 0; i < d.n; i++) {
    const g = v.g[i];
    row[0] = amp * g;
    for (let j = 0; j < k; j++) row[j + 1] = amp * v.grad[i * k + j];
    if (nFree === k + 2) row[k + 1] = 1;
    const r = d.y[i] - amp * g - bg;
    rss += w[i] * r * r;
    for (let a = 0; a < nFree; a++) {
      jtr[a] += w[i] * row[a] * r;
      for (let b = 0; b <= a; b++) jtj[a * nFree + b] += w[i] * row[a] * row[b];
    }
  }
  for (let a = 0; a < nFree; a++) for (let b = a + 1; b < nFree; b++) jtj[a * nFree + b] = jtj[b * nFree + a];
  return Number.isFinite(rss) ? rss : Number.POSITIVE_INFINITY;
}

/**
 * One damped Gauss–Newton step on the leading `m` of `size` parameters: solves
 * (A + λ·diag A)·δ = g on that block and adds δ to params. False when the block is singular.
 */
function levenbergStep(jtj: Float64Array, jtr: Float64Array, size: number, m: number, lambda: number, params: Float64Array): boolean {
  const a = new Float64Array(m * m);
  for (let r = 0; r < m; r++) for (let c = 0; c < m; c++) a[r * m + c] = jtj[r * size + c];
  for (let j = 0; j < m; j++) a[j * m + j] *= 1 + lambda;
  const inv = invertSmallMatrix(a, m);
  if (inv === null) return false;
  for (let r = 0; r < m; r++) {
    let step = 0;
    for (let c = 0; c < m; c++) step += inv[r * m + c] * jtr[c];
    params[r] += step;
  }
  return true;
}

/**
 * Levenberg–Marquardt polish of all parameters (Marquardt 1963), N² kept ≥ 0. Each trial point is
 * evaluated with its normal equations, so an accepted step needs no second pass over the data.
 */
function polish(d: Prepared, w: Float64Array, model: ShapeModel, state: FitState, maxIter = 100): void {
  const k = model.nNonlinear;
  const nFree = state.isBackgroundFixed ? k + 1 : k + 2;
  let jtj = new Float64Array(nFree * nFree);
  let jtr = new Float64Array(nFree);
  let trialJtj = new Float64Array(nFree * nFree);
  let trialJtr = new Float64Array(nFree);
  const trial = new Float64Array(state.params.length);
  let lambda = 1e-3;
  let rss = normalEquations(d, w, model, state.params, nFree, jtj, jtr);
  for (let iter = 0; iter < maxIter; iter++) {
    let isImproved = false;
    for (let attempt = 0; attempt < 12; attempt++) {
      trial.set(state.params);
      if (!levenbergStep(jtj, jtr, nFree, nFree, lambda, trial)) {
        lambda *= 10;
        continue;
      }
      if (!state.isBackgroundFixed && trial[k + 1] < 0) {
        // Active set: the background would go negative, so hold it at 0 and step in the others.
        trial.set(state.params);
        trial[k + 1] = 0;
        if (!levenbergStep(jtj, jtr, nFree, nFree - 1, lambda, trial)) {
          lambda *= 10;
          continue;
        }
      }
      const rssTrial = normalEquations(d, w, model, trial, nFree, trialJtj, trialJtr);
      if (rssTrial < rss) {
        const drop = (rss - rssTrial) / rss;
        state.params.set(trial);
        rss = rssTrial;
        [jtj, trialJtj] = [trialJtj, jtj];
        [jtr, trialJtr] = [trialJtr, jtr];
        lambda = Math.max(lambda / 3, 1e-12);
        isImproved = drop > 1e-9;
        break;
      }
      lambda *= 4;
    }
    if (!isImproved) break;
  }
  state.rss = rss;
}

interface GridSpec {
  /** Candidate values of each nonlinear parameter. */
  values: Float64Array[];
}

/** Exhaustive grid over the nonlinear parameters with the linear ones in closed form. */
function gridSearch(
  d: Prepared,
  w: Float64Array,
  model: ShapeModel,
  grid: GridSpec,
  fixedBg: number | null,
): FitState | null {
  const k = model.nNonlinear;
  const theta = new Float64Array(k);
  const lin = { lnL: 0, bg: 0 };
  let best: FitState | null = null;
  const counts = grid.values.map((v) => v.length);
  const total = counts.reduce((a, b) => a * b, 1);
  for (let idx = 0; idx < total; idx++) {
    let rem = idx;
    for (let j = 0; j < k; j++) {
      theta[j] = grid.values[j][rem % counts[j]];
      rem = Math.floor(rem / counts[j]);
    }
    const rss = solveLinear(d, w, model.evaluate(d.t, d.n, theta, false).g, fixedBg, lin);
    if (rss < (best?.rss ?? Number.POSITIVE_INFINITY)) {
      const params = new Float64Array(k + 2);
      params[0] = lin.lnL;
      params.set(theta, 1);
      params[k + 1] = lin.bg;
      best = { params, isBackgroundFixed: fixedBg !== null, rss };
    }
  }
  return best;
}

/** Most samples the grid search looks at; longer series are block-averaged for it. */
const GRID_MAX_SAMPLES = 48;

/**
 * The grid search on a block-averaged copy of the series (at most GRID_MAX_SAMPLES blocks: mean
 * time, mean power, summed weight). The grid only has to land in the right basin, which the
 * averaged curve shows as well; the Levenberg–Marquardt polish that follows uses every sample.
 * Cost falls from (grid points × n) to (grid points × GRID_MAX_SAMPLES) shape evaluations.
 */
function gridSearchThinned(d: Prepared, w: Float64Array, model: ShapeModel, grid: GridSpec, fixedBg: number | null): FitState | null {
  if (d.n <= GRID_MAX_SAMPLES) return gridSearch(d, w, model, grid, fixedBg);
  const thin = blockMeans(d, w, GRID_MAX_SAMPLES);
  const state = gridSearch(thin.d, thin.w, model, grid, fixedBg);
  if (state !== null) state.rss = rssOf(d, w, model, state.params);
  return state;
}

/**
 * Most samples the starts of the flexible saturation fit look at (block means, the curve without
 * the kernel); the one start polished fully uses every sample through the kernel.
 */
const START_MAX_SAMPLES = 80;

/** A block-averaged copy of a series (at most maxSamples blocks: mean time, mean power, summed weight). */
function blockMeans(d: Prepared, w: Float64Array, maxSamples: number): { d: Prepared; w: Float64Array } {
  const block = Math.ceil(d.n / maxSamples);
  const m = Math.ceil(d.n / block);
  const t = new Float64Array(m);
  const y = new Float64Array(m);
  const wm = new Float64Array(m);
  for (let j = 0; j < m; j++) {
    const i0 = j * block;
    const i1 = Math.min(d.n, i0 + block);
    let st = 0;
    let sy = 0;
    let sw = 0;
    for (let i = i0; i < i1; i++) {
      st += d.t[i];
      sy += d.y[i];
      sw += w[i];
    }
    t[j] = st / (i1 - i0);
    y[j] = sy / (i1 - i0);
    wm[j] = sw;
  }
  return { d: { t, y, n: m, spacingS: d.spacingS * block, nEff: d.nEff, bandwidthHz: d.bandwidthHz }, w: wm };
}

/** Updates the IRLS weights 1/V(m̂) from the current parameters. */
function updateWeights(d: Prepared, model: ShapeModel, state: FitState, w: Float64Array, bgFloor: number): void {
  const k = model.nNonlinear;
  const amp = Math.exp(state.params[0]);
  const bg = state.params[k + 1];
  const g = model.evaluate(d.t, d.n, state.params.subarray(1, k + 1), false).g;
  for (let i = 0; i < d.n; i++) w[i] = 1 / varianceOf(amp * g[i] + bg, bg, bgFloor);
  // Normalise so that RSS values stay of order n (the scale of w is irrelevant to the estimates).
  let mean = 0;
  for (let i = 0; i < d.n; i++) mean += w[i];
  mean /= d.n;
  for (let i = 0; i < d.n; i++) w[i] /= mean;
}

interface IrlsResult {
  state: FitState;
  weights: Float64Array;
  /** Covariance of the free parameters, corrected for correlation (φ̂·(JᵀWJ)⁻¹·n/N_eff). */
  cov: Float64Array | null;
  nFree: number;
  dispersion: number;
  /** Effective number of independent samples behind cov (N_eff, or fewer when the residuals are correlated for longer). */
  nEff: number;
}

/** Iteratively reweighted fit: grid initialisation, LM polish, reweighting, covariance. */
function fitIrls(
  d: Prepared,
  model: ShapeModel,
  grid: GridSpec,
  fixedBg: number | null,
  start: FitState | null,
  gridModel: ShapeModel = model,
): IrlsResult | null {
  let maxY = 0;
  for (let i = 0; i < d.n; i++) maxY = Math.max(maxY, d.y[i]);
  // Numerical guard only: keeps V(m) > 0 for a record with no noise at all.
  const bgFloor = 1e-12 * maxY;
  const w = new Float64Array(d.n);
  // First pass: weights of a constant relative error, 1/y² smoothed (the log-fit weighting), then IRLS.
  for (let i = 0; i < d.n; i++) {
    const lo = Math.max(0, i - 2);
    const hi = Math.min(d.n - 1, i + 2);
    let s = 0;
    for (let j = lo; j <= hi; j++) s += d.y[j];
    const ym = Math.max(s / (hi - lo + 1), 1e-9 * maxY, 1e-300);
    w[i] = 1 / (ym * ym);
  }
  let mean = 0;
  for (let i = 0; i < d.n; i++) mean += w[i];
  for (let i = 0; i < d.n; i++) w[i] /= mean / d.n;
  let state = start ?? gridSearchThinned(d, w, gridModel, grid, fixedBg);
  if (state === null) return null;
  if (fixedBg !== null) state.params[model.nNonlinear + 1] = fixedBg;
  polish(d, w, model, state);
  for (let pass = 0; pass < 8; pass++) {
    const before = Float64Array.from(state.params);
    updateWeights(d, model, state, w, bgFloor);
    // The exponential grid is cheap: search it again under the IRLS weights in case they move
    // the optimum to another basin. (The saturation grid is 20× larger; its LM polish suffices.)
    if (pass === 0 && start === null && model.nNonlinear === 1) {
      const regrid = gridSearchThinned(d, w, model, grid, fixedBg);
      if (regrid !== null) {
        polish(d, w, model, regrid);
        state.rss = rssOf(d, w, model, state.params);
        if (regrid.rss < state.rss) state = regrid;
      }
    }
    polish(d, w, model, state);
    let change = 0;
    for (let j = 1; j <= model.nNonlinear; j++) change = Math.max(change, Math.abs(state.params[j] - before[j]) / (Math.abs(before[j]) + 1e-9));
    if (change < 1e-7) break;
  }
  return { state, weights: w, ...covarianceAt(d, model, state, w, fixedBg) };
}

/**
 * Covariance of the free parameters at a fitted state, corrected for correlation
 * (φ̂·(JᵀWJ)⁻¹·n/N_eff, or the residuals' correlation time when longer; header of this file).
 */
function covarianceAt(
  d: Prepared,
  model: ShapeModel,
  state: FitState,
  w: Float64Array,
  fixedBg: number | null,
): { cov: Float64Array | null; nFree: number; dispersion: number; nEff: number } {
  const k = model.nNonlinear;
  const nFree = fixedBg === null && state.params[k + 1] > 0 ? k + 2 : k + 1;
  const jtj = new Float64Array(nFree * nFree);
  const jtr = new Float64Array(nFree);
  normalEquations(d, w, model, state.params, nFree, jtj, jtr);
  const inv = invertSmallMatrix(jtj, nFree);
  // Correlation: the band's own (n/N_eff), or the residuals' when they are correlated for longer
  // (noise-driven resonance narrower than the band, drift the model does not follow).
  // Capped so that at least nFree + 2 independent samples remain (Student-t with ≥ 2 degrees of freedom).
  const inflation = Math.min(Math.max(d.n / d.nEff, residualCorrelationTime(d, model, state.params, w)), Math.max(d.n / d.nEff, d.n / (nFree + 2)));
  const nEff = d.n / inflation;
  const dofResidual = d.n - nFree * inflation;
  const dispersion = dofResidual > 0 ? state.rss / dofResidual : Number.NaN;
  let cov: Float64Array | null = null;
  if (inv !== null && dispersion > 0) {
    cov = new Float64Array(nFree * nFree);
    for (let i = 0; i < cov.length; i++) cov[i] = inv[i] * dispersion * inflation;
  }
  return { cov, nFree, dispersion, nEff };
}

/**
 * Integrated autocorrelation time (samples) of the standardised residuals (y − m)·√w: Geyer's
 * initial positive sequence estimator, τ = −1 + 2·Σ_{m=0}^{M} (ρ_{2m} + ρ_{2m+1}) summed while
 * the pair sums stay positive (Geyer 1992, Practical Markov chain Monte Carlo, Statistical
 * Science 7, 473). For n samples of a series correlated over τ, the variance of a mean (and of a
 * least-squares estimate whose regressors vary slowly over τ) is τ times that of independent
 * samples; lags are searched up to n/4.
 */
function residualCorrelationTime(d: Prepared, model: ShapeModel, params: Float64Array, w: Float64Array): number {
  const k = model.nNonlinear;
  const amp = Math.exp(params[0]);
  const bg = params[k + 1];
  const g = model.evaluate(d.t, d.n, params.subarray(1, k + 1), false).g;
  const e = new Float64Array(d.n);
  let c0 = 0;
  for (let i = 0; i < d.n; i++) {
    e[i] = (d.y[i] - amp * g[i] - bg) * Math.sqrt(w[i]);
    c0 += e[i] * e[i];
  }
  if (!(c0 > 0)) return 1;
  const lagOf = (lag: number): number => {
    let c = 0;
    for (let i = 0; i + lag < d.n; i++) c += e[i] * e[i + lag];
    return c / c0;
  };
  let tau = -1;
  const maxLag = Math.floor(d.n / 4);
  for (let m = 0; 2 * m + 1 <= maxLag; m++) {
    const pair = (m === 0 ? 1 : lagOf(2 * m)) + lagOf(2 * m + 1);
    if (!(pair > 0)) break;
    tau += 2 * pair;
  }
  return Math.max(1, tau);
}

function invalidRateFit(reason: string, refTimeS: number, nEffective: number): RateFit {
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

/** Rate grid, 1/s: s·span = ±(e^v − 1) for v evenly spaced, dense near 0, up to ±MAX_RATE_TIMES_SPAN. */
function rateGrid(spanS: number, count: number): Float64Array {
  const out = new Float64Array(count);
  const vMax = Math.log(MAX_RATE_TIMES_SPAN + 1);
  for (let j = 0; j < count; j++) {
    const v = -vMax + (2 * vMax * j) / (count - 1);
    out[j] = (Math.sign(v) * (Math.exp(Math.abs(v)) - 1)) / spanS;
  }
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
  const model = exponentialShape(tm);
  const grid: GridSpec = { values: [rateGrid(spanS, 241)] };
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
  const through = (m: ShapeModel): ShapeModel => (kernel === undefined ? m : smoothedShape(m, kernel));
  const grid = saturationGrid(d);
  const landau = fitIrls(d, through(saturationShape(2)), grid, fixedBg, null, saturationShape(2));
  if (landau === null) return fail('no tone above the background', d.nEff);
  let chosen: SaturationCandidate = { fit: landau, p: 2 };
  let model: SaturationFit['model'] = 'stuart-landau';

  // Flexible model, started from the Stuart–Landau solution at several knee sharpness values,
  // compared with the same weights (nested models: p = 2 is the Stuart–Landau case). The starts
  // only pick the basin, as the grid does: they run on block means without the kernel.
  const general = through(saturationShape(null));
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
  let bestGeneral: IrlsResult | null = null;
  if (bestStart !== null) {
    // The cheap start may sit in a basin that the full data, through the kernel, rate worse than
    // the Stuart–Landau solution itself (the flexible model at p = 2): then start from that solution.
    const landauStart = fromLandau(2);
    if (!(rssOf(d, landau.weights, general, bestStart.params) <= rssOf(d, landau.weights, general, landauStart))) bestStart.params = landauStart;
    bestGeneral = { state: bestStart, weights: landau.weights, cov: null, nFree: 0, dispersion: Number.NaN, nEff: d.nEff };
    polish(d, landau.weights, general, bestGeneral.state);
  }
  if (bestGeneral !== null && Number.isFinite(bestGeneral.state.rss)) {
    const inflation = d.n / d.nEff;
    const nFreeGeneral = fixedBg === null ? 5 : 4;
    const dispersion = bestGeneral.state.rss / (d.n - nFreeGeneral * inflation);
    const statistic = (landau.state.rss - bestGeneral.state.rss) / (dispersion * inflation);
    if (statistic > CHI2_1DOF_99) {
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
  const unidentified = unidentifiedRate(d, chosen, k);
  if (unidentified !== null) return { fit: { ...failFit(unidentified, d.nEff), model }, ratePerS: s, p, tcS: tc };
  const sdRate = Math.sqrt(chosen.fit.cov![1 * chosen.fit.nFree + 1]);
  const q = studentTQuantile(0.975, Math.max(1, chosen.fit.nEff - chosen.fit.nFree));
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
function unidentifiedRate(d: Prepared, c: SaturationCandidate, k: number): string | null {
  if (c.fit.cov === null) return 'fit covariance is singular';
  const params = c.fit.state.params;
  const s = params[1];
  const half = studentTQuantile(0.975, Math.max(1, c.fit.nEff - c.fit.nFree)) * Math.sqrt(c.fit.cov[1 * c.fit.nFree + 1]);
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
  through: (m: ShapeModel) => ShapeModel,
  fixedBg: number | null,
): SaturationCandidate {
  const params = chosen.fit.state.params;
  const s = params[1];
  const p = Math.exp(params[3]);
  if (!(p > 0) || !(s > 0) || p * s * d.spacingS < 1) return chosen;
  const corner: FitState = { params: Float64Array.of(params[0], s, params[2], params[4]), isBackgroundFixed: fixedBg !== null, rss: chosen.fit.state.rss };
  const conditional = covarianceAt(d, through(saturationShape(p)), corner, chosen.fit.weights, fixedBg);
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
