/**
 * Live outputs of push() (docs/DESIGN.md "Live outputs"): track rows (about ROW_RATE_HZ a second,
 * the main tone of the moment), onsets of the short-frame detector (live-onset.ts), and each closed
 * segment with a provisional rate. finish() fits every segment again (segment-fit.ts); these are
 * for the view. A closed segment's entry (its noise test and provisional fit) is computed when the
 * update is first read, from the tone as it stood when the segment closed, so a reader of the
 * report alone never pays for the fits.
 */
import { fitExponential } from './fit';
import { studentTQuantile } from './stats';
import type { History } from './history';
import { addLinePoint, createLineSums, lineRss, lineSxx, lineSxy } from './line-fit';
import { isNoiseSegment } from './noise-label';
import { regimeKind, STATE_DECAY, STATE_GROWTH, STATE_QUIET, type RegimeSegment } from './regime';
import { BG_MIN_S, BG_SKIP_S, ciOf, unfittedSegment } from './segment-fit';
import { timeOfG, type TimeBase } from './time-base';
import { buildSeries, contiguousEnd, contiguousStart, meanPower, type ToneRuntime } from './tone-store';
import type { EnvelopeSeries, Onset, Segment, TrackFrame } from './types';

/** Track rows per second (about). */
export const ROW_RATE_HZ = 100;
/** A quiet tone is shown in the rows while it stands this far over its background, dB. */
const ROW_SHOW_DB = 6;
/** Steady lines are ranked this far below any tone when choosing a row's main tone, dB. */
const ROW_STEADY_PENALTY_DB = 100;
/** The live log-linear rate uses samples this far (power ratio, 10 dB) clear of the background and of the segment's top. */
const LOGLINE_CLEAR = 10;
/** A live growth fit starts from this much background before the growth, s, and ends 20 dB under its top. */
const LIVE_PREROLL_S = 0.5;
const LIVE_TOP_FRACTION = 0.01;

export interface LiveState {
  /** Next global envelope index for a track row, and whether a gap precedes it. */
  rowG: number;
  rowEvery: number;
  rowAfterGap: boolean;
  /** What the current push added (segments closed: entries computed when read, liveSegments). */
  frames: TrackFrame[];
  onsets: Onset[];
  closed: ClosedSegment[];
}

/** A segment closed during a push, with the tone as it stood then. */
export interface ClosedSegment {
  /**
   * The tone's store as it stood: a shallow copy keeping its counts (n, processed, validFrom) and
   * its track's; the store and the track only append, so the entries below those counts read the
   * same later.
   */
  tr: ToneRuntime;
  seg: RegimeSegment;
  prev: RegimeSegment | null;
}

export function createLiveState(envRateHz: number): LiveState {
  return { rowG: 0, rowEvery: Math.max(1, Math.round(envRateHz / ROW_RATE_HZ)), rowAfterGap: false, frames: [], onsets: [], closed: [] };
}

/** Starts the outputs of the next push (called as a push hands over its own). */
export function beginLive(lv: LiveState): void {
  lv.frames = [];
  lv.onsets = [];
  lv.closed = [];
}

/**
 * Fallback provisional rate of a closed growth or decay segment (model 'log-linear'), a straight
 * line through ½ ln(A² − N²) over the part of the segment that stands 10 dB clear of both the
 * background and the segment's top, where neither the floor nor saturation bends it (common
 * practice); interval from the line's residuals with the effective sample count 2·B·duration (as
 * in dsp/fit.ts).
 */
function quickSegment(tr: ToneRuntime, s: RegimeSegment): Segment {
  const seg = unfittedSegment(tr, s, regimeKind(s.state));
  const i0 = s.state === STATE_DECAY ? Math.min(s.endIdx, s.startIdx + tr.env.kernelLength) : s.startIdx;
  let top = 0;
  for (let k = i0; k < s.endIdx; k++) if (tr.power[k] > top) top = tr.power[k];
  const line = createLineSums();
  let tFirst = Infinity;
  let tLast = -Infinity;
  for (let k = i0; k < s.endIdx; k++) {
    const p = tr.power[k] - tr.bg[k];
    if (tr.clipped[k] || !(p > LOGLINE_CLEAR * tr.bg[k]) || !(tr.power[k] < (1 / LOGLINE_CLEAR) * top)) continue;
    const t = tr.timeS[k] - seg.startS;
    addLinePoint(line, t, 0.5 * Math.log(p), 1);
    if (t < tFirst) tFirst = t;
    if (t > tLast) tLast = t;
  }
  const n = line.n;
  if (n < 8) return seg;
  const sxx = lineSxx(line);
  if (!(sxx > 0)) return seg;
  const slope = lineSxy(line) / sxx;
  const rss = lineRss(line, slope);
  const nEff = Math.min(n, 2 * tr.env.bandwidthHz * (tLast - tFirst));
  if (nEff < 3) return seg;
  const sd = Math.sqrt((rss / (n - 2) / sxx) * (n / nEff));
  const q = studentTQuantile(0.975, nEff - 2);
  seg.ratePerS = slope;
  seg.rateCi95PerS = [slope - q * sd, slope + q * sd];
  seg.model = 'log-linear';
  return seg;
}

/**
 * Provisional rate of a closed growth or decay segment: the exponential fit of dsp/fit.ts on the
 * part of the segment that the fit's model describes (a growth from half a second of background
 * before it up to 20 dB under its top, where a Landau curve departs from the exponential by under
 * 1 %; a decay from one kernel after its start, the filter's transient, to the envelope seen so
 * far, background fitted). Falls back to quickSegment's straight line when the fit fails or gives
 * the wrong sign.
 */
function liveSegment(tr: ToneRuntime, s: RegimeSegment, prev: RegimeSegment | null): Segment {
  const seg = quickSegment(tr, s);
  const rate = tr.env.outputRateHz;
  let series: EnvelopeSeries;
  let opts: { backgroundPower?: number; refTimeS?: number } = {};
  if (s.state === STATE_GROWTH) {
    const lo = Math.max(prev !== null && prev.state === STATE_QUIET ? prev.startIdx : s.startIdx, tr.validFrom);
    const w0 = contiguousStart(tr, s.startIdx, Math.round(LIVE_PREROLL_S * rate), lo);
    let top = 0;
    for (let k = s.startIdx; k < s.endIdx; k++) if (!tr.clipped[k] && tr.power[k] > top) top = tr.power[k];
    let w1 = s.startIdx;
    while (w1 < s.endIdx && !(tr.power[w1] > LIVE_TOP_FRACTION * top)) w1++;
    w1 = contiguousEnd(tr, s.startIdx, w1 - s.startIdx, w1);
    series = buildSeries(tr, w0, w1, false);
    const bg = meanPower(tr, w0, s.startIdx - Math.round(BG_SKIP_S * rate), Math.round(BG_MIN_S * rate));
    if (Number.isFinite(bg) && bg > 0) opts = { backgroundPower: bg };
  } else {
    const w0 = Math.min(s.endIdx - 1, s.startIdx + tr.env.kernelLength);
    const w1 = contiguousEnd(tr, w0, Math.max(s.endIdx, tr.processed) - w0, Math.max(s.endIdx, tr.processed));
    series = buildSeries(tr, w0, w1, false);
  }
  if (series.timeS.length === 0) return seg;
  const fit = fitExponential(series, { ...opts, refTimeS: series.timeS[0] });
  if (fit.isValid && (s.state === STATE_GROWTH ? fit.ratePerS > 0 : fit.ratePerS < 0)) {
    seg.ratePerS = fit.ratePerS;
    seg.rateCi95PerS = ciOf(fit);
    seg.model = 'exponential';
  }
  return seg;
}

/** Collects the segments a tone's regime steps of one frame closed (live onsets come from live-onset.ts). */
export function collectLive(lv: LiveState, tr: ToneRuntime): void {
  const rg = tr.regime;
  if (tr.isSteadyLine) return;
  let asNow: ToneRuntime | null = null;
  for (let i = rg.segments.length - rg.closedInStep; i < rg.segments.length; i++) {
    const s = rg.segments[i];
    if (s.endIdx <= s.startIdx) continue;
    asNow ??= { ...tr, tone: { ...tr.tone } };
    // Copies: finish() relabels and joins the segments themselves.
    lv.closed.push({ tr: asNow, seg: { ...s }, prev: i > 0 ? { ...rg.segments[i - 1] } : null });
  }
}

/** The live entries of closed segments. */
export function liveSegments(closed: ClosedSegment[]): Segment[] {
  return closed.map(({ tr, seg: s, prev }) => {
    const isRate = s.state === STATE_GROWTH || s.state === STATE_DECAY;
    // A growth or decay of the noise is shown as quiet (the report's test on the envelope seen so far).
    const isNoise = isRate && isNoiseSegment(tr, s, tr.processed);
    return isRate && !isNoise ? liveSegment(tr, s, prev) : unfittedSegment(tr, s, isNoise ? 'quiet' : regimeKind(s.state));
  });
}

/** Emits track rows up to time tMax (s) for the envelope samples produced so far. */
export function emitRows(lv: LiveState, tb: TimeBase, hist: History, alive: ToneRuntime[], tMax: number): void {
  const ringLen = hist.envMs.length;
  for (;;) {
    const g = lv.rowG;
    const t = timeOfG(tb, g);
    if (t > tMax || g * tb.envM + tb.envM > tb.j) break;
    if (t < 0) {
      // The first envelope samples describe input before the record (filter delays): no row.
      lv.rowG += lv.rowEvery;
      continue;
    }
    // Main tone of the row: the tone (steady lines last) with the largest excess over its background.
    let best: ToneRuntime | null = null;
    let bestEx = -Infinity;
    let bestK = 0;
    for (const tr of alive) {
      const k = g - tr.g0;
      if (k < tr.validFrom || k >= tr.processed) continue;
      const b = tr.bg[k] > 0 ? tr.bg[k] : 1e-30;
      let ex = 10 * Math.log10(tr.power[k] / b);
      if (tr.isSteadyLine) ex -= ROW_STEADY_PENALTY_DB;
      if (ex > bestEx) {
        bestEx = ex;
        best = tr;
        bestK = k;
      }
    }
    const ms = hist.envMs[g % ringLen];
    const hasTone = best !== null && (best.state[bestK] !== STATE_QUIET || bestEx > ROW_SHOW_DB);
    lv.frames.push({
      timeS: t,
      frequencyHz: hasTone && best !== null ? best.tone.freqHz : Number.NaN,
      amplitudeDbfs: hasTone && best !== null ? 10 * Math.log10(Math.max(best.power[bestK], 1e-30)) : Number.NaN,
      // Full-scale sine = 0 dBFS: mean square 0.5.
      levelDbfs: 10 * Math.log10(Math.max(2 * ms, 1e-30)),
      state: best !== null ? regimeKind(best.state[bestK]) : 'quiet',
      isClipped: hist.envClip[g % ringLen] !== 0,
      isAfterGap: lv.rowAfterGap,
    });
    lv.rowAfterGap = false;
    lv.rowG += lv.rowEvery;
  }
}
