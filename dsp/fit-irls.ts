/**
 * The weighted least-squares machinery of the envelope fits (dsp/fit.ts, dsp/fit-saturation.ts):
 * shape models of the mean envelope power, the quasi-likelihood fit by iteratively reweighted
 * least squares (a grid over the nonlinear parameters with the linear ones in closed form,
 * dsp/fit-grid.ts, then Levenberg–Marquardt polish), and the covariance corrected for correlated samples (N_eff). The
 * derivation (model, variance function, weights, N_eff, the interval) is in the header of
 * dsp/fit.ts.
 */
import { invertSmallMatrix, solveSmallSystem } from './stats';
import { gridSearch, type GridSpec } from './fit-grid';
import type { ShapeModel } from './fit-shape';
import type { EnvelopeSeries } from './types';

/**
 * Effective number of independent envelope samples: N_eff = min(n, 2·B·D), B the one-sided
 * noise-equivalent bandwidth of the envelope low-pass (Hz), D = n·Δt the span the n samples
 * cover (s). Derivation in the header of dsp/fit.ts.
 */
export function effectiveSampleCount(n: number, sampleSpacingS: number, bandwidthHz: number): number {
  return Math.min(n, 2 * bandwidthHz * n * sampleSpacingS);
}

export interface FitState {
  /** Full parameter vector: [ln L, nonlinear..., N²]. */
  params: Float64Array;
  isBackgroundFixed: boolean;
  rss: number;
}

export interface Prepared {
  t: Float64Array;
  y: Float64Array;
  n: number;
  spacingS: number;
  nEff: number;
  /** One-sided noise-equivalent bandwidth of the envelope low-pass, Hz. */
  bandwidthHz: number;
  /** Work arrays of the fits to this series (allocated once, not on every step). */
  work: FitWork;
}

/** Most parameters of a fit: ln L, at most three nonlinear ones (normalEquations), N². */
const MAX_PARAMS = 5;

/**
 * Work arrays of the polish and of the evaluations below, which run one at a time and have read
 * them before they return (a model keeps its own copy of the parameters it remembers): the normal
 * equations and a Levenberg–Marquardt step for at most MAX_PARAMS parameters, the nonlinear
 * parameters of an evaluation, and the lower triangle of the normal equations' products.
 */
interface FitWork {
  jtj: Float64Array;
  jtr: Float64Array;
  trialJtj: Float64Array;
  trialJtr: Float64Array;
  trial: Float64Array;
  stepA: Float64Array;
  stepB: Float64Array;
  theta: Float64Array;
  lower: Float64Array;
}

function createFitWork(): FitWork {
  return {
    jtj: new Float64Array(MAX_PARAMS * MAX_PARAMS),
    jtr: new Float64Array(MAX_PARAMS),
    trialJtj: new Float64Array(MAX_PARAMS * MAX_PARAMS),
    trialJtr: new Float64Array(MAX_PARAMS),
    trial: new Float64Array(MAX_PARAMS),
    stepA: new Float64Array(MAX_PARAMS * MAX_PARAMS),
    stepB: new Float64Array(MAX_PARAMS),
    theta: new Float64Array(MAX_PARAMS - 2),
    lower: new Float64Array((MAX_PARAMS * (MAX_PARAMS + 1)) / 2),
  };
}

export function prepare(series: EnvelopeSeries): Prepared | string {
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
  return { t: series.timeS, y: series.power, n, spacingS, nEff: effectiveSampleCount(n, spacingS, series.bandwidthHz), bandwidthHz: series.bandwidthHz, work: createFitWork() };
}

/** Variance function of the envelope power: V(m) = N²(2m − N²), floored for a noise-free record. */
function varianceOf(m: number, bg: number, bgFloor: number): number {
  const b = Math.max(bg, bgFloor);
  return Math.max(b * (2 * m - b), b * b);
}

/** The nonlinear parameters θ of a full parameter vector [ln L, θ…, N²] (k of them), in the first k entries of the series' work.theta. */
function nonlinearOf(d: Prepared, params: Float64Array, k: number): Float64Array {
  for (let j = 0; j < k; j++) d.work.theta[j] = params[1 + j];
  return d.work.theta;
}

/** Weighted RSS of a full parameter vector. */
export function rssOf(d: Prepared, w: Float64Array, model: ShapeModel, params: Float64Array): number {
  const k = model.nNonlinear;
  const amp = Math.exp(params[0]);
  const bg = params[k + 1];
  const { n, y } = d;
  const g = model.evaluate(d.t, n, nonlinearOf(d, params, k), false).g;
  let rss = 0;
  for (let i = 0; i < n; i++) {
    const r = y[i] - amp * g[i] - bg;
    rss += w[i] * r * r;
  }
  return Number.isFinite(rss) ? rss : Number.POSITIVE_INFINITY;
}

/**
 * Jacobian products JᵀWJ and JᵀWr for the full parameter vector (free parameters only); returns
 * the weighted RSS at the same parameters (Infinity when not finite), from the same residuals.
 * The Jacobian's columns are amp·g (for ln L), amp·∂g/∂θ_j (at most three: the models here have
 * one to three nonlinear parameters) and 1 for a free background; their weighted products are
 * summed in scalars (a column a model lacks is 0) and unpacked into the free block.
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
  const v = model.evaluate(d.t, d.n, nonlinearOf(d, params, k), true);
  const g = v.g;
  const grad = v.grad;
  const { n, y } = d;
  const bgColumn = nFree === k + 2 ? 1 : 0;
  let s00 = 0, s10 = 0, s11 = 0, s20 = 0, s21 = 0, s22 = 0, s30 = 0, s31 = 0, s32 = 0, s33 = 0;
  let s40 = 0, s41 = 0, s42 = 0, s43 = 0, s44 = 0, r0 = 0, r1 = 0, r2 = 0, r3 = 0, r4 = 0;
  let rss = 0;
  // The common cases (background fixed; one to three nonlinear parameters) sum only the products
  // they have: the same sums in the same order as the general loop, without its zero columns.
  if (bgColumn === 0 && k === 1) {
    for (let i = 0; i < n; i++) {
      const wi = w[i];
      const x0 = amp * g[i];
      const x1 = amp * grad[i];
      const r = y[i] - x0 - bg;
      rss += wi * r * r;
      const w0 = wi * x0;
      const w1 = wi * x1;
      r0 += w0 * r;
      r1 += w1 * r;
      s00 += w0 * x0;
      s10 += w1 * x0;
      s11 += w1 * x1;
    }
  } else if (bgColumn === 0 && k === 2) {
    for (let i = 0; i < n; i++) {
      const wi = w[i];
      const x0 = amp * g[i];
      const x1 = amp * grad[2 * i];
      const x2 = amp * grad[2 * i + 1];
      const r = y[i] - x0 - bg;
      rss += wi * r * r;
      const w0 = wi * x0;
      const w1 = wi * x1;
      const w2 = wi * x2;
      r0 += w0 * r;
      r1 += w1 * r;
      r2 += w2 * r;
      s00 += w0 * x0;
      s10 += w1 * x0;
      s11 += w1 * x1;
      s20 += w2 * x0;
      s21 += w2 * x1;
      s22 += w2 * x2;
    }
  } else if (bgColumn === 0 && k === 3) {
    for (let i = 0; i < n; i++) {
      const wi = w[i];
      const x0 = amp * g[i];
      const x1 = amp * grad[3 * i];
      const x2 = amp * grad[3 * i + 1];
      const x3 = amp * grad[3 * i + 2];
      const r = y[i] - x0 - bg;
      rss += wi * r * r;
      const w0 = wi * x0;
      const w1 = wi * x1;
      const w2 = wi * x2;
      const w3 = wi * x3;
      r0 += w0 * r;
      r1 += w1 * r;
      r2 += w2 * r;
      r3 += w3 * r;
      s00 += w0 * x0;
      s10 += w1 * x0;
      s11 += w1 * x1;
      s20 += w2 * x0;
      s21 += w2 * x1;
      s22 += w2 * x2;
      s30 += w3 * x0;
      s31 += w3 * x1;
      s32 += w3 * x2;
      s33 += w3 * x3;
    }
  } else for (let i = 0; i < n; i++) {
    const wi = w[i];
    const x0 = amp * g[i];
    const x1 = amp * grad[i * k];
    const x2 = k > 1 ? amp * grad[i * k + 1] : 0;
    const x3 = k > 2 ? amp * grad[i * k + 2] : 0;
    const x4 = bgColumn;
    const r = y[i] - x0 - bg;
    rss += wi * r * r;
    const w0 = wi * x0;
    const w1 = wi * x1;
    const w2 = wi * x2;
    const w3 = wi * x3;
    const w4 = wi * x4;
    r0 += w0 * r;
    r1 += w1 * r;
    r2 += w2 * r;
    r3 += w3 * r;
    r4 += w4 * r;
    s00 += w0 * x0;
    s10 += w1 * x0;
    s11 += w1 * x1;
    s20 += w2 * x0;
    s21 += w2 * x1;
    s22 += w2 * x2;
    s30 += w3 * x0;
    s31 += w3 * x1;
    s32 += w3 * x2;
    s33 += w3 * x3;
    s40 += w4 * x0;
    s41 += w4 * x1;
    s42 += w4 * x2;
    s43 += w4 * x3;
    s44 += w4 * x4;
  }
  // Lower triangle of the 5 × 5 products, row by row; free parameter a is column a (the background, when free, column 4).
  const lower = d.work.lower;
  lower[0] = s00;
  lower[1] = s10;
  lower[2] = s11;
  lower[3] = s20;
  lower[4] = s21;
  lower[5] = s22;
  lower[6] = s30;
  lower[7] = s31;
  lower[8] = s32;
  lower[9] = s33;
  lower[10] = s40;
  lower[11] = s41;
  lower[12] = s42;
  lower[13] = s43;
  lower[14] = s44;
  for (let a = 0; a < nFree; a++) {
    const ca = a <= k ? a : 4;
    jtr[a] = ca === 0 ? r0 : ca === 1 ? r1 : ca === 2 ? r2 : ca === 3 ? r3 : r4;
    for (let b = 0; b <= a; b++) {
      const cb = b <= k ? b : 4;
      const value = lower[(ca * (ca + 1)) / 2 + cb];
      jtj[a * nFree + b] = value;
      jtj[b * nFree + a] = value;
    }
  }
  return Number.isFinite(rss) ? rss : Number.POSITIVE_INFINITY;
}

/**
 * One damped Gauss–Newton step on the leading `m` of `size` parameters: solves
 * (A + λ·diag A)·δ = g on that block and adds δ to params. False when the block is singular.
 * `a` and `b` are scratch of at least m² and m values.
 */
function levenbergStep(jtj: Float64Array, jtr: Float64Array, size: number, m: number, lambda: number, params: Float64Array, a: Float64Array, b: Float64Array): boolean {
  for (let r = 0; r < m; r++) for (let c = 0; c < m; c++) a[r * m + c] = jtj[r * size + c];
  for (let j = 0; j < m; j++) a[j * m + j] *= 1 + lambda;
  for (let r = 0; r < m; r++) b[r] = jtr[r];
  if (!solveSmallSystem(a, b, m)) return false;
  for (let r = 0; r < m; r++) params[r] += b[r];
  return true;
}

/** A polish stops once a step lowers the RSS by no more than this fraction. */
const POLISH_TOLERANCE = 1e-9;
/**
 * A polish also stops, without taking it, before a step whose predicted drop (predictedDrop) is
 * below this fraction of the RSS: 1 % of POLISH_TOLERANCE, so a step the tolerance would still
 * have taken is taken (near the optimum Gauss–Newton drops shrink quadratically, 1e-8 → 1e-16, and
 * the evaluation of that last, negligible step is what this saves).
 */
const PREDICTED_DROP_TOLERANCE = 0.01 * POLISH_TOLERANCE;

/**
 * The drop in weighted RSS that the quadratic model of the normal equations predicts for moving
 * the leading `size` parameters from `from` to `to`: 2·δᵀJᵀWr − δᵀJᵀWJδ.
 */
function predictedDrop(jtj: Float64Array, jtr: Float64Array, size: number, from: Float64Array, to: Float64Array): number {
  let drop = 0;
  for (let a = 0; a < size; a++) {
    const da = to[a] - from[a];
    let row = 0;
    for (let b = 0; b < size; b++) row += jtj[a * size + b] * (to[b] - from[b]);
    drop += da * (2 * jtr[a] - row);
  }
  return drop;
}

/**
 * Levenberg–Marquardt polish of all parameters (Marquardt 1963), N² kept ≥ 0. Each trial point is
 * evaluated with its normal equations, so an accepted step needs no second pass over the data.
 * Returns the fraction by which it lowered the RSS. `isSettled`, when given, is asked before each
 * lightly damped first attempt with the RSS and the drop that step's quadratic model predicts;
 * true ends the polish there, the step not taken (for a caller that needs the RSS only to make a
 * decision that no drop of that order could change).
 */
export function polish(
  d: Prepared,
  w: Float64Array,
  model: ShapeModel,
  state: FitState,
  maxIter = 100,
  isSettled?: (rss: number, predicted: number) => boolean,
): number {
  const k = model.nNonlinear;
  const nFree = state.isBackgroundFixed ? k + 1 : k + 2;
  // The series' work arrays, used from their start (a polish runs to its end before another begins).
  let { jtj, jtr, trialJtj, trialJtr } = d.work;
  const { trial, stepA, stepB } = d.work;
  let lambda = 1e-3;
  let rss = normalEquations(d, w, model, state.params, nFree, jtj, jtr);
  const startRss = rss;
  for (let iter = 0; iter < maxIter; iter++) {
    let isImproved = false;
    for (let attempt = 0; attempt < 12; attempt++) {
      trial.set(state.params);
      if (!levenbergStep(jtj, jtr, nFree, nFree, lambda, trial, stepA, stepB)) {
        lambda *= 10;
        continue;
      }
      if (!state.isBackgroundFixed && trial[k + 1] < 0) {
        // Active set: the background would go negative, so hold it at 0 and step in the others.
        trial.set(state.params);
        trial[k + 1] = 0;
        if (!levenbergStep(jtj, jtr, nFree, nFree - 1, lambda, trial, stepA, stepB)) {
          lambda *= 10;
          continue;
        }
      }
      // A first, lightly damped step whose quadratic model lowers the RSS by less than
      // PREDICTED_DROP_TOLERANCE would end the polish once evaluated: end it here, not taken.
      if (attempt === 0 && lambda <= 1e-3) {
        const predicted = predictedDrop(jtj, jtr, nFree, state.params, trial);
        if (predicted <= PREDICTED_DROP_TOLERANCE * rss || isSettled?.(rss, predicted) === true) break;
      }
      // The last iteration's trials need only their RSS: no step follows them.
      const rssTrial = iter === maxIter - 1 ? rssOf(d, w, model, trial) : normalEquations(d, w, model, trial, nFree, trialJtj, trialJtr);
      if (rssTrial < rss) {
        const drop = (rss - rssTrial) / rss;
        for (let j = 0; j < state.params.length; j++) state.params[j] = trial[j];
        rss = rssTrial;
        [jtj, trialJtj] = [trialJtj, jtj];
        [jtr, trialJtr] = [trialJtr, jtr];
        lambda = Math.max(lambda / 3, 1e-12);
        isImproved = drop > POLISH_TOLERANCE;
        break;
      }
      lambda *= 4;
    }
    if (!isImproved) break;
  }
  state.rss = rss;
  return startRss > 0 && Number.isFinite(startRss) ? (startRss - rss) / startRss : 0;
}

/** Most samples the grid search looks at; longer series are block-averaged for it. */
const GRID_MAX_SAMPLES = 48;

/**
 * The grid search on a block-averaged copy of the series (`thin`: at most GRID_MAX_SAMPLES blocks,
 * blockSeries; null for a series that short already) under the weights `w` summed per block. The
 * grid only has to land in the right basin, which the averaged curve shows as well; the
 * Levenberg–Marquardt polish that follows uses every sample (and sets the state's RSS: the one
 * returned is the block means'). Cost falls from (grid points × n) to (grid points ×
 * GRID_MAX_SAMPLES) shape evaluations.
 */
function gridSearchThinned(d: Prepared, thin: BlockSeries | null, w: Float64Array, model: ShapeModel, grid: GridSpec, fixedBg: number | null): FitState | null {
  const best = thin === null ? gridSearch(d, w, model, grid, fixedBg) : gridSearch(thin.d, blockWeights(thin, w), model, grid, fixedBg);
  return best === null ? null : { params: best.params, isBackgroundFixed: fixedBg !== null, rss: best.rss };
}

/**
 * Most samples the starts of the flexible saturation fit look at (block means, the curve without
 * the kernel); the one start polished fully uses every sample through the kernel.
 */
export const START_MAX_SAMPLES = 80;

/** A block-averaged copy of a series: at most maxSamples blocks of `block` samples (the last may be shorter), mean time and mean power. */
interface BlockSeries {
  d: Prepared;
  block: number;
  /** Length of the series averaged. */
  seriesLength: number;
}

/** The block means of a series' times and powers (BlockSeries); its weights are summed by blockWeights. */
function blockSeries(d: Prepared, maxSamples: number): BlockSeries {
  const { t: t0, y: y0 } = d;
  const block = Math.ceil(d.n / maxSamples);
  const m = Math.ceil(d.n / block);
  const t = new Float64Array(m);
  const y = new Float64Array(m);
  for (let j = 0; j < m; j++) {
    const i0 = j * block;
    const i1 = Math.min(d.n, i0 + block);
    let st = 0;
    let sy = 0;
    for (let i = i0; i < i1; i++) {
      st += t0[i];
      sy += y0[i];
    }
    t[j] = st / (i1 - i0);
    y[j] = sy / (i1 - i0);
  }
  return { d: { t, y, n: m, spacingS: d.spacingS * block, nEff: d.nEff, bandwidthHz: d.bandwidthHz, work: d.work }, block, seriesLength: d.n };
}

/** The weights of a block-averaged series: the sum of each block's. */
function blockWeights(b: BlockSeries, w: Float64Array): Float64Array {
  const m = b.d.n;
  const wm = new Float64Array(m);
  for (let j = 0; j < m; j++) {
    const i0 = j * b.block;
    const i1 = Math.min(b.seriesLength, i0 + b.block);
    let sw = 0;
    for (let i = i0; i < i1; i++) sw += w[i];
    wm[j] = sw;
  }
  return wm;
}

/** A block-averaged copy of a series and its weights (at most maxSamples blocks: mean time, mean power, summed weight). */
export function blockMeans(d: Prepared, w: Float64Array, maxSamples: number): { d: Prepared; w: Float64Array } {
  const b = blockSeries(d, maxSamples);
  return { d: b.d, w: blockWeights(b, w) };
}

/** Updates the IRLS weights 1/V(m̂) from the current parameters. */
function updateWeights(d: Prepared, model: ShapeModel, state: FitState, w: Float64Array, bgFloor: number): void {
  const k = model.nNonlinear;
  const amp = Math.exp(state.params[0]);
  const bg = state.params[k + 1];
  const n = d.n;
  const g = model.evaluate(d.t, n, nonlinearOf(d, state.params, k), false).g;
  for (let i = 0; i < n; i++) w[i] = 1 / varianceOf(amp * g[i] + bg, bg, bgFloor);
  // Normalise so that RSS values stay of order n (the scale of w is irrelevant to the estimates).
  let mean = 0;
  for (let i = 0; i < n; i++) mean += w[i];
  mean /= n;
  for (let i = 0; i < n; i++) w[i] /= mean;
}

export interface IrlsResult {
  state: FitState;
  weights: Float64Array;
  /** Covariance of the free parameters, corrected for correlation (φ̂·(JᵀWJ)⁻¹·n/N_eff). */
  cov: Float64Array | null;
  nFree: number;
  dispersion: number;
  /** Effective number of independent samples behind cov (N_eff, or fewer when the residuals are correlated for longer). */
  nEff: number;
}

/** Whether grid value `g` (one of `values`, ascending) is a value of `values` next to `x` (either side of it, or at it). */
function isNextOnGrid(values: Float64Array, g: number, x: number): boolean {
  let below = 0;
  while (below + 1 < values.length && values[below + 1] <= x) below++;
  return g === values[below] || (below + 1 < values.length && g === values[below + 1]);
}

/** Iteratively reweighted fit: grid initialisation, LM polish, reweighting, covariance. */
export function fitIrls(
  d: Prepared,
  model: ShapeModel,
  grid: GridSpec,
  fixedBg: number | null,
  start: FitState | null,
  gridModel: ShapeModel = model,
): IrlsResult | null {
  const { n, y } = d;
  let maxY = 0;
  for (let i = 0; i < n; i++) maxY = Math.max(maxY, y[i]);
  // Numerical guard only: keeps V(m) > 0 for a record with no noise at all.
  const bgFloor = 1e-12 * maxY;
  const w = new Float64Array(n);
  // First pass: weights of a constant relative error, 1/y² smoothed (the log-fit weighting), then IRLS.
  for (let i = 0; i < n; i++) {
    const lo = Math.max(0, i - 2);
    const hi = Math.min(n - 1, i + 2);
    let s = 0;
    for (let j = lo; j <= hi; j++) s += y[j];
    const ym = Math.max(s / (hi - lo + 1), 1e-9 * maxY, 1e-300);
    w[i] = 1 / (ym * ym);
  }
  let mean = 0;
  for (let i = 0; i < n; i++) mean += w[i];
  for (let i = 0; i < n; i++) w[i] /= mean / n;
  // The grid's block means, made once for the grid search and the regrid below.
  const thin = start === null && n > GRID_MAX_SAMPLES ? blockSeries(d, GRID_MAX_SAMPLES) : null;
  let state = start ?? gridSearchThinned(d, thin, w, gridModel, grid, fixedBg);
  if (state === null) return null;
  if (fixedBg !== null) state.params[model.nNonlinear + 1] = fixedBg;
  if (start === null && gridModel !== model) {
    // The grid's cheaper model (the curve without the kernel) takes the first polish and the first
    // reweighting, which start far from the optimum; the model itself then starts close to it.
    polish(d, w, gridModel, state);
    updateWeights(d, gridModel, state, w, bgFloor);
  }
  polish(d, w, model, state);
  const before = new Float64Array(state.params.length);
  for (let pass = 0; pass < 8; pass++) {
    before.set(state.params);
    updateWeights(d, model, state, w, bgFloor);
    // The exponential grid is cheap: search it again under the IRLS weights in case they move
    // the optimum to another basin. (The saturation grid is 20× larger; its LM polish suffices.)
    if (pass === 0 && start === null && model.nNonlinear === 1) {
      const regrid = gridSearchThinned(d, thin, w, model, grid, fixedBg);
      // A regrid landing on the grid value next to the current parameter is in its basin: the
      // polish below reaches the same optimum from either, so only one is polished.
      if (regrid !== null && !isNextOnGrid(grid.values[0], regrid.params[1], state.params[1])) {
        polish(d, w, model, regrid);
        state.rss = rssOf(d, w, model, state.params);
        if (regrid.rss < state.rss) state = regrid;
      }
    }
    const drop = polish(d, w, model, state);
    let change = 0;
    for (let j = 1; j <= model.nNonlinear; j++) change = Math.max(change, Math.abs(state.params[j] - before[j]) / (Math.abs(before[j]) + 1e-9));
    // Converged when the parameters stand still, or when the new weights moved the optimum by less
    // than the polish resolves (a rate near zero keeps a relative change above any fixed bound);
    // the first pass's regrid may already have polished under the new weights.
    if (change < 1e-7 || (pass > 0 && drop <= POLISH_TOLERANCE)) break;
  }
  return { state, weights: w, ...covarianceAt(d, model, state, w, fixedBg) };
}

/**
 * Covariance of the free parameters at a fitted state, corrected for correlation
 * (φ̂·(JᵀWJ)⁻¹·n/N_eff, or the residuals' correlation time when longer; header of dsp/fit.ts).
 */
export function covarianceAt(
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
 * Σ e_i·e_{i+lag} over the first n values of e, for lag and lag + 1 at once (into out[0], out[1]):
 * each sum in its own order, the two chains of additions overlapping.
 */
function lagProducts(e: Float64Array, n: number, lag: number, out: Float64Array): void {
  let c = 0;
  let c1 = 0;
  let i = 0;
  for (; i + lag + 1 < n; i++) {
    const ei = e[i];
    c += ei * e[i + lag];
    c1 += ei * e[i + lag + 1];
  }
  if (i + lag < n) c += e[i] * e[i + lag];
  out[0] = c;
  out[1] = c1;
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
  const { n, y } = d;
  const g = model.evaluate(d.t, n, nonlinearOf(d, params, k), false).g;
  const e = new Float64Array(n);
  let c0 = 0;
  for (let i = 0; i < n; i++) {
    e[i] = (y[i] - amp * g[i] - bg) * Math.sqrt(w[i]);
    c0 += e[i] * e[i];
  }
  if (!(c0 > 0)) return 1;
  let tau = -1;
  const maxLag = Math.floor(n / 4);
  const lags = new Float64Array(2);
  for (let m = 0; 2 * m + 1 <= maxLag; m++) {
    lagProducts(e, n, 2 * m, lags);
    const pair = (m === 0 ? 1 : lags[0] / c0) + lags[1] / c0;
    if (!(pair > 0)) break;
    tau += 2 * pair;
  }
  return Math.max(1, tau);
}
