/**
 * The statistical design of the live onset detector (dsp/live-onset.ts; docs/REFERENCES.md §45):
 * the variance inflation of overlapping frames, the CUSUM's threshold and design SNR, and the
 * standard error of the rise test. Each is computed once, when the detector is created.
 */

/**
 * Variance inflation φ = 1 + 2 Σ_k ρ_k of a sum of frame powers of white noise taken every `hop`
 * samples through `window`: ρ_k = (Σ w_i w_{i+k·hop})² / (Σ w_i²)² is the correlation of the
 * powers of two frames k hops apart (the squared correlation of their complex bins for Gaussian
 * noise; Harris 1978 tabulates the amplitude overlap correlation, 0.167 for Hann at 50 %).
 */
export function overlapInflation(window: Float64Array, hop: number): number {
  let s0 = 0;
  for (let i = 0; i < window.length; i++) s0 += window[i] * window[i];
  let phi = 1;
  for (let k = 1; k * hop < window.length; k++) {
    let c = 0;
    for (let i = 0; i + k * hop < window.length; i++) c += window[i] * window[i + k * hop];
    phi += 2 * (c / s0) ** 2;
  }
  return phi;
}

/** Overlap correlation c_k = Σ w_i w_{i+k·hop} / Σ w_i² of frames k hops apart (Harris 1978), k = 0, 1, …. */
function overlapCorrelations(window: Float64Array, hop: number): Float64Array {
  const out = new Float64Array(Math.ceil(window.length / hop));
  let s0 = 0;
  for (let i = 0; i < window.length; i++) s0 += window[i] * window[i];
  for (let k = 0; k < out.length; k++) {
    let c = 0;
    for (let i = 0; i + k * hop < window.length; i++) c += window[i] * window[i + k * hop];
    out[k] = c / s0;
  }
  return out;
}

/**
 * For each window length W (hops), the factor F with var(m1 − m2) = F·E[RSS]: m1, m2 the means of
 * two adjacent windows of W hops and RSS the residual sum of squares about the least-squares line
 * through three such windows, for stationary noise whose correlation between hops k apart is r_k.
 * E[RSS] = σ²·(n − tr((XᵀX)⁻¹XᵀRX)) for the design X = [1, t] of n = 3W points (any regression
 * text, e.g. Seber & Lee 2003, "Linear Regression Analysis", §3.3), var(m1 − m2) = σ²·aᵀRa. Two
 * noise models bracket the log-power of a bin: r_k = c_k² (noise alone: the powers correlate as the
 * square of the bins) and r_k = c_k (a tone well over the noise: ln|A + n|² ≈ ln A² + 2 Re(n/A) is
 * linear in the noise); the larger factor is kept. Index 0 and 1 are unused.
 */
export function riseErrorFactors(window: Float64Array, hop: number, wMax: number): Float64Array {
  const c = overlapCorrelations(window, hop);
  const out = new Float64Array(wMax + 1);
  // r_k for the noise model at hand (R is banded: r_k = 0 from k = c.length on).
  const r = new Float64Array(c.length);
  for (const power of [1, 2]) {
    for (let k = 0; k < c.length; k++) r[k] = c[k] ** power;
    for (let w = 2; w <= wMax; w++) {
      const n = 3 * w;
      // XᵀRX (entries a = Σ R, b = Σ R·t_j, d = Σ R·t_i·t_j) and aᵀRa, with R banded.
      let xa = 0;
      let xb = 0;
      let xd = 0;
      let v = 0;
      for (let i = 0; i < n; i++) {
        const ai = i < w ? 1 / w : i < 2 * w ? -1 / w : 0;
        for (let j = Math.max(0, i - c.length + 1); j < Math.min(n, i + c.length); j++) {
          const rij = r[Math.abs(i - j)];
          xa += rij;
          xb += rij * j;
          xd += rij * i * j;
          const aj = j < w ? 1 / w : j < 2 * w ? -1 / w : 0;
          v += ai * aj * rij;
        }
      }
      const s1 = n;
      const st = (n * (n - 1)) / 2;
      const stt = ((n - 1) * n * (2 * n - 1)) / 6;
      const det = s1 * stt - st * st;
      // tr((XᵀX)⁻¹ XᵀRX) with (XᵀX)⁻¹ = [stt, −st; −st, s1]/det.
      const trHr = (stt * xa - 2 * st * xb + s1 * xd) / det;
      out[w] = Math.max(out[w], v / (n - trHr));
    }
  }
  return out;
}

/**
 * Threshold h (nats) of Page's CUSUM on log-likelihood-ratio increments for an in-control average
 * run length of arl0 steps (REFERENCES.md §45): ARL0 ≥ e^h for independent increments (Lorden
 * 1971), and increments correlated with variance inflation φ behave as independent ones scaled
 * by φ (diffusion approximation, Siegmund 1985), so h = φ·ln ARL0.
 */
export function thresholdFor(arl0: number, inflation: number): number {
  return inflation * Math.log(arl0);
}

/**
 * Design SNR s1 (tone power over the bin's noise) of the CUSUM (REFERENCES.md §45): the increment
 * x·s1/(1+s1) − ln(1+s1) is the log-likelihood ratio of an exponential power of mean 1+s1 against
 * mean 1, whose expectation at the design SNR is KL = s1 − ln(1+s1). s1 is chosen so that a tone
 * at it reaches h within the hops of one e-folding time of the fastest growth: KL = h·hopS·rateMax
 * (a growing tone's evidence comes mostly from its latest e-fold). Solved by bisection.
 */
export function designSnr(threshold: number, hopS: number, rateMaxPerS: number): number {
  const kl = threshold * hopS * rateMaxPerS;
  let lo = 0;
  let hi = 1e6;
  for (let i = 0; i < 200; i++) {
    const mid = 0.5 * (lo + hi);
    if (mid - Math.log1p(mid) < kl) lo = mid;
    else hi = mid;
  }
  return 0.5 * (lo + hi);
}
