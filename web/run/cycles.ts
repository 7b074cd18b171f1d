/**
 * Firing cycles of a record, for the per-cycle table: each rise of a tone out of the background
 * (a growth segment), the steady stretch that may follow, and the decay that ends it. Taken from
 * the report's own per-tone cycles when it has them, else built from its segments of the same
 * tone in time order.
 */
import type { Interval, Report, Segment } from '../../dsp/types';
import { isSameTone } from '../worker/live-summary';

export interface CycleRow {
  /** Frequency of the tone, Hz. */
  frequencyHz: number;
  startS: number;
  endS: number;
  growthRatePerS: number | null;
  growthRateCi95PerS: Interval | null;
  /** Positive decay rate, 1/s. */
  decayRatePerS: number | null;
  decayRateCi95PerS: Interval | null;
  limitAmplitudeDbfs: number | null;
}

/** Cycles as the report gives them per tone (when it does): field names follow the report contract. */
interface ReportCycle {
  startS: number;
  endS: number;
  frequencyHz?: number;
  growthRatePerS?: number | null;
  growthRateCi95PerS?: Interval | null;
  decayRatePerS?: number | null;
  decayRateCi95PerS?: Interval | null;
  limitAmplitudeDbfs?: number | null;
}

function reportCycles(report: Report): CycleRow[] | null {
  const tones = (report as { tones?: { frequencyHz: number; cycles?: ReportCycle[] }[] }).tones;
  if (!Array.isArray(tones) || !tones.some((t) => Array.isArray(t.cycles))) return null;
  const rows: CycleRow[] = [];
  for (const t of tones) {
    for (const c of t.cycles ?? []) {
      rows.push({
        frequencyHz: c.frequencyHz ?? t.frequencyHz,
        startS: c.startS,
        endS: c.endS,
        growthRatePerS: c.growthRatePerS ?? null,
        growthRateCi95PerS: c.growthRateCi95PerS ?? null,
        decayRatePerS: c.decayRatePerS ?? null,
        decayRateCi95PerS: c.decayRateCi95PerS ?? null,
        limitAmplitudeDbfs: c.limitAmplitudeDbfs ?? null,
      });
    }
  }
  return rows.sort((a, b) => a.startS - b.startS);
}

function positiveDecay(s: Segment): { rate: number | null; ci: Interval | null } {
  if (s.ratePerS === null || !(s.ratePerS < 0)) return { rate: null, ci: null };
  const ci = s.rateCi95PerS ? ([-s.rateCi95PerS[1], -s.rateCi95PerS[0]] as Interval) : null;
  return { rate: -s.ratePerS, ci };
}

/** The cycles of a record, in time order (empty when no tone rose). */
export function cyclesOf(report: Report): CycleRow[] {
  const given = reportCycles(report);
  if (given) return given;
  const rows: CycleRow[] = [];
  const open = new Map<number, CycleRow>();
  const segments = [...report.segments].sort((a, b) => a.startS - b.startS);
  for (const s of segments) {
    if (s.kind === 'quiet') continue;
    let key = -1;
    for (const [k, row] of open) if (isSameTone(s.frequencyHz, row.frequencyHz)) key = k;
    let row = key >= 0 ? open.get(key) : undefined;
    if (s.kind === 'growth') {
      // A new rise starts a new cycle of that tone.
      row = {
        frequencyHz: s.frequencyHz,
        startS: s.startS,
        endS: s.endS,
        growthRatePerS: s.ratePerS !== null && s.ratePerS > 0 ? s.ratePerS : null,
        growthRateCi95PerS: s.ratePerS !== null && s.ratePerS > 0 ? s.rateCi95PerS : null,
        decayRatePerS: null,
        decayRateCi95PerS: null,
        limitAmplitudeDbfs: s.limitAmplitudeDbfs ?? null,
      };
      rows.push(row);
      if (key >= 0) open.delete(key);
      open.set(rows.length - 1, row);
      continue;
    }
    if (!row) continue;
    row.endS = Math.max(row.endS, s.endS);
    if (s.kind === 'steady' && typeof s.limitAmplitudeDbfs === 'number') row.limitAmplitudeDbfs = s.limitAmplitudeDbfs;
    if (s.kind === 'decay') {
      const d = positiveDecay(s);
      row.decayRatePerS = d.rate;
      row.decayRateCi95PerS = d.ci;
      open.delete(key);
    }
  }
  return rows;
}
