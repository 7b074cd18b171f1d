/**
 * Stage 4, envelope by complex demodulation: amplitude calibration, the rate of a pure exponential
 * (an exponential passes a linear filter unchanged in rate: e^{st} → H(s)·e^{st}), the band noise
 * power, rejection of a neighbouring tone, and the exact end of the filter transient.
 */
import { describe, expect, it } from 'vitest';
import { bandPowerFromBinPower, createEnvelopeState, resetEnvelope, setEnvelopeFrequency, stepEnvelope, type EnvelopeState } from '../../dsp/envelope';
import { createRng } from '../../dsp/synth';

const FS = 12000;

function demodulate(st: EnvelopeState, x: Float32Array): { narrow: Float64Array; wide: Float64Array; phase: Float64Array } {
  const narrow = new Float64Array(Math.ceil(x.length / st.decimation));
  const wide = new Float64Array(narrow.length);
  const phase = new Float64Array(narrow.length);
  const chunkN = new Float64Array(1024);
  const chunkW = new Float64Array(1024);
  const chunkP = new Float64Array(1024);
  let o = 0;
  for (let i = 0; i < x.length; i += 4000) {
    const n = stepEnvelope(st, x, i, Math.min(x.length, i + 4000), chunkN, chunkW, chunkP, 0);
    narrow.set(chunkN.subarray(0, n), o);
    wide.set(chunkW.subarray(0, n), o);
    phase.set(chunkP.subarray(0, n), o);
    o += n;
  }
  return { narrow: narrow.subarray(0, o), wide: wide.subarray(0, o), phase: phase.subarray(0, o) };
}

function make(freqHz: number): EnvelopeState {
  const st = createEnvelopeState({ sampleRateHz: FS, decimation: 40, bandwidthHz: 5, wideBandwidthHz: 20 });
  setEnvelopeFrequency(st, freqHz);
  resetEnvelope(st, 0);
  return st;
}

/** Least-squares slope of y against the sample index, per second at rate r. */
function slopePerS(y: number[], r: number): number {
  const n = y.length;
  let st = 0;
  let sy = 0;
  let stt = 0;
  let sty = 0;
  for (let i = 0; i < n; i++) {
    st += i;
    sy += y[i];
    stt += i * i;
    sty += i * y[i];
  }
  return ((n * sty - st * sy) / (n * stt - st * st)) * r;
}

describe('envelope', () => {
  it('has the designed noise bandwidths, kernel length and delay', () => {
    const st = make(171);
    expect(st.outputRateHz).toBe(300);
    // Blackman window: noise bandwidth ≈ 1.73 bins (Harris 1978); the odd kernel length rounds it,
    // (13 taps for the wide band), so the stated bandwidth, computed from the kernel itself, is
    // within 10 % of the target.
    expect(Math.abs(st.bandwidthHz / 5 - 1)).toBeLessThan(0.1);
    expect(Math.abs(st.wideBandwidthHz / 20 - 1)).toBeLessThan(0.1);
    let s2 = 0;
    for (const h of st.kernel) s2 += h * h;
    expect(st.bandwidthHz).toBeCloseTo((300 * s2) / 2, 12);
    // Linear phase: half the kernel plus the triangle's M samples.
    expect(st.delayS).toBeCloseTo((st.kernelLength - 1) / 2 / 300 + 40 / FS, 12);
  });

  it('gives |z| = a for a cosine of amplitude a at the tracked frequency', () => {
    const st = make(171.3);
    const x = new Float32Array(3 * FS);
    for (let i = 0; i < x.length; i++) x[i] = 0.25 * Math.cos((2 * Math.PI * 171.3 * i) / FS + 1);
    const { narrow, wide } = demodulate(st, x);
    // After the kernel has filled: the triangle's gain at the heterodyned tone (0 Hz) is exactly 1;
    // the image at 2f = 342.6 Hz meets the sinc² of the triangle (−37 dB) and folds to 42.6 Hz,
    // beyond the narrow kernel's main lobe (±17 Hz, sidelobes < −58 dB) but inside the wide one's
    // (±69 Hz), where it leaves a ripple of about 0.0146 × 0.1.
    for (let k = st.settleSamples; k < narrow.length; k += 17) {
      expect(Math.abs(Math.sqrt(narrow[k]) / 0.25 - 1)).toBeLessThan(1e-4);
      expect(Math.abs(Math.sqrt(wide[k]) / 0.25 - 1)).toBeLessThan(3e-3);
    }
  });

  it('turns a frequency offset into a phase slope of 2π Δf (frequency from the phase)', () => {
    const st = make(171);
    const x = new Float32Array(3 * FS);
    for (let i = 0; i < x.length; i++) x[i] = 0.1 * Math.cos((2 * Math.PI * 171.3 * i) / FS);
    const { phase } = demodulate(st, x);
    const y: number[] = [];
    let u = phase[st.settleSamples];
    for (let k = st.settleSamples; k < phase.length; k++) {
      let d = phase[k] - (k > st.settleSamples ? phase[k - 1] : phase[k]);
      if (d > Math.PI) d -= 2 * Math.PI;
      if (d < -Math.PI) d += 2 * Math.PI;
      u += d;
      y.push(u);
    }
    expect(Math.abs(slopePerS(y, 300) / (2 * Math.PI) - 0.3)).toBeLessThan(1e-4);
  });

  it('keeps the rate of a pure exponential (growth 50 1/s and decay 8 1/s)', () => {
    for (const rate of [50, -8]) {
      const st = make(230);
      const durS = rate > 0 ? 0.6 : 3;
      const x = new Float32Array(Math.round(durS * FS));
      for (let i = 0; i < x.length; i++) x[i] = 1e-3 * Math.exp(rate * (i / FS)) * Math.cos((2 * Math.PI * 230 * i) / FS);
      const { narrow } = demodulate(st, x);
      const y: number[] = [];
      for (let k = st.settleSamples; k < narrow.length; k++) y.push(0.5 * Math.log(narrow[k]));
      // Noise-free, so only rounding separates the slope from the truth.
      expect(Math.abs(slopePerS(y, 300) / rate - 1)).toBeLessThan(1e-4);
    }
  });

  it('ends its transient exactly one kernel after a kink (driving switched off)', () => {
    const st = make(171);
    const kinkS = 1;
    const x = new Float32Array(3 * FS);
    for (let i = 0; i < x.length; i++) {
      const t = i / FS;
      x[i] = (t < kinkS ? 0.1 : 0.1 * Math.exp(-30 * (t - kinkS))) * Math.cos((2 * Math.PI * 171 * t));
    }
    const { narrow } = demodulate(st, x);
    // Output k (delay-corrected time t_k) is an exact exponential once the whole kernel lies after
    // the kink: t_k − kernel/2 > kink. Check the local log-slope there.
    const first = Math.ceil((kinkS + st.delayS + st.kernelS) * 300) + 1;
    const y: number[] = [];
    for (let k = first; k < first + 60; k++) y.push(0.5 * Math.log(narrow[k]));
    expect(Math.abs(slopePerS(y, 300) / -30 - 1)).toBeLessThan(1e-3);
  });

  it('measures the band noise power 8σ²B/fs of white noise, consistent with the spectrum', () => {
    const st = make(171);
    const rng = createRng(5);
    const sigma = 0.02;
    const x = new Float32Array(120 * FS);
    for (let i = 0; i < x.length; i++) x[i] = sigma * rng.normal();
    const { narrow } = demodulate(st, x);
    let m = 0;
    for (let k = st.settleSamples; k < narrow.length; k++) m += narrow[k];
    m /= narrow.length - st.settleSamples;
    const expected = (8 * sigma * sigma * st.bandwidthHz) / FS;
    // 120 s at 2B = 10 independent samples per second: ~1200, relative error ≈ 3 %; allow 10 %.
    expect(Math.abs(m / expected - 1)).toBeLessThan(0.1);
    // The same number from the spectrum's per-bin noise (6σ²/N, Hann) via bandPowerFromBinPower.
    const n = 4096;
    expect(bandPowerFromBinPower((6 * sigma * sigma) / n, st.bandwidthHz, FS / n) / expected).toBeCloseTo(1, 12);
  });

  it('gives the same samples, bit for bit, however the input is cut (streaming contract, DEVELOPERS.md)', () => {
    // Noise with a tone: every output depends on its whole kernel. Whole blocks run the low-pass
    // four outputs at a time and in full batches; one sample at a time runs it output by output.
    const rng = createRng(11);
    const x = new Float32Array(4 * FS);
    for (let i = 0; i < x.length; i++) x[i] = 0.1 * Math.cos((2 * Math.PI * 171.4 * i) / FS) + 0.01 * rng.normal();
    const run = (cut: number): { narrow: number[]; wide: number[]; phase: number[] } => {
      const st = make(171);
      const narrow: number[] = [];
      const wide: number[] = [];
      const phase: number[] = [];
      const n = new Float64Array(x.length);
      const w = new Float64Array(x.length);
      const p = new Float64Array(x.length);
      for (let i = 0; i < x.length; i += cut) {
        const k = stepEnvelope(st, x, i, Math.min(x.length, i + cut), n, w, p, 0);
        for (let j = 0; j < k; j++) {
          narrow.push(n[j]);
          wide.push(w[j]);
          phase.push(p[j]);
        }
      }
      return { narrow, wide, phase };
    };
    const whole = run(x.length);
    expect(whole.narrow.length).toBe(x.length / 40);
    for (const cut of [1, 39, 41, 2917]) expect(run(cut)).toEqual(whole);
  });

  it('rejects a tone 21 Hz away (a mains harmonic next to the hum) by more than 50 dB', () => {
    const st = make(171);
    const x = new Float32Array(3 * FS);
    for (let i = 0; i < x.length; i++) x[i] = Math.cos((2 * Math.PI * 150 * i) / FS);
    const { narrow } = demodulate(st, x);
    let peak = 0;
    for (let k = st.settleSamples; k < narrow.length; k++) peak = Math.max(peak, narrow[k]);
    // Blackman sidelobes are below −58 dB (Harris 1978); 21 Hz is past the main lobe (±17 Hz).
    expect(10 * Math.log10(peak)).toBeLessThan(-50);
  });
});
