// The npm scripts in package.json: every file a script runs must exist, and the browser-test
// script must build the app and run the e2e config, as scripts/test-all.mjs and DEVELOPERS.md do.
import { existsSync, readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';

const pkg = JSON.parse(readFileSync('package.json', 'utf8')) as { scripts: Record<string, string> };

describe('package.json scripts', () => {
  it('every `node <file>` target exists (dist-cli outputs are built by the same script)', () => {
    for (const [name, cmd] of Object.entries(pkg.scripts)) {
      for (const m of cmd.matchAll(/\bnode(?:\s+--[\w-]+)*\s+([\w./-]+\.m?js)\b/g)) {
        const file = m[1];
        if (file.startsWith('dist-cli/')) continue;
        expect(existsSync(file), `script "${name}" runs ${file}`).toBe(true);
      }
    }
  });

  it('test:e2e builds the app before running the browser-test config', () => {
    const cmd = pkg.scripts['test:e2e'];
    const build = cmd.indexOf('vite build');
    const run = cmd.indexOf('vitest run --config vitest.e2e.config.ts');
    expect(build).toBeGreaterThanOrEqual(0);
    expect(run).toBeGreaterThan(build);
  });
});
