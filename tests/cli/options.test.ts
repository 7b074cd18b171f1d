// The option rules shared by every command (dsp/cli/options.ts): the same spelling, numbers and
// exit codes in analyze, modes and simulate. Exit codes are the ones `humgauge --help` documents
// (2 = malformed value or unknown option, 11 = a value outside its range).
import { describe, expect, it } from 'vitest';
import { EXIT } from '../../dsp/cli/io';
import { optionsHelp, parseCommandArgs, parseNumberValue, type OptionTable } from '../../dsp/cli/options';
import { runCli } from './run-cli';

const run = runCli;

const TABLE: OptionTable = {
  temp: { kind: 'number', value: 'C', unit: '°C', min: -273.15, isMinExclusive: true, help: 'temperature' },
  json: { kind: 'flag', help: 'JSON' },
  ends: { kind: 'choice', choices: ['open-open', 'closed-open'], aliases: { 'open-closed': 'closed-open' }, help: 'ends' },
};

describe('parseCommandArgs', () => {
  it('takes --x v, --x=v and a negative number as a value; -- ends the options', () => {
    expect(parseCommandArgs('t', TABLE, ['--temp', '-40']).values.get('temp')).toBe('-40');
    expect(parseCommandArgs('t', TABLE, ['--temp=-40']).values.get('temp')).toBe('-40');
    const p = parseCommandArgs('t', TABLE, ['--json', '--', '--temp', '-']);
    expect(p.positionals).toEqual(['--temp', '-']);
    expect(p.values.has('temp')).toBe(false);
  });

  it.each([
    [['--bogus'], /unknown option --bogus/],
    [['--temp'], /--temp needs a value/],
    [['--json=yes'], /--json takes no value/],
    [['--temp', '1', '--temp', '2'], /--temp given twice/],
  ])('%j is a usage error with one line', (args, msg) => {
    try {
      parseCommandArgs('t', TABLE, args);
      expect.unreachable();
    } catch (e) {
      expect((e as { exitCode: number }).exitCode).toBe(EXIT.USAGE);
      expect((e as Error).message).toMatch(msg);
      expect((e as Error).message).not.toMatch(/\n/);
    }
  });
});

describe('numbers', () => {
  const spec = { unit: 'Hz', min: 500, max: 1e6 };
  it('decimal numbers only: hex, "1,2", words and empty text are malformed (exit 2)', () => {
    for (const raw of ['0x2710', '1,2', 'Infinity', 'NaN', '', '1e', '--5', '5 Hz']) {
      expect(() => parseNumberValue('--rate', raw, spec)).toThrow(expect.objectContaining({ exitCode: EXIT.USAGE }));
    }
    expect(parseNumberValue('--rate', '2.5e3', spec)).toBe(2500);
  });
  it('overflow and values outside the range are parameter errors (exit 11), named and without Infinity', () => {
    for (const raw of ['1e309', '1e308', '100']) {
      try {
        parseNumberValue('--rate', raw, spec);
        expect.unreachable();
      } catch (e) {
        expect((e as { exitCode: number }).exitCode).toBe(EXIT.BAD_PARAMETER);
        expect((e as Error).message).toMatch(/^--rate /);
        expect((e as Error).message).not.toMatch(/Infinity|NaN/);
      }
    }
  });
});

describe('the same rules in every command', () => {
  it('a malformed number exits 2 as the help says, in modes and simulate', async () => {
    const help = (await run(['--help'])).out;
    expect(help).toMatch(/2 {2}usage error .*malformed option value/);
    for (const args of [
      ['modes', '--length', '1,2', '--diameter', '0.05'],
      ['modes', '--length', '0x10', '--diameter', '0.05'],
      ['simulate', '--out', 'x.wav', '--rate', '0x2710'],
      ['simulate', '--out', 'x.wav', '--duration', '1,5'],
    ]) {
      const r = await run(args);
      expect(r.code, args.join(' ')).toBe(EXIT.USAGE);
      expect(r.err.trim().split('\n')).toHaveLength(1);
    }
  });

  it('--ends closed-open is the one spelling of a duct with one closed end; open-closed is accepted as the same', async () => {
    const a = await run(['modes', '--length', '1.2', '--diameter', '0.048', '--ends', 'closed-open', '--json']);
    const b = await run(['modes', '--length', '1.2', '--diameter', '0.048', '--ends', 'open-closed', '--json']);
    expect(a.code).toBe(EXIT.OK);
    expect(a.out).toBe(b.out);
    // Quarter-wave resonator, 20 °C: f1 = c / (4 L_eff) (REFERENCES.md §2), below the open-open 139.6 Hz.
    const f1 = (JSON.parse(a.out) as { modes: { frequencyHz: number }[] }).modes[0].frequencyHz;
    expect(f1).toBeGreaterThan(65);
    expect(f1).toBeLessThan(72);
    expect((await run(['modes', '--help'])).out).toMatch(/closed-open/);
    expect((await run(['simulate', '--help'])).out).toMatch(/closed-open/);
  });

  it('help lists every option of the table with its value name', () => {
    const text = optionsHelp(TABLE);
    expect(text).toMatch(/--temp C +temperature/);
    expect(text).toMatch(/--json +JSON/);
  });
});
