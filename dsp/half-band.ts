/**
 * The filters of stage 1 (condition.ts): half-band low-pass stages, each halving the rate, and the
 * DC blocker after the last. Each stage is a Kaiser-windowed sinc whose transition band runs from
 * the top of the band of interest to the image of that edge, so nothing aliases into the band
 * (Kaiser 1974, "Nonrecursive digital filter design using the I0-sinh window function"; length and
 * window parameter as REFERENCES.md §96; half-band structure: every second tap is zero). Kaiser's
 * length is the shortest of these designs: at 48 kHz with the default band (pass band to 4.4 kHz)
 * the first stage has 19 taps, and the next shorter half-band, 15 taps, reaches about 72 dB at
 * best over any window parameter (tests/dsp/half-band.test.ts).
 */

/**
 * Designed stop-band attenuation of each half-band stage, dB. Kaiser's length formula is an
 * approximation good to a dB or two (Kaiser 1974), so a stage can fall slightly short of it near
 * its stop-band edge: with the default band the 24 → 12 kHz stage (39 taps) is at worst 78.8 dB
 * down (at 7.7 kHz, which folds to 4.3 kHz) and 80 dB down from 8.04 kHz (folding to 3.96 kHz)
 * up. 43 taps would reach 80 dB throughout, for about 10 % more conditioning time.
 */
const STOPBAND_DB = 80;

export interface HalfBandStage {
  /** Number of non-zero odd offsets k = 1, 3, 5, ... from the centre (symmetric taps). */
  tapCount: number;
  centreTap: number;
  length: number;
  /**
   * Linear work buffer: the last length − 1 inputs, then the current block; its last tapCount
   * values hold the coefficients of the odd offsets, so that the filter's inner loop reads one
   * typed array rather than two (V8 checks each array it reads on every pass of the loop; one
   * array is about 6 % less time for the whole conditioning).
   */
  work: Float64Array;
  /** Parity of the inputs seen: an output is produced on every second input. */
  parity: number;
}

/** Zeroth-order modified Bessel function of the first kind, power series (for the Kaiser window). */
function besselI0(x: number): number {
  let sum = 1;
  let term = 1;
  const q = (x * x) / 4;
  for (let k = 1; k < 60; k++) {
    term *= q / (k * k);
    sum += term;
    if (term < 1e-17 * sum) break;
  }
  return sum;
}

/**
 * Designs one half-band low-pass stage (cut-off at a quarter of its input rate) whose pass band
 * reaches passHz at input rate rateHz, for blocks of up to blockCapacity inputs. Length from
 * Kaiser's formula N = (A − 7.95)/(2.285 Δω).
 */
export function createHalfBandStage(rateHz: number, passHz: number, blockCapacity: number): HalfBandStage {
  const transition = (rateHz / 2 - 2 * passHz) / rateHz;
  if (!(transition > 0)) throw new RangeError(`bandHighHz too close to the analysis Nyquist frequency (${passHz} Hz at ${rateHz} Hz)`);
  const estimate = Math.ceil((STOPBAND_DB - 7.95) / (2.285 * 2 * Math.PI * transition)) + 1;
  // Half-band length 4K + 3: the outermost taps sit at odd offsets and are non-zero.
  const k = Math.max(0, Math.ceil((estimate - 3) / 4));
  const length = 4 * k + 3;
  const half = (length - 1) / 2;
  const beta = 0.1102 * (STOPBAND_DB - 8.7);
  const i0b = besselI0(beta);
  const oddTaps = new Float64Array((half + 1) / 2);
  let sum = 0.5;
  for (let j = 0; j < oddTaps.length; j++) {
    const off = 2 * j + 1;
    const r = off / half;
    const w = besselI0(beta * Math.sqrt(1 - r * r)) / i0b;
    const h = (Math.sin((Math.PI * off) / 2) / (Math.PI * off)) * w;
    oddTaps[j] = h;
    sum += 2 * h;
  }
  // Unit gain at DC.
  for (let j = 0; j < oddTaps.length; j++) oddTaps[j] /= sum;
  const work = new Float64Array(length - 1 + blockCapacity + oddTaps.length);
  work.set(oddTaps, work.length - oddTaps.length);
  return { tapCount: oddTaps.length, centreTap: 0.5 / sum, length, work, parity: 0 };
}

/** Clears a stage's input history (after a gap); its coefficients stay. */
export function resetHalfBandStage(stg: HalfBandStage): void {
  stg.work.fill(0, 0, stg.work.length - stg.tapCount);
  stg.parity = 0;
}

/**
 * DC blocker: y = g·(x − x1) + r·y1 (dcStep), one pole at r = e^(−2π f_c / f_s). The gain
 * g = (1 + r)/2 makes its response exactly 1 at Nyquist and flat within 0.001 dB across the band
 * (without it the pass band rises by up to (1 − r)/2).
 */
export interface DcBlocker {
  readonly r: number;
  readonly gain: number;
  /** Previous input and output. */
  x1: number;
  y1: number;
}

/** A DC blocker with its corner at cornerHz for samples at rateHz. */
export function createDcBlocker(cornerHz: number, rateHz: number): DcBlocker {
  const r = Math.exp((-2 * Math.PI * cornerHz) / rateHz);
  return { r, gain: 0.5 * (1 + r), x1: 0, y1: 0 };
}

/** One output of the DC blocker: input x after x1, previous output y1. */
export function dcStep(dc: DcBlocker, x: number, x1: number, y1: number): number {
  return dc.gain * (x - x1) + dc.r * y1;
}

/**
 * Runs one half-band stage over the n inputs already in its work buffer (after the history) into
 * the next stage's work buffer (after its history); returns the number of outputs. The last stage
 * (next null) hands its outputs to the DC blocker dc in the same pass and writes them to out: the
 * blocker's recursion, which waits on its previous output, then overlaps the filter's sums
 * instead of running alone after them.
 */
export function runHalfBand(stg: HalfBandStage, n: number, next: HalfBandStage | null, dc: DcBlocker, out: Float32Array): number {
  const L = stg.length;
  const w = stg.work;
  const hist = L - 1;
  const nt = stg.tapCount;
  const tapsAt = w.length - nt;
  const c0 = stg.centreTap;
  const h = (L - 1) / 2;
  const dst = next !== null ? next.work : null;
  const dstAt = next !== null ? next.length - 1 : 0;
  let m = dstAt;
  let x1 = dc.x1;
  let y1 = dc.y1;
  // Input i completes a pair when the running count is odd; its window is w[i .. i + L − 1].
  // Each output folds the mirrored samples first (symmetric taps) and sums its terms in tap order.
  let i = stg.parity === 1 ? 0 : 1;
  // Four outputs per pass (windows two inputs apart) share the loop over the taps. Tap j of output
  // r (centre c + 2r) reads L_{j−r} = w[c − 1 − 2(j − r)] and R_{j+r} = w[c + 1 + 2(j + r)]; the
  // four left and four right samples slide by one per tap, so each tap loads two new samples.
  for (; i + 6 < n; i += 8) {
    const centre = i + h;
    let a0 = c0 * w[centre];
    let a1 = c0 * w[centre + 2];
    let a2 = c0 * w[centre + 4];
    let a3 = c0 * w[centre + 6];
    let l1 = w[centre + 1];
    let l2 = w[centre + 3];
    let l3 = w[centre + 5];
    let r0 = l1;
    let r1 = l2;
    let r2 = l3;
    let lo = centre - 1;
    let hi = centre + 7;
    for (let j = 0; j < nt; j++) {
      const t = w[tapsAt + j];
      const l0 = w[lo];
      const r3 = w[hi];
      a0 += t * (l0 + r0);
      a1 += t * (l1 + r1);
      a2 += t * (l2 + r2);
      a3 += t * (l3 + r3);
      l3 = l2;
      l2 = l1;
      l1 = l0;
      r0 = r1;
      r1 = r2;
      r2 = r3;
      lo -= 2;
      hi += 2;
    }
    if (dst !== null) {
      dst[m++] = a0;
      dst[m++] = a1;
      dst[m++] = a2;
      dst[m++] = a3;
    } else {
      const d0 = dcStep(dc, a0, x1, y1);
      const d1 = dcStep(dc, a1, a0, d0);
      const d2 = dcStep(dc, a2, a1, d1);
      const d3 = dcStep(dc, a3, a2, d2);
      out[m++] = d0;
      out[m++] = d1;
      out[m++] = d2;
      out[m++] = d3;
      x1 = a3;
      y1 = d3;
    }
  }
  for (; i < n; i += 2) {
    const centre = i + h;
    let acc = c0 * w[centre];
    let lo = centre - 1;
    let hi = centre + 1;
    for (let j = 0; j < nt; j++) {
      acc += w[tapsAt + j] * (w[lo] + w[hi]);
      lo -= 2;
      hi += 2;
    }
    if (dst !== null) dst[m++] = acc;
    else {
      y1 = dcStep(dc, acc, x1, y1);
      x1 = acc;
      out[m++] = y1;
    }
  }
  if (dst === null) {
    dc.x1 = x1;
    dc.y1 = y1;
  }
  stg.parity = (stg.parity + n) & 1;
  w.copyWithin(0, n, n + hist);
  return m - dstAt;
}
