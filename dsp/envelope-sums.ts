/**
 * The sums over a complex envelope from which dsp/envelope-statistics.ts forms every statistic of
 * the noise-driven mode and its jackknife replicates: per contiguous block, the moments of |u|² and,
 * at each lag k of a set, Σ u*(t)u(t+k), Σ |u(t)|² u*(t)u(t+k), Σ |u(t+k) − u(t)|² and
 * Σ (|u(t+k)| − |u(t)|)² (REFERENCES.md §40–§41). Whole-envelope functions: they allocate.
 */

/** A complex envelope u (unit: peak amplitude of the tone) sampled at rateHz. */
export interface ComplexEnvelope {
  re: Float64Array;
  im: Float64Array;
  rateHz: number;
}

/** Per-block sums from which every statistic (and its jackknife replicates) is formed. */
export interface BlockSums {
  count: Float64Array;
  sy: Float64Array;
  sy2: Float64Array;
  sy3: Float64Array;
  /** Per block × lag: Σ u* u(t+k), Σ |u|² u* u(t+k) (complex), Σ |u(t+k) − u(t)|², Σ (|u(t+k)| − |u(t)|)². */
  c1r: Float64Array;
  c1i: Float64Array;
  c3r: Float64Array;
  c3i: Float64Array;
  m2: Float64Array;
  m2a: Float64Array;
}

/** |u|² and |u| of every sample, which every lag's sums read (computed once per envelope). */
export interface Powers {
  y: Float64Array;
  amp: Float64Array;
}

export function powersOf(u: ComplexEnvelope): Powers {
  const { re, im } = u;
  const y = new Float64Array(re.length);
  const amp = new Float64Array(re.length);
  for (let t = 0; t < re.length; t++) {
    y[t] = re[t] * re[t] + im[t] * im[t];
    amp[t] = Math.sqrt(y[t]);
  }
  return { y, amp };
}

/**
 * The sums of each block, one lag at a time: every sum is still taken over t in increasing order,
 * so the values are those of summing all lags at each t; the running sums stay in registers.
 */
export function blockSums(u: ComplexEnvelope, p: Powers, lags: Int32Array, segments: number): BlockSums {
  const L = lags.length;
  const kMax = lags[L - 1];
  const usable = u.re.length - kMax;
  const s: BlockSums = {
    count: new Float64Array(segments),
    sy: new Float64Array(segments),
    sy2: new Float64Array(segments),
    sy3: new Float64Array(segments),
    c1r: new Float64Array(segments * L),
    c1i: new Float64Array(segments * L),
    c3r: new Float64Array(segments * L),
    c3i: new Float64Array(segments * L),
    m2: new Float64Array(segments * L),
    m2a: new Float64Array(segments * L),
  };
  const { re, im } = u;
  const { y, amp } = p;
  for (let g = 0; g < segments; g++) {
    const t0 = Math.floor((g * usable) / segments);
    const t1 = Math.floor(((g + 1) * usable) / segments);
    let sy = 0;
    let sy2 = 0;
    let sy3 = 0;
    for (let t = t0; t < t1; t++) {
      const yt = y[t];
      sy += yt;
      sy2 += yt * yt;
      sy3 += yt * yt * yt;
    }
    s.count[g] = Math.max(0, t1 - t0);
    s.sy[g] = sy;
    s.sy2[g] = sy2;
    s.sy3[g] = sy3;
    for (let l = 0; l < L; l++) {
      const k = lags[l];
      let c1r = 0;
      let c1i = 0;
      let c3r = 0;
      let c3i = 0;
      let m2 = 0;
      let m2a = 0;
      for (let t = t0; t < t1; t++) {
        const ar = re[t];
        const ai = im[t];
        const br = re[t + k];
        const bi = im[t + k];
        // conj(u(t)) · u(t+k)
        const pr = ar * br + ai * bi;
        const pi = ar * bi - ai * br;
        const yt = y[t];
        c1r += pr;
        c1i += pi;
        c3r += yt * pr;
        c3i += yt * pi;
        const dr = br - ar;
        const di = bi - ai;
        m2 += dr * dr + di * di;
        const da = amp[t + k] - amp[t];
        m2a += da * da;
      }
      const q = g * L + l;
      s.c1r[q] = c1r;
      s.c1i[q] = c1i;
      s.c3r[q] = c3r;
      s.c3i[q] = c3i;
      s.m2[q] = m2;
      s.m2a[q] = m2a;
    }
  }
  return s;
}
