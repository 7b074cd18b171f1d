import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { APP_URL, launch, screenshot, type Launched } from './browser';
import { FIXTURE_DIR, firstNumber, writeFixture } from './fixtures';
import { synthesize } from '../../dsp/synth';
import { encodeWav } from '../../dsp/io/wav-write';

// The field app end to end: the verdict at a glance on recordings of known truth, a session with
// no duct given, re-analysis with a moved marker, Compare's before/after sentence, and a
// pressure-sensor CSV. The recordings come from the heated-tube model (`humgauge simulate`,
// dsp/rig-sim.ts), whose truth file states each mode's linear growth rate; the figures the app
// shows are compared with that truth and with the command line's analysis of the same file
// (the same pipeline, so they must agree).

const CLI = 'dist-cli/humgauge.js';

interface Truth {
  steps: { growthRatePerS: number; frequencyHz: number; decayRatePerS: number | null }[];
}

/** Runs `humgauge simulate` into e2e-out/fixtures and returns the WAV path and its truth. */
function simulate(name: string, args: string[]): { wav: string; truth: Truth } {
  writeFixture('.keep', new Uint8Array(0));
  const wav = join(FIXTURE_DIR, `${name}.wav`);
  execFileSync('node', [CLI, 'simulate', ...args, '--out', wav], { stdio: 'pipe' });
  return { wav, truth: JSON.parse(readFileSync(wav.replace(/\.wav$/, '.truth.json'), 'utf8')) as Truth };
}

/** The command line's report of a file. */
function cliReport(path: string, extra: string[] = []): { summary: { growthRatePerS: number | null; decayRatePerS: number | null } } {
  return JSON.parse(execFileSync('node', [CLI, 'analyze', path, '--json', ...extra], { encoding: 'utf8' })) as { summary: { growthRatePerS: number | null; decayRatePerS: number | null } };
}

/** Numbers in a text, typographic minus understood. */
function numbers(text: string): number[] {
  return (text.replace(/\u2212/g, '-').match(/-?\d+(\.\d+)?/g) ?? []).map(Number);
}

async function openFile(page: Launched['page'], path: string): Promise<void> {
  await page.goto(`${APP_URL}#listen`);
  await page.waitForSelector('#listen-button');
  await page.setInputFiles('#file-input', path);
  await expect.poll(() => page.locator('#run-result').isVisible(), { timeout: 60_000 }).toBe(true);
  await expect.poll(() => page.locator('#run-result a.big-link').count(), { timeout: 15_000 }).toBe(1);
}

describe('the field app', () => {
  let b: Launched;
  const stable = simulate('tube-stable', ['--steps', '0:0.3', '--duration', '20']);
  const near = simulate('tube-near-threshold', ['--steps', '0:0.58', '--duration', '20']);
  const hum = simulate('tube-hum', ['--steps', '0:0,2:0.9,10:0', '--duration', '14']);
  const hum2 = simulate('tube-hum-after-fix', ['--steps', '0:0,2:0.75,10:0', '--duration', '14']);

  beforeAll(async () => {
    b = await launch();
    await b.page.goto(APP_URL);
    await b.page.waitForSelector('#listen-button');
    if (await b.page.locator('#first-run-ok').count()) await b.page.click('#first-run-ok');
  });
  afterAll(async () => {
    await b?.close();
  });

  it('says stable, with the decay rate and damping ratio of the quiet tube, and keeps no duct it was not given', async () => {
    const { page } = b;
    await openFile(page, stable.wav);
    const verdict = page.locator('#readout-verdict');
    expect(await verdict.getAttribute('data-verdict')).toBe('stable');
    const detail = (await verdict.locator('.tile-detail').textContent()) ?? '';
    expect(detail).toMatch(/^decay rate [\d.]+ 1\/s \(95 % CI [\d.]+–[\d.]+\) · damping ratio [\d.]+ \(95 % CI [\d.]+–[\d.]+\)/);
    // The model's decay rate of the quiet tube (truth: −growth rate of mode 1) lies in the interval shown.
    const [, lo, hi] = numbers(detail);
    expect(-stable.truth.steps[0].growthRatePerS).toBeGreaterThan(lo);
    expect(-stable.truth.steps[0].growthRatePerS).toBeLessThan(hi);
    await screenshot(page, 'verdict-stable');

    // The session: titled by its file, and the duct is "not given" (no default stored).
    await page.click('#run-result a.big-link');
    await page.waitForSelector('#session-geometry');
    expect(await page.locator('#session-title').textContent()).toBe('tube-stable');
    expect(await page.locator('#session-geometry').textContent()).toBe('Duct geometry: not given');
    expect(await page.inputValue('#edit-length')).toBe('');
  });

  it('says near threshold when the quiet tube is barely damped', async () => {
    const { page } = b;
    await openFile(page, near.wav);
    const verdict = page.locator('#readout-verdict');
    expect(await verdict.getAttribute('data-verdict')).toBe('near-threshold');
    expect(await verdict.locator('.tile-value').textContent()).toBe('Near threshold');
    // ζ shown under the 0.005 of REFERENCES.md §92 (model: 1.54 1/s at 177 Hz, ζ 0.0014).
    const detail = (await verdict.locator('.tile-detail').textContent()) ?? '';
    const zeta = numbers(detail.slice(detail.indexOf('damping ratio')))[0];
    expect(zeta).toBeLessThan(0.005);
    await screenshot(page, 'verdict-near-threshold');
  });

  it('says humming while the tone grows and holds, then both halves of the story', async () => {
    const { page } = b;
    await page.goto(`${APP_URL}#listen`);
    const seen = new Set<string>();
    const watch = setInterval(() => {
      void page.locator('#readout-verdict').getAttribute('data-verdict').then((v) => v && seen.add(v), () => undefined);
    }, 30);
    await openFile(page, hum.wav);
    clearInterval(watch);
    expect(seen.has('humming')).toBe(true);
    const verdict = page.locator('#readout-verdict');
    expect(await verdict.locator('.tile-value').textContent()).toBe('Hummed, then stopped');
    // Growth rate within 10 % of the model's linear growth rate (issue "Field app" tolerance).
    const growth = firstNumber(await page.locator('#readout-growth .tile-value').textContent());
    expect(Math.abs(growth - hum.truth.steps[1].growthRatePerS) / hum.truth.steps[1].growthRatePerS).toBeLessThan(0.1);
    // After the hum the frequency stays beside its rates.
    expect(firstNumber(await page.locator('#readout-frequency .tile-value').textContent())).toBeGreaterThan(170);
    // The onset of the file, timed by the report's fitted growth with its interval, while the heater was on (simulation steps: on at 2 s, off at 10 s).
    const onsetText = (await page.locator('#readout-onset .tile-value').textContent()) ?? '';
    expect(onsetText).toMatch(/^at [\d.]+ s \(95 % CI [\d.]+–[\d.]+\)$/);
    expect(firstNumber(onsetText)).toBeGreaterThan(2);
    expect(firstNumber(onsetText)).toBeLessThan(10);
    await screenshot(page, 'verdict-humming');
    // Its cycle (report version 2): onset, growth and decay rates with their intervals, under its tone.
    const cycles = page.locator('#run-result #cycles');
    expect(await cycles.getAttribute('data-report-version')).toBe('2');
    const cells = await cycles.locator('#cycles-table tbody tr').first().locator('td').allTextContents();
    expect(cells[2]).toMatch(/^[\d.]+ s \(95 % CI [\d.]+–[\d.]+\)$/);
    expect(cells[3]).toMatch(/^[\d.]+ 1\/s \(95 % CI [\d.]+–[\d.]+\)$/);
    expect(cells[5]).toMatch(/^[\d.]+ 1\/s \(95 % CI [\d.]+–[\d.]+\)$/);
  });

  it('re-analyses a stored session with a moved "driving off" marker', async () => {
    const { page } = b;
    // The session of the humming tube (the newest one).
    await page.goto(`${APP_URL}#sessions`);
    await page.click('.session-item:has-text("tube-hum") .session-link');
    await page.waitForSelector('#reanalyse-run');
    // A marker tapped late, then moved to where the heater went off (truth: 10.0 s).
    await page.click('#reanalyse-add-marker');
    await page.fill('#reanalyse-marker-time-0', '11.5');
    await page.click('#reanalyse-run');
    await expect.poll(() => page.locator('#reanalyse-compare').count(), { timeout: 60_000 }).toBe(1);
    await page.fill('#reanalyse-marker-time-0', '10.0');
    await page.click('#reanalyse-run');
    await expect.poll(async () => (await page.locator('#reanalyse-message').textContent()) ?? '', { timeout: 60_000 }).toBe('');
    await expect.poll(() => page.locator('#reanalyse-compare').count(), { timeout: 60_000 }).toBe(1);
    const decayRow = (await page.locator('#reanalyse-compare tbody tr:has-text("Decay rate") td').nth(1).textContent()) ?? '';
    const decay = firstNumber(decayRow);
    // Within 5 % of the command line's decay for the same audio (issue "Field app": early/late marker check).
    const cli = cliReport(hum.wav).summary.decayRatePerS ?? Number.NaN;
    expect(Math.abs(decay - cli) / cli).toBeLessThan(0.05);
    await page.click('#reanalyse-keep');
    // The session shows the kept result, its marker, and the re-analysis in its history.
    await expect.poll(async () => (await page.locator('.screen-sessions').textContent()) ?? '', { timeout: 10_000 }).toMatch(/Re-analysed on .* 1 marker \(driving off at 0:10\.0\)/);
    await screenshot(page, 'session-reanalysed');
  });

  it('states the change in growth rate between before and after in Compare, with its interval', async () => {
    const { page } = b;
    await openFile(page, hum2.wav);
    await page.goto(`${APP_URL}#sessions`);
    await page.check('.session-item:has-text("tube-hum-after-fix") input[type=checkbox]');
    await page.check('.session-item:has-text("tube-hum") >> nth=-1 >> input[type=checkbox]');
    await page.click('#compare-selected');
    const sentence = page.locator('#compare-sentence');
    await expect.poll(() => sentence.count(), { timeout: 15_000 }).toBe(1);
    const text = (await sentence.textContent()) ?? '';
    expect(text).toMatch(/The change lowered the growth rate by [\d.]+ ± [\d.]+ 1\/s \(95 %\)/);
    // The change agrees with the command line's two analyses within the interval shown.
    const m = text.match(/lowered the growth rate by ([\d.]+) ± ([\d.]+)/);
    const cliDelta = (cliReport(hum.wav).summary.growthRatePerS ?? 0) - (cliReport(hum2.wav).summary.growthRatePerS ?? 0);
    expect(Math.abs(Number(m?.[1]) - cliDelta)).toBeLessThan(Math.max(0.05, Number(m?.[2])));
    await screenshot(page, 'compare-before-after');
  });

  it('reads a one-column 2 kHz pressure CSV at the rate typed, in Pa and dB SPL, without the microphone note', async () => {
    const { page } = b;
    // 120 Hz pressure tone, 20 Pa peak, in 0.2 Pa rms noise: growth 6 1/s from 0.2 Pa at 1 s, steady from about 1.8 s.
    const fs = 2000;
    const x = synthesize({ sampleRateHz: fs, durationS: 8, tones: [{ frequencyHz: 120, envelope: (t) => (t < 1 ? 0.2 : Math.min(20, 0.2 * Math.exp(6 * (t - 1)))) }], noiseRms: 0.2, seed: 7 });
    const csv = Array.from(x, (v) => v.toFixed(5)).join('\n');
    const path = writeFixture('sensor-2khz.csv', new TextEncoder().encode(csv));
    await page.goto(`${APP_URL}#listen`);
    await page.locator('#csv-options').evaluate((d) => ((d as HTMLDetailsElement).open = true));
    await page.fill('#csv-rate', '2000');
    await page.selectOption('#csv-unit', 'Pa');
    await page.setInputFiles('#file-input', path);
    await expect.poll(async () => `${await page.locator('#run-result h2').textContent()}${await page.locator('#listen-alert').textContent()}`, { timeout: 60_000 }).toMatch(/sensor-2khz\.csv/);
    expect(await page.locator('#listen-alert').textContent()).toBe('');
    expect((await page.locator('#listen-notes').textContent()) ?? '').toMatch(/2000 Hz/);
    const freq = firstNumber(await page.locator('#readout-frequency .tile-value').textContent());
    expect(Math.abs(freq - 120) / 120).toBeLessThan(0.005);
    expect((await page.locator('#readout-frequency').textContent()) ?? '').not.toMatch(/roll off/);
    // 20 Pa peak = 14.14 Pa rms = 117.0 dB SPL re 20 µPa (REFERENCES.md §11); the tone reads within 1 dB.
    const level = (await page.locator('#readout-level .tile-detail').textContent()) ?? '';
    expect(level).toMatch(/tone [\d.]+ Pa rms, [\d.]+ dB SPL/);
    const toneDb = numbers(level.slice(level.indexOf('Pa rms,')))[0];
    expect(Math.abs(toneDb - 117.0)).toBeLessThan(1);
    await screenshot(page, 'sensor-csv');
  });

  it('refuses a sample rate outside 500–192000 Hz by the field’s name', async () => {
    const { page } = b;
    await page.goto(`${APP_URL}#listen`);
    await page.locator('#csv-options').evaluate((d) => ((d as HTMLDetailsElement).open = true));
    await page.fill('#csv-rate', '100');
    await page.setInputFiles('#file-input', join(FIXTURE_DIR, 'sensor-2khz.csv'));
    await expect.poll(async () => (await page.locator('#csv-rate-error').textContent()) ?? '').toMatch(/“Sample rate of a one-column CSV” must be a number of Hz from 500 to 192000/);
    await page.fill('#csv-rate', '');
  });

  it('on a 390 px phone the margin to humming takes a row of its own, and the sensor-CSV options read as options', async () => {
    const { page } = b;
    await page.setViewportSize({ width: 390, height: 844 });
    try {
      await openFile(page, stable.wav);
      const margin = page.locator('#readouts .live-margin');
      await expect.poll(() => margin.isVisible(), { timeout: 15_000 }).toBe(true);
      const [box, grid, q] = await Promise.all([margin.boundingBox(), page.locator('#readouts').boundingBox(), page.locator('#readout-q').boundingBox()]);
      // Not squeezed into the column beside the Q tile: as wide as the grid, below the Q tile.
      expect(box?.width ?? 0).toBeGreaterThan(0.95 * (grid?.width ?? 1));
      expect(box?.y ?? 0).toBeGreaterThanOrEqual((q?.y ?? 0) + (q?.height ?? 0));
      // After a WAV the sensor-CSV choice is an option for the next file, not a heading over this result.
      expect(await page.locator('#csv-options summary').textContent()).toBe('Opening a one-column sensor CSV? Its sample rate and unit');
      await screenshot(page, 'phone-verdict-stable');
      expect(await page.evaluate(() => document.documentElement.scrollWidth)).toBeLessThanOrEqual(390);
    } finally {
      await page.setViewportSize({ width: 412, height: 915 });
    }
  });

  it('shows a knock on a stable duct as two ring-downs (knock) with their decay rates and no onset', async () => {
    // Two modes knocked at 3 s: 140 Hz ringing down at 6 1/s, 291 Hz at 15 1/s (the case of tests/dsp/tone-model.test.ts).
    const fs = 16000;
    const knock = (a: number, rate: number) => (t: number) => (t >= 3 ? a * Math.exp(-rate * (t - 3)) : 0);
    const x = synthesize({ sampleRateHz: fs, durationS: 7, tones: [{ frequencyHz: 140, envelope: knock(0.3, 6) }, { frequencyHz: 291, envelope: knock(0.1, 15) }], noiseRms: 0.001, seed: 5 });
    const { page } = b;
    await openFile(page, writeFixture('knock-two-modes.wav', encodeWav(x, fs, 'pcm16')));
    const rows = page.locator('#run-result #cycles tbody tr[data-kind="ring-down"]');
    expect(await rows.count()).toBe(2);
    for (const [k, truth] of [[0, 6], [1, 15]] as const) {
      const cells = await page.locator('#run-result #cycles section.tone-cycles').nth(k).locator('tbody tr td').allTextContents();
      expect(cells[2]).toBe('none (ring-down after a knock)');
      expect(cells[5]).toMatch(/^ring-down \(knock\) [\d.]+ 1\/s \(95 % CI [\d.]+–[\d.]+\)$/);
      // Within the larger of the interval and 5 % of the truth (the tolerance of the analysis tests).
      const [rate, lo, hi] = numbers(cells[5] ?? '');
      expect(Math.abs((rate ?? 0) - truth)).toBeLessThanOrEqual(Math.max(((hi ?? 0) - (lo ?? 0)) / 2, 0.05 * truth));
    }
    expect(await page.locator('#run-result').textContent()).toMatch(/· 0 onsets ·/);
    // The verdict takes the damping from the ring-down of the least-damped mode (140 Hz, ζ = 6/(2π·140) = 0.0068).
    expect(await page.locator('#readout-verdict').getAttribute('data-verdict')).toBe('stable');
    expect((await page.locator('#readout-verdict .tile-detail').textContent()) ?? '').toMatch(/^decay rate [\d.]+ 1\/s .* damping ratio 0\.00[67]\d* /);
    await screenshot(page, 'knock-ring-downs');
  });
});
