/**
 * The verdict at a glance: humming, dying away, stable, near threshold, or not yet known, with
 * the margin that backs it (the growth rate of the hum, or the decay rate and damping ratio of
 * the quiet system) and its 95 % interval. One state for the whole screen: the regime word, the
 * verdict and the level caution are all derived from the same inputs, so "Quiet" never stands
 * beside a loud tone.
 *
 * Relations (REFERENCES.md §5): amplitude e-folding rate σ (positive grows); a stable mode's
 * decay rate α = −σ; damping ratio ζ = α / (2π f); a mode rings for 1/(2π ζ) cycles per e-fold.
 */
import type { Interval, ModeStatistics, NoiseDriven, RegimeKind, Segment } from '../../dsp/types';
import { regimeFromInterval } from '../../dsp/mode-statistics';
import type { MarginEstimate } from '../worker/protocol';
import type { LiveSummary } from '../worker/live-summary';
import { formatRate, formatRatio, isShowable, isShowableInterval } from '../format';

/**
 * A quiet mode whose damping ratio is under 0.5 % rings for more than 1/(2π·0.005) ≈ 32 cycles
 * per e-fold of its amplitude: its damping is small enough that a modest rise in driving
 * (firing rate, heater power) can make it hum. The figure is a judgement for the field
 * (REFERENCES.md §92), not a standard. Used only by stabilityOf below.
 */
export const NEAR_THRESHOLD_DAMPING_RATIO = 0.005;

export type Stability = 'stable' | 'near-threshold' | 'humming';

/**
 * The app's one rule for "stable / near threshold / humming" of a mode, from its linear growth
 * rate σ or ν (1/s, positive grows), the 95 % interval and its frequency: the sign the interval
 * allows (dsp/mode-statistics.ts regimeFromInterval, REFERENCES.md §42: near threshold when the
 * interval holds zero), and a mode the data call stable is still near threshold when its damping
 * ratio is under NEAR_THRESHOLD_DAMPING_RATIO (§92). The live verdict, the live margin and the
 * report's noise statistics all say what this says. Without an interval the estimate stands for it.
 */
export function stabilityOf(ratePerS: number, ci95PerS: Interval | null | undefined, frequencyHz: number): Stability {
  const ci: Interval = isShowableInterval(ci95PerS) ? [Math.min(ci95PerS[0], ci95PerS[1]), Math.max(ci95PerS[0], ci95PerS[1])] : [ratePerS, ratePerS];
  const bySign = regimeFromInterval(ci);
  if (bySign !== 'stable') return bySign === 'humming' ? 'humming' : 'near-threshold';
  return dampingRatioOf(-ratePerS, frequencyHz) < NEAR_THRESHOLD_DAMPING_RATIO ? 'near-threshold' : 'stable';
}

/** The words of each call, for every screen that shows one. */
export const STABILITY_WORDS: Record<Stability, string> = {
  stable: 'stable',
  'near-threshold': 'near threshold',
  humming: 'humming',
};

export type VerdictKind = 'humming' | 'dying-away' | 'near-threshold' | 'stable' | 'tone' | 'quiet';

export interface Verdict {
  kind: VerdictKind;
  /** The word at a glance ("Humming", "Stable", ...). */
  headline: string;
  /** The margin with its unit and interval ("growth rate 7.02 1/s (95 % CI …)"), or what is missing. */
  margin: string;
  /** Where the margin comes from, in words. */
  basis: string;
  /** The regime word consistent with the verdict (never "Quiet" while a tone sounds). */
  regimeWord: string;
  /** Frequency of the mode the margin belongs to, Hz (NaN when the margin is not a quiet mode's). */
  marginFrequencyHz: number;
}

/** A margin in the verdict's terms: σ of the least-damped mode with its interval and frequency. */
export interface Margin {
  growthRatePerS: number;
  ci95PerS: Interval | null;
  frequencyHz: number;
  basis: string;
}

/** Damping ratio ζ = α/(2π f) of a decay rate α at frequency f (REFERENCES.md §5); NaN when undefined. */
export function dampingRatioOf(decayRatePerS: number, frequencyHz: number): number {
  return frequencyHz > 0 && Number.isFinite(decayRatePerS) ? decayRatePerS / (2 * Math.PI * frequencyHz) : Number.NaN;
}

/**
 * The margin to show for a quiet system: the live estimate when the analysis gives one, else the
 * largest linear growth rate from the noise statistics of the report (report.modeStatistics),
 * else the least-damped of the noise-excited resonances reported; the mode closest to humming
 * sets the margin, whichever is the loudest. Null when there is none.
 */
export function quietMargin(live: MarginEstimate | null | undefined, noiseDriven: readonly NoiseDriven[] = [], modeStatistics: readonly ModeStatistics[] = []): Margin | null {
  if (live && isShowable(live.growthRatePerS)) {
    return { growthRatePerS: live.growthRatePerS, ci95PerS: isShowableInterval(live.growthRateCi95PerS) ? live.growthRateCi95PerS : null, frequencyHz: live.frequencyHz, basis: live.method };
  }
  let closest: ModeStatistics | null = null;
  for (const m of modeStatistics) {
    if (!isShowable(m.linearGrowthRatePerS) || !isShowableInterval(m.linearGrowthRateCi95PerS) || !(m.frequencyHz > 0)) continue;
    if (!closest || m.linearGrowthRatePerS > (closest.linearGrowthRatePerS ?? -Infinity)) closest = m;
  }
  if (closest && isShowable(closest.linearGrowthRatePerS)) {
    return { growthRatePerS: closest.linearGrowthRatePerS, ci95PerS: closest.linearGrowthRateCi95PerS ?? null, frequencyHz: closest.frequencyHz, basis: `linear growth rate from the noise statistics (${closest.method})` };
  }
  let best: NoiseDriven | null = null;
  let bestZeta = Infinity;
  for (const n of noiseDriven) {
    const zeta = dampingRatioOf(n.decayRatePerS, n.frequencyHz);
    if (Number.isFinite(zeta) && zeta < bestZeta) {
      bestZeta = zeta;
      best = n;
    }
  }
  if (!best) return null;
  const ci = isShowableInterval(best.decayRateCi95PerS) ? ([-best.decayRateCi95PerS[1], -best.decayRateCi95PerS[0]] as Interval) : null;
  return { growthRatePerS: -best.decayRatePerS, ci95PerS: ci, frequencyHz: best.frequencyHz, basis: 'from the noise-excited resonance of the quiet system' };
}

/** The margin text of a stable or near-threshold system: "decay rate 5.1 1/s (…) · damping ratio 0.0046 (…)". */
export function formatQuietMargin(m: Margin): string {
  const decay = -m.growthRatePerS;
  const ci: Interval | null = m.ci95PerS ? [-m.ci95PerS[1], -m.ci95PerS[0]] : null;
  if (decay <= 0) return `growth rate ${formatRate(m.growthRatePerS, m.ci95PerS)}`;
  const zeta = dampingRatioOf(decay, m.frequencyHz);
  const zetaCi: Interval | null = ci ? [dampingRatioOf(ci[0], m.frequencyHz), dampingRatioOf(ci[1], m.frequencyHz)] : null;
  return `decay rate ${formatRate(decay, ci)} · damping ratio ${formatRatio(zeta, zetaCi)}`;
}

/** Stable, near threshold or humming, from a quiet system's margin (stabilityOf). */
export function classifyMargin(m: Margin): Stability {
  return stabilityOf(m.growthRatePerS, m.ci95PerS, m.frequencyHz);
}

const REGIME_WORDS: Record<RegimeKind, string> = {
  quiet: 'Quiet',
  growth: 'Growing',
  steady: 'Steady hum',
  decay: 'Dying away',
};

export interface VerdictInput {
  summary: LiveSummary;
  margin?: MarginEstimate | null;
  /** Noise-excited resonances and noise statistics of a finished record (report.noiseDriven, report.modeStatistics). */
  noiseDriven?: readonly NoiseDriven[];
  modeStatistics?: readonly ModeStatistics[];
  /** Segments of a finished record: its ring-downs after a knock (isImpulseResponse) measure the damping directly. */
  segments?: readonly Segment[];
  /** True once the record is finished (the words speak of its end). */
  isFinal?: boolean;
}

/** The verdict for what the analysis has seen so far. */
/**
 * The margin from the ring-downs of a knock: each excited mode's decay rate, the least-damped mode
 * (smallest damping ratio) setting it, as for noise-excited resonances (REFERENCES.md §6, §92).
 */
export function ringDownMargin(segments: readonly Segment[] = []): Margin | null {
  let best: Margin | null = null;
  let bestZeta = Infinity;
  for (const s of segments) {
    if (s.kind !== 'decay' || s.isImpulseResponse !== true || !isShowable(s.ratePerS) || !(s.ratePerS < 0)) continue;
    const zeta = dampingRatioOf(-s.ratePerS, s.frequencyHz);
    if (!(zeta < bestZeta)) continue;
    bestZeta = zeta;
    best = { growthRatePerS: s.ratePerS, ci95PerS: isShowableInterval(s.rateCi95PerS) ? s.rateCi95PerS : null, frequencyHz: s.frequencyHz, basis: 'the ring-down after a knock (the least-damped mode it excited)' };
  }
  return best;
}

export function verdictOf({ summary, margin, noiseDriven, modeStatistics, segments, isFinal }: VerdictInput): Verdict {
  const regime = summary.regime;
  const growth = summary.growthRatePerS;
  const growthText = isShowable(growth) ? `growth rate ${formatRate(growth, summary.growthRateCi95PerS)}` : 'growth rate not fitted yet';
  if (isFinal && isShowable(growth) && (regime === 'decay' || regime === 'quiet')) {
    // A finished record that hummed and then stopped: both halves of the story.
    const d = summary.decayRatePerS;
    return {
      kind: 'humming',
      headline: 'Hummed, then stopped',
      margin: `${growthText}${isShowable(d) ? ` · decay rate ${formatRate(d, summary.decayRateCi95PerS)}` : ''}`,
      basis: 'the tone grew out of the background and died away when the driving stopped',
      regimeWord: REGIME_WORDS[regime],
      marginFrequencyHz: Number.NaN,
    };
  }
  if (regime === 'growth' || regime === 'steady') {
    return {
      kind: 'humming',
      headline: regime === 'growth' ? 'Humming: growing' : 'Humming',
      margin: growthText,
      basis: isShowable(growth) ? 'how fast the hum grew from the background' : 'a tone rose out of the background',
      regimeWord: REGIME_WORDS[regime],
      marginFrequencyHz: Number.NaN,
    };
  }
  if (regime === 'decay') {
    const d = summary.decayRatePerS;
    return {
      kind: 'dying-away',
      headline: 'Dying away',
      margin: isShowable(d) ? `decay rate ${formatRate(d, summary.decayRateCi95PerS)}` : 'decay rate being fitted',
      basis: 'the hum stops: the driving is off or below threshold',
      regimeWord: REGIME_WORDS.decay,
      marginFrequencyHz: Number.NaN,
    };
  }
  const hasTone = isShowable(summary.latestFrequencyHz);
  const m = quietMargin(margin, noiseDriven, modeStatistics) ?? (isShowable(growth) ? null : ringDownMargin(segments));
  if (m) {
    const kind = classifyMargin(m);
    const headline = kind === 'stable' ? 'Stable' : kind === 'near-threshold' ? 'Near threshold' : 'Humming';
    return { kind, headline, margin: formatQuietMargin(m), basis: m.basis, regimeWord: hasTone ? 'Tone present' : REGIME_WORDS.quiet, marginFrequencyHz: m.frequencyHz };
  }
  if (hasTone) {
    return {
      kind: 'tone',
      headline: 'Tone present',
      margin: isShowable(growth) ? growthText : 'no growth seen',
      basis: isFinal ? 'a steady tone with no onset in this record: a hum already running, or a resonance driven by noise' : 'no onset seen yet: a hum already running, or a resonance driven by noise',
      regimeWord: 'Tone present',
      marginFrequencyHz: Number.NaN,
    };
  }
  const d = summary.decayRatePerS;
  if (isShowable(d)) {
    return {
      kind: 'stable',
      headline: 'Stable (hum stopped)',
      margin: `decay rate ${formatRate(d, summary.decayRateCi95PerS)}`,
      basis: 'the free decay after the driving stopped',
      regimeWord: REGIME_WORDS.quiet,
      marginFrequencyHz: Number.NaN,
    };
  }
  return {
    kind: 'quiet',
    headline: 'Quiet',
    margin: isFinal ? 'no margin measured (no resonance stood out of the noise)' : 'margin needs a few seconds of quiet',
    basis: 'no tone stands out of the background',
    regimeWord: REGIME_WORDS.quiet,
    marginFrequencyHz: Number.NaN,
  };
}
