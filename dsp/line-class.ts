/**
 * Steady line, switch-on and impulse response, by envelope behaviour (docs/DESIGN.md "Line
 * classification"). A hum grows exponentially over several envelope kernels; a line switched on
 * (mains hum, a fan, a loudspeaker) or a mode struck by a knock rises as a step, which the
 * envelope filter turns into its own step response. The test compares the time the wide-band
 * envelope takes to climb from qLow to qHigh of its excess over the background with the time the
 * wide kernel's step response takes for the same climb. The mains frequency plays no part.
 */
import { STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY, type RegimeSegment } from './regime';
import { meanPower, type ToneRuntime } from './tone-store';

/** Fractions of the excess power between which the climb is timed: 1 % (−20 dB) to 50 % (−3 dB). */
const Q_LOW = 0.01;
const Q_HIGH = 0.5;
/**
 * The lower level must stand this far over the background's own power (6 dB) to be seen through
 * the band noise; with less excess the rise cannot be timed and counts as a hum's.
 */
const LOW_OVER_BG = 4;
/** Crossing times are known to one envelope sample each (and the boxcar adds one): slack, samples. */
const SLACK_SAMPLES = 2;
/** Background before a rise (or after a fall) taken over this long, s. */
const BG_SPAN_S = 0.3;
/** Point of a step's climb taken as the step's time: half its amplitude (a quarter of its power), the centre of a symmetric kernel. */
const Q_KINK = 0.25;

/** Samples a step through the kernel (unit-gain FIR) takes to climb from power fraction qLow to qHigh. */
export function stepClimbSamples(kernel: Float64Array, qLow: number, qHigh: number): number {
  let c = 0;
  let kLow = -1;
  let kHigh = kernel.length;
  for (let k = 0; k < kernel.length; k++) {
    c += kernel[k];
    if (c * c <= qLow) kLow = k;
    if (c * c >= qHigh && kHigh === kernel.length) kHigh = k;
  }
  return kHigh - kLow;
}

/** Timing of a rise (or a fall) of the wide-band envelope: whether it is a step, and the step's store index. */
export interface Transition {
  isStep: boolean;
  /** Whether the excess sufficed to time the climb. */
  isTimed: boolean;
  kinkIdx: number;
}

/**
 * The rise of growth segment s: from the background before it to the top reached within a wide
 * kernel after its end.
 */
export function riseOf(tr: ToneRuntime, s: RegimeSegment): Transition {
  const env = tr.env;
  const span = Math.round(BG_SPAN_S * env.outputRateHz);
  const half = Math.ceil(env.wideLength / 2);
  let bg = meanPower(tr, s.startIdx - span, s.startIdx - half, Math.ceil(span / 4), true);
  if (!Number.isFinite(bg)) bg = tr.bg[s.startIdx] * (env.wideBandwidthHz / env.bandwidthHz);
  const hi = Math.min(tr.n, s.endIdx + env.wideLength);
  let top = 0;
  let topIdx = s.startIdx;
  for (let k = Math.max(tr.validFrom, s.startIdx - half); k < hi; k++) {
    if (!tr.clipped[k] && tr.powerWide[k] > top) {
      top = tr.powerWide[k];
      topIdx = k;
    }
  }
  const t = climb(tr, bg, top, topIdx, Math.max(tr.validFrom, s.startIdx - env.wideLength), -1);
  if (t.isTimed) return t;
  // Too little excess to time the climb: a rise that reaches its top within one narrow kernel of
  // leaving the background is all the filter can show of a step.
  const topNarrow = narrowTopIdx(tr, s);
  return { isStep: isWithinKernel(tr, s, topNarrow), isTimed: false, kinkIdx: s.startIdx + Math.floor((topNarrow - s.startIdx) / 2) };
}

/** Store index of the narrow envelope's top from a growth's start to one kernel after its end. */
function narrowTopIdx(tr: ToneRuntime, s: RegimeSegment): number {
  let top = 0;
  let idx = s.startIdx;
  for (let k = s.startIdx; k < Math.min(tr.n, s.endIdx + tr.env.kernelLength); k++) {
    if (!tr.clipped[k] && tr.power[k] > top) {
      top = tr.power[k];
      idx = k;
    }
  }
  return idx;
}

/** Whether a growth reached its top within one narrow kernel of leaving the background. */
function isWithinKernel(tr: ToneRuntime, s: RegimeSegment, topIdx: number): boolean {
  return topIdx - s.startIdx <= tr.env.kernelLength + SLACK_SAMPLES;
}

/** The fall of decay segment s: from the level held before it to the background after it. */
export function fallOf(tr: ToneRuntime, s: RegimeSegment): Transition {
  const env = tr.env;
  const span = Math.round(BG_SPAN_S * env.outputRateHz);
  const half = Math.ceil(env.wideLength / 2);
  const bg = meanPower(tr, s.endIdx, s.endIdx + span, Math.ceil(span / 4), true);
  const top = meanPower(tr, s.startIdx - span, s.startIdx - half, Math.ceil(span / 4), true);
  if (!Number.isFinite(bg) || !Number.isFinite(top)) return { isStep: false, isTimed: false, kinkIdx: s.startIdx };
  return climb(tr, bg, top, Math.max(tr.validFrom, s.startIdx - env.wideLength), Math.min(tr.n, s.endIdx + env.wideLength), 1);
}

/**
 * Times the climb between bg + Q_LOW·E and bg + Q_HIGH·E (E = top − bg) of the wide envelope:
 * dir −1 searches back from `from` (the top) to `to` for a rise, dir 1 forward for a fall.
 */
function climb(tr: ToneRuntime, bg: number, top: number, from: number, to: number, dir: number): Transition {
  const e = top - bg;
  const none = { isStep: false, isTimed: false, kinkIdx: dir < 0 ? to : from };
  if (!(e > 0) || (LOW_OVER_BG * bg) / e >= Q_KINK) return none;
  const qLow = Math.max(Q_LOW, (LOW_OVER_BG * bg) / e);
  const lowP = bg + qLow * e;
  const highP = bg + Q_HIGH * e;
  const kinkP = bg + Q_KINK * e;
  const w = tr.powerWide;
  // Rise: walk back from the top to the last sample under the high level, then on to the low level.
  let kHigh = -1;
  let kLow = -1;
  let kKink = -1;
  if (dir < 0) {
    let k = from;
    while (k > to && w[k] >= highP) k--;
    kHigh = k + 1;
    while (k > to && w[k] > kinkP) k--;
    kKink = k + 1;
    while (k > to && w[k] > lowP) k--;
    kLow = k;
    if (k <= to) return none;
  } else {
    let k = from;
    while (k < to && w[k] >= highP) k++;
    kHigh = k - 1;
    while (k < to && w[k] > kinkP) k++;
    kKink = k;
    while (k < to && w[k] > lowP) k++;
    kLow = k;
    if (k >= to || kHigh < from) return none;
  }
  const steps = Math.abs(kHigh - kLow);
  const isStep = steps <= stepClimbSamples(tr.env.wideKernel, qLow, Q_HIGH) + SLACK_SAMPLES;
  return { isStep, isTimed: true, kinkIdx: kKink };
}

/**
 * Rewrites a track's segments by the shape of its rises: a growth that is a step is no growth.
 * Followed by a decay it is an impulse response (the decay starts at the step and is marked
 * isImpulse; no onset); followed by a steady stretch (or the end) it is a switch-on (the steady
 * stretch starts at the step). A track that then holds a steady stretch, no growth, and only
 * steps for its decays is a steady line (its switch-offs become quiet).
 */
export function classifyTransitions(tr: ToneRuntime): void {
  const segs = tr.regime.segments;
  const out: RegimeSegment[] = [];
  for (let i = 0; i < segs.length; i++) {
    const s = segs[i];
    if (s.state !== STATE_GROWTH || s.endIdx <= s.startIdx) {
      out.push(s);
      continue;
    }
    const next0 = i + 1 < segs.length ? segs[i + 1] : null;
    const rise = riseOf(tr, s);
    // A rise that lasts no longer than the narrow kernel and falls straight away is a kick
    // whatever its climb: the filter cannot show it to be a hum's exponential growth.
    const isKick = next0 !== null && next0.state === STATE_DECAY && next0.startIdx === s.endIdx && isWithinKernel(tr, s, narrowTopIdx(tr, s));
    if (!rise.isStep && !isKick) {
      out.push(s);
      continue;
    }
    const kink = Math.min(Math.max(rise.kinkIdx, s.startIdx), s.endIdx - 1);
    const prev = out.length > 0 ? out[out.length - 1] : null;
    if (prev !== null && prev.endIdx === s.startIdx) prev.endIdx = kink;
    const next = i + 1 < segs.length ? segs[i + 1] : null;
    if (next !== null && next.startIdx === s.endIdx && (next.state === STATE_DECAY || next.state === STATE_STEADY)) {
      next.startIdx = prev !== null ? kink : s.startIdx;
      if (next.state === STATE_DECAY) next.isImpulse = true;
    } else out.push({ state: STATE_STEADY, startIdx: prev !== null ? kink : s.startIdx, endIdx: s.endIdx, isOnset: false, reachedSteady: false });
  }
  segs.length = 0;
  for (const s of out) if (s.endIdx > s.startIdx) segs.push(s);
  const hasSteady = segs.some((s) => s.state === STATE_STEADY);
  const isLine =
    hasSteady &&
    segs.every((s) => s.state === STATE_QUIET || s.state === STATE_STEADY || (s.state === STATE_DECAY && !s.isImpulse && fallOf(tr, s).isStep));
  if (!isLine) return;
  tr.isSteadyLine = true;
  // A steady line's switch-off is a step, not a decay: quiet from there.
  let w = 0;
  for (let r = 0; r < segs.length; r++) {
    const s = segs[r];
    if (s.state === STATE_DECAY) s.state = STATE_QUIET;
    if (w > 0 && s.state === STATE_QUIET && segs[w - 1].state === STATE_QUIET && segs[w - 1].endIdx === s.startIdx) {
      segs[w - 1].endIdx = s.endIdx;
      continue;
    }
    segs[w++] = s;
  }
  segs.length = w;
}
