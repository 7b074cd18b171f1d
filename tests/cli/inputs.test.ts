// `humgauge analyze` on inputs that used to fail: standard input and pipes, pressure logs at 500 Hz
// and 2 kHz, CSV values that overflow a sum or a scale, non-finite values, decimal commas, a band
// the analysis cannot resolve, quantisation products of a 16-bit tone, and the text output's one
// sign convention. Each case reproduces a reported failure; the signals are seeded syntheses of
// known truth (dsp/synth.ts).
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { Readable } from 'node:stream';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { trackCsv } from '../../dsp/cli/analyze';
import { analyzeInput } from '../../dsp/cli/analyze-file';
import { EXIT } from '../../dsp/cli/io';
import { openInput } from '../../dsp/cli/read-file';
import { csvScaling, decodeCsv } from '../../dsp/io/csv';
import { encodeWav } from '../../dsp/io/wav-write';
import { quantisationFloorDbfs } from '../../dsp/levels';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { Report } from '../../dsp/types';
import { runCli } from './run-cli';

const run = runCli;

let dir = '';
const path = (n: string): string => join(dir, n);

/** A hum cycle in Pa on a static pressure: onset 1 s, growth 8 1/s to 2 Pa, off at 6 s, decay 5 1/s. */
function pressureLog(rateHz: number, toneHz: number, durationS = 9): Float32Array {
  return synthesize({
    sampleRateHz: rateHz,
    durationS,
    tones: [{ frequencyHz: toneHz, envelope: humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-3, growthPerS: 8, limitAmplitude: 2, offS: 6, decayPerS: 5 }) }],
    noiseRms: 2e-3,
    seed: 7,
  });
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'humgauge-inputs-'));
  const p500 = pressureLog(500, 60);
  writeFileSync(path('sensor-500.csv'), Array.from(p500, (v) => (101325 + v).toFixed(5)).join('\n') + '\n');
  const p2k = pressureLog(2000, 137);
  writeFileSync(path('sensor-2k.csv'), 'time_s,pressure_pa\n' + Array.from(p2k, (v, i) => `${(i / 2000).toFixed(4)},${(101325 + v).toFixed(5)}`).join('\n') + '\n');
  writeFileSync(path('huge.csv'), Array.from({ length: 16000 }, (_, i) => (i % 2 ? '1e308' : '-1e308')).join('\n') + '\n');
  writeFileSync(path('subnormal.csv'), Array.from({ length: 16000 }, (_, i) => (i % 2 ? '5e-324' : '0')).join('\n') + '\n');
  writeFileSync(path('inf.csv'), 'time_s,pressure_pa\n' + Array.from({ length: 4000 }, (_, i) => `${(i / 2000).toFixed(4)},${i === 900 ? 'inf' : Math.sin(i).toFixed(4)}`).join('\n') + '\n');
  writeFileSync(path('overflow.csv'), 'time_s,pressure_pa\n' + Array.from({ length: 4000 }, (_, i) => `${(i / 2000).toFixed(4)},${i === 900 ? '1e400' : Math.sin(i).toFixed(4)}`).join('\n') + '\n');
  // A one-column log written with a decimal comma: "101325,12".
  writeFileSync(path('comma.csv'), Array.from(p2k.subarray(0, 4000), (v) => (101325 + v).toFixed(2).replace('.', ',')).join('\n') + '\n');
  const x = pressureLog(16000, 170, 8);
  for (let i = 0; i < x.length; i++) x[i] *= 0.15;
  writeFileSync(path('cycle.wav'), encodeWav(x, 16000, 'pcm16'));
  // A pure 200 Hz tone quantised to 16 bits: its quantisation products lie near −107 dBFS.
  const pure = new Float32Array(16000 * 10);
  for (let i = 0; i < pure.length; i++) pure[i] = 0.5 * Math.sin((2 * Math.PI * 200 * i) / 16000);
  writeFileSync(path('pure200.wav'), encodeWav(pure, 16000, 'pcm16'));
  // The same tone in Pa printed with 3 decimals: the printing quantises it (step 1 mPa).
  writeFileSync(path('pure200.csv'), Array.from(pure, (v) => (2 * v).toFixed(3)).join('\n') + '\n');
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('streams', () => {
  it('"-" reads standard input as a stream and gives the same report as the file', async () => {
    const bytes = readFileSync(path('cycle.wav'));
    const input = await openInput('-', () => Readable.from([bytes.subarray(0, 100), bytes.subarray(100, 70000), bytes.subarray(70000)]));
    expect(input.size).toBeNull();
    expect(input.kind).toBe('wav');
    const fromStream = await analyzeInput(input, { keepTrack: false });
    const fromFile = await analyzeInput(await openInput(path('cycle.wav')), { keepTrack: false });
    expect(fromStream.report).toEqual(fromFile.report);
  });

  it('a CSV from a stream is read once and spooled for its second pass: same report as the file', async () => {
    const bytes = readFileSync(path('sensor-2k.csv'));
    const input = await openInput('-', () => Readable.from([bytes.subarray(0, 300), bytes.subarray(300)]));
    expect(input.kind).toBe('csv');
    const fromStream = await analyzeInput(input, { keepTrack: false });
    const fromFile = await analyzeInput(await openInput(path('sensor-2k.csv')), { keepTrack: false });
    expect(fromStream.report).toEqual(fromFile.report);
  });
});

describe('pressure-sensor logs from 500 Hz (README example --rate 5000 used to exit 11)', () => {
  it('a one-column 500 Hz log: tone, growth 8 1/s and decay 5 1/s within 10 %, amplitude in Pa and dB SPL', async () => {
    const r = await run(['analyze', path('sensor-500.csv'), '--rate', '500', '--json']);
    expect(r.err).toBe('');
    expect(r.code).toBe(EXIT.OK);
    const rep = JSON.parse(r.out) as Report;
    expect(Math.abs((rep.summary.frequencyHz as number) - 60)).toBeLessThan(0.5);
    expect(Math.abs((rep.summary.growthRatePerS as number) / 8 - 1)).toBeLessThan(0.1);
    expect(Math.abs((rep.summary.decayRatePerS as number) / 5 - 1)).toBeLessThan(0.1);
    const text = (await run(['analyze', path('sensor-500.csv'), '--rate', '500'])).out;
    // 2 Pa peak = 1.414 Pa RMS = 97.0 dB SPL re 20 µPa (ISO 1683; REFERENCES.md §11); the envelope's
    // steady level carries the noise and the band edge: within 0.5 dB.
    const m = /limit-cycle amplitude: .* dBFS \(([\d.]+) Pa RMS, ([\d.]+) dB SPL\)/.exec(text);
    expect(m).not.toBeNull();
    expect(Math.abs(Number(m?.[2]) - 96.99)).toBeLessThan(0.5);
    expect(Math.abs(Number(m?.[1]) / Math.SQRT2 / 1 - 1)).toBeLessThan(0.06);
  });

  it('a 2 kHz log with a time column; --csv gives Pa and dB SPL per frame', async () => {
    const r = await run(['analyze', path('sensor-2k.csv'), '--json']);
    expect(r.code).toBe(EXIT.OK);
    const rep = JSON.parse(r.out) as Report;
    expect(Math.abs((rep.summary.frequencyHz as number) - 137)).toBeLessThan(0.5);
    const csv = await run(['analyze', path('sensor-2k.csv'), '--csv']);
    expect(csv.out.split('\n')[0]).toBe('time_s,frequency_hz,amplitude_dbfs,amplitude_pa_rms,amplitude_db_spl,state');
  });

  it('--rate below 500 Hz is refused naming the option and its range', async () => {
    const r = await run(['analyze', path('sensor-500.csv'), '--rate', '400']);
    expect(r.code).toBe(EXIT.BAD_PARAMETER);
    expect(r.err).toMatch(/--rate 400 Hz is outside its range \(500 to 192000 Hz\)/);
  });
});

describe('CSV values the scaling used to break (exit 0 with "no tone" and "dBFS + — dB")', () => {
  it('csvScaling keeps ±1e308 and 0/5e-324 finite and exact (a power of two)', () => {
    for (const [lo, hi] of [
      [-1e308, 1e308],
      [0, 5e-324],
      [101320, 101330],
    ]) {
      const { offset, scaleLog2 } = csvScaling({ minValue: lo, maxValue: hi, meanValue: lo / 2 + hi / 2 });
      expect(Number.isFinite(offset) && Number.isInteger(scaleLog2)).toBe(true);
    }
  });

  it.each(['huge.csv', 'subnormal.csv'])('%s is analysed without NaN, Infinity or a dash in the levels line', async (name) => {
    const r = await run(['analyze', path(name), '--rate', '8000']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.out).toMatch(/levels: dB SPL = dBFS [+−] \d/);
    expect(r.out).not.toMatch(/NaN|Infinity|dBFS \+ —/);
  });

  it('an infinite value and one past the largest double are refused like a WAV\'s (exit 7, one line)', async () => {
    for (const [name, msg] of [
      ['inf.csv', /line 902: pressure_pa is infinite/],
      ['overflow.csv', /line 902: pressure_pa 1e400 is beyond the largest finite number/],
    ] as const) {
      const r = await run(['analyze', path(name)]);
      expect(r.code).toBe(EXIT.BAD_SAMPLES);
      expect(r.err).toMatch(msg);
      expect(r.err.trim().split('\n')).toHaveLength(1);
    }
  });

  it('a decimal comma is named instead of "time 101325 s does not rise"', async () => {
    const r = await run(['analyze', path('comma.csv'), '--rate', '2000']);
    expect(r.code).toBe(EXIT.BAD_CSV);
    expect(r.err).toMatch(/decimal comma/);
    expect(() => decodeCsv(new TextEncoder().encode('p;q\n1,5;2,5\n'), {})).toThrow(/decimal comma/);
  });
});

describe('bands and quantisation', () => {
  it('--band 0.0001-0.0002 names the band, not the frame size', async () => {
    const r = await run(['analyze', path('cycle.wav'), '--band', '0.0001-0.0002']);
    expect(r.code).toBe(EXIT.BAD_PARAMETER);
    expect(r.err).toMatch(/--band must be at least 5 Hz/);
    expect(r.err).not.toMatch(/frameSize|bandLowHz/);
  });

  it('quantisation floor: −(6.02 N + 1.76) dBFS (Bennett 1948; REFERENCES.md §60)', () => {
    expect(quantisationFloorDbfs(16)).toBeCloseTo(-98.09, 2);
    expect(quantisationFloorDbfs(24)).toBeCloseTo(-146.26, 2);
  });

  it('--band 50-6000 on a pure 16-bit 200 Hz tone lists no quantisation product as a tone', async () => {
    const r = await run(['analyze', path('pure200.wav'), '--band', '50-6000', '--json']);
    const rep = JSON.parse(r.out) as Report;
    const floor = quantisationFloorDbfs(16);
    expect(rep.tones?.map((t) => Math.round(t.frequencyHz))).toEqual([200]);
    expect(rep.summary.limitAmplitudeDbfs === null || (rep.summary.limitAmplitudeDbfs as number) > floor).toBe(true);
  });

  it('a CSV printed with 3 decimals: its step is the quantiser, and its products are no tones either', async () => {
    const r = await run(['analyze', path('pure200.csv'), '--rate', '16000', '--band', '50-6000', '--json']);
    expect(r.code).toBe(EXIT.OK);
    expect((JSON.parse(r.out) as Report).tones?.map((t) => Math.round(t.frequencyHz))).toEqual([200]);
  });
});

describe('text and --csv agree', () => {
  it('one sign convention: the decay rate is positive in the segment table and the summary, the dB/s column has a header', async () => {
    // The bundled demo (README): a bench tube switched on, humming, switched off.
    const r = await run(['analyze', join(__dirname, '../../public/demo/bench-tube.wav')]);
    const decayRow = r.out.split('\n').find((l) => l.startsWith('decay '));
    expect(decayRow).toMatch(/^decay\s+[\d.]+\s+[\d.]+\s+[\d.]+\s+\d[\d.]*\s+\[\d/);
    expect(r.out).toMatch(/growth and decay rates both positive/);
    expect(r.out).toMatch(/95 % interval +in dB\/s/);
    expect(r.out).not.toMatch(/\de-\d/);
  });

  it('--csv states follow the segment table (they lagged it by 0.1-1 s)', async () => {
    const run1 = await analyzeInput(await openInput(path('cycle.wav')), { keepTrack: true });
    const rows = trackCsv(run1.track!, run1.report).trimEnd().split('\n').slice(1).map((l) => l.split(','));
    const segs = run1.report.segments.filter((s) => s.kind !== 'quiet');
    expect(segs.length).toBeGreaterThan(0);
    const frameS = 0.01; // track rows about every 10 ms (dsp/pipeline.ts ROW_RATE_HZ)
    for (const seg of segs) {
      const first = rows.find((r) => r[3] === seg.kind && Number(r[0]) >= seg.startS - frameS);
      expect(first, seg.kind).toBeDefined();
      expect(Math.abs(Number(first?.[0]) - seg.startS)).toBeLessThan(2 * frameS);
    }
  });
});
