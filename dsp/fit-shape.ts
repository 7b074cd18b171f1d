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

/** Output buffers of a model's evaluations, grown to the longest series seen. */
export function shapeBuffers(nNonlinear: number): (n: number) => ShapeValues {
  const values: ShapeValues = { g: new Float64Array(0), grad: new Float64Array(0) };
  return (n) => {
    if (values.g.length < n) {
      values.g = new Float64Array(n);
      values.grad = new Float64Array(n * nNonlinear);
    }
    return values;
  };
}

/**
 * A shape model that returns the values it already holds when asked again at the same times and
 * parameters (and, for a gradient, holds one): the weights of an IRLS pass are updated at the
 * parameters the polish ended on, the next polish starts there, and the covariance reads the same
 * point twice. The buffers are valid until the next evaluation anyway, so nothing else changes.
 */
export function memoised(model: ShapeModel): ShapeModel {
  const k = model.nNonlinear;
  const lastTheta = new Float64Array(k);
  let lastT: Float64Array | null = null;
  let lastN = -1;
  let hasGrad = false;
  let last: ShapeValues | null = null;
  return {
    nNonlinear: k,
    evaluate(t, n, theta, withGrad) {
      if (last !== null && t === lastT && n === lastN && (hasGrad || !withGrad)) {
        let isSame = true;
        for (let j = 0; j < k && isSame; j++) isSame = theta[j] === lastTheta[j];
        if (isSame) return last;
      }
      last = model.evaluate(t, n, theta, withGrad);
      lastT = t;
      lastN = n;
      hasGrad = withGrad;
      for (let j = 0; j < k; j++) lastTheta[j] = theta[j];
      return last;
    },
  };
}

/**
 * How many leading times of `t` lie on one uniform grid t_0 + i·Δ, Δ = (t_{m−1} − t_0)/(m − 1)
 * for the returned m (to 1e-9 of Δ; the envelope's sample clock, or block means of it, whose last
 * block may be shorter). A function of the latest series it was asked about: the same arrays come
 * back for every evaluation of a fit.
 */
export function uniformPrefix(): (t: Float64Array, n: number) => number {
  let lastT: Float64Array | null = null;
  let lastN = -1;
  let last = 0;
  return (t, n) => {
    if (t === lastT && n === lastN) return last;
    lastT = t;
    lastN = n;
    last = Math.min(n, 2);
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
    return last;
  };
}

/**
 * A running product of exponentials is restarted from an exact exponential every this many
 * samples: its rounding error then stays within 16 units in the last place (a fit to noise-free
 * data still tells its models apart), at one exponential per 16 samples.
 */
export const RESTART_STEPS = 16;
