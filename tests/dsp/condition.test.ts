/**
 * Stage 1, conditioning: analysis rate, anti-alias rejection, pass-band gain, group delay, DC
 * removal, clipping spans, and sample-exact independence of the block size.
 */
import { describe, expect, it } from 'vitest';
import { createConditionState, gapCondition, stepCondition, type ConditionState } from '../../dsp/condition';

function runAll(st: ConditionState, x: Float32Array, block: number): { y: Float32Array; clip: Uint8Array } {
  const y: number[] = [];
  const clip: number[] = [];
  for (let i = 0; i < x.length; i += block) {
    stepCondition(st, x.subarray(i, Math.min(x.length, i + block)));
    for (let k = 0; k < st.outCount; k++) {
      y.push(st.out[k]);
      clip.push(st.outUnusable[k]);
    }
  }
  return { y: Float32Array.from(y), clip: Uint8Array.from(clip) };
}

function sine(fs: number, f: number, a: number, n: number, offset = 0): Float32Array {
  const x = new Float32Array(n);
  for (let i = 0; i < n; i++) x[i] = offset + a * Math.sin((2 * Math.PI * f * i) / fs);
  return x;
}

/** Amplitude of the component at f (Hz) by least squares on sine and cosine (rate fsOut). */
function amplitudeAt(y: Float32Array, from: number, f: number, fsOut: number): number {
  let ss = 0;
  let cc = 0;
  let sc = 0;
  let ys = 0;
  let yc = 0;
  for (let i = from; i < y.length; i++) {
    const s = Math.sin((2 * Math.PI * f * i) / fsOut);
    const c = Math.cos((2 * Math.PI * f * i) / fsOut);
    ss += s * s;
    cc += c * c;
    sc += s * c;
    ys += y[i] * s;
    yc += y[i] * c;
  }
  const det = ss * cc - sc * sc;
  const a = (ys * cc - yc * sc) / det;
  const b = (yc * ss - ys * sc) / det;
  return Math.hypot(a, b);
}

function rms(y: Float32Array, from: number): number {
  let s = 0;
  for (let i = from; i < y.length; i++) s += y[i] * y[i];
  return Math.sqrt(s / (y.length - from));
}

const band = { bandLowHz: 20, bandHighHz: 4000 };

describe('analysis rate', () => {
  it('decimates by the largest power of two that keeps 2.5 × the band top', () => {
    expect(createConditionState({ sampleRateHz: 48000, ...band }).outputRateHz).toBe(12000);
    expect(createConditionState({ sampleRateHz: 44100, ...band }).outputRateHz).toBe(11025);
    expect(createConditionState({ sampleRateHz: 96000, ...band }).outputRateHz).toBe(12000);
    expect(createConditionState({ sampleRateHz: 16000, ...band }).outputRateHz).toBe(16000);
    // 8 kHz input: no decimation, band top lowered to 0.4 fs.
    const low = createConditionState({ sampleRateHz: 8000, ...band });
    expect(low.outputRateHz).toBe(8000);
    expect(low.bandHighHz).toBe(3200);
  });

  it('rejects rates and bands it cannot serve', () => {
    // Pressure-sensor logs from 500 Hz are served (MIN_SAMPLE_RATE_HZ); below is refused.
    expect(() => createConditionState({ sampleRateHz: 400, ...band })).toThrow(RangeError);
    expect(createConditionState({ sampleRateHz: 500, ...band }).bandHighHz).toBe(200);
    expect(() => createConditionState({ sampleRateHz: 48000, bandLowHz: 0.0001, bandHighHz: 0.0002 })).toThrow(/bandLowHz must be at least 5 Hz/);
    expect(() => createConditionState({ sampleRateHz: 48000, bandLowHz: 0, bandHighHz: 4000 })).toThrow(RangeError);
    expect(() => createConditionState({ sampleRateHz: 48000, bandLowHz: 500, bandHighHz: 400 })).toThrow(RangeError);
  });
});

describe('filters', () => {
  const fs = 48000;

  it('passes an in-band tone with unit gain (within 0.01 dB) and rejects an aliasing tone by ≥ 70 dB', () => {
    // Pass band: 171 Hz and 3.9 kHz; stop band: 9 kHz would alias to 3 kHz at 12 kHz.
    // Kaiser design for 80 dB (Kaiser 1974); 70 dB leaves room for the rounding of the tap count.
    for (const f of [171, 3900]) {
      const { y } = runAll(createConditionState({ sampleRateHz: fs, ...band }), sine(fs, f, 0.5, fs), 4096);
      const gainDb = 20 * Math.log10(amplitudeAt(y, 2000, f, 12000) / 0.5);
      expect(Math.abs(gainDb)).toBeLessThan(0.01);
    }
    const { y } = runAll(createConditionState({ sampleRateHz: fs, ...band }), sine(fs, 9000, 0.5, fs), 4096);
    expect(20 * Math.log10(rms(y, 2000) / (0.5 / Math.SQRT2))).toBeLessThan(-70);
  });

  it('delays an impulse by the stated group delay (linear phase)', () => {
    const st = createConditionState({ sampleRateHz: fs, ...band });
    const x = new Float32Array(8192);
    const at = 4000; // a multiple of the decimation (4)
    x[at] = 1;
    const { y } = runAll(st, x, 8192);
    let peak = 0;
    for (let i = 1; i < y.length; i++) if (Math.abs(y[i]) > Math.abs(y[peak])) peak = i;
    // Output k stands for input index (k + 1)·D − 1; the impulse response peaks at its centre.
    const peakTimeS = ((peak + 1) * st.decimation - 1) / fs;
    expect(Math.abs(peakTimeS - (at / fs + st.delayS))).toBeLessThanOrEqual(st.decimation / fs);
  });

  it('removes a DC offset', () => {
    const { y } = runAll(createConditionState({ sampleRateHz: fs, ...band }), sine(fs, 171, 0.2, 4 * fs, 0.3), 4096);
    // One-pole DC blocker at 5 Hz (common practice): after 3 s (≫ 1/(2π·5) s) the offset has gone.
    let mean = 0;
    for (let i = 36000; i < y.length; i++) mean += y[i];
    mean /= y.length - 36000;
    expect(Math.abs(mean)).toBeLessThan(1e-3);
  });
});

describe('clipping', () => {
  const fs = 48000;

  it('reports a clipped stretch as one span and flags its output samples', () => {
    const x = sine(fs, 171, 0.5, 3 * fs);
    for (let i = Math.round(1.2 * fs); i < Math.round(1.5 * fs); i++) x[i] = Math.max(-1, Math.min(1, 4 * x[i]));
    const st = createConditionState({ sampleRateHz: fs, ...band });
    const { clip } = runAll(st, x, 1000);
    expect(st.clips.count).toBe(1);
    // Runs start at full-scale crossings of the first/last overdriven cycle: within one period.
    expect(Math.abs(st.clips.startS[0] - 1.2)).toBeLessThan(1 / 171);
    expect(Math.abs(st.clips.endS[0] - 1.5)).toBeLessThan(1 / 171);
    const flagged = clip.reduce((a, b) => a + b, 0);
    expect(flagged).toBeGreaterThan(0);
    expect(clip[Math.round(0.5 * 12000)]).toBe(0);
  });

  it('does not flag a loud but unclipped signal', () => {
    const st = createConditionState({ sampleRateHz: fs, ...band });
    runAll(st, sine(fs, 171, 0.95, fs), 1000);
    expect(st.clips.count).toBe(0);
  });

  it('treats non-finite samples as clipped and keeps the output finite', () => {
    const x = sine(fs, 171, 0.3, fs);
    for (let i = 1000; i < 1010; i++) x[i] = Number.NaN;
    const st = createConditionState({ sampleRateHz: fs, ...band });
    const { y } = runAll(st, x, 4096);
    expect(y.every((v) => Number.isFinite(v))).toBe(true);
    expect(st.clips.count).toBe(1);
  });

  it('continues clip times across a gap', () => {
    const st = createConditionState({ sampleRateHz: fs, ...band });
    runAll(st, sine(fs, 171, 0.3, fs), 4096);
    gapCondition(st, fs);
    const x = sine(fs, 171, 0.3, fs);
    for (let i = 24000; i < 24100; i++) x[i] = 1;
    runAll(st, x, 4096);
    // 1 s of input, 1 s missing, then 0.5 s into the next piece.
    expect(Math.abs(st.clips.startS[0] - 2.5)).toBeLessThan(1e-3);
  });
});

describe('block peak', () => {
  it('reports the largest |x| of each block: NaN samples aside, infinity and −0 as they are', () => {
    // Definition of the peak level; IEEE 754 ordering of magnitudes (−0 has magnitude 0).
    const st = createConditionState({ sampleRateHz: 48000, ...band });
    const peakOf = (values: number[]): number => {
      stepCondition(st, Float32Array.from(values));
      return st.peakAbs;
    };
    expect(peakOf([0.25, -0.75, 0.5, 0.1, -0.2])).toBe(Math.fround(0.75));
    expect(peakOf([-0, -0, -0, -0, -0, -0])).toBe(0);
    expect(peakOf([0.1, NaN, -0.3, 0.2, NaN])).toBe(Math.fround(0.3));
    expect(peakOf([0.1, -Infinity, 0.2, NaN])).toBe(Infinity);
    expect(peakOf([1e-40, -3e-41, 0, 0])).toBe(Math.fround(1e-40));
  });
});

describe('block size', () => {
  it('gives identical output for blocks of 1, 127, 1000 and 8192 samples', () => {
    const fs = 44100;
    const x = sine(fs, 233, 0.7, fs);
    for (let i = 20000; i < 20500; i++) x[i] = Math.max(-1, Math.min(1, 2 * x[i]));
    const ref = runAll(createConditionState({ sampleRateHz: fs, ...band }), x, 8192);
    for (const b of [1, 127, 1000]) {
      const r = runAll(createConditionState({ sampleRateHz: fs, ...band }), x, b);
      expect(r.y).toEqual(ref.y);
      expect(r.clip).toEqual(ref.clip);
    }
  });
});

describe('digital silence', () => {
  const fs = 48000;

  it('flags a run of exact zeros as unusable, whatever the block size, and lists it apart from clipping', () => {
    // A recorder muted for 0.3 s within a faint tone (−60 dBFS): the zeros carry no measurement
    // (common practice: dropouts are excluded, not read as a sudden fall of the sound).
    const x = sine(fs, 171, 1e-3, 2 * fs);
    for (let i = Math.round(0.8 * fs); i < Math.round(1.1 * fs); i++) x[i] = 0;
    for (const block of [1000, 4096, 37]) {
      const st = createConditionState({ sampleRateHz: fs, ...band });
      const { clip } = runAll(st, x, block);
      expect(st.clips.count).toBe(0);
      expect(st.silences.count).toBe(1);
      // The span opens where the zeros began and closes at the last zero (within a sample).
      expect(Math.abs(st.silences.startS[0] - 0.8)).toBeLessThan(2 / fs);
      expect(Math.abs(st.silences.endS[0] - 1.1)).toBeLessThan(2 / fs);
      const rate = st.outputRateHz;
      expect(clip[Math.round(1.0 * rate)]).toBe(1);
      expect(clip[Math.round(0.5 * rate)]).toBe(0);
      expect(clip[Math.round(1.5 * rate)]).toBe(0);
    }
  });

  it('does not flag the zero crossings of a sine or a quiet 16-bit noise floor', () => {
    // Gaussian noise of 1 LSB rms quantised to 16 bits: a zero about 38 % of the time, runs short.
    let seed = 5;
    const rnd = (): number => {
      seed = (seed * 1103515245 + 12345) % 2147483648;
      return (seed + 0.5) / 2147483648;
    };
    const x = new Float32Array(fs);
    for (let i = 0; i < x.length; i++) {
      const g = Math.sqrt(-2 * Math.log(rnd())) * Math.cos(2 * Math.PI * rnd());
      x[i] = Math.round(g) / 32768;
    }
    const st = createConditionState({ sampleRateHz: fs, ...band });
    runAll(st, x, 4096);
    runAll(st, sine(fs, 171, 0.5, fs), 4096);
    expect(st.silences.count).toBe(0);
  });
});

