// `humgauge analyze`, run in-process with a fake terminal. Input files are written to a temporary
// folder from seeded signals of known truth (dsp/synth.ts). These tests check the command line's
// contract: exit codes per failure (dsp/cli/io.ts EXIT), one line on stderr, the report fields of
// DESIGN.md, the --csv header. The accuracy of the fits is tested beside the fits and in the bench;
// here the numbers only have to land where the signal puts them, with tolerances argued per check.
import { mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { VERSION } from '../../dsp/cli/humgauge';
import { EXIT } from '../../dsp/cli/io';
import { encodeWav } from '../../dsp/io/wav-write';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { Report } from '../../dsp/types';
import { runCli } from './run-cli';

const run = runCli;

let dir = '';
const path = (name: string): string => join(dir, name);

const FS_HZ = 16000;
const TONE_HZ = 170;
const GROWTH_PER_S = 8;
const DECAY_PER_S = 5;

/**
 * A bench-rig hum cycle: quiet 1.5 s, then Stuart–Landau growth at 8 1/s from 1e-6 (24 dB under
 * the noise in a 10 Hz band) into a limit cycle, off at 5 s, decay at 5 1/s.
 */
function humCycle(durationS = 8, seed = 3): Float32Array {
  return synthesize({
    sampleRateHz: FS_HZ,
    durationS,
    tones: [
      {
        frequencyHz: TONE_HZ,
        envelope: humCycleEnvelope({ onsetS: 1.5, startAmplitude: 1e-6, growthPerS: GROWTH_PER_S, limitAmplitude: 0.3, offS: 5, decayPerS: DECAY_PER_S }),
      },
    ],
    noiseRms: 10 ** (-70 / 20),
    seed,
  });
}

function bytes(s: string): Uint8Array {
  return new TextEncoder().encode(s);
}

function wavWithTag(tag: number, bits: number, dataBytes: number): Uint8Array {
  const b = new Uint8Array(44 + dataBytes);
  const v = new DataView(b.buffer);
  b.set(bytes('RIFF'), 0);
  v.setUint32(4, 36 + dataBytes, true);
  b.set(bytes('WAVEfmt '), 8);
  v.setUint32(16, 16, true);
  v.setUint16(20, tag, true);
  v.setUint16(22, 1, true);
  v.setUint32(24, 8000, true);
  v.setUint32(28, 8000 * (bits / 8), true);
  v.setUint16(32, bits / 8, true);
  v.setUint16(34, bits, true);
  b.set(bytes('data'), 36);
  v.setUint32(40, dataBytes, true);
  for (let i = 44; i < b.length; i++) b[i] = (i * 37) & 0xff;
  return b;
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'humgauge-cli-'));
  const x = humCycle();
  writeFileSync(path('cycle.wav'), encodeWav(x, FS_HZ, 'pcm16'));
  // The same signal as a pressure-sensor export in Pa: static 101325 Pa plus 200 Pa per full scale.
  const lines = ['time_s,pressure_pa'];
  for (let i = 0; i < x.length; i++) lines.push(`${(i / FS_HZ).toFixed(6)},${(101325 + 200 * x[i]).toFixed(4)}`);
  writeFileSync(path('cycle.csv'), lines.join('\n') + '\n');
  writeFileSync(path('one-column.csv'), 'pressure_pa\n' + Array.from(x, (v) => (200 * v).toFixed(4)).join('\n') + '\n');
  // Stereo: the tone on channel 2 only, noise on channel 1.
  const noise = synthesize({ sampleRateHz: FS_HZ, durationS: 8, noiseRms: 0.01, seed: 9 });
  writeFileSync(path('stereo.wav'), encodeWav([noise, x], FS_HZ, 'float32'));
  // Driven twice as loud as full scale during the limit cycle: clipped by the 16-bit encoder.
  const loud = x.map((v) => 4 * v);
  writeFileSync(path('clipped.wav'), encodeWav(loud, FS_HZ, 'pcm16'));
  const full = encodeWav(x, FS_HZ, 'pcm16');
  writeFileSync(path('empty.wav'), new Uint8Array(0));
  writeFileSync(path('truncated.wav'), full.subarray(0, 30));
  writeFileSync(path('junk.wav'), bytes('this is not a RIFF file at all, just text\n'));
  writeFileSync(path('junk.bin'), Uint8Array.from({ length: 600 }, (_, i) => (i * 13) & 0xff));
  writeFileSync(path('alaw.wav'), wavWithTag(6, 8, 8000));
  const nan = new Float32Array(FS_HZ);
  for (let i = 0; i < nan.length; i++) nan[i] = 0.1 * Math.sin(i / 3);
  nan[12000] = NaN;
  writeFileSync(path('nan.wav'), encodeWav(nan, FS_HZ, 'float32'));
  writeFileSync(path('short.wav'), encodeWav(x.subarray(0, FS_HZ * 0.4), FS_HZ, 'pcm16'));
  writeFileSync(path('silent.wav'), encodeWav(new Float32Array(FS_HZ * 2), FS_HZ, 'pcm16'));
  const goodCsv = lines.slice(0, 16001);
  const csvWith = (i: number, line: string): string => goodCsv.map((l, k) => (k === i ? line : l)).join('\n') + '\n';
  writeFileSync(path('text.csv'), csvWith(500, '0.031187,loud'));
  writeFileSync(path('missing.csv'), csvWith(500, '0.031187,'));
  writeFileSync(path('backwards.csv'), csvWith(500, '0.010000,101325'));
  writeFileSync(path('irregular.csv'), csvWith(500, '0.031200,101325'));
  mkdirSync(path('a-folder'));
  // 31 s: long enough for the progress line.
  writeFileSync(path('long.wav'), encodeWav(humCycle(31, 5), FS_HZ, 'pcm16'));
});

afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

/** A failure: the exit code, nothing on stdout, exactly one stderr line naming the file, no stack trace. */
async function expectFailure(args: string[], code: number, message: RegExp, fileLabel?: string): Promise<void> {
  const r = await run(args);
  expect(r.code).toBe(code);
  expect(r.out).toBe('');
  expect(r.err.endsWith('\n')).toBe(true);
  expect(r.err.trimEnd().split('\n')).toHaveLength(1);
  expect(r.err).not.toMatch(/\n\s+at /);
  if (fileLabel) expect(r.err.startsWith(`humgauge: ${fileLabel}: `)).toBe(true);
  else expect(r.err.startsWith('humgauge')).toBe(true);
  expect(r.err).toMatch(message);
}

describe('help and usage', () => {
  it('--help documents every option, an example and the exit codes', async () => {
    const r = await run(['--help']);
    expect(r.code).toBe(EXIT.OK);
    for (const word of ['analyze FILE', '--json', '--csv', '--band', '--rate', '--channel', 'Example', 'Exit codes', 'modes', 'simulate']) expect(r.out).toContain(word);
    for (const [name, code] of Object.entries(EXIT)) expect(r.out, name).toMatch(new RegExp(`^\\s+${code}\\s`, 'm'));
  });

  it('--version is the package version', async () => {
    const pkg = JSON.parse(readFileSync(join(__dirname, '../../package.json'), 'utf8')) as { version: string };
    expect(VERSION).toBe(pkg.version);
    expect((await run(['--version'])).out).toBe(`humgauge ${pkg.version}\n`);
  });

  it('analyze --help', async () => {
    const r = await run(['analyze', '--help']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.out).toMatch(/^Usage: humgauge analyze FILE/);
  });

  it('unknown option', () => expectFailure(['analyze', path('cycle.wav'), '--fast'], EXIT.USAGE, /unknown option --fast/));
  it('no file', () => expectFailure(['analyze'], EXIT.USAGE, /no input file/));
  it('two missing files: a batch of two error rows, exit 14 (some failed)', async () => {
    const r = await run(['analyze', path('a.wav'), path('b.wav')]);
    expect(r.code).toBe(EXIT.BATCH_FAILED);
    expect(r.out.trimEnd().split('\n')).toHaveLength(3);
    expect(r.out).toMatch(/a\.wav,error 3,.*no such file/);
  });
  it('--json with --csv', () => expectFailure(['analyze', path('cycle.wav'), '--json', '--csv'], EXIT.USAGE, /cannot be combined/));
  it('--band without a range', () => expectFailure(['analyze', path('cycle.wav'), '--band', 'low'], EXIT.USAGE, /LOW-HIGH/));
  it('--band upside down', () => expectFailure(['analyze', path('cycle.wav'), '--band', '500-100'], EXIT.BAD_PARAMETER, /LOW must be/));
  it('--rate on a WAV', () => expectFailure(['analyze', path('cycle.wav'), '--rate', '8000'], EXIT.USAGE, /--rate applies to one-column CSV/, path('cycle.wav')));
  it('--channel 0', () => expectFailure(['analyze', path('cycle.wav'), '--channel', '0'], EXIT.BAD_PARAMETER, /--channel 0 is outside its range \(1 to/));
  it('unknown command', () => expectFailure(['analyse-all'], EXIT.USAGE, /unknown command "analyse-all"/));
  it('no command', async () => {
    const r = await run([]);
    expect(r.code).toBe(EXIT.USAGE);
  });
});

describe('bad input: one line on stderr, a distinct exit code', () => {
  it('missing file', () => expectFailure(['analyze', path('nope.wav')], EXIT.UNREADABLE, /no such file/, path('nope.wav')));
  it('a folder without recordings', () => expectFailure(['analyze', path('a-folder')], EXIT.USAGE, /no \.wav or \.csv files/));
  it('empty file', () => expectFailure(['analyze', path('empty.wav')], EXIT.EMPTY_OR_TRUNCATED, /empty/, path('empty.wav')));
  it('truncated file', () => expectFailure(['analyze', path('truncated.wav')], EXIT.EMPTY_OR_TRUNCATED, /truncated/, path('truncated.wav')));
  it('broken RIFF header', () => expectFailure(['analyze', path('junk.wav')], EXIT.BAD_HEADER, /no RIFF header/, path('junk.wav')));
  it('binary file that is neither WAV nor CSV', () => expectFailure(['analyze', path('junk.bin')], EXIT.BAD_HEADER, /neither a WAV/));
  it('A-law', () => expectFailure(['analyze', path('alaw.wav')], EXIT.UNSUPPORTED_ENCODING, /A-law.*format tag 6/, path('alaw.wav')));
  it('NaN samples', () => expectFailure(['analyze', path('nan.wav')], EXIT.BAD_SAMPLES, /sample 12000 .*NaN/, path('nan.wav')));
  it('too short', () => expectFailure(['analyze', path('short.wav')], EXIT.TOO_SHORT, /0\.400 s.*at least 0\.5 s/, path('short.wav')));
  it('silent', () => expectFailure(['analyze', path('silent.wav')], EXIT.SILENT, /all samples are zero/, path('silent.wav')));
  it('CSV: text in a number field', () => expectFailure(['analyze', path('text.csv')], EXIT.BAD_CSV, /line 501: pressure_pa "loud" is not a number/, path('text.csv')));
  it('CSV: missing value', () => expectFailure(['analyze', path('missing.csv')], EXIT.BAD_CSV, /line 501: missing pressure_pa/, path('missing.csv')));
  it('CSV: time going backwards', () => expectFailure(['analyze', path('backwards.csv')], EXIT.BAD_CSV, /line 501: time 0\.010000 s does not rise/, path('backwards.csv')));
  it('CSV: irregular step', () => expectFailure(['analyze', path('irregular.csv')], EXIT.BAD_CSV, /line 501: time step .*irregular/, path('irregular.csv')));
  it('CSV: one column without --rate', () => expectFailure(['analyze', path('one-column.csv')], EXIT.BAD_CSV, /--rate/, path('one-column.csv')));
  it('CSV: --rate contradicting the time column', () =>
    expectFailure(['analyze', path('cycle.csv'), '--rate', '8000'], EXIT.BAD_PARAMETER, /disagrees with the time column/, path('cycle.csv')));
  it('a channel the file lacks', () => expectFailure(['analyze', path('stereo.wav'), '--channel', '3'], EXIT.BAD_PARAMETER, /channel 3 .* 2 channels/, path('stereo.wav')));
  it('a band above half the sample rate', () =>
    expectFailure(['analyze', path('cycle.wav'), '--band', '100-9000'], EXIT.BAD_PARAMETER, /above half the sample rate \(8000 Hz\)/, path('cycle.wav')));
});

describe('results', () => {
  let report: Report;
  beforeAll(async () => {
    const r = await run(['analyze', path('cycle.wav'), '--json']);
    expect(r.err).toBe('');
    expect(r.code).toBe(EXIT.OK);
    report = JSON.parse(r.out) as Report;
  });

  it('--json prints the report contract of DESIGN.md', () => {
    expect(Object.keys(report)).toEqual(expect.arrayContaining(['reportVersion', 'sampleRateHz', 'durationS', 'onsets', 'segments', 'noiseDriven', 'summary']));
    expect(report.sampleRateHz).toBe(FS_HZ);
    expect(report.durationS).toBeCloseTo(8, 1);
    for (const key of ['frequencyHz', 'growthRatePerS', 'decayRatePerS', 'effectiveGainPerS', 'dampingRatio', 'qFactor']) expect(report.summary).toHaveProperty(key);
    for (const seg of report.segments) {
      expect(['quiet', 'growth', 'steady', 'decay']).toContain(seg.kind);
      expect(seg.endS).toBeGreaterThanOrEqual(seg.startS);
      if (seg.kind === 'quiet') {
        expect(seg.ratePerS).toBeNull();
        expect(seg.rateCi95PerS).toBeNull();
      }
    }
  });

  it('finds the tone, one onset near 1.5 s, growth and decay (plumbing check, loose tolerances)', () => {
    // Frequency: hundreds of frames of a 60 dB-SNR tone; any interpolating tracker is within 1 Hz.
    expect(Math.abs((report.summary.frequencyHz ?? 0) - TONE_HZ)).toBeLessThan(1);
    // The onset is where the growth meets the background in a ~10 Hz band (DESIGN.md). White noise
    // of RMS σ = 10^(−70/20) puts σ²·10/8000 in 10 Hz at 16 kHz; a sine of amplitude A has mean
    // square A²/2, so the crossing amplitude is σ·√(2·10/8000) = 1.58e-5, reached ln(15.8)/8 = 0.345 s
    // after the start at 1e-6: 1.845 s. ±0.15 s covers a band of 5–20 Hz (±3 dB = ±0.043 s) and
    // the scatter of the background estimate.
    const crossingS = 1.5 + Math.log((10 ** (-70 / 20) * Math.sqrt((2 * 10) / 8000)) / 1e-6) / GROWTH_PER_S;
    expect(report.onsets.length).toBe(1);
    expect(Math.abs(report.onsets[0].timeS - crossingS)).toBeLessThan(0.15);
    // Rates: the fits are tested elsewhere; ±25 % catches a sign or unit slip in the plumbing (e.g. dB/s or power rates, 2×).
    expect(report.summary.growthRatePerS).toBeGreaterThan(GROWTH_PER_S * 0.75);
    expect(report.summary.growthRatePerS).toBeLessThan(GROWTH_PER_S * 1.25);
    expect(report.summary.decayRatePerS).toBeGreaterThan(DECAY_PER_S * 0.75);
    expect(report.summary.decayRatePerS).toBeLessThan(DECAY_PER_S * 1.25);
  });

  it('--csv prints the per-frame track with its header', async () => {
    const r = await run(['analyze', path('cycle.wav'), '--csv']);
    expect(r.code).toBe(EXIT.OK);
    const lines = r.out.trimEnd().split('\n');
    expect(lines[0]).toBe('time_s,frequency_hz,amplitude_dbfs,state');
    expect(lines.length).toBeGreaterThan(8 * 20);
    let prev = -Infinity;
    for (const line of lines.slice(1)) {
      const [t, , , state] = line.split(',');
      expect(Number(t)).toBeGreaterThan(prev);
      prev = Number(t);
      expect(['quiet', 'growth', 'steady', 'decay']).toContain(state);
    }
    expect(prev).toBeLessThanOrEqual(8.01);
  });

  it('the readable summary gives every figure with its unit and a 95 % interval', async () => {
    const r = await run(['analyze', path('cycle.wav')]);
    expect(r.code).toBe(EXIT.OK);
    for (const word of ['Onsets', 'Main tone', 'segments', 'growth', 'decay', 'Hz', '1/s', '95 % interval', 'effective gain', 'damping ratio', 'Q', 'e-folding time', 'doubling time', 'T60']) {
      expect(r.out).toContain(word);
    }
    const growthLine = r.out.split('\n').find((l) => l.startsWith('growth rate'));
    expect(growthLine).toMatch(/1\/s\s+\[[\d.]+, [\d.]+\]/);
  });

  it('a pressure CSV with a static offset gives the same tone and onset as the WAV', async () => {
    const r = await run(['analyze', path('cycle.csv'), '--json']);
    expect(r.err).toBe('');
    expect(r.code).toBe(EXIT.OK);
    const rep = JSON.parse(r.out) as Report;
    expect(rep.sampleRateHz).toBeCloseTo(FS_HZ, 0);
    expect(Math.abs((rep.summary.frequencyHz ?? 0) - TONE_HZ)).toBeLessThan(1);
    expect(rep.onsets.length).toBe(1);
    const text = await run(['analyze', path('cycle.csv')]);
    expect(text.out).toMatch(/dB SPL = dBFS \+/);
  });

  it('a one-column CSV with --rate', async () => {
    const r = await run(['analyze', path('one-column.csv'), '--rate', String(FS_HZ), '--json']);
    expect(r.code).toBe(EXIT.OK);
    expect(Math.abs(((JSON.parse(r.out) as Report).summary.frequencyHz ?? 0) - TONE_HZ)).toBeLessThan(1);
  });

  it('--channel picks one channel of a stereo file', async () => {
    const r = await run(['analyze', path('stereo.wav'), '--channel', '2', '--json']);
    expect(r.code).toBe(EXIT.OK);
    expect(Math.abs(((JSON.parse(r.out) as Report).summary.frequencyHz ?? 0) - TONE_HZ)).toBeLessThan(1);
  });

  it('reports clipped stretches', async () => {
    const r = await run(['analyze', path('clipped.wav'), '--json']);
    expect(r.code).toBe(EXIT.OK);
    const rep = JSON.parse(r.out) as Report;
    expect(rep.clipped?.length ?? 0).toBeGreaterThan(0);
    // The tone exceeds full scale from about where 4 × A(t) > 1 until shortly after the driving stops at 5 s.
    const first = rep.clipped?.[0];
    expect(first?.startS).toBeGreaterThan(1.5);
    expect(rep.clipped?.[rep.clipped.length - 1].endS).toBeLessThan(5.5);
    const text = await run(['analyze', path('clipped.wav')]);
    expect(text.out).toMatch(/CLIPPED: \d+ stretch/);
  });

  it('shows progress on a terminal for files over 30 s, and not otherwise', async () => {
    const tty = await run(['analyze', path('long.wav'), '--json'], true);
    expect(tty.code).toBe(EXIT.OK);
    expect(tty.err).toMatch(/long\.wav: +\d+ % of 31 s/);
    const pipe = await run(['analyze', path('long.wav'), '--json'], false);
    expect(pipe.err).toBe('');
    const short = await run(['analyze', path('cycle.wav'), '--json'], true);
    expect(short.err).toBe('');
  });
});
