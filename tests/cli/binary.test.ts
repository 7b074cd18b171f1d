// The bundled command line (vite.cli.config.ts) run as a separate Node process, the way a user runs
// it: the banner makes it executable, exit codes reach the shell, errors are one line without a
// stack trace. Built into a temporary folder so the shared dist-cli/ is left alone (~2 s).
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { EXIT } from '../../dsp/cli/io';
import { encodeWav } from '../../dsp/io/wav-write';
import { humCycleEnvelope, synthesize } from '../../dsp/synth';
import type { Report } from '../../dsp/types';

const ROOT = resolve(__dirname, '../..');
let dir = '';
let bin = '';

function run(args: string[]): { code: number | null; out: string; err: string } {
  const r = spawnSync(process.execPath, [bin, ...args], { encoding: 'utf8', timeout: 60_000 });
  return { code: r.status, out: r.stdout, err: r.stderr };
}

beforeAll(() => {
  dir = mkdtempSync(join(tmpdir(), 'humgauge-bin-'));
  const outDir = join(dir, 'dist-cli');
  const vite = join(ROOT, 'node_modules', 'vite', 'bin', 'vite.js');
  const b = spawnSync(process.execPath, [vite, 'build', '--config', 'vite.cli.config.ts', '--logLevel', 'warn', '--outDir', outDir], { cwd: ROOT, encoding: 'utf8' });
  expect(b.status, b.stderr).toBe(0);
  bin = join(outDir, 'humgauge.js');
  const x = synthesize({
    sampleRateHz: 8000,
    durationS: 5,
    tones: [{ frequencyHz: 220, envelope: humCycleEnvelope({ onsetS: 1, startAmplitude: 1e-6, growthPerS: 10, limitAmplitude: 0.3, offS: 3.5, decayPerS: 6 }) }],
    noiseRms: 10 ** (-60 / 20),
    seed: 4,
  });
  writeFileSync(join(dir, 'rig.wav'), encodeWav(x, 8000, 'pcm16'));
  writeFileSync(join(dir, 'truncated.wav'), Uint8Array.from([...'RIFF'].map((c) => c.charCodeAt(0)).concat([0, 0, 0, 0])));
}, 60_000);

afterAll(() => {
  rmSync(dir, { recursive: true, force: true });
});

describe('the built command line', () => {
  it('starts with a node shebang and prints help', () => {
    expect(readFileSync(bin, 'utf8').split('\n')[0]).toBe('#!/usr/bin/env node');
    const r = run(['--help']);
    expect(r.code).toBe(EXIT.OK);
    expect(r.out).toMatch(/^humgauge \d+\.\d+\.\d+/);
    expect(r.out).toContain('Exit codes');
  });

  it('analyses a WAV and prints the JSON report', () => {
    const r = run(['analyze', join(dir, 'rig.wav'), '--json']);
    expect(r.code).toBe(EXIT.OK);
    const rep = JSON.parse(r.out) as Report;
    expect(rep.sampleRateHz).toBe(8000);
    // 220 Hz at 60 dB band SNR: any interpolating tracker lands within 1 Hz.
    expect(Math.abs((rep.summary.frequencyHz ?? 0) - 220)).toBeLessThan(1);
  });

  it('a missing file exits 3 with one line and no stack trace', () => {
    const r = run(['analyze', join(dir, 'missing.wav')]);
    expect(r.code).toBe(EXIT.UNREADABLE);
    expect(r.out).toBe('');
    expect(r.err.trimEnd().split('\n')).toHaveLength(1);
    expect(r.err).toMatch(/^humgauge: .*missing\.wav: no such file$/m);
  });

  it('a truncated WAV exits 4', () => {
    const r = run(['analyze', join(dir, 'truncated.wav')]);
    expect(r.code).toBe(EXIT.EMPTY_OR_TRUNCATED);
    expect(r.err).not.toMatch(/\n\s+at /);
  });

  it('an unknown option exits 2', () => {
    expect(run(['analyze', join(dir, 'rig.wav'), '--verbose']).code).toBe(EXIT.USAGE);
  });

  it('a closed pipe does not turn into an error', () => {
    const r = spawnSync('sh', ['-c', `"${process.execPath}" "${bin}" analyze "${join(dir, 'rig.wav')}" --csv | head -1`], { encoding: 'utf8' });
    expect(r.stdout).toBe('time_s,frequency_hz,amplitude_dbfs,state\n');
    expect(r.stderr).toBe('');
  });
});
