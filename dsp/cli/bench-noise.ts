/**
 * Bench rows for the linear growth rate from noise (dsp/mode-statistics.ts; REFERENCES.md §40–42),
 * printed by dsp/cli/bench.ts (section `noise`):
 * - Normal form (dsp/synth.ts normalFormMode): ν from −10 to +10 1/s, two noise intensities,
 *   16 / 44.1 / 48 kHz, 20 and 60 s. Per ν: RMS error of the estimate against the truth, beside the
 *   RMS error of the ideal estimator on the exact (noise-free, unfiltered) envelope of the same
 *   trials (target: ≤ 2×); coverage of the 95 % intervals (target 90–98 % over all trials); the
 *   regime called (a definite call must have the truth's sign; 'near threshold' is right when the
 *   interval holds the truth; target ≥ 90 %, as the call follows the interval).
 * - Heated tube (dsp/rig-sim.ts) with flow noise just below and just above its critical heater
 *   power: ν from the statistics against the characteristic equation's rate, and, on the same run,
 *   against the growth rate the analyser fits when the power is switched up.
 * - The live margin's cost per second of audio while listening.
 */
import { performance } from 'node:perf_hooks';
import { fitNormalFormExact } from '../envelope-statistics';
import { createAnalysis } from '../index';
import { createLiveMargin, estimateLiveMargin, isLiveMarginDue, LIVE_MARGIN_WINDOW_S, pushLiveMargin } from '../live-margin';
import { estimateModeStatistics } from '../mode-statistics';
import { createRig, firstInstability, linearModes, renderScenario } from '../rig-sim';
import { normalFormMode } from '../synth';
import type { NoiseRegime } from '../types';
import { num } from './format';

type Verdict = 'PASS' | 'MISS' | 'info';
type RowFn = (figure: string, measured: string, target: string, verdict: Verdict) => void;

/** Saturation of every trial: a limit cycle of 0.2 full scale at ν = 10 1/s (κ = ν/A∞²). */
const KAPPA = 10 / 0.04;
const NU_GRID = [-10, -5, -2, 0, 2, 5, 10];
const INTENSITIES = [0.004, 0.02];
const RATES = [16000, 44100, 48000];
const DURATIONS = [20, 60];
/** Mode frequency and measurement noise (−40 dBFS RMS: the mode stands 25–45 dB above it in its band). */
const MODE_HZ = 176;
const MEASUREMENT_RMS = 0.01;

function rms(xs: number[]): number {
  return Math.sqrt(xs.reduce((a, b) => a + b * b, 0) / Math.max(1, xs.length));
}

function isRegimeRight(regime: NoiseRegime, truth: number, ci: [number, number]): boolean {
  if (regime === 'stable') return truth < 0;
  if (regime === 'humming') return truth > 0;
  if (regime === 'near-threshold') return ci[0] <= truth && truth <= ci[1];
  return false;
}

function normalFormRows(row: RowFn): void {
  let coveredAll = 0;
  let trialsAll = 0;
  let worstRatio = 0;
  for (const nu of NU_GRID) {
    const err: number[] = [];
    const idealErr: number[] = [];
    let covered = 0;
    let right = 0;
    let decisive = 0;
    let trials = 0;
    let seed = 1000 + 97 * (nu + 20);
    for (const s2 of INTENSITIES) {
      for (const fs of RATES) {
        for (const durationS of DURATIONS) {
          seed++;
          const every = Math.max(1, Math.round(fs / 1000));
          const sig = normalFormMode({ sampleRateHz: fs, durationS, frequencyHz: MODE_HZ, growthRatePerS: nu, saturation: KAPPA, noiseIntensity: s2, measurementNoiseRms: MEASUREMENT_RMS, envelopeEvery: every, seed });
          const ideal = fitNormalFormExact({ re: sig.envelopeRe, im: sig.envelopeIm, rateHz: sig.envelopeRateHz });
          const r = estimateModeStatistics(sig.samples, fs, { centreHz: MODE_HZ });
          trials++;
          idealErr.push(ideal.nuPerS - nu);
          if (!r.isValid) continue;
          err.push(r.growthRatePerS - nu);
          if (r.ci95PerS[0] <= nu && nu <= r.ci95PerS[1]) covered++;
          if (isRegimeRight(r.regime, nu, r.ci95PerS)) right++;
          if (r.regime === 'stable' || r.regime === 'humming') decisive++;
        }
      }
    }
    coveredAll += covered;
    trialsAll += trials;
    const ratio = rms(err) / rms(idealErr);
    worstRatio = Math.max(worstRatio, ratio);
    row(
      `ν = ${nu} 1/s: RMS error (ideal on exact envelope)`,
      `${num(rms(err), 2)} (${num(rms(idealErr), 2)}) 1/s, ×${num(ratio, 2)}, ${err.length} of ${trials} estimated`,
      '≤ 2× ideal',
      ratio <= 2 && err.length === trials ? 'PASS' : 'MISS',
    );
    row(`ν = ${nu} 1/s: intervals holding the truth`, `${covered} of ${trials}`, '—', 'info');
    // The call follows the 95 % interval, so it can be no more often right than the interval covers.
    row(`ν = ${nu} 1/s: regime right (definite calls)`, `${right} of ${trials} (${decisive} definite)`, '≥ 90 %', right >= 0.9 * trials ? 'PASS' : 'MISS');
  }
  const coverage = (100 * coveredAll) / trialsAll;
  row('all trials: 95 % intervals holding the truth', `${num(coverage, 3)} % of ${trialsAll}`, '90–98 %', coverage >= 90 && coverage <= 98 ? 'PASS' : 'MISS');
  row('worst RMS ratio to the ideal estimator', `×${num(worstRatio, 2)}`, '≤ 2', worstRatio <= 2 ? 'PASS' : 'MISS');
}

/** The bench tube of bench.ts section 1b. */
const TUBE = { lengthM: 1, gasTemperatureC: 20, ends: 'open-open' as const, heaterPositionM: 0.25 };

function heatedTubeRows(row: RowFn): void {
  const rig = createRig(TUBE);
  const first = firstInstability(rig);
  if (!first) throw new Error('the bench tube never hums: no heated-tube rows');
  const kc = first.heaterPower;
  const fs = 16000;
  const stayS = 40;
  const below = 0.93 * kc;
  const above = 1.07 * kc;
  const { samples, truth } = renderScenario({
    params: TUBE,
    schedule: [
      { atS: 0, heaterPower: below },
      { atS: stayS, heaterPower: above },
    ],
    durationS: 2.5 * stayS,
    sampleRateHz: fs,
    noiseDbfs: -70,
    excitationRms: 2e-3,
    seed: 5,
  });
  const f1 = linearModes(rig, below, 1)[0].frequencyHz;
  const quiet = estimateModeStatistics(samples.subarray(Math.round(2 * fs), Math.round(stayS * fs)), fs, { centreHz: f1 });
  const show = (r: ReturnType<typeof estimateModeStatistics>): string =>
    r.isValid ? `${num(r.growthRatePerS, 3)} [${num(r.ci95PerS[0], 3)}, ${num(r.ci95PerS[1], 3)}] 1/s, ${r.regime}` : `not estimated (${r.reason ?? ''})`;
  const inCi = (r: ReturnType<typeof estimateModeStatistics>, v: number): boolean => r.isValid && r.ci95PerS[0] <= v && v <= r.ci95PerS[1];
  const t0 = truth.steps[0].growthRatePerS;
  row(`heated tube at 0.93 K_c: ν from noise vs characteristic ${num(t0, 3)} 1/s`, show(quiet), 'interval holds it', inCi(quiet, t0) ? 'PASS' : 'MISS');
  // Above: the steady hum from 1.5 stay-lengths on (growth done), and the growth the analyser fits at the switch.
  const t1 = truth.steps[1].growthRatePerS;
  const f2 = truth.steps[1].limitCycle?.frequencyHz ?? truth.steps[1].frequencyHz;
  const hum = estimateModeStatistics(samples.subarray(Math.round(1.5 * stayS * fs), Math.round(2.5 * stayS * fs)), fs, { centreHz: f2 });
  row(`heated tube at 1.07 K_c: ν from noise vs characteristic ${num(t1, 3)} 1/s`, show(hum), 'interval holds it', inCi(hum, t1) ? 'PASS' : 'MISS');
  const analysis = createAnalysis({ sampleRateHz: fs });
  for (let i = 0; i < samples.length; i += 4096) analysis.push(samples.subarray(i, Math.min(samples.length, i + 4096)));
  const report = analysis.finish();
  const growth = report.segments.find((s) => s.kind === 'growth' && s.ratePerS !== null && s.startS > stayS - 1 && s.startS < stayS + 10);
  row(
    'same run: growth rate fitted at the switch-up',
    growth?.ratePerS != null ? `${num(growth.ratePerS, 3)} 1/s [${num(growth.rateCi95PerS?.[0] ?? NaN, 3)}, ${num(growth.rateCi95PerS?.[1] ?? NaN, 3)}]` : 'no growth segment',
    'agrees with ν from noise',
    growth?.ratePerS != null && hum.isValid && Math.abs(growth.ratePerS - hum.growthRatePerS) <= 1.96 * Math.hypot((hum.ci95PerS[1] - hum.ci95PerS[0]) / 3.92, ((growth.rateCi95PerS?.[1] ?? 0) - (growth.rateCi95PerS?.[0] ?? 0)) / 3.92) ? 'PASS' : 'MISS',
  );
}

/**
 * What the app's live margin (dsp/live-margin.ts) costs while listening: 3 minutes of a stable
 * mode at 48 kHz pushed in 2048-sample blocks, estimated whenever one is due; the estimates' time
 * per second of audio (their part of the worker's budget) and the cost of one on a full window.
 */
function liveMarginCostRows(row: RowFn): void {
  const fs = 48000;
  const seconds = 180;
  const x = normalFormMode({ sampleRateHz: fs, durationS: seconds, frequencyHz: MODE_HZ, growthRatePerS: -5, saturation: KAPPA, noiseIntensity: 0.02, measurementNoiseRms: MEASUREMENT_RMS, envelopeEvery: 64, seed: 5 }).samples;
  const st = createLiveMargin({ sampleRateHz: fs });
  let totalMs = 0;
  let count = 0;
  let lastMs = Number.NaN;
  for (let i = 0; i < x.length; i += 2048) {
    pushLiveMargin(st, x.subarray(i, Math.min(x.length, i + 2048)));
    if (!isLiveMarginDue(st)) continue;
    const t0 = performance.now();
    estimateLiveMargin(st, Number.NaN);
    lastMs = performance.now() - t0;
    totalMs += lastMs;
    count++;
  }
  row('live margin: estimates per second of 48 kHz audio (3 min of steady operation)', `${num(totalMs / seconds, 3)} ms per s (${count} estimates)`, '—', 'info');
  row(`live margin: one estimate on a full ${LIVE_MARGIN_WINDOW_S} s window`, `${num(lastMs, 3)} ms`, '—', 'info');
}

/** Section `noise` of the bench. */
export function noiseStatisticsBench(row: RowFn): void {
  normalFormRows(row);
  heatedTubeRows(row);
  liveMarginCostRows(row);
}
