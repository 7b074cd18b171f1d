/**
 * The band's common level for the live onset detector (dsp/live-onset.ts): the median over the band
 * of each bin's power over its background, over ln 2 (the median of an exponential power is ln 2 of
 * its mean). A broadband loudness step scales every bin alike, so dividing by it cancels the step.
 *
 * A strong line is not broadband, but the short Hann frame spreads it: its leakage falls off only
 * as the window's sidelobes do (Harris 1978, REFERENCES.md §97), so a loud tone lifts the power of
 * a good part of the band and with it the median, and as it dies away the common level falls with
 * it, which every other bin reads as a steady rise. The bins that a line's leakage lifts by more
 * than LEAK_SHARE of the band's typical power are therefore left out of the median (the reach is
 * computed from the window's own response, for the line anywhere within its bin). With no strong
 * line the median is over the whole band, as before.
 */
import { hannAmplitudeResponse } from './peak';
import { kthSmallest } from './stats';

/** The band's median is first looked for within this factor of the previous frame's (a speed choice only: the result is exact either way). */
const MEDIAN_NEAR = 1.5;
/**
 * A bin whose power a line's leakage raises by more than this share of the band's typical (median)
 * power is left out of the common level: the median of the bins left is then within about this share
 * of the noise's.
 */
const LEAK_SHARE = 0.1;
/**
 * A line is a bin over this many times the band's median power: noise alone (an exponential power,
 * whose median is ln 2 of its mean) exceeds it with probability e^(−30·ln 2) ≈ 1e-9 per bin. A
 * weaker line's leakage lifts only a few bins near it, which moves the median little.
 */
const LINE_OVER_MEDIAN = 30;
/** The median is over the bins left only while at least this share of the band is left (else over all). */
const MIN_KEPT_SHARE = 0.25;
/**
 * The band's median power (what a line stands over) is taken afresh at least every this many
 * frames, and when a bin stands over LINE_OVER_MEDIAN times the one last taken while the band's
 * largest power has moved by more than a factor TOP_MOVE since then (a line came, or grew or died
 * away, and its leakage with it). A speed choice: with no strong line, or a line that holds, most
 * frames need only the band's largest power.
 */
const TYPICAL_EVERY_FRAMES = 16;
const TOP_MOVE = 2;
/** Steps per bin of the line's position within its bin when the leakage envelope is computed. */
const OFFSET_STEPS = 50;

export interface CommonLevel {
  /**
   * leak[k]: the greatest power the Hann window gives k or more bins from a line's bin, relative to
   * the power in the line's bin, over the line's position within its bin (non-increasing in k).
   */
  readonly leak: Float64Array;
  /** Work arrays of one value per bin: ratios (reordered by the selection), raw powers, the ratios kept, whether a bin is left out. */
  ratio: Float64Array;
  raw: Float64Array;
  kept: Float64Array;
  isOut: Uint8Array;
  /** The strong lines of the latest frame (bins over LINE_OVER_MEDIAN times the median), and how many. */
  lines: Int32Array;
  lineCount: number;
  /** Values near the previous frame's median (selectNear), and that median and the raw one (NaN: none yet). */
  near: Float64Array;
  lastMedian: number;
  lastRawMedian: number;
  /** Frames since the band's median power was last taken, and the band's largest power then. */
  typicalAge: number;
  topThen: number;
}

/** Work arrays for a band of `bins` bins. */
export function createCommonLevel(bins: number): CommonLevel {
  const leak = new Float64Array(bins + 1);
  for (let k = bins; k >= 1; k--) {
    let most = k < bins ? leak[k + 1] : 0;
    for (let s = 0; s <= OFFSET_STEPS; s++) {
      const d0 = -0.5 + s / OFFSET_STEPS;
      const peak = hannAmplitudeResponse(d0);
      const far = Math.max(Math.abs(hannAmplitudeResponse(k - d0)), Math.abs(hannAmplitudeResponse(-k - d0)));
      most = Math.max(most, (far * far) / (peak * peak));
    }
    leak[k] = most;
  }
  leak[0] = 1;
  return {
    leak,
    ratio: new Float64Array(bins),
    raw: new Float64Array(bins),
    kept: new Float64Array(bins),
    isOut: new Uint8Array(bins),
    lines: new Int32Array(bins),
    lineCount: 0,
    near: new Float64Array(bins),
    lastMedian: Number.NaN,
    lastRawMedian: Number.NaN,
    typicalAge: TYPICAL_EVERY_FRAMES - 1,
    topThen: 0,
  };
}

/**
 * The k-th smallest of a[0..n), the value kthSmallest returns, found faster when it lies in
 * [lo, hi): one pass counts the values under lo and gathers those in [lo, hi) into `near`, where
 * the k-th is the (k − below)-th. Otherwise (or when a value does not compare) kthSmallest on a as it stands.
 */
function selectNear(a: Float64Array, n: number, k: number, lo: number, hi: number, near: Float64Array): number {
  let below = 0;
  let m = 0;
  let above = 0;
  // Counts by arithmetic on the comparisons rather than branches (the values fall either side at random).
  for (let i = 0; i < n; i++) {
    const v = a[i];
    const isBelow = +(v < lo);
    const isAbove = +(v >= hi);
    near[m] = v;
    m += +(v >= lo) & +(v < hi);
    below += isBelow;
    above += isAbove;
  }
  if (below + m + above === n && k >= below && k < below + m) return kthSmallest(near, m, k - below);
  return kthSmallest(a, n, k);
}

/**
 * Marks the bins that strong lines (LINE_OVER_MEDIAN) and their leakage lift by more than LEAK_SHARE of the band's median
 * power; returns how many it marked. Allocates nothing.
 */
function markLeakage(c: CommonLevel, band: Float64Array, bins: number, top: number): number {
  c.lineCount = 0;
  const isLine = top > LINE_OVER_MEDIAN * c.lastRawMedian;
  const hasTopMoved = top > TOP_MOVE * c.topThen || top * TOP_MOVE < c.topThen;
  if (++c.typicalAge >= TYPICAL_EVERY_FRAMES || (isLine && hasTopMoved)) {
    const raw = c.raw;
    raw.set(band); // band and raw both hold one value per bin of the band
    c.lastRawMedian = selectNear(raw, bins, bins >> 1, c.lastRawMedian / MEDIAN_NEAR, c.lastRawMedian * MEDIAN_NEAR, c.near);
    c.typicalAge = 0;
    c.topThen = top;
  }
  const typical = c.lastRawMedian;
  if (!(top > LINE_OVER_MEDIAN * typical)) return 0;
  const leak = c.leak;
  const least = LINE_OVER_MEDIAN * typical;
  const lift = LEAK_SHARE * typical;
  let marked = 0;
  c.isOut.fill(0);
  for (let b = 0; b < bins; b++) {
    const p = band[b];
    if (!(p > least)) continue;
    c.lines[c.lineCount++] = b;
    // The farthest bin the line lifts by more than `lift` (leak is non-increasing).
    let reach = 1;
    while (reach < bins && p * leak[reach + 1] > lift) reach++;
    for (let q = Math.max(0, b - reach); q <= Math.min(bins - 1, b + reach); q++) {
      marked += 1 - c.isOut[q];
      c.isOut[q] = 1;
    }
  }
  return marked;
}

/**
 * The common level of the latest frame: fills band with the power of each bin (power[loBin + b],
 * plus 1e-30) and returns the median of band/mean over ln 2. With bins left out for leakage, the
 * median is over the rest (at least MIN_KEPT_SHARE of the band).
 */
export function commonLevel(c: CommonLevel, power: Float64Array, loBin: number, band: Float64Array, mean: Float64Array, bins: number): number {
  const ratio = c.ratio;
  let top = 0;
  for (let b = 0; b < bins; b++) {
    const pw = power[loBin + b] + 1e-30;
    band[b] = pw;
    ratio[b] = pw / mean[b];
    if (pw > top) top = pw;
  }
  const marked = markLeakage(c, band, bins, top);
  const kept = bins - marked;
  let median: number;
  if (marked > 0 && kept >= MIN_KEPT_SHARE * bins) {
    let m = 0;
    for (let b = 0; b < bins; b++) if (c.isOut[b] === 0) c.kept[m++] = ratio[b];
    median = selectNear(c.kept, m, m >> 1, c.lastMedian / MEDIAN_NEAR, c.lastMedian * MEDIAN_NEAR, c.near);
  } else {
    // The median moves little from frame to frame: look for it near the previous one first.
    median = selectNear(ratio, bins, bins >> 1, c.lastMedian / MEDIAN_NEAR, c.lastMedian * MEDIAN_NEAR, c.near);
  }
  c.lastMedian = median;
  return median / Math.LN2;
}

/**
 * A bin's power stands under SKIRT_FACTOR times the leakage some stronger line of the latest frame
 * sends it: it rises and falls with that line, and is no tone of its own (a tone of its own stands
 * far above the leakage it receives).
 */
const SKIRT_FACTOR = 10;

/** True when bin b of the latest frame is on the skirt of a stronger line (SKIRT_FACTOR). */
export function isOnSkirt(c: CommonLevel, band: Float64Array, b: number): boolean {
  for (let i = 0; i < c.lineCount; i++) {
    const l = c.lines[i];
    const d = Math.abs(b - l);
    if (d === 0 || d >= c.leak.length || band[l] <= band[b]) continue;
    if (band[b] < SKIRT_FACTOR * band[l] * c.leak[d]) return true;
  }
  return false;
}
