/**
 * Analysis of one input (a WAV recording or a pressure-sensor CSV, a file or a stream) through the
 * same analysis object the app uses. Shared by `humgauge analyze` and its batch workers.
 */

import { mkdtemp, open, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { createAnalysis } from '../index';
import { createCsvDecoder, csvSampleBits, csvScaling, csvSplOffsetDb, type CsvSummary } from '../io/csv';
import { InputError, type InputProblem } from '../io/errors';
import { createWavDecoder, wavSampleBits, type WavFormat } from '../io/wav';
import type { Analysis, AnalysisUpdate, RegimeKind, Report } from '../types';
import type { InputFacts } from './format';
import { CliError, EXIT } from './io';
import { withOptionNames } from './options';
import { openInput, readChunks, type Input } from './read-file';

/** What the analysis of one input needs from the command line's options. */
export interface AnalyzeSettings {
  bandLowHz?: number;
  bandHighHz?: number;
  /** Sample rate of a one-column CSV, Hz. */
  rateHz?: number;
  /** 1-based channel. */
  channel?: number;
  /** Keep the per-frame track (for --csv). */
  keepTrack: boolean;
}

export const STATES: RegimeKind[] = ['quiet', 'growth', 'steady', 'decay'];

/** Per-frame track kept compactly for --csv (a 1-hour file at 100 frames/s is 360 000 rows). */
export class TrackColumns {
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

/** The result of one input. */
export interface Run {
  report: Report;
  track: TrackColumns | null;
  facts: InputFacts;
}

/** Called with the fraction of the input read and its duration in s (when known). */
export type ProgressFn = (fraction: number, totalS: number) => void;

function makeAnalysis(s: AnalyzeSettings, sampleRateHz: number, sampleBits = 0): Analysis {
  const nyquist = sampleRateHz / 2;
  if (s.bandHighHz !== undefined && s.bandHighHz >= nyquist) {
    throw new CliError(`--band up to ${s.bandHighHz} Hz is above half the sample rate (${nyquist} Hz)`, EXIT.BAD_PARAMETER);
  }
  try {
    return createAnalysis({ sampleRateHz, bandLowHz: s.bandLowHz, bandHighHz: s.bandHighHz, sampleBits, announceOnsets: false });
  } catch (e) {
    if (e instanceof RangeError) throw new CliError(withOptionNames(e.message), EXIT.BAD_PARAMETER);
    throw e;
  }
}

/** Analyses one input; throws CliError or InputError with a one-line message. */
export async function analyzeInput(input: Input, s: AnalyzeSettings, progress: ProgressFn = () => {}): Promise<Run> {
  return input.kind === 'wav' ? analyzeWav(input, s, progress) : analyzeCsv(input, s, progress);
}

async function analyzeWav(input: Input, s: AnalyzeSettings, progress: ProgressFn): Promise<Run> {
  if (s.rateHz !== undefined) throw new CliError('--rate applies to one-column CSV input only; a WAV file states its own rate', EXIT.USAGE);
  const dec = createWavDecoder({ channel: s.channel === undefined ? null : s.channel - 1 });
  const track = s.keepTrack ? new TrackColumns() : null;
  let analysis: Analysis | null = null;
  let totalS = 0;
  let bytes = 0;
  for await (const chunk of input.chunks()) {
    bytes += chunk.length;
    const block = dec.push(chunk);
    const fmt = dec.format;
    if (analysis === null && fmt !== null) {
      const f: WavFormat = fmt;
      analysis = makeAnalysis(s, f.sampleRateHz, wavSampleBits(f));
      totalS = input.size !== null ? input.size / f.blockAlign / f.sampleRateHz : 0;
    }
    if (block.length > 0 && analysis !== null) {
      const u = analysis.push(block);
      track?.add(u);
    }
    if (input.size) progress(bytes / input.size, totalS);
  }
  const summary = dec.end();
  if (analysis === null) throw new InputError('empty-or-truncated', 'no samples');
  const report = analysis.finish();
  addReaderWarnings(report, summary.warnings);
  const f = summary.format;
  const chan = s.channel !== undefined ? `channel ${s.channel} of ${f.channelCount}` : f.channelCount === 1 ? 'mono' : `${f.channelCount} channels mixed to mono`;
  return { report, track, facts: { fileName: input.path, description: `WAV ${f.encodingName}, ${f.sampleRateHz} Hz, ${chan}` } };
}

/**
 * A CSV is read twice: pass 1 checks every line and learns the rate, mean and range; pass 2 feeds
 * the values with the mean (static pressure) removed, scaled to half full scale (pressures in Pa
 * are not −1..1 samples; clipping checks and dBFS need a scale). A stream is copied to a temporary
 * file during pass 1 so pass 2 can read it again (memory stays bounded).
 */
async function analyzeCsv(input: Input, s: AnalyzeSettings, progress: ProgressFn): Promise<Run> {
  if (s.channel !== undefined) throw new CliError('--channel applies to WAV input only', EXIT.USAGE);
  const scan = createCsvDecoder({ rateHz: s.rateHz, emitSamples: false });
  let spoolDir: string | null = null;
  let spool: string | null = null;
  try {
    if (input.size === null) {
      spoolDir = await mkdtemp(join(tmpdir(), 'humgauge-'));
      spool = join(spoolDir, 'input.csv');
      const fh = await open(spool, 'w');
      try {
        for await (const chunk of input.chunks()) {
          scan.push(chunk);
          await fh.write(chunk);
        }
      } finally {
        await fh.close();
      }
    } else {
      for await (const chunk of input.chunks()) scan.push(chunk);
    }
    const s1: CsvSummary = scan.end().summary;
    if (s.rateHz !== undefined && s1.timeRateHz !== null && Math.abs(s.rateHz / s1.timeRateHz - 1) > 0.01) {
      throw new CliError(`--rate ${s.rateHz} Hz disagrees with the time column (${fmtRate(s1.timeRateHz)}); leave --rate out for files with a time column`, EXIT.BAD_PARAMETER);
    }
    const { offset, scaleLog2 } = csvScaling(s1);
    const analysis = makeAnalysis(s, s1.sampleRateHz, csvSampleBits(s1, scaleLog2));
    const track = s.keepTrack ? new TrackColumns() : null;
    const dec = createCsvDecoder({ rateHz: s.rateHz, offset, scaleLog2, checkContent: false });
    const feed = (b: Float32Array): void => {
      if (b.length > 0) {
        const u = analysis.push(b);
        track?.add(u);
      }
    };
    let bytes = 0;
    const total = input.size ?? 0;
    for await (const chunk of spool !== null ? readChunks(spool) : input.chunks()) {
      bytes += chunk.length;
      feed(dec.push(chunk));
      if (total > 0) progress(bytes / total, s1.durationS);
    }
    feed(dec.end().samples);
    const report = analysis.finish();
    const splOffsetDb = csvSplOffsetDb(scaleLog2);
    const layout = s1.hasTimeColumn
      ? `columns ${s1.timeColumnName ?? '1'} and ${s1.valueColumnName ?? '2'}, ${s1.rows} rows, ${fmtRate(s1.sampleRateHz)} from the mean time step`
      : `one column, ${s1.rows} rows at ${fmtRate(s1.sampleRateHz)}`;
    return { report, track, facts: { fileName: input.path, description: `CSV, ${layout}`, splOffsetDb } };
  } finally {
    if (spoolDir !== null) await rm(spoolDir, { recursive: true, force: true });
  }
}

function fmtRate(hz: number): string {
  return `${Number(hz.toPrecision(7))} Hz`;
}

/** The reader's remarks (declared sizes that do not match, a partial last frame) join the report's warnings. */
function addReaderWarnings(report: Report, warnings: string[]): void {
  if (warnings.length > 0) report.warnings = [...(report.warnings ?? []), ...warnings];
}

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

/** Exit code and one-line message of any failure (internal errors keep their first line only). */
export function failureOf(e: unknown): { exitCode: number; message: string } {
  if (e instanceof CliError) return { exitCode: e.exitCode, message: e.message };
  if (e instanceof InputError) return { exitCode: exitCodeOf(e.problem), message: e.message };
  const msg = e instanceof Error ? e.message : String(e);
  return { exitCode: EXIT.INTERNAL, message: `internal error: ${msg.split('\n')[0]}` };
}

/** The outcome of one file of a batch (sent between threads: plain data only). */
export type FileOutcome = { file: string; ok: true; report: Report; facts: InputFacts } | { file: string; ok: false; exitCode: number; message: string };

/** Opens and analyses one file; never throws. */
export async function analyzeFile(file: string, s: AnalyzeSettings): Promise<FileOutcome> {
  try {
    const run = await analyzeInput(await openInput(file), { ...s, keepTrack: false });
    return { file, ok: true, report: run.report, facts: run.facts };
  } catch (e) {
    return { file, ok: false, ...failureOf(e) };
  }
}
