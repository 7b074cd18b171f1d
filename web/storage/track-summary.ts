/**
 * A report built from a stored track alone, for a session whose recording was interrupted and
 * whose raw audio was not kept. Cruder than the analysis of dsp/ and says so in its warnings.
 */
import { addLinePoint, createLineSums, lineRss, lineSxx, lineSxy } from '../../dsp/line-fit';
import { REPORT_VERSION, type Interval, type Onset, type Report, type Segment, type TrackFrame } from '../../dsp/types';

/** 20·log10(e): dB per neper, so a level slope in dB/s divided by it is an amplitude rate in 1/s (REFERENCES.md §5). */
const DB_PER_NEPER = 20 / Math.LN10;
/** Two-sided 95 % point of the normal distribution. */
const Z95 = 1.959964;

interface LineFit {
  slope: number;
  slopeSe: number;
  count: number;
}

/** Ordinary least squares of y on x over the finite pairs (dsp/line-fit.ts, unit weights; common practice). */
function fitLine(x: ArrayLike<number>, y: ArrayLike<number>): LineFit | null {
  const sums = createLineSums();
  let origin = Number.NaN;
  for (let i = 0; i < x.length; i++) {
    if (!Number.isFinite(x[i]) || !Number.isFinite(y[i])) continue;
    if (!Number.isFinite(origin)) origin = x[i];
    addLinePoint(sums, x[i] - origin, y[i], 1);
  }
  const sxx = lineSxx(sums);
  if (sums.n < 3 || !(sxx > 0)) return null;
  const slope = lineSxy(sums) / sxx;
  return { slope, slopeSe: Math.sqrt(lineRss(sums, slope) / (sums.n - 2) / sxx), count: sums.n };
}

function median(values: number[]): number {
  const v = values.filter(Number.isFinite).sort((a, b) => a - b);
  if (v.length === 0) return Number.NaN;
  const m = v.length >> 1;
  return v.length % 2 ? v[m] : (v[m - 1] + v[m]) / 2;
}

/**
 * Summarises a track: one segment per run of equal state; growth and decay rates from a straight
 * line through the level in dB (slope / 8.686 dB per neper = amplitude rate, REFERENCES.md §5), with
 * an ordinary least-squares interval that ignores the correlation of neighbouring frames (so it is
 * too narrow; the report's warnings say so). Derived figures as in REFERENCES.md §5–6.
 */
export function summariseTrack(track: readonly TrackFrame[], sampleRateHz: number): Report {
  const segments: Segment[] = [];
  const onsets: Onset[] = [];
  let start = 0;
  for (let i = 1; i <= track.length; i++) {
    if (i < track.length && track[i].state === track[start].state && !track[i].isAfterGap) continue;
    const run = track.slice(start, i);
    const kind = run[0].state;
    const endS = i < track.length ? track[i].timeS : run[run.length - 1].timeS;
    const freq = median(run.map((f) => f.frequencyHz));
    let ratePerS: number | null = null;
    let ci: Interval | null = null;
    if (kind === 'growth' || kind === 'decay') {
      const fit = fitLine(run.map((f) => f.timeS), run.map((f) => f.amplitudeDbfs));
      if (fit) {
        ratePerS = fit.slope / DB_PER_NEPER;
        const half = (Z95 * fit.slopeSe) / DB_PER_NEPER;
        ci = [ratePerS - half, ratePerS + half];
      }
    }
    const limit = kind === 'steady' ? median(run.map((f) => f.amplitudeDbfs)) : Number.NaN;
    segments.push({
      kind,
      startS: run[0].timeS,
      endS,
      frequencyHz: freq,
      ratePerS,
      rateCi95PerS: ci,
      model: ratePerS === null ? null : 'exponential',
      limitAmplitudeDbfs: Number.isFinite(limit) ? limit : null,
    });
    if (kind === 'growth' && (segments.length === 1 || segments[segments.length - 2].kind === 'quiet')) {
      onsets.push({ timeS: run[0].timeS, frequencyHz: freq });
    }
    start = i;
  }
  const growth = segments.find((s) => s.kind === 'growth' && s.ratePerS !== null && s.ratePerS > 0);
  const decay = segments.find((s) => s.kind === 'decay' && s.ratePerS !== null && s.ratePerS < 0);
  const steady = segments.filter((s) => s.kind === 'steady');
  const frequencyHz = median((steady.length ? steady : segments).map((s) => s.frequencyHz));
  const growthRatePerS = growth?.ratePerS ?? null;
  const decayRatePerS = decay?.ratePerS != null ? -decay.ratePerS : null;
  const decayCi: Interval | null = decay?.rateCi95PerS ? [-decay.rateCi95PerS[1], -decay.rateCi95PerS[0]] : null;
  const hasF = Number.isFinite(frequencyHz) && frequencyHz > 0;
  const dampingRatio = decayRatePerS !== null && hasF ? decayRatePerS / (2 * Math.PI * frequencyHz) : null;
  const limits = steady.map((s) => s.limitAmplitudeDbfs ?? Number.NaN);
  const limitAmplitude = median(limits);
  return {
    reportVersion: REPORT_VERSION,
    sampleRateHz,
    durationS: track.length ? track[track.length - 1].timeS : 0,
    onsets,
    segments,
    noiseDriven: [],
    summary: {
      frequencyHz: hasF ? frequencyHz : null,
      growthRatePerS,
      decayRatePerS,
      effectiveGainPerS: growthRatePerS !== null && decayRatePerS !== null ? growthRatePerS + decayRatePerS : null,
      dampingRatio,
      qFactor: dampingRatio !== null && dampingRatio > 0 ? 1 / (2 * dampingRatio) : null,
      growthRateCi95PerS: growth?.rateCi95PerS ?? null,
      decayRateCi95PerS: decayCi,
      limitAmplitudeDbfs: Number.isFinite(limitAmplitude) ? limitAmplitude : null,
    },
    warnings: [
      'Completed from the stored track after the recording was interrupted: rates are straight-line fits of the track level in dB, and their 95 % intervals ignore the correlation of neighbouring frames, so they are too narrow.',
    ],
  };
}
