/**
 * Forward FFT of a windowed real frame, the spectrum's transform: fft.js's radix-4 realTransform
 * (fft.js 4.0.4, lib/fft.js, `_realTransform4`) specialised to the forward direction with the
 * window applied as the first pass reads the samples, so no windowed copy of the frame is written
 * and read back. It gives fft.js's numbers bit for bit on the windowed frame
 * (tests/dsp/real-fft.test.ts): each sample is multiplied by its window value exactly once, as
 * before, the multiplications by the direction sign (±1, exact) are gone, and every other addition
 * and multiplication is fft.js's, in its order (a + (−b) is written a − b, which IEEE 754 defines
 * as the same operation).
 *
 * Output layout as fft.js: interleaved re, im of bins 0 .. N/2 in out[0 .. N + 1]; the rest of
 * out is scratch.
 *
 * Derived from fft.js 4.0.4, whose licence requires this notice in derived copies:
 *
 *   This software is licensed under the MIT License.
 *
 *   Copyright Fedor Indutny, 2017.
 *
 *   Permission is hereby granted, free of charge, to any person obtaining a copy of this software
 *   and associated documentation files (the "Software"), to deal in the Software without
 *   restriction, including without limitation the rights to use, copy, modify, merge, publish,
 *   distribute, sublicense, and/or sell copies of the Software, and to permit persons to whom the
 *   Software is furnished to do so, subject to the following conditions:
 *
 *   The above copyright notice and this permission notice shall be included in all copies or
 *   substantial portions of the Software.
 *
 *   THE SOFTWARE IS PROVIDED "AS IS", WITHOUT WARRANTY OF ANY KIND, EXPRESS OR IMPLIED, INCLUDING
 *   BUT NOT LIMITED TO THE WARRANTIES OF MERCHANTABILITY, FITNESS FOR A PARTICULAR PURPOSE AND
 *   NONINFRINGEMENT. IN NO EVENT SHALL THE AUTHORS OR COPYRIGHT HOLDERS BE LIABLE FOR ANY CLAIM,
 *   DAMAGES OR OTHER LIABILITY, WHETHER IN AN ACTION OF CONTRACT, TORT OR OTHERWISE, ARISING FROM,
 *   OUT OF OR IN CONNECTION WITH THE SOFTWARE OR THE USE OR OTHER DEALINGS IN THE SOFTWARE.
 */

export interface RealFft {
  readonly size: number;
  /** cos(πi/N), −sin(πi/N) for even i < 2N (fft.js's table). */
  table: Float64Array;
  /** Radix-4 digit reversal of the first pass (fft.js's _bitrev). */
  bitrev: Int32Array;
  width: number;
}

/** Creates the tables for frames of `size` samples (a power of two ≥ 4); throws RangeError otherwise. */
export function createRealFft(size: number): RealFft {
  if (!Number.isInteger(size) || size < 4 || (size & (size - 1)) !== 0) throw new RangeError(`size must be a power of two ≥ 4, got ${size}`);
  const table = new Float64Array(2 * size);
  for (let i = 0; i < table.length; i += 2) {
    const angle = (Math.PI * i) / size;
    table[i] = Math.cos(angle);
    table[i + 1] = -Math.sin(angle);
  }
  let power = 0;
  for (let t = 1; size > t; t <<= 1) power++;
  const width = power % 2 === 0 ? power - 1 : power;
  const bitrev = new Int32Array(1 << width);
  for (let j = 0; j < bitrev.length; j++) {
    for (let shift = 0; shift < width; shift += 2) bitrev[j] |= ((j >>> shift) & 3) << (width - shift - 2);
  }
  return { size, table, bitrev, width };
}

/**
 * Transforms the frame x[base + i] · window[i], i = 0 .. N − 1, into out (length ≥ 2N; must not
 * be x). Allocates nothing.
 */
export function realFftWindowed(f: RealFft, out: Float64Array, x: Float64Array, base: number, window: Float64Array): void {
  const size = 2 * f.size;
  const bitrev = f.bitrev;
  let step = 1 << f.width;
  let len = (size / step) << 1;
  const s = step >>> 1;
  // First pass: radix-2 or radix-4 butterflies on the digit-reversed, windowed samples.
  if (len === 4) {
    for (let outOff = 0, t = 0; outOff < size; outOff += len, t++) {
      const off = bitrev[t] >>> 1;
      const evenR = x[base + off] * window[off];
      const oddR = x[base + off + s] * window[off + s];
      out[outOff] = evenR + oddR;
      out[outOff + 1] = 0;
      out[outOff + 2] = evenR - oddR;
      out[outOff + 3] = 0;
    }
  } else {
    for (let outOff = 0, t = 0; outOff < size; outOff += len, t++) {
      const off = bitrev[t] >>> 1;
      const Ar = x[base + off] * window[off];
      const Br = x[base + off + s] * window[off + s];
      const Cr = x[base + off + 2 * s] * window[off + 2 * s];
      const Dr = x[base + off + 3 * s] * window[off + 3 * s];
      const T0r = Ar + Cr;
      const T1r = Ar - Cr;
      const T2r = Br + Dr;
      const T3r = Br - Dr;
      out[outOff] = T0r + T2r;
      out[outOff + 1] = 0;
      out[outOff + 2] = T1r;
      out[outOff + 3] = -T3r;
      out[outOff + 4] = T0r - T2r;
      out[outOff + 5] = 0;
      out[outOff + 6] = T1r;
      out[outOff + 7] = T3r;
    }
  }
  const table = f.table;
  for (step >>= 2; step >= 2; step >>= 2) {
    len = (size / step) << 1;
    const halfLen = len >>> 1;
    const quarterLen = halfLen >>> 1;
    const hquarterLen = quarterLen >>> 1;
    for (let outOff = 0; outOff < size; outOff += len) {
      for (let i = 0, k = 0; i <= hquarterLen; i += 2, k += step) {
        const A = outOff + i;
        const B = A + quarterLen;
        const C = B + quarterLen;
        const D = C + quarterLen;
        const Ar = out[A];
        const Ai = out[A + 1];
        const Br = out[B];
        const Bi = out[B + 1];
        const Cr = out[C];
        const Ci = out[C + 1];
        const Dr = out[D];
        const Di = out[D + 1];
        const tableBr = table[k];
        const tableBi = table[k + 1];
        const MBr = Br * tableBr - Bi * tableBi;
        const MBi = Br * tableBi + Bi * tableBr;
        const tableCr = table[2 * k];
        const tableCi = table[2 * k + 1];
        const MCr = Cr * tableCr - Ci * tableCi;
        const MCi = Cr * tableCi + Ci * tableCr;
        const tableDr = table[3 * k];
        const tableDi = table[3 * k + 1];
        const MDr = Dr * tableDr - Di * tableDi;
        const MDi = Dr * tableDi + Di * tableDr;
        const T0r = Ar + MCr;
        const T0i = Ai + MCi;
        const T1r = Ar - MCr;
        const T1i = Ai - MCi;
        const T2r = MBr + MDr;
        const T2i = MBi + MDi;
        const T3r = MBr - MDr;
        const T3i = MBi - MDi;
        out[A] = T0r + T2r;
        out[A + 1] = T0i + T2i;
        out[B] = T1r + T3i;
        out[B + 1] = T1i - T3r;
        if (i === 0) {
          out[C] = T0r - T2r;
          out[C + 1] = T0i - T2i;
          continue;
        }
        if (i === hquarterLen) continue;
        // The mirrored pair (fft.js's "flipped case").
        const SA = outOff + quarterLen - i;
        const SB = outOff + halfLen - i;
        out[SA] = T1r - T3i;
        out[SA + 1] = -T1i - T3r;
        out[SB] = T0r - T2r;
        out[SB + 1] = T2i - T0i;
      }
    }
  }
}
