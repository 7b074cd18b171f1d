// The project's test command (`npm test`): type checks, unit and property tests, the builds,
// the command line on the demo recording, and the browser end-to-end tests. Prints one closing
// line "N passed, N failed" that counts every check, and exits non-zero on any failure.
import { spawnSync } from 'node:child_process';
import { existsSync, mkdirSync, readFileSync, rmSync } from 'node:fs';

mkdirSync('e2e-out', { recursive: true });
let passed = 0;
let failed = 0;

function step(name, cmd, args) {
  console.log(`\n== ${name}: ${cmd} ${args.join(' ')}`);
  const r = spawnSync(cmd, args, { stdio: 'inherit', env: process.env });
  if (r.status === 0) passed++;
  else {
    failed++;
    console.log(`!! step failed: ${name} (exit ${r.status})`);
  }
  return r.status === 0;
}

function countVitest(file) {
  if (!existsSync(file)) return false;
  const j = JSON.parse(readFileSync(file, 'utf8'));
  passed += j.numPassedTests ?? 0;
  failed += (j.numFailedTests ?? 0) + (j.numTotalTestSuites && j.success === false && !j.numFailedTests ? 1 : 0);
  return true;
}

step('typecheck', 'npm', ['run', '-s', 'typecheck']);
rmSync('e2e-out/unit.json', { force: true });
spawnSync('npx', ['vitest', 'run', '--reporter=default', '--reporter=json', '--outputFile=e2e-out/unit.json'], { stdio: 'inherit' });
if (!countVitest('e2e-out/unit.json')) { failed++; console.log('!! unit tests produced no report'); }
const built = step('build', 'npm', ['run', '-s', 'build']);
if (built) {
  step('analyser on the demo recording', 'node', ['dist-cli/humgauge.js', 'analyze', 'public/demo/bench-tube.wav']);
  rmSync('e2e-out/e2e.json', { force: true });
  spawnSync('npx', ['vitest', 'run', '--config', 'vitest.e2e.config.ts', '--reporter=default', '--reporter=json', '--outputFile=e2e-out/e2e.json'], { stdio: 'inherit' });
  if (!countVitest('e2e-out/e2e.json')) { failed++; console.log('!! browser tests produced no report'); }
}
console.log(`\n${passed} passed, ${failed} failed`);
process.exit(failed === 0 ? 0 : 1);
