import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { failWith, parseProfileCsv, runModes } from '../../dsp/cli/modes';
import { EXIT, type CliIo } from '../../dsp/cli/io';

function capture(): CliIo & { stdout: string; stderr: string } {
  const io = { stdout: '', stderr: '', isErrTty: false, out: (t: string) => void (io.stdout += t), err: (t: string) => void (io.stderr += t) };
  return io;
}

async function run(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  const io = capture();
  const code = await runModes(args, io);
  return { code, stdout: io.stdout, stderr: io.stderr };
}

describe('humgauge modes', () => {
  it('prints the REFERENCES.md §2 example: 139.589 Hz fundamental, open–open unflanged, 20 °C (vector 8)', async () => {
    // The sheet's worked values take γ = 1.4 at every temperature (REFERENCES.md §1–§3); the default is air's γ(T) (§70).
    const r = await run(['--length', '1.2', '--diameter', '0.048', '--gamma', '1.4']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.stdout).toContain('139.589');
    expect(r.stdout).toContain('279.178');
    expect(r.stdout).toMatch(/343\.23 m\/s/);
    expect(r.stderr).toBe('');
  });

  it('--json: modes ascending with n and frequencyHz (vectors 10, 11: quarter-wave at 150 °C)', async () => {
    const r = await run(['--length=1.2', '--diameter=0.048', '--ends', 'open-closed', '--temp', '150', '--count', '3', '--gamma', '1.4', '--json']);
    expect(r.code).toBe(EXIT.OK);
    const j = JSON.parse(r.stdout) as { modes: { n: number; frequencyHz: number }[] };
    expect(j.modes.map((m) => m.n)).toEqual([1, 2, 3]);
    expect(Math.abs(j.modes[0].frequencyHz - 84.87)).toBeLessThan(0.001);
    expect(Math.abs(j.modes[2].frequencyHz - 424.3499)).toBeLessThan(0.001);
    for (let i = 1; i < j.modes.length; i++) expect(j.modes[i].frequencyHz).toBeGreaterThan(j.modes[i - 1].frequencyHz);
  });

  it('two-zone duct with a heater (vector 12) and its Rayleigh reading', async () => {
    const r = await run(['--length', '1', '--diameter', '0.04', '--heater', '0.25', '--hot-temp', '200', '--open-end', 'none', '--count', '2', '--gamma', '1.4', '--json']);
    expect(r.code).toBe(EXIT.OK);
    const j = JSON.parse(r.stdout) as { method: string; modes: { frequencyHz: number; rayleighReading: string }[] };
    expect(j.method).toBe('transfer-matrix');
    expect(Math.abs(j.modes[0].frequencyHz - 196.9157)).toBeLessThan(0.001);
    expect(Math.abs(j.modes[1].frequencyHz - 412.6275)).toBeLessThan(0.001);
    expect(j.modes[0].rayleighReading).toBe('drives'); // lower quarter, upward flow (REFERENCES.md §4)
    const none = await run(['--length', '1', '--diameter', '0.04', '--heater', '0.25', '--hot-temp', '200', '--flow', 'none']);
    expect(none.stdout).toMatch(/neutral/);
  });

  it('--measured: matching mode and mean gas temperature with its 95 % interval (inverse of vector 9)', async () => {
    const r = await run(['--length', '1.2', '--diameter', '0.048', '--measured', '167.7078', '--measured-std', '0', '--length-std', '0', '--gamma', '1.4', '--json']);
    const j = JSON.parse(r.stdout) as { measured: { n: number; temperatureC: number; temperatureCi95C: [number, number] } };
    expect(j.measured.n).toBe(1);
    expect(Math.abs(j.measured.temperatureC - 150)).toBeLessThan(0.01);
    const t = await run(['--length', '1.2', '--diameter', '0.048', '--measured', '171']);
    expect(t.stdout).toMatch(/Mean gas temperature for an exact match: [\d.]+ °C, u = [\d.]+ K \(95 % /);
  });

  it('reads a temperature profile CSV "x_m,temp_c"', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'humgauge-modes-'));
    const file = join(dir, 'profile.csv');
    writeFileSync(file, 'x_m,temp_c\n0,20\n1.2,20\n');
    const r = await run(['--length', '1.2', '--diameter', '0.048', '--profile', file, '--count', '1', '--gamma', '1.4', '--json']);
    expect(r.code).toBe(EXIT.OK);
    // A flat profile must reproduce the uniform duct (vector 8) through the transfer matrices.
    expect(Math.abs((JSON.parse(r.stdout) as { modes: { frequencyHz: number }[] }).modes[0].frequencyHz - 139.5889)).toBeLessThan(0.001);
    writeFileSync(file, 'x_m,temp_c\n0,20\n0.5,abc\n');
    const bad = await run(['--length', '1.2', '--diameter', '0.048', '--profile', file]);
    expect(bad.code).toBe(EXIT.BAD_CSV);
    expect(bad.stderr).toMatch(/line 3/);
    const missing = await run(['--length', '1.2', '--diameter', '0.048', '--profile', join(dir, 'nope.csv')]);
    expect(missing.code).toBe(EXIT.UNREADABLE);
  });

  it('parses profile rows with a header and comments', () => {
    expect(parseProfileCsv('# bench\nx_m,temp_c\n0,20\n0.5,180\n')).toEqual([
      { xM: 0, temperatureC: 20 },
      { xM: 0.5, temperatureC: 180 },
    ]);
  });

  it('warns above the cross-mode cut-on', async () => {
    const r = await run(['--length', '1', '--diameter', '0.6', '--count', '8']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.stdout).toMatch(/warning: .*cut-on/);
    expect(r.stdout).toMatch(/above cut-on/);
  });

  it.each([
    [['--diameter', '0.05'], EXIT.USAGE, /--length is required/],
    [['--length', '1'], EXIT.USAGE, /--diameter is required/],
    [['--length', '0', '--diameter', '0.05'], EXIT.BAD_PARAMETER, /--length must lie from 0.001 to 500 m/],
    [['--length', '-2', '--diameter', '0.05'], EXIT.BAD_PARAMETER, /--length must lie from/],
    [['--length', 'abc', '--diameter', '0.05'], EXIT.USAGE, /--length wants a decimal number/],
    [['--length', '1', '--diameter', 'NaN'], EXIT.USAGE, /--diameter wants a decimal number/],
    [['--length', '1', '--diameter', '0.05', '--temp', '-300'], EXIT.BAD_PARAMETER, /absolute zero/],
    [['--length', '1', '--diameter', '0.05', '--heater', '1.5', '--hot-temp', '200'], EXIT.BAD_PARAMETER, /--heater must lie inside/],
    [['--length', '1', '--diameter', '0.05', '--heater', '0.3'], EXIT.BAD_PARAMETER, /--hot-temp is required/],
    [['--length', '1', '--diameter', '0.05', '--ends', 'half-open'], EXIT.USAGE, /--ends must be one of/],
    [['--length', '1', '--diameter', '0.05', '--count', '2.5'], EXIT.BAD_PARAMETER, /--count/],
    [['--length', '1', '--diameter', '0.05', '--bogus', '1'], EXIT.USAGE, /unknown option --bogus/],
    [['--length', '1', '--diameter', '0.05', '--measured', '0'], EXIT.BAD_PARAMETER, /--measured must lie from 0.01 to 100000 Hz/],
    [['--length', '1', '--diameter', '0.05', '--temp'], EXIT.USAGE, /--temp needs a value/],
  ])('bad input %j → exit %i, one line', async (args, code, msg) => {
    const r = await run(args as string[]);
    expect(r.code).toBe(code);
    expect(r.stderr).toMatch(msg as RegExp);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stderr).toMatch(/^humgauge modes: /);
    expect(r.stdout).toBe('');
  });

  it('a root finder that fails is exit 12 (NO_CONVERGENCE) with one line; other model errors exit 11', () => {
    const io = capture();
    expect(failWith(new RangeError('root finder found only 2 of 5 modes below 900.0 Hz'), io, 'modes')).toBe(EXIT.NO_CONVERGENCE);
    expect(io.stderr).toBe('humgauge modes: root finder found only 2 of 5 modes below 900.0 Hz\n');
    expect(failWith(new RangeError('lengthM must be a positive finite number of m, got 0'), capture(), 'modes', { lengthM: '--length' })).toBe(EXIT.BAD_PARAMETER);
    expect(failWith(new TypeError('boom'), capture(), 'modes')).toBe(EXIT.INTERNAL);
  });

  it('--help prints usage', async () => {
    const r = await run(['--help']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.stdout).toMatch(/Usage: humgauge modes/);
  });
});
