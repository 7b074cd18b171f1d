/**
 * Opening a recording instead of the microphone. WAV files are read by the project's own decoder
 * (native sample rate, exact samples, named problems); CSV pressure-sensor exports by the CSV
 * reader; anything else goes to the browser's decodeAudioData (MP3, AAC/M4A, Ogg/Opus, FLAC ...).
 */
import { decodeWav, wavSampleBits } from '../../dsp/io/wav';
import { createCsvDecoder, csvSampleBits, csvScaling, csvSplOffsetDb, decodeCsv } from '../../dsp/io/csv';
import { InputError } from '../../dsp/io/errors';

export interface DecodedFile {
  fileName: string;
  sampleRateHz: number;
  /** One or more channels, full scale ±1 (the worker mixes them to mono). */
  channels: Float32Array[];
  durationS: number;
  /** How it was read, e.g. "WAV PCM 16-bit", "CSV", "decoded by the browser". */
  decodedBy: string;
  /** Notes for the user (e.g. scaling of a CSV). */
  notes: string[];
  /** True for pressure-sensor data (a CSV), not a microphone's sound. */
  isSensor?: boolean;
  /** For sensor data in pascals: the dBFS → dB SPL offset of the samples handed on, dB. */
  splOffsetDb?: number;
  /** Resolution of the samples in bits over ±1 for the analysis (AnalysisConfig.sampleBits); 0 or absent when unknown. */
  sampleBits?: number;
}

/** What the user may tell about a file before it is read. */
export interface FileOptions {
  /** Sample rate of a one-column CSV (no time column), Hz; overrides the time column's rate otherwise. */
  csvRateHz?: number;
  /** Unit of the CSV values: pascals (the default, as the command line takes them) or another unit. */
  csvUnit?: 'Pa' | 'other';
}

/** Sample rate used when the browser decodes a compressed file (it resamples to this), Hz. */
const BROWSER_DECODE_RATE_HZ = 48_000;

/** A file that cannot be analysed, with a message naming the problem. */
export class FileProblem extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'FileProblem';
  }
}

/** True when the file starts like a RIFF/RF64 WAVE file (reads its first 12 bytes only). */
export async function looksLikeWav(file: Blob): Promise<boolean> {
  if (file.size < 12) return false;
  try {
    return isRiffWave(new Uint8Array(await file.slice(0, 12).arrayBuffer()));
  } catch {
    return false;
  }
}

function isRiffWave(bytes: Uint8Array): boolean {
  if (bytes.length < 12) return false;
  const tag = String.fromCharCode(bytes[0] ?? 0, bytes[1] ?? 0, bytes[2] ?? 0, bytes[3] ?? 0);
  const wave = String.fromCharCode(bytes[8] ?? 0, bytes[9] ?? 0, bytes[10] ?? 0, bytes[11] ?? 0);
  return (tag === 'RIFF' || tag === 'RF64') && wave === 'WAVE';
}

function isCsvName(name: string): boolean {
  return /\.(csv|txt|tsv)$/i.test(name);
}

/**
 * Reads and decodes `file`. Throws FileProblem with a message that names the file and the problem.
 * The browser decoder needs an audio context; a short-lived OfflineAudioContext is used.
 */
export async function decodeAudioFile(file: File, options: FileOptions = {}): Promise<DecodedFile> {
  const name = file.name || 'the file';
  if (file.size === 0) throw new FileProblem(`“${name}” is empty (0 bytes): there is nothing to analyse.`);
  let bytes: Uint8Array;
  try {
    bytes = new Uint8Array(await file.arrayBuffer());
  } catch (err) {
    throw new FileProblem(`“${name}” could not be read (${err instanceof Error ? err.message : String(err)}).`);
  }

  if (isRiffWave(bytes)) {
    try {
      const { samples, summary } = decodeWav(bytes);
      return {
        fileName: name,
        sampleRateHz: summary.format.sampleRateHz,
        channels: [samples],
        durationS: summary.durationS,
        sampleBits: wavSampleBits(summary.format),
        decodedBy: `WAV ${summary.format.encodingName}, ${summary.format.channelCount} channel${summary.format.channelCount === 1 ? '' : 's'}`,
        notes: summary.warnings,
      };
    } catch (err) {
      // An encoding our reader does not handle may still be one the browser decodes; either way
      // the user is told which encoding it is, in the reader's words (as the command line says it).
      if (!(err instanceof InputError && err.problem === 'unsupported-encoding')) {
        throw new FileProblem(`“${name}” is a WAV file the analysis cannot use: ${err instanceof Error ? err.message : String(err)}.`);
      }
      return decodeWithBrowser(name, bytes, err.message);
    }
  } else if (isCsvName(name)) {
    try {
      // As the command line reads a CSV (dsp/cli/analyze-file.ts): a first pass learns the range,
      // the second removes the mean (static pressure) and scales by a power of two to half full
      // scale, exactly and without overflow for any finite values. Rates, frequencies and regimes
      // are unchanged by the scale; levels read in dB SPL (Pa) or dB re the largest excursion.
      const rate = options.csvRateHz ? { rateHz: options.csvRateHz } : {};
      const scan = createCsvDecoder({ ...rate, emitSamples: false });
      scan.push(bytes);
      const first = scan.end().summary;
      const { offset, scaleLog2 } = csvScaling(first);
      const { samples, summary } = decodeCsv(bytes, { ...rate, offset, scaleLog2, checkContent: false });
      const peak = Math.max(Math.abs(summary.minValue), Math.abs(summary.maxValue));
      const isPascal = options.csvUnit !== 'other';
      const rateNote = options.csvRateHz
        ? [`Sample rate ${options.csvRateHz} Hz as typed${summary.timeRateHz !== null ? ` (the time column says ${summary.timeRateHz.toPrecision(6)} Hz)` : ''}.`]
        : [];
      return {
        isSensor: true,
        ...(isPascal ? { splOffsetDb: csvSplOffsetDb(scaleLog2) } : {}),
        sampleBits: csvSampleBits(summary, scaleLog2),
        fileName: name,
        sampleRateHz: summary.sampleRateHz,
        channels: [samples],
        durationS: summary.durationS,
        decodedBy: `CSV, ${summary.rows} rows${summary.valueColumnName ? ` of “${summary.valueColumnName}”` : ''}`,
        notes: [
          ...rateNote,
          isPascal
            ? `Values read as pressure in Pa (largest ${peak.toPrecision(4)} Pa): amplitudes are shown in Pa and dB SPL.`
            : `Values were marked as another unit than Pa (largest ${peak.toPrecision(4)}): their mean was removed and the largest excursion from it reads about −6 dBFS; levels in dBFS are relative to that.`,
        ],
      };
    } catch (err) {
      const why = err instanceof Error ? err.message : String(err);
      const hint = /rate/i.test(why) && !options.csvRateHz ? ' For a one-column file, type its sample rate in “Sample rate of a one-column CSV” first.' : '';
      throw new FileProblem(`“${name}” could not be read as a pressure table (CSV): ${why}.${hint}`);
    }
  }

  return decodeWithBrowser(name, bytes);
}

/**
 * Decodes with the browser's decoder. `wavProblem` is the WAV reader's description of an encoding
 * it does not read (the file is a WAV), so every message and note names that encoding.
 */
async function decodeWithBrowser(name: string, bytes: Uint8Array, wavProblem?: string): Promise<DecodedFile> {
  const refuse = (why: string): FileProblem =>
    new FileProblem(
      wavProblem
        ? `“${name}” is a WAV file in an encoding the analysis does not read (${wavProblem}), and ${why}.`
        : `“${name}” could not be decoded: ${why}. Open a WAV file (PCM or float), a CSV pressure table, or a common audio format such as MP3, M4A/AAC, Ogg/Opus or FLAC.`,
    );
  if (typeof OfflineAudioContext === 'undefined') {
    if (wavProblem) throw refuse('this browser has no audio decoder to try instead');
    throw new FileProblem(`“${name}” is not a WAV or CSV file, and this browser has no audio decoder to open it.`);
  }
  const context = new OfflineAudioContext({ numberOfChannels: 1, length: 1, sampleRate: BROWSER_DECODE_RATE_HZ });
  let buffer: AudioBuffer;
  try {
    buffer = await context.decodeAudioData(bytes.buffer.slice(bytes.byteOffset, bytes.byteOffset + bytes.byteLength) as ArrayBuffer);
  } catch (err) {
    const why = err instanceof DOMException && err.name === 'EncodingError' ? 'its format is not one the browser recognises as audio' : err instanceof Error ? err.message : String(err);
    throw refuse(wavProblem ? `the browser could not decode it either (${why})` : why);
  }
  if (buffer.length === 0 || buffer.numberOfChannels === 0) throw refuse('the browser decoded it to no audio samples');
  const channels: Float32Array[] = [];
  for (let c = 0; c < buffer.numberOfChannels; c++) {
    const samples = buffer.getChannelData(c).slice();
    // A decoder that misreads a file can hand back anything: refuse what the analysis cannot take.
    for (let i = 0; i < samples.length; i++) {
      if (!Number.isFinite(samples[i])) throw refuse(`the browser decoded it to a non-finite sample (channel ${c + 1}, sample ${i + 1})`);
    }
    channels.push(samples);
  }
  return {
    fileName: name,
    sampleRateHz: buffer.sampleRate,
    channels,
    durationS: buffer.duration,
    decodedBy: `decoded by the browser (resampled to ${buffer.sampleRate} Hz)`,
    notes: wavProblem ? [`The analysis's own WAV reader does not read this file (${wavProblem}); the browser decoded it instead.`] : [],
  };
}
