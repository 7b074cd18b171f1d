/**
 * `humgauge analyze FILE`: streams a WAV recording or a pressure-sensor CSV through the same
 * analysis object the app uses, and prints a readable summary, the report as JSON, or the
 * per-frame track as CSV.
 */

import { basename } from 'node:path';
import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../condition';
import { STATES, TrackColumns, analyzeInput, failureOf, type AnalyzeSettings } from './analyze-file';
import { paFromSplDb } from '../levels';
import type { Report } from '../types';
import { isFolder, runBatch } from './batch';
import { finalStates } from '../final-states';
import { renderSummary } from './format';
import { CliError, EXIT, type CliIo } from './io';
import { HELP_OPTION, hasFlag, numberOption, optionsHelp, parseCommandArgs, parseNumberValue, quote, textOption, type OptionTable } from './options';
import { openInput } from './read-file';

/** Options of `humgauge analyze`. */
export const ANALYZE_OPTIONS: OptionTable = {
  json: { kind: 'flag', help: 'print the report (JSON; field names carry their units)' },
  csv: { kind: 'flag', help: 'print the per-frame track: time_s,frequency_hz,amplitude_dbfs,state\n(CSV input: also amplitude_pa_rms,amplitude_db_spl)' },
  band: { kind: 'text', value: 'LOW-HIGH', help: 'band of interest in Hz (default 20-4000), e.g. --band 50-600' },
  rate: {
    kind: 'number',
    value: 'HZ',
    unit: 'Hz',
    min: MIN_SAMPLE_RATE_HZ,
    max: MAX_SAMPLE_RATE_HZ,
    help: `sample rate of a one-column CSV, Hz (${MIN_SAMPLE_RATE_HZ} to ${MAX_SAMPLE_RATE_HZ})`,
  },
  channel: { kind: 'number', value: 'N', unit: '', min: 1, max: 65535, isInteger: true, help: 'read channel N only (1 = first/left); default: mix all to mono' },
  summary: { kind: 'text', value: 'FILE', help: 'write one CSV row per file and tone (several files or a folder;\nwithout it the rows go to standard output)' },
  'json-dir': { kind: 'text', value: 'DIR', help: 'write each file\'s report as DIR/NAME.json (several files)' },
  jobs: { kind: 'number', value: 'N', unit: '', min: 1, max: 1024, isInteger: true, help: 'files analysed at once (default: one per processor core)' },
  help: HELP_OPTION,
};

/** Text of `humgauge analyze --help`: every option, an example, the units. */
export const ANALYZE_HELP = `Usage: humgauge analyze FILE... [options]

Finds tones and their onsets in a recording, splits the main tone's history into
quiet / growth / steady / decay segments, fits growth and decay rates with 95 %
intervals, and derives effective gain, damping ratio, Q, e-folding and doubling
time and T60.

FILE is a WAV file (PCM 8/16/24/32-bit, float 32/64-bit, WAVE_FORMAT_EXTENSIBLE,
any channel count, ${MIN_SAMPLE_RATE_HZ / 1000}-${MAX_SAMPLE_RATE_HZ / 1000} kHz) or a pressure-sensor CSV: "time_s,pressure_pa" with
a header line (rate from the mean time step), or one column of values with --rate.
"-" reads standard input; pipes and <(...) are read as streams. Several files or
a folder (its .wav and .csv files) are analysed one per core: a summary row per
file and tone, each report with --json-dir, a failing file gives an error row.

Options
${optionsHelp(ANALYZE_OPTIONS)}
Example
  humgauge analyze public/demo/bench-tube.wav
  humgauge analyze sensor.csv --band 100-400 --json > report.json
  humgauge analyze logs/ --summary season.csv --json-dir reports/

Rates are amplitude e-folding rates in 1/s: growth positive, decay given as a
positive decay rate (the amplitude falls as e^(-rate t)).
Levels are dBFS (0 dBFS = full-scale sine); CSV values are taken as pressures in
Pa, scaled for the analysis, and their levels are also given in Pa and dB SPL.
`;

export { exitCodeOf } from './analyze-file';

/** Parsed options of `humgauge analyze`. */
export interface AnalyzeOptions extends Omit<AnalyzeSettings, 'keepTrack'> {
  /** Inputs as given (files, folders, "-"). */
  files: string[];
  output: 'summary' | 'json' | 'csv';
  summaryPath?: string;
  jsonDir?: string;
  jobs?: number;
  isHelp: boolean;
}

/** A decimal number inside a LOW-HIGH band (no sign: a band edge is above 0 Hz). */
const BAND_NUM = String.raw`(\d+(?:\.\d*)?(?:[eE][+-]?\d+)?|\.\d+(?:[eE][+-]?\d+)?)`;
const BAND_RE = new RegExp(String.raw`^\s*${BAND_NUM}\s*[-:]\s*${BAND_NUM}\s*$`);

/** Parses "LOW-HIGH" (Hz); the band's limits against the sample rate are the analysis's (dsp/condition.ts). */
export function parseBand(text: string): { lowHz: number; highHz: number } {
  const m = BAND_RE.exec(text);
  if (!m) throw new CliError(`--band wants LOW-HIGH in Hz (e.g. 50-600), got "${quote(text)}"`, EXIT.USAGE);
  const spec = { unit: 'Hz' };
  const lowHz = parseNumberValue('--band', m[1], spec);
  const highHz = parseNumberValue('--band', m[2], spec);
  if (!(lowHz > 0 && highHz > lowHz)) throw new CliError(`--band ${quote(text)}: LOW must be above 0 and below HIGH`, EXIT.BAD_PARAMETER);
  return { lowHz, highHz };
}

/** Parses the arguments after `analyze`; throws CliError(USAGE) for anything it does not know. */
export function parseAnalyzeArgs(args: string[]): AnalyzeOptions {
  const p = parseCommandArgs('analyze', ANALYZE_OPTIONS, args);
  const isJson = hasFlag(p, 'json');
  const isCsv = hasFlag(p, 'csv');
  if (isJson && isCsv) throw new CliError('--json and --csv cannot be combined', EXIT.USAGE);
  const o: AnalyzeOptions = { files: p.positionals, output: isJson ? 'json' : isCsv ? 'csv' : 'summary', isHelp: hasFlag(p, 'help') };
  const band = textOption(p, 'band');
  if (band !== undefined) {
    const b = parseBand(band);
    o.bandLowHz = b.lowHz;
    o.bandHighHz = b.highHz;
  }
  o.rateHz = numberOption(p, 'rate');
  o.channel = numberOption(p, 'channel');
  o.summaryPath = textOption(p, 'summary');
  o.jsonDir = textOption(p, 'json-dir');
  o.jobs = numberOption(p, 'jobs');
  if (o.isHelp) return o;
  if (o.files.length === 0) throw new CliError('no input file (usage: humgauge analyze FILE... [options])', EXIT.USAGE);
  return o;
}

/** Progress on stderr (only on a terminal, only for inputs over 30 s). */
class Progress {
  private lastMs = 0;
  private shown = false;
  constructor(
    private readonly io: CliIo,
    private readonly label: string,
  ) {}
  update(fraction: number, totalS: number): void {
    if (!this.io.isErrTty || totalS <= 30) return;
    const now = Date.now();
    if (now - this.lastMs < 250) return;
    this.lastMs = now;
    this.shown = true;
    const pct = Math.min(100, Math.floor(fraction * 100));
    this.io.err(`\r${this.label}: ${String(pct).padStart(3)} % of ${totalS.toFixed(0)} s`);
  }
  done(): void {
    if (this.shown) this.io.err('\r\x1b[K');
  }
}

/**
 * The per-frame track as CSV text. The state column follows the report's final segments of the
 * main tone (dsp/final-states.ts), not the live states that lag them. For pressure input
 * (`splOffsetDb` given) the level is also given in Pa RMS and dB SPL.
 */
export function trackCsv(track: TrackColumns, report?: Report, splOffsetDb?: number): string {
  const final = report ? finalStates(track.timeS.subarray(0, track.length), report) : null;
  const hasSpl = splOffsetDb !== undefined;
  const lines: string[] = [`time_s,frequency_hz,amplitude_dbfs,${hasSpl ? 'amplitude_pa_rms,amplitude_db_spl,' : ''}state`];
  for (let i = 0; i < track.length; i++) {
    const t = track.timeS[i];
    const f = track.freqHz[i];
    const a = track.ampDbfs[i];
    const state = final ? final[i] : (STATES[track.state[i]] ?? '');
    const spl = hasSpl && Number.isFinite(a) ? `${paFromSplDb(a + splOffsetDb).toPrecision(4)},${(a + splOffsetDb).toFixed(2)},` : hasSpl ? ',,' : '';
    lines.push(`${t.toFixed(4)},${Number.isFinite(f) ? f.toFixed(2) : ''},${Number.isFinite(a) ? a.toFixed(2) : ''},${spl}${state}`);
  }
  return lines.join('\n') + '\n';
}

/** Runs `humgauge analyze`; returns the exit code. Every failure is one line on stderr. */
export async function runAnalyze(args: string[], io: CliIo): Promise<number> {
  let label = 'humgauge';
  try {
    const opts = parseAnalyzeArgs(args);
    if (opts.isHelp) {
      io.out(ANALYZE_HELP);
      return EXIT.OK;
    }
    const isBatch = opts.files.length > 1 || opts.summaryPath !== undefined || opts.jsonDir !== undefined || (await isFolder(opts.files[0]));
    if (isBatch) return await runBatch(opts, io);
    const file = opts.files[0];
    label = file === '-' ? 'stdin' : file;
    const input = await openInput(file);
    const progress = new Progress(io, file === '-' ? 'stdin' : basename(file));
    const run = await analyzeInput(input, { ...opts, keepTrack: opts.output === 'csv' }, (f, t) => progress.update(f, t));
    progress.done();
    // A stream's path (/dev/fd/63 of a <(...)) says more than its last part.
    run.facts.fileName = file === '-' ? 'standard input' : input.size === null ? file : basename(file);
    if (opts.output === 'json') io.out(JSON.stringify(run.report, null, 2) + '\n');
    else if (opts.output === 'csv' && run.track) io.out(trackCsv(run.track, run.report, run.facts.splOffsetDb));
    else io.out(renderSummary(run.report, run.facts));
    return EXIT.OK;
  } catch (e) {
    return reportFailure(e, io, label);
  }
}

/** One line on stderr, "humgauge: <file>: <problem>", and the exit code of the failure. */
export function reportFailure(e: unknown, io: CliIo, label: string): number {
  const where = label === 'humgauge' ? 'humgauge' : `humgauge: ${label}`;
  const f = failureOf(e);
  io.err(`${f.exitCode === EXIT.USAGE && label === 'humgauge' ? 'humgauge' : where}: ${f.message}\n`);
  return f.exitCode;
}
