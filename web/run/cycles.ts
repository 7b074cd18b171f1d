/**
 * The firing cycles of a record, per tone, for the cycle tables: each cycle's onset, growth rate,
 * limit amplitude and decay rate with their 95 % intervals, a ring-down after a knock (a decay with
 * no onset), and the tone's median rates across its cycles with their spread.
 *
 * Report version 2 (dsp/types.ts REPORT_VERSION) gives the cycles per tone (report.tones[].cycles),
 * harmonics under their tone (tones[].harmonics, when the analysis lists them) and ring-downs marked
 * isImpulseResponse. A stored report of version 1 has none of these: its cycles are rebuilt from
 * its segments, grouped by frequency, and `missing` says what the old report cannot tell.
 */
import { emptyCycle, medianAndSpread, type CycleMedian } from '../../dsp/report';
import type { Cycle, Interval, Report, Segment } from '../../dsp/types';

export { MAD_TO_SD, medianAndSpread, type CycleMedian } from '../../dsp/report';
import { isSameTone } from '../worker/live-summary';
import { formatClock, formatDb, formatHz, formatMissing, formatRate, formatSeconds, MISSING } from '../format';

/** One cycle of a tone (the report's Cycle; a rebuilt one has no onset time or limit interval). */
export type CycleRow = Cycle;

export interface HarmonicRow {
  /** Order k of the harmonic (its frequency is near k times the tone's). */
  k: number;
  frequencyHz: number;
}

export interface ToneCycles {
  frequencyHz: number;
  isSteadyLine: boolean;
  isMainsFrequency: boolean;
  harmonics: HarmonicRow[];
  cycles: CycleRow[];
  /** Null with fewer than two cycles giving a rate. */
  growth: CycleMedian | null;
  decay: CycleMedian | null;
}

export interface RecordCycles {
  reportVersion: number;
  tones: ToneCycles[];
  /** What an older report does not hold (empty for a current one). */
  missing: string[];
}

function withMedians(t: Omit<ToneCycles, 'growth' | 'decay'>): ToneCycles {
  const rates = (pick: (c: CycleRow) => number | null): number[] => t.cycles.map(pick).filter((r): r is number => r !== null);
  return { ...t, growth: medianAndSpread(rates((c) => c.growthRatePerS)), decay: medianAndSpread(rates((c) => c.decayRatePerS)) };
}


function positiveDecay(s: Segment): { rate: number | null; ci: Interval | null } {
  if (s.ratePerS === null || !(s.ratePerS < 0)) return { rate: null, ci: null };
  const ci = s.rateCi95PerS ? ([-s.rateCi95PerS[1], -s.rateCi95PerS[0]] as Interval) : null;
  return { rate: -s.ratePerS, ci };
}

/**
 * Cycles rebuilt from a version-1 report's segments: a growth opens a cycle of its tone (tones
 * told apart by frequency, as version 1 did), the steady level and the decay that follow close it.
 */
function rebuiltTones(report: Report): ToneCycles[] {
  const tones: { frequencyHz: number; cycles: CycleRow[]; open: CycleRow | null }[] = [];
  const segments = [...report.segments].sort((a, b) => a.startS - b.startS);
  for (const s of segments) {
    if (s.kind === 'quiet') continue;
    let tone = tones.find((t) => isSameTone(s.frequencyHz, t.frequencyHz));
    if (s.kind === 'growth') {
      if (!tone) tones.push((tone = { frequencyHz: s.frequencyHz, cycles: [], open: null }));
      const c = emptyCycle(s);
      if (s.ratePerS !== null && s.ratePerS > 0) {
        c.growthRatePerS = s.ratePerS;
        c.growthRateCi95PerS = s.rateCi95PerS;
      }
      tone.cycles.push(c);
      tone.open = c;
      continue;
    }
    const c = tone?.open;
    if (!tone || !c) continue;
    c.endS = Math.max(c.endS, s.endS);
    if (s.kind === 'steady' && typeof s.limitAmplitudeDbfs === 'number') c.limitAmplitudeDbfs = s.limitAmplitudeDbfs;
    if (s.kind === 'decay') {
      const d = positiveDecay(s);
      c.decayRatePerS = d.rate;
      c.decayRateCi95PerS = d.ci;
      tone.open = null;
    }
  }
  return tones.map((t) => withMedians({ frequencyHz: t.frequencyHz, isSteadyLine: false, isMainsFrequency: false, harmonics: [], cycles: t.cycles }));
}

/** Cycles of a version-2 report: its own, per tone, with harmonics under their tone. */
function reportTones(report: Report): ToneCycles[] {
  return (report.tones ?? []).map((t) =>
    withMedians({
      frequencyHz: t.frequencyHz,
      isSteadyLine: t.isSteadyLine,
      isMainsFrequency: t.isMainsFrequency === true,
      harmonics: (t.harmonics ?? []).map((h) => ({ k: h.k, frequencyHz: h.frequencyHz })).sort((a, b) => a.k - b.k),
      cycles: [...(t.cycles ?? [])].sort((a, b) => a.startS - b.startS),
    }),
  );
}

/** Tones whose cycles a table shows: those that grew or rang down (a steady line has no firing cycles). */
export function cycledTones(rc: RecordCycles): ToneCycles[] {
  return rc.tones.filter((t) => !t.isSteadyLine && (t.cycles.length > 0 || t.harmonics.length > 0));
}

/** The steady lines of a record in a sentence ("" when none): lines that never grew or decayed, mains hum among them. */
export function steadyLinesLine(rc: RecordCycles): string {
  const lines = rc.tones.filter((t) => t.isSteadyLine);
  if (!lines.length) return '';
  return `Steady lines (never grew or decayed: no firing cycles): ${lines.map((t) => `${formatHz(t.frequencyHz)}${t.isMainsFrequency ? ' (mains multiple)' : ''}`).join(', ')}.`;
}

/** What a version-1 report lacks, in the words of the cycle table. */
export const VERSION_1_MISSING = [
  'cycles rebuilt from the segments (tones told apart by frequency alone)',
  'no onset times with their intervals',
  'no interval of the limit amplitude',
  'ring-downs after a knock not marked (a knock may show as a growth)',
  'harmonics not grouped under their tone',
];

/**
 * The cycles of a stored or fresh report of any version the app has written: its own per-tone
 * cycles when it has them, else rebuilt from its segments (a version-1 report, or one completed
 * from the stored track of an interrupted recording), with what such a report cannot tell.
 */
export function cyclesOf(report: Report): RecordCycles {
  const isPerTone = Array.isArray(report.tones) && report.tones.some((t) => Array.isArray(t.cycles));
  if (isPerTone) return { reportVersion: report.reportVersion, tones: reportTones(report), missing: [] };
  return { reportVersion: report.reportVersion, tones: rebuiltTones(report), missing: VERSION_1_MISSING };
}

/** "median 7.02 1/s, spread 0.31 1/s over 12 cycles" (spread: 1.4826 × median absolute deviation). */
function formatCycleMedian(m: CycleMedian | null, what: string): string {
  if (!m) return `${what}: ${MISSING} (fewer than two cycles with a ${what})`;
  return `${what}: median ${formatRate(m.medianPerS)}, spread ${formatRate(m.spreadPerS)} over ${m.count} cycles`;
}

/** The cells of one cycle: a ring-down is a decay after a knock, with no onset and no growth. */
export function cycleCells(c: CycleRow, k: number): string[] {
  const isKnock = c.isImpulseResponse;
  return [
    String(k + 1),
    `${formatClock(c.startS)}–${formatClock(c.endS)}`,
    isKnock ? 'none (ring-down after a knock)' : c.onsetS === null ? formatMissing('no rise from quiet') : formatSeconds(c.onsetS, c.onsetCi95S),
    isKnock ? formatMissing('knock') : formatRate(c.growthRatePerS, c.growthRateCi95PerS, 'not fitted'),
    formatDb(c.limitAmplitudeDbfs, 'dBFS', c.limitAmplitudeCi95Dbfs, 'no limit cycle'),
    isKnock ? `ring-down (knock) ${formatRate(c.decayRatePerS, c.decayRateCi95PerS, 'not fitted')}` : formatRate(c.decayRatePerS, c.decayRateCi95PerS, 'not seen'),
  ];
}

/** A tone's heading: its frequency, the mains label, its count of cycles. */
export function toneHeading(t: ToneCycles): string {
  const mains = t.isMainsFrequency ? ', on a multiple of the mains frequency' : '';
  return `Tone ${formatHz(t.frequencyHz)}${mains}: ${t.cycles.length} cycle${t.cycles.length === 1 ? '' : 's'}`;
}

/** The growth and decay medians of a tone on one line. */
export function cycleMedianLine(t: ToneCycles): string {
  return `${formatCycleMedian(t.growth, 'growth rate')} · ${formatCycleMedian(t.decay, 'decay rate')}`;
}

/** Column heads of a cycle table (the cells of cycleCells). */
export const CYCLE_COLUMNS = ['#', 'Time (m:s)', 'Onset', 'Growth rate', 'Limit amplitude', 'Decay rate'];
