// `humgauge analyze FILE… | FOLDER`: one summary row per file and tone, each report as JSON, an
// error row for a failing file while the batch goes on, exit 14 when any failed; the same rows
// from worker threads (the built command line) as from one thread. The median-rate interval is
// checked against the order-statistic rule of REFERENCES.md §61.
import { spawnSync } from 'node:child_process';
import { copyFileSync, mkdirSync, mkdtempSync, readFileSync, readdirSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { SUMMARY_COLUMNS, medianRate } from '../../dsp/cli/batch';
import { EXIT } from '../../dsp/cli/io';
import { encodeWav } from '../../dsp/io/wav-write';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { Report, Segment } from '../../dsp/types';
import { runCli } from './run-cli';

const ROOT = resolve(__dirname, '../..');

const run = runCli;

let dir = '';
const path = (n: string): string => join(dir, n);

function cycle(rateHz: number, toneHz: number, seed: number): Float32Array {
  return synthesize({
    sampleRateHz: rateHz,
    durationS: 7,
    tones: [{ frequencyHz: toneHz, envelope: humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-6, growthPerS: 9, limitAmplitude: 0.3, offS: 4.5, decayPerS: 6 }) }],
    noiseRms: 10 ** (-70 / 20),
    seed,
  });
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'humgauge-batch-'));
  mkdirSync(path('logs'));
  writeFileSync(path('logs/a-rig.wav'), encodeWav(cycle(16000, 171, 1), 16000, 'pcm16'));
  writeFileSync(path('logs/b-flue.wav'), encodeWav(cycle(8000, 93, 2), 8000, 'pcm16'));
  writeFileSync(path('logs/c-broken.wav'), new Uint8Array([82, 73, 70, 70, 0, 0]));
  writeFileSync(path('logs/notes.md'), 'not a recording');
});

afterAll(() => rmSync(dir, { recursive: true, force: true }));

describe('batch of a folder (one thread: the sources have no worker script)', () => {
  it('summary rows per file and tone, an error row, reports in --json-dir, exit 14', async () => {
    const r = await run(['analyze', path('logs'), '--summary', path('summary.csv'), '--json-dir', path('reports')]);
    expect(r.code).toBe(EXIT.BATCH_FAILED);
    expect(r.err).toMatch(/c-broken\.wav: truncated/);
    const rows = readFileSync(path('summary.csv'), 'utf8').trimEnd().split('\n');
    expect(rows[0]).toBe(SUMMARY_COLUMNS.join(','));
    const byFile = (name: string): string[][] => rows.slice(1).filter((l) => l.includes(name)).map((l) => l.split(','));
    expect(byFile('c-broken')[0][1]).toBe(`error ${EXIT.EMPTY_OR_TRUNCATED}`);
    expect(byFile('notes.md')).toHaveLength(0);
    for (const [name, hz] of [
      ['a-rig', 171],
      ['b-flue', 93],
    ] as const) {
      const main0 = byFile(name)[0];
      expect(main0[1]).toBe('ok');
      expect(Math.abs(Number(main0[2]) - hz)).toBeLessThan(1);
      expect(main0[4]).toBe('1'); // cycles (onsets until the report counts cycles)
      expect(Math.abs(Number(main0[7]) / 9 - 1)).toBeLessThan(0.15); // growth 9 1/s
      expect(Math.abs(Number(main0[11]) / 6 - 1)).toBeLessThan(0.15); // decay 6 1/s, positive
      expect(Number(main0[8])).toBeLessThan(Number(main0[7]));
      expect(Number(main0[9])).toBeGreaterThan(Number(main0[7]));
    }
    expect(readdirSync(path('reports')).sort()).toEqual(['a-rig.json', 'b-flue.json']);
    const single = await run(['analyze', path('logs/a-rig.wav'), '--json']);
    expect(JSON.parse(readFileSync(path('reports/a-rig.json'), 'utf8'))).toEqual(JSON.parse(single.out) as Report);
  });

  it('a progress line on a terminal only', async () => {
    const tty = await run(['analyze', path('logs/a-rig.wav'), path('logs/b-flue.wav')], true);
    expect(tty.code).toBe(EXIT.OK);
    expect(tty.err).toMatch(/\r2\/2 files/);
    const pipe = await run(['analyze', path('logs/a-rig.wav'), path('logs/b-flue.wav')]);
    expect(pipe.err).toBe('');
    expect(pipe.out.split('\n')[0]).toBe(SUMMARY_COLUMNS.join(','));
  });

  it('--json or --csv with several files is a usage error', async () => {
    const r = await run(['analyze', path('logs/a-rig.wav'), path('logs/b-flue.wav'), '--json']);
    expect(r.code).toBe(EXIT.USAGE);
    expect(r.err).toMatch(/--json-dir/);
  });
});

describe('median rate over cycles', () => {
  const seg = (rate: number, lo: number, hi: number): Segment => ({ kind: 'growth', startS: 0, endS: 1, frequencyHz: 100, ratePerS: rate, rateCi95PerS: [lo, hi] });
  it('one fit keeps its interval; 2-5 fits span their intervals; 6 or more use order statistics (Conover 1999 §3.2)', () => {
    expect(medianRate([seg(5, 4, 6)], 1)).toEqual({ count: 1, median: 5, ci: [4, 6] });
    expect(medianRate([seg(5, 4, 6), seg(7, 6.5, 7.5), seg(6, 5, 7)], 1)).toEqual({ count: 3, median: 6, ci: [4, 7.5] });
    // n = 6: j = 1, the interval is [min, max] (coverage 1 − 2/64 = 96.9 %); n = 10: j = 2.
    const six = [1, 2, 3, 4, 5, 6].map((r) => seg(r, r - 0.1, r + 0.1));
    expect(medianRate(six, 1)).toEqual({ count: 6, median: 3.5, ci: [1, 6] });
    const ten = [1, 2, 3, 4, 5, 6, 7, 8, 9, 10].map((r) => seg(r, r - 0.1, r + 0.1));
    expect(medianRate(ten, 1).ci).toEqual([2, 9]);
  });
  it('decays: the signed rates turn into positive decay rates with their interval flipped', () => {
    const d: Segment = { kind: 'decay', startS: 0, endS: 1, frequencyHz: 100, ratePerS: -5, rateCi95PerS: [-6, -4] };
    expect(medianRate([d], -1)).toEqual({ count: 1, median: 5, ci: [4, 6] });
  });
});

describe('worker threads and pipes (the built command line)', () => {
  it('gives the same summary on 2 workers as on one thread; pipes and <(...) read as streams', () => {
    const out = join(dir, 'dist-cli');
    const vite = join(ROOT, 'node_modules', 'vite', 'bin', 'vite.js');
    const b = spawnSync(process.execPath, [vite, 'build', '--config', 'vite.cli.config.ts', '--logLevel', 'warn', '--outDir', out], { cwd: ROOT, encoding: 'utf8' });
    expect(b.status, b.stderr).toBe(0);
    copyFileSync(path('logs/a-rig.wav'), path('logs/d-copy.wav'));
    const args = (jobs: string): string[] => [join(out, 'humgauge.js'), 'analyze', path('logs'), '--jobs', jobs];
    const one = spawnSync(process.execPath, args('1'), { encoding: 'utf8' });
    const two = spawnSync(process.execPath, args('2'), { encoding: 'utf8' });
    expect(two.status).toBe(EXIT.BATCH_FAILED);
    expect(two.stdout).toBe(one.stdout);
    expect(two.stdout.split('\n').filter((l) => l.includes(',ok,')).length).toBeGreaterThanOrEqual(3);
    // A pipe and <(...) (they used to fail with ESPIPE) give the file's report.
    const bin = join(out, 'humgauge.js');
    const file = path('logs/a-rig.wav');
    const direct = spawnSync(process.execPath, [bin, 'analyze', file, '--json'], { encoding: 'utf8' });
    const piped = spawnSync('bash', ['-c', `cat "${file}" | "${process.execPath}" "${bin}" analyze - --json`], { encoding: 'utf8' });
    const substituted = spawnSync('bash', ['-c', `"${process.execPath}" "${bin}" analyze <(cat "${file}") --json`], { encoding: 'utf8' });
    expect(piped.status, piped.stderr).toBe(EXIT.OK);
    expect(substituted.status, substituted.stderr).toBe(EXIT.OK);
    expect(JSON.parse(piped.stdout)).toEqual(JSON.parse(direct.stdout));
    expect(JSON.parse(substituted.stdout)).toEqual(JSON.parse(direct.stdout));
  }, 120_000);
});
