/**
 * Streaming reader of pressure-sensor CSV exports: `time_s,pressure_pa` with a header line, or a
 * single column of values at a sample rate given by the caller. Bytes go in as they arrive; the
 * pressure values come out as Float32 blocks, so a file is read in bounded memory.
 *
 * Rules (stated so a user can fix the file):
 * - separator tab, `;` or `,` (the first of these found on the first content line); `.` as decimal
 *   point (a decimal comma is detected and named in the error); UTF-8, an optional byte-order mark;
 *   blank lines and lines starting with `#` are skipped;
 * - a first line with a non-numeric field is the header; with two or more columns the time column
 *   is the one named `time…`/`t…` (else the first) and the value column the one named
 *   `pressure…`/`p…` (else the next);
 * - time must rise on every line; a step may differ from the mean step so far by at most 1 % plus
 *   the resolution of the printed timestamps (rounding to 1 µs of a 48 kHz series moves single
 *   steps by ±5 %, which is not jitter); larger differences are an error naming the line;
 * - the sample rate is 1 / mean step over all rows, (t_last − t_first)/(rows − 1): a rate from a
 *   single rounded step is off by up to a few per cent (common practice).
 */

import { REFERENCE_PRESSURE_PA } from '../levels';
import { InputError, checkDuration } from './errors';

export interface CsvDecodeOptions {
  /** Sample rate of a one-column file, Hz. Required when there is no time column; for a file with a time column, it overrides the timestamps' rate. */
  rateHz?: number | null;
  /** Output value = (value − offset) · scale, computed in double precision (e.g. to remove the
   * static pressure and bring pascals near full scale before the Float32 conversion). Defaults 0 and 1.
   * `scaleLog2` gives the scale as 2^scaleLog2 instead (csvScaling), computed without overflow for
   * any finite values. */
  offset?: number;
  scale?: number;
  scaleLog2?: number;
  /** Produce samples (default true); false checks the file and sums it up only (a first pass). */
  emitSamples?: boolean;
  /** Reject files shorter than MIN_DURATION_S and constant files at end(). Default true. */
  checkContent?: boolean;
}

export interface CsvSummary {
  rows: number;
  hasTimeColumn: boolean;
  /** Names from the header, or null. */
  timeColumnName: string | null;
  valueColumnName: string | null;
  /** Sample rate: the one given, else from the time column (mean spacing over all rows). */
  sampleRateHz: number;
  /** Rate from the time column alone, or null without one. */
  timeRateHz: number | null;
  /** Largest step deviation from the running mean step, as a fraction of the mean step. */
  maxJitter: number;
  durationS: number;
  /** Extremes and mean of the raw values (before offset and scale); the mean is a running mean, finite for any finite values. */
  minValue: number;
  maxValue: number;
  meanValue: number;
  /** Resolution of the printed values (10^−decimals, the coarsest over all rows): their quantisation step. */
  valueQuantum: number;
}

/**
 * Offset and power-of-two scale that bring a file's values to at most half full scale around their
 * mean (static pressure removed), computed without overflow or underflow for any finite values
 * (±1e308, or 0 alternating with 5e-324). A power of two scales exactly.
 */
export function csvScaling(summary: Pick<CsvSummary, 'minValue' | 'maxValue' | 'meanValue'>): { offset: number; scaleLog2: number } {
  const lo = summary.minValue;
  const hi = summary.maxValue;
  // The running mean may round a hair outside the range.
  const m = Math.min(hi, Math.max(lo, summary.meanValue));
  // log2 of the largest excursion from the mean: directly for everyday values (subnormals
  // included), by halves past 1e307, where max − mean can exceed the largest double.
  const isHuge = Math.max(Math.abs(lo), Math.abs(hi)) > 1e307;
  const log2Excursion = isHuge ? Math.log2(Math.max(hi / 2 - m / 2, m / 2 - lo / 2)) + 1 : Math.log2(Math.max(hi - m, m - lo));
  // excursion · 2^k then lies in [0.25, 0.5): a scale by a power of two is exact.
  return { offset: m, scaleLog2: -Math.floor(log2Excursion) - 2 };
}

/**
 * Resolution of the scaled samples in bits over ±1 (AnalysisConfig.sampleBits; 0 when unknown):
 * the printed decimals quantise the values, step q = valueQuantum · 2^scaleLog2 in full-scale
 * units, i.e. log2(2/q) bits, whose quantisation error a tone must stand above (as for a WAV).
 */
export function csvSampleBits(summary: Pick<CsvSummary, 'valueQuantum'>, scaleLog2: number): number {
  const bits = summary.valueQuantum > 0 ? 1 - Math.log2(summary.valueQuantum) - scaleLog2 : 0;
  return bits > 0 && Number.isFinite(bits) ? bits : 0;
}

/**
 * dBFS → dB SPL offset of values in pascals scaled by 2^scaleLog2: a sine of amplitude 2^−k Pa is
 * 0 dBFS, its RMS 2^−k/√2 Pa against 20 µPa gives the level (REFERENCES.md §11). Computed in the
 * log domain, so it stays finite for any scale csvScaling gives.
 */
export function csvSplOffsetDb(scaleLog2: number): number {
  return -scaleLog2 * 20 * Math.log10(2) - 20 * Math.log10(Math.SQRT2 * REFERENCE_PRESSURE_PA);
}

/** (v − offset) · 2^k for finite v and offset, without overflow (k from csvScaling). */
function scaleByPowerOfTwo(v: number, offset: number, k: number): number {
  if (k <= 0) {
    const s = 2 ** Math.max(k, -1074);
    return k < -1000 ? (v * 2 ** -1000 - offset * 2 ** -1000) * 2 ** (k + 1000) : v * s - offset * s;
  }
  const d = v - offset;
  return k > 1000 ? d * 2 ** 1000 * 2 ** (k - 1000) : d * 2 ** k;
}

export interface CsvDecoder {
  /** Decodes the next bytes; returns the values of the lines they completed (maybe none). Throws InputError. */
  push(bytes: Uint8Array): Float32Array;
  /** Call after the last byte: decodes a last line without newline (its values in `samples`) and checks the whole file; throws InputError. */
  end(): { samples: Float32Array; summary: CsvSummary };
}

/** Allowed step deviation from the mean step (fraction), before the timestamp resolution is added. */
export const CSV_JITTER_TOLERANCE = 0.01;

const MAX_LINE_BYTES = 1 << 16;

/** Creates a streaming CSV decoder. */
export function createCsvDecoder(options: CsvDecodeOptions = {}): CsvDecoder {
  const rateOpt = options.rateHz ?? null;
  if (rateOpt !== null && !(rateOpt > 0 && Number.isFinite(rateOpt))) {
    throw new RangeError(`createCsvDecoder: rateHz must be a positive number, got ${rateOpt}`);
  }
  const offset = options.offset ?? 0;
  const scale = options.scale ?? 1;
  const scaleLog2 = options.scaleLog2 ?? null;
  const emitSamples = options.emitSamples ?? true;
  const checkContent = options.checkContent ?? true;

  let lineBuf = new Uint8Array(256);
  let lineLen = 0;
  let lineNo = 0;
  let isFirstByte = true;
  let sawContent = false;
  let sep = '';
  let columns = 0;
  let timeCol = -1;
  let valueCol = 0;
  let timeName: string | null = null;
  let valueName: string | null = null;
  let rows = 0;
  let t0 = 0;
  let tPrev = 0;
  let stepQuantumS = 0;
  let maxJitter = 0;
  let minValue = Infinity;
  let maxValue = -Infinity;
  let meanValue = 0;
  let valueQuantum = 0;
  let pending: number[] = [];

  function fail(message: string): never {
    throw new InputError('bad-csv', `line ${lineNo}: ${message}`);
  }

  function readHeaderOrFirst(fields: string[]): boolean {
    // Decides the layout from the first content line; returns true when it was a header.
    const isHeader = fields.some((f) => f.trim() !== '' && !isNumberText(f.trim()));
    columns = fields.length;
    if (columns >= 2) {
      timeCol = 0;
      valueCol = 1;
      if (isHeader) {
        const names = fields.map((f) => f.trim().replace(/^"|"$/g, '').toLowerCase());
        const ti = names.findIndex((n) => n.startsWith('time') || n === 't' || n.startsWith('t_') || n.startsWith('t ') || n.startsWith('t['));
        if (ti >= 0) timeCol = ti;
        const pi = names.findIndex((n, i) => i !== timeCol && (n.startsWith('pressure') || n === 'p' || n.startsWith('p_') || n.startsWith('p ') || n.startsWith('p[')));
        valueCol = pi >= 0 ? pi : timeCol === 0 ? 1 : 0;
        timeName = fields[timeCol].trim();
        valueName = fields[valueCol].trim();
      }
    } else {
      timeCol = -1;
      valueCol = 0;
      if (isHeader) valueName = fields[0].trim();
    }
    if (timeCol < 0 && rateOpt === null) {
      throw new InputError('bad-csv', 'one-column CSV without a time column: give the sample rate (--rate HZ)');
    }
    return isHeader;
  }

  function readRow(line: string): void {
    const fields = line.split(sep);
    if (fields.length !== columns) fail(`expected ${columns} field${columns === 1 ? '' : 's'}, found ${fields.length}${commaHint(line)}`);
    const vText = fields[valueCol].trim();
    const v = parseField(vText, valueName ?? 'value');
    const vq = decimalQuantum(vText);
    if (vq > valueQuantum) valueQuantum = vq;
    if (timeCol >= 0) {
      const tText = fields[timeCol].trim();
      const t = parseField(tText, timeName ?? 'time');
      const q = decimalQuantum(tText);
      if (q > stepQuantumS) stepQuantumS = q;
      if (rows === 0) t0 = t;
      else {
        const step = t - tPrev;
        if (!(step > 0)) fail(`time ${tText} s does not rise above the previous ${formatNum(tPrev)} s${commaHint(line)}`);
        if (rows >= 2) {
          const meanStep = (tPrev - t0) / (rows - 1);
          const dev = Math.abs(step - meanStep);
          const rel = dev / meanStep;
          if (dev > CSV_JITTER_TOLERANCE * meanStep + stepQuantumS) {
            fail(
              `time step ${formatNum(step)} s differs from the mean step ${formatNum(meanStep)} s by ${(rel * 100).toFixed(1)} % ` +
                `(more than ${CSV_JITTER_TOLERANCE * 100} % plus the ${formatNum(stepQuantumS)} s timestamp resolution): irregular sampling${commaHint(line)}`,
            );
          }
          if (rel > maxJitter) maxJitter = rel;
        }
      }
      tPrev = t;
    }
    if (v < minValue) minValue = v;
    if (v > maxValue) maxValue = v;
    rows++;
    // Running mean, each term at most |v|: a sum of values near 1e308 would overflow.
    meanValue += v / rows - meanValue / rows;
    if (emitSamples) {
      const y = Math.fround(scaleLog2 !== null ? scaleByPowerOfTwo(v, offset, scaleLog2) : (v - offset) * scale);
      if (!Number.isFinite(y)) {
        throw new InputError('bad-samples', `line ${lineNo}: value ${formatNum(v)} is beyond the range of 32-bit samples after scaling`);
      }
      pending.push(y);
    }
  }

  function parseField(text: string, what: string): number {
    if (text === '') fail(`missing ${what}`);
    if (!isNumberText(text)) {
      const hint = DECIMAL_COMMA_RE.test(text) ? DECIMAL_COMMA_HINT : '';
      if (NON_FINITE_RE.test(text)) throw new InputError('bad-samples', `line ${lineNo}: ${what} is ${/nan/i.test(text) ? 'NaN' : 'infinite'}`);
      fail(`${what} "${text.length > 24 ? `${text.slice(0, 24)}…` : text}" is not a number${hint}`);
    }
    const x = Number(text);
    // A decimal number past the largest double (1e999) is read as infinite: refused like a WAV's ∞.
    if (!Number.isFinite(x)) throw new InputError('bad-samples', `line ${lineNo}: ${what} ${text.length > 24 ? `${text.slice(0, 24)}…` : text} is beyond the largest finite number`);
    return x;
  }

  function handleLine(): void {
    lineNo++;
    let end = lineLen;
    if (end > 0 && lineBuf[end - 1] === 0x0d) end--;
    let start = 0;
    if (lineNo === 1 && end >= 3 && lineBuf[0] === 0xef && lineBuf[1] === 0xbb && lineBuf[2] === 0xbf) start = 3;
    const line = utf8(lineBuf, start, end);
    lineLen = 0;
    const trimmed = line.trim();
    if (trimmed === '' || trimmed.startsWith('#')) return;
    if (!sawContent) {
      sawContent = true;
      // Tab or ';' first: files written with a decimal comma separate their fields with those.
      sep = line.includes('\t') ? '\t' : line.includes(';') ? ';' : ',';
      if (readHeaderOrFirst(line.split(sep))) return;
    }
    readRow(line);
  }

  function push(bytes: Uint8Array): Float32Array {
    if (bytes.length > 0 && isFirstByte) {
      isFirstByte = false;
      if (looksBinary(bytes)) throw new InputError('bad-csv', 'line 1: binary data, not a CSV text file');
    }
    for (let i = 0; i < bytes.length; i++) {
      const b = bytes[i];
      if (b === 0x0a) {
        handleLine();
        continue;
      }
      if (lineLen === lineBuf.length) {
        if (lineLen >= MAX_LINE_BYTES) throw new InputError('bad-csv', `line ${lineNo + 1}: longer than ${MAX_LINE_BYTES} bytes`);
        const bigger = new Uint8Array(lineBuf.length * 2);
        bigger.set(lineBuf);
        lineBuf = bigger;
      }
      lineBuf[lineLen++] = b;
    }
    return drain();
  }

  function drain(): Float32Array {
    const out = Float32Array.from(pending);
    pending = [];
    return out;
  }

  function end(): { samples: Float32Array; summary: CsvSummary } {
    if (lineLen > 0) handleLine();
    const samples = drain();
    if (!sawContent) throw new InputError('empty-or-truncated', 'the file is empty (no data lines)');
    if (rows === 0) throw new InputError('empty-or-truncated', 'the file holds a header but no data rows');
    const timeRateHz = timeCol >= 0 && rows >= 2 ? (rows - 1) / (tPrev - t0) : null;
    let sampleRateHz: number;
    if (rateOpt !== null) sampleRateHz = rateOpt;
    else if (timeRateHz === null) throw new InputError('too-short', 'one data row: at least two are needed to know the sample rate');
    else sampleRateHz = timeRateHz;
    if (checkContent) {
      checkDuration(rows, sampleRateHz, 'the CSV file');
      if (maxValue === minValue) throw new InputError('silent', `silent: every value is ${formatNum(minValue)}`);
    }
    const summary: CsvSummary = {
      rows,
      hasTimeColumn: timeCol >= 0,
      timeColumnName: timeName,
      valueColumnName: valueName,
      sampleRateHz,
      timeRateHz,
      maxJitter,
      durationS: rows / sampleRateHz,
      minValue,
      maxValue,
      meanValue,
      valueQuantum,
    };
    return { samples, summary };
  }

  return { push, end };
}

/** Decodes a whole CSV held in memory. Throws InputError. */
export function decodeCsv(bytes: Uint8Array, options: CsvDecodeOptions = {}): { samples: Float32Array; summary: CsvSummary } {
  const dec = createCsvDecoder(options);
  const a = dec.push(bytes);
  const { samples: b, summary } = dec.end();
  const samples = new Float32Array(a.length + b.length);
  samples.set(a);
  samples.set(b, a.length);
  return { samples, summary };
}

const NUMBER_RE = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;
/** Words some loggers print for non-finite values. */
const NON_FINITE_RE = /^[+-]?(nan|inf|infinity|1\.#inf|1\.#ind|1\.#qnan)$/i;
/** A number written with a decimal comma: "101325,12", "-0,5". */
const DECIMAL_COMMA_RE = /^[+-]?\d+,\d+$/;
const DECIMAL_COMMA_HINT = ' (it looks like a decimal comma: this reader wants "." as decimal point; export with "." or convert the file)';

/** The decimal-comma hint for a line that reads as "digits,digits" (one value with a decimal comma split into two fields). */
function commaHint(line: string): string {
  return DECIMAL_COMMA_RE.test(line.trim()) ? DECIMAL_COMMA_HINT : '';
}

function isNumberText(s: string): boolean {
  return NUMBER_RE.test(s);
}

/** Resolution of a printed decimal number: 10^−(digits after the point), scaled by an exponent. */
function decimalQuantum(s: string): number {
  const m = /^[+-]?\d*(?:\.(\d*))?(?:[eE]([+-]?\d+))?$/.exec(s);
  if (!m) return 0;
  const decimals = m[1] ? m[1].length : 0;
  const exp = m[2] ? Number(m[2]) : 0;
  return 10 ** (exp - decimals);
}

function formatNum(x: number): string {
  return Number(x.toPrecision(6)).toString();
}

function looksBinary(b: Uint8Array): boolean {
  const n = Math.min(b.length, 512);
  for (let i = 0; i < n; i++) if (b[i] === 0) return true;
  return false;
}

/** Minimal UTF-8 decoding of bytes[start, end) (lib ES2022 has no TextDecoder). */
function utf8(b: Uint8Array, start: number, end: number): string {
  let s = '';
  let i = start;
  while (i < end) {
    const c = b[i];
    if (c < 0x80) {
      s += String.fromCharCode(c);
      i++;
    } else if (c >= 0xc0 && c < 0xe0 && i + 1 < end) {
      s += String.fromCharCode(((c & 0x1f) << 6) | (b[i + 1] & 0x3f));
      i += 2;
    } else if (c >= 0xe0 && c < 0xf0 && i + 2 < end) {
      s += String.fromCharCode(((c & 0x0f) << 12) | ((b[i + 1] & 0x3f) << 6) | (b[i + 2] & 0x3f));
      i += 3;
    } else if (c >= 0xf0 && i + 3 < end) {
      s += String.fromCodePoint(((c & 0x07) << 18) | ((b[i + 1] & 0x3f) << 12) | ((b[i + 2] & 0x3f) << 6) | (b[i + 3] & 0x3f));
      i += 4;
    } else {
      s += '\ufffd';
      i++;
    }
  }
  return s;
}
