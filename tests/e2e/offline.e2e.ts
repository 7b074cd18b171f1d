import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, screenshot, type Launched } from './browser';

// The installed app works with no network: after the service worker has precached it, a reload
// in airplane mode (context.setOffline) brings back the app, its screens and its charts.
describe('offline', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('reloads and works offline once the service worker controls the page', async () => {
    const { page, context } = b;
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
    await expect
      .poll(() => page.evaluate(() => navigator.serviceWorker.controller?.state ?? 'none'), { timeout: 20_000 })
      .toBe('activated');
    // The app tells the user it is ready offline.
    await expect.poll(() => page.locator('#status').textContent(), { timeout: 10_000 }).toMatch(/offline/);
    await context.setOffline(true);
    // Control: the network really is off for anything not precached.
    const fetched = await page.evaluate(() => fetch(`/not-cached-${Date.now()}.json`).then(() => 'ok', () => 'failed'));
    expect(fetched).toBe('failed');
    await page.reload();
    await page.waitForSelector('#listen-button');
    await page.goto(`${APP_URL}#settings`);
    await page.waitForSelector('#band-low');
    await page.goto(`${APP_URL}#cautions`);
    expect((await page.locator('.screen-cautions').textContent()) ?? '').toMatch(/carbon monoxide/);
    await page.goto(`${APP_URL}#listen`);
    expect(await page.locator('#plot-amplitude canvas').count()).toBeGreaterThan(0);
    await screenshot(page, 'offline-reload');
    await context.setOffline(false);
  });
});
