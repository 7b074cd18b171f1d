import { mkdtempSync, readFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { parseSteps, runSimulate } from '../../dsp/cli/simulate';
import { EXIT, type CliIo } from '../../dsp/cli/io';
import { createRig, linearModes } from '../../dsp/rig-sim';

function capture(): CliIo & { stdout: string; stderr: string } {
  const io = { stdout: '', stderr: '', isErrTty: false, out: (t: string) => void (io.stdout += t), err: (t: string) => void (io.stderr += t) };
  return io;
}

interface Truth {
  sampleRateHz: number;
  silenceFromS: number;
  steps: { atS: number; heaterPower: number; growthRatePerS: number; frequencyHz: number; decayRatePerS: number | null; isUnstable: boolean }[];
}

/** Reads a 16-bit mono PCM WAV written by encodeWav (44-byte header). */
function readPcm16(path: string): { rateHz: number; samples: Int16Array; channels: number; bits: number } {
  const b = readFileSync(path);
  const v = new DataView(b.buffer, b.byteOffset, b.byteLength);
  expect(b.toString('ascii', 0, 4)).toBe('RIFF');
  expect(b.toString('ascii', 8, 12)).toBe('WAVE');
  const samples = new Int16Array((b.length - 44) / 2);
  for (let i = 0; i < samples.length; i++) samples[i] = v.getInt16(44 + 2 * i, true);
  return { rateHz: v.getUint32(24, true), samples, channels: v.getUint16(22, true), bits: v.getUint16(34, true) };
}

const DEMO_ARGS = '--length 1 --diameter 0.035 --temp 20 --heater 0.25 --steps 0:0,3:0.72,13:0 --duration 17.5 --rate 16000 --noise-dbfs -52 --excitation 5e-4 --seed 11';

describe('humgauge simulate', () => {
  it('writes a WAV and its truth: characteristic-equation rates per step, decay rate when the power drops', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'humgauge-sim-'));
    const out = join(dir, 'rig.wav');
    const io = capture();
    const code = await runSimulate(['--steps', '0:0,0.2:0.9,2.5:0.2', '--duration', '3', '--silence', '0.3', '--out', out], io);
    expect(code).toBe(EXIT.OK);
    const wav = readPcm16(out);
    expect(wav.rateHz).toBe(16000);
    expect(wav.channels).toBe(1);
    expect(wav.bits).toBe(16);
    expect(wav.samples.length).toBe(3.3 * 16000);
    // Ends in exact zeros (a fake microphone repeats its last buffer: RECIPE.md §4).
    expect(wav.samples.subarray(3 * 16000).every((x) => x === 0)).toBe(true);
    const truth = JSON.parse(readFileSync(join(dir, 'rig.truth.json'), 'utf8')) as Truth;
    expect(truth.steps).toHaveLength(3);
    const rig = createRig({ lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25 });
    const want = linearModes(rig, 0.9, 1)[0];
    expect(truth.steps[1].growthRatePerS).toBeCloseTo(want.growthRatePerS, 9);
    expect(truth.steps[1].isUnstable).toBe(true);
    expect(truth.steps[0].decayRatePerS).toBeNull();
    expect(truth.steps[2].decayRatePerS).toBeCloseTo(-linearModes(rig, 0.2, 1)[0].growthRatePerS, 9);
    expect(io.stdout).toMatch(/grows at/);
    expect(io.stdout).toMatch(/limit cycle 1\d\d\.\d\d Hz at −?-?\d+\.\d dBFS/);
  });

  it('reproduces the bundled demo public/demo/bench-tube.wav bit for bit (the command in simulate.ts)', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'humgauge-sim-'));
    const out = join(dir, 'bench-tube.wav');
    const code = await runSimulate([...DEMO_ARGS.split(' '), '--out', out], capture());
    expect(code).toBe(EXIT.OK);
    const fresh = readFileSync(out);
    const committed = readFileSync('public/demo/bench-tube.wav');
    expect(committed.length).toBeLessThan(1_000_000);
    expect(fresh.equals(committed)).toBe(true);
    const truth = JSON.parse(readFileSync('public/demo/bench-tube.truth.json', 'utf8')) as Truth;
    expect(truth.steps.map((s) => s.isUnstable)).toEqual([false, true, false]);
    // 15–25 s, with ≥ 0.25 s of exact zeros at the end (brief; RECIPE.md §4).
    const wav = readPcm16('public/demo/bench-tube.wav');
    expect(wav.samples.length / wav.rateHz).toBeGreaterThanOrEqual(15);
    expect(wav.samples.length / wav.rateHz).toBeLessThanOrEqual(25);
    expect(wav.samples.subarray(wav.samples.length - 4000).every((x) => x === 0)).toBe(true);
  });

  it('parses the power schedule', () => {
    expect(parseSteps('0:0,3:0.8')).toEqual([
      { atS: 0, heaterPower: 0 },
      { atS: 3, heaterPower: 0.8 },
    ]);
    expect(() => parseSteps('0:0,3')).toThrow(/time_s:power/);
    expect(() => parseSteps('2:0,1:1')).toThrow(/increase/);
    expect(() => parseSteps('0:-1')).toThrow(/--steps power -1 is outside its range \(0 to 100\)/);
  });

  it.each([
    [[], EXIT.USAGE, /--out is required/],
    [['--out', 'x.wav', '--length', '0'], EXIT.BAD_PARAMETER, /--length must lie from 0.001 to 500 m/],
    [['--out', 'x.wav', '--heater', '2'], EXIT.BAD_PARAMETER, /--heater must lie inside/],
    [['--out', 'x.wav', '--temp', '-274'], EXIT.BAD_PARAMETER, /absolute zero/],
    [['--out', 'x.wav', '--rate', '1000'], EXIT.BAD_PARAMETER, /--rate/],
    [['--out', 'x.wav', '--steps', 'on'], EXIT.USAGE, /--steps/],
    [['--out', 'x.wav', '--ends', 'closed-closed'], EXIT.USAGE, /--ends must be one of/],
    [['--out', 'x.wav', '--peak', '2'], EXIT.BAD_PARAMETER, /--peak must lie/],
    [['--out', '/nonexistent-dir/x.wav', '--duration', '0.1'], EXIT.WRITE_FAILED, /cannot write/],
  ])('bad input %j → exit %i, one line', async (args, code, msg) => {
    const io = capture();
    expect(await runSimulate(args as string[], io)).toBe(code);
    expect(io.stderr).toMatch(msg as RegExp);
    expect(io.stderr.trim().split('\n')).toHaveLength(1);
  });
});
