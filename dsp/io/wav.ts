/**
 * Streaming RIFF/WAVE decoder: bytes go in as they arrive (any chunk size), mono Float32 samples
 * (full scale ±1) come out, so a file of any length is read in bounded memory.
 *
 * Layout: Microsoft/IBM, "Multimedia Programming Interface and Data Specifications 1.0" (1991)
 * for RIFF, the fmt and data chunks and format tags; Microsoft, "Multiple channel audio data and
 * WAVE files" (WAVE_FORMAT_EXTENSIBLE, subformat GUID) for tag 0xFFFE. Integer PCM 8-bit is
 * unsigned with offset 128, wider PCM is signed little-endian, left-justified in its container.
 * RF64 files (EBU Tech 3306) read as RIFF whose data chunk runs to the end of the file.
 */

import { MAX_SAMPLE_RATE_HZ, MIN_SAMPLE_RATE_HZ } from '../condition';
import { InputError, SILENCE_PEAK_FS, checkDuration } from './errors';

/** Sample format of a WAV file, known once its fmt chunk has been read. */
export interface WavFormat {
  /** Format tag of the samples (1 PCM, 3 float), after resolving WAVE_FORMAT_EXTENSIBLE. */
  formatTag: number;
  isExtensible: boolean;
  isFloat: boolean;
  sampleRateHz: number;
  channelCount: number;
  /** Declared bits per sample (valid bits may be fewer than the container). */
  bitsPerSample: number;
  /** Bytes per sample of one channel. */
  containerBytes: number;
  /** Bytes per sample frame (all channels). */
  blockAlign: number;
  /** Human name, e.g. "PCM 16-bit", "float 32-bit". */
  encodingName: string;
}

/** Resolution of the samples for the analysis (AnalysisConfig.sampleBits): PCM bits; 0 for float (no quantisation step to stand above). */
export function wavSampleBits(format: Pick<WavFormat, 'isFloat' | 'bitsPerSample'>): number {
  return format.isFloat ? 0 : format.bitsPerSample;
}

export interface WavDecodeOptions {
  /** 0-based channel to read; omitted or null mixes all channels to mono (their mean). */
  channel?: number | null;
  /** Reject files shorter than MIN_DURATION_S and silent files at end(). Default true. */
  checkContent?: boolean;
}

/** What end() reports once the last byte has been pushed. */
export interface WavSummary {
  format: WavFormat;
  frameCount: number;
  durationS: number;
  /** Largest |sample| of the output (after mixing), full scale 1. */
  peakAbs: number;
  /** Non-fatal oddities (declared sizes that do not match, a partial last frame). */
  warnings: string[];
}

export interface WavDecoder {
  /** The sample format once the fmt chunk has been read, else null. */
  readonly format: WavFormat | null;
  /** Sample frames the data chunk declares, or null when unknown (size 0 / 0xFFFFFFFF / not yet read). */
  readonly declaredFrames: number | null;
  /**
   * Decodes the next bytes of the file; returns the mono samples they completed (maybe none).
   * The samples are a view into a buffer the decoder reuses: valid until the next push(), copy
   * them to keep them (fresh large arrays per piece cost more than the decoding). Throws InputError.
   */
  push(bytes: Uint8Array): Float32Array;
  /** Call after the last byte: checks the file was complete and sensible; throws InputError. */
  end(): WavSummary;
}

const FORMAT_NAMES: Record<number, string> = {
  0x0002: 'Microsoft ADPCM',
  0x0006: 'A-law',
  0x0007: 'µ-law',
  0x0011: 'IMA ADPCM',
  0x0022: 'TrueSpeech',
  0x0031: 'GSM 6.10',
  0x0040: 'G.721 ADPCM',
  0x0050: 'MPEG',
  0x0055: 'MPEG Layer III (MP3)',
  0x0161: 'Windows Media Audio',
  0x1610: 'AAC',
  0xf1ac: 'FLAC',
};

/** Bytes 2..15 of every WAVE_FORMAT_EXTENSIBLE subformat GUID built from a format tag (KSDATAFORMAT_SUBTYPE_*). */
const GUID_TAIL = [0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xaa, 0x00, 0x38, 0x9b, 0x71];

const MAX_FMT_BYTES = 1 << 16;
const UNKNOWN_SIZE = 0xffffffff;

/** Decoder phases (what the next bytes are). */
const Phase = { Riff: 0, ChunkHeader: 1, FmtBody: 2, Skip: 3, Data: 4 } as const;
/** Sample kinds. */
const Kind = { U8: 0, S16: 1, S24: 2, S32: 3, F32: 4, F64: 5 } as const;
/** Typed arrays use the platform's byte order; WAV samples are little-endian. */
const IS_LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** Creates a streaming WAV decoder. */
export function createWavDecoder(options: WavDecodeOptions = {}): WavDecoder {
  const channelOpt = options.channel ?? null;
  if (channelOpt !== null && !(Number.isInteger(channelOpt) && channelOpt >= 0)) {
    throw new RangeError(`createWavDecoder: channel must be a non-negative integer, got ${channelOpt}`);
  }
  const checkContent = options.checkContent ?? true;

  let phase: number = Phase.Riff;
  let bytesSeen = 0;
  // Structured reads (RIFF header, chunk header, fmt body) gather here across pushes.
  let hdr = new Uint8Array(12);
  let hdrNeed = 12;
  let hdrHave = 0;
  let chunkId = '';
  let skipLeft = 0;
  let format: WavFormat | null = null;
  let kind: number = Kind.S16;
  let hasData = false;
  let dataDeclared = 0;
  let dataLeft = Infinity;
  let dataRead = 0;
  let carry = new Uint8Array(0);
  let carryLen = 0;
  let frameCount = 0;
  let peakAbs = 0;
  let firstChannel = 0;
  let channelsUsed = 1;
  let skippedExtraData = false;
  const warnings: string[] = [];

  const id4 = (b: Uint8Array, off: number): string => String.fromCharCode(b[off], b[off + 1], b[off + 2], b[off + 3]);
  const u16 = (b: Uint8Array, off: number): number => b[off] | (b[off + 1] << 8);
  const u32 = (b: Uint8Array, off: number): number => (b[off] | (b[off + 1] << 8) | (b[off + 2] << 16) | (b[off + 3] << 24)) >>> 0;

  function expect(n: number): void {
    if (hdr.length < n) hdr = new Uint8Array(n);
    hdrNeed = n;
    hdrHave = 0;
  }

  function readRiff(): void {
    const magic = id4(hdr, 0);
    if (magic === 'RIFX') throw new InputError('unsupported-encoding', 'big-endian RIFX files are not supported; convert to a little-endian WAV');
    if (magic !== 'RIFF' && magic !== 'RF64') {
      throw new InputError('bad-header', `no RIFF header: the file starts with ${printable(hdr, 4)}, not "RIFF"`);
    }
    const type = id4(hdr, 8);
    if (type !== 'WAVE') throw new InputError('bad-header', `RIFF file of type ${printable(hdr.subarray(8), 4)}, not "WAVE"`);
    phase = Phase.ChunkHeader;
    expect(8);
  }

  function readChunkHeader(): void {
    chunkId = id4(hdr, 0);
    const size = u32(hdr, 4);
    if (!/^[\x20-\x7e]{4}$/.test(chunkId)) {
      throw new InputError('bad-header', `broken chunk header at byte ${bytesSeen - 8} (id ${printable(hdr, 4)})`);
    }
    if (chunkId === 'fmt ') {
      if (format !== null) throw new InputError('bad-header', 'two fmt chunks');
      if (size < 16 || size > MAX_FMT_BYTES) throw new InputError('bad-header', `fmt chunk of ${size} bytes (expected 16 to ${MAX_FMT_BYTES})`);
      phase = Phase.FmtBody;
      expect(size + (size & 1));
      return;
    }
    if (chunkId === 'data' && !hasData) {
      if (format === null) throw new InputError('bad-header', 'the data chunk comes before the fmt chunk');
      hasData = true;
      dataDeclared = size;
      // A size of 0 (unfinished recorder) or 0xFFFFFFFF (RF64, streaming writers) means "to the end of the file".
      dataLeft = size === 0 || size === UNKNOWN_SIZE ? Infinity : size;
      phase = Phase.Data;
      return;
    }
    if (chunkId === 'data' && !skippedExtraData) {
      skippedExtraData = true;
      warnings.push('a second data chunk was ignored');
    }
    phase = Phase.Skip;
    skipLeft = size + (size & 1);
  }

  function readFmt(): void {
    const size = hdrNeed;
    let tag = u16(hdr, 0);
    const channelCount = u16(hdr, 2);
    const sampleRateHz = u32(hdr, 4);
    const blockAlign = u16(hdr, 12);
    const bitsPerSample = u16(hdr, 14);
    let isExtensible = false;
    if (tag === 0xfffe) {
      if (size < 40) throw new InputError('bad-header', `WAVE_FORMAT_EXTENSIBLE fmt chunk of ${size} bytes (expected at least 40)`);
      isExtensible = true;
      const sub = u16(hdr, 24);
      for (let i = 0; i < GUID_TAIL.length; i++) {
        if (hdr[26 + i] !== GUID_TAIL[i]) {
          throw new InputError('unsupported-encoding', `unsupported encoding: WAVE_FORMAT_EXTENSIBLE subformat GUID ${guidText(hdr.subarray(24, 40))}`);
        }
      }
      tag = sub;
    }
    if (tag !== 1 && tag !== 3) {
      const name = FORMAT_NAMES[tag];
      const tagText = `format tag ${tag} (0x${tag.toString(16).padStart(4, '0')})`;
      throw new InputError('unsupported-encoding', `unsupported encoding: ${name ? `${name}, ${tagText}` : tagText}; convert to PCM or float WAV`);
    }
    if (channelCount < 1) throw new InputError('bad-header', 'fmt chunk declares 0 channels');
    if (sampleRateHz < MIN_SAMPLE_RATE_HZ || sampleRateHz > MAX_SAMPLE_RATE_HZ) {
      throw new InputError('unsupported-encoding', `sample rate ${sampleRateHz} Hz is outside the ${MIN_SAMPLE_RATE_HZ} Hz to ${MAX_SAMPLE_RATE_HZ / 1000} kHz the analysis reads`);
    }
    if (bitsPerSample < 1) throw new InputError('bad-header', 'fmt chunk declares 0 bits per sample');
    if (blockAlign === 0 || blockAlign % channelCount !== 0) {
      throw new InputError('bad-header', `block size ${blockAlign} bytes does not fit ${channelCount} channel(s)`);
    }
    const containerBytes = blockAlign / channelCount;
    if (containerBytes * 8 < bitsPerSample) {
      throw new InputError('bad-header', `block size ${blockAlign} bytes is too small for ${channelCount} channel(s) of ${bitsPerSample} bits`);
    }
    const isFloat = tag === 3;
    if (isFloat) {
      if (containerBytes === 4) kind = Kind.F32;
      else if (containerBytes === 8) kind = Kind.F64;
      else throw new InputError('unsupported-encoding', `unsupported encoding: float with ${bitsPerSample}-bit samples (32 or 64 are read)`);
    } else {
      if (containerBytes === 1) kind = Kind.U8;
      else if (containerBytes === 2) kind = Kind.S16;
      else if (containerBytes === 3) kind = Kind.S24;
      else if (containerBytes === 4) kind = Kind.S32;
      else throw new InputError('unsupported-encoding', `unsupported encoding: PCM with ${containerBytes * 8}-bit containers (8 to 32 are read)`);
    }
    if (channelOpt !== null && channelOpt >= channelCount) {
      throw new InputError('bad-parameter', `channel ${channelOpt + 1} was asked for but the file has ${channelCount} channel${channelCount === 1 ? '' : 's'}`);
    }
    firstChannel = channelOpt ?? 0;
    channelsUsed = channelOpt === null ? channelCount : 1;
    carry = new Uint8Array(blockAlign);
    format = {
      formatTag: tag,
      isExtensible,
      isFloat,
      sampleRateHz,
      channelCount,
      bitsPerSample,
      containerBytes,
      blockAlign,
      encodingName: `${isFloat ? 'float' : 'PCM'} ${bitsPerSample}-bit`,
    };
    phase = Phase.ChunkHeader;
    expect(8);
  }

  /**
   * Decodes `frames` whole frames from view at byte offset off into out[outOff...]: one loop per
   * sample kind (no branch per sample), channels summed and scaled, then one pass for the peak and
   * for NaN/∞ (any non-finite channel makes the mixed sample non-finite).
   */
  function decodeFrames(view: DataView, off: number, frames: number, out: Float32Array, outOff: number): void {
    const fmt = format as WavFormat;
    const cb = fmt.containerBytes;
    const stride = fmt.blockAlign;
    const nc = channelsUsed;
    const base = off + firstChannel * cb;
    const full = decodeSums(kind, view, base, stride, nc, cb, frames, out, outOff);
    const scale = 1 / (full * nc);
    let peak = peakAbs;
    for (let i = outOff, end = outOff + frames; i < end; i++) {
      const y = out[i] * scale;
      out[i] = y;
      const a = y < 0 ? -y : y;
      // a !== a is NaN; a === Infinity is ∞: both are refused with the frame and channel named.
      if (a > peak) peak = a;
      if (a !== a || a === Infinity) throwBadSample(view, off, i - outOff, frameCount + i);
    }
    peakAbs = peak;
  }

  function throwBadSample(view: DataView, off: number, f: number, frame: number): never {
    const fmt = format as WavFormat;
    let channel = firstChannel;
    for (let c = 0; c < channelsUsed; c++) {
      const p = off + f * fmt.blockAlign + (firstChannel + c) * fmt.containerBytes;
      const x = kind === Kind.F32 ? view.getFloat32(p, true) : view.getFloat64(p, true);
      if (!Number.isFinite(Math.fround(x))) {
        channel = firstChannel + c;
        break;
      }
    }
    const p = off + f * fmt.blockAlign + channel * fmt.containerBytes;
    const x = kind === Kind.F32 ? view.getFloat32(p, true) : view.getFloat64(p, true);
    const where = `sample ${frame} (t = ${(frame / fmt.sampleRateHz).toFixed(4)} s, channel ${channel + 1})`;
    // Finite 64-bit values past the 32-bit range (3.4e38) cannot be held by the analysis.
    const what = Number.isNaN(x) ? 'NaN' : Number.isFinite(x) ? `${x.toPrecision(3)}, beyond the range of 32-bit samples (full scale is ±1)` : 'infinite';
    throw new InputError('bad-samples', `${where} is ${what}`);
  }

  const EMPTY = new Float32Array(0);
  let outBuf = EMPTY;

  /** Consumes data bytes bytes[pos, pos+n); returns decoded samples (a view into outBuf). */
  function readData(bytes: Uint8Array, pos: number, n: number): Float32Array {
    const fmt = format as WavFormat;
    const stride = fmt.blockAlign;
    const frames = Math.floor((carryLen + n) / stride);
    if (frames > outBuf.length) outBuf = new Float32Array(Math.max(frames, 2 * outBuf.length));
    const out = frames > 0 ? outBuf.subarray(0, frames) : EMPTY;
    let outOff = 0;
    let p = pos;
    const endPos = pos + n;
    if (carryLen > 0) {
      const take = Math.min(stride - carryLen, n);
      carry.set(bytes.subarray(p, p + take), carryLen);
      carryLen += take;
      p += take;
      if (carryLen === stride) {
        decodeFrames(new DataView(carry.buffer, carry.byteOffset, stride), 0, 1, out, 0);
        outOff = 1;
        carryLen = 0;
      }
    }
    const whole = Math.floor((endPos - p) / stride);
    if (whole > 0) {
      decodeFrames(new DataView(bytes.buffer, bytes.byteOffset + p, whole * stride), 0, whole, out, outOff);
      p += whole * stride;
      outOff += whole;
    }
    if (p < endPos) {
      carry.set(bytes.subarray(p, endPos), carryLen);
      carryLen += endPos - p;
    }
    frameCount += outOff;
    return out;
  }

  function push(bytes: Uint8Array): Float32Array {
    let pos = 0;
    let out: Float32Array = EMPTY;
    while (pos < bytes.length) {
      if (phase === Phase.Data) {
        const n = Math.min(bytes.length - pos, dataLeft);
        // Only the first data chunk is read, so one push decodes at most one stretch of data.
        out = readData(bytes, pos, n);
        pos += n;
        bytesSeen += n;
        dataRead += n;
        dataLeft -= n;
        if (dataLeft === 0) {
          // Declared data ends here: skip its pad byte, then any trailing chunks.
          phase = Phase.Skip;
          skipLeft = dataDeclared & 1;
        }
        continue;
      }
      if (phase === Phase.Skip) {
        const n = Math.min(bytes.length - pos, skipLeft);
        pos += n;
        bytesSeen += n;
        skipLeft -= n;
        if (skipLeft === 0) {
          phase = Phase.ChunkHeader;
          expect(8);
        }
        continue;
      }
      const n = Math.min(bytes.length - pos, hdrNeed - hdrHave);
      hdr.set(bytes.subarray(pos, pos + n), hdrHave);
      hdrHave += n;
      pos += n;
      bytesSeen += n;
      if (hdrHave < hdrNeed) continue;
      if (phase === Phase.Riff) readRiff();
      else if (phase === Phase.ChunkHeader) readChunkHeader();
      else readFmt();
    }
    return out;
  }

  function end(): WavSummary {
    if (bytesSeen === 0) throw new InputError('empty-or-truncated', 'the file is empty');
    if (phase === Phase.Riff) throw new InputError('empty-or-truncated', `truncated: the file ends after ${bytesSeen} bytes, inside the 12-byte RIFF header`);
    if (format === null) {
      throw new InputError(
        phase === Phase.FmtBody ? 'empty-or-truncated' : 'bad-header',
        phase === Phase.FmtBody ? 'truncated: the file ends inside the fmt chunk' : 'no fmt chunk before the end of the file',
      );
    }
    const fmt: WavFormat = format;
    if (!hasData) throw new InputError('empty-or-truncated', 'truncated: the file ends before the data chunk');
    if (frameCount === 0) throw new InputError('empty-or-truncated', 'the data chunk holds no complete sample frame');
    if (carryLen > 0) warnings.push(`the last ${carryLen} byte(s) (a partial sample frame) were ignored`);
    if (dataLeft !== Infinity && dataLeft > 0) {
      warnings.push(`the data chunk declares ${dataDeclared} bytes but the file holds ${dataRead}; read to the end of the file`);
    }
    if (checkContent) {
      checkDuration(frameCount, fmt.sampleRateHz, 'the recording');
      if (peakAbs <= SILENCE_PEAK_FS) {
        const what = peakAbs === 0 ? 'all samples are zero' : `the peak level is ${(20 * Math.log10(peakAbs)).toFixed(1)} dBFS, below the −90 dBFS floor`;
        throw new InputError('silent', `silent recording: ${what}`);
      }
    }
    return { format: fmt, frameCount, durationS: frameCount / fmt.sampleRateHz, peakAbs, warnings };
  }

  return {
    get format() {
      return format;
    },
    get declaredFrames() {
      if (!hasData || dataDeclared === 0 || dataDeclared === UNKNOWN_SIZE) return null;
      return Math.floor(dataDeclared / (format as WavFormat).blockAlign);
    },
    push,
    end,
  };
}

/** Decodes a whole WAV held in memory (tests, small files); the samples are the decoder's own buffer (one push). Throws InputError. */
export function decodeWav(bytes: Uint8Array, options: WavDecodeOptions = {}): { samples: Float32Array; summary: WavSummary } {
  const dec = createWavDecoder(options);
  const samples = dec.push(bytes);
  const summary = dec.end();
  return { samples, summary };
}

/**
 * Writes the sum over `nc` channels of each frame's raw sample values into out[outOff...] and
 * returns the full-scale value to divide by. Top-level and monomorphic per kind, so the engine
 * compiles each loop tightly.
 */
function decodeSums(kind: number, view: DataView, base: number, stride: number, nc: number, cb: number, frames: number, out: Float32Array, outOff: number): number {
  switch (kind) {
    case Kind.U8:
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += view.getUint8(p) - 128;
        out[outOff + f] = sum;
      }
      return 128;
    case Kind.S16:
      if (nc === 1 && stride === 2 && IS_LITTLE_ENDIAN && (view.byteOffset + base) % 2 === 0) {
        // 16-bit mono, aligned: a typed-array view reads about twice as fast as DataView calls.
        out.set(new Int16Array(view.buffer, view.byteOffset + base, frames), outOff);
        return 32768;
      }
      if (nc === 1) {
        for (let f = 0, p = base; f < frames; f++, p += stride) out[outOff + f] = view.getInt16(p, true);
        return 32768;
      }
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += view.getInt16(p, true);
        out[outOff + f] = sum;
      }
      return 32768;
    case Kind.S24:
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += ((view.getUint8(p) | (view.getUint8(p + 1) << 8) | (view.getUint8(p + 2) << 16)) << 8) >> 8;
        out[outOff + f] = sum;
      }
      return 8388608;
    case Kind.S32:
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += view.getInt32(p, true);
        out[outOff + f] = sum;
      }
      return 2147483648;
    // Floats are averaged as they are summed (each channel / nc), so finite samples near the
    // largest double do not overflow their sum; the caller's scale 1/(full·nc) is then 1.
    case Kind.F32: {
      const inv = 1 / nc;
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += view.getFloat32(p, true) * inv;
        out[outOff + f] = sum;
      }
      return inv;
    }
    default: {
      const inv = 1 / nc;
      for (let f = 0; f < frames; f++) {
        let sum = 0;
        for (let c = 0, p = base + f * stride; c < nc; c++, p += cb) sum += view.getFloat64(p, true) * inv;
        out[outOff + f] = sum;
      }
      return inv;
    }
  }
}

function printable(b: Uint8Array, n: number): string {
  let s = '';
  for (let i = 0; i < n && i < b.length; i++) s += b[i] >= 0x20 && b[i] < 0x7f ? String.fromCharCode(b[i]) : '.';
  return `"${s}"`;
}

function guidText(g: Uint8Array): string {
  const h = (i: number): string => g[i].toString(16).padStart(2, '0');
  const d1 = h(3) + h(2) + h(1) + h(0);
  const d2 = h(5) + h(4);
  const d3 = h(7) + h(6);
  let d4 = '';
  for (let i = 8; i < 16; i++) d4 += h(i);
  return `${d1}-${d2}-${d3}-${d4.slice(0, 4)}-${d4.slice(4)}`;
}
