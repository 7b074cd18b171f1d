/**
 * Shape models of the envelope fits (dsp/fit.ts, dsp/fit-saturation.ts): the mean-square envelope
 * of the tone, without background and at unit amplitude, with its gradient in the nonlinear
 * parameters, evaluated over a whole series at a time; and the helpers their evaluations share
 * (buffers, a memory of the last evaluation, the uniform sample clock that running products of
 * exponentials use).
 */
/**
 * A model of the tone's mean-square envelope without background: value and gradient with respect
 * to the nonlinear parameters, times the amplitude parameter. The background N² enters linearly.
 * Each model evaluates a whole series in one loop of its own (no call per sample).
 */
export interface ShapeModel {
  /** Number of nonlinear parameters (after ln L). */
  nNonlinear: number;
  /**
   * Unit-amplitude shape g at the first n times of `t` and, when asked, ∂g/∂θ_j at index
   * i·nNonlinear + j: buffers owned by the model, valid until its next evaluation.
   */
  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues;
}

export interface ShapeValues {
  g: Float64Array;
  grad: Float64Array;
}

/*
 * The models and these helpers are classes, so each kind of evaluation is one function that the
 * engine optimises with the calls it makes inlined. As closures made per model (a fit makes
 * several models, a record hundreds of fits) every model called its own copies of the helpers,
 * calls the engine could not inline. Measured on the bench's fits of a 10-minute record of 50
 * cycles, replayed: 9 % less time for the saturation fits, 12 % for the exponential ones;
 * identical results.
 */

/**
 * Output buffers of a model's evaluations, grown to the longest series seen (at least `capacity`
 * times, the longest its fit will ask for when known: a fit's grid looks at block means first),
 * the gradient's only once one is asked for.
 */
export class ShapeBuffers {
  private values: ShapeValues = { g: new Float64Array(0), grad: new Float64Array(0) };
  private readonly nNonlinear: number;
  private readonly capacity: number;

  constructor(nNonlinear: number, capacity = 0) {
    this.nNonlinear = nNonlinear;
    this.capacity = capacity;
  }

  /** The buffers, at least n long (the gradient's n·nNonlinear when withGrad). */
  get(n: number, withGrad: boolean): ShapeValues {
    const values = this.values;
    const size = Math.max(n, this.capacity);
    if (values.g.length < n) values.g = new Float64Array(size);
    if (withGrad && values.grad.length < n * this.nNonlinear) values.grad = new Float64Array(size * this.nNonlinear);
    return values;
  }
}

/**
 * A shape model that returns the values it already holds when asked again at the same times and
 * parameters (and, for a gradient, holds one): the weights of an IRLS pass are updated at the
 * parameters the polish ended on, the next polish starts there, and the covariance reads the same
 * point twice. The buffers are valid until the next evaluation anyway, so nothing else changes.
 */
class Memoised implements ShapeModel {
  readonly nNonlinear: number;
  private readonly model: ShapeModel;
  private readonly lastTheta: Float64Array;
  private lastT: Float64Array | null = null;
  private lastN = -1;
  private hasGrad = false;
  private last: ShapeValues | null = null;

  constructor(model: ShapeModel) {
    this.model = model;
    this.nNonlinear = model.nNonlinear;
    this.lastTheta = new Float64Array(model.nNonlinear);
  }

  evaluate(t: Float64Array, n: number, theta: Float64Array, withGrad: boolean): ShapeValues {
    const k = this.nNonlinear;
    const lastTheta = this.lastTheta;
    if (this.last !== null && t === this.lastT && n === this.lastN && (this.hasGrad || !withGrad)) {
      let isSame = true;
      for (let j = 0; j < k && isSame; j++) isSame = theta[j] === lastTheta[j];
      if (isSame) return this.last;
    }
    const last = this.model.evaluate(t, n, theta, withGrad);
    this.last = last;
    this.lastT = t;
    this.lastN = n;
    this.hasGrad = withGrad;
    for (let j = 0; j < k; j++) lastTheta[j] = theta[j];
    return last;
  }
}

/** The model with a memory of its last evaluation (Memoised). */
export function memoised(model: ShapeModel): ShapeModel {
  return new Memoised(model);
}

/**
 * How many leading times of `t` lie on one uniform grid t_0 + i·Δ, Δ = (t_{m−1} − t_0)/(m − 1)
 * for the returned m (to 1e-9 of Δ; the envelope's sample clock, or block means of it, whose last
 * block may be shorter). Remembers the latest series it was asked about: the same arrays come
 * back for every evaluation of a fit.
 */
export class UniformPrefix {
  private lastT: Float64Array | null = null;
  private lastN = -1;
  private last = 0;

  of(t: Float64Array, n: number): number {
    if (t === this.lastT && n === this.lastN) return this.last;
    this.lastT = t;
    this.lastN = n;
    let last = Math.min(n, 2);
    for (let m = n; m > 2; m--) {
      const step = (t[m - 1] - t[0]) / (m - 1);
      let isUniform = step > 0;
      for (let i = 1; i < m - 1 && isUniform; i++) isUniform = Math.abs(t[i] - t[0] - i * step) <= 1e-9 * step;
      if (isUniform) {
        last = m;
        break;
      }
      // Only a shorter last block can break the grid: try without the last time, then give up.
      if (m < n) break;
    }
    this.last = last;
    return last;
  }
}

/**
 * A running product of exponentials is restarted from an exact exponential every this many
 * samples: its rounding error then stays within 16 units in the last place (a fit to noise-free
 * data still tells its models apart), at one exponential per 16 samples.
 */
export const RESTART_STEPS = 16;
