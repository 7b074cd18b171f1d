import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { runModes } from '../../dsp/cli/modes';
import { EXIT } from '../../dsp/cli/io';

// `humgauge modes` on absurd values (hostile-input probe): every run ends at once with one line naming
// the option, or with finite numbers only; and the mode candidates of a measured tone
// (REFERENCES.md §70, §71; values from tests/reference/duct_values.py).
async function run(args: string[]): Promise<{ code: number; stdout: string; stderr: string }> {
  const io = { stdout: '', stderr: '', isErrTty: false, out: (t: string) => void (io.stdout += t), err: (t: string) => void (io.stderr += t) };
  const code = await runModes(args, io);
  return { code, stdout: io.stdout, stderr: io.stderr };
}

const BASE = ['--length', '1.2', '--diameter', '0.048'];

describe('modes: bounded inputs, no hang, nothing non-finite', () => {
  it.each([
    [[...BASE, '--heater', '0.3', '--hot-temp', '1e308'], /--hot-temp must lie from -190 to 3000 °C/],
    [[...BASE, '--heater', '0.3', '--hot-temp', '200', '--temp', '1e308'], /--temp must lie from -190 to 3000 °C/],
    [[...BASE, '--temp', '-200'], /--temp must lie from -190/],
    [['--length', '1e308', '--diameter', '0.048'], /--length must lie from 0.001 to 500 m/],
    [['--length', '1.2', '--diameter', '1e-300'], /--diameter must lie from 0.001 to 20 m/],
    // γ and molar mass are checked on the command line first (dsp/cli/options.ts) and again in the model (dsp/gas.ts).
    [[...BASE, '--gamma', '1e308'], /--gamma .*above 1 and at most/],
    [[...BASE, '--gamma', '1'], /--gamma .*above 1/],
    [[...BASE, '--molar-mass', '1e308'], /--molar-mass .*2 to 400 g\/mol/],
    [[...BASE, '--measured', '1e308'], /--measured must lie from 0.01 to 100000 Hz/],
    [[...BASE, '--measured', '171', '--measured-std', '1e308'], /--measured-std must lie from 0 to 171 Hz/],
    [[...BASE, '--measured', '171', '--length-std', '1e308'], /--length-std must lie from 0 to 1.2 m/],
  ])('%j → exit 11, one line naming the parameter', async (args, msg) => {
    const r = await run(args as string[]);
    expect(r.code).toBe(EXIT.BAD_PARAMETER);
    expect(r.stderr).toMatch(msg as RegExp);
    expect(r.stderr.trim().split('\n')).toHaveLength(1);
    expect(r.stdout).toBe('');
  });

  it('a profile with a 1e308 point is refused before any computation', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'humgauge-modes-'));
    const file = join(dir, 'profile.csv');
    writeFileSync(file, 'x_m,temp_c\n0,20\n0.6,1e308\n1.2,20\n');
    const r = await run([...BASE, '--profile', file]);
    expect(r.code).toBe(EXIT.BAD_PARAMETER);
    expect(r.stderr).toMatch(/profile point 2 temperature must lie from -190 to 3000 °C/);
  });

  it.each([
    [[...BASE, '--temp', '3000', '--count', '200']],
    [[...BASE, '--temp', '-190', '--heater', '0.01', '--hot-temp', '3000', '--count', '60']],
    [['--length', '500', '--diameter', '20', '--gamma', '1.6666', '--molar-mass', '2.016', '--count', '200']],
    [['--length', '0.001', '--diameter', '0.001', '--gamma', '1.0001', '--molar-mass', '400', '--count', '200']],
    [[...BASE, '--measured', '100000', '--measured-std', '100000', '--length-std', '1.2']],
    [[...BASE, '--measured', '0.01']],
  ])('extremes inside the ranges finish with finite numbers: %j', async (args) => {
    const r = await run([...(args as string[]), '--json']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.stdout).not.toMatch(/Infinity|NaN/);
    const text = await run(args as string[]);
    expect(text.stdout).not.toMatch(/Infinity|NaN|undefined/);
  });
});

describe('modes --measured: candidates over the plausible temperatures', () => {
  it('245 Hz in a 1 m tube at 20 °C: --json lists mode 1 at 375.3 °C (plausible, best) and mode 2 at −114.6 °C (implausible)', async () => {
    const r = await run(['--length', '1', '--diameter', '0.05', '--measured', '245', '--json']);
    expect(r.code).toBe(EXIT.OK);
    const j = JSON.parse(r.stdout) as {
      measured: { n: number; temperatureC: number; isAmbiguous: boolean; candidates: { n: number; temperatureC: number; temperatureCi95C: [number, number]; plausible: boolean }[] };
    };
    expect(j.measured.n).toBe(1);
    expect(j.measured.temperatureC).toBeCloseTo(375.3216, 2);
    expect(j.measured.isAmbiguous).toBe(false);
    expect(j.measured.candidates.map((c) => [c.n, c.plausible])).toEqual([
      [1, true],
      [2, false],
    ]);
    expect(j.measured.candidates[1].temperatureC).toBeCloseTo(-114.5981, 2);
    expect(j.measured.candidates[1].temperatureCi95C[0]).toBeGreaterThan(-273.15);
  });

  it('the readable output lists every candidate and flags ambiguity (400 Hz in the §2 tube)', async () => {
    const r = await run([...BASE, '--measured', '400']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.stdout).toMatch(/Measured 400(\.0+)? Hz: mode 3 \(ambiguous, see the candidates\)/);
    expect(r.stdout).toMatch(/^\s+2\s+339\.8\s+.*yes\s*$/m);
    expect(r.stdout).toMatch(/^\s+3\s+-5\.8\s+.*yes, best\s*$/m);
    expect(r.stdout).toMatch(/^\s+1\s+2301\.4\s+.*no\s*$/m);
    expect(r.stdout).toMatch(/warning: 2 modes fit at plausible gas temperatures/);
  });

  it('with a heater the figure is named an equivalent uniform temperature', async () => {
    const r = await run(['--length', '1', '--diameter', '0.04', '--open-end', 'none', '--heater', '0.25', '--hot-temp', '200', '--measured', '196.2504']);
    expect(r.stdout).toMatch(/Equivalent uniform gas temperature for an exact match: 111\.3 °C/);
    expect(r.stdout).toMatch(/warning: the duct has zones of different temperature/);
  });

  it('no plausible mode: says so, exit 0, no number invented', async () => {
    const r = await run(['--length', '1', '--diameter', '0.05', '--measured', '20', '--json']);
    expect(r.code).toBe(EXIT.OK);
    const j = JSON.parse(r.stdout) as { measured: { n: number | null; temperatureC: number | null } };
    expect(j.measured.n).toBeNull();
    expect(j.measured.temperatureC).toBeNull();
    const t = await run(['--length', '1', '--diameter', '0.05', '--measured', '20']);
    expect(t.stdout).toMatch(/no mode of this duct at a plausible gas temperature/);
  });
});
