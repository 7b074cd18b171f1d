// WAV reader: sample coding per the RIFF/WAVE specification (Microsoft/IBM, "Multimedia
// Programming Interface and Data Specifications 1.0", 1991: 8-bit PCM unsigned with offset 128,
// wider PCM signed little-endian two's complement; format tags 1 PCM, 3 IEEE float, 6 A-law,
// 7 µ-law, 2 MS ADPCM) and WAVE_FORMAT_EXTENSIBLE (Microsoft, "Multiple channel audio data and
// WAVE files": tag 0xFFFE, subformat GUID 000000xx-0000-0010-8000-00AA00389B71).
// Test files are built byte by byte here, independently of the decoder and of encodeWav.
import { describe, expect, it } from 'vitest';
import { createWavDecoder, decodeWav } from '../../dsp/io/wav';
import { InputError, type InputProblem } from '../../dsp/io/errors';
import { encodeWav } from '../../dsp/io/wav-write';
import { concat } from '../../dsp/cli/read-file';

interface Chunk {
  id: string;
  body: Uint8Array;
  /** Size written in the header when it differs from the body length. */
  declared?: number;
}

function ascii(s: string): Uint8Array {
  return Uint8Array.from(s, (c) => c.charCodeAt(0));
}

function le(n: number, bytes: number): Uint8Array {
  const out = new Uint8Array(bytes);
  for (let i = 0; i < bytes; i++) out[i] = Math.floor(n / 2 ** (8 * i)) & 0xff;
  return out;
}

const cat = (...parts: Uint8Array[]): Uint8Array => concat(parts);

function riff(chunks: Chunk[], magic = 'RIFF', type = 'WAVE'): Uint8Array {
  const parts: Uint8Array[] = [];
  for (const c of chunks) {
    parts.push(ascii(c.id), le(c.declared ?? c.body.length, 4), c.body);
    if (c.body.length % 2 === 1 && c.declared === undefined) parts.push(new Uint8Array(1));
  }
  const body = cat(ascii(type), ...parts);
  return cat(ascii(magic), le(body.length, 4), body);
}

function fmt(tag: number, channels: number, rate: number, bits: number, container = Math.ceil(bits / 8)): Chunk {
  const blockAlign = container * channels;
  return { id: 'fmt ', body: cat(le(tag, 2), le(channels, 2), le(rate, 4), le(rate * blockAlign, 4), le(blockAlign, 2), le(bits, 2)) };
}

function fmtExtensible(subTag: number, channels: number, rate: number, bits: number, guidTail = [0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xaa, 0, 0x38, 0x9b, 0x71]): Chunk {
  const base = fmt(0xfffe, channels, rate, bits).body;
  return { id: 'fmt ', body: cat(base, le(22, 2), le(bits, 2), le(channels === 2 ? 3 : 4, 4), le(subTag, 2), Uint8Array.from(guidTail)) };
}

/** A 0.6 s 16-bit mono tone at 8 kHz: long enough and loud enough to pass the content checks. */
function tone16(rate = 8000, seconds = 0.6): Uint8Array {
  const n = Math.round(rate * seconds);
  const b = new Uint8Array(2 * n);
  const v = new DataView(b.buffer);
  for (let i = 0; i < n; i++) v.setInt16(2 * i, Math.round(8000 * Math.sin((2 * Math.PI * 170 * i) / rate)), true);
  return b;
}

function problemOf(fn: () => unknown): InputProblem | 'none' {
  try {
    fn();
  } catch (e) {
    if (e instanceof InputError) return e.problem;
    throw e;
  }
  return 'none';
}

function messageOf(fn: () => unknown): string {
  try {
    fn();
  } catch (e) {
    return (e as Error).message;
  }
  return '';
}

const noCheck = { checkContent: false };

describe('sample coding (values fixed by the WAVE specification)', () => {
  it('8-bit PCM is unsigned with 128 as zero', () => {
    const wav = riff([fmt(1, 1, 8000, 8), { id: 'data', body: Uint8Array.from([0, 64, 128, 192, 255]) }]);
    const { samples } = decodeWav(wav, noCheck);
    expect(Array.from(samples)).toEqual([-1, -0.5, 0, 0.5, 127 / 128]);
  });

  it('16-bit PCM is signed little-endian, full scale 32768', () => {
    const wav = riff([fmt(1, 1, 8000, 16), { id: 'data', body: cat(le(0x8000, 2), le(0xc000, 2), le(0, 2), le(0x4000, 2), le(0x7fff, 2)) }]);
    expect(Array.from(decodeWav(wav, noCheck).samples)).toEqual([-1, -0.5, 0, 0.5, 32767 / 32768]);
  });

  it('24-bit PCM is signed in three bytes, full scale 2^23', () => {
    const wav = riff([fmt(1, 1, 8000, 24), { id: 'data', body: cat(le(0x800000, 3), le(0xc00000, 3), le(0x400000, 3), le(0x000001, 3)) }]);
    const s = Array.from(decodeWav(wav, noCheck).samples);
    expect(s.slice(0, 3)).toEqual([-1, -0.5, 0.5]);
    expect(s[3]).toBeCloseTo(2 ** -23, 12);
  });

  it('32-bit PCM and 24 valid bits in a 32-bit container (left-justified)', () => {
    const wav = riff([fmt(1, 1, 8000, 32), { id: 'data', body: cat(le(0x80000000, 4), le(0x40000000, 4)) }]);
    expect(Array.from(decodeWav(wav, noCheck).samples)).toEqual([-1, 0.5]);
    const ext = riff([fmtExtensible(1, 1, 8000, 32), { id: 'data', body: cat(le(0xc0000000, 4), le(0x20000000, 4)) }]);
    expect(Array.from(decodeWav(ext, noCheck).samples)).toEqual([-0.5, 0.25]);
  });

  it('32- and 64-bit IEEE float pass through', () => {
    const f32 = new Uint8Array(8);
    new DataView(f32.buffer).setFloat32(0, 0.25, true);
    new DataView(f32.buffer).setFloat32(4, -0.75, true);
    expect(Array.from(decodeWav(riff([fmt(3, 1, 8000, 32), { id: 'data', body: f32 }]), noCheck).samples)).toEqual([0.25, -0.75]);
    const f64 = new Uint8Array(16);
    new DataView(f64.buffer).setFloat64(0, 0.125, true);
    new DataView(f64.buffer).setFloat64(8, -1, true);
    expect(Array.from(decodeWav(riff([fmt(3, 1, 8000, 64), { id: 'data', body: f64 }]), noCheck).samples)).toEqual([0.125, -1]);
  });

  it('WAVE_FORMAT_EXTENSIBLE with the float subformat GUID reads as float', () => {
    const f32 = new Uint8Array(4);
    new DataView(f32.buffer).setFloat32(0, 0.5, true);
    const { samples, summary } = decodeWav(riff([fmtExtensible(3, 1, 8000, 32), { id: 'data', body: f32 }]), noCheck);
    expect(Array.from(samples)).toEqual([0.5]);
    expect(summary.format.isExtensible).toBe(true);
    expect(summary.format.isFloat).toBe(true);
  });
});

describe('channels', () => {
  // Interleaved frames: L R L R (WAVE spec: samples of one frame are stored channel by channel).
  const stereo = riff([fmt(1, 2, 8000, 16), { id: 'data', body: cat(le(0x4000, 2), le(0, 2), le(0x2000, 2), le(0xe000, 2)) }]);

  it('mixes to mono by the mean of the channels by default', () => {
    expect(Array.from(decodeWav(stereo, noCheck).samples)).toEqual([0.25, 0]);
  });

  it('reads one chosen channel', () => {
    expect(Array.from(decodeWav(stereo, { ...noCheck, channel: 0 }).samples)).toEqual([0.5, 0.25]);
    expect(Array.from(decodeWav(stereo, { ...noCheck, channel: 1 }).samples)).toEqual([0, -0.25]);
  });

  it('a channel the file does not have is a parameter error naming both counts', () => {
    expect(problemOf(() => decodeWav(stereo, { ...noCheck, channel: 2 }))).toBe('bad-parameter');
    expect(messageOf(() => decodeWav(stereo, { ...noCheck, channel: 2 }))).toMatch(/channel 3.*2 channels/);
  });

  it('six channels (5.1 extensible) mix to mono', () => {
    const frame = cat(...[0x1000, 0x1000, 0x1000, 0x1000, 0x1000, 0x1000].map((x) => le(x, 2)));
    const wav = riff([fmtExtensible(1, 6, 48000, 16), { id: 'data', body: cat(frame, frame) }]);
    expect(Array.from(decodeWav(wav, noCheck).samples)).toEqual([0.125, 0.125]);
  });
});

describe('chunk layout', () => {
  it('skips chunks before fmt, between fmt and data and after data, with odd-size padding', () => {
    const wav = riff([
      { id: 'JUNK', body: new Uint8Array(3) },
      fmt(1, 1, 8000, 16),
      { id: 'LIST', body: ascii('INFOISFT') },
      { id: 'fact', body: le(2, 4) },
      { id: 'data', body: cat(le(0x4000, 2), le(0xc000, 2)) },
      { id: 'id3 ', body: new Uint8Array(5) },
    ]);
    expect(Array.from(decodeWav(wav, noCheck).samples)).toEqual([0.5, -0.5]);
  });

  it('odd-sized 8-bit data is followed by its pad byte and a trailing chunk', () => {
    const wav = riff([fmt(1, 1, 8000, 8), { id: 'data', body: Uint8Array.from([192, 64, 128]) }, { id: 'cue ', body: new Uint8Array(4) }]);
    expect(Array.from(decodeWav(wav, noCheck).samples)).toEqual([0.5, -0.5, 0]);
  });

  it('a data size of 0 (unfinished recorder) is read to the end of the file', () => {
    const wav = riff([fmt(1, 1, 8000, 16), { id: 'data', body: tone16(), declared: 0 }]);
    const { samples } = decodeWav(wav);
    expect(samples.length).toBe(4800);
  });

  it('a data size larger than the file is read to the end, with a warning', () => {
    const wav = riff([fmt(1, 1, 8000, 16), { id: 'data', body: tone16(), declared: 1_000_000 }]);
    const { samples, summary } = decodeWav(wav);
    expect(samples.length).toBe(4800);
    expect(summary.warnings.join(' ')).toMatch(/declares 1000000 bytes/);
  });

  it('RF64 with data size 0xFFFFFFFF reads to the end (EBU Tech 3306 layout)', () => {
    const wav = riff([{ id: 'ds64', body: new Uint8Array(28) }, fmt(1, 1, 8000, 16), { id: 'data', body: tone16(), declared: 0xffffffff }], 'RF64');
    expect(decodeWav(wav).samples.length).toBe(4800);
  });

  it('gives the same samples whatever the size of the pushed pieces (bounded streaming)', () => {
    const ch = [new Float32Array(5001), new Float32Array(5001)];
    for (let i = 0; i < 5001; i++) {
      ch[0][i] = 0.5 * Math.sin(i / 7);
      ch[1][i] = 0.25 * Math.cos(i / 5);
    }
    const wav = encodeWav(ch, 8000, 'pcm16');
    const whole = decodeWav(wav).samples;
    for (const piece of [1, 3, 7, 64, 4095]) {
      const dec = createWavDecoder();
      const got: number[] = [];
      for (let o = 0; o < wav.length; o += piece) for (const x of dec.push(wav.subarray(o, o + piece))) got.push(x);
      const summary = dec.end();
      expect(summary.frameCount).toBe(5001);
      expect(Float32Array.from(got)).toEqual(whole);
    }
  });

  it('reads what encodeWav writes (round trip within half a 16-bit step)', () => {
    const x = new Float32Array(8000);
    for (let i = 0; i < x.length; i++) x[i] = 0.8 * Math.sin((2 * Math.PI * 170 * i) / 16000);
    const y = decodeWav(encodeWav(x, 16000, 'pcm16')).samples;
    let maxErr = 0;
    for (let i = 0; i < x.length; i++) maxErr = Math.max(maxErr, Math.abs(x[i] - y[i]));
    // encodeWav scales positives by 32767, the decoder divides by 32768: error ≤ 1/32768 + rounding.
    expect(maxErr).toBeLessThanOrEqual(1.5 / 32768);
    const f = decodeWav(encodeWav(x, 16000, 'float32')).samples;
    expect(f).toEqual(x);
  });
});

describe('bad input, each with its own problem code', () => {
  it('empty file', () => {
    expect(problemOf(() => decodeWav(new Uint8Array(0)))).toBe('empty-or-truncated');
  });

  it('truncated inside the RIFF header', () => {
    expect(problemOf(() => decodeWav(ascii('RIFF\x10\x00')))).toBe('empty-or-truncated');
  });

  it('truncated before the data chunk', () => {
    const full = riff([fmt(1, 1, 8000, 16), { id: 'data', body: tone16() }]);
    expect(problemOf(() => decodeWav(full.subarray(0, 30)))).toBe('empty-or-truncated');
    expect(problemOf(() => decodeWav(full.subarray(0, 40)))).toBe('empty-or-truncated');
  });

  it('data chunk without one whole frame', () => {
    expect(problemOf(() => decodeWav(riff([fmt(1, 2, 8000, 16), { id: 'data', body: new Uint8Array(3) }])))).toBe('empty-or-truncated');
  });

  it('broken RIFF header: not RIFF, or RIFF but not WAVE', () => {
    expect(problemOf(() => decodeWav(ascii('ID3\x04 some mp3 bytes here')))).toBe('bad-header');
    expect(messageOf(() => decodeWav(ascii('ID3\x04 some mp3 bytes here')))).toMatch(/no RIFF header/);
    expect(problemOf(() => decodeWav(riff([fmt(1, 1, 8000, 16)], 'RIFF', 'AVI ')))).toBe('bad-header');
  });

  it('data before fmt, and a too-short fmt chunk', () => {
    expect(problemOf(() => decodeWav(riff([{ id: 'data', body: tone16() }, fmt(1, 1, 8000, 16)])))).toBe('bad-header');
    expect(problemOf(() => decodeWav(riff([{ id: 'fmt ', body: new Uint8Array(10) }, { id: 'data', body: tone16() }])))).toBe('bad-header');
  });

  it.each([
    [6, /A-law/],
    [7, /µ-law/],
    [2, /ADPCM/],
    [0x55, /MP3/],
    [0x1234, /format tag 4660 \(0x1234\)/],
  ])('unsupported encoding, format tag %i, is named', (tag, name) => {
    const wav = riff([fmt(tag, 1, 8000, 8), { id: 'data', body: new Uint8Array(8000) }]);
    expect(problemOf(() => decodeWav(wav))).toBe('unsupported-encoding');
    expect(messageOf(() => decodeWav(wav))).toMatch(name);
  });

  it('extensible with a foreign subformat GUID is unsupported', () => {
    const wav = riff([fmtExtensible(1, 1, 8000, 16, [0, 0, 0, 0, 0x21, 0x07, 0xd3, 0x11, 0x86, 0x44, 0xc8, 0xc1, 0xca, 0]), { id: 'data', body: tone16() }]);
    expect(problemOf(() => decodeWav(wav))).toBe('unsupported-encoding');
    expect(messageOf(() => decodeWav(wav))).toMatch(/GUID/);
  });

  it('a sample rate outside 0.5–192 kHz is refused (dsp/condition.ts MIN_SAMPLE_RATE_HZ)', () => {
    expect(problemOf(() => decodeWav(riff([fmt(1, 1, 400, 16), { id: 'data', body: tone16() }])))).toBe('unsupported-encoding');
    expect(problemOf(() => decodeWav(riff([fmt(1, 1, 384000, 16), { id: 'data', body: tone16() }])))).toBe('unsupported-encoding');
  });

  it('NaN and infinite float samples name the sample', () => {
    const body = new Uint8Array(4 * 8000);
    const v = new DataView(body.buffer);
    for (let i = 0; i < 8000; i++) v.setFloat32(4 * i, 0.1 * Math.sin(i), true);
    v.setFloat32(4 * 4000, NaN, true);
    const nanWav = riff([fmt(3, 1, 8000, 32), { id: 'data', body }]);
    expect(problemOf(() => decodeWav(nanWav))).toBe('bad-samples');
    expect(messageOf(() => decodeWav(nanWav))).toMatch(/sample 4000 \(t = 0\.5000 s.*NaN/);
    v.setFloat32(4 * 4000, 0, true);
    v.setFloat32(4 * 10, -Infinity, true);
    expect(messageOf(() => decodeWav(riff([fmt(3, 1, 8000, 32), { id: 'data', body }])))).toMatch(/sample 10 .*infinite/);
  });

  it('too short: under 0.5 s', () => {
    const wav = riff([fmt(1, 1, 8000, 16), { id: 'data', body: tone16(8000, 0.49) }]);
    expect(problemOf(() => decodeWav(wav))).toBe('too-short');
    expect(problemOf(() => decodeWav(riff([fmt(1, 1, 8000, 16), { id: 'data', body: tone16(8000, 0.5) }])))).toBe('none');
  });

  it('silent: all zeros, or peak below −90 dBFS (one 16-bit step)', () => {
    expect(problemOf(() => decodeWav(riff([fmt(1, 1, 8000, 16), { id: 'data', body: new Uint8Array(16000) }])))).toBe('silent');
    const body = new Uint8Array(4 * 8000);
    const v = new DataView(body.buffer);
    for (let i = 0; i < 8000; i++) v.setFloat32(4 * i, 1e-5 * Math.sin(i), true);
    expect(problemOf(() => decodeWav(riff([fmt(3, 1, 8000, 32), { id: 'data', body }])))).toBe('silent');
    expect(messageOf(() => decodeWav(riff([fmt(3, 1, 8000, 32), { id: 'data', body }])))).toMatch(/-100\.0 dBFS/);
  });
});
