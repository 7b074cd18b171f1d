// Statistics behind the live onset detector's thresholds (dsp/live-onset.ts, REFERENCES.md §45):
// the variance inflation of overlapping Hann frames, the CUSUM threshold from the in-control
// average run length (Lorden's bound ARL0 ≥ e^h), and the design SNR from the fastest growth.
import { describe, expect, it } from 'vitest';
import { designSnr, overlapInflation, riseErrorFactors, thresholdFor } from '../../dsp/live-onset-statistics';
import { createRng } from '../../dsp/synth';

function hann(n: number): Float64Array {
  const w = new Float64Array(n);
  for (let i = 0; i < n; i++) w[i] = 0.5 - 0.5 * Math.cos((2 * Math.PI * i) / n);
  return w;
}

describe('overlapInflation', () => {
  it("follows Harris's overlap correlation of the Hann window (16.7 % at 50 %, 65.9 % at 75 % overlap)", () => {
    // Harris 1978, Proc. IEEE 66, Table I: overlap correlation of the Hann window. The powers of two
    // frames of white Gaussian noise correlate as the square of their bins' correlation.
    const c50 = 0.167;
    const c75 = 0.659;
    expect(overlapInflation(hann(256), 128)).toBeCloseTo(1 + 2 * c50 ** 2, 2);
    expect(overlapInflation(hann(256), 64)).toBeCloseTo(1 + 2 * (c75 ** 2 + c50 ** 2), 2);
    // No overlap: independent frames.
    expect(overlapInflation(hann(256), 256)).toBe(1);
  });

  it('matches the variance of a sum of frame powers measured on white noise', () => {
    // Direct check (common practice): the variance of the sum of m overlapping frame powers over m
    // times the variance of one frame power, measured on seeded Gaussian noise.
    const n = 64;
    const hop = 16;
    const w = hann(n);
    const rng = createRng(11);
    const frames = 12;
    const trials = 4000;
    const x = new Float64Array(n + (frames - 1) * hop);
    let s1 = 0;
    let s2 = 0;
    let p1 = 0;
    let p2 = 0;
    const k = 9; // a bin away from DC and Nyquist
    for (let t = 0; t < trials; t++) {
      for (let i = 0; i < x.length; i++) x[i] = rng.normal();
      let sum = 0;
      for (let f = 0; f < frames; f++) {
        let re = 0;
        let im = 0;
        for (let i = 0; i < n; i++) {
          const v = w[i] * x[f * hop + i];
          re += v * Math.cos((2 * Math.PI * k * i) / n);
          im -= v * Math.sin((2 * Math.PI * k * i) / n);
        }
        const p = re * re + im * im;
        sum += p;
        if (f === 0) {
          p1 += p;
          p2 += p * p;
        }
      }
      s1 += sum;
      s2 += sum * sum;
    }
    const varSum = s2 / trials - (s1 / trials) ** 2;
    const varOne = p2 / trials - (p1 / trials) ** 2;
    // Edge frames have fewer neighbours: the expected ratio for m frames is 1 + 2 Σ (1 − k/m) ρ_k.
    const rho = (overlapInflation(w, hop) - 1) / 2; // Σ ρ_k
    const expected = 1 + 2 * rho - (2 / frames) * (1 * 0.434 + 2 * 0.028); // lags 1 and 2 (Harris's c75², c50²)
    expect(varSum / (frames * varOne)).toBeGreaterThan(expected * 0.9);
    expect(varSum / (frames * varOne)).toBeLessThan(expected * 1.1);
  });
});

describe('thresholdFor and the in-control run length', () => {
  it("keeps Lorden's bound ARL0 ≥ e^h for the exponential likelihood-ratio CUSUM on noise", () => {
    // Lorden 1971 (REFERENCES.md §45): a CUSUM of log-likelihood ratios with threshold h has an
    // in-control average run length of at least e^h. Checked by simulation on exponential powers
    // (a noise-only bin), design SNR 4, h = ln 200.
    const arl0 = 200;
    const h = thresholdFor(arl0, 1);
    expect(h).toBeCloseTo(Math.log(200), 12);
    const s1 = 4;
    const a = s1 / (1 + s1);
    const b = Math.log1p(s1);
    const rng = createRng(3);
    let total = 0;
    const runs = 400;
    for (let r = 0; r < runs; r++) {
      let s = 0;
      let t = 0;
      for (;;) {
        t++;
        const x = -Math.log(1 - rng.uniform());
        s = Math.max(0, s + a * x - b);
        if (s >= h) break;
      }
      total += t;
    }
    expect(total / runs).toBeGreaterThan(arl0);
  });
});

describe('designSnr', () => {
  it('gives the SNR whose Kullback–Leibler divergence per hop reaches h in one e-fold of the fastest growth', () => {
    // KL(Exp(1+s) ‖ Exp(1)) = s − ln(1+s) (any statistics text; Kullback 1959).
    const h = 34;
    const hopS = 0.004;
    const s1 = designSnr(h, hopS, 50);
    expect(s1 - Math.log1p(s1)).toBeCloseTo(h * hopS * 50, 6);
    // Slower design rate, smaller shift.
    expect(designSnr(h, hopS, 10)).toBeLessThan(s1);
  });
});

describe('riseErrorFactors', () => {
  it('gives var(m1 − m2) / E[RSS about the line] of overlapping frames, measured on simulated noise', () => {
    // Direct simulation (common practice): a bin of Hann frames of white Gaussian noise every hop;
    // the series is the bin's part in phase with a tone at the bin centre (the log-power
    // fluctuation of a strong tone is linear in it, correlation c_k) or its power (noise alone, correlation c_k²). For windows of w hops the
    // variance of the difference of two adjacent window means over the mean residual sum of
    // squares about the least-squares line through 3w points is the factor.
    const n = 64;
    const hop = 16;
    const w = hann(n);
    const f = riseErrorFactors(w, hop, 6);
    const rng = createRng(5);
    const k = 7;
    for (const wl of [2, 4]) {
      const m = 3 * wl;
      const ratio = [0, 0];
      const trials = 6000;
      const x = new Float64Array(n + (m - 1) * hop);
      const dd = [0, 0];
      const rs = [0, 0];
      const y = [new Float64Array(m), new Float64Array(m)];
      for (let t = 0; t < trials; t++) {
        for (let i = 0; i < x.length; i++) x[i] = rng.normal();
        for (let fr = 0; fr < m; fr++) {
          let re = 0;
          let im = 0;
          for (let i = 0; i < n; i++) {
            re += w[i] * x[fr * hop + i] * Math.cos((2 * Math.PI * k * i) / n);
            im -= w[i] * x[fr * hop + i] * Math.sin((2 * Math.PI * k * i) / n);
          }
          // Referred to the phase of a tone at the bin centre, which advances 2πk·hop/n a hop.
          const th = (2 * Math.PI * k * fr * hop) / n;
          y[0][fr] = re * Math.cos(th) + im * Math.sin(th);
          y[1][fr] = re * re + im * im;
        }
        for (let model = 0; model < 2; model++) {
          const v = y[model];
          let m1 = 0;
          let m2 = 0;
          for (let i = 0; i < wl; i++) {
            m1 += v[i] / wl;
            m2 += v[wl + i] / wl;
          }
          dd[model] += (m1 - m2) ** 2;
          // Least-squares line through the m points.
          let st = 0;
          let sy = 0;
          let stt = 0;
          let sty = 0;
          for (let i = 0; i < m; i++) {
            st += i;
            sy += v[i];
            stt += i * i;
            sty += i * v[i];
          }
          const b = (m * sty - st * sy) / (m * stt - st * st);
          const a = (sy - b * st) / m;
          let rss = 0;
          for (let i = 0; i < m; i++) rss += (v[i] - a - b * i) ** 2;
          rs[model] += rss;
        }
      }
      // The power's mean drops out of both (the line absorbs it); its variance scales both alike.
      for (let model = 0; model < 2; model++) ratio[model] = dd[model] / rs[model];
      expect(Math.max(ratio[0], ratio[1]), `w ${wl}`).toBeGreaterThan(0.9 * f[wl]);
      expect(Math.max(ratio[0], ratio[1]), `w ${wl}`).toBeLessThan(1.1 * f[wl]);
    }
  });
});
