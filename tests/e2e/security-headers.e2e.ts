import { readdirSync } from 'node:fs';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, type Launched } from './browser';

// The served app carries its security headers on every response, the worker and service worker
// scripts included, and refuses to be framed (W3C CSP Level 3, frame-ancestors; REFERENCES.md §82).
const DIST = process.env.E2E_DIST ?? 'dist';

describe('security headers', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
  });
  afterAll(async () => {
    await b?.close();
  });

  it('the page, the analysis worker and the service worker are served with one policy', async () => {
    const worker = readdirSync(`${DIST}/assets`).find((f) => /^analysis\.worker-.*\.js$/.test(f));
    expect(worker).toBeDefined();
    const urls = [APP_URL, `${APP_URL}assets/${worker}`, `${APP_URL}sw.js`];
    const seen = await Promise.all(urls.map(async (u) => (await fetch(u)).headers));
    for (const h of seen) {
      expect(h.get('content-security-policy')).toMatch(/frame-ancestors 'none'/);
      expect(h.get('content-security-policy')).toMatch(/default-src 'self'/);
      expect(h.get('x-content-type-options')).toBe('nosniff');
      expect(h.get('referrer-policy')).toBe('no-referrer');
    }
    expect(new Set(seen.map((h) => h.get('content-security-policy'))).size).toBe(1);
  });

  it('refuses to load inside an iframe of another page', async () => {
    const { page } = b;
    // A page that frames the app. Served (by the test) from the app's own origin: frame-ancestors
    // 'none' refuses every parent, and a loopback parent avoids the browser's separate block on
    // public pages framing private addresses, which would hide what is tested here.
    const host = `${APP_URL}framing-test.html`;
    await page.route(host, (route) => route.fulfill({ contentType: 'text/html', body: `<!doctype html><iframe id="victim" src="${APP_URL}" width="400" height="400"></iframe>` }));
    await page.goto(host);
    await page.waitForTimeout(3000);
    const frame = page.frames().find((f) => f !== page.mainFrame());
    expect(frame).toBeDefined();
    // The browser blocks the document: the frame holds an error page, never the app's controls.
    const hasApp = await frame!.evaluate(() => document.querySelector('#listen-button') !== null).catch(() => false);
    expect(hasApp).toBe(false);
    expect(frame!.url()).not.toBe(APP_URL);
    await page.unroute(host);
    // Control: the same URL opened directly does load the app.
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
  });
});
