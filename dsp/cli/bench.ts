/**
 * `npm run bench`: accuracy and speed of the analysis, printed as tables (asserts nothing).
 * Each row shows the measured value, its target and PASS/MISS.
 *
 * 1. Accuracy against the Cramér–Rao bound (dsp/crlb.ts; Kay 1993, Fundamentals of Statistical
 *    Signal Processing: Estimation Theory, ch. 3): RMS error of frequency and rate on 1 s growth
 *    and decay segments at 20 dB SNR (A²/(2v) at the segment start, v the full-band noise
 *    variance), over seeded trials, and the coverage of the 95 % rate intervals.
 * 1b. Simulated rigs (dsp/rig-sim.ts): the analyser's growth rate on the two demo scenarios over
 *    seeds, against the linear rate from the characteristic equation, and its interval coverage.
 * 2. Onset: how long after the tone rises 6 dB above the noise floor in a 10 Hz band around it the
 *    streaming analysis announces the onset, in e-folding times; false onsets (in the report and
 *    announced live) on toneless noise with ±10 dB loudness steps, on steady 50/60 Hz mains hum
 *    with harmonics and on knocks (one or two modes ringing down); live announcement over the band
 *    (short-frame detector, dsp/live-onset.ts) at 3–50 1/s.
 * 2d. Hour-long records of hum cycles with varied gaps and a drifting frequency: cycles found, and
 *    each cycle's rate errors against its own Cramér–Rao bound (dsp/cli/bench-cycles.ts).
 * 3. Speed, memory, whole records and archives (dsp/cli/bench-speed.ts).
 */

import { cpus, loadavg } from 'node:os';
import { performance } from 'node:perf_hooks';
import { crlbDampedTone } from '../crlb';
import { fitExponential } from '../fit';
import { renderScenario, type ScenarioSpec } from '../rig-sim';
import { createAnalysis } from '../index';
import { createLiveOnsetState, stepLiveOnset } from '../live-onset';
import { createRng, humCycleEnvelope, synthesize, type EnvelopeFn, type Rng } from '../synth';
import type { Analysis, EnvelopeSeries, Report, Segment } from '../types';
import { cyclesBench } from './bench-cycles';
import { noiseStatisticsBench } from './bench-noise';
import { archivesBench, memoryBench, recordsBench, SPEED_REPEATS, speedBench } from './bench-speed';
import { num, renderTable } from './format';

type Verdict = 'PASS' | 'MISS' | 'info';

interface Row {
  figure: string;
  measured: string;
  target: string;
  verdict: Verdict;
}

const rows: Row[] = [];
const out = (s: string): void => void process.stdout.write(s);

function row(figure: string, measured: string, target: string, verdict: Verdict): void {
  rows.push({ figure, measured, target, verdict });
}

function printSection(title: string, sectionRows: Row[]): void {
  out(`\n${title}\n`);
  out(
    renderTable(
      ['figure', 'measured', 'target', ''],
      sectionRows.map((r) => [r.figure, r.measured, r.target, r.verdict]),
      [false, true, false, false],
    ),
  );
}

async function section(title: string, fn: () => void | Promise<void>): Promise<void> {
  const start = rows.length;
  const t0 = performance.now();
  await fn();
  printSection(`${title}  (${((performance.now() - t0) / 1000).toFixed(1)} s)`, rows.slice(start));
}

/** Pushes a signal in blocks; returns the report and the time (s of audio) each onset was first announced. */
function runAnalysis(x: Float32Array, sampleRateHz: number, blockSamples = 2048): { report: Report; announcedS: number[] } {
  const a = createAnalysis({ sampleRateHz });
  const announcedS: number[] = [];
  for (let o = 0; o < x.length; o += blockSamples) {
    const end = Math.min(x.length, o + blockSamples);
    const u = a.push(x.subarray(o, end));
    for (let k = 0; k < u.onsets.length; k++) announcedS.push(end / sampleRateHz);
  }
  return { report: a.finish(), announcedS };
}

function rms(xs: number[]): number {
  return Math.sqrt(xs.reduce((s, x) => s + x * x, 0) / Math.max(1, xs.length));
}

function quantile(xs: number[], q: number): number {
  if (xs.length === 0) return NaN;
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.max(0, Math.ceil(q * s.length) - 1))];
}

/** The segment of `kind` overlapping [t0, t1] most. */
function pickSegment(report: Report, kind: Segment['kind'], t0: number, t1: number): Segment | null {
  let best: Segment | null = null;
  let bestOverlap = 0;
  for (const s of report.segments) {
    if (s.kind !== kind || s.ratePerS === null) continue;
    const ov = Math.min(t1, s.endS) - Math.max(t0, s.startS);
    if (ov > bestOverlap) {
      bestOverlap = ov;
      best = s;
    }
  }
  return best;
}

/** Tone plus white noise from an envelope, with a random phase. */
function toneInNoise(fs: number, durationS: number, freqHz: number, env: EnvelopeFn, noiseRms: number, seed: number, rng: Rng): Float32Array {
  return synthesize({ sampleRateHz: fs, durationS, tones: [{ frequencyHz: freqHz, envelope: env, phaseRad: 2 * Math.PI * rng.uniform() }], noiseRms, seed });
}

// ---------------------------------------------------------------------------------------------
// 1. Accuracy against the Cramér–Rao bound

/**
 * Reference envelope without the pipeline's front end: x heterodyned at the known frequency and
 * low-passed by a Blackman FIR whose one-sided noise bandwidth is about `bandwidthHz`, sampled at
 * ~300 Hz; y = |z|². Its exact noise bandwidth fs·Σh²/(2(Σh)²) is returned with it.
 */
function exactEnvelope(x: Float32Array, fs: number, freqHz: number, bandwidthHz: number): { timeS: Float64Array; power: Float64Array; bandwidthHz: number; halfKernelS: number } {
  // Blackman: Σh²/(Σh)² ≈ 1.73/L (Harris 1978, Proc. IEEE 66, 51, Table 1: ENBW 1.73 bins).
  const taps = 2 * Math.round((1.73 * fs) / (4 * bandwidthHz)) + 1;
  const h = new Float64Array(taps);
  let sum = 0;
  let sumSq = 0;
  for (let i = 0; i < taps; i++) {
    h[i] = 0.42 - 0.5 * Math.cos((2 * Math.PI * i) / (taps - 1)) + 0.08 * Math.cos((4 * Math.PI * i) / (taps - 1));
    sum += h[i];
    sumSq += h[i] * h[i];
  }
  const re = new Float64Array(x.length);
  const im = new Float64Array(x.length);
  for (let i = 0; i < x.length; i++) {
    const ph = (2 * Math.PI * freqHz * i) / fs;
    re[i] = x[i] * Math.cos(ph);
    im[i] = -x[i] * Math.sin(ph);
  }
  const step = Math.round(fs / 300);
  const n = Math.floor((x.length - taps) / step);
  const timeS = new Float64Array(n);
  const power = new Float64Array(n);
  for (let o = 0; o < n; o++) {
    let a = 0;
    let b = 0;
    for (let k = 0; k < taps; k++) {
      a += h[k] * re[o * step + k];
      b += h[k] * im[o * step + k];
    }
    a *= 2 / sum;
    b *= 2 / sum;
    timeS[o] = (o * step + (taps - 1) / 2) / fs;
    power[o] = a * a + b * b;
  }
  return { timeS, power, bandwidthHz: (fs * sumSq) / (2 * sum * sum), halfKernelS: (taps - 1) / (2 * fs) };
}

/** The samples of a series within [t0, t1]. */
function window(e: { timeS: Float64Array; power: Float64Array; bandwidthHz: number }, t0: number, t1: number): EnvelopeSeries {
  let i0 = 0;
  while (i0 < e.timeS.length && e.timeS[i0] < t0) i0++;
  let i1 = i0;
  while (i1 < e.timeS.length && e.timeS[i1] <= t1) i1++;
  return { timeS: e.timeS.subarray(i0, i1), power: e.power.subarray(i0, i1), bandwidthHz: e.bandwidthHz };
}

function accuracy(): void {
  const fs = 8000;
  const freqHz = 170;
  const trials = 150;
  const rateAbs = 5;
  const snrDb = 20;
  const rng = createRng(2026);
  for (const sign of [1, -1] as const) {
    const truth = sign * rateAbs;
    const bound = crlbDampedTone({ sampleRateHz: fs, frequencyHz: freqHz, amplitude: 1, ratePerS: truth, durationS: 1, snrDb });
    const rateErr: number[] = [];
    const freqErr: number[] = [];
    const refErr: number[] = [];
    let refCovered = 0;
    let covered = 0;
    let found = 0;
    for (let k = 0; k < trials; k++) {
      const seed = 1 + k + (sign > 0 ? 0 : 10_000);
      let x: Float32Array;
      let segT0: number;
      if (sign > 0) {
        // A tone growing at 5 1/s from far under the noise, through SNR 20 dB at 3 s, for 1 s more
        // (to 0.5 full scale), then holding that level for 0.5 s. The measured segment is 3–4 s;
        // the growth before 3 s is 20 dB and more quieter and adds little information.
        const a0 = 0.5 * Math.exp(-rateAbs);
        const noise = a0 / Math.sqrt(2 * 10 ** (snrDb / 10));
        const env: EnvelopeFn = (t) => a0 * Math.exp(rateAbs * (Math.min(t, 4) - 3));
        x = toneInNoise(fs, 4.5, freqHz, env, noise, seed, rng);
        segT0 = 3;
      } else {
        // 1 s steady at 20 dB SNR, 1 s decay from there, 0.5 s more (the tone is 22 dB under the noise by then).
        const a0 = 0.3;
        const noise = a0 / Math.sqrt(2 * 10 ** (snrDb / 10));
        const env: EnvelopeFn = (t) => (t < 1 ? a0 : a0 * Math.exp(-rateAbs * (t - 1)));
        x = toneInNoise(fs, 2.5, freqHz, env, noise, seed, rng);
        segT0 = 1;
      }
      // Reference: the quasi-likelihood fit (dsp/fit.ts) on the exactly demodulated envelope in a
      // 20 Hz band, over the span where the tone is a pure exponential, ending (growth) or starting
      // (decay) half a kernel from the kink so the low-pass does not see it.
      const env = exactEnvelope(x, fs, freqHz, 20);
      const ref = fitExponential(sign > 0 ? window(env, segT0 - 1.5, segT0 + 1 - env.halfKernelS) : window(env, segT0 + env.halfKernelS, segT0 + 1.5));
      if (ref.isValid) {
        refErr.push(ref.ratePerS - truth);
        if (ref.ci95PerS[0] <= truth && truth <= ref.ci95PerS[1]) refCovered++;
      }
      const { report } = runAnalysis(x, fs);
      const seg = pickSegment(report, sign > 0 ? 'growth' : 'decay', segT0, segT0 + 1);
      if (!seg || seg.ratePerS === null) continue;
      found++;
      rateErr.push(seg.ratePerS - truth);
      freqErr.push(seg.frequencyHz - freqHz);
      if (seg.rateCi95PerS && seg.rateCi95PerS[0] <= truth && truth <= seg.rateCi95PerS[1]) covered++;
    }
    const name = sign > 0 ? `growth +${rateAbs} 1/s` : `decay −${rateAbs} 1/s`;
    const rateRms = rms(rateErr);
    const freqRms = rms(freqErr);
    const rateRatio = rateRms / bound.sdRatePerS;
    const freqRatio = freqRms / bound.sdFrequencyHz;
    const coverage = found > 0 ? covered / found : NaN;
    row(`${name}: segments found`, `${found} of ${trials}`, `${trials} of ${trials}`, found === trials ? 'PASS' : 'MISS');
    row(`${name}: rate RMS error / CRB sd`, `${num(rateRms, 3)} / ${num(bound.sdRatePerS, 3)} 1/s = ${num(rateRatio, 3)}×`, '≤ 2×', rateRatio <= 2 ? 'PASS' : 'MISS');
    row(`${name}: frequency RMS error / CRB sd`, `${num(freqRms, 3)} / ${num(bound.sdFrequencyHz, 3)} Hz = ${num(freqRatio, 3)}×`, '≤ 2×', freqRatio <= 2 ? 'PASS' : 'MISS');
    row(`${name}: rate bias (mean error)`, `${num(rateErr.reduce((s, e) => s + e, 0) / Math.max(1, rateErr.length), 3)} 1/s`, '—', 'info');
    row(`${name}: 95 % interval coverage`, `${num(100 * coverage, 3)} %`, '90–98 %', coverage >= 0.9 && coverage <= 0.98 ? 'PASS' : 'MISS');
    const refRatio = rms(refErr) / bound.sdRatePerS;
    row(
      `${name}: reference, envelope fit without the front end`,
      `rate RMS error ${num(refRatio, 3)}× CRB sd, coverage ${num((100 * refCovered) / Math.max(1, refErr.length), 3)} % (${refErr.length} fits)`,
      '—',
      'info',
    );
  }
  row('set-up', `fs ${fs} Hz, ${freqHz} Hz, 1 s segments, SNR ${snrDb} dB at segment start, ${trials} trials each`, '', 'info');
}

// ---------------------------------------------------------------------------------------------
// 2. Onset delay and false onsets

function onsetDelay(): void {
  const fs = 16000;
  const bandHz = 10;
  const noiseRms = 10 ** (-50 / 20);
  // Mean-square noise in a 10 Hz band of white noise spread over fs/2.
  const bandPower = (noiseRms * noiseRms * bandHz) / (fs / 2);
  const rng = createRng(77);
  for (const rate of [3, 10, 30]) {
    const delays: number[] = [];
    const stampErr: number[] = [];
    let missed = 0;
    let extra = 0;
    const trials = 15;
    for (let k = 0; k < trials; k++) {
      const freq = 120 + 300 * rng.uniform();
      const startS = 2 + rng.uniform();
      // Amplitude where the tone's mean square A²/2 is 4× (6 dB over) the band noise, and 1× (0 dB).
      const a6 = Math.sqrt(8 * bandPower);
      const a0dB = Math.sqrt(2 * bandPower);
      const aStart = a6 / 100; // 40 dB under the 6 dB point
      const t6 = startS + Math.log(a6 / aStart) / rate;
      const t0dB = startS + Math.log(a0dB / aStart) / rate;
      const durationS = t6 + Math.max(3, 8 / rate) + 1;
      const env = humCycleEnvelope({ onsetS: startS, startAmplitude: aStart, growthPerS: rate, limitAmplitude: 0.3, offS: durationS + 1, decayPerS: 5 });
      const x = toneInNoise(fs, durationS, freq, env, noiseRms, 500 + k + 100 * rate, rng);
      // Small blocks so the announcement time is known to 8 ms (0.24 e-folding times at 30 1/s).
      const { report, announcedS } = runAnalysis(x, fs, 128);
      if (announcedS.length === 0) {
        missed++;
        continue;
      }
      extra += Math.max(0, announcedS.length - 1);
      delays.push((announcedS[0] - t6) * rate);
      if (report.onsets.length > 0) stampErr.push((report.onsets[0].timeS - t0dB) * rate);
    }
    const p90 = quantile(delays, 0.9);
    row(
      `growth ${rate} 1/s: announcement after the 6 dB point`,
      `median ${num(quantile(delays, 0.5), 2)}, 90 % ${num(p90, 2)}, max ${num(Math.max(...delays), 2)} e-folds`,
      '90 % ≤ 2 e-folds',
      p90 <= 2 && missed === 0 ? 'PASS' : 'MISS',
    );
    row(`growth ${rate} 1/s: missed / extra onsets`, `${missed} / ${extra} of ${trials}`, '0 / 0', missed === 0 && extra === 0 ? 'PASS' : 'MISS');
    row(`growth ${rate} 1/s: reported onset − 0 dB crossing`, `median ${num(quantile(stampErr, 0.5), 2)}, max |${num(Math.max(...stampErr.map(Math.abs)), 2)}| e-folds`, '—', 'info');
  }
}

// ---------------------------------------------------------------------------------------------
// 2c. Live onset announcement over the whole band (short-frame detector, dsp/live-onset.ts)

/** Announcement delay after the 6 dB point at 3–50 1/s, tones anywhere in 40–1000 Hz from 40 dB under that point; false live onsets on noise steps, mains switched on, knocks. */
function liveOnsetRows(): void {
  const fs = 16000;
  const noiseRms = 10 ** (-50 / 20);
  const bandPower = (noiseRms * noiseRms * 10) / (fs / 2);
  const rng = createRng(808);
  const trials = 12;
  for (const rate of [3, 10, 30, 50]) {
    const delays: number[] = [];
    const alarms: number[] = [];
    let missed = 0;
    let extra = 0;
    for (let k = 0; k < trials; k++) {
      const freq = 40 + 960 * rng.uniform();
      const startS = 2 + rng.uniform();
      const a6 = Math.sqrt(8 * bandPower);
      const aStart = a6 / 100;
      const t6 = startS + Math.log(a6 / aStart) / rate;
      const durationS = t6 + Math.max(3, 8 / rate) + 1;
      const env = humCycleEnvelope({ onsetS: startS, startAmplitude: aStart, growthPerS: rate, limitAmplitude: 0.3, offS: durationS + 1, decayPerS: 5 });
      const x = toneInNoise(fs, durationS, freq, env, noiseRms, 900 + k + 100 * rate, rng);
      const { announcedS } = runAnalysis(x, fs, 128);
      const alarmS = cusumAlarmS(x, fs, freq);
      if (Number.isFinite(alarmS)) alarms.push((alarmS - t6) * rate);
      if (announcedS.length === 0) {
        missed++;
        continue;
      }
      extra += announcedS.length - 1;
      delays.push((announcedS[0] - t6) * rate);
    }
    const p90 = quantile(delays, 0.9);
    row(
      `live, growth ${rate} 1/s, 40–1000 Hz: announcement after the 6 dB point`,
      `median ${num(quantile(delays, 0.5), 2)}, 90 % ${num(p90, 2)} e-folds; missed / extra ${missed} / ${extra} of ${trials}`,
      '90 % ≤ 2 e-folds, 0 / 0',
      p90 <= 2 && missed === 0 && extra === 0 ? 'PASS' : 'MISS',
    );
    row(
      `  the same trials: CUSUM alarm alone (tone's bin, before the rise test)`,
      `median ${num(quantile(alarms, 0.5), 2)}, 90 % ${num(quantile(alarms, 0.9), 2)} e-folds`,
      '—',
      'info',
    );
  }
  {
    const r = createRng(31);
    let gainDb = 0;
    let nextStep = 0;
    const run = streamGenerated(fs, 120, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        if (start + i >= nextStep) {
          if (nextStep > 0) gainDb += gainDb >= 10 ? -10 : gainDb <= -10 ? 10 : r.uniform() < 0.5 ? -10 : 10;
          nextStep += Math.round((5 + 10 * r.uniform()) * fs);
        }
        b[i] = 0.01 * 10 ** (gainDb / 20) * r.normal();
      }
    });
    row('live: toneless noise, 2 min, ±10 dB steps every 5–15 s', `${run.liveOnsets} live onsets`, '0', run.liveOnsets === 0 ? 'PASS' : 'MISS');
  }
  for (const mainsHz of [50, 60]) {
    const r = createRng(mainsHz + 1);
    const run = streamGenerated(fs, 60, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        const t = (start + i) / fs;
        let v = 0.003 * r.normal();
        if (t > 20) for (let h = 1; h <= 7; h++) v += 0.05 * 0.5 ** (h - 1) * Math.sin(2 * Math.PI * mainsHz * h * t);
        b[i] = v;
      }
    });
    row(`live: ${mainsHz} Hz mains with harmonics switched on at 20 s`, `${run.liveOnsets} live onsets`, '0', run.liveOnsets === 0 ? 'PASS' : 'MISS');
  }
  {
    const r = createRng(7);
    const run = streamGenerated(fs, 40, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        const t = (start + i) / fs;
        let v = 0.001 * r.normal();
        for (const t0 of [5, 11, 17, 23, 29, 35]) {
          if (t < t0) continue;
          const u = t - t0;
          v += 0.3 * Math.exp(-15 * u) * Math.sin(2 * Math.PI * 171 * u) + 0.1 * Math.exp(-40 * u) * Math.sin(2 * Math.PI * 343 * u);
        }
        b[i] = v;
      }
    });
    row('live: 6 knocks, two modes ringing down (15 and 40 1/s)', `${run.liveOnsets} live onsets`, '0', run.liveOnsets === 0 ? 'PASS' : 'MISS');
  }
}

/**
 * Time (s of audio, at the end of the 128-sample block it fell in) the short-frame detector's CUSUM
 * first reached its threshold in the bin nearest freqHz or a neighbour: the detection statistic's
 * own delay, before the rise test confirms a growth. The detector runs on the input itself (at
 * 16 kHz the conditioner keeps the rate).
 */
function cusumAlarmS(x: Float32Array, fs: number, freqHz: number): number {
  const st = createLiveOnsetState({ sampleRateHz: fs, bandLowHz: 20, bandHighHz: 4000 });
  const b = Math.round(freqHz / st.spec.binHz) - st.loBin;
  for (let i = 0; i < x.length; i += 128) {
    const end = Math.min(x.length, i + 128);
    stepLiveOnset(st, x, i, end);
    for (let q = Math.max(0, b - 1); q <= Math.min(st.hiBin - st.loBin, b + 1); q++) if (st.cusum[q] >= st.threshold) return end / fs;
  }
  return Infinity;
}

/** Streams `seconds` of a generated signal through one analysis in blocks; returns the onsets. */
/** Streams a generated signal through the analysis; counts the onsets announced live by push() too. */
function streamGenerated(fs: number, seconds: number, fill: (block: Float32Array, startSample: number) => void): { report: Report; liveOnsets: number } {
  const a: Analysis = createAnalysis({ sampleRateHz: fs });
  const block = new Float32Array(4096);
  const total = Math.round(seconds * fs);
  let liveOnsets = 0;
  for (let o = 0; o < total; o += block.length) {
    const n = Math.min(block.length, total - o);
    const b = n === block.length ? block : block.subarray(0, n);
    fill(b, o);
    liveOnsets += a.push(b).onsets.length;
  }
  return { report: a.finish(), liveOnsets };
}

/** One false-onset row: onsets in the report and announced live, both must be 0. */
function falseOnsetRow(name: string, run: { report: Report; liveOnsets: number }): void {
  const n = run.report.onsets.length;
  row(`${name}: onsets (report / live)`, `${n} / ${run.liveOnsets}`, '0 / 0', n === 0 && run.liveOnsets === 0 ? 'PASS' : 'MISS');
}

function falseOnsets(): void {
  const fs = 16000;
  // 10 minutes of white noise whose loudness steps by ±10 dB every 10–40 s.
  {
    const rng = createRng(4242);
    let gainDb = 0;
    let nextStep = 0;
    let steps = 0;
    const run = streamGenerated(fs, 600, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        if (start + i >= nextStep) {
          if (nextStep > 0) {
            gainDb += gainDb >= 10 ? -10 : gainDb <= -10 ? 10 : rng.uniform() < 0.5 ? -10 : 10;
            steps++;
          }
          nextStep += Math.round((10 + 30 * rng.uniform()) * fs);
        }
        b[i] = 0.01 * 10 ** (gainDb / 20) * rng.normal();
      }
    });
    falseOnsetRow(`toneless noise, 10 min, ${steps} steps of ±10 dB`, run);
  }
  for (const mainsHz of [50, 60]) {
    const rng = createRng(mainsHz);
    const w = (2 * Math.PI * mainsHz) / fs;
    // Fundamental −26 dBFS, harmonics 2–7 at half the previous level each, noise −50 dBFS with ±10 dB steps each 30 s.
    const run = streamGenerated(fs, 300, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        const n = start + i;
        let v = 0;
        let amp = 0.05;
        for (let h = 1; h <= 7; h++, amp *= 0.5) v += amp * Math.cos(h * w * n + h);
        const stepDb = Math.floor(n / (30 * fs)) % 2 === 0 ? 0 : 10;
        b[i] = v + 0.00316 * 10 ** (stepDb / 20) * rng.normal();
      }
    });
    falseOnsetRow(`steady ${mainsHz} Hz mains hum + 6 harmonics, 5 min, noise steps`, run);
  }
  // 5 minutes of knocks on a stable duct: every 5–15 s one or two modes (80–900 Hz, the second near
  // 2.3× the first) struck 25–50 dB over the noise ring down at 8–40 1/s (an impulse response).
  {
    const rng = createRng(616);
    const knocks: { t0: number; f: number[]; a: number[]; d: number[] }[] = [];
    for (let t = 5; t < 295; t += 5 + 10 * rng.uniform()) {
      const f1 = 80 + 300 * rng.uniform();
      const two = rng.uniform() < 0.5;
      const a1 = 0.001 * 10 ** ((25 + 25 * rng.uniform()) / 20);
      knocks.push({ t0: t, f: two ? [f1, 2.3 * f1] : [f1], a: two ? [a1, a1 / 3] : [a1], d: two ? [8 + 20 * rng.uniform(), 40] : [8 + 32 * rng.uniform()] });
    }
    const run = streamGenerated(fs, 300, (b, start) => {
      for (let i = 0; i < b.length; i++) {
        const t = (start + i) / fs;
        let v = 0.001 * rng.normal();
        for (const k of knocks) {
          const u = t - k.t0;
          if (u < 0 || u > 2) continue;
          for (let m = 0; m < k.f.length; m++) v += k.a[m] * Math.exp(-k.d[m] * u) * Math.sin(2 * Math.PI * k.f[m] * u);
        }
        b[i] = v;
      }
    });
    falseOnsetRow(`knocks on a stable duct, 5 min, ${knocks.length} knocks of one or two modes`, run);
  }
}

// ---------------------------------------------------------------------------------------------
// 1b. Simulated rigs: the analyser against the characteristic-equation truth (dsp/rig-sim.ts)

interface RigCase {
  name: string;
  params: ScenarioSpec['params'];
  heaterPower: number;
  onS: number;
  durationS: number;
  noiseDbfs: number;
}

/** The two demo scenarios (dsp/cli/simulate.ts), the heater switched on once and left on. */
const RIG_CASES: RigCase[] = [
  { name: 'bench tube 1 m, K 0.72', params: { lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25 }, heaterPower: 0.72, onS: 3, durationS: 7, noiseDbfs: -80 },
  {
    name: 'boiler flue 2.2 m, K 0.75',
    params: { lengthM: 2.2, gasTemperatureC: 120, ends: 'closed-open', heaterPositionM: 0.5, heatLagS: 0.014 },
    heaterPower: 0.75,
    onS: 2,
    durationS: 6,
    noiseDbfs: -70,
  },
];

function simulatedRigs(): void {
  const fs = 16000;
  const seeds = [11, 23, 31, 47, 59];
  for (const c of RIG_CASES) {
    const errPct: number[] = [];
    let covered = 0;
    let found = 0;
    let simS = 0;
    let simWallS = 0;
    let truthRate = Number.NaN;
    const models = new Map<string, number>();
    for (const seed of seeds) {
      const t0 = performance.now();
      const { samples, truth } = renderScenario({
        params: c.params,
        schedule: [
          { atS: 0, heaterPower: 0 },
          { atS: c.onS, heaterPower: c.heaterPower },
        ],
        durationS: c.durationS,
        sampleRateHz: fs,
        noiseDbfs: c.noiseDbfs,
        excitationRms: 5e-4,
        seed,
      });
      simWallS += (performance.now() - t0) / 1000;
      simS += c.durationS;
      const want = truth.steps[1];
      truthRate = want.growthRatePerS;
      const { report } = runAnalysis(samples, fs);
      // The growth of the fundamental (harmonics lie ≥ 2× away) starting within 2 s of the switch.
      let seg: Segment | null = null;
      for (const s of report.segments) {
        if (s.kind === 'growth' && s.ratePerS !== null && Math.abs(s.frequencyHz / want.frequencyHz - 1) < 0.1 && s.startS > c.onS - 0.5 && s.startS < c.onS + 2) {
          seg = s;
          break;
        }
      }
      if (seg === null || seg.ratePerS === null) continue;
      found++;
      models.set(seg.model ?? '—', (models.get(seg.model ?? '—') ?? 0) + 1);
      errPct.push((100 * (seg.ratePerS - want.growthRatePerS)) / want.growthRatePerS);
      if (seg.rateCi95PerS && seg.rateCi95PerS[0] <= want.growthRatePerS && want.growthRatePerS <= seg.rateCi95PerS[1]) covered++;
    }
    const worst = errPct.length > 0 ? Math.max(...errPct.map(Math.abs)) : NaN;
    const mean = errPct.reduce((a, b) => a + b, 0) / Math.max(1, errPct.length);
    const modelList = [...models].map(([m, k]) => `${m} ×${k}`).join(', ');
    row(`${c.name}: growth found`, `${found} of ${seeds.length}`, `${seeds.length} of ${seeds.length}`, found === seeds.length ? 'PASS' : 'MISS');
    row(
      `${c.name}: growth-rate error vs ${num(truthRate, 3)} 1/s`,
      `mean ${num(mean, 2)} %, worst |${num(worst, 2)}| % (${modelList})`,
      'worst ≤ 5 %',
      worst <= 5 ? 'PASS' : 'MISS',
    );
    // Five seeds at 95 %: 4 or 5 covered has probability 98 %.
    row(`${c.name}: 95 % intervals holding the truth`, `${covered} of ${found}`, `≥ ${seeds.length - 1} of ${seeds.length}`, covered >= seeds.length - 1 ? 'PASS' : 'MISS');
    row(`${c.name}: simulator speed (16 kHz)`, `${num(simS / simWallS, 3)}× real time`, '—', 'info');
  }
}

// ---------------------------------------------------------------------------------------------

/** Memory runs first, while the process holds nothing else (RSS never shrinks back). */
const SECTIONS: [name: string, title: string, fn: () => void | Promise<void>][] = [
  ['memory', '3b. Memory (run first, in a fresh process; dsp/cli/bench-speed.ts)', () => memoryBench(row)],
  ['accuracy', '1. Accuracy against the Cramér–Rao bound', accuracy],
  ['rigs', '1b. Simulated rigs: growth rate against the characteristic equation (5 seeds each)', simulatedRigs],
  ['onset', '2a. Onset announcement delay (10 Hz band, noise −50 dBFS, tone from 40 dB under the 6 dB point)', onsetDelay],
  ['false', '2b. False onsets', falseOnsets],
  ['live', '2c. Live onset over the band (short-frame detector): announcement delay and false live onsets', liveOnsetRows],
  ['cycles', '2d. Records of many hum cycles: varied gaps, drifting frequency (dsp/cli/bench-cycles.ts)', () => cyclesBench(row)],
  ['speed', `3a. Speed (best of ${SPEED_REPEATS} runs; dsp/cli/bench-speed.ts)`, () => speedBench(row)],
  ['records', '3c. Whole records of many hum cycles (one thread)', () => recordsBench(row)],
  ['archives', '3d. Archives on every core (humgauge analyze FOLDER, worker threads)', () => archivesBench(row)],
  ['noise', '4. Linear growth rate from noise (dsp/cli/bench-noise.ts)', () => noiseStatisticsBench(row)],
];

/** `node dist-cli/bench.js [accuracy|rigs|onset|false|live|cycles|speed|memory|records|archives|noise ...]`: all sections by default. */
async function main(): Promise<void> {
  const t0 = performance.now();
  const wanted = process.argv.slice(2);
  const unknown = wanted.filter((w) => !SECTIONS.some(([name]) => name === w));
  if (unknown.length > 0) {
    process.stderr.write(`bench: unknown section ${unknown.join(', ')} (sections: ${SECTIONS.map(([n]) => n).join(', ')})\n`);
    process.exitCode = 2;
    return;
  }
  const load = loadavg().map((l) => l.toFixed(1)).join(' ');
  out(`humgauge bench — Node ${process.version}, ${cpus().length} CPU(s), load average ${load}, ${new Date().toISOString()}\n`);
  out('Speed figures are one thread; other load on the machine lowers them.\n');
  for (const [name, title, fn] of SECTIONS) if (wanted.length === 0 || wanted.includes(name)) await section(title, fn);
  const pass = rows.filter((r) => r.verdict === 'PASS').length;
  const miss = rows.filter((r) => r.verdict === 'MISS').length;
  out(`\nbench: ${pass} PASS, ${miss} MISS, ${((performance.now() - t0) / 1000).toFixed(0)} s\n`);
}

void main();
