import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, screenshot, type Launched } from './browser';

// The duct screen in headless Chromium: the REFERENCES.md §2 worked example (L 1.20 m, inner
// diameter 48 mm, open–open, unflanged ends, 20 °C, Levine & Schwinger 1948 end correction) with
// air's γ(T) (§70: 139.5958 Hz; 139.5889 Hz with γ = 1.4), the two-zone example of §3 with γ per zone
// (§70: 196.2504 Hz), the candidates of a measured tone (§71), bad and absurd input, the stored geometry.
describe('duct screen', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  /** The first-run cautions notice (another screen's) sits above the app until acknowledged. */
  async function dismissFirstRun(): Promise<void> {
    const ok = b.page.locator('#first-run-ok');
    try {
      await ok.waitFor({ state: 'visible', timeout: 5000 });
      await ok.click();
    } catch {
      /* not shown: already acknowledged */
    }
  }

  async function fill(id: string, value: string): Promise<void> {
    await b.page.fill(`#${id}`, value);
  }

  it('shows the 139.60 Hz fundamental of the worked example, the sketch and a measured-tone match', async () => {
    const { page } = b;
    await page.goto(`${APP_URL}#duct`);
    await page.waitForSelector('#duct-length');
    await dismissFirstRun();
    await fill('duct-length', '1.20');
    await fill('duct-diameter', '48');
    await page.selectOption('#duct-ends', 'open-open');
    await page.selectOption('#duct-open-end', 'unflanged');
    await fill('duct-temp', '20');
    const firstRow = page.locator('table.duct-modes tbody tr').first();
    await expect.poll(async () => firstRow.textContent()).toContain('139.60 Hz');
    const second = await page.locator('table.duct-modes tbody tr').nth(1).textContent();
    expect(second).toContain('279.19 Hz');
    expect(await page.locator('.duct-svg path.duct-p').count()).toBe(1);
    // A 150 °C column hums at 167.7078 Hz with γ = 1.4 (REFERENCES.md §2); with air's γ(T) that tone means 152.1 °C (§70).
    await fill('duct-measured', '167.71');
    await expect.poll(async () => page.locator('.duct-match-temp').textContent()).toMatch(/152 °C \(95 % CI \d+–\d+\)/);
    expect(await page.locator('.duct-match-mode').textContent()).toContain('mode 1');
    const body = (await page.locator('.screen-duct').textContent()) ?? '';
    expect(body).not.toMatch(/NaN|undefined|Infinity/);
    await screenshot(page, 'duct-reference-example');
  });

  it('solves the heated two-zone duct and gives the Rayleigh reading', async () => {
    const { page } = b;
    await fill('duct-length', '1');
    await fill('duct-diameter', '40');
    await page.selectOption('#duct-open-end', 'none');
    await page.check('#duct-has-heater');
    await fill('duct-heater', '0.25');
    await fill('duct-hot-temp', '200');
    await fill('duct-measured', '');
    await expect.poll(async () => page.locator('table.duct-modes tbody tr').first().textContent()).toContain('196.25 Hz');
    expect(await page.locator('table.duct-modes tbody tr').first().textContent()).toContain('drives');
    expect(await page.locator('.duct-rayleigh').textContent()).toMatch(/drives/);
    await screenshot(page, 'duct-heater');
  });

  it('explains bad input instead of showing numbers, and keeps the geometry for the next visit', async () => {
    const { page } = b;
    await fill('duct-heater', '1.5');
    await expect.poll(async () => page.locator('#duct-heater-error').textContent()).toMatch(/inside the duct/);
    expect(await page.locator('table.duct-modes tbody tr').count()).toBe(0);
    await fill('duct-heater', '0.25');
    await fill('duct-temp', '-300');
    await expect.poll(async () => page.locator('#duct-temp-error').textContent()).toMatch(/absolute zero/);
    await fill('duct-length', 'abc');
    await expect.poll(async () => page.locator('#duct-length-error').textContent()).toMatch(/must be a number/);
    const body = (await page.locator('.screen-duct').textContent()) ?? '';
    expect(body).not.toMatch(/NaN|undefined|Infinity/);
    await screenshot(page, 'duct-bad-input');
    await fill('duct-length', '1');
    await fill('duct-temp', '20');
    await expect.poll(async () => page.locator('table.duct-modes tbody tr').count()).toBeGreaterThan(0);
    const stored = await page.evaluate(() => localStorage.getItem('humgauge.ductGeometry'));
    expect(JSON.parse(stored ?? '{}')).toMatchObject({ lengthM: 1, diameterM: 0.04, ends: 'open-open', openEnd: 'none', gasTemperatureC: 20, heaterPositionM: 0.25, hotTemperatureC: 200 });
    await page.reload();
    await page.goto(`${APP_URL}#duct/171.2`);
    await expect.poll(async () => page.inputValue('#duct-length')).toBe('1');
    await expect.poll(async () => page.inputValue('#duct-measured')).toBe('171.2');
    await expect.poll(async () => page.locator('table.duct-modes tbody tr').first().textContent()).toContain('196.25 Hz');
  });

  it('lists every mode a tone can be: 245 Hz in a 1 m tube is mode 1 at 375 °C, not mode 2 at −115 °C (REFERENCES.md §71)', async () => {
    const { page } = b;
    await page.uncheck('#duct-has-heater');
    await fill('duct-length', '1');
    await fill('duct-diameter', '50');
    await page.selectOption('#duct-open-end', 'unflanged');
    await fill('duct-temp', '20');
    await fill('duct-measured', '245');
    await expect.poll(async () => page.locator('.duct-match-mode').textContent()).toMatch(/245\.0 Hz is mode 1 /);
    expect(await page.locator('.duct-match-temp').textContent()).toMatch(/Mean gas temperature for an exact match: 375 °C \(95 % CI 36\d–3[89]\d\)/);
    const rows = page.locator('table.duct-candidates tbody tr');
    expect(await rows.count()).toBe(2);
    expect(await rows.nth(0).textContent()).toMatch(/^1375 °C.*yes \(best\)$/);
    expect(await rows.nth(1).textContent()).toMatch(/^2−115 °C.*no: implausible temperature$/);
    await screenshot(page, 'duct-candidates');
  });

  it('absurd values (1e308 hot zone, a diameter of 1e-300 mm) get a message at once; no Infinity, the page stays live', async () => {
    const { page } = b;
    await page.check('#duct-has-heater');
    await fill('duct-heater', '0.25');
    await fill('duct-hot-temp', '1e308');
    await expect.poll(async () => page.locator('#duct-hot-temp-error').textContent()).toMatch(/Must lie from −?-?190 to 3000 °C/);
    expect(await page.locator('table.duct-modes tbody tr').count()).toBe(0);
    await fill('duct-hot-temp', '200');
    await fill('duct-diameter', '1e-300');
    await expect.poll(async () => page.locator('#duct-diameter-error').textContent()).toMatch(/Must lie from 1 to 20000 mm/);
    await fill('duct-diameter', '50');
    await fill('duct-measured', '1e308');
    await expect.poll(async () => page.locator('#duct-measured-error').textContent()).toMatch(/Must lie from/);
    await fill('duct-measured', '');
    // The page still answers: the modes come back at once.
    await expect.poll(async () => page.locator('table.duct-modes tbody tr').count()).toBeGreaterThan(0);
    const body = (await page.locator('.screen-duct').textContent()) ?? '';
    expect(body).not.toMatch(/NaN|undefined|Infinity/);
  });

  it('takes the main tone of a stored session', async () => {
    const { page } = b;
    expect(await page.locator('#duct-from-session').textContent()).toMatch(/no session with a tone yet/);
    // A finished session as the app stores it (web/storage/db.ts, schema v2), written straight into IndexedDB.
    await page.evaluate(
      () =>
        new Promise<void>((resolve, reject) => {
          const open = indexedDB.open('humgauge');
          open.onerror = () => reject(open.error);
          open.onsuccess = () => {
            const db = open.result;
            const now = Date.now();
            const tx = db.transaction('sessions', 'readwrite');
            tx.objectStore('sessions').put({
              id: 'duct-e2e-1', createdAtMs: now, updatedAtMs: now, heartbeatAtMs: now, status: 'complete',
              meta: { source: 'file', fileName: 'bench-tube.wav', sampleRateHz: 16000, site: 'Bench lab', equipment: 'heated tube', notes: '' },
              markers: [], gaps: [], durationS: 18, frameCount: 0, frameChunkCount: 0,
              report: { reportVersion: 1, sampleRateHz: 16000, durationS: 18, onsets: [], segments: [], noiseDriven: [],
                summary: { frequencyHz: 177.51, growthRatePerS: 4.9, decayRatePerS: 26.5, effectiveGainPerS: null, dampingRatio: null, qFactor: null } },
              audio: { isKept: false, sampleCount: 0, chunkCount: 0 }, siteKey: 'bench lab', equipmentKey: 'heated tube', history: [],
            });
            tx.oncomplete = () => {
              db.close();
              resolve();
            };
            tx.onerror = () => reject(tx.error);
          };
        }),
    );
    await page.reload();
    await page.waitForSelector('#duct-from-session option[value="177.51"]', { state: 'attached' });
    await page.selectOption('#duct-from-session', '177.51');
    await expect.poll(async () => page.inputValue('#duct-measured')).toBe('177.51');
    await expect.poll(async () => page.locator('.duct-match-mode').textContent()).toMatch(/177\.5 Hz is mode 1/);
    await screenshot(page, 'duct-session-tone');
  });
});
