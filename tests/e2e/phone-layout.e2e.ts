import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, screenshot, type Launched } from './browser';
import { writeHumCycleWav } from './fixtures';

// The app on a 390 × 844 CSS px phone screen (a common current phone size): navigation on one
// row, no sideways scrolling of the page (tables scroll in their own box), a new screen starts
// at its top. Screenshots under e2e-out/screens/phone-*.png are for review.
const PHONE = { width: 390, height: 844 };

describe('phone layout', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch();
    await b.page.setViewportSize(PHONE);
  });
  afterAll(async () => {
    await b?.close();
  });

  const pageWidth = (): Promise<number> => b.page.evaluate(() => document.documentElement.scrollWidth);

  it('keeps the navigation on one row and the first-run notice short', async () => {
    const { page } = b;
    await page.goto(APP_URL);
    await page.waitForSelector('#first-run');
    await screenshot(page, 'phone-first-run');
    const nav = await page.locator('.topbar').boundingBox();
    // One row of 44 px touch targets plus padding: under 8 % of the screen height (was 15 %).
    expect(nav?.height ?? 999).toBeLessThan(0.08 * PHONE.height);
    const links = await page.locator('.navlink').evaluateAll((as) => as.map((a) => a.getBoundingClientRect().top));
    expect(new Set(links.map(Math.round)).size).toBe(1);
    // The notice fits within the first screen, with the full cautions one tap away.
    const notice = await page.locator('#first-run').boundingBox();
    expect(notice?.height ?? 999).toBeLessThan(PHONE.height * 0.6);
    expect(await page.locator('#first-run-more').getAttribute('href')).toBe('#cautions');
    await page.click('#first-run-ok');
    expect(await pageWidth()).toBeLessThanOrEqual(PHONE.width);
  });

  it('shows a result without sideways scrolling of the page', async () => {
    const { page } = b;
    await page.setInputFiles('#file-input', writeHumCycleWav('phone-hum-cycle.wav'));
    await expect.poll(() => page.locator('#run-result').isVisible(), { timeout: 60_000 }).toBe(true);
    await expect.poll(() => page.locator('#run-result a.big-link').count(), { timeout: 15_000 }).toBe(1);
    expect(await pageWidth()).toBeLessThanOrEqual(PHONE.width);
    // The growth interval sits on its own unbroken line under the value.
    const ci = page.locator('#readout-growth .tile-value .ci');
    expect(await ci.count()).toBe(1);
    expect(await ci.evaluate((e) => getComputedStyle(e).display)).toBe('block');
    expect(await ci.evaluate((e) => Number(getComputedStyle(e).fontWeight))).toBeLessThan(600);
    await screenshot(page, 'phone-listen-result');
  });

  it('starts a new screen at its top and keeps session tables inside their box', async () => {
    const { page } = b;
    await page.evaluate(() => window.scrollTo(0, document.body.scrollHeight));
    await page.click('#run-result a.big-link');
    await page.waitForSelector('#session-title');
    await expect.poll(() => page.evaluate(() => window.scrollY)).toBe(0);
    expect(await pageWidth()).toBeLessThanOrEqual(PHONE.width);
    await screenshot(page, 'phone-session-detail');
  });
});
