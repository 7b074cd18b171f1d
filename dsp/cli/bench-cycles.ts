/**
 * Bench section 2d: a long record of hum cycles the way a firing rig makes them — quiet gaps of
 * 0.5–10 s, growth rates, limit levels, hold times and decay rates that differ from cycle to
 * cycle, and a frequency that drifts by up to ±3 % as the gas warms and cools — streamed through
 * one analysis. Rows: cycles found (target all, held by one tone), extra cycles (target 0), and
 * each cycle's growth and decay rate errors divided by that cycle's Cramér–Rao bound (target: RMS
 * ratio ≤ 2), with the coverage of the 95 % intervals.
 *
 * The bound for a growth is that of the Stuart–Landau hum-cycle model the record is made from
 * (amplitude A(t) = L/√(1 + (L²/A0² − 1)·e^(−2s(t − t0))), parameters A0, s, L, f, φ), from the
 * onset to the switch-off; for a decay, an exponential from the switch-off on (dsp/crlb.ts; Kay
 * 1993, Fundamentals of Statistical Signal Processing: Estimation Theory, ch. 3). Both are
 * computed at a reduced rate with the noise variance scaled to the same power spectral density,
 * which leaves the Fisher information of a tone far below the Nyquist frequency unchanged.
 */
import { boundsFromFisher, crlbDampedTone } from '../crlb';
import { createAnalysis } from '../index';
import { createRng, type Rng } from '../synth';
import type { Cycle, Report } from '../types';
import { num } from './format';

type Row = (figure: string, measured: string, target: string, verdict: 'PASS' | 'MISS' | 'info') => void;

/** One generated cycle, in record time. */
export interface TrueCycle {
  onsetS: number;
  offS: number;
  endS: number;
  frequencyHz: number;
  startAmplitude: number;
  growthPerS: number;
  limitAmplitude: number;
  decayPerS: number;
}

/** Rate at which the bounds are computed, Hz (above twice the highest tone). */
const BOUND_RATE_HZ = 2000;
/** A cycle's decay ends (and the next gap begins) when its amplitude is this far under the noise rms. */
const DECAY_END_UNDER_NOISE = 0.1;

function uniform(rng: Rng, lo: number, hi: number): number {
  return lo + (hi - lo) * rng.uniform();
}

/** Draws the cycles of a record of `durationS` around `baseHz`. */
export function drawCycles(rng: Rng, durationS: number, baseHz: number, noiseRms: number): TrueCycle[] {
  const cycles: TrueCycle[] = [];
  let t = uniform(rng, 0.5, 10);
  let drift = 0;
  for (;;) {
    // Drift: a bounded random walk of the frequency, within ±3 % of the base.
    drift = Math.max(-0.03, Math.min(0.03, drift + uniform(rng, -0.01, 0.01)));
    const growthPerS = uniform(rng, 3, 25);
    const limitAmplitude = 10 ** uniform(rng, -1.5, -0.5);
    const startAmplitude = noiseRms * 10 ** uniform(rng, -2, -1);
    // Time to grow from the start amplitude to the limit (about ln(L/A0)/s), then a hold.
    const riseS = Math.log(limitAmplitude / startAmplitude) / growthPerS;
    const offS = t + riseS + uniform(rng, 1, 8);
    const decayPerS = uniform(rng, 3, 20);
    const endS = offS + Math.log(limitAmplitude / (DECAY_END_UNDER_NOISE * noiseRms)) / decayPerS;
    if (endS + 1 > durationS) break;
    cycles.push({ onsetS: t, offS, endS, frequencyHz: baseHz * (1 + drift), startAmplitude, growthPerS, limitAmplitude, decayPerS });
    t = endS + uniform(rng, 0.5, 10);
  }
  return cycles;
}

/** Stuart–Landau amplitude of a cycle at time t ≥ onsetS (before the switch-off). */
function landau(c: TrueCycle, t: number): number {
  const r = (c.limitAmplitude * c.limitAmplitude) / (c.startAmplitude * c.startAmplitude) - 1;
  return c.limitAmplitude / Math.sqrt(1 + r * Math.exp(-2 * c.growthPerS * (t - c.onsetS)));
}

/** Amplitude of the cycle at time t (zero outside it). */
function amplitudeAt(c: TrueCycle, t: number): number {
  if (t < c.onsetS || t >= c.endS) return 0;
  if (t < c.offS) return landau(c, t);
  return landau(c, c.offS) * Math.exp(-c.decayPerS * (t - c.offS));
}

/** Streams the record through one analysis in blocks, the tone's phase continuous across cycles. */
export function analyseRecord(fs: number, durationS: number, cycles: TrueCycle[], noiseRms: number, seed: number): Report {
  const a = createAnalysis({ sampleRateHz: fs });
  const rng = createRng(seed);
  const block = new Float32Array(4096);
  const total = Math.round(durationS * fs);
  let phase = 0;
  let ci = 0;
  for (let o = 0; o < total; o += block.length) {
    const n = Math.min(block.length, total - o);
    for (let i = 0; i < n; i++) {
      const t = (o + i) / fs;
      while (ci < cycles.length && t >= cycles[ci].endS) ci++;
      const c = ci < cycles.length ? cycles[ci] : null;
      const amp = c === null ? 0 : amplitudeAt(c, t);
      const f = c === null ? cycles[cycles.length - 1].frequencyHz : c.frequencyHz;
      phase += (2 * Math.PI * f) / fs;
      if (phase > 2 * Math.PI) phase -= 2 * Math.PI;
      block[i] = amp * Math.cos(phase) + noiseRms * rng.normal();
    }
    a.push(n === block.length ? block : block.subarray(0, n));
  }
  return a.finish();
}

/**
 * Cramér–Rao sd of the linear growth rate s of a Landau growth from onset to switch-off
 * (parameters A0, s, L, f, φ; analytic derivatives of the closed form), in white noise of
 * variance noiseVariance per sample at BOUND_RATE_HZ.
 */
function growthBound(c: TrueCycle, noiseVariance: number): number {
  const fs = BOUND_RATE_HZ;
  const n = Math.round((c.offS - c.onsetS) * fs);
  const fim = new Float64Array(25);
  const j = new Float64Array(5);
  const { startAmplitude: a0, limitAmplitude: l, growthPerS: s } = c;
  const r = (l * l) / (a0 * a0) - 1;
  for (let i = 0; i < n; i++) {
    const tau = i / fs;
    const e = Math.exp(-2 * s * tau);
    const d = 1 + r * e;
    const d32 = d ** -1.5;
    const amp = l / Math.sqrt(d);
    const arg = 2 * Math.PI * c.frequencyHz * tau;
    const co = Math.cos(arg);
    const si = Math.sin(arg);
    j[0] = ((l * l * l * e * d32) / (a0 * a0 * a0)) * co;
    j[1] = l * r * e * tau * d32 * co;
    j[2] = (1 / Math.sqrt(d) - (l * l * e * d32) / (a0 * a0)) * co;
    j[3] = -2 * Math.PI * tau * amp * si;
    j[4] = -amp * si;
    for (let p = 0; p < 5; p++) for (let q = 0; q < 5; q++) fim[p * 5 + q] += j[p] * j[q];
  }
  return boundsFromFisher(fim, 5, noiseVariance)[1];
}

/** The report cycle that belongs to a true cycle: its onset (or start) within the true cycle's span. */
export function matchCycle(c: TrueCycle, found: Cycle[]): Cycle[] {
  return found.filter((f) => {
    const t = f.onsetS ?? f.startS;
    return t >= c.onsetS - 1 && t < c.offS;
  });
}

/** One record's rows. */
function recordRows(row: Row, name: string, fs: number, durationS: number, baseHz: number, seed: number): void {
  const noiseRms = 3e-3;
  const rng = createRng(seed);
  const truth = drawCycles(rng, durationS, baseHz, noiseRms);
  const report = analyseRecord(fs, durationS, truth, noiseRms, seed + 1);
  const tones = (report.tones ?? []).filter((t) => !t.isSteadyLine && (t.cycles ?? []).some((c) => !c.isImpulseResponse));
  const all = tones.flatMap((t) => (t.cycles ?? []).filter((c) => !c.isImpulseResponse));
  const used = new Set<Cycle>();
  let found = 0;
  const zGrowth: number[] = [];
  const relGrowth: number[] = [];
  const relDecay: number[] = [];
  const zDecay: number[] = [];
  let gIn = 0;
  let dIn = 0;
  const boundVar = noiseRms * noiseRms * (BOUND_RATE_HZ / fs);
  for (const c of truth) {
    const m = matchCycle(c, all);
    m.forEach((x) => used.add(x));
    const withGrowth = m.find((x) => x.growthRatePerS !== null);
    if (withGrowth === undefined) continue;
    found++;
    const g = withGrowth.growthRatePerS as number;
    zGrowth.push((g - c.growthPerS) / growthBound(c, boundVar));
    relGrowth.push(Math.abs(g / c.growthPerS - 1));
    const gi = withGrowth.growthRateCi95PerS;
    if (gi !== null && gi[0] <= c.growthPerS && c.growthPerS <= gi[1]) gIn++;
    const withDecay = m.find((x) => x.decayRatePerS !== null);
    if (withDecay !== undefined) {
      const bound = crlbDampedTone({
        sampleRateHz: BOUND_RATE_HZ,
        frequencyHz: c.frequencyHz,
        amplitude: landau(c, c.offS),
        ratePerS: -c.decayPerS,
        durationS: c.endS - c.offS,
        snrDb: 10 * Math.log10((landau(c, c.offS) ** 2) / (2 * boundVar)),
      });
      zDecay.push(((withDecay.decayRatePerS as number) - c.decayPerS) / bound.sdRatePerS);
      relDecay.push(Math.abs((withDecay.decayRatePerS as number) / c.decayPerS - 1));
      const di = withDecay.decayRateCi95PerS;
      if (di !== null && di[0] <= c.decayPerS && c.decayPerS <= di[1]) dIn++;
    }
  }
  const extra = all.filter((x) => !used.has(x)).length;
  const median = (xs: number[]): number => [...xs].sort((p, q) => p - q)[Math.floor(xs.length / 2)] ?? Number.NaN;
  const rmsOf = (z: number[]): number => Math.sqrt(z.reduce((s, v) => s + v * v, 0) / Math.max(1, z.length));
  row(`${name}: cycles found (with a growth rate)`, `${found} of ${truth.length}, held by ${tones.length} tone(s)`, `${truth.length} of ${truth.length}, 1 tone`, found === truth.length && tones.length === 1 ? 'PASS' : 'MISS');
  row(`${name}: cycles reported that match none`, String(extra), '0', extra === 0 ? 'PASS' : 'MISS');
  row(`${name}: report onsets`, String(report.onsets.length), String(truth.length), report.onsets.length === truth.length ? 'PASS' : 'MISS');
  const zg = rmsOf(zGrowth);
  const zd = rmsOf(zDecay);
  const medianAbs = (z: number[]): number => median(z.map(Math.abs));
  row(`${name}: growth rate error / CRB sd, RMS over cycles`, `${num(zg, 3)}× (median |ratio| ${num(medianAbs(zGrowth), 3)}, ${zGrowth.length} cycles)`, '≤ 2×', zg <= 2 ? 'PASS' : 'MISS');
  row(`${name}: decay rate error / CRB sd, RMS over cycles`, `${num(zd, 3)}× (median |ratio| ${num(medianAbs(zDecay), 3)}, ${zDecay.length} cycles)`, '≤ 2×', zd <= 2 ? 'PASS' : 'MISS');
  row(`${name}: median |relative error|, growth / decay`, `${num(100 * median(relGrowth), 3)} % / ${num(100 * median(relDecay), 3)} %`, '—', 'info');
  row(
    `${name}: 95 % interval coverage, growth / decay`,
    `${num((100 * gIn) / Math.max(1, zGrowth.length), 3)} % / ${num((100 * dIn) / Math.max(1, zDecay.length), 3)} %`,
    '90–98 %',
    'info',
  );
}

/** Section 2d rows: 1-hour records at a mains multiple (120 Hz) and off the mains grid (237 Hz), and 20 minutes at 48 kHz. */
export function cyclesBench(row: Row): void {
  recordRows(row, '1 h at 120 Hz ±3 %', 16000, 3600, 120, 811);
  recordRows(row, '1 h at 237 Hz ±3 %', 16000, 3600, 237, 812);
  // A phone's rate: the same white noise spread over 24 kHz leaves 4.8 dB less of it in the tone's
  // band than at 16 kHz, so small systematic errors of the fits weigh more against the bound.
  recordRows(row, '20 min at 171 Hz ±3 %, 48 kHz', 48000, 1200, 171, 813);
  row('set-up', 'fs 16 kHz (48 kHz where named), noise −50 dBFS rms, gaps 0.5–10 s, growth 3–25 1/s, limit −30…−10 dBFS, hold 1–8 s, decay 3–20 1/s', '', 'info');
}
