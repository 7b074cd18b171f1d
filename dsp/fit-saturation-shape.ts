/**
 * The saturation shape models of the growth-into-limit fit (dsp/fit-saturation.ts): the
 * Stuart–Landau and generalised saturation curves of the envelope power (or amplitude), and the
 * same curves seen through the envelope's own kernel, each evaluated over a whole series at a time
 * (dsp/fit-shape.ts).
 */
import { memoised, RESTART_STEPS, ShapeBuffers, UniformPrefix, type ShapeModel, type ShapeValues } from './fit-shape';
import type { EnvelopeSeries } from './types';

/**
 * g = q^(2/p), q = logistic(p s (t − tc)) = 1/(1 + e^(−z)); θ = [s, tc] with p fixed (2 =
 * Stuart–Landau, g = q), or [s, tc, ln p]. q, 1 − q and ln q come from the one exponential
 * e^(−|z|), so nothing overflows; below the knee (2/p)·ln q is written 2 s (t − tc) − (2/p)·ln(1 +
 * e^z), which stays exact as p grows without bound (a knee sharper than any sample resolves:
 * the limit is an exponential up to t_c and the level A∞² after it). On a uniform grid of times
 * e^(−|z|) falls by the same factor e^(−|p s|·Δ) per sample on either side of t_c, so it is one
 * exponential per side and a running product (values below 1e-300 taken as 0), restarted from
 * an exact exponential every RESTART_STEPS samples. With `isAmplitude` the model gives the
 * amplitude √g = e^(u/2) (u = (2/p)·ln q; √q for Stuart–Landau) and ∂√g/∂θ = √g·(∂g/∂θ)/(2g)
 * instead: what a kernel sums (smoothedShape), without a square root and a division per time.
 */
class SaturationShape implements ShapeModel {
  readonly nNonlinear: number;
  private readonly fixedP: number | null;
  private readonly isAmplitude: boolean;
  private readonly buffers: ShapeBuffers;
  private readonly prefix = new UniformPrefix();

  constructor(fixedP: number | null, isAmplitude: boolean, capacity: number) {
    this.fixedP = fixedP;
    this.isAmplitude = isAmplitude;
    this.nNonlinear = fixedP === null ? 3 : 2;
    this.buffers = new ShapeBuffers(this.nNonlinear, capacity);
  }

  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues {
    const { fixedP, isAmplitude, nNonlinear: nn } = this;
    const v = this.buffers.get(n, withGrad);
    const s = theta[0];
    const tc = theta[1];
    const p = fixedP === null ? Math.exp(theta[2]) : fixedP;
    const isLandau = p === 2 && fixedP !== null;
    const ps = p * s;
    const twoOverP = 2 / p;
    // Locals for the buffers: the loops below then read no property per time. e^(−|z|) is written
    // into the values' buffer, each time's read just before its value replaces it.
    const values = v.g;
    const e0 = values;
    const grad = v.grad;
    const from = steppedDecay(t, n, this.prefix.of(t, n), Math.abs(ps), tc, e0);
    for (let i = from; i < n; i++) e0[i] = Math.exp(-Math.abs(ps * (t[i] - tc)));
    if (isLandau) {
      // Stuart–Landau, g = q (or √q): its own loop, with no logarithm or exponential per time.
      for (let i = 0; i < n; i++) {
        const dt = t[i] - tc;
        const e = e0[i];
        const inv = 1 / (1 + e);
        const isUpper = ps * dt >= 0;
        const g = isAmplitude ? Math.sqrt(isUpper ? inv : e * inv) : isUpper ? inv : e * inv;
        values[i] = g;
        if (!withGrad) continue;
        // ∂g/∂s = 2g·(1 − q)·(t − tc), ∂g/∂tc = −2g·(1 − q)·s; those of √g are √g·(1 − q)·(t − tc), −√g·(1 − q)·s.
        const scale = isAmplitude ? g : 2 * g;
        const oneMinusQ = isUpper ? e * inv : inv;
        grad[2 * i] = scale * oneMinusQ * dt;
        grad[2 * i + 1] = -(scale * oneMinusQ * s);
      }
      return v;
    }
    for (let i = 0; i < n; i++) {
      const dt = t[i] - tc;
      const z = ps * dt;
      const e = e0[i];
      const inv = 1 / (1 + e);
      const isUpper = z >= 0;
      const oneMinusQ = isUpper ? e * inv : inv;
      // u = (2/p)·ln q.
      const tail = twoOverP * Math.log1p(e);
      const u = isUpper ? -tail : 2 * s * dt - tail;
      const g = Math.exp(isAmplitude ? 0.5 * u : u);
      values[i] = g;
      if (!withGrad) continue;
      // ∂g/∂s and ∂g/∂tc as for Stuart–Landau above; ∂g/∂ln p = g·(2·(1 − q)·s·(t − tc) − u), halved for √g.
      const scale = isAmplitude ? g : 2 * g;
      grad[i * nn] = scale * oneMinusQ * dt;
      grad[i * nn + 1] = -(scale * oneMinusQ * s);
      if (fixedP === null) grad[i * nn + 2] = (isAmplitude ? 0.5 * g : g) * (2 * oneMinusQ * s * dt - u);
    }
    return v;
  }
}

/** The saturation shape (SaturationShape), with a memory of its last evaluation; buffers for `capacity` times (ShapeBuffers). */
export function saturationShape(fixedP: number | null, isAmplitude = false, capacity = 0): ShapeModel {
  return memoised(new SaturationShape(fixedP, isAmplitude, capacity));
}

/** Below this a running product of exponentials is taken as 0 (no subnormal arithmetic). */
const TINY = 1e-300;

/**
 * e^(−rate·|t_i − tc|) for the first m times of `t` (a uniform grid, UniformPrefix) into `out`,
 * by running products outward from tc; returns how many it wrote (0 when m < 3 or the inputs are
 * not finite: the caller computes the rest directly).
 */
function steppedDecay(t: Float64Array, n: number, m: number, rate: number, tc: number, out: Float64Array): number {
  if (m < 3) return 0;
  const step = (t[m - 1] - t[0]) / (m - 1);
  const first = Math.ceil((tc - t[0]) / step);
  if (!Number.isFinite(first) || !Number.isFinite(rate)) return 0;
  const ic = Math.min(m, Math.max(0, first));
  const ratio = Math.exp(-rate * step);
  // Blocks of RESTART_STEPS samples outward from tc, each opened by an exact exponential.
  for (let i0 = ic; i0 < m; i0 += RESTART_STEPS) {
    let e = Math.exp(-rate * Math.abs(t[i0] - tc));
    out[i0] = e;
    const i1 = Math.min(m, i0 + RESTART_STEPS);
    for (let i = i0 + 1; i < i1; i++) {
      e *= ratio;
      if (e < TINY) e = 0;
      out[i] = e;
    }
  }
  for (let i0 = ic - 1; i0 >= 0; i0 -= RESTART_STEPS) {
    let e = Math.exp(-rate * Math.abs(tc - t[i0]));
    out[i0] = e;
    const i1 = Math.max(-1, i0 - RESTART_STEPS);
    for (let i = i0 - 1; i > i1; i--) {
      e *= ratio;
      if (e < TINY) e = 0;
      out[i] = e;
    }
  }
  return Math.min(m, n);
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
 * The taps of a kernel as the smoothed models sum them (h, Σh = 1) and their tap planner: built
 * once per fit and shared by its models, which all read the same series. Long kernels are merged
 * into at most MAX_KERNEL_TAPS groups, each at its weighted centre (a midpoint rule: the amplitude
 * is smooth over one group, whose error is second order in its width).
 */
export class KernelTaps {
  readonly h: Float64Array;
  readonly planner: TapPlanner;

  constructor(kernel: EnvelopeKernel) {
    const n = kernel.weights.length;
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
    this.h = h;
    this.planner = new TapPlanner(offsets, group === 1 ? kernel.spacingS : 0);
  }
}

/**
 * The model seen through an amplitude kernel: G(t) = (Σ h_k √g(t − τ_k))², with
 * ∂G/∂θ = 2·(Σ h_k √g_k)·Σ h_k ∂√g_k/∂θ. L·G is then the mean power of the smoothed amplitude
 * √L·√g. The amplitude model `root` (√g and ∂√g/∂θ: saturationShape with isAmplitude) is
 * evaluated once at each time the taps need (TapPlan), and each sample sums its taps from there.
 */
class SmoothedShape implements ShapeModel {
  readonly nNonlinear: number;
  private readonly root: ShapeModel;
  private readonly kernel: KernelTaps;
  private readonly buffers: ShapeBuffers;

  constructor(root: ShapeModel, kernel: KernelTaps) {
    this.root = root;
    this.kernel = kernel;
    // The saturation shapes have two or three nonlinear parameters; the tap loops below sum at most three.
    this.nNonlinear = root.nNonlinear;
    this.buffers = new ShapeBuffers(root.nNonlinear);
  }

  evaluate(t: Float64Array, count: number, theta: Float64Array, withGrad: boolean): ShapeValues {
    const nn = this.nNonlinear;
    const h = this.kernel.h;
    const taps = h.length;
    const plan = this.kernel.planner.planOf(t, count);
    const at = this.root.evaluate(plan.times, plan.times.length, theta, withGrad);
    const r = at.g;
    const rGrad = at.grad;
    const v = this.buffers.get(count, withGrad);
    const values = v.g;
    const grad = v.grad;
    const { origin, dir } = plan;
    if (!withGrad) tapSums(h, r, origin, dir, count, values);
    else if (nn === 2) tapSumsWithGrad2(h, r, rGrad, origin, dir, count, values, grad);
    else if (nn === 3) tapSumsWithGrad3(h, r, rGrad, origin, dir, count, values, grad);
    else {
      for (let i = 0; i < count; i++) {
        let amp = 0;
        for (let k = 0; k < taps; k++) amp += h[k] * r[origin[i] + dir * k];
        values[i] = amp * amp;
        for (let j = 0; j < nn; j++) {
          let a = 0;
          for (let k = 0; k < taps; k++) a += h[k] * rGrad[(origin[i] + dir * k) * nn + j];
          grad[i * nn + j] = 2 * amp * a;
        }
      }
    }
    return v;
  }
}

/*
 * The tap sums below take two samples at a time (i and j = i + 1, or i again for the last one):
 * each sum still adds its taps in order, k ascending, and the two samples' sums are independent
 * chains of additions that the processor overlaps. Summed one sample at a time, each tap waited
 * for the previous tap's addition.
 */

/** values[i] = (Σ_k h_k·r[origin[i] + dir·k])². */
function tapSums(h: Float64Array, r: Float64Array, origin: Int32Array, dir: number, count: number, values: Float64Array): void {
  const taps = h.length;
  for (let i = 0; i < count; i += 2) {
    const j = Math.min(i + 1, count - 1);
    const oi = origin[i];
    const oj = origin[j];
    let ampI = 0;
    let ampJ = 0;
    for (let k = 0; k < taps; k++) {
      const hk = h[k];
      ampI += hk * r[oi + dir * k];
      ampJ += hk * r[oj + dir * k];
    }
    values[i] = ampI * ampI;
    values[j] = ampJ * ampJ;
  }
}

/** tapSums with the two derivatives: ∂G/∂θ = 2·(Σ h_k √g_k)·Σ h_k ∂√g_k/∂θ (rGrad and grad two per time). */
function tapSumsWithGrad2(h: Float64Array, r: Float64Array, rGrad: Float64Array, origin: Int32Array, dir: number, count: number, values: Float64Array, grad: Float64Array): void {
  const taps = h.length;
  for (let i = 0; i < count; i += 2) {
    const j = Math.min(i + 1, count - 1);
    const oi = origin[i];
    const oj = origin[j];
    let ampI = 0;
    let i0 = 0;
    let i1 = 0;
    let ampJ = 0;
    let j0 = 0;
    let j1 = 0;
    for (let k = 0; k < taps; k++) {
      const hk = h[k];
      const mi = oi + dir * k;
      const mj = oj + dir * k;
      ampI += hk * r[mi];
      i0 += hk * rGrad[2 * mi];
      i1 += hk * rGrad[2 * mi + 1];
      ampJ += hk * r[mj];
      j0 += hk * rGrad[2 * mj];
      j1 += hk * rGrad[2 * mj + 1];
    }
    values[i] = ampI * ampI;
    grad[2 * i] = 2 * ampI * i0;
    grad[2 * i + 1] = 2 * ampI * i1;
    values[j] = ampJ * ampJ;
    grad[2 * j] = 2 * ampJ * j0;
    grad[2 * j + 1] = 2 * ampJ * j1;
  }
}

/** tapSums with the three derivatives (rGrad and grad three per time). */
function tapSumsWithGrad3(h: Float64Array, r: Float64Array, rGrad: Float64Array, origin: Int32Array, dir: number, count: number, values: Float64Array, grad: Float64Array): void {
  const taps = h.length;
  for (let i = 0; i < count; i += 2) {
    const j = Math.min(i + 1, count - 1);
    const oi = origin[i];
    const oj = origin[j];
    let ampI = 0;
    let i0 = 0;
    let i1 = 0;
    let i2 = 0;
    let ampJ = 0;
    let j0 = 0;
    let j1 = 0;
    let j2 = 0;
    for (let k = 0; k < taps; k++) {
      const hk = h[k];
      const mi = oi + dir * k;
      const mj = oj + dir * k;
      ampI += hk * r[mi];
      i0 += hk * rGrad[3 * mi];
      i1 += hk * rGrad[3 * mi + 1];
      i2 += hk * rGrad[3 * mi + 2];
      ampJ += hk * r[mj];
      j0 += hk * rGrad[3 * mj];
      j1 += hk * rGrad[3 * mj + 1];
      j2 += hk * rGrad[3 * mj + 2];
    }
    values[i] = ampI * ampI;
    grad[3 * i] = 2 * ampI * i0;
    grad[3 * i + 1] = 2 * ampI * i1;
    grad[3 * i + 2] = 2 * ampI * i2;
    values[j] = ampJ * ampJ;
    grad[3 * j] = 2 * ampJ * j0;
    grad[3 * j + 1] = 2 * ampJ * j1;
    grad[3 * j + 2] = 2 * ampJ * j2;
  }
}

/** The smoothed shape (SmoothedShape), with a memory of its last evaluation. */
export function smoothedShape(root: ShapeModel, kernel: KernelTaps): ShapeModel {
  return memoised(new SmoothedShape(root, kernel));
}

/**
 * A model seen through a series' block means (EnvelopeBlocks: tone-store.ts buildSeries averages
 * the power of neighbouring envelope samples): sample i is the mean of `inner` over its block's
 * own ticks. The mean of a curved power over a block is not its value at the block's mean time
 * (Jensen's inequality): near a knee the means bend the curve, which a model of fixed shape
 * (Stuart–Landau, p = 2) follows only with a lower rate, some −0.4 % at 22 1/s for blocks of 4
 * envelope samples, many times its interval at a good signal-to-noise ratio. At other times than
 * the series' own the inner model is evaluated as it stands.
 */
class BlockMeanShape implements ShapeModel {
  readonly nNonlinear: number;
  private readonly inner: ShapeModel;
  private readonly series: EnvelopeSeries;
  private readonly buffers: ShapeBuffers;

  constructor(inner: ShapeModel, series: EnvelopeSeries) {
    this.inner = inner;
    this.series = series;
    this.nNonlinear = inner.nNonlinear;
    this.buffers = new ShapeBuffers(inner.nNonlinear);
  }

  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues {
    const blocks = this.series.blocks;
    if (blocks === undefined || t !== this.series.timeS || n !== blocks.start.length - 1) return this.inner.evaluate(t, n, theta, withGrad);
    const { tickS, start } = blocks;
    const at = this.inner.evaluate(tickS, tickS.length, theta, withGrad);
    const nn = this.nNonlinear;
    const v = this.buffers.get(n, withGrad);
    for (let i = 0; i < n; i++) {
      const q0 = start[i];
      const q1 = start[i + 1];
      const scale = 1 / (q1 - q0);
      let g = 0;
      for (let q = q0; q < q1; q++) g += at.g[q];
      v.g[i] = g * scale;
      if (!withGrad) continue;
      for (let j = 0; j < nn; j++) {
        let d = 0;
        for (let q = q0; q < q1; q++) d += at.grad[q * nn + j];
        v.grad[i * nn + j] = d * scale;
      }
    }
    return v;
  }
}

/** `model` averaged over the block means of `series` when it has them (BlockMeanShape), else `model` itself. */
export function overBlocks(model: ShapeModel, series: EnvelopeSeries): ShapeModel {
  return series.blocks === undefined ? model : memoised(new BlockMeanShape(model, series));
}

/** The times at which the taps of a series' samples read the amplitude model: tap k of sample i reads times[origin[i] + dir·k]. */
interface TapPlan {
  times: Float64Array;
  origin: Int32Array;
  dir: 1 | -1;
}

/** Two tap positions within this fraction of the spacing count as on one grid. */
const TAP_GRID_TOLERANCE = 1e-6;

/**
 * For kernel taps at `offsets`, the tap plan of a series of sample times (the plan of the latest
 * series is kept). When the taps lie `spacingS` apart (0: they do not) and every sample time falls
 * on that spacing's grid, the taps share one grid of times: the envelope series are block means
 * of envelope samples on the kernel's own clock, so the inner model is evaluated once per clock
 * tick the series spans instead of once per tap and sample. Otherwise every tap of every sample
 * has its own time t_i − τ_k.
 */
class TapPlanner {
  private readonly offsets: Float64Array;
  private readonly spacingS: number;
  private readonly isUniform: boolean;
  private lastT: Float64Array | null = null;
  private lastN = -1;
  private last: TapPlan = { times: new Float64Array(0), origin: new Int32Array(0), dir: 1 };

  constructor(offsets: Float64Array, spacingS: number) {
    this.offsets = offsets;
    this.spacingS = spacingS;
    let isUniform = spacingS > 0;
    for (let k = 1; k < offsets.length && isUniform; k++) if (Math.abs((offsets[k] - offsets[0]) / spacingS - k) > TAP_GRID_TOLERANCE) isUniform = false;
    this.isUniform = isUniform;
  }

  planOf(t: Float64Array, n: number): TapPlan {
    if (t === this.lastT && n === this.lastN) return this.last;
    this.lastT = t;
    this.lastN = n;
    const shared = this.onGrid(t, n);
    if (shared !== null) {
      this.last = shared;
      return shared;
    }
    const { offsets } = this;
    const taps = offsets.length;
    const times = new Float64Array(n * taps);
    const origin = new Int32Array(n);
    for (let i = 0; i < n; i++) {
      origin[i] = i * taps;
      for (let k = 0; k < taps; k++) times[i * taps + k] = t[i] - offsets[k];
    }
    this.last = { times, origin, dir: 1 };
    return this.last;
  }

  private onGrid(t: Float64Array, n: number): TapPlan | null {
    const { offsets, spacingS } = this;
    const taps = offsets.length;
    if (!this.isUniform || n < 2) return null;
    // Tap k of a sample at t reads t − τ_k = start + (m + taps − 1 − k)·spacing, m its grid position.
    const start = t[0] - offsets[taps - 1];
    const len = Math.round((t[n - 1] - offsets[0] - start) / spacingS) + 1;
    if (!(len > 0) || len > n * taps) return null;
    const origin = new Int32Array(n);
    for (let i = 0; i < n; i++) {
      const pos = (t[i] - offsets[taps - 1] - start) / spacingS;
      const m = Math.round(pos);
      if (Math.abs(pos - m) > TAP_GRID_TOLERANCE || m < 0 || m + taps > len) return null;
      origin[i] = m + taps - 1;
    }
    const times = new Float64Array(len);
    for (let m = 0; m < len; m++) times[m] = start + m * spacingS;
    return { times, origin, dir: -1 };
  }
}
