import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { execFileSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import type { Page } from 'playwright-core';
import { buildBundle } from '../../web/storage/export';
import { readBundle } from '../../web/storage/import';
import { rampSession, sampleSession } from '../web/export-sample';
import { APP_URL, launch, SCREEN_DIR, screenshot, type Launched } from './browser';

// The Sessions screen in headless Chromium: import of a bundle into the list, search, the detail
// with its plots, editing and delete with undo, the comparison, the stability map, export as a
// download, a hostile import refused; recording through the Listen screen with the demo recording
// as the microphone, and a crash in the middle of a recording followed by recovery on restart.

const TMP = mkdtempSync(join(tmpdir(), 'humgauge-sessions-e2e-'));
const DEMO_WAV = resolve('public/demo/bench-tube.wav');

/** The first-run cautions notice (another screen's) sits above the app until acknowledged. */
async function dismissFirstRun(page: Page): Promise<void> {
  const ok = page.locator('#first-run-ok');
  try {
    await ok.waitFor({ state: 'visible', timeout: 4000 });
    await ok.click();
  } catch {
    /* not shown: already acknowledged */
  }
}

/** Counts the records of a store of the app's database, from inside the page. */
function countStore(page: Page, store: string): Promise<number> {
  return page.evaluate(
    (name) =>
      new Promise<number>((ok, fail) => {
        const req = indexedDB.open('humgauge');
        req.onerror = () => fail(req.error);
        req.onsuccess = () => {
          const db = req.result;
          const c = db.transaction(name).objectStore(name).count();
          c.onsuccess = () => {
            ok(c.result);
            db.close();
          };
          c.onerror = () => fail(c.error);
        };
      }),
    store,
  );
}

/** Kills the browser of a profile at once (SIGKILL): no unload handlers, no final writes. */
function crashBrowser(profileDir: string): void {
  const ps = execFileSync('ps', ['-eo', 'pid=,args=']).toString().split('\n');
  const main = ps.find((l) => l.includes(`--user-data-dir=${profileDir}`) && !l.includes('--type='));
  if (!main) throw new Error('browser process of the profile not found');
  process.kill(Number(main.trim().split(/\s+/)[0]), 'SIGKILL');
}

describe('sessions screen', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('imports a bundle, lists newest first, searches, shows detail, compares, maps stability and exports as a download', async () => {
    const { page } = b;
    const before = sampleSession({ id: 'before-fix-0001', site: 'Boiler room 3', growthPerS: 6, createdAtMs: Date.UTC(2026, 10, 20, 9, 0) });
    before.record.meta.equipment = 'Condensing boiler flue';
    before.record.meta.notes = 'Before the baffle.';
    const after = sampleSession({ id: 'after-fix-0002', site: 'Boiler room 3', growthPerS: 2.5, createdAtMs: Date.UTC(2026, 10, 27, 9, 0) });
    after.record.meta.equipment = 'Condensing boiler flue';
    after.record.meta.notes = 'After the baffle.';
    const ramp = rampSession();
    const bundlePath = join(TMP, 'seed.zip');
    writeFileSync(bundlePath, buildBundle([before, after, ramp]));

    await page.goto(`${APP_URL}#sessions`);
    await dismissFirstRun(page);
    await page.waitForSelector('#import-file', { state: 'attached' });
    await page.setInputFiles('#import-file', bundlePath);
    await page.waitForFunction(() => document.querySelectorAll('.session-item').length === 3);
    await expect.poll(() => page.locator('#status').textContent()).toMatch(/imported 3 sessions/);
    // Newest first: after-fix (27 Nov) before ramp (25 Nov) before before-fix (20 Nov).
    const order = await page.locator('.session-item').evaluateAll((els) => els.map((e) => e.getAttribute('data-id')));
    expect(order).toEqual(['after-fix-0002', 'ramp-0001', 'before-fix-0001']);
    await expect.poll(() => page.locator('.storage-panel').textContent()).toMatch(/An hour of recording costs about .* track only/);
    await screenshot(page, 'sessions-list');

    // The same bundle again is recognised: nothing new.
    await page.setInputFiles('#import-file', bundlePath);
    await expect.poll(() => page.locator('#status').textContent()).toMatch(/3 already stored/);
    expect(await page.locator('.session-item').count()).toBe(3);

    // Search by site/equipment text and by date.
    await page.fill('#session-search', 'premix');
    await expect.poll(() => page.locator('.session-item').count()).toBe(1);
    await page.fill('#session-search', '');
    await page.fill('#session-from', '2026-11-21');
    await expect.poll(() => page.locator('.session-item').count()).toBe(2);
    await page.fill('#session-from', '');
    await expect.poll(() => page.locator('.session-item').count()).toBe(3);

    // Detail: figures with intervals, two plots, markers.
    await page.click('.session-item[data-id="before-fix-0001"] .session-link');
    await page.waitForSelector('.result-table');
    expect(await page.locator('.result-table').textContent()).toMatch(/Growth rate[0-9.]+ 1\/s \(95 % CI/);
    expect(await page.locator('.session-plot').count()).toBe(2);
    await page.waitForSelector('.session-plot canvas');
    await screenshot(page, 'session-detail');

    // Export: bundle captured as a download, and it reads back to the same session.
    const [download] = await Promise.all([page.waitForEvent('download'), page.click('#export-bundle')]);
    expect(download.suggestedFilename()).toMatch(/^humgauge-2026-11-20-boiler-room-3-before-f\.zip$/);
    const got = await readBundle(new Uint8Array(readFileSync((await download.path()) as string)));
    expect(got.map((s) => s.record.id)).toEqual(['before-fix-0001']);
    expect(got[0].track).toEqual(before.track);
    const [csv] = await Promise.all([page.waitForEvent('download'), page.click('#export-csv')]);
    expect(csv.suggestedFilename()).toMatch(/-track\.csv$/);
    expect(readFileSync((await csv.path()) as string, 'utf8').split('\r\n')[0]).toMatch(/^time_s,frequency_hz,amplitude_dbfs/);

    // Edit notes: markup-like text is data, saved as typed and never run (the import takes it back too).
    await page.fill('#edit-notes', 'Baffle <script>window.__ran = 1</script>');
    await page.click('.session-edit button[type=submit]');
    await expect.poll(() => page.locator('.session-edit .hint').textContent()).toMatch(/Saved/);
    expect(await page.evaluate(() => (window as unknown as { __ran?: number }).__ran)).toBeUndefined();
    await page.fill('#edit-site', 'Boiler room 3 (east)');
    await page.click('.session-edit button[type=submit]');
    await expect.poll(() => page.locator('#session-title').textContent()).toMatch(/^Boiler room 3 \(east\) – /);

    // Control values of markers: a bad entry is refused, a good one kept.
    await page.fill('#marker-value-0', 'lots');
    await page.click('.marker-edit button[type=submit]');
    await expect.poll(() => page.locator('.marker-edit .field-error').textContent()).toMatch(/must be a number/);
    await page.fill('#marker-value-0', '300');
    await page.click('.marker-edit button[type=submit]');
    await expect.poll(() => page.locator('.marker-edit .hint').textContent()).toMatch(/saved/);
    await page.reload();
    await page.waitForSelector('#marker-value-0');
    expect(await page.inputValue('#marker-value-0')).toBe('300');
    expect(await page.inputValue('#marker-unit-0')).toBe('W');
    expect(await page.inputValue('#edit-gas')).toBe('150');

    // Delete, then undo.
    await page.click('#delete-session');
    await page.waitForSelector('.undo-bar:not([hidden])');
    await expect.poll(() => page.locator('.session-item').count()).toBe(2);
    await page.click('.undo-bar button');
    await page.waitForSelector('.result-table');
    await page.goto(`${APP_URL}#sessions`);
    await expect.poll(() => page.locator('.session-item').count()).toBe(3);

    // Compare before and after.
    await page.check('.session-item[data-id="before-fix-0001"] input[type=checkbox]');
    await page.check('.session-item[data-id="after-fix-0002"] input[type=checkbox]');
    await page.click('#compare-selected');
    await page.waitForSelector('.interval-chart');
    expect(await page.locator('.screen-sessions h2').first().textContent()).toBe('Compare 2 sessions');
    expect(await page.locator('.interval-chart').count()).toBe(2);
    expect(await page.locator('.compare-table tbody tr').count()).toBe(2);
    await page.waitForSelector('.session-plot canvas');
    await screenshot(page, 'sessions-compare');
    await page.locator('.interval-chart').first().screenshot({ path: join(SCREEN_DIR, 'sessions-compare-growth.png') });

    // Stability map over all sessions: the ramp session carries the control values.
    await page.goto(`${APP_URL}#sessions/map`);
    await page.waitForSelector('.scatter-chart');
    const findings = await page.locator('.map-findings').textContent();
    expect(findings).toMatch(/Onset \(stable → humming\): 62\.5 %/);
    expect(findings).toMatch(/Shut-off \(humming → stable\): 52\.5 %/);
    expect(findings).toMatch(/Hysteresis \(onset − shut-off\): 10\.0 %/);
    expect(findings).toMatch(/crosses zero at: 62\.0 %/);
    await screenshot(page, 'sessions-stability-map');
    await page.locator('.scatter-chart').first().screenshot({ path: join(SCREEN_DIR, 'sessions-map-rate-chart.png') });

    // Markup-like text in a bundle is data: imported, and shown as text (no element is made of it).
    const hostile = sampleSession({ id: 'hostile-0003' });
    hostile.record.meta.notes = '<img src=x onerror=alert(1)>';
    hostile.record.meta.site = '"><b id=injected>bold</b>';
    const hostilePath = join(TMP, 'hostile.zip');
    writeFileSync(hostilePath, buildBundle([hostile]));
    await page.goto(`${APP_URL}#sessions`);
    await page.waitForSelector('#import-file', { state: 'attached' });
    await page.setInputFiles('#import-file', hostilePath);
    await expect.poll(() => page.locator('#status').textContent()).toMatch(/imported 1 session/);
    expect(await page.locator('.session-item[data-id="hostile-0003"]').textContent()).toContain('"><b id=injected>bold</b>');
    await page.click('.session-item[data-id="hostile-0003"] .session-link');
    await expect.poll(() => page.locator('.screen-sessions h2').first().textContent()).toContain('"><b id=injected>bold</b>');
    expect(await page.inputValue('#edit-notes')).toBe('<img src=x onerror=alert(1)>');
    expect(await page.evaluate(() => document.querySelectorAll('img[src="x"], #injected').length)).toBe(0);

    // A zip bomb (session.json declaring 1 GB in a small file): refused before inflating, with a
    // message naming the limit; nothing changed.
    const bomb = buildBundle([sampleSession({ id: 'bomb-0004' })]).slice();
    const dv = new DataView(bomb.buffer);
    for (let p = 0; p + 46 < bomb.length; p++) {
      const sig = dv.getUint32(p, true);
      // APPNOTE 4.3.7 / 4.3.12: uncompressed size at offset 22 of a local header, 24 of a central record.
      const nameAt = sig === 0x04034b50 ? p + 30 : sig === 0x02014b50 ? p + 46 : -1;
      if (nameAt < 0) continue;
      const nameLen = dv.getUint16(p + (sig === 0x04034b50 ? 26 : 28), true);
      if (Buffer.from(bomb.subarray(nameAt, nameAt + nameLen)).toString().endsWith('session.json')) dv.setUint32(p + (sig === 0x04034b50 ? 22 : 24), 1e9, true);
    }
    const bombPath = join(TMP, 'bomb.zip');
    writeFileSync(bombPath, bomb);
    await page.goto(`${APP_URL}#sessions`);
    await page.waitForSelector('#import-file', { state: 'attached' });
    await page.setInputFiles('#import-file', bombPath);
    await expect.poll(() => page.locator('#status').textContent()).toMatch(/bomb\.zip was not imported; nothing was changed\..*session\.json would expand to 1\.0 GB, more than the 106\.8 MB the JSON of a session can need/);
    expect(await page.locator('.session-item').count()).toBe(4);
    expect(await countStore(page, 'sessions')).toBe(4);
  });
});

describe('recording and crash recovery', () => {
  it('a recording through the Listen screen is saved and listed', async () => {
    const run = await launch({ fakeMicWav: DEMO_WAV });
    try {
      const { page } = run;
      await page.goto(`${APP_URL}#listen`);
      await dismissFirstRun(page);
      await page.click('#listen-button');
      await page.waitForTimeout(6000);
      await page.click('#listen-button');
      await expect.poll(() => page.locator('#status').textContent(), { timeout: 30_000 }).toMatch(/Session saved/);
      await page.goto(`${APP_URL}#sessions`);
      await expect.poll(() => page.locator('.session-item').count()).toBe(1);
      await page.click('.session-item .session-link');
      await page.waitForSelector('.result-table');
      expect(await page.locator('.session-facts').first().textContent()).toMatch(/microphone.*audio kept/);
    } finally {
      await run.close();
    }
  });

  it('a browser killed mid-recording leaves a session that the next start finds and completes', async () => {
    const first = await launch({ fakeMicWav: DEMO_WAV });
    const { page } = first;
    await page.goto(`${APP_URL}#listen`);
    await dismissFirstRun(page);
    await page.click('#listen-button');
    // Record for a while; the recorder writes about once a second.
    await page.waitForTimeout(5000);
    // What the Listen screen had recorded at the moment of the crash (m:ss.t).
    const clockText = (await page.locator('#run-clock').textContent()) ?? '';
    const [mm, ss] = clockText.split(':');
    const recordedS = Number(mm) * 60 + Number(ss);
    expect(recordedS).toBeGreaterThan(3);
    const frames = await countStore(page, 'frames');
    const audio = await countStore(page, 'audio');
    expect(frames).toBeGreaterThan(1);
    expect(audio).toBeGreaterThan(1);
    crashBrowser(first.profileDir);
    await first.close().catch(() => undefined);

    const second = await launch({ profileDir: first.profileDir });
    try {
      const p2 = second.page;
      await p2.goto(`${APP_URL}#sessions`);
      await expect.poll(() => p2.locator('#status').textContent(), { timeout: 30_000 }).toMatch(/interrupted .*completed from what was stored/);
      await expect.poll(() => p2.locator('.session-item .badge').textContent(), { timeout: 15_000 }).toBe('recovered');
      await p2.click('.session-item .session-link');
      await p2.waitForSelector('.result-table');
      const history = await p2.locator('.notes').last().textContent();
      const m = /Recording was interrupted; completed .* analysed again from ([0-9.]+) s of stored audio/.exec(history ?? '');
      expect(m).not.toBeNull();
      // Writes happen about once a second: the crash may lose at most a couple of seconds.
      const keptS = Number(m![1]);
      console.info(`crash: ${recordedS} s recorded on screen, ${keptS} s of audio kept`);
      expect(keptS).toBeGreaterThan(recordedS - 2.5);
      expect(keptS).toBeLessThan(recordedS + 1);
      await screenshot(p2, 'session-recovered');
    } finally {
      await second.close();
    }
  });

  it('opens a stored session whose report is of version 1 (before per-tone cycles), and says what it lacks', async () => {
    const fresh = await launch();
    const { page } = fresh;
    try {
      const old = sampleSession({ id: 'old-report-0001', site: 'Archive rig', createdAtMs: Date.UTC(2025, 5, 1, 9, 0) });
      // Two firing cycles as version 1 told them: segments only, no tones, no cycles.
      const seg = (kind: 'quiet' | 'growth' | 'steady' | 'decay', startS: number, endS: number, ratePerS: number | null) => ({ kind, startS, endS, frequencyHz: 171.2, ratePerS, rateCi95PerS: ratePerS === null ? null : ([ratePerS - 0.3, ratePerS + 0.3] as [number, number]) });
      old.record.report = {
        ...old.record.report!,
        reportVersion: 1,
        segments: [seg('quiet', 0, 1, null), seg('growth', 1, 2, 4), seg('steady', 2, 3, null), seg('decay', 3, 4, -5), seg('quiet', 4, 5, null), seg('growth', 5, 6, 4.4), seg('decay', 6, 7, -5.2)],
      };
      const path = join(TMP, 'old-report.zip');
      writeFileSync(path, buildBundle([old]));
      await page.goto(`${APP_URL}#sessions`);
      await dismissFirstRun(page);
      await page.waitForSelector('#import-file', { state: 'attached' });
      await page.setInputFiles('#import-file', path);
      await expect.poll(() => page.locator('#status').textContent()).toMatch(/imported 1 session/);
      await page.click('.session-item[data-id="old-report-0001"] .session-link');
      await page.waitForSelector('#cycles');
      expect(await page.locator('#cycles').getAttribute('data-report-version')).toBe('1');
      expect(await page.locator('#cycles-old-report').textContent()).toMatch(/^This report is of version 1 \(an earlier version of the app\): cycles rebuilt from the segments .*no onset times/);
      const rows = await page.locator('#cycles-table tbody tr').count();
      expect(rows).toBe(2);
      // Median of 4 and 4.4 is 4.2; MAD 0.2 × 1.4826 = 0.297 (REFERENCES.md §95).
      expect(await page.locator('#cycles .cycle-medians').textContent()).toMatch(/growth rate: median 4\.20 1\/s, spread 0\.297 1\/s over 2 cycles/);
      await screenshot(page, 'session-old-report');
    } finally {
      await fresh.close();
    }
  });
});

