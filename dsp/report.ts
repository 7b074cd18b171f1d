/**
 * Report assembly (docs/DESIGN.md "Report"): onsets and segments of the tones (not of steady
 * lines or grouped lines), the main tone's summary with pooled rates, clipping and warnings.
 */
import { deriveSummary } from './derived';
import { Z_975 } from './fit';
import type { Family, Grouping } from './grouping';
import { ON_DB, STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY } from './regime';
import type { FittedSegment } from './segment-fit';
import { meanBg, meanPower } from './tone-store';
import { REPORT_VERSION, type ClippedSpan, type Interval, type NoiseDriven, type RateFit, type Report } from './types';

/** Clipped stretches listed one by one in the warnings. */
const CLIP_WARNINGS_LISTED = 10;

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

/** Main tone: the non-steady tone with the most onsets, then the strongest. */
function mainTone(tones: Family[], fitted: FittedSegment[]): Family | null {
  let main: Family | null = null;
  let mainScore = -Infinity;
  for (const fam of tones) {
    if (fam.tracks.every((t) => t.isSteadyLine)) continue;
    const famFits = fitted.filter((f) => fam.tracks.includes(f.tr));
    if (!famFits.some((f) => f.seg.state !== STATE_QUIET)) continue;
    const nOn = famFits.filter((f) => f.onsetTimeS !== null).length;
    const score = nOn * 1000 + fam.strength;
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

export interface ReportInput {
  sampleRateHz: number;
  durationS: number;
  grouping: Grouping;
  fitted: FittedSegment[];
  noiseDriven: NoiseDriven[];
  clipped: ClippedSpan[];
  /** Clipped stretches that did not fit the conditioner's list. */
  clipDropped: number;
  /** Top of the analysed band when the sample rate lowered it below the requested one, Hz (else null). */
  bandLimitedToHz: number | null;
  warnings: string[];
}

/** Assembles the report from the grouped tones and their fitted segments. */
export function assembleReport(inp: ReportInput): Report {
  const { grouping, fitted, warnings } = inp;
  const tones = grouping.tones;
  // Tracks of steady lines (mains, or a tone sounding throughout) and tracks that never left the
  // quiet state give no onsets or segments.
  const steadyTracks = new Set(tones.filter((f) => f.isSteadyLine && f.tracks.every((t) => t.isSteadyLine)).flatMap((f) => f.tracks));
  const isReported = (f: FittedSegment): boolean => !f.tr.isSteadyLine && !steadyTracks.has(f.tr) && f.tr.regime.segments.some((s) => s.state !== STATE_QUIET);
  const onsets = fitted
    .filter((f) => isReported(f) && f.onsetTimeS !== null)
    .map((f) => ({ timeS: f.onsetTimeS as number, frequencyHz: f.report.frequencyHz }))
    .sort((a, b) => a.timeS - b.timeS);
  dropWrongSign(fitted, warnings);
  const segments = fitted.filter(isReported).map((f) => f.report);
  segments.sort((a, b) => a.startS - b.startS);
  const main = mainTone(tones, fitted);
  let summary = deriveSummary({ frequencyHz: null, growth: null, decay: null });
  if (main !== null) summary = summarise(main, fitted);
  else warnings.push('no tone found');
  if (inp.bandLimitedToHz !== null) warnings.push(`band limited to ${inp.bandLimitedToHz.toFixed(0)} Hz by the sample rate`);
  const clipped = inp.clipped;
  const clipWarn = clipped.slice(0, CLIP_WARNINGS_LISTED).map((c) => `clipping in ${c.startS.toFixed(2)}–${c.endS.toFixed(2)} s`);
  if (clipped.length > CLIP_WARNINGS_LISTED) clipWarn.push(`clipping in ${clipped.length - CLIP_WARNINGS_LISTED} more stretches`);
  if (inp.clipDropped > 0) clipWarn.push(`${inp.clipDropped} further clipped stretches not listed`);
  return {
    reportVersion: REPORT_VERSION,
    sampleRateHz: inp.sampleRateHz,
    durationS: inp.durationS,
    onsets,
    segments,
    noiseDriven: inp.noiseDriven,
    summary,
    tones: tones.map((f) => ({ frequencyHz: f.freqHz, isSteadyLine: f.isSteadyLine })),
    clipped,
    warnings: [...clipWarn, ...warnings],
  };
}
