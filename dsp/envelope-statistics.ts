/**
 * Linear growth rate ν, saturation κ and noise intensity σ² of a mode from the statistics of its
 * complex envelope in noise-driven operation, stable or humming (REFERENCES.md §40–§42). This file
 * holds the estimators on a complex envelope; dsp/mode-statistics.ts turns a recording into that
 * envelope, adds the Lorentzian route and reconciles.
 *
 * Model: the normal form of a Hopf bifurcation with additive noise,
 *   du = (ν − κ|u|²) u dt + σ dW   (Itô; W a complex standard Wiener process, E[dW dW*] = dt),
 * u the complex amplitude of the tone (|u| its peak amplitude), ν in 1/s, κ in 1/(s·unit²), σ² in
 * unit²/s. Its stationary amplitude PDF is P(A) = A exp((2νA² − κA⁴)/σ²)/Z (Noiray & Schuermans
 * 2013, Int. J. Non-Linear Mech. 50, 152–163; normalisation derived in REFERENCES.md §40).
 *
 * Route 1, amplitude PDF by maximum likelihood. In y = A² the PDF is exp(a·y − b·y²)/Z(a, b) on
 * y ≥ 0 (a = 2ν/σ², b = κ/σ²): a truncated Gaussian, an exponential family whose sufficient
 * statistics are y and y². The likelihood equations therefore match the model's E[y], E[y²] to the
 * sample means, solved exactly by one bisection on the shape (REFERENCES.md §40). Measurement noise
 * e (circular Gaussian, variance v) adds to y: E[y'] = E[y] + v, E[y'²] = E[y²] + 4E[y]v + 2v²;
 * the sample means are corrected by these identities before solving (a corrected score, Nakamura
 * 1990, Biometrika 77, 127–137). ν = a σ²/2 with σ² from the short-lag increments (route 2).
 *
 * Route 2, drift and diffusion (Kramers–Moyal coefficients; Siegert, Friedrich & Peinke 1998, Phys.
 * Lett. A 243, 275–280; Noiray 2017, J. Eng. Gas Turbines Power 139, 041503). At each lag τ of a
 * set, the conditional mean E[u(t+τ) | u(t)] is regressed on u and |u|²u (coefficients b1(τ),
 * b3(τ)), and the mean square increment M2(τ) = E|u(t+τ) − u(t)|² is taken. Finite-lag and
 * band-filter corrections (REFERENCES.md §41): ln|b1(τ)| = c + ντ + O(τ²) (exact, c = 0, for the
 * linear case), Re(b3/b1) = d − κτ, M2(τ) = 2v − σ²·c_h + σ²τ + O(τ²) for lags past the band
 * filter's own correlation; the measurement noise v and the filter's smoothing (c_h) only move the
 * intercepts, so the rates are read from slopes over τ, not from M1/τ at one lag.
 *
 * Intervals: delete-one-segment jackknife over contiguous blocks (Efron & Stein 1981, Ann. Stat.
 * 9(3)), as in dsp/damping.ts: every statistic is a smooth function of sums over the record, so
 * the replicates carry the samples' autocorrelation; Student-t with K − 1 degrees of freedom.
 */
import { blockSums, powersOf, type ComplexEnvelope, type Powers } from './envelope-sums';
import { invertSmallMatrix, studentTQuantile } from './stats';
import type { Interval } from './types';

export type { ComplexEnvelope };

/**
 * What the band filter in front of the envelope does to the increments (REFERENCES.md §41): for a
 * Wiener input of unit intensity the filtered M2 at envelope lag k is wienerM2S[k] (s; beyond the
 * array, k·Δt − structureOffsetS), and white measurement noise keeps the correlation
 * noiseCorrelation[k] (0 beyond the array).
 */
export interface BandFilterEffect {
  /** First lag (envelope samples) past which the filter's own correlation has died (≥ 1): the drift fits start there. */
  minLagSamples: number;
  /** c_h = ΣΣ h_j h_k |t_j − t_k| (s): a filtered Wiener process has M2(τ) = σ²(τ − c_h) beyond the filter span. */
  structureOffsetS: number;
  wienerM2S: Float64Array;
  noiseCorrelation: Float64Array;
}

/** An unfiltered envelope. */
export const NO_BAND_FILTER: BandFilterEffect = { minLagSamples: 1, structureOffsetS: 0, wienerM2S: new Float64Array(0), noiseCorrelation: new Float64Array(0) };

function wienerM2At(f: BandFilterEffect, k: number, dt: number): number {
  return k < f.wienerM2S.length ? f.wienerM2S[k] : k * dt - f.structureOffsetS;
}

function noiseCorrelationAt(f: BandFilterEffect, k: number): number {
  return k < f.noiseCorrelation.length ? f.noiseCorrelation[k] : k === 0 ? 1 : 0;
}

/** One route's estimate of the normal form's coefficients. */
export interface RouteEstimate {
  isValid: boolean;
  /** ν, 1/s (negative: stable), with its 95 % interval. */
  growthRatePerS: number;
  ci95PerS: Interval;
  /** κ, 1/(s·unit²), and its jackknife 95 % interval. */
  saturation: number;
  saturationCi95?: Interval;
  /** σ², unit²/s. */
  noiseIntensity: number;
  reason?: string;
}

export interface EnvelopeStatistics {
  pdf: RouteEstimate;
  driftDiffusion: RouteEstimate;
  /** Measurement-noise variance E|e|² in the envelope (unit²), from the increments' intercept. */
  measurementNoiseVariance: number;
  /** E|u|² of the mode (unit²), measurement noise removed. */
  meanSquare: number;
  /** Relaxation rate the lag window was sized by, 1/s. */
  relaxationRatePerS: number;
  /** Lags used, s. */
  lagsS: Float64Array;
}

/** Jackknife blocks (as dsp/damping.ts's autocorrelation estimate). */
const SEGMENTS = 20;
/** Lags of the fits: every lag up to DENSE_LAGS, then up to SPARSE_LAGS more spread to the window's end; the drift fits need LAG_MIN_COUNT past the filter's correlation (they are quadratic in τ). */
const DENSE_LAGS = 8;
const SPARSE_LAGS = 12;
const LAG_MIN_COUNT = 5;
/** The lag window spans this many relaxation times: the O(τ²) terms stay below ~3 % of the slopes (e^{−x} ≈ 1 − x + x²/2 at x = 0.25). */
const LAG_SPAN_RELAXATIONS = 0.25;
/** Span of the first pass, s (before the relaxation rate is known). */
const FIRST_PASS_SPAN_S = 0.02;
/** A segment must hold this many lag windows. */
const SEGMENT_PER_LAG = 5;
/**
 * A steady hum: the amplitude's law lies this many of its standard deviations above A = 0 (shape
 * α0 below −3), so A never nears 0 and σ² is read from the amplitude's increments, which a slow
 * wander of the tone's phase does not touch (E[(ΔA)²] = σ²τ/2 + O(τ²), REFERENCES.md §41).
 */
const HUM_SHAPE = -3;
/** Shape range of the truncated Gaussian in y, standard deviations (α0 = −mean/sd before truncation); beyond +40 it is the exponential to 1e-3 in E[y²]/E[y]². */
const SHAPE_LIMIT = 40;

/**
 * Scaled complementary error function erfcx(x) = exp(x²)·erfc(x), x ≥ 0, to ~1e-14 relative: the
 * all-positive series erf(x) = (2/√π) e^{−x²} Σ 2ⁿ x^{2n+1}/(2n+1)!! below x = 2 (A&S 7.1.6) and
 * the continued fraction erfcx(x) = (1/√π)/(x + (1/2)/(x + 1/(x + (3/2)/(x + …)))) above (A&S
 * 7.1.14), evaluated by the modified Lentz method (Press et al. 2007, Numerical Recipes §5.2).
 * Near-exact values matter: the truncated-Gaussian moments difference quantities of size 1/α0.
 */
export function erfcx(x: number): number {
  if (x < 2) {
    let term = x;
    let sum = x;
    for (let k = 1; k < 200 && term > 1e-17 * sum; k++) {
      term *= (2 * x * x) / (2 * k + 1);
      sum += term;
    }
    return Math.exp(x * x) - (2 / Math.sqrt(Math.PI)) * sum;
  }
  const tiny = 1e-300;
  let f = x;
  let c = x;
  let d = 0;
  for (let k = 1; k < 500; k++) {
    const a = k / 2;
    d = x + a * d;
    d = Math.abs(d) < tiny ? tiny : d;
    c = x + a / c;
    c = Math.abs(c) < tiny ? tiny : c;
    d = 1 / d;
    const delta = c * d;
    f *= delta;
    if (Math.abs(delta - 1) < 1e-16) break;
  }
  return 1 / (Math.sqrt(Math.PI) * f);
}

/** Inverse Mills ratio φ(α)/(1 − Φ(α)) of the standard normal, without overflow. */
function inverseMills(al: number): number {
  if (al >= 0) return Math.sqrt(2 / Math.PI) / erfcx(al / Math.SQRT2);
  const g = Math.exp(-0.5 * al * al);
  return g / Math.sqrt(2 * Math.PI) / (1 - 0.5 * erfcx(-al / Math.SQRT2) * g);
}

/** E[y²]/E[y]² of a Gaussian of shape α0 truncated to y ≥ 0: 2 at α0 → +∞ (exponential), 1 at α0 → −∞. */
function truncatedRatio(al: number): number {
  const lam = inverseMills(al);
  const d = lam - al;
  return (1 - al * lam + al * al) / (d * d);
}

/**
 * Maximum-likelihood (a, b) of p(y) ∝ exp(a·y − b·y²), y ≥ 0, b ≥ 0, from the means m1 = E[y],
 * m2 = E[y²] (exponential family: the likelihood equations are these moments), and the shape α0.
 * Null when the moments admit no such law (m1 ≤ 0 or m2 ≤ m1²).
 */
export function truncatedGaussianFromMoments(m1: number, m2: number): { a: number; b: number; shape: number } | null {
  if (!(m1 > 0) || !(m2 > m1 * m1)) return null;
  const target = m2 / (m1 * m1);
  if (target >= truncatedRatio(SHAPE_LIMIT)) return { a: -1 / m1, b: 0, shape: Number.POSITIVE_INFINITY };
  let lo = -SHAPE_LIMIT;
  let hi = SHAPE_LIMIT;
  if (target <= truncatedRatio(lo)) {
    // Far from 0 (a steady hum) the truncation is nil: the untruncated Gaussian's moments.
    const v = m2 - m1 * m1;
    return { a: m1 / v, b: 1 / (2 * v), shape: -m1 / Math.sqrt(v) };
  }
  for (let i = 0; i < 200 && hi - lo > 1e-12; i++) {
    const mid = 0.5 * (lo + hi);
    if (truncatedRatio(mid) < target) lo = mid;
    else hi = mid;
  }
  const al = 0.5 * (lo + hi);
  const s = m1 / (inverseMills(al) - al);
  return { a: -al / s, b: 1 / (2 * s * s), shape: al };
}

/**
 * ln of the normaliser of P(A) = A exp((2νA² − κA⁴)/σ²)/Z: Z = ∫0^∞ A e^{aA² − bA⁴} dA with
 * a = 2ν/σ², b = κ/σ² equals ½·√π/(2√b)·erfcx(−a/(2√b)), or −1/(2a) when b = 0 (REFERENCES.md §40).
 */
export function amplitudePdfLogNormaliser(nuPerS: number, kappa: number, sigma2: number): number {
  const a = (2 * nuPerS) / sigma2;
  const b = kappa / sigma2;
  if (b === 0) return a < 0 ? Math.log(-1 / (2 * a)) : Number.POSITIVE_INFINITY;
  const x = -a / (2 * Math.sqrt(b));
  const lnHalfRoot = Math.log(0.5 * (Math.sqrt(Math.PI) / (2 * Math.sqrt(b))));
  if (x >= 0) return lnHalfRoot + Math.log(erfcx(x));
  // erfcx(x) = 2e^{x²} − erfcx(−x) for x < 0.
  return lnHalfRoot + x * x + Math.log(2 - erfcx(-x) * Math.exp(-x * x));
}

/** Least-squares polynomial (degree 1 or 2) through (x, y); returns the coefficients, lowest first. */
function polyFit(x: Float64Array, y: Float64Array, degree: 1 | 2): Float64Array {
  const k = degree + 1;
  const ata = new Float64Array(k * k);
  const aty = new Float64Array(k);
  // Centre and scale x for conditioning, then map back.
  let mx = 0;
  for (let i = 0; i < x.length; i++) mx += x[i] / x.length;
  let sx = 0;
  for (let i = 0; i < x.length; i++) sx = Math.max(sx, Math.abs(x[i] - mx));
  sx = sx > 0 ? sx : 1;
  for (let i = 0; i < x.length; i++) {
    const v = (x[i] - mx) / sx;
    const row = [1, v, v * v];
    for (let r = 0; r < k; r++) {
      aty[r] += row[r] * y[i];
      for (let c = 0; c < k; c++) ata[r * k + c] += row[r] * row[c];
    }
  }
  // Solve by Gaussian elimination (k ≤ 3).
  const m = Float64Array.from(ata);
  const b = Float64Array.from(aty);
  for (let c = 0; c < k; c++) {
    let p = c;
    for (let r = c + 1; r < k; r++) if (Math.abs(m[r * k + c]) > Math.abs(m[p * k + c])) p = r;
    for (let j = 0; j < k; j++) [m[c * k + j], m[p * k + j]] = [m[p * k + j], m[c * k + j]];
    [b[c], b[p]] = [b[p], b[c]];
    for (let r = c + 1; r < k; r++) {
      const f = m[r * k + c] / m[c * k + c];
      for (let j = c; j < k; j++) m[r * k + j] -= f * m[c * k + j];
      b[r] -= f * b[c];
    }
  }
  const z = new Float64Array(k);
  for (let r = k - 1; r >= 0; r--) {
    let v = b[r];
    for (let j = r + 1; j < k; j++) v -= m[r * k + j] * z[j];
    z[r] = v / m[r * k + r];
  }
  // Back from v = (x − mx)/sx to x.
  if (degree === 1) return Float64Array.of(z[0] - (z[1] * mx) / sx, z[1] / sx);
  const c2 = z[2] / (sx * sx);
  const c1 = z[1] / sx - 2 * c2 * mx;
  const c0 = z[0] - (z[1] * mx) / sx + c2 * mx * mx;
  return Float64Array.of(c0, c1, c2);
}

/** The statistics of one (replicate of the) record, from summed block sums. */
interface Solution {
  nuDrift: number;
  kappaDrift: number;
  sigma2: number;
  noiseVar: number;
  nuPdf: number;
  kappaPdf: number;
  /** E|u|² with the measurement noise removed. */
  meanSquare: number;
}

/** The lags with their filter regressors: τ (s), 1 − ρ_noise(τ), the filtered Wiener M2(τ) (s). */
interface LagDesign {
  lagsS: Float64Array;
  noiseShape: Float64Array;
  wiener: Float64Array;
  /** Index of the first lag usable by the drift fits. */
  driftFrom: number;
}

function lagDesign(lags: Int32Array, rateHz: number, filter: BandFilterEffect): LagDesign {
  const dt = 1 / rateHz;
  let driftFrom = lags.findIndex((k) => k >= filter.minLagSamples);
  if (driftFrom < 0 || lags.length - driftFrom < LAG_MIN_COUNT) driftFrom = Math.max(0, lags.length - LAG_MIN_COUNT);
  return {
    lagsS: Float64Array.from(lags, (k) => k * dt),
    noiseShape: Float64Array.from(lags, (k) => 1 - noiseCorrelationAt(filter, k)),
    wiener: Float64Array.from(lags, (k) => wienerM2At(filter, k, dt)),
    driftFrom,
  };
}

/** Least squares of y on three given columns; the coefficients (NaN when singular). */
function fitColumns(c0: Float64Array, c1: Float64Array, c2: Float64Array, y: Float64Array): Float64Array {
  const cols = [c0, c1, c2];
  const ata = new Float64Array(9);
  const aty = new Float64Array(3);
  // Scale each column to unit size for conditioning.
  const sc = cols.map((c) => Math.sqrt(c.reduce((a, v) => a + v * v, 0)) || 1);
  for (let i = 0; i < y.length; i++) {
    for (let r = 0; r < 3; r++) {
      const vr = cols[r][i] / sc[r];
      aty[r] += vr * y[i];
      for (let c = 0; c < 3; c++) ata[r * 3 + c] += (vr * cols[c][i]) / sc[c];
    }
  }
  const inv = invertSmallMatrix(ata, 3);
  const out = new Float64Array(3).fill(Number.NaN);
  if (inv === null) return out;
  for (let r = 0; r < 3; r++) {
    let v = 0;
    for (let c = 0; c < 3; c++) v += inv[r * 3 + c] * aty[c];
    out[r] = v / sc[r];
  }
  return out;
}

function solveSums(
  tot: { n: number; sy: number; sy2: number; sy3: number; c1r: Float64Array; c1i: Float64Array; c3r: Float64Array; c3i: Float64Array; m2: Float64Array; m2a: Float64Array },
  design: LagDesign,
): Solution {
  const { lagsS, noiseShape, wiener, driftFrom } = design;
  const L = lagsS.length;
  const reB1 = new Float64Array(L - driftFrom);
  const reB3 = new Float64Array(L - driftFrom);
  const m2 = new Float64Array(L);
  const m2a = new Float64Array(L);
  const tau2 = Float64Array.from(lagsS, (t) => t * t);
  // Normal equations of u(t+τ) ≈ b1 u + b3 |u|²u: [[Σy, Σy²], [Σy², Σy³]] (real) · [b1, b3] = [c1, c3];
  // the mean phase rate is removed upstream, so the real parts carry ν and κ.
  const g11 = tot.sy;
  const g12 = tot.sy2;
  const g22 = tot.sy3;
  const det = g11 * g22 - g12 * g12;
  for (let l = 0; l < L; l++) {
    if (l >= driftFrom) {
      reB1[l - driftFrom] = (g22 * tot.c1r[l] - g12 * tot.c3r[l]) / det;
      reB3[l - driftFrom] = (g11 * tot.c3r[l] - g12 * tot.c1r[l]) / det;
    }
    m2[l] = tot.m2[l] / tot.n;
    m2a[l] = tot.m2a[l] / tot.n;
  }
  const driftLags = lagsS.subarray(driftFrom);
  const p1 = polyFit(driftLags, reB1, 2);
  const p3 = polyFit(driftLags, reB3, 2);
  const nuDrift = p1[1] / p1[0];
  const kappaDrift = -p3[1] / p1[0];
  // σ² and the measurement noise v from the complex increments: M2 = 2v(1 − ρ(τ)) + σ² G(τ) + c2 τ².
  const q = fitColumns(noiseShape, wiener, tau2, m2);
  let sigma2 = q[1];
  let noiseVar = Math.max(0, 0.5 * q[0]);
  // Route 1: corrected sufficient statistics, then the exact exponential-family solution.
  const e1 = tot.sy / tot.n;
  const e2 = tot.sy2 / tot.n;
  const solvePdf = (v: number): ReturnType<typeof truncatedGaussianFromMoments> => truncatedGaussianFromMoments(e1 - v, e2 - 4 * e1 * v + 2 * v * v);
  // The shape is judged before any noise correction (which is small for a hum).
  const raw = solvePdf(0);
  if (raw !== null && raw.shape < HUM_SHAPE) {
    // A steady hum: amplitude increments, M2_A = v(1 − ρ) + (σ²/2) G + c2 τ² (radial noise σ/√2, noise v/2 per quadrature).
    const qa = fitColumns(noiseShape, wiener, tau2, m2a);
    sigma2 = 2 * qa[1];
    noiseVar = Math.max(0, qa[0]);
  }
  const ab = solvePdf(noiseVar);
  return {
    nuDrift,
    kappaDrift,
    sigma2,
    noiseVar,
    nuPdf: ab === null ? Number.NaN : 0.5 * ab.a * sigma2,
    kappaPdf: ab === null ? Number.NaN : ab.b * sigma2,
    meanSquare: e1 - noiseVar,
  };
}

/** Every lag 1…DENSE_LAGS, then up to SPARSE_LAGS evenly spaced to hi. */
function lagSet(hi: number): Int32Array {
  const out: number[] = [];
  for (let k = 1; k <= Math.min(hi, DENSE_LAGS); k++) out.push(k);
  for (let i = 1; i <= SPARSE_LAGS && hi > DENSE_LAGS; i++) {
    const k = Math.round(DENSE_LAGS + ((hi - DENSE_LAGS) * i) / SPARSE_LAGS);
    if (k > out[out.length - 1]) out.push(k);
  }
  return Int32Array.from(out);
}

/** Relaxation rate of the normal form's amplitude: |ν| when stable, 2ν when humming (linearised about the limit cycle), √(κσ²) at threshold (its only time scale). */
function relaxationRate(nu: number, kappa: number, sigma2: number): number {
  const atThreshold = kappa > 0 && sigma2 > 0 ? Math.sqrt(kappa * sigma2) : 0;
  return Math.max(Math.abs(nu), 2 * nu, atThreshold);
}

function jackknifeInterval(full: number, reps: Float64Array): { ci: Interval; sd: number } {
  const k = reps.length;
  let mean = 0;
  for (let i = 0; i < k; i++) mean += reps[i] / k;
  let ss = 0;
  for (let i = 0; i < k; i++) ss += (reps[i] - mean) ** 2;
  const sd = Math.sqrt(((k - 1) / k) * ss);
  const t = studentTQuantile(0.975, k - 1);
  return { ci: [full - t * sd, full + t * sd], sd };
}

function invalidRoute(reason: string): RouteEstimate {
  return { isValid: false, growthRatePerS: Number.NaN, ci95PerS: [Number.NaN, Number.NaN], saturation: Number.NaN, noiseIntensity: Number.NaN, reason };
}

function analyseWithLags(u: ComplexEnvelope, p: Powers, lags: Int32Array, filter: BandFilterEffect): { full: Solution; reps: Solution[]; lagsS: Float64Array } {
  const sums = blockSums(u, p, lags, SEGMENTS);
  const L = lags.length;
  const design = lagDesign(lags, u.rateHz, filter);
  const lagsS = design.lagsS;
  const total = (skip: number): Parameters<typeof solveSums>[0] => {
    const t = { n: 0, sy: 0, sy2: 0, sy3: 0, c1r: new Float64Array(L), c1i: new Float64Array(L), c3r: new Float64Array(L), c3i: new Float64Array(L), m2: new Float64Array(L), m2a: new Float64Array(L) };
    for (let g = 0; g < SEGMENTS; g++) {
      if (g === skip) continue;
      t.n += sums.count[g];
      t.sy += sums.sy[g];
      t.sy2 += sums.sy2[g];
      t.sy3 += sums.sy3[g];
      for (let l = 0; l < L; l++) {
        t.c1r[l] += sums.c1r[g * L + l];
        t.c1i[l] += sums.c1i[g * L + l];
        t.c3r[l] += sums.c3r[g * L + l];
        t.c3i[l] += sums.c3i[g * L + l];
        t.m2[l] += sums.m2[g * L + l];
        t.m2a[l] += sums.m2a[g * L + l];
      }
    }
    return t;
  };
  const full = solveSums(total(-1), design);
  const reps: Solution[] = [];
  for (let g = 0; g < SEGMENTS; g++) reps.push(solveSums(total(g), design));
  return { full, reps, lagsS };
}

/**
 * ν, κ and σ² of the normal form from a complex envelope u by the amplitude-PDF route and the
 * drift/diffusion route, each with a jackknife 95 % interval. `filter` describes the band filter u
 * went through (minLagSamples 1 and structureOffsetS 0 for an unfiltered envelope).
 */
export function estimateEnvelopeStatistics(u: ComplexEnvelope, filter: BandFilterEffect): EnvelopeStatistics {
  const n = u.re.length;
  const lo = Math.max(1, filter.minLagSamples);
  const maxHi = Math.floor(n / (SEGMENTS * SEGMENT_PER_LAG));
  const lagSpan = (spanS: number): number => Math.min(maxHi, Math.max(lo + LAG_MIN_COUNT - 1, Math.round(spanS * u.rateHz)));
  const fail = (reason: string): EnvelopeStatistics => ({
    pdf: invalidRoute(reason),
    driftDiffusion: invalidRoute(reason),
    measurementNoiseVariance: Number.NaN,
    meanSquare: Number.NaN,
    relaxationRatePerS: Number.NaN,
    lagsS: new Float64Array(0),
  });
  if (maxHi < lo + LAG_MIN_COUNT - 1) return fail('record too short for the envelope statistics');
  // Pass 1 on a short lag window, pass 2 on a window sized by the relaxation rate found (the drift
  // fits start at the filter's correlation length lo).
  const powers = powersOf(u);
  let pass = analyseWithLags(u, powers, lagSet(lagSpan(FIRST_PASS_SPAN_S)), filter);
  const p1 = pass.full;
  let rate = relaxationRate(Number.isFinite(p1.nuPdf) ? p1.nuPdf : p1.nuDrift, Number.isFinite(p1.kappaPdf) ? p1.kappaPdf : p1.kappaDrift, p1.sigma2);
  if (Number.isFinite(rate) && rate > 0) {
    pass = analyseWithLags(u, powers, lagSet(lagSpan(LAG_SPAN_RELAXATIONS / rate)), filter);
  }
  const { full, reps, lagsS } = pass;
  rate = relaxationRate(Number.isFinite(full.nuPdf) ? full.nuPdf : full.nuDrift, full.kappaPdf, full.sigma2);
  const pick = (f: (s: Solution) => number): Float64Array => Float64Array.from(reps, f);
  const route = (nu: number, nuReps: Float64Array, kappa: number, kappaReps: Float64Array, what: string, needsSigma2: boolean): RouteEstimate => {
    if (!Number.isFinite(nu) || nuReps.some((v) => !Number.isFinite(v))) return invalidRoute(`${what}: no solution on this record`);
    if (needsSigma2 && !(full.sigma2 > 0)) return invalidRoute(`${what}: the increments give no noise intensity`);
    const { ci } = jackknifeInterval(nu, nuReps);
    return { isValid: true, growthRatePerS: nu, ci95PerS: ci, saturation: kappa, saturationCi95: jackknifeInterval(kappa, kappaReps).ci, noiseIntensity: full.sigma2 };
  };
  return {
    pdf: route(full.nuPdf, pick((s) => s.nuPdf), full.kappaPdf, pick((s) => s.kappaPdf), 'amplitude PDF', true),
    driftDiffusion: route(full.nuDrift, pick((s) => s.nuDrift), full.kappaDrift, pick((s) => s.kappaDrift), 'drift/diffusion', false),
    measurementNoiseVariance: full.noiseVar,
    meanSquare: full.meanSquare,
    relaxationRatePerS: rate,
    lagsS,
  };
}

/**
 * The estimator an observer of the exact envelope would use (the bench's yardstick): least squares
 * of the Euler–Maruyama increments Δu = (ν − κ|u|²)u Δt + noise on the noise-free, unfiltered u,
 * which is the maximum-likelihood estimate of the discretised SDE (Kloeden & Platen 1992,
 * Numerical Solution of Stochastic Differential Equations, §9.1 [memory]); σ² from the quadratic
 * variation of the residuals.
 */
export function fitNormalFormExact(u: ComplexEnvelope): { nuPerS: number; saturation: number; noiseIntensity: number } {
  const dt = 1 / u.rateHz;
  let s11 = 0;
  let s12 = 0;
  let s22 = 0;
  let r1 = 0;
  let r2 = 0;
  const n = u.re.length - 1;
  for (let t = 0; t < n; t++) {
    const ar = u.re[t];
    const ai = u.im[t];
    const y = ar * ar + ai * ai;
    const dr = u.re[t + 1] - ar;
    const di = u.im[t + 1] - ai;
    const p = ar * dr + ai * di; // Re(conj(u) Δu)
    s11 += y * dt;
    s12 += y * y * dt;
    s22 += y * y * y * dt;
    r1 += p;
    r2 += y * p;
  }
  // Δu ≈ ν u dt − κ |u|²u dt: normal equations in (ν, −κ).
  const det = s11 * s22 - s12 * s12;
  const nu = (s22 * r1 - s12 * r2) / det;
  const mk = (s11 * r2 - s12 * r1) / det;
  let q = 0;
  for (let t = 0; t < n; t++) {
    const ar = u.re[t];
    const ai = u.im[t];
    const f = (nu + mk * (ar * ar + ai * ai)) * dt;
    const er = u.re[t + 1] - ar - f * ar;
    const ei = u.im[t + 1] - ai - f * ai;
    q += er * er + ei * ei;
  }
  return { nuPerS: nu, saturation: -mk, noiseIntensity: q / (n * dt) };
}
