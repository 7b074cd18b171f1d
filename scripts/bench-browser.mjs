// Browser bench of the field app (printed, never asserted):
//   1. cost of the browser worker per second of 48 kHz audio (target ≤ 5 ms): all its jobs, by
//      stage (the worker times each and sends the figures with its report), for the file read and
//      for listening live (updates and margin estimates at their live cadence; a fresh worker, then
//      a second session in the same worker), and the live worker thread's CPU time from /proc,
//      which other processes on the machine do not inflate,
//   2. initial JavaScript of the app, gzipped (target ≤ 200 KB),
//   3. first paint of the installed app reloaded offline in headless Chromium (target ≤ 1 s),
//   4. storage: opening a 10-minute recording and importing its bundle, each in a fresh profile:
//      time, peak renderer memory and the longest main-thread stall (target: every stall < 100 ms).
// Section 1 also says where the worker's dsp/ time goes against the command line's bench (which
// times warm code back to back, best of several runs): the same recording analysed twice in one
// worker (the first pays V8's warm-up, the second does not) and a live session fed back to back
// rather than at the pace of the audio (idle between blocks, the analysis's code and data go cold).
// Usage: node scripts/bench-browser.mjs [--dist dist] [--port 4196] [--seconds 120] [--live-seconds 30] [--no-store] [--js-flags FLAGS] [--live-block 4864] [--cpu-prof DIR]
// (the port defaults to E2E_PORT when set, as for the browser tests, else 4196; --js-flags passes V8
// flags to Chromium, e.g. "--prof" writes a tick log per isolate into the current folder, the
// worker's included, for `node --prof-process`; --live-block sets the live blocks' length, samples,
// 4864 as the capture worklet posts them at 48 kHz); --cpu-prof writes a CPU profile of each analysis
// worker (DevTools protocol) into DIR, to open in Chromium's DevTools, and prints the functions it
// sampled most; for readable names build with `npx vite build --minify false --outDir dist-prof` and
// pass `--dist dist-prof`).
// Needs a built app (npx vite build) and Debian's chromium (or CHROMIUM_PATH).
import { spawn, execSync } from 'node:child_process';
import { mkdtempSync, readFileSync, writeFileSync, existsSync, mkdirSync, readdirSync, copyFileSync } from 'node:fs';
import { gzipSync } from 'node:zlib';
import { cpus, loadavg, tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { chromium } from 'playwright-core';

const args = process.argv.slice(2);
const opt = (name, fallback) => {
  const i = args.indexOf(`--${name}`);
  return i >= 0 && args[i + 1] ? args[i + 1] : fallback;
};
const DIST = opt('dist', 'dist');
const PORT = Number(opt('port', process.env.E2E_PORT || '4196')); // not 4190: browsers and fetch refuse that port (on the "bad ports" list)
const SECONDS = Number(opt('seconds', '120'));
const LIVE_SECONDS = Number(opt('live-seconds', '30'));
const URL = `http://127.0.0.1:${PORT}/`;
const JS_FLAGS = opt('js-flags', '');
// The capture worklet's block at 48 kHz: 0.1 s in whole 128-sample render quanta (web/capture/live-block.ts).
const LIVE_BLOCK = Number(opt('live-block', '4864'));
const CPU_PROF_DIR = opt('cpu-prof', '');

function line(name, value, unit, target, isPass) {
  const shown = Number.isFinite(value) ? value.toFixed(value < 10 ? 2 : 1) : '—';
  console.log(`${name.padEnd(68)} ${`${shown} ${unit}`.padStart(14)}   target ${target.padEnd(10)} ${Number.isFinite(value) ? (isPass ? 'PASS' : 'MISS') : 'MISS (not measured)'}`);
}

/** Initial JS: the entry script of index.html and the modules it preloads, each gzipped (level 9). */
function initialJsGzipKb() {
  const html = readFileSync(join(DIST, 'index.html'), 'utf8');
  const srcs = new Set();
  for (const m of html.matchAll(/<script[^>]+src="([^"]+\.js)"/g)) srcs.add(m[1]);
  for (const m of html.matchAll(/<link[^>]+rel="modulepreload"[^>]+href="([^"]+\.js)"/g)) srcs.add(m[1]);
  let total = 0;
  const parts = [];
  for (const src of srcs) {
    const bytes = readFileSync(join(DIST, src.replace(/^\.?\//, '')));
    const gz = gzipSync(bytes, { level: 9 }).length;
    parts.push(`${src} ${(gz / 1024).toFixed(1)} KB`);
    total += gz;
  }
  return { kb: total / 1024, parts };
}

/** The worker's jobs as the report's stageMs names them, with their labels. */
const WORKER_STAGES = [
  ['input', 'reading the input (WAV decoding, block copies)'],
  ['analysis', 'dsp/ push() and finish()'],
  ['collect', 'copying updates out of dsp/'],
  ['spectrogram', 'spectrogram columns'],
  ['marginFeed', 'live margin ring'],
  ['marginEstimate', 'margin estimates'],
  ['audio', 'keeping audio'],
  ['update', 'update batches (summary, post)'],
];

/** Total worker time per s of audio over all its jobs, and one row per job (ms per s of audio). */
function workerStageRows(st, audioS, label) {
  let total = 0;
  const rows = [];
  for (const [key, name] of WORKER_STAGES) {
    total += st[key];
    let extra = '';
    if (key === 'marginEstimate' && st.marginEstimates > 0) {
      // Its cost grows with the stretch it looks at (up to 60 s, dsp/live-margin.ts LIVE_MARGIN_WINDOW_S), live one when LIVE_MARGIN_EVERY_S (2 s) and LIVE_MARGIN_NEW_SHARE (a sixth) of the stretch are new since the last.
      extra = ` (${st.marginEstimates} estimates, ${(st.marginEstimate / st.marginEstimates).toFixed(1)} ms each; the latest ${st.marginLatestMs.toFixed(1)} ms over ${st.marginLatestWindowS.toFixed(0)} s of audio)`;
    }
    // The post itself is most of a batch's time, whatever it carries: a message's fixed cost (it wakes the page's thread), wall time.
    if (key === 'update') extra = ` (${st.updates} batches, ${(st.updates ? st.update / st.updates : 0).toFixed(2)} ms each, ${(st.updates ? st.updatePost / st.updates : 0).toFixed(2)} of it inside postMessage)`;
    rows.push(`${`${label}:`.padEnd(22)} ${name.padEnd(48)} ${(st[key] / audioS).toFixed(2).padStart(6)} ms/s${extra}`);
  }
  return { msPerS: total / audioS, rows };
}

/**
 * CPU time, ms, of the threads whose name starts with `prefix` in every renderer process of the
 * browser using `profileDir` (Linux /proc: utime + stime in clock ticks, 10 ms each on most
 * systems). Unlike the worker's own timings (wall time, which counts the moments the system gave
 * the core to another process), this is the time the threads ran.
 */
const CLOCK_TICK_MS = 1000 / Number(execSync('getconf CLK_TCK').toString().trim() || '100');
function threadCpuMs(profileDir, prefix) {
  let ms = 0;
  for (const v of threadCpuMsByThread(profileDir, prefix).values()) ms += v;
  return ms;
}

/** As threadCpuMs, each thread apart: thread id → CPU time, ms. */
function threadCpuMsByThread(profileDir, prefix) {
  const byThread = new Map();
  for (const pid of readdirSync('/proc')) {
    if (!/^\d+$/.test(pid)) continue;
    try {
      if (!readFileSync(`/proc/${pid}/cmdline`, 'utf8').includes('--type=renderer')) continue;
      const ppid = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ')[1];
      if (!readFileSync(`/proc/${ppid}/cmdline`, 'utf8').includes(profileDir)) continue;
      for (const tid of readdirSync(`/proc/${pid}/task`)) {
        if (!readFileSync(`/proc/${pid}/task/${tid}/comm`, 'utf8').startsWith(prefix)) continue;
        const f = readFileSync(`/proc/${pid}/task/${tid}/stat`, 'utf8').split(') ')[1].split(' ');
        byThread.set(tid, (Number(f[11]) + Number(f[12])) * CLOCK_TICK_MS);
      }
    } catch {
      /* the process or thread ended meanwhile */
    }
  }
  return byThread;
}

/**
 * CPU profiles of the app's analysis workers through the DevTools protocol: every analysis worker
 * the page starts is attached as it starts (Target.setAutoAttach) and sampled (Profiler.start);
 * stopAll(label) writes each running profile to CPU_PROF_DIR/<label>.cpuprofile and prints the
 * functions it sampled most (printProfileTop). A no-op without --cpu-prof.
 */
async function workerProfiler(page) {
  if (!CPU_PROF_DIR) return { stopAll: async () => {} };
  mkdirSync(CPU_PROF_DIR, { recursive: true });
  const cdp = await page.context().newCDPSession(page);
  let nextId = 1;
  const replies = new Map();
  const running = new Set();
  cdp.on('Target.receivedMessageFromTarget', (ev) => {
    const m = JSON.parse(ev.message);
    if (m.id && replies.has(m.id)) {
      replies.get(m.id)(m.result ?? {});
      replies.delete(m.id);
    }
  });
  const send = (sessionId, method, params = {}) =>
    new Promise((resolveReply) => {
      const id = nextId++;
      replies.set(id, resolveReply);
      cdp.send('Target.sendMessageToTarget', { sessionId, message: JSON.stringify({ id, method, params }) }).catch(() => resolveReply({}));
    });
  cdp.on('Target.attachedToTarget', async (ev) => {
    if (ev.targetInfo.type !== 'worker' || !ev.targetInfo.url.includes('analysis')) return;
    await send(ev.sessionId, 'Profiler.enable');
    await send(ev.sessionId, 'Profiler.setSamplingInterval', { interval: 250 });
    await send(ev.sessionId, 'Profiler.start');
    running.add(ev.sessionId);
  });
  await cdp.send('Target.setAutoAttach', { autoAttach: true, flatten: false, waitForDebuggerOnStart: false });
  return {
    async stopAll(label) {
      let k = 0;
      for (const sessionId of running) {
        const { profile } = await send(sessionId, 'Profiler.stop');
        running.delete(sessionId);
        if (!profile) continue;
        const name = `${label}${k++ ? `-${k}` : ''}.cpuprofile`;
        writeFileSync(join(CPU_PROF_DIR, name), JSON.stringify(profile));
        printProfileTop(name, profile);
      }
    },
  };
}

/**
 * The functions of a CPU profile with the most samples (self), as shares of the busy samples.
 * Counted, not summed from the profile's time deltas: on a loaded machine the sampling thread waits
 * for a core too, and the sample before such a wait would be charged all of it. Even so the shares
 * are indicative only; the worker's stage timings are the figures.
 */
function printProfileTop(name, profile, top = 12) {
  const nodes = new Map(profile.nodes.map((n) => [n.id, n]));
  const counts = new Map();
  let busy = 0;
  for (const id of profile.samples) {
    const cf = nodes.get(id).callFrame;
    if (cf.functionName === '(idle)') continue;
    const key = `${cf.functionName || '(anonymous)'} ${cf.url.split('/').pop()}:${cf.lineNumber + 1}`;
    counts.set(key, (counts.get(key) ?? 0) + 1);
    busy++;
  }
  console.log(`  CPU profile ${name}: ${busy} busy samples; the functions with the most (self):`);
  for (const [key, n] of [...counts].sort((a, b) => b[1] - a[1]).slice(0, top)) {
    console.log(`    ${((100 * n) / busy).toFixed(1).padStart(5)} %  ${key}`);
  }
}

/**
 * Listening live without a microphone: the app's analysis worker is started as for the
 * microphone and fed blocks of LIVE_BLOCK samples (the capture worklet's) at the pace of the audio, so
 * updates and margin estimates come at their live cadence (they are timed by the wall clock). The
 * signal: noise, then a hum that grows at 2 s and holds steady to the end (the margin is
 * estimated over the steady stretch once it is 10 s long). Two sessions in one worker, as the app
 * keeps one worker for all its runs: the first pays V8's warm-up (the code runs interpreted until
 * it is compiled, on this 2-core machine in the same seconds as the audio), the second is the
 * steady cost; then a third session with the same blocks sent back to back, not paced (how much
 * of the cost is the pace: between blocks the worker idles and the analysis's code and data go
 * cold). Resolves with the worker's stageMs of each, and the CPU time of the worker thread and of
 * the renderer's thread pool (V8's compilation and garbage collection) during each.
 */
async function liveRun(page, seconds, profileDir, profiler) {
  await page.evaluate(() => {
    const w = new window.__NativeWorker(window.__analysisWorkerUrl, { type: 'module' });
    window.__liveWorker = w;
    window.__liveSession = async (id, seconds, blockSamples, isPaced) => {
      const fs = 48_000;
      let finishPostedMs = 0;
      const report = new Promise((resolveReport, rejectReport) => {
        const onMessage = (e) => {
          if (e.data?.id !== id) return;
          // The end of the session as the page sees it: finish() and the last update and audio (wall time).
          if (e.data.type === 'report') resolveReport({ ...e.data.stageMs, endMs: performance.now() - finishPostedMs });
          if (e.data.type === 'error') rejectReport(new Error(e.data.message));
          if (e.data.type === 'report' || e.data.type === 'error') w.removeEventListener('message', onMessage);
        };
        w.addEventListener('message', onMessage);
      });
      w.postMessage({ type: 'start', id, config: { sampleRateHz: fs }, source: 'microphone', isKeepingAudio: true });
      let seed = 777;
      const rand = () => (seed = (seed * 1664525 + 1013904223) >>> 0) / 4294967296;
      const t0 = performance.now();
      for (let k = 0; k * blockSamples < seconds * fs; k++) {
        const wait = t0 + ((k * blockSamples) / fs) * 1000 - performance.now();
        if (isPaced && wait > 0) await new Promise((r) => setTimeout(r, wait));
        const x = new Float32Array(blockSamples);
        for (let i = 0; i < blockSamples; i++) {
          const t = (k * blockSamples + i) / fs;
          const a = t < 2 ? 0 : Math.min(0.3, 0.003 * Math.exp(7 * (t - 2)));
          x[i] = a * Math.sin(2 * Math.PI * 171 * t) + 0.0005 * Math.sqrt(-2 * Math.log(rand() + 1e-12)) * Math.cos(2 * Math.PI * rand());
        }
        w.postMessage({ type: 'block', id, samples: x }, [x.buffer]);
      }
      finishPostedMs = performance.now();
      w.postMessage({ type: 'finish', id });
      return report;
    };
  });
  const session = async (id, isPaced) => {
    const worker0 = threadCpuMs(profileDir, 'DedicatedWorker');
    const pool0 = threadCpuMs(profileDir, 'ThreadPoolForeg');
    const stageMs = await page.evaluate(([id, seconds, block, paced]) => window.__liveSession(id, seconds, block, paced), [id, seconds, LIVE_BLOCK, isPaced]);
    return { stageMs, workerCpuMs: threadCpuMs(profileDir, 'DedicatedWorker') - worker0, poolCpuMs: threadCpuMs(profileDir, 'ThreadPoolForeg') - pool0 };
  };
  const first = await session(1, true);
  const second = await session(2, true);
  const unpaced = await session(3, false);
  await profiler.stopAll('worker-live');
  await page.evaluate(() => window.__liveWorker.terminate());
  return { first, second, unpaced };
}

/**
 * The bench's recording (benchSamplesInt16, decoded as the WAV reader does: value / 32768)
 * analysed twice in one fresh worker, posted whole ('analyse-file'): the first run pays V8's
 * warm-up (the code runs in its lower tiers until compiled), the second is the warm cost the
 * command line's bench measures. Resolves with the worker's stageMs of each.
 */
async function fileTwiceRun(page, seconds, profiler) {
  await page.evaluate(`window.__benchSamplesInt16 = ${benchSamplesInt16.toString()}`);
  const run = (id) =>
    page.evaluate(
      ([id, seconds]) =>
        new Promise((resolveReport, rejectReport) => {
          window.__fileWorker ??= new window.__NativeWorker(window.__analysisWorkerUrl, { type: 'module' });
          const w = window.__fileWorker;
          const x16 = window.__benchSamplesInt16(seconds);
          const x = new Float32Array(x16.length);
          for (let i = 0; i < x.length; i++) x[i] = x16[i] / 32768;
          const onMessage = (e) => {
            if (e.data?.id !== id || (e.data.type !== 'report' && e.data.type !== 'error')) return;
            w.removeEventListener('message', onMessage);
            if (e.data.type === 'report') resolveReport(e.data.stageMs);
            else rejectReport(new Error(e.data.message));
          };
          w.addEventListener('message', onMessage);
          w.postMessage({ type: 'analyse-file', id, config: { sampleRateHz: 48_000, sampleBits: 16 }, channels: [x], isKeepingAudio: true }, [x.buffer]);
        }),
      [id, seconds],
    );
  const fresh = await run(21);
  const warm = await run(22);
  await profiler.stopAll('worker-file-twice');
  await page.evaluate(() => window.__fileWorker.terminate());
  return { fresh, warm };
}

/**
 * The bench's hum recording: cycles of growth, steady tone and decay at 171 Hz in noise, 48 kHz,
 * as 16-bit sample values. Self-contained, so the page can run the same function (page.evaluate).
 */
function benchSamplesInt16(seconds) {
  const fs = 48_000;
  const n = Math.round(seconds * fs);
  const out = new Int16Array(n);
  let seed = 12345;
  const rand = () => ((seed = (seed * 1664525 + 1013904223) >>> 0) / 4294967296);
  const cycleS = 10;
  for (let i = 0; i < n; i++) {
    const t = i / fs;
    const c = t % cycleS;
    let a = 0;
    if (c >= 2 && c < 6) a = Math.min(0.3, 0.003 * Math.exp(7 * (c - 2)));
    else if (c >= 6) a = 0.3 * Math.exp(-4.5 * (c - 6));
    const noise = 0.0005 * Math.sqrt(-2 * Math.log(rand() + 1e-12)) * Math.cos(2 * Math.PI * rand());
    const v = Math.max(-1, Math.min(1, a * Math.sin(2 * Math.PI * 171 * t) + noise));
    out[i] = Math.round(v * 32767);
  }
  return out;
}

/** The bench's hum recording (benchSamplesInt16) as a 48 kHz mono 16-bit WAV file. */
function writeBenchWav(path, seconds) {
  const fs = 48_000;
  const samples = benchSamplesInt16(seconds);
  const n = samples.length;
  const data = Buffer.alloc(44 + 2 * n);
  data.write('RIFF', 0, 'ascii');
  data.writeUInt32LE(36 + 2 * n, 4);
  data.write('WAVEfmt ', 8, 'ascii');
  data.writeUInt32LE(16, 16);
  data.writeUInt16LE(1, 20);
  data.writeUInt16LE(1, 22);
  data.writeUInt32LE(fs, 24);
  data.writeUInt32LE(2 * fs, 28);
  data.writeUInt16LE(2, 32);
  data.writeUInt16LE(16, 34);
  data.write('data', 36, 'ascii');
  data.writeUInt32LE(2 * n, 40);
  for (let i = 0; i < n; i++) data.writeInt16LE(samples[i], 44 + 2 * i);
  writeFileSync(path, data);
}

// ---- 4. Storage figures (opening a 10-minute recording, importing its bundle) -------------------

/** Resident memory, MB, of every renderer process of the browser using `profileDir` (Linux /proc). */
function rendererRssMb(profileDir) {
  let kb = 0;
  for (const pid of readdirSync('/proc')) {
    if (!/^\d+$/.test(pid)) continue;
    try {
      const cmd = readFileSync(`/proc/${pid}/cmdline`, 'utf8');
      if (!cmd.includes('--type=renderer')) continue;
      // Renderers do not carry the profile path; their parent browser does.
      const ppid = readFileSync(`/proc/${pid}/stat`, 'utf8').split(') ')[1].split(' ')[1];
      if (!readFileSync(`/proc/${ppid}/cmdline`, 'utf8').includes(profileDir)) continue;
      const m = /VmRSS:\s+(\d+) kB/.exec(readFileSync(`/proc/${pid}/status`, 'utf8'));
      if (m) kb += Number(m[1]);
    } catch {
      /* the process ended meanwhile */
    }
  }
  return kb / 1024;
}

/** Runs `action` while sampling renderer memory every 50 ms; resolves with its time and the peak. */
async function measured(profileDir, action) {
  let peakMb = rendererRssMb(profileDir);
  const timer = setInterval(() => {
    peakMb = Math.max(peakMb, rendererRssMb(profileDir));
  }, 50);
  const t0 = performance.now();
  try {
    await action();
  } finally {
    clearInterval(timer);
  }
  return { ms: performance.now() - t0, peakMb: Math.max(peakMb, rendererRssMb(profileDir)) };
}

/** A fresh profile with a long-task observer on every page (main-thread stalls of 50 ms and more, W3C Long Tasks API). */
async function freshBrowser(exe) {
  const profileDir = mkdtempSync(join(tmpdir(), 'humgauge-bench-store-'));
  const context = await chromium.launchPersistentContext(profileDir, {
    executablePath: exe,
    headless: true,
    acceptDownloads: true,
    viewport: { width: 412, height: 915 },
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--no-first-run', '--disable-background-networking'],
  });
  await context.addInitScript(() => {
    window.__stallsMs = [];
    new PerformanceObserver((list) => {
      for (const e of list.getEntries()) window.__stallsMs.push(e.duration);
    }).observe({ type: 'longtask', buffered: true });
  });
  const page = context.pages()[0] ?? (await context.newPage());
  return { context, page, profileDir };
}

/** Closes the first-run notice when it shows (it appears a moment after load, once per profile). */
async function dismissFirstRun(page) {
  try {
    await page.locator('#first-run-ok').waitFor({ state: 'visible', timeout: 4000 });
    await page.click('#first-run-ok');
  } catch {
    /* not shown */
  }
}

const longestStallMs = (page) => page.evaluate(() => Math.max(0, ...window.__stallsMs));
const clearStalls = (page) => page.evaluate(() => void (window.__stallsMs.length = 0));

/** Opens a 10-minute recording on the Listen screen, exports its bundle, and imports it into another profile. */
async function benchStore(exe) {
  const minutes = 10;
  const wav = resolve('e2e-out/bench-store-10min.wav');
  writeBenchWav(wav, minutes * 60);
  const bundle = resolve('e2e-out/bench-store-10min.zip');
  const out = {};

  const a = await freshBrowser(exe);
  try {
    await a.page.goto(URL);
    await a.page.waitForSelector('#listen-button');
    await dismissFirstRun(a.page);
    await clearStalls(a.page);
    out.open = await measured(a.profileDir, async () => {
      await a.page.setInputFiles('#file-input', wav);
      await a.page.waitForSelector('#analysis-cost', { timeout: 600_000 });
    });
    out.open.stallMs = await longestStallMs(a.page);
    // The session is saved with its audio; export it as the app does.
    await a.page.goto(`${URL}#sessions`);
    await a.page.waitForSelector('.session-item .session-link', { timeout: 120_000 });
    await a.page.click('.session-item .session-link');
    const [download] = await Promise.all([a.page.waitForEvent('download', { timeout: 300_000 }), a.page.click('#export-bundle')]);
    copyFileSync(await download.path(), bundle);
  } finally {
    await a.context.close();
  }
  out.bundleMb = readFileSync(bundle).length / 1e6;

  const b = await freshBrowser(exe);
  try {
    await b.page.goto(`${URL}#sessions`);
    await dismissFirstRun(b.page);
    await b.page.waitForSelector('#import-file', { state: 'attached' });
    await clearStalls(b.page);
    out.import = await measured(b.profileDir, async () => {
      await b.page.setInputFiles('#import-file', bundle);
      await b.page.waitForFunction(() => /imported 1 session|not imported/.test(document.querySelector('#status')?.textContent ?? ''), null, { timeout: 600_000 });
    });
    out.import.stallMs = await longestStallMs(b.page);
    out.importStatus = await b.page.locator('#status').textContent();
  } finally {
    await b.context.close();
  }
  return out;
}

function printStore(store) {
  if (!store) {
    line('opening a 10-minute recording: longest stall', Number.NaN, 'ms', '< 100 ms', false);
    return;
  }
  line('opening a 10-minute recording: time to result', store.open.ms / 1000, 's', 'printed', true);
  line('opening a 10-minute recording: peak renderer memory', store.open.peakMb, 'MB', 'printed', true);
  line('opening a 10-minute recording: longest main-thread stall', store.open.stallMs, 'ms', '< 100 ms', store.open.stallMs < 100);
  line('importing its bundle: time', store.import.ms / 1000, 's', 'printed', true);
  line('importing its bundle: peak renderer memory', store.import.peakMb, 'MB', 'printed', true);
  line('importing its bundle: longest main-thread stall', store.import.stallMs, 'ms', '< 100 ms', store.import.stallMs < 100);
  console.log(`  bundle of the 10-minute session (16-bit audio): ${store.bundleMb.toFixed(1)} MB; import said: ${store.importStatus}`);
  console.log('  stalls are long tasks (≥ 50 ms) on the page\'s main thread; 0 means none; memory is the resident size of all renderer processes (page and workers)');
}

async function main() {
  if (!existsSync(join(DIST, 'index.html'))) {
    console.error(`${DIST}/index.html is missing: build the app first (npx vite build).`);
    process.exit(2);
  }
  console.log(`humgauge browser bench — app ${resolve(DIST)}, ${new Date().toISOString()}`);
  const js = initialJsGzipKb();

  const server = spawn('npx', ['vite', 'preview', '--outDir', `../${DIST}`, '--host', '127.0.0.1', '--port', String(PORT), '--strictPort'], { stdio: 'ignore', detached: true });
  const stopServer = () => {
    try {
      process.kill(-server.pid, 'SIGTERM');
    } catch {
      /* already gone */
    }
  };
  let costMsPerS = Number.NaN;
  let liveMsPerS = Number.NaN;
  let liveWarmMsPerS = Number.NaN;
  let liveCpu = null;
  const stageRows = [];
  /** dsp/ push() and finish() per s of audio in runs that tell warm-up and pace apart: [label, ms/s]. */
  const whereRows = [];
  let firstPaintMs = Number.NaN;
  let detail = '';
  let store = null;
  try {
    for (let i = 0; ; i++) {
      try {
        if ((await fetch(URL)).ok) break;
      } catch {
        /* not up yet */
      }
      if (i > 150) throw new Error('vite preview did not start');
      await new Promise((r) => setTimeout(r, 200));
    }
    const exe = process.env.CHROMIUM_PATH || execSync('command -v chromium').toString().trim();
    const benchProfile = mkdtempSync(join(tmpdir(), 'humgauge-bench-'));
    const context = await chromium.launchPersistentContext(benchProfile, {
      executablePath: exe,
      headless: true,
      viewport: { width: 412, height: 915 },
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--no-first-run', '--disable-background-networking', ...(JS_FLAGS ? [`--js-flags=${JS_FLAGS}`] : [])],
    });
    const page = context.pages()[0] ?? (await context.newPage());
    const profiler = await workerProfiler(page);
    // The worker's report carries the time it spent on each job: keep a copy as the app receives it.
    await page.addInitScript(() => {
      const NativeWorker = window.Worker;
      window.__NativeWorker = NativeWorker;
      window.Worker = class extends NativeWorker {
        constructor(...a) {
          super(...a);
          if (a[1]?.name === 'analysis') window.__analysisWorkerUrl = String(a[0]);
          this.addEventListener('message', (e) => {
            if (e.data?.type === 'report' && e.data.stageMs) window.__workerStageMs = e.data.stageMs;
          });
        }
      };
    });

    // 1. Worker cost: open a long recording; the worker times each of its jobs.
    mkdirSync('e2e-out', { recursive: true });
    const wav = resolve('e2e-out/bench-browser.wav');
    writeBenchWav(wav, SECONDS);
    await page.goto(URL);
    await page.waitForSelector('#listen-button');
    if (await page.locator('#first-run-ok').count()) await page.click('#first-run-ok');
    const workersBefore = threadCpuMsByThread(benchProfile, 'DedicatedWorker');
    await page.setInputFiles('#file-input', wav);
    await page.waitForSelector('#analysis-cost', { timeout: 300_000 });
    // The analysis worker is the worker thread that ran longest meanwhile (the page's storage workers do far less).
    let fileWorkerCpuMs = 0;
    for (const [tid, ms] of threadCpuMsByThread(benchProfile, 'DedicatedWorker')) fileWorkerCpuMs = Math.max(fileWorkerCpuMs, ms - (workersBefore.get(tid) ?? 0));
    const cost = page.locator('#analysis-cost');
    const analysisMs = Number(await cost.getAttribute('data-analysis-ms'));
    const audioS = Number(await cost.getAttribute('data-audio-s'));
    const stages = await page.evaluate(() => window.__workerStageMs ?? null);
    if (stages) {
      const file = workerStageRows(stages, audioS, 'file');
      costMsPerS = file.msPerS;
      stageRows.push(...file.rows);
      stageRows.push(`${'file:'.padEnd(22)} ${'the worker thread\'s CPU time (/proc) over its jobs\' wall time'.padEnd(48)} ${(fileWorkerCpuMs / audioS).toFixed(2).padStart(6)} ms/s of ${file.msPerS.toFixed(2)} (the rest it waited for a core: the page drawing, the session being stored, other processes)`);
    }
    await profiler.stopAll('worker-file');
    if (LIVE_SECONDS > 0) {
      const { first, second, unpaced } = await liveRun(page, LIVE_SECONDS, benchProfile, profiler);
      const live = workerStageRows(first.stageMs, LIVE_SECONDS, 'live, fresh worker');
      const warm = workerStageRows(second.stageMs, LIVE_SECONDS, 'live, second session');
      liveMsPerS = live.msPerS;
      liveWarmMsPerS = warm.msPerS;
      liveCpu = { first, second };
      stageRows.push(...live.rows, ...warm.rows);
      whereRows.push([`live, ${LIVE_SECONDS} s, paced as the audio arrives (the second session above)`, second.stageMs.analysis / LIVE_SECONDS]);
      whereRows.push([`  of which the session's end (finish message to report, as the page waits for it)`, second.stageMs.endMs / LIVE_SECONDS]);
      whereRows.push([`live, the same blocks back to back in the same worker (not paced)`, unpaced.stageMs.analysis / LIVE_SECONDS]);
    }
    const twice = await fileTwiceRun(page, SECONDS, profiler);
    whereRows.unshift(
      [`file, ${SECONDS} s posted whole to a fresh worker (V8 warm-up included)`, twice.fresh.analysis / SECONDS],
      ['file, the same again in the same worker (its code compiled)', twice.warm.analysis / SECONDS],
    );
    // Wall time inside the worker: other load on the machine inflates it (the load average says how much).
    detail = `${audioS.toFixed(0)} s of 48 kHz audio, dsp/ push + finish ${analysisMs.toFixed(0)} ms (${(audioS / (analysisMs / 1000)).toFixed(0)}× real time; load average ${loadavg()[0].toFixed(1)} on ${cpus().length} CPUs)`;

    // 3. First paint offline: wait until the service worker controls the page, go offline, reload.
    await page.waitForFunction(() => navigator.serviceWorker.controller?.state === 'activated', null, { timeout: 30_000 });
    await context.setOffline(true);
    const samples = [];
    for (let k = 0; k < 5; k++) {
      await page.reload({ waitUntil: 'load' });
      await page.waitForSelector('#listen-button');
      const fp = await page.evaluate(
        () =>
          new Promise((resolvePaint) => {
            const find = () => performance.getEntriesByType('paint').find((e) => e.name === 'first-contentful-paint') ?? performance.getEntriesByType('paint').find((e) => e.name === 'first-paint');
            const e = find();
            if (e) resolvePaint(e.startTime);
            else new PerformanceObserver((list) => resolvePaint(list.getEntries()[0]?.startTime ?? NaN)).observe({ type: 'paint', buffered: true });
          }),
      );
      samples.push(Number(fp));
    }
    samples.sort((a, b) => a - b);
    firstPaintMs = samples[Math.floor(samples.length / 2)];
    detail += `; offline first paint over 5 reloads: ${samples.map((s) => s.toFixed(0)).join(', ')} ms`;
    await context.close();
    if (!args.includes('--no-store')) {
      try {
        store = await benchStore(exe);
      } catch (err) {
        console.error(`storage figures not measured: ${err instanceof Error ? err.message : String(err)}`);
      }
    }
  } finally {
    stopServer();
  }

  line('browser worker, all jobs, per s of 48 kHz (file)', costMsPerS, 'ms', '≤ 5 ms', costMsPerS <= 5);
  line(`browser worker, all jobs, per s of 48 kHz (live, ${LIVE_SECONDS} s, fresh worker)`, liveMsPerS, 'ms', '≤ 5 ms', liveMsPerS <= 5);
  line(`browser worker, all jobs, per s of 48 kHz (live, ${LIVE_SECONDS} s, second session)`, liveWarmMsPerS, 'ms', '≤ 5 ms', liveWarmMsPerS <= 5);
  for (const r of stageRows) console.log(`  ${r}`);
  if (whereRows.length) {
    console.log('  where the worker\'s dsp/ time goes (dsp/ push() and finish(), ms per s of audio; the command line\'s bench times warm code back to back, best of 8):');
    for (const [label, v] of whereRows) console.log(`    ${label.padEnd(86)} ${v.toFixed(2).padStart(6)} ms/s`);
  }
  if (liveCpu) {
    for (const [label, c] of [['fresh worker', liveCpu.first], ['second session', liveCpu.second]]) {
      const v = c.workerCpuMs / LIVE_SECONDS;
      line(`worker thread CPU per s of 48 kHz (live, ${label})`, v, 'ms', '≤ 5 ms', v <= 5);
      console.log(`  and the renderer's thread pool (V8 compiling and collecting garbage, the page's own included): ${(c.poolCpuMs / LIVE_SECONDS).toFixed(2)} ms/s`);
    }
    console.log(`  CPU time from /proc in ticks of ${CLOCK_TICK_MS.toFixed(0)} ms over ${LIVE_SECONDS} s of audio: not slowed by other processes, unlike the wall-time figures above`);
  }
  line('initial JavaScript, gzipped', js.kb, 'KB', '≤ 200 KB', js.kb <= 200);
  line('first paint of the installed app, offline (median)', firstPaintMs, 'ms', '≤ 1000 ms', firstPaintMs <= 1000);
  console.log(`  ${detail}`);
  console.log(`  initial JS: ${js.parts.join(', ')}`);
  if (!args.includes('--no-store')) printStore(store);
}

main().catch((err) => {
  console.error(`bench failed: ${err instanceof Error ? err.message : String(err)}`);
  process.exit(1);
});
