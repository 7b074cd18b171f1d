/**
 * Cramér–Rao lower bounds for a real, exponentially growing or decaying sinusoid in white
 * Gaussian noise, for the bench (how close the fits come to the best possible spread).
 * Model: s(t) = A·exp(σ (t − t_ref))·cos(2πf t + φ), t_n = n/fs, θ = (A, σ, f, φ), real noise of
 * variance v. Fisher information I_ij = (1/v)·Σ_n ∂s/∂θ_i·∂s/∂θ_j; the bound on the standard
 * deviation of θ_i is √((I⁻¹)_ii) (Kay 1993, Fundamentals of Statistical Signal Processing:
 * Estimation Theory, ch. 3; closed forms for this model: Yao & Pandit 1995, IEEE Trans. Signal
 * Process. 43 [from memory]). Port of the numerical reference script crlb.py (REFERENCES.md §8).
 */
import { invertSmallMatrix } from './stats';

/** Bounds on the standard deviations of the tone parameters (units: as the parameter; rate 1/s, frequency Hz, phase rad). */
export interface ToneBound {
  /** Number of samples. */
  n: number;
  sdAmplitude: number;
  sdRatePerS: number;
  sdFrequencyHz: number;
  sdPhaseRad: number;
  /** Noise variance per sample implied by the SNR. */
  noiseVariance: number;
}

/**
 * CRLB standard deviations for (A, σ, f, φ) of a growing (σ > 0) or decaying (σ < 0) real tone.
 * snrDb = 10·log10(A² / (2 v)), A taken at refTimeS (default 0, the record start).
 */
export function crlbDampedTone(p: {
  sampleRateHz: number;
  frequencyHz: number;
  amplitude: number;
  ratePerS: number;
  durationS: number;
  snrDb: number;
  phaseRad?: number;
  refTimeS?: number;
}): ToneBound {
  const fs = p.sampleRateHz;
  const n = Math.round(p.durationS * fs);
  const tRef = p.refTimeS ?? 0;
  const phi = p.phaseRad ?? 0;
  const a = p.amplitude;
  const noiseVariance = (a * a) / (2 * 10 ** (p.snrDb / 10));
  const fim = new Float64Array(16);
  const j = new Float64Array(4);
  for (let i = 0; i < n; i++) {
    const t = i / fs;
    const env = Math.exp(p.ratePerS * (t - tRef));
    const arg = 2 * Math.PI * p.frequencyHz * t + phi;
    const c = Math.cos(arg);
    const s = Math.sin(arg);
    j[0] = env * c;
    j[1] = (t - tRef) * a * env * c;
    j[2] = -2 * Math.PI * t * a * env * s;
    j[3] = -a * env * s;
    for (let r = 0; r < 4; r++) for (let q = 0; q < 4; q++) fim[r * 4 + q] += j[r] * j[q];
  }
  const sd = boundsFromFisher(fim, 4, noiseVariance);
  return { n, sdAmplitude: sd[0], sdRatePerS: sd[1], sdFrequencyHz: sd[2], sdPhaseRad: sd[3], noiseVariance };
}

/**
 * Cramér–Rao standard deviations √((I⁻¹)_ii) of k parameters from the k×k sum Σ ∂s/∂θ_i ∂s/∂θ_j
 * (row-major) in white noise of variance noiseVariance (I = that sum / variance). Scaled to a unit
 * diagonal before inverting: the entries span many decades. NaN when I is singular.
 */
export function boundsFromFisher(jtj: Float64Array, k: number, noiseVariance: number): Float64Array {
  const d = new Float64Array(k);
  for (let r = 0; r < k; r++) d[r] = Math.sqrt(jtj[r * (k + 1)]);
  const scaled = new Float64Array(k * k);
  for (let r = 0; r < k; r++) for (let q = 0; q < k; q++) scaled[r * k + q] = jtj[r * k + q] / (d[r] * d[q]);
  const inv = invertSmallMatrix(scaled, k);
  const sd = new Float64Array(k);
  for (let r = 0; r < k; r++) sd[r] = inv === null ? Number.NaN : Math.sqrt((inv[r * (k + 1)] * noiseVariance) / (d[r] * d[r]));
  return sd;
}

/**
 * Closed-form asymptotic CRLB (standard deviation, Hz) for the frequency of a constant-amplitude
 * real tone: var(f̂) ≥ 12 fs² / ((2π)² η N (N² − 1)), η = A²/(2v) linear SNR (Kay 1993, Example 3.14 [from memory]).
 */
export function crlbFrequencyConstantToneHz(sampleRateHz: number, n: number, snrLinear: number): number {
  return sampleRateHz * Math.sqrt(12 / ((2 * Math.PI) ** 2 * snrLinear * n * (n * n - 1)));
}
