import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync } from 'node:fs';

// Serves the built app (dist/) on loopback for the browser tests; loopback is a secure context,
// so the service worker, getUserMedia and IndexedDB behave as on an installed phone app.
export const PREVIEW_PORT = Number(process.env.E2E_PORT ?? 4173);
const DIST = process.env.E2E_DIST ?? "dist";
let server: ChildProcess | undefined;

export async function setup(): Promise<void> {
  if (!existsSync(`${DIST}/index.html`)) throw new Error(`${DIST}/ is missing: run \`npx vite build\` before the browser tests`);
  server = spawn('npx', ['vite', 'preview', '--outDir', `../${DIST}`, '--host', '127.0.0.1', '--port', String(PREVIEW_PORT), '--strictPort'], {
    stdio: ['ignore', 'pipe', 'pipe'],
    detached: true,
  });
  const deadline = Date.now() + 30_000;
  for (;;) {
    try {
      const res = await fetch(`http://127.0.0.1:${PREVIEW_PORT}/`);
      if (res.ok) return;
    } catch {
      /* not up yet */
    }
    if (Date.now() > deadline) throw new Error('vite preview did not start within 30 s');
    await new Promise((r) => setTimeout(r, 200));
  }
}

export async function teardown(): Promise<void> {
  if (server?.pid) {
    try {
      process.kill(-server.pid, 'SIGTERM');
    } catch {
      /* already gone */
    }
  }
}
