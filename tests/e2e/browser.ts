import { chromium, type BrowserContext, type Page } from 'playwright-core';
import { execSync } from 'node:child_process';
import { mkdirSync, mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';

export const APP_URL = `http://127.0.0.1:${process.env.E2E_PORT ?? 4173}/`;
export const SCREEN_DIR = resolve('e2e-out/screens');

const BASE_FLAGS = [
  '--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
  '--disable-background-networking', '--disable-component-update', '--disable-sync',
];

export interface LaunchOptions {
  /** Absolute path of a WAV to use as the microphone (played once; end it with ≥0.25 s of zeros). */
  fakeMicWav?: string;
  /** Grant the microphone without asking (default true). False: the page sees a denial. */
  allowMic?: boolean;
  /** Reuse a profile directory (to test what survives a reload or a crash). */
  profileDir?: string;
}

export interface Launched {
  context: BrowserContext;
  page: Page;
  profileDir: string;
  close(): Promise<void>;
}

/** Starts Debian's Chromium headless with a fresh (or given) profile. */
export async function launch(opts: LaunchOptions = {}): Promise<Launched> {
  const exe = process.env.CHROMIUM_PATH || execSync('command -v chromium').toString().trim();
  const profileDir = opts.profileDir ?? mkdtempSync(join(tmpdir(), 'humgauge-e2e-'));
  const allowMic = opts.allowMic ?? true;
  const args = [...BASE_FLAGS];
  if (allowMic) args.push('--use-fake-ui-for-media-stream');
  args.push('--use-fake-device-for-media-stream');
  if (opts.fakeMicWav) args.push(`--use-file-for-fake-audio-capture=${opts.fakeMicWav}%noloop`);
  const context = await chromium.launchPersistentContext(profileDir, {
    executablePath: exe,
    headless: true,
    acceptDownloads: true,
    viewport: { width: 412, height: 915 },
    args,
  });
  if (!allowMic) await context.clearPermissions();
  const page = context.pages()[0] ?? (await context.newPage());
  return { context, page, profileDir, close: () => context.close() };
}

/** Saves a screenshot under e2e-out/screens/<name>.png (test artifact). */
export async function screenshot(page: Page, name: string): Promise<string> {
  mkdirSync(SCREEN_DIR, { recursive: true });
  const path = join(SCREEN_DIR, `${name}.png`);
  await page.screenshot({ path, fullPage: true });
  return path;
}
