/**
 * The complex baseband of dsp/baseband.ts mixDownDecimate kept up to date as audio arrives: each
 * call mixes only the samples that came in since the last one, and hands back the baseband of the
 * latest window. Output j is mixDownDecimate's output j over all samples since the stream's origin
 * (the same filter, decimation grid and mixer phase), so a window's baseband differs from
 * mixDownDecimate of that window alone only by where the decimation grid falls and a constant
 * phase. Live use (dsp/live-margin.ts): its cost per second of audio no longer grows with the window.
 */
import { basebandFilter, mixDownDecimate, type Baseband } from './baseband';

export interface BasebandStream {
  inputRateHz: number;
  centreHz: number;
  halfWidthHz: number;
  rateMultiple: number;
  /** Decimation factor, filter length (input samples) and output rate, Hz. */
  factor: number;
  taps: number;
  rateHz: number;
  /** Outputs j in [firstJ, nextJ) held in a ring indexed by j modulo its length. */
  re: Float64Array;
  im: Float64Array;
  firstJ: number;
  nextJ: number;
}

/**
 * A stream around centreHz over ±halfWidthHz (mixDownDecimate's design at `rateMultiple`) for
 * windows of at most `maxWindow` input samples. Allocates; never throws (a band the filter cannot
 * hold gives a stream whose windows are empty).
 */
export function createBasebandStream(inputRateHz: number, centreHz: number, halfWidthHz: number, rateMultiple: number, maxWindow: number): BasebandStream {
  const { h, factor, rateHz } = basebandFilter(inputRateHz, halfWidthHz, rateMultiple);
  const cap = Math.ceil(maxWindow / factor) + 2;
  return { inputRateHz, centreHz, halfWidthHz, rateMultiple, factor, taps: h.length, rateHz, re: new Float64Array(cap), im: new Float64Array(cap), firstJ: 0, nextJ: 0 };
}

/**
 * The baseband of the window x, whose first sample is sample `x0` counted from the stream's origin
 * (windows only move forward: x0 and x0 + x.length never decrease between calls). Outputs whose
 * filter span lies inside x are returned; those computed before are reused, the rest are mixed now.
 */
export function basebandOfWindow(bs: BasebandStream, x: Float32Array, x0: number): Baseband {
  const f = bs.factor;
  const jMin = Math.ceil(x0 / f);
  const jEnd = Math.max(jMin, Math.floor((x0 + x.length - bs.taps) / f) + 1);
  const cap = bs.re.length;
  // Outputs already computed but no longer in the window are dropped; a window that moved past every computed output starts again.
  if (bs.nextJ < jMin || jEnd - jMin > cap) bs.nextJ = jMin;
  bs.firstJ = Math.max(bs.firstJ, jMin);
  if (bs.firstJ > bs.nextJ) bs.firstJ = bs.nextJ;
  if (jEnd > bs.nextJ) {
    const from = bs.nextJ * f - x0;
    const fresh = mixDownDecimate(x.subarray(from, (jEnd - 1) * f - x0 + bs.taps), bs.inputRateHz, bs.centreHz, bs.halfWidthHz, bs.rateMultiple);
    // mixDownDecimate's mixer phase starts at its first sample: turn it to the stream's origin.
    const phase = (-2 * Math.PI * bs.centreHz * (bs.nextJ * f)) / bs.inputRateHz;
    const c = Math.cos(phase);
    const s = Math.sin(phase);
    for (let i = 0; i < fresh.re.length; i++) {
      const at = (bs.nextJ + i) % cap;
      bs.re[at] = fresh.re[i] * c - fresh.im[i] * s;
      bs.im[at] = fresh.re[i] * s + fresh.im[i] * c;
    }
    bs.nextJ += fresh.re.length;
  }
  const n = bs.nextJ - bs.firstJ;
  const re = new Float64Array(n);
  const im = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const at = (bs.firstJ + i) % cap;
    re[i] = bs.re[at];
    im[i] = bs.im[at];
  }
  return { re, im, rateHz: bs.rateHz, startS: (bs.firstJ * f - x0 + (bs.taps - 1) / 2) / bs.inputRateHz };
}
