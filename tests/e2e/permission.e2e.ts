import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APP_URL, launch, screenshot, type Launched } from './browser';

// Microphone permission refused: the Listen screen must say so and say how to allow it, and the
// app must stay usable (Listen can be pressed again, a recording can still be opened).
describe('microphone permission refused', () => {
  let b: Launched;
  beforeAll(async () => {
    b = await launch({ allowMic: false });
  });
  afterAll(async () => {
    await b?.close();
  });

  it('shows a clear message with the way to allow the microphone', async () => {
    const { page, context } = b;
    await context.grantPermissions([], { origin: APP_URL });
    await page.goto(APP_URL);
    await page.waitForSelector('#listen-button');
    if (await page.locator('#first-run-ok').count()) await page.click('#first-run-ok');
    // Keyboard only: Tab to the Listen button and press Enter (keyboard operable, no pointer needed).
    await page.locator('#listen-button').focus();
    await page.keyboard.press('Enter');
    const alert = page.locator('#listen-alert');
    await expect.poll(() => alert.isVisible(), { timeout: 15_000 }).toBe(true);
    const text = (await alert.textContent()) ?? '';
    expect(text).toMatch(/Microphone access is blocked/);
    expect(text).toMatch(/Allow/);
    expect(await alert.getAttribute('role')).toBe('alert');
    // Back to idle: the button offers Listen again and the file button is usable.
    expect(await page.locator('#listen-button').textContent()).toBe('Listen');
    expect(await page.locator('#listen-button').isDisabled()).toBe(false);
    expect(await page.locator('#file-input').isDisabled()).toBe(false);
    await screenshot(page, 'listen-permission-denied');
  });
});
