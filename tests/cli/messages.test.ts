// Messages of the command line name the option a user typed (--temp, --lag-ms, --molar-mass),
// never a model parameter (temperatureC, heatLagS, molarMassKgPerMol), NaN or Infinity; a file
// that cannot be written or read is the one named; a profile is streamed and a bad line quoted
// in at most 80 characters. Each case reproduces a reported failure.
import { mkdtempSync, rmSync, writeFileSync, existsSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { EXIT } from '../../dsp/cli/io';
import { MODEL_PARAMETER_OPTIONS, withOptionNames } from '../../dsp/cli/options';
import { PROFILE_MAX_LINE_BYTES } from '../../dsp/cli/profile';
import { runCli } from './run-cli';

const run = runCli;

let dir = '';
beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'humgauge-messages-'));
});
afterAll(() => rmSync(dir, { recursive: true, force: true }));

const INTERNAL = /temperatureC|heatLagS|molarMassKgPerMol|lengthM|diameterM|excitationRms|sampleRateHz|bandLowHz|NaN|Infinity/;

describe('option names in messages', () => {
  it('every model parameter of the table maps to an option', () => {
    for (const [name, option] of Object.entries(MODEL_PARAMETER_OPTIONS)) {
      expect(option).toMatch(/^--[a-z-]+( [a-z]+)?$/);
      expect(withOptionNames(`${name} must be positive, got 0`)).toBe(`${option} must be positive, got 0`);
    }
  });

  it.each([
    [['modes', '--length', '1', '--diameter', '0.05', '--molar-mass', '0'], EXIT.BAD_PARAMETER, /--molar-mass 0 g\/mol is outside its range \(2 to 400 g\/mol\)/],
    [['modes', '--length', '1', '--diameter', '0.05', '--gamma', '1'], EXIT.BAD_PARAMETER, /--gamma 1 is outside its range/],
    // γ ≤ 5/3, the monatomic value (kinetic theory, common practice): 1.6667 lies just above it.
    [['modes', '--length', '1', '--diameter', '0.05', '--gamma', '1.6667'], EXIT.BAD_PARAMETER, /--gamma 1\.6667 is outside its range \(above 1 and at most 1\.66667\)/],
    [['modes', '--length', '1', '--diameter', '0.05', '--temp', '-300'], EXIT.BAD_PARAMETER, /--temp .*absolute zero/],
    [['modes', '--length', '1', '--diameter', '0.05', '--count', '1e308'], EXIT.BAD_PARAMETER, /--count must be a whole number|--count 1e308 is outside/],
    [['simulate', '--out', 'x.wav', '--excitation', '1e308'], EXIT.BAD_PARAMETER, /--excitation 1e308 is outside its range \(0 to 0\.1\)/],
    [['simulate', '--out', 'x.wav', '--lag-ms', '1e308'], EXIT.BAD_PARAMETER, /--lag-ms 1e308 ms is outside its range/],
    [['simulate', '--out', 'x.wav', '--steps', '0:1e308'], EXIT.BAD_PARAMETER, /--steps power 1e308 is outside its range \(0 to 100\)/],
    [['simulate', '--out', 'x.wav', '--duration', '1e309'], EXIT.BAD_PARAMETER, /--duration 1e309 is too large/],
    [['simulate', '--out', 'x.wav', '--lag-ms', '0.000001', '--duration', '0.1'], EXIT.BAD_PARAMETER, /--lag-ms/],
    [['analyze', 'x.wav', '--rate', '1e308'], EXIT.BAD_PARAMETER, /--rate 1e308 Hz is outside its range/],
    // The model's own ranges (dsp/duct.ts, dsp/rig-sim.ts) reach the user under the option's name.
    [['simulate', '--out', 'x.wav', '--length', '1e308'], EXIT.BAD_PARAMETER, /^humgauge simulate: --length must lie from/],
    [['modes', '--length', '1.2', '--diameter', '0.048', '--measured', '1e308'], EXIT.BAD_PARAMETER, /--measured must lie from/],
    [['modes', '--length', '1.2', '--diameter', '0.048', '--heater', '0.3', '--hot-temp', '1e308'], EXIT.BAD_PARAMETER, /--hot-temp must lie from/],
  ])('%j → exit %i, the option named', async (args, code, msg) => {
    const r = await run(args as string[]);
    expect(r.code).toBe(code);
    expect(r.err).toMatch(msg as RegExp);
    expect(r.err).not.toMatch(INTERNAL);
    expect(r.err.trim().split('\n')).toHaveLength(1);
  });
});

describe('files named right', () => {
  it('simulate --truth to an unwritable file blames that file and --truth, not the WAV', async () => {
    const out = join(dir, 'rig.wav');
    const truth = join(dir, 'no-such-folder', 'rig.truth.json');
    const r = await run(['simulate', '--out', out, '--truth', truth, '--duration', '0.5', '--silence', '0']);
    expect(r.code).toBe(EXIT.WRITE_FAILED);
    expect(r.err).toMatch(new RegExp(`cannot write ${truth.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} \\(--truth\\)`));
    expect(existsSync(out)).toBe(true);
  });

  it('modes --profile streams a 2 MB one-line file: refused after a bounded read, 80 characters quoted', async () => {
    const file = join(dir, 'one-line.csv');
    writeFileSync(file, '0,20;'.repeat(400_000));
    const r = await run(['modes', '--length', '1.2', '--diameter', '0.048', '--profile', file]);
    expect(r.code).toBe(EXIT.BAD_CSV);
    expect(r.err).toMatch(new RegExp(`longer than ${PROFILE_MAX_LINE_BYTES} characters`));
    const quoted = /"([^"]*)"/.exec(r.err)?.[1] ?? '';
    expect(quoted.length).toBeLessThanOrEqual(81);
    expect(r.err.length).toBeLessThan(250);
  });

  it('a bad profile line is quoted in at most 80 characters', async () => {
    const file = join(dir, 'bad.csv');
    writeFileSync(file, `x_m,temp_c\n0,20\n0.5,${'z'.repeat(500)}\n`);
    const r = await run(['modes', '--length', '1.2', '--diameter', '0.048', '--profile', file]);
    expect(r.code).toBe(EXIT.BAD_CSV);
    expect(r.err).toMatch(/profile line 3: "0\.5,z+…" is not two numbers/);
    expect(r.err.length).toBeLessThan(200);
  });

  it('a missing profile names --profile and the file', async () => {
    const r = await run(['modes', '--length', '1.2', '--diameter', '0.048', '--profile', join(dir, 'nope.csv')]);
    expect(r.code).toBe(EXIT.UNREADABLE);
    expect(r.err).toMatch(/--profile .*nope\.csv: no such file/);
  });
});
