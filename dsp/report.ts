/**
 * Report assembly (docs/DESIGN.md "Report"): onsets and segments of the tones (not of steady
 * lines or grouped lines), the main tone's summary with pooled rates, clipping and warnings.
 */
import { deriveSummary } from './derived';
import { Z_975 } from './stats';
import type { Family, Grouping } from './grouping';
import { ON_DB, STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY } from './regime';
import type { FittedSegment } from './segment-fit';
import { meanBg, meanPower } from './tone-store';
import { harmonicToleranceHz, isMainsMultiple, MAINS_HZ } from './track';
import { REPORT_VERSION, type ClippedSpan, type Cycle, type HarmonicEntry, type Interval, type NoiseDriven, type RateFit, type Report, type Segment } from './types';

/** Share of a tone's sounding frames in which a peak at k·f must be seen for k to be listed as its harmonic. */
const HARMONIC_MIN_SHARE = 0.5;
/** Clipped stretches listed one by one in the warnings. */
const CLIP_WARNINGS_LISTED = 10;

/** Warnings for stretches of unusable input: the first CLIP_WARNINGS_LISTED listed, then counts. */
function spanWarnings(spans: ClippedSpan[], dropped: number, what: string): string[] {
  const out = spans.slice(0, CLIP_WARNINGS_LISTED).map((c) => `${what} in ${c.startS.toFixed(2)}–${c.endS.toFixed(2)} s`);
  if (spans.length > CLIP_WARNINGS_LISTED) out.push(`${what} in ${spans.length - CLIP_WARNINGS_LISTED} more stretches`);
  if (dropped > 0) out.push(`${dropped} further stretches of ${what} not listed`);
  return out;
}

/** Inverse-variance pooled rate of several fits (sd from the half-width of each 95 % interval). */
function pooledRate(fits: { rate: number; ci: Interval }[]): { rate: number; ci: Interval } | null {
  if (fits.length === 0) return null;
  if (fits.length === 1) return { rate: fits[0].rate, ci: fits[0].ci };
  let sw = 0;
  let swx = 0;
  for (const f of fits) {
    const sd = (f.ci[1] - f.ci[0]) / (2 * Z_975);
    if (!(sd > 0)) continue;
    sw += 1 / (sd * sd);
    swx += f.rate / (sd * sd);
  }
  if (!(sw > 0)) return { rate: fits[0].rate, ci: fits[0].ci };
  const m = swx / sw;
  const h = Z_975 / Math.sqrt(sw);
  return { rate: m, ci: [m - h, m + h] };
}

/**
 * A decay is a fall and a growth a rise: a fitted rate of the other sign (or zero) means the
 * segment is neither; it is reported as steady (still ON_DB clear of the background) or quiet,
 * without a rate.
 */
function dropWrongSign(fitted: FittedSegment[], warnings: string[]): void {
  for (const f of fitted) {
    const r = f.report;
    if (r.ratePerS === null || (r.kind !== 'growth' && r.kind !== 'decay')) continue;
    if (r.kind === 'growth' ? r.ratePerS > 0 : r.ratePerS < 0) continue;
    warnings.push(`${r.kind} at ${r.startS.toFixed(2)} s: fitted rate ${r.ratePerS.toPrecision(3)} 1/s has the wrong sign; not a ${r.kind}`);
    const mp = meanPower(f.tr, f.seg.startIdx, f.seg.endIdx, 1);
    const bg = meanBg(f.tr, f.seg.startIdx, f.seg.endIdx);
    r.kind = mp > 10 ** (ON_DB / 10) * bg ? 'steady' : 'quiet';
    r.ratePerS = null;
    r.rateCi95PerS = null;
    r.model = null;
    f.fit = null;
    f.onsetTimeS = null;
  }
}

/**
 * Main tone: the tone (not a steady line) with the most onsets, then the strongest; with none,
 * the strongest steady line (a hum that sounds through the whole record is one by its envelope).
 */
function mainTone(tones: Family[], fitted: FittedSegment[]): Family | null {
  let main: Family | null = null;
  let mainScore = -Infinity;
  for (const fam of tones) {
    const famFits = fitted.filter((f) => fam.tracks.includes(f.tr));
    if (!famFits.some((f) => f.seg.state !== STATE_QUIET)) continue;
    const isLine = fam.isSteadyLine || fam.tracks.every((t) => t.isSteadyLine);
    const nOn = famFits.filter((f) => f.onsetTimeS !== null).length;
    const score = (isLine ? -1e6 : 0) + nOn * 1000 + fam.strength;
    if (score > mainScore) {
      mainScore = score;
      main = fam;
    }
  }
  return main;
}

/** Summary of the main tone: frequency in the limit cycle, pooled growth and decay rates, limit level. */
function summarise(main: Family, fitted: FittedSegment[]): Report['summary'] {
  const famFits = fitted.filter((f) => main.tracks.includes(f.tr));
  const growth = pooledRate(
    famFits
      .filter((f) => f.seg.state === STATE_GROWTH && f.fit !== null && f.fit.isValid && f.fit.ratePerS > 0)
      .map((f) => ({ rate: (f.fit as RateFit).ratePerS, ci: [(f.fit as RateFit).ci95PerS[0], (f.fit as RateFit).ci95PerS[1]] as Interval })),
  );
  const decay = pooledRate(
    famFits
      .filter((f) => f.seg.state === STATE_DECAY && f.fit !== null && f.fit.isValid && f.fit.ratePerS < 0)
      .map((f) => ({ rate: -(f.fit as RateFit).ratePerS, ci: [-(f.fit as RateFit).ci95PerS[1], -(f.fit as RateFit).ci95PerS[0]] as Interval })),
  );
  const steadyFreqs = famFits.filter((f) => f.seg.state === STATE_STEADY).map((f) => f.report.frequencyHz);
  const freqs = steadyFreqs.length > 0 ? steadyFreqs : famFits.filter((f) => f.seg.state !== STATE_QUIET).map((f) => f.report.frequencyHz);
  freqs.sort((a, b) => a - b);
  const freq = freqs.length > 0 ? freqs[Math.floor(freqs.length / 2)] : main.freqHz;
  // The limit cycle is the level a growth saturated at: the steady stretches a growth reached.
  // Other steady stretches of the tone (a resonance heard in the quiet before the hum, tens of dB
  // lower) would pull the mean down; only a tone never seen growing reports them.
  const steady = famFits.filter((f) => f.seg.state === STATE_STEADY && typeof f.report.limitAmplitudeDbfs === 'number');
  const reached = steady.filter((f) => {
    const i = f.tr.regime.segments.indexOf(f.seg);
    return i > 0 && f.tr.regime.segments[i - 1].state === STATE_GROWTH;
  });
  const limits = (reached.length > 0 ? reached : steady).map((f) => f.report.limitAmplitudeDbfs as number);
  const limit = limits.length > 0 ? limits.reduce((a, b) => a + b, 0) / limits.length : null;
  return deriveSummary({
    frequencyHz: freq,
    growth: growth !== null ? { ratePerS: growth.rate, ci95PerS: growth.ci } : null,
    decay: decay !== null ? { decayRatePerS: decay.rate, ci95PerS: decay.ci } : null,
    limitAmplitudeDbfs: limit,
  });
}

/** A cycle spanning segment s, with no figures yet. */
export function emptyCycle(s: Segment): Cycle {
  return {
    startS: s.startS,
    endS: s.endS,
    onsetS: null,
    onsetCi95S: null,
    growthRatePerS: null,
    growthRateCi95PerS: null,
    limitAmplitudeDbfs: null,
    limitAmplitudeCi95Dbfs: null,
    decayRatePerS: null,
    decayRateCi95PerS: null,
    isImpulseResponse: s.isImpulseResponse === true,
  };
}

/**
 * The cycles of a tone in time order: a cycle opens at a growth (its onset, when it rose from
 * quiet) or, without one, at the tone's first steady or decay segment after quiet; it takes the
 * steady level and the decay that follow. A ring-down after a knock is a cycle of its own.
 */
function cyclesOfTone(fam: Family, fitted: FittedSegment[]): Cycle[] {
  const own = fitted.filter((f) => fam.tracks.includes(f.tr) && f.report.kind !== 'quiet').sort((a, b) => a.report.startS - b.report.startS);
  const cycles: Cycle[] = [];
  let cur: Cycle | null = null;
  const open = (f: FittedSegment): Cycle => {
    const c = emptyCycle(f.report);
    cycles.push(c);
    return c;
  };
  for (const f of own) {
    const r = f.report;
    const startsCycle = r.kind === 'growth' || cur === null || cur.decayRatePerS !== null || r.isImpulseResponse === true || (cur.isImpulseResponse && r.kind !== 'decay');
    if (startsCycle) cur = open(f);
    const c = cur as Cycle;
    c.endS = Math.max(c.endS, r.endS);
    if (r.kind === 'growth') {
      c.onsetS = f.onsetTimeS;
      c.onsetCi95S = f.onsetCi95S;
      c.growthRatePerS = r.ratePerS;
      c.growthRateCi95PerS = r.rateCi95PerS;
    } else if (r.kind === 'steady' && typeof r.limitAmplitudeDbfs === 'number') {
      c.limitAmplitudeDbfs = r.limitAmplitudeDbfs;
      c.limitAmplitudeCi95Dbfs = f.limitCi95Dbfs;
    } else if (r.kind === 'decay' && r.ratePerS !== null && r.rateCi95PerS !== null) {
      c.decayRatePerS = -r.ratePerS;
      c.decayRateCi95PerS = [-r.rateCi95PerS[1], -r.rateCi95PerS[0]];
    }
  }
  return cycles;
}

function median(sorted: readonly number[]): number {
  const m = sorted.length;
  return m % 2 === 1 ? sorted[(m - 1) / 2] : 0.5 * (sorted[m / 2 - 1] + sorted[m / 2]);
}

/** Scale of the median absolute deviation to the standard deviation of normal data, 1/Φ⁻¹(3/4) (docs/REFERENCES.md §95). */
export const MAD_TO_SD = 1.4826;

/** Median of rates across cycles and their robust spread, 1/s. */
export interface CycleMedian {
  medianPerS: number;
  /** MAD_TO_SD × the median absolute deviation: the standard deviation for normal data (robust). */
  spreadPerS: number;
  /** Cycles that gave a rate. */
  count: number;
}

/** Median and robust spread of rates (null with fewer than two: one cycle has its own interval). */
export function medianAndSpread(rates: readonly number[]): CycleMedian | null {
  const v = rates.filter((r) => Number.isFinite(r)).sort((a, b) => a - b);
  if (v.length < 2) return null;
  const m = median(v);
  const dev = v.map((x) => Math.abs(x - m)).sort((a, b) => a - b);
  return { medianPerS: m, spreadPerS: MAD_TO_SD * median(dev), count: v.length };
}

/** Median growth and decay rates across cycles and their spread (null with fewer than two cycles of a kind). */
function cycleSummary(cycles: Cycle[]): Partial<Report['summary']> {
  const g = medianAndSpread(cycles.map((c) => c.growthRatePerS).filter((r): r is number => r !== null));
  const d = medianAndSpread(cycles.map((c) => c.decayRatePerS).filter((r): r is number => r !== null));
  return {
    growthRateCycleMedianPerS: g?.medianPerS ?? null,
    growthRateCycleSpreadPerS: g?.spreadPerS ?? null,
    decayRateCycleMedianPerS: d?.medianPerS ?? null,
    decayRateCycleSpreadPerS: d?.spreadPerS ?? null,
    cycleCount: cycles.length,
  };
}

/**
 * The harmonics of tone f, by order: lines grouped under it that sit on k·f (k ≥ 2, within the
 * tracker's harmonic tolerance; grouped lines elsewhere, sidelobes or intermodulation, are not
 * harmonics), and the peaks at k·f its tracks saw in at least HARMONIC_MIN_SHARE of the frames
 * it sounded (tones.ts noteHarmonics: such peaks never become tracks of their own). A peak of the
 * band noise lands within the tolerance of a given k·f in well under half the frames, a harmonic
 * in nearly all.
 */
function harmonicsOf(f: Family, families: Family[], binHz: number): HarmonicEntry[] {
  const byK = new Map<number, number>();
  for (const h of families) {
    if (h.parent !== f) continue;
    const k = Math.round(h.freqHz / f.freqHz);
    if (k >= 2 && Math.abs(h.freqHz - k * f.freqHz) <= harmonicToleranceHz(binHz, f.freqHz, k)) byK.set(k, h.freqHz);
  }
  for (const tr of f.tracks) {
    for (let k = 2; k < tr.harmonicHz.length; k++) {
      if (!byK.has(k) && tr.soundingFrames > 0 && tr.harmonicHits[k] >= HARMONIC_MIN_SHARE * tr.soundingFrames) byK.set(k, tr.harmonicHz[k]);
    }
  }
  return [...byK].sort((a, b) => a[0] - b[0]).map(([k, frequencyHz]) => ({ k, frequencyHz }));
}

/** The mains frequency whose multiple carries the strongest steady line, or 0 when none does. */
function detectMainsHz(tones: Family[]): number {
  for (const f of tones) {
    if (!f.isSteadyLine) continue;
    for (const m of MAINS_HZ) if (isMainsMultiple(f.freqHz, m)) return m;
  }
  return 0;
}

export interface ReportInput {
  sampleRateHz: number;
  durationS: number;
  grouping: Grouping;
  fitted: FittedSegment[];
  noiseDriven: NoiseDriven[];
  clipped: ClippedSpan[];
  /** Clipped stretches that did not fit the conditioner's list. */
  clipDropped: number;
  /** Stretches of digital silence (dsp/condition.ts), and those that did not fit the list. */
  silences: ClippedSpan[];
  silenceDropped: number;
  /** Top of the analysed band when the sample rate lowered it below the requested one, Hz (else null). */
  bandLimitedToHz: number | null;
  /** Bin width of the spectral frames, Hz (the harmonic tolerance scales with it). */
  binHz: number;
  /** Mains frequency for the labels, Hz (0: take it from the steady lines). */
  mainsHz: number;
  warnings: string[];
}

/** Assembles the report from the grouped tones and their fitted segments. */
export function assembleReport(inp: ReportInput): Report {
  const { grouping, fitted, warnings } = inp;
  const tones = grouping.tones;
  // Steady lines keep their steady segments (frequency and level); they hold no growth, so no
  // onset (line-class.ts).
  const onsets = fitted
    .filter((f) => f.onsetTimeS !== null)
    .map((f) => ({ timeS: f.onsetTimeS as number, frequencyHz: f.report.frequencyHz }))
    .sort((a, b) => a.timeS - b.timeS);
  dropWrongSign(fitted, warnings);
  const segments = fitted.map((f) => f.report);
  segments.sort((a, b) => a.startS - b.startS);
  const main = mainTone(tones, fitted);
  const cyclesOf = new Map<Family, Cycle[]>();
  for (const f of tones) cyclesOf.set(f, cyclesOfTone(f, fitted));
  let summary = deriveSummary({ frequencyHz: null, growth: null, decay: null });
  if (main !== null) summary = { ...summarise(main, fitted), ...cycleSummary(cyclesOf.get(main) ?? []) };
  else warnings.push('no tone found');
  const mainsHz = inp.mainsHz > 0 ? inp.mainsHz : detectMainsHz(tones);
  if (inp.bandLimitedToHz !== null) warnings.push(`band limited to ${inp.bandLimitedToHz.toFixed(0)} Hz by the sample rate`);
  const clipped = inp.clipped;
  const clipWarn = [
    ...spanWarnings(clipped, inp.clipDropped, 'clipping'),
    ...spanWarnings(inp.silences, inp.silenceDropped, 'no signal (digital silence: exact zeros)'),
  ];
  return {
    reportVersion: REPORT_VERSION,
    sampleRateHz: inp.sampleRateHz,
    durationS: inp.durationS,
    onsets,
    segments,
    noiseDriven: inp.noiseDriven,
    summary,
    tones: tones.map((f) => ({
      frequencyHz: f.freqHz,
      isSteadyLine: f.isSteadyLine,
      isMainsFrequency: mainsHz > 0 && isMainsMultiple(f.freqHz, mainsHz),
      cycles: cyclesOf.get(f) ?? [],
      harmonics: harmonicsOf(f, grouping.families, inp.binHz),
    })),
    clipped,
    warnings: [...clipWarn, ...warnings],
  };
}
