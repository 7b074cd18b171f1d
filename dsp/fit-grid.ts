/**
 * The grid search of the envelope fits (dsp/fit-irls.ts): the weighted RSS at every point of a
 * grid over the nonlinear parameters of a shape model, the linear ones (amplitude L, background
 * N²) solved in closed form at each, coarse first and then refined around the best coarse point.
 */
import type { ShapeModel } from './fit-shape';

/** The samples a grid search reads: times t and powers y, the first n of each. */
export interface GridSeries {
  t: Float64Array;
  y: Float64Array;
  n: number;
}

/** Sums of a series and its weights that do not depend on the shape: Σw, Σwy, Σwy². */
interface DataSums {
  sw: number;
  sy: number;
  swyy: number;
}

function dataSums(d: GridSeries, w: Float64Array): DataSums {
  let sw = 0;
  let sy = 0;
  let swyy = 0;
  const { n, y } = d;
  for (let i = 0; i < n; i++) {
    sw += w[i];
    sy += w[i] * y[i];
    swyy += w[i] * y[i] * y[i];
  }
  return { sw, sy, swyy };
}

/**
 * For fixed nonlinear parameters: weighted linear fit of y ≈ L·g + N² with L > 0, N² ≥ 0 (or N²
 * fixed). Writes L and N² into `out` (the grid takes the logarithm of the best L only); returns the weighted RSS (Infinity if L ≤ 0), expanded
 * from the same sums (Σwy² − 2LΣwgy − 2N²Σwy + L²Σwg² + 2LN²Σwg + N⁴Σw, one pass over the data
 * for the sums with g; the others are the caller's, `data`). The expansion loses the digits the
 * RSS has below Σwy²·1e-16, which does not matter to the grid it ranks (the polish that follows
 * works on the residuals).
 */
function solveLinear(
  d: GridSeries,
  w: Float64Array,
  g: Float64Array,
  fixedBg: number | null,
  data: DataSums,
  out: { amp: number; bg: number },
): number {
  const { sw, sy, swyy } = data;
  let sg = 0;
  let sgg = 0;
  let sgy = 0;
  const { n, y } = d;
  for (let i = 0; i < n; i++) {
    const wg = w[i] * g[i];
    sg += wg;
    sgg += wg * g[i];
    sgy += wg * y[i];
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
  const rss = swyy - 2 * amp * sgy - 2 * bg * sy + amp * amp * sgg + 2 * amp * bg * sg + bg * bg * sw;
  out.amp = amp;
  out.bg = bg;
  return Math.max(0, rss);
}

export interface GridSpec {
  /** Candidate values of each nonlinear parameter. */
  values: Float64Array[];
}

/**
 * The grid search looks first at every GRID_COARSE-th value of each parameter, then at every
 * value within GRID_COARSE − 1 steps of the best of those: the RSS over a grid whose steps are
 * small against the width of its basin (the grids below) varies smoothly, so its least value lies
 * next to the best coarse point, and only a dip narrower than GRID_COARSE steps can be missed.
 */
const GRID_COARSE = 3;

/** A grid search under way: its series, model and grid, and the best point so far (its grid position, linear parameters and RSS). */
interface GridScan {
  d: GridSeries;
  w: Float64Array;
  model: ShapeModel;
  values: Float64Array[];
  fixedBg: number | null;
  data: DataSums;
  theta: Float64Array;
  at: Int32Array;
  lin: { amp: number; bg: number };
  bestRss: number;
  bestAmp: number;
  bestBg: number;
  bestAt: Int32Array;
}

/** Every point of the box lo..hi (inclusive) taking every step-th value of each parameter. */
function searchBox(scan: GridScan, lo: Int32Array, hi: Int32Array, step: number): void {
  const { d, w, model, values, fixedBg, data, theta, at, lin } = scan;
  const k = model.nNonlinear;
  at.set(lo);
  for (;;) {
    for (let j = 0; j < k; j++) theta[j] = values[j][at[j]];
    const rss = solveLinear(d, w, model.evaluate(d.t, d.n, theta, false).g, fixedBg, data, lin);
    if (rss < scan.bestRss) {
      scan.bestRss = rss;
      scan.bestAmp = lin.amp;
      scan.bestBg = lin.bg;
      scan.bestAt.set(at);
    }
    let j = 0;
    while (j < k && at[j] + step > hi[j]) at[j] = lo[j++];
    if (j === k) return;
    at[j] += step;
  }
}

/**
 * Grid over the nonlinear parameters (coarse, then refined: GRID_COARSE) with the linear ones in
 * closed form (N² fixed at fixedBg, or fitted ≥ 0): the best point's full parameter vector
 * [ln L, θ…, N²] and weighted RSS, or null when no point has L > 0.
 */
export function gridSearch(
  d: GridSeries,
  w: Float64Array,
  model: ShapeModel,
  grid: GridSpec,
  fixedBg: number | null,
): { params: Float64Array; rss: number } | null {
  const k = model.nNonlinear;
  // The whole grid, then the box within GRID_COARSE − 1 steps of its best point.
  const lo = new Int32Array(k);
  const hi = new Int32Array(k);
  for (let j = 0; j < k; j++) {
    if (grid.values[j].length === 0) return null;
    hi[j] = grid.values[j].length - 1;
  }
  const scan: GridScan = {
    d,
    w,
    model,
    values: grid.values,
    fixedBg,
    data: dataSums(d, w),
    theta: new Float64Array(k),
    at: new Int32Array(k),
    lin: { amp: 0, bg: 0 },
    bestRss: Number.POSITIVE_INFINITY,
    bestAmp: 0,
    bestBg: 0,
    bestAt: new Int32Array(k),
  };
  searchBox(scan, lo, hi, GRID_COARSE);
  if (scan.bestRss === Number.POSITIVE_INFINITY) return null;
  const { bestAt } = scan;
  for (let j = 0; j < k; j++) {
    lo[j] = Math.max(0, bestAt[j] - GRID_COARSE + 1);
    hi[j] = Math.min(grid.values[j].length - 1, bestAt[j] + GRID_COARSE - 1);
  }
  searchBox(scan, lo, hi, 1);
  const params = new Float64Array(k + 2);
  params[0] = Math.log(scan.bestAmp);
  for (let j = 0; j < k; j++) params[1 + j] = grid.values[j][bestAt[j]];
  params[k + 1] = scan.bestBg;
  return { params, rss: scan.bestRss };
}
