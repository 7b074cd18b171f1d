/**
 * `humgauge analyze FILE`: streams a WAV recording or a pressure-sensor CSV through the same
 * analysis object the app uses, and prints a readable summary, the report as JSON, or the
 * per-frame track as CSV.
 */

import { basename } from 'node:path';
import { createAnalysis } from '../index';
import { createCsvDecoder, type CsvSummary } from '../io/csv';
import { InputError, type InputProblem } from '../io/errors';
import { createWavDecoder, type WavFormat } from '../io/wav';
import type { Analysis, AnalysisUpdate, RegimeKind, Report } from '../types';
import { renderSummary, type InputFacts } from './format';
import { CliError, EXIT, type CliIo } from './io';
import { fileSize, readChunks, sniffKind } from './read-file';

/** Text of `humgauge analyze --help`: every option, an example, the units. */
export const ANALYZE_HELP = `Usage: humgauge analyze FILE [options]

Finds tones and their onsets in a recording, splits the main tone's history into
quiet / growth / steady / decay segments, fits growth and decay rates with 95 %
intervals, and derives effective gain, damping ratio, Q, e-folding and doubling
time and T60.

FILE is a WAV file (PCM 8/16/24/32-bit, float 32/64-bit, WAVE_FORMAT_EXTENSIBLE,
any channel count, 8-192 kHz) or a pressure-sensor CSV: "time_s,pressure_pa" with
a header line (rate from the mean time step), or one column of values with --rate.

Options
  --json            print the report (JSON; field names carry their units)
  --csv             print the per-frame track: time_s,frequency_hz,amplitude_dbfs,state
  --band LOW-HIGH   band of interest in Hz (default 20-4000), e.g. --band 50-600
  --rate HZ         sample rate of a one-column CSV, Hz
  --channel N       read channel N only (1 = first/left); default: mix all to mono
  -h, --help        this text

Example
  humgauge analyze public/demo/bench-tube.wav
  humgauge analyze sensor.csv --band 100-400 --json > report.json

Rates are amplitude e-folding rates in 1/s (positive grows, negative decays).
Levels are dBFS (0 dBFS = full-scale sine); for CSV input the values are scaled
and the summary states the offset to dB SPL.
`;

/** Maps a reader problem to its exit code (dsp/cli/io.ts EXIT). */
export function exitCodeOf(problem: InputProblem): number {
  switch (problem) {
    case 'empty-or-truncated':
      return EXIT.EMPTY_OR_TRUNCATED;
    case 'bad-header':
      return EXIT.BAD_HEADER;
    case 'unsupported-encoding':
      return EXIT.UNSUPPORTED_ENCODING;
    case 'bad-samples':
      return EXIT.BAD_SAMPLES;
    case 'too-short':
      return EXIT.TOO_SHORT;
    case 'silent':
      return EXIT.SILENT;
    case 'bad-csv':
      return EXIT.BAD_CSV;
    case 'bad-parameter':
      return EXIT.BAD_PARAMETER;
  }
}

/** Parsed options of `humgauge analyze`. */
export interface AnalyzeOptions {
  file: string;
  output: 'summary' | 'json' | 'csv';
  bandLowHz?: number;
  bandHighHz?: number;
  rateHz?: number;
  /** 1-based channel. */
  channel?: number;
  isHelp: boolean;
}

/** Parses the arguments after `analyze`; throws CliError(USAGE) for anything it does not know. */
export function parseAnalyzeArgs(args: string[]): AnalyzeOptions {
  const o: AnalyzeOptions = { file: '', output: 'summary', isHelp: false };
  const files: string[] = [];
  for (let i = 0; i < args.length; i++) {
    let a = args[i];
    let inlineValue: string | null = null;
    const eq = a.startsWith('--') ? a.indexOf('=') : -1;
    if (eq > 0) {
      inlineValue = a.slice(eq + 1);
      a = a.slice(0, eq);
    }
    const value = (): string => {
      if (inlineValue !== null) return inlineValue;
      const v = args[++i];
      if (v === undefined) throw new CliError(`${a} needs a value (see humgauge analyze --help)`, EXIT.USAGE);
      return v;
    };
    const flag = (): void => {
      if (inlineValue !== null) throw new CliError(`${a} takes no value`, EXIT.USAGE);
    };
    switch (a) {
      case '-h':
      case '--help':
        o.isHelp = true;
        break;
      case '--json':
      case '--csv': {
        flag();
        const want = a === '--json' ? 'json' : 'csv';
        if (o.output !== 'summary' && o.output !== want) throw new CliError('--json and --csv cannot be combined', EXIT.USAGE);
        o.output = want;
        break;
      }
      case '--band': {
        const v = value();
        const m = /^\s*(\d+(?:\.\d+)?)\s*[-:,]\s*(\d+(?:\.\d+)?)\s*$/.exec(v);
        if (!m) throw new CliError(`--band wants LOW-HIGH in Hz (e.g. 50-600), got "${v}"`, EXIT.USAGE);
        o.bandLowHz = Number(m[1]);
        o.bandHighHz = Number(m[2]);
        if (!(o.bandLowHz > 0 && o.bandHighHz > o.bandLowHz)) {
          throw new CliError(`--band ${v}: LOW must be above 0 and below HIGH`, EXIT.BAD_PARAMETER);
        }
        break;
      }
      case '--rate': {
        const v = value();
        const r = Number(v);
        if (v.trim() === '' || !Number.isFinite(r)) throw new CliError(`--rate wants a number in Hz, got "${v}"`, EXIT.USAGE);
        if (!(r > 0)) throw new CliError(`--rate ${v}: the sample rate must be above 0 Hz`, EXIT.BAD_PARAMETER);
        o.rateHz = r;
        break;
      }
      case '--channel': {
        const v = value();
        const c = Number(v);
        if (!/^\d+$/.test(v.trim()) || c < 1) throw new CliError(`--channel wants a channel number from 1, got "${v}"`, EXIT.USAGE);
        o.channel = c;
        break;
      }
      default:
        if (a.startsWith('-') && a !== '-') throw new CliError(`unknown option ${a} (see humgauge analyze --help)`, EXIT.USAGE);
        files.push(args[i]);
    }
  }
  if (o.isHelp) return o;
  if (files.length === 0) throw new CliError('no input file (usage: humgauge analyze FILE [options])', EXIT.USAGE);
  if (files.length > 1) throw new CliError(`one input file at a time, got ${files.length}: ${files.join(' ')}`, EXIT.USAGE);
  o.file = files[0];
  return o;
}

/** Per-frame track kept compactly for --csv (a 1-hour file at 100 frames/s is 360 000 rows). */
class TrackColumns {
  timeS = new Float64Array(4096);
  freqHz = new Float32Array(4096);
  ampDbfs = new Float32Array(4096);
  state = new Uint8Array(4096);
  length = 0;
  add(u: AnalysisUpdate): void {
    for (const fr of u.frames) {
      if (this.length === this.timeS.length) this.grow();
      const i = this.length++;
      this.timeS[i] = fr.timeS;
      this.freqHz[i] = fr.frequencyHz;
      this.ampDbfs[i] = fr.amplitudeDbfs;
      this.state[i] = STATES.indexOf(fr.state);
    }
  }
  private grow(): void {
    const n = this.timeS.length * 2;
    const t = new Float64Array(n);
    t.set(this.timeS);
    this.timeS = t;
    const f = new Float32Array(n);
    f.set(this.freqHz);
    this.freqHz = f;
    const a = new Float32Array(n);
    a.set(this.ampDbfs);
    this.ampDbfs = a;
    const s = new Uint8Array(n);
    s.set(this.state);
    this.state = s;
  }
}

const STATES: RegimeKind[] = ['quiet', 'growth', 'steady', 'decay'];

/** Progress on stderr (only on a terminal, only for inputs over 30 s). */
class Progress {
  private lastMs = 0;
  private shown = false;
  constructor(
    private readonly io: CliIo,
    private readonly label: string,
    private readonly totalS: number,
  ) {}
  update(fraction: number): void {
    if (!this.io.isErrTty || this.totalS <= 30) return;
    const now = Date.now();
    if (now - this.lastMs < 250) return;
    this.lastMs = now;
    this.shown = true;
    const pct = Math.min(100, Math.floor(fraction * 100));
    this.io.err(`\r${this.label}: ${String(pct).padStart(3)} % of ${this.totalS.toFixed(0)} s`);
  }
  done(): void {
    if (this.shown) this.io.err('\r\x1b[K');
  }
}

interface Run {
  report: Report;
  track: TrackColumns;
  facts: InputFacts;
}

function makeAnalysis(opts: AnalyzeOptions, sampleRateHz: number): Analysis {
  const nyquist = sampleRateHz / 2;
  if (opts.bandHighHz !== undefined && opts.bandHighHz >= nyquist) {
    throw new CliError(`--band up to ${opts.bandHighHz} Hz is above half the sample rate (${nyquist} Hz)`, EXIT.BAD_PARAMETER);
  }
  try {
    return createAnalysis({ sampleRateHz, bandLowHz: opts.bandLowHz, bandHighHz: opts.bandHighHz });
  } catch (e) {
    if (e instanceof RangeError) throw new CliError(e.message, EXIT.BAD_PARAMETER);
    throw e;
  }
}

async function analyzeWav(opts: AnalyzeOptions, io: CliIo, label: string): Promise<Run> {
  if (opts.rateHz !== undefined) throw new CliError('--rate applies to one-column CSV input only; a WAV file states its own rate', EXIT.USAGE);
  const size = await fileSize(opts.file);
  const dec = createWavDecoder({ channel: opts.channel === undefined ? null : opts.channel - 1 });
  const track = new TrackColumns();
  let analysis: Analysis | null = null;
  let progress: Progress | null = null;
  let bytes = 0;
  for await (const chunk of readChunks(opts.file)) {
    bytes += chunk.length;
    const block = dec.push(chunk);
    const fmt = dec.format;
    if (analysis === null && fmt !== null) {
      const f: WavFormat = fmt;
      analysis = makeAnalysis(opts, f.sampleRateHz);
      progress = new Progress(io, label, size / f.blockAlign / f.sampleRateHz);
    }
    if (block.length > 0 && analysis !== null) {
      track.add(analysis.push(block));
    }
    progress?.update(bytes / size);
  }
  progress?.done();
  const summary = dec.end();
  if (analysis === null) throw new InputError('empty-or-truncated', 'no samples');
  const report = analysis.finish();
  addReaderWarnings(report, summary.warnings);
  const f = summary.format;
  const chan = opts.channel !== undefined ? `channel ${opts.channel} of ${f.channelCount}` : f.channelCount === 1 ? 'mono' : `${f.channelCount} channels mixed to mono`;
  return { report, track, facts: { fileName: label, description: `WAV ${f.encodingName}, ${f.sampleRateHz} Hz, ${chan}` } };
}

async function analyzeCsv(opts: AnalyzeOptions, io: CliIo, label: string): Promise<Run> {
  if (opts.channel !== undefined) throw new CliError('--channel applies to WAV input only', EXIT.USAGE);
  // Pass 1: check every line and learn the rate (mean step over all rows), the mean and the range.
  const size = await fileSize(opts.file);
  const scan = createCsvDecoder({ rateHz: opts.rateHz });
  for await (const chunk of readChunks(opts.file)) scan.push(chunk);
  const s1: CsvSummary = scan.end().summary;
  if (opts.rateHz !== undefined && s1.timeRateHz !== null && Math.abs(opts.rateHz / s1.timeRateHz - 1) > 0.01) {
    throw new CliError(`--rate ${opts.rateHz} Hz disagrees with the time column (${fmtRate(s1.timeRateHz)}); leave --rate out for files with a time column`, EXIT.BAD_PARAMETER);
  }
  // Pass 2: the values with the mean (static pressure) removed, scaled so the largest excursion is
  // half full scale: pressures in Pa are not −1..1 samples, and clipping checks and dBFS need a scale.
  const mean = s1.meanValue;
  const scale = 0.5 / Math.max(s1.maxValue - mean, mean - s1.minValue);
  const analysis = makeAnalysis(opts, s1.sampleRateHz);
  const track = new TrackColumns();
  const progress = new Progress(io, label, s1.durationS);
  const dec = createCsvDecoder({ rateHz: opts.rateHz, offset: mean, scale, checkContent: false });
  let bytes = 0;
  const feed = (b: Float32Array): void => {
    if (b.length > 0) track.add(analysis.push(b));
  };
  for await (const chunk of readChunks(opts.file)) {
    bytes += chunk.length;
    feed(dec.push(chunk));
    progress.update(bytes / size);
  }
  feed(dec.end().samples);
  progress.done();
  const report = analysis.finish();
  // A sine of amplitude 1/scale Pa is 0 dBFS; its RMS (1/scale)/√2 Pa against 20 µPa gives dB SPL.
  const splOffsetDb = 20 * Math.log10(1 / scale / Math.SQRT2 / 20e-6);
  const layout = s1.hasTimeColumn
    ? `columns ${s1.timeColumnName ?? '1'} and ${s1.valueColumnName ?? '2'}, ${s1.rows} rows, ${fmtRate(s1.sampleRateHz)} from the mean time step`
    : `one column, ${s1.rows} rows at ${fmtRate(s1.sampleRateHz)}`;
  return { report, track, facts: { fileName: label, description: `CSV, ${layout}`, splOffsetDb } };
}

function fmtRate(hz: number): string {
  return `${Number(hz.toPrecision(7))} Hz`;
}

/** The reader's remarks (declared sizes that do not match, a partial last frame) join the report's warnings. */
function addReaderWarnings(report: Report, warnings: string[]): void {
  if (warnings.length > 0) report.warnings = [...(report.warnings ?? []), ...warnings];
}

/** The per-frame track as CSV text. */
export function trackCsv(track: { timeS: Float64Array; freqHz: Float32Array; ampDbfs: Float32Array; state: Uint8Array; length: number }): string {
  const lines: string[] = ['time_s,frequency_hz,amplitude_dbfs,state'];
  for (let i = 0; i < track.length; i++) {
    const f = track.freqHz[i];
    const a = track.ampDbfs[i];
    lines.push(`${track.timeS[i].toFixed(4)},${Number.isFinite(f) ? f.toFixed(2) : ''},${Number.isFinite(a) ? a.toFixed(2) : ''},${STATES[track.state[i]] ?? ''}`);
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
    label = opts.file;
    const kind = await sniffKind(opts.file);
    const run = kind === 'wav' ? await analyzeWav(opts, io, basename(opts.file)) : await analyzeCsv(opts, io, basename(opts.file));
    if (opts.output === 'json') io.out(JSON.stringify(run.report, null, 2) + '\n');
    else if (opts.output === 'csv') io.out(trackCsv(run.track));
    else io.out(renderSummary(run.report, run.facts));
    return EXIT.OK;
  } catch (e) {
    return reportFailure(e, io, label);
  }
}

/** One line on stderr, "humgauge: <file>: <problem>", and the exit code of the failure. */
export function reportFailure(e: unknown, io: CliIo, label: string): number {
  const where = label === 'humgauge' ? 'humgauge' : `humgauge: ${label}`;
  if (e instanceof CliError) {
    io.err(`${e.exitCode === EXIT.USAGE && label === 'humgauge' ? 'humgauge' : where}: ${e.message}\n`);
    return e.exitCode;
  }
  if (e instanceof InputError) {
    io.err(`${where}: ${e.message}\n`);
    return exitCodeOf(e.problem);
  }
  const msg = e instanceof Error ? e.message : String(e);
  io.err(`${where}: internal error: ${msg.split('\n')[0]}\n`);
  return EXIT.INTERNAL;
}
