import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, type Launched } from './browser';

// A duct geometry the user never set is "not given": starting the app, or opening the Duct screen
// without editing it, keeps nothing, so the Listen screen offers no geometry to attach; the first
// edit of the form keeps it (DEVELOPERS.md: sessions hold only what the user entered).
describe('duct geometry not given until the user sets it', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  const stored = (): Promise<string | null> => b.page.evaluate(() => localStorage.getItem('humgauge.ductGeometry'));

  it('keeps nothing at start or on a visit, and keeps the first edit', async () => {
    const { page } = b;
    await page.goto(`${APP_URL}#duct`);
    await page.waitForSelector('#duct-length');
    // The form shows its starting values and their modes, but stores none of them.
    await expect.poll(async () => page.locator('table.duct-modes tbody tr').count()).toBeGreaterThan(0);
    expect(await stored()).toBeNull();
    await page.goto(`${APP_URL}#listen`);
    await page.reload();
    await expect.poll(async () => page.locator('#session-duct-text').textContent()).toMatch(/not given/);
    expect(await stored()).toBeNull();

    await page.goto(`${APP_URL}#duct`);
    await page.waitForSelector('#duct-length');
    await page.fill('#duct-length', '2.5');
    await expect.poll(stored).not.toBeNull();
    expect(JSON.parse((await stored()) ?? '{}').lengthM).toBe(2.5);
    await page.goto(`${APP_URL}#listen`);
    await page.reload();
    await expect.poll(async () => page.locator('#session-duct-text').textContent()).toMatch(/2\.50 m long/);
  });
});
