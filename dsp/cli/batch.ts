/**
 * `humgauge analyze FILE… | FOLDER`: many inputs, one per processor core on worker threads
 * (analyze-worker.ts), a progress line on a terminal, one summary row per file and tone, and each
 * report as JSON beside it. A failing file gives its error row and the batch goes on.
 */

import { existsSync } from 'node:fs';
import { mkdir, readdir, stat, writeFile } from 'node:fs/promises';
import { availableParallelism } from 'node:os';
import { basename, extname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { Report, Segment } from '../types';
import { analyzeFile, type AnalyzeSettings, type FileOutcome } from './analyze-file';
import { groupByTone } from './format';
import { CliError, EXIT, type CliIo } from './io';

/** What runBatch needs of the parsed options. */
export interface BatchOptions extends Omit<AnalyzeSettings, 'keepTrack'> {
  files: string[];
  output: 'summary' | 'json' | 'csv';
  summaryPath?: string;
  jsonDir?: string;
  jobs?: number;
}

/** Extensions taken from a folder (the readers sniff the content; these are the names they expect). */
const FOLDER_EXTENSIONS = new Set(['.wav', '.wave', '.csv', '.txt', '.tsv', '.dat']);

export async function isFolder(path: string): Promise<boolean> {
  if (path === '-') return false;
  try {
    return (await stat(path)).isDirectory();
  } catch {
    return false;
  }
}

/** Files named on the command line, with each folder replaced by its recordings (sorted, not recursive). */
export async function expandInputs(paths: string[]): Promise<string[]> {
  const out: string[] = [];
  for (const p of paths) {
    if (p === '-') throw new CliError('standard input ("-") is one input: analyse it alone', EXIT.USAGE);
    if (await isFolder(p)) {
      const names = (await readdir(p)).filter((n) => FOLDER_EXTENSIONS.has(extname(n).toLowerCase())).sort();
      out.push(...names.map((n) => join(p, n)));
    } else out.push(p);
  }
  return out;
}

/** The worker script beside the bundled command line; absent when running from the TypeScript sources. */
function workerScript(): string | null {
  const url = new URL('./analyze-worker.js', import.meta.url);
  if (url.protocol !== 'file:') return null;
  const path = fileURLToPath(url);
  return existsSync(path) ? path : null;
}

/**
 * Analyses `files` with `jobs` workers at once and calls `done` for each outcome as it arrives
 * (in completion order); returns the outcomes in input order. Without the bundled worker script
 * (tests run the sources), the files are analysed one after another on this thread.
 */
export async function analyzeMany(
  files: string[],
  settings: AnalyzeSettings,
  jobs: number,
  done: (o: FileOutcome) => void = () => {},
): Promise<FileOutcome[]> {
  const results: FileOutcome[] = new Array<FileOutcome>(files.length);
  const script = workerScript();
  if (script === null || jobs <= 1 || files.length <= 1) {
    for (let i = 0; i < files.length; i++) {
      results[i] = await analyzeFile(files[i], settings);
      done(results[i]);
    }
    return results;
  }
  let next = 0;
  const runWorker = (): Promise<void> =>
    new Promise((resolve, reject) => {
      const w = new Worker(script, { workerData: { settings } });
      let current = -1;
      const feed = (): void => {
        if (next >= files.length) {
          void w.terminate().then(() => resolve());
          return;
        }
        current = next++;
        w.postMessage(files[current]);
      };
      w.on('message', (o: FileOutcome) => {
        results[current] = o;
        done(o);
        feed();
      });
      w.on('error', (e) => {
        // A worker that dies takes only its file with it: record it and carry on with a new worker.
        if (current >= 0 && results[current] === undefined) {
          results[current] = { file: files[current], ok: false, exitCode: EXIT.INTERNAL, message: `internal error: ${e.message.split('\n')[0]}` };
          done(results[current]);
        }
        runWorker().then(resolve, reject);
      });
      feed();
    });
  await Promise.all(Array.from({ length: Math.min(jobs, files.length) }, runWorker));
  return results;
}

/** Runs the batch; exit 0 when every file was analysed, BATCH_FAILED when any failed. */
export async function runBatch(opts: BatchOptions, io: CliIo): Promise<number> {
  if (opts.output !== 'summary') {
    throw new CliError(`--${opts.output} prints one file's ${opts.output === 'json' ? 'report' : 'track'}: with several files use --json-dir DIR and --summary FILE`, EXIT.USAGE);
  }
  const files = await expandInputs(opts.files);
  if (files.length === 0) throw new CliError(`no .wav or .csv files in ${opts.files.join(' ')}`, EXIT.USAGE);
  if (opts.jsonDir !== undefined) {
    try {
      await mkdir(opts.jsonDir, { recursive: true });
    } catch (e) {
      throw new CliError(`--json-dir ${opts.jsonDir}: cannot be created (${(e as { code?: string }).code ?? (e as Error).message})`, EXIT.WRITE_FAILED);
    }
  }
  const jobs = opts.jobs ?? availableParallelism();
  let finished = 0;
  let failed = 0;
  const jsonNames = reportNames(files);
  const writes: Promise<void>[] = [];
  const outcomes = await analyzeMany(files, { ...opts, keepTrack: false }, jobs, (o) => {
    finished++;
    if (!o.ok) failed++;
    if (o.ok && opts.jsonDir !== undefined) writes.push(writeJson(join(opts.jsonDir, jsonNames.get(o.file) as string), o.report));
    if (io.isErrTty) io.err(`\r${finished}/${files.length} files${failed > 0 ? `, ${failed} failed` : ''}\x1b[K`);
  });
  if (io.isErrTty) io.err('\r\x1b[K');
  await Promise.all(writes);
  const text = summaryCsv(outcomes);
  if (opts.summaryPath !== undefined) {
    try {
      await writeFile(opts.summaryPath, text);
    } catch (e) {
      throw new CliError(`--summary ${opts.summaryPath}: cannot be written (${(e as { code?: string }).code ?? (e as Error).message})`, EXIT.WRITE_FAILED);
    }
  } else io.out(text);
  for (const o of outcomes) if (!o.ok) io.err(`humgauge: ${o.file}: ${o.message}\n`);
  if (opts.summaryPath !== undefined) {
    io.err(`${files.length - failed} of ${files.length} files analysed; summary in ${opts.summaryPath}${opts.jsonDir !== undefined ? `, reports in ${opts.jsonDir}` : ''}\n`);
  }
  return failed > 0 ? EXIT.BATCH_FAILED : EXIT.OK;
}

async function writeJson(path: string, report: Report): Promise<void> {
  try {
    await writeFile(path, JSON.stringify(report, null, 2) + '\n');
  } catch (e) {
    throw new CliError(`cannot write ${path} (${(e as { code?: string }).code ?? (e as Error).message})`, EXIT.WRITE_FAILED);
  }
}

/** NAME.json per input; two inputs of the same name (from different folders) get -2, -3, …. */
function reportNames(files: string[]): Map<string, string> {
  const used = new Set<string>();
  const names = new Map<string, string>();
  for (const f of files) {
    const stem = basename(f, extname(f));
    let name = `${stem}.json`;
    for (let k = 2; used.has(name); k++) name = `${stem}-${k}.json`;
    used.add(name);
    names.set(f, name);
  }
  return names;
}

/** Columns of the summary CSV (rates in 1/s; a decay rate is positive: the amplitude falls as e^(−rate·t)). */
export const SUMMARY_COLUMNS = [
  'file',
  'status',
  'tone_frequency_hz',
  'kind',
  'cycles',
  'onsets',
  'growth_fits',
  'growth_rate_median_per_s',
  'growth_rate_ci95_low_per_s',
  'growth_rate_ci95_high_per_s',
  'decay_fits',
  'decay_rate_median_per_s',
  'decay_rate_ci95_low_per_s',
  'decay_rate_ci95_high_per_s',
  'warnings',
] as const;

/** The summary CSV: one row per file and tone (main tone first), one error row per failed file. */
export function summaryCsv(outcomes: FileOutcome[]): string {
  const lines = [SUMMARY_COLUMNS.join(',')];
  for (const o of outcomes) {
    if (!o.ok) {
      lines.push(csvRow([o.file, `error ${o.exitCode}`, '', '', '', '', '', '', '', '', '', '', '', '', o.message]));
      continue;
    }
    const groups = groupByTone(o.report);
    const warnings = (o.report.warnings ?? []).join(' | ');
    if (groups.length === 0) lines.push(csvRow([o.file, 'no tone', '', '', '0', '0', '0', '', '', '', '0', '', '', '', warnings]));
    for (const g of groups) {
      const grow = medianRate(g.segments.filter((s) => s.kind === 'growth'), 1);
      const decay = medianRate(g.segments.filter((s) => s.kind === 'decay'), -1);
      const cycles = (o.report.tones?.find((t) => t.frequencyHz === g.frequencyHz) as { cycles?: unknown } | undefined)?.cycles;
      lines.push(
        csvRow([
          o.file,
          'ok',
          g.frequencyHz.toFixed(2),
          g.isSteadyLine ? 'steady line' : 'tone',
          String(Array.isArray(cycles) ? cycles.length : typeof cycles === 'number' ? cycles : g.onsets),
          String(g.onsets),
          String(grow.count),
          fixed(grow.median),
          fixed(grow.ci[0]),
          fixed(grow.ci[1]),
          String(decay.count),
          fixed(decay.median),
          fixed(decay.ci[0]),
          fixed(decay.ci[1]),
          warnings,
        ]),
      );
    }
  }
  return lines.join('\n') + '\n';
}

function fixed(x: number | null): string {
  return x === null || !Number.isFinite(x) ? '' : x.toFixed(3);
}

/** RFC 4180 quoting: fields with a comma, quote or line break go in quotes, quotes doubled. */
function csvRow(cells: string[]): string {
  return cells.map((c) => (/[",\r\n]/.test(c) ? `"${c.replace(/"/g, '""')}"` : c)).join(',');
}

/**
 * Median of the fitted rates of some segments (sign −1 turns decays into positive decay rates) and
 * a 95 % interval: one fit gives its own interval; from 6 fits on, the distribution-free interval of
 * the median from order statistics (binomial(n, ½) quantiles; Conover, Practical Nonparametric
 * Statistics, 3rd ed., §3.2); with 2–5 fits, which cannot reach 95 % that way, the span from the
 * lowest lower bound to the highest upper bound of the fits.
 */
export function medianRate(segments: Segment[], sign: 1 | -1): { count: number; median: number | null; ci: [number | null, number | null] } {
  const fits = segments.filter((s) => s.ratePerS !== null && Number.isFinite(s.ratePerS));
  const n = fits.length;
  if (n === 0) return { count: 0, median: null, ci: [null, null] };
  const rates = fits.map((s) => sign * (s.ratePerS as number)).sort((a, b) => a - b);
  const median = n % 2 === 1 ? rates[(n - 1) / 2] : (rates[n / 2 - 1] + rates[n / 2]) / 2;
  const bounds = fits
    .filter((s) => s.rateCi95PerS)
    .map((s) => {
      const [a, b] = s.rateCi95PerS as [number, number];
      return sign === 1 ? [a, b] : [-b, -a];
    });
  if (n >= 6) {
    const j = orderStatisticIndex(n);
    return { count: n, median, ci: [rates[j - 1], rates[n - j]] };
  }
  if (bounds.length !== n) return { count: n, median, ci: [null, null] };
  return { count: n, median, ci: [Math.min(...bounds.map((b) => b[0])), Math.max(...bounds.map((b) => b[1]))] };
}

/** Largest j with P(X ≤ j − 1) ≤ 0.025 for X ~ binomial(n, ½): [x_(j), x_(n+1−j)] covers the median ≥ 95 %. */
function orderStatisticIndex(n: number): number {
  let cdf = 0;
  let pmf = 0.5 ** n;
  let j = 0;
  for (let k = 0; k < n; k++) {
    cdf += pmf;
    if (cdf > 0.025) break;
    j = k + 1;
    pmf = (pmf * (n - k)) / (k + 1);
  }
  return Math.max(1, j);
}
