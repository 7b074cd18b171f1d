/**
 * The figures of the live screen, from the segments the analysis has closed so far: the latest
 * growth and decay rates with their 95 % intervals and the figures derived from them by
 * dsp/derived.ts (effective gain, damping ratio, Q, T60, doubling time).
 */
import { deriveSummary } from '../../dsp/derived';
import type { Interval, RegimeKind, Segment, Summary } from '../../dsp/types';

export interface LiveSummary extends Summary {
  /** Frequency of the newest frame, Hz (NaN when no tone is tracked right now). */
  latestFrequencyHz: number;
  regime: RegimeKind;
  /** Time span of the segments behind the shown growth and decay rates, s. */
  growthSpanS: [number, number] | null;
  decaySpanS: [number, number] | null;
}

/** An empty summary: nothing measured yet. */
export function emptyLiveSummary(): LiveSummary {
  return {
    ...deriveSummary({ frequencyHz: null, growth: null, decay: null }),
    latestFrequencyHz: Number.NaN,
    regime: 'quiet',
    growthSpanS: null,
    decaySpanS: null,
  };
}

function copyInterval(ci: Interval | null): Interval {
  return ci && Number.isFinite(ci[0]) && Number.isFinite(ci[1]) ? [ci[0], ci[1]] : [Number.NaN, Number.NaN];
}

/** Relative and absolute frequency tolerance for a segment to count as the main tone's. */
const SAME_TONE_FRACTION = 0.015;
const SAME_TONE_HZ = 1.5;

/**
 * True when a segment at `segmentHz` belongs to the main tone at `mainHz` (within 1.5 % or
 * 1.5 Hz, whichever is wider: a tone drifts a little as the gas warms). With no main tone known
 * yet, every segment counts.
 */
export function isSameTone(segmentHz: number, mainHz: number): boolean {
  if (!Number.isFinite(mainHz) || mainHz <= 0) return true;
  if (!Number.isFinite(segmentHz)) return false;
  return Math.abs(segmentHz - mainHz) <= Math.max(SAME_TONE_HZ, SAME_TONE_FRACTION * mainHz);
}

/**
 * Updates `summary` with newly closed segments (in time order) and the newest frame.
 * Only segments of the main tone (the one the track follows, last seen at `mainFrequencyHz`)
 * count: the analysis also closes segments of weaker candidate tones. A growth needs a positive
 * rate and a decay a negative one; anything else is not shown as such.
 * In the report contract a decay segment's rate is negative; the summary shows decay as a
 * positive decay rate, and its interval is flipped accordingly. The frequency of the derived
 * figures is that of the decay segment (ζ and Q belong to the free decay), else of the growth.
 */
export function updateLiveSummary(
  summary: LiveSummary,
  newSegments: readonly Segment[],
  latest: { frequencyHz: number; regime: RegimeKind } | null,
  mainFrequencyHz = Number.NaN,
): LiveSummary {
  if (latest) {
    summary.latestFrequencyHz = latest.frequencyHz;
    summary.regime = latest.regime;
  }
  let growth: { ratePerS: number; ci95PerS: Interval; freqHz: number; span: [number, number] } | null = null;
  let decay: { decayRatePerS: number; ci95PerS: Interval; freqHz: number; span: [number, number] } | null = null;
  let limit: number | null = null;
  for (const seg of newSegments) {
    if (!isSameTone(seg.frequencyHz, mainFrequencyHz)) continue;
    if (seg.ratePerS !== null && Number.isFinite(seg.ratePerS)) {
      if (seg.kind === 'growth' && seg.ratePerS > 0) {
        growth = { ratePerS: seg.ratePerS, ci95PerS: copyInterval(seg.rateCi95PerS), freqHz: seg.frequencyHz, span: [seg.startS, seg.endS] };
      } else if (seg.kind === 'decay' && seg.ratePerS < 0) {
        const ci = copyInterval(seg.rateCi95PerS);
        decay = { decayRatePerS: -seg.ratePerS, ci95PerS: [-ci[1], -ci[0]], freqHz: seg.frequencyHz, span: [seg.startS, seg.endS] };
      }
    }
    if ((seg.kind === 'steady' || seg.kind === 'growth') && typeof seg.limitAmplitudeDbfs === 'number' && Number.isFinite(seg.limitAmplitudeDbfs)) {
      limit = seg.limitAmplitudeDbfs;
    }
  }
  if (!growth && !decay && limit === null) return summary;

  const g = growth ?? (summary.growthRatePerS !== null ? { ratePerS: summary.growthRatePerS, ci95PerS: copyInterval(summary.growthRateCi95PerS ?? null) } : null);
  const d = decay ?? (summary.decayRatePerS !== null ? { decayRatePerS: summary.decayRatePerS, ci95PerS: copyInterval(summary.decayRateCi95PerS ?? null) } : null);
  const freqHz = decay?.freqHz ?? growth?.freqHz ?? summary.frequencyHz;
  const derived = deriveSummary({
    frequencyHz: freqHz,
    growth: g ? { ratePerS: g.ratePerS, ci95PerS: g.ci95PerS } : null,
    decay: d ? { decayRatePerS: d.decayRatePerS, ci95PerS: d.ci95PerS } : null,
    limitAmplitudeDbfs: limit ?? summary.limitAmplitudeDbfs ?? null,
  });
  Object.assign(summary, derived);
  if (growth) summary.growthSpanS = growth.span;
  if (decay) summary.decaySpanS = decay.span;
  return summary;
}
