/**
 * Segment fitting (docs/DESIGN.md "Segment fitting", stage 6): the frequency of a segment from
 * the phase slope of its demodulated envelope, and the final rate of each growth, decay and
 * steady segment from the fits of dsp/fit.ts on the envelope store, with the onset time of a
 * growth that starts from quiet.
 */
import { backgroundCrossingTimeS, effectiveSampleCount, fitExponential } from './fit';
import { fitGrowthIntoLimit } from './fit-saturation';
import { Z_975 } from './stats';
import { decayStartNearMarker, MARKER_SEARCH_S } from './kink';
import { addLinePoint, createLineSums, lineSxx, lineSxy, resetLineSums, type LineSums } from './line-fit';
import { ON_DB, regimeKind, STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY, type RegimeSegment } from './regime';
import { buildSeries, contiguousEnd, contiguousStart, meanBg, meanPower, topPowerIn, type ToneRuntime } from './tone-store';
import { medianFrequencyHz } from './track';
import type { Interval, Marker, RateFit, RegimeKind, Segment } from './types';

/** Background taken from this much quiet next to a segment, s, and the least that will do, s. */
const BG_WINDOW_S = 2;
export const BG_MIN_S = 0.3;
/** The background before a growth ends this long before the regime's growth start, s (the start may lie a little late). */
export const BG_SKIP_S = 0.1;
/** Pre-roll of background included before a growth segment in its fit, s. */
const GROWTH_PREROLL_S = 1.5;
/** Tail of quiet after a decay included in its fit, s. */
const DECAY_TAIL_S = 1.0;
/**
 * Times a segment's fit may read, s: its background, pre-roll or tail on either side, and after a
 * growth into a steady level as much again as the growth lasted (fitGrowthSegment).
 */
export function fitReachS(tr: ToneRuntime, s: RegimeSegment): [number, number] {
  const reach = Math.max(BG_WINDOW_S, GROWTH_PREROLL_S, DECAY_TAIL_S);
  const t0 = tr.timeS[s.startIdx];
  const t1 = tr.timeS[Math.max(s.startIdx, s.endIdx - 1)];
  return [t0 - reach, t1 + Math.max(reach, t1 - t0)];
}

/** Envelope samples used for the phase slope stand this far over the band background (power ratio, 6 dB) and within this ratio of the segment's peak (20 dB). */
const PHASE_MIN_OVER_BG = 4;
const PHASE_MIN_OF_PEAK = 0.01;
/** Fewest samples of one piece of the phase line. */
const PHASE_MIN_SAMPLES = 8;

/** One segment of a tone with its report entry, its fit, and its onset time (growths from quiet). */
export interface FittedSegment {
  tr: ToneRuntime;
  seg: RegimeSegment;
  report: Segment;
  fit: RateFit | null;
  onsetTimeS: number | null;
  /** 95 % interval of the onset time (the crossing at the ends of the rate's interval), s. */
  onsetCi95S: Interval | null;
  /** 95 % interval of a steady segment's limit level, dBFS. */
  limitCi95Dbfs: Interval | null;
}

/** A fit's 95 % interval as a fresh pair. */
export function ciOf(fit: RateFit): Interval {
  return [fit.ci95PerS[0], fit.ci95PerS[1]];
}

/** Standard deviation of a fitted rate from its 95 % interval. */
function sdOf(f: RateFit): number {
  return (f.ci95PerS[1] - f.ci95PerS[0]) / (2 * Z_975);
}

/**
 * Frequency of a tone over a segment from the phase of its demodulated envelope: while the
 * demodulation frequency f_d is fixed, arg z(t) = 2π (f − f_d) t + const, so a straight line
 * through the unwrapped phase (weighted by |z|², over samples ≥ 6 dB over the band background and
 * within 20 dB of the segment's peak, restarting at every exclusion or retune) gives f. This
 * approaches the accuracy of a fit to the whole waveform (Rife & Boorstyn 1974) where a spectral
 * peak is limited by its frame. A growth that ends in a knee (it reached steady) leaves out its
 * last half kernel, whose samples mix the rise with the level after the knee. Falls back to the
 * median of the spectral track.
 */
export function segmentFrequency(tr: ToneRuntime, s: RegimeSegment): number {
  const kEnd = s.state === STATE_GROWTH && s.reachedSteady ? Math.max(s.startIdx + 1, s.endIdx - Math.ceil(tr.env.kernelLength / 2)) : s.endIdx;
  const f = phaseFrequency(tr, s.startIdx, s.endIdx, kEnd);
  if (!Number.isNaN(f)) return f;
  const t0 = tr.timeS[s.startIdx];
  const t1 = tr.timeS[Math.max(s.startIdx, s.endIdx - 1)];
  return medianFrequencyHz(tr.tone, t0 - 0.2, t1 + 0.2);
}

/**
 * The phase-slope frequency of store entries [i0, kEnd) (the peak for the 20 dB rule taken over
 * [i0, i1)), Hz; NaN when no piece of PHASE_MIN_SAMPLES usable samples exists.
 */
export function phaseFrequency(tr: ToneRuntime, i0: number, i1: number, kEnd = i1): number {
  const pieces: PhasePieces = { sumW: 0, sumWF: 0 };
  const line = createLineSums();
  let unwrapped = 0;
  let prev = 0;
  let demod = 0;
  // Only where the tone dominates: within 20 dB of its strongest sample (early in a growth the
  // band may hold other sound, e.g. a noise-driven resonance, with its own phase).
  const maxP = topPowerIn(tr, i0, i1);
  const { power, clipped, bg, demodHz, phase, timeS } = tr;
  for (let k = Math.max(i0, tr.validFrom); k < kEnd; k++) {
    const w = power[k];
    const usable = !clipped[k] && w > PHASE_MIN_OVER_BG * bg[k] && w >= PHASE_MIN_OF_PEAK * maxP;
    if (!usable || (line.n > 0 && demodHz[k] !== demod)) closePiece(line, demod, pieces);
    if (!usable) continue;
    const th = phase[k];
    if (line.n === 0) {
      unwrapped = th;
      demod = demodHz[k];
    } else {
      let d = th - prev;
      if (d > Math.PI) d -= 2 * Math.PI;
      else if (d < -Math.PI) d += 2 * Math.PI;
      unwrapped += d;
    }
    prev = th;
    // Times relative to the window start keep the sums well conditioned.
    addLinePoint(line, timeS[k] - timeS[i0], unwrapped, w);
  }
  closePiece(line, demod, pieces);
  return pieces.sumW > 0 ? pieces.sumWF / pieces.sumW : Number.NaN;
}

/** Sums over the pieces of a phase line: Σ Sxx and Σ Sxx·f of each piece's frequency f, Hz. */
interface PhasePieces {
  sumW: number;
  sumWF: number;
}

/** Ends a piece of the phase line (demodulated at `demod` Hz): adds its frequency, weighted by Sxx, when it has PHASE_MIN_SAMPLES samples; empties `line`. */
function closePiece(line: LineSums, demod: number, pieces: PhasePieces): void {
  if (line.n >= PHASE_MIN_SAMPLES) {
    const sxx = lineSxx(line);
    if (sxx > 0) {
      const slope = lineSxy(line) / sxx;
      pieces.sumW += sxx;
      pieces.sumWF += sxx * (demod + slope / (2 * Math.PI));
    }
  }
  resetLineSums(line);
}

/** A segment's times and frequency, with no rate yet. */
export function unfittedSegment(tr: ToneRuntime, s: RegimeSegment, kind: RegimeKind, frequencyOf = segmentFrequency): Segment {
  return {
    kind,
    startS: tr.timeS[s.startIdx],
    endS: tr.timeS[Math.max(s.startIdx, s.endIdx - 1)],
    frequencyHz: frequencyOf(tr, s),
    ratePerS: null,
    rateCi95PerS: null,
    model: null,
  };
}

/** What a segment fit may use besides the tone's own store. */
export interface SegmentFitContext {
  /** Whether the wide envelope band is clear of other tones (grouping.ts wideBandIsClear). */
  isWide: boolean;
  markers: Marker[];
  warnings: string[];
  /** The segments' frequencies already worked out (grouping.ts Grouping.frequencyOf); segmentFrequency otherwise. */
  frequencyOf?: (tr: ToneRuntime, s: RegimeSegment) => number;
}

/** Fits segment i of a tone and fills its report entry (and the onset time for onsets). */
export function fitSegment(tr: ToneRuntime, segs: RegimeSegment[], i: number, ctx: SegmentFitContext): FittedSegment {
  const seg = segs[i];
  const out: FittedSegment = { tr, seg, report: unfittedSegment(tr, seg, regimeKind(seg.state), ctx.frequencyOf), fit: null, onsetTimeS: null, onsetCi95S: null, limitCi95Dbfs: null };
  if (seg.isImpulse === true) out.report.isImpulseResponse = true;
  if (seg.state === STATE_QUIET) return out;
  if (seg.state === STATE_GROWTH) fitGrowthSegment(out, segs, i, ctx);
  else if (seg.state === STATE_DECAY) fitDecaySegment(out, segs, i, ctx);
  else if (seg.state === STATE_STEADY) fitSteadySegment(out);
  if (out.fit !== null && (seg.state === STATE_GROWTH || seg.state === STATE_DECAY) && !out.fit.isValid) {
    ctx.warnings.push(`${out.report.kind} at ${out.report.startS.toFixed(2)} s: no rate (${out.fit.reason ?? 'fit failed'})`);
  }
  return out;
}

function setRate(out: FittedSegment, fit: RateFit): void {
  out.fit = fit;
  if (fit.isValid) {
    out.report.ratePerS = fit.ratePerS;
    out.report.rateCi95PerS = ciOf(fit);
  }
}

/**
 * A growth: its pre-roll of background and its rise, fitted as an exponential over the background
 * or, when it runs into a steady level, as a growth into saturation (growthIntoLimit). The onset
 * time of a growth from quiet is where the fitted curve meets the narrow band's background.
 */
function fitGrowthSegment(out: FittedSegment, segs: RegimeSegment[], i: number, ctx: SegmentFitContext): void {
  const { tr, seg, report } = out;
  const rate = tr.env.outputRateHz;
  const prev = i > 0 ? segs[i - 1] : null;
  const next = i + 1 < segs.length ? segs[i + 1] : null;
  const isWide = ctx.isWide;
  // The wide band holds (wide/narrow) times the narrow band's noise power.
  const bgScale = isWide ? tr.env.wideBandwidthHz / tr.env.bandwidthHz : 1;
  const quietLo = prev !== null && prev.state === STATE_QUIET ? prev.startIdx : seg.startIdx;
  const w0 = contiguousStart(tr, seg.startIdx, Math.round(GROWTH_PREROLL_S * rate), Math.max(quietLo, tr.validFrom));
  const q0 = Math.max(quietLo, seg.startIdx - Math.round(BG_WINDOW_S * rate), tr.validFrom);
  const q1 = seg.startIdx - Math.round(BG_SKIP_S * rate);
  const bgMin = Math.round(BG_MIN_S * rate);
  let bgNarrow = meanPower(tr, q0, q1, bgMin);
  // Independent samples behind that background level (N_eff, header of dsp/fit.ts): its relative
  // sd is 1/√N_eff, the power of narrow-band noise being exponentially distributed (common practice).
  let bgSamples = effectiveSampleCount(q1 - q0, 1 / rate, tr.env.bandwidthHz);
  if (!Number.isFinite(bgNarrow)) {
    bgNarrow = meanBg(tr, w0, seg.startIdx + 1);
    bgSamples = effectiveSampleCount(seg.startIdx + 1 - w0, 1 / rate, tr.env.bandwidthHz);
  }
  let bg = meanPower(tr, q0, q1, bgMin, isWide);
  if (!Number.isFinite(bg)) bg = bgNarrow * bgScale;
  // The steady stretch after the growth may be the record's last (next === null).
  const intoSteady = seg.reachedSteady && (next === null || next.state === STATE_STEADY);
  let w1 = seg.endIdx;
  if (intoSteady) {
    const extra = Math.max(Math.round(1.0 * rate), seg.endIdx - seg.startIdx);
    w1 = Math.min(next !== null ? next.endIdx : tr.processed, seg.endIdx + extra);
  }
  w1 = contiguousEnd(tr, seg.startIdx, w1 - seg.startIdx, w1);
  const opts = Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {};
  // A rise that turned over into a decay (the driving went off) may have bent into its limit
  // first: its fit chooses between saturation and exponential as a rise into a steady level does.
  const intoDecay = next !== null && next.state === STATE_DECAY && next.startIdx === seg.endIdx;
  let fit: RateFit;
  if (intoSteady || intoDecay) fit = fitGrowthIntoSteady(out, w0, w1, opts, isWide);
  else {
    const series = buildSeries(tr, w0, w1, isWide);
    fit = fitExponential(series, { ...opts, refTimeS: series.timeS.length > 0 ? series.timeS[0] : report.startS });
    if (fit.isValid) report.model = 'exponential';
  }
  setRate(out, fit);
  if (seg.isOnset && !tr.isSteadyLine && prev !== null && (prev.state === STATE_DECAY || prev.state === STATE_STEADY)) {
    // Set in from a tone still sounding (a decay not yet died away, a faint steady line): the
    // onset is the turn into growth, known to the narrow envelope's blur (half its kernel either side).
    out.onsetTimeS = report.startS;
    const half = 0.5 * tr.env.kernelS;
    out.onsetCi95S = [report.startS - half, report.startS + half];
  } else if (seg.isOnset && !tr.isSteadyLine) {
    out.onsetTimeS = onsetTime(tr, fit, bgNarrow, report.startS, report.endS);
    if (fit.isValid && fit.ratePerS > 0) {
      // The crossing moves with the rate: its values at the ends of the rate's interval (the
      // amplitude at the reference time held) bound it. It moves with the background level too:
      // the power grows as e^{2st}, so an error δ in ln(background) moves the crossing by δ/(2s);
      // the two parts add in quadrature.
      const a = onsetTime(tr, { ...fit, ratePerS: fit.ci95PerS[0] }, bgNarrow, report.startS, report.endS);
      const b = onsetTime(tr, { ...fit, ratePerS: fit.ci95PerS[1] }, bgNarrow, report.startS, report.endS);
      const t = out.onsetTimeS;
      const bgHalf = Z_975 / (Math.sqrt(Math.max(1, bgSamples)) * 2 * fit.ratePerS);
      const lo = Math.hypot(t - Math.min(a, b, t), bgHalf);
      const hi = Math.hypot(Math.max(a, b, t) - t, bgHalf);
      out.onsetCi95S = [t - lo, t + hi];
    }
  }
}

/**
 * Onset of a growth: where the fitted curve meets the background of the narrow (about ±5 Hz)
 * band (docs/DESIGN.md "Onset time"). The crossing lies near the regime's estimate; far away means
 * the fit did not describe the rise. At the segment start the envelope was last seen at the
 * background, so the curve may stand at most ON_DB above the background there: a tone that
 * appears as a step well above the background has a curve that meets the background before
 * anything sounded. That bounds the crossing to ON_DB / (8.686 dB per e-fold × s) before the
 * start (and half a kernel, the envelope's own blur).
 */
function onsetTime(tr: ToneRuntime, fit: RateFit, bgNarrow: number, startS: number, endS: number): number {
  const tCross = backgroundCrossingTimeS({ ...fit, backgroundPower: bgNarrow });
  const riseS = fit.isValid && fit.ratePerS > 0 ? ON_DB / (20 * Math.LOG10E * fit.ratePerS) : Infinity;
  const earliest = startS - Math.max(0.5 * tr.env.kernelS, riseS);
  return Number.isFinite(tCross) && tCross > startS - 1 && tCross < endS ? Math.max(earliest, tCross) : startS;
}

/**
 * A growth into a steady level, store entries [w0, w1). The saturation fit sees the model through
 * the band's own envelope kernel (its taps at the envelope rate), so the knee is not confused with
 * the filter's blur; the early window is cut on the fitted curve (dsp/fit.ts fitGrowthIntoLimit).
 * An exponential from the pre-roll up to the knee less half a kernel (the filter's blur of the
 * knee) keeps the late rise, which holds most of the information on the rate (its Fisher
 * information grows with the power). The regime's segment end lies up to half a narrow kernel
 * before the knee, so the knee is placed where the exponential fitted up to that end meets the
 * level held after it (a sharp knee turns there), and the exponential is refitted up to half a
 * kernel before it. Choice of the reported rate:
 * - the saturation fit (it also uses the knee, through the kernel, and so carries the most
 *   information) when its interval is narrower than the early rise's and it agrees with the late
 *   exponential within 2.5 combined sd (the knee is as sharp as the exponential says) or with the
 *   early rise (fitGrowthIntoLimit's test; for Stuart–Landau twice as lenient, about 4 sd: on a
 *   Landau rise it is the better estimate, and the early window's own small bias must not
 *   discard it);
 * - else the late exponential, when it agrees with the early rise or the saturation fit within
 *   2.5 combined sd (a rise that bends well before its limit, as Landau's, fails this) and has
 *   the narrower interval (the early window alone is short and now and then strays by over 3 sd);
 * - else fitGrowthIntoLimit's choice.
 */
function fitGrowthIntoSteady(out: FittedSegment, w0: number, w1: number, opts: { backgroundPower?: number }, isWide: boolean): RateFit {
  const { tr, seg, report } = out;
  const rate = tr.env.outputRateHz;
  const series = buildSeries(tr, w0, w1, isWide);
  const kLen = isWide ? tr.env.wideLength : tr.env.kernelLength;
  const kernel = { weights: isWide ? tr.env.wideKernel : tr.env.kernel, spacingS: 1 / rate };
  const grown = fitGrowthIntoLimit(series, { ...opts, kernel });
  let fit = grown.rate;
  if (grown.saturation.isValid) report.limitAmplitudeDbfs = 20 * Math.log10(grown.saturation.limitAmplitude);
  if (fit.isValid) report.model = grown.model;
  const early = grown.early;
  const halfK = Math.ceil(kLen / 2) + 1;
  const firstCut = Math.min(seg.endIdx, w1) - halfK;
  if (!(firstCut > seg.startIdx && early !== null && early.isValid)) return fit;
  const upTo = (k: number): RateFit => {
    const s1 = buildSeries(tr, w0, contiguousEnd(tr, seg.startIdx, k - seg.startIdx, k), isWide);
    return fitExponential(s1, { ...opts, refTimeS: s1.timeS.length > 0 ? s1.timeS[0] : report.startS });
  };
  let exp = upTo(firstCut);
  const held = meanPower(tr, Math.min(seg.endIdx, w1) + kLen, w1, kLen, isWide) - (opts.backgroundPower ?? 0);
  if (exp.isValid && exp.ratePerS > 0 && exp.amplitudeAtRef > 0 && held > 0) {
    const kneeS = exp.refTimeS + Math.log(held / (exp.amplitudeAtRef * exp.amplitudeAtRef)) / (2 * exp.ratePerS);
    let cut = firstCut;
    while (cut < w1 && tr.timeS[cut] < kneeS - halfK / rate) cut++;
    if (cut !== firstCut) exp = upTo(cut);
  }
  const near = (f: RateFit): boolean => f.isValid && Math.abs(exp.ratePerS - f.ratePerS) <= 2.5 * Math.hypot(sdOf(exp), sdOf(f));
  const agrees = exp.isValid && exp.ratePerS > 0 && (near(early) || near(grown.saturation));
  const sat = grown.saturation;
  const satHalf = Math.hypot(sdOf(sat), sdOf(early)) * Z_975;
  const satAgreesEarly = Math.abs(sat.ratePerS - early.ratePerS) <= (sat.model === 'stuart-landau' ? 2 : 1) * satHalf;
  if (sat.isValid && sat.ratePerS > 0 && sdOf(sat) < sdOf(early) && ((exp.isValid && near(sat)) || satAgreesEarly)) {
    fit = sat;
    report.model = sat.model;
  } else if (agrees && (!fit.isValid || sdOf(exp) < sdOf(fit))) {
    fit = exp;
    report.model = 'exponential';
  }
  return fit;
}

/**
 * Where a free decay starts: the kink near a 'driving-off' marker (within MARKER_SEARCH_S of the
 * segment start) when there is one; without one,
 * the kink is where the wide-band level first falls 1 dB below the level held just before (the
 * narrow band's decay start can lie half a narrow kernel early). Returns the store index and
 * whether the kink is known (else the regime's start stands).
 */
function decayKink(tr: ToneRuntime, seg: RegimeSegment, prev: RegimeSegment | null, ctx: SegmentFitContext): { startIdx: number; isKnown: boolean } {
  const rate = tr.env.outputRateHz;
  const startS = tr.timeS[seg.startIdx];
  let startIdx = seg.startIdx;
  // A ring-down starts at its step (line-class.ts).
  if (seg.isImpulse === true) return { startIdx, isKnown: true };
  let isKnown = false;
  const lookBackS = prev !== null ? Math.min(2, tr.timeS[seg.startIdx] - tr.timeS[prev.startIdx]) : 0;
  for (const mk of ctx.markers) {
    if (mk.kind !== 'driving-off') continue;
    if (mk.timeS < startS - Math.max(lookBackS, MARKER_SEARCH_S) || mk.timeS > startS + MARKER_SEARCH_S) continue;
    // A marker is a hint: the decay starts at the kink the envelope shows near it (kink.ts).
    startIdx = decayStartNearMarker(tr, seg, prev, mk, ctx.isWide, ctx.warnings);
    isKnown = true;
  }
  if (!isKnown && prev !== null) {
    const ref = meanPower(tr, Math.max(prev.startIdx, seg.startIdx - Math.round(0.5 * rate)), seg.startIdx - Math.ceil(tr.env.kernelLength / 2), 1, true);
    if (Number.isFinite(ref)) {
      let k = Math.max(prev.startIdx, seg.startIdx - Math.ceil(tr.env.kernelLength / 2));
      while (k < seg.endIdx - 1 && tr.powerWide[k] >= ref * 0.794) k++;
      startIdx = k;
      isKnown = true;
    }
  }
  return { startIdx, isKnown };
}

/** A decay: exponential over the background from one filter transient after its kink into the quiet after it. */
function fitDecaySegment(out: FittedSegment, segs: RegimeSegment[], i: number, ctx: SegmentFitContext): void {
  const { tr, seg, report } = out;
  const rate = tr.env.outputRateHz;
  const prev = i > 0 ? segs[i - 1] : null;
  const next = i + 1 < segs.length ? segs[i + 1] : null;
  const { startIdx, isKnown } = decayKink(tr, seg, prev, ctx);
  // Skip the envelope filter's transient: it spans half a kernel either side of the kink (the
  // marker), and the regime's own decay start may lie up to half a kernel before the kink.
  const quietHi = next !== null && next.state === STATE_QUIET ? next.endIdx : seg.endIdx;
  const fitDecay = (wide: boolean): RateFit => {
    const kLen = wide ? tr.env.wideLength : tr.env.kernelLength;
    const skip = isKnown ? Math.ceil(kLen / 2) + 1 : tr.env.kernelLength + 1;
    const w0 = Math.min(seg.endIdx - 1, startIdx + skip);
    // Background from the quiet after the decay; with too little of it the fit estimates the
    // background itself (the spectral background during the decay holds the loud tone's leakage).
    const b0 = seg.endIdx + Math.round(0.2 * rate);
    const b1 = Math.min(quietHi, seg.endIdx + Math.round(BG_WINDOW_S * rate));
    let bg = meanPower(tr, b0, b1, Math.round(BG_MIN_S * rate), wide);
    if (!Number.isFinite(bg)) bg = meanPower(tr, b0, b1, Math.round(0.1 * rate), wide);
    let w1 = Math.min(quietHi, seg.endIdx + Math.round(DECAY_TAIL_S * rate));
    w1 = contiguousEnd(tr, w0, w1 - w0, w1);
    const series = buildSeries(tr, w0, w1, wide);
    const opts = Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {};
    return fitExponential(series, { ...opts, refTimeS: series.timeS.length > 0 ? series.timeS[0] : report.startS });
  };
  let fit = fitDecay(ctx.isWide);
  if (!ctx.isWide && isKnown) {
    // A line within the wide band's reach was seen. A fast decay leaves the narrow band only a
    // few independent samples, the wide band many: fit both and keep the tighter interval (a
    // line that disturbs the wide band shows in its residuals and so widens its interval).
    const wideFit = fitDecay(true);
    const width = (f: RateFit): number => (f.isValid ? f.ci95PerS[1] - f.ci95PerS[0] : Infinity);
    if (wideFit.isValid && wideFit.ratePerS < 0 && width(wideFit) < width(fit)) fit = wideFit;
  }
  setRate(out, fit);
  if (fit.isValid) report.model = 'exponential';
}

/** A steady stretch: its rate (about zero) and the limit-cycle level above the background. */
function fitSteadySegment(out: FittedSegment): void {
  const { tr, seg, report } = out;
  const series = buildSeries(tr, seg.startIdx, seg.endIdx, false);
  const bg = meanBg(tr, seg.startIdx, seg.endIdx);
  const mp = meanPower(tr, seg.startIdx, seg.endIdx, 1);
  if (Number.isFinite(mp)) {
    const b = Number.isFinite(bg) ? bg : 0;
    report.limitAmplitudeDbfs = 10 * Math.log10(Math.max(mp - b, 1e-30));
    // Interval of the mean power from the samples' spread with the effective count 2·B·D.
    let ss = 0;
    let c = 0;
    for (let k = Math.max(seg.startIdx, tr.validFrom); k < seg.endIdx; k++) {
      if (tr.clipped[k]) continue;
      ss += (tr.power[k] - mp) * (tr.power[k] - mp);
      c++;
    }
    const nEff = Math.min(c, 2 * tr.env.bandwidthHz * (report.endS - report.startS));
    if (c > 1 && nEff >= 1) {
      const h = (Z_975 * Math.sqrt(ss / (c - 1))) / Math.sqrt(nEff);
      if (mp - h > b) out.limitCi95Dbfs = [10 * Math.log10(mp - h - b), 10 * Math.log10(mp + h - b)];
    }
  }
  const fit = fitExponential(series, Number.isFinite(bg) && bg > 0 ? { backgroundPower: bg } : {});
  setRate(out, fit);
  if (fit.isValid) report.model = 'exponential';
}
