import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, screenshot, type Launched } from './browser';
import { firstNumber, HUM_CYCLE, writeAlawWav, writeFixture, writeHumCycleWav } from './fixtures';

// Opening a recording instead of the microphone: a WAV of known truth analysed in the worker
// (progress shown, same readouts), and files that cannot be used named with their problem.
// Tolerances as in live.e2e.ts (issue "Field app": 0.5 % on frequency, 10 % on rates); here the
// samples reach the analysis unresampled, at 48 kHz.
describe('opening a recording', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('analyses a WAV with progress and shows the truth', async () => {
    const { page } = b;
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
    if (await page.locator('#first-run-ok').count()) await page.click('#first-run-ok');
    await page.setInputFiles('#file-input', writeHumCycleWav('bench-rig-cycle.wav'));
    await expect.poll(() => page.locator('#run-result').isVisible(), { timeout: 60_000 }).toBe(true);
    const freq = firstNumber(await page.locator('#readout-frequency .tile-value').textContent());
    const growth = firstNumber(await page.locator('#readout-growth .tile-value').textContent());
    const decay = firstNumber(await page.locator('#readout-decay .tile-value').textContent());
    expect(Math.abs(freq - HUM_CYCLE.frequencyHz) / HUM_CYCLE.frequencyHz).toBeLessThan(0.005);
    expect(Math.abs(growth - HUM_CYCLE.growthPerS) / HUM_CYCLE.growthPerS).toBeLessThan(0.1);
    expect(Math.abs(decay - HUM_CYCLE.decayPerS) / HUM_CYCLE.decayPerS).toBeLessThan(0.1);
    const notes = (await page.locator('#listen-notes').textContent()) ?? '';
    expect(notes).toMatch(/bench-rig-cycle\.wav: WAV PCM 16-bit/);
    expect(notes).toMatch(/48000 Hz/);
    expect((await page.locator('#run-result').textContent()) ?? '').toMatch(/at 48000 Hz/);
    // The analysed recording is kept as a session (the store may open after a short file is done).
    await expect.poll(() => page.locator('#run-result a.big-link').count(), { timeout: 15_000 }).toBe(1);
    await screenshot(page, 'file-result');
  });

  it('names the problem of a file the browser cannot decode', async () => {
    const { page } = b;
    const junk = new Uint8Array(4000);
    for (let i = 0; i < junk.length; i++) junk[i] = (i * 7919) % 251;
    await page.setInputFiles('#file-input', writeFixture('boiler-room-notes.mp3', junk));
    const alert = page.locator('#listen-alert');
    await expect.poll(() => alert.isVisible(), { timeout: 20_000 }).toBe(true);
    const text = (await alert.textContent()) ?? '';
    expect(text).toContain('boiler-room-notes.mp3');
    expect(text).toMatch(/could not be decoded/);
    expect(text).toMatch(/WAV/);
    await screenshot(page, 'file-undecodable');
  });

  it('names the problem of a broken WAV (header without samples)', async () => {
    const { page } = b;
    const header = writeHumCycleWav('whole.wav');
    const { readFileSync } = await import('node:fs');
    const truncated = readFileSync(header).subarray(0, 30);
    await page.setInputFiles('#file-input', writeFixture('truncated.wav', truncated));
    const alert = page.locator('#listen-alert');
    await expect.poll(async () => (await alert.textContent()) ?? '', { timeout: 20_000 }).toContain('truncated.wav');
    expect((await alert.textContent()) ?? '').toMatch(/WAV file the analysis cannot use/);
  });

  it('refuses an empty file by name', async () => {
    const { page } = b;
    await page.setInputFiles('#file-input', writeFixture('empty.wav', new Uint8Array(0)));
    await expect.poll(async () => (await page.locator('#listen-alert').textContent()) ?? '', { timeout: 20_000 }).toMatch(/“empty\.wav” is empty/);
  });
});

describe('opening a clipped recording of a low tone', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('warns about clipping and about phone microphones below 100 Hz', async () => {
    const { page } = b;
    const { synthesize } = await import('../../dsp/synth');
    const { encodeWav } = await import('../../dsp/io/wav-write');
    // 80 Hz at peak 1.4: the 16-bit encoder clips every crest at full scale (dsp/io/wav-write.ts).
    const fs = 48_000;
    const tone = synthesize({ sampleRateHz: fs, durationS: 4, tones: [{ frequencyHz: 80, envelope: (t) => (t > 1 && t < 3 ? 1.4 : 0.05) }], noiseRms: 0.001, seed: 5 });
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
    await page.setInputFiles('#file-input', writeFixture('flue-80hz-clipped.wav', encodeWav(tone, fs, 'pcm16')));
    await expect.poll(() => page.locator('#run-result').isVisible(), { timeout: 60_000 }).toBe(true);
    expect((await page.locator('#run-result').textContent()) ?? '').toMatch(/The input clipped \(\d:\d\d\.\d–\d:\d\d\.\d/);
    const f = firstNumber(await page.locator('#readout-frequency .tile-value').textContent());
    // 80 Hz within 0.5 % (the frequency tolerance).
    expect(Math.abs(f - 80) / 80).toBeLessThan(0.005);
    expect((await page.locator('#readout-frequency .tile-detail').textContent()) ?? '').toMatch(/Below 100 Hz phone microphones roll off/);
    await screenshot(page, 'file-clipped-low-tone');
  });
});

describe('opening a WAV in an encoding the reader leaves to the browser', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('falls back to the browser decoder for A-law (G.711) and still finds the tone', async () => {
    const { page } = b;
    const { synthesize } = await import('../../dsp/synth');
    const fs = 8000;
    const tone = synthesize({ sampleRateHz: fs, durationS: 4, tones: [{ frequencyHz: 220, envelope: () => 0.3 }], noiseRms: 0.003, seed: 9 });
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
    await page.setInputFiles('#file-input', writeAlawWav('telephone-alaw.wav', tone, fs));
    await expect.poll(() => page.locator('#run-result').isVisible(), { timeout: 60_000 }).toBe(true);
    expect((await page.locator('#listen-notes').textContent()) ?? '').toMatch(/decoded by the browser/);
    const f = firstNumber(await page.locator('#readout-frequency .tile-value').textContent());
    // 220 Hz within 0.5 % (the frequency tolerance); A-law quantisation is noise, not a frequency error.
    expect(Math.abs(f - 220) / 220).toBeLessThan(0.005);
  });
});
