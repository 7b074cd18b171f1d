/**
 * Envelope-power series of known truth for the fit tests: y_k = |a(t_k)·e^{iφ} + n_k|², with n_k a
 * circular complex Gaussian AR(1) process of power N² whose one-sided noise-equivalent bandwidth is
 * `bandwidthHz` (what the pipeline's complex demodulator produces, DESIGN.md stage 4).
 * For AR(1) with coefficient ρ the autocorrelation sums to (1 + ρ)/(1 − ρ) samples, so
 * 2B = fe·(1 − ρ)/(1 + ρ), i.e. ρ = (fe − 2B)/(fe + 2B).
 */
import { createRng } from '../../dsp/synth';
import type { EnvelopeSeries } from '../../dsp/types';

export function envelopePowerSeries(p: {
  amplitude: (timeS: number) => number;
  noisePower: number;
  envelopeRateHz: number;
  bandwidthHz: number;
  startS: number;
  durationS: number;
  seed: number;
}): EnvelopeSeries {
  const n = Math.round(p.durationS * p.envelopeRateHz);
  const rng = createRng(p.seed);
  const rho = (p.envelopeRateHz - 2 * p.bandwidthHz) / (p.envelopeRateHz + 2 * p.bandwidthHz);
  const innov = Math.sqrt((1 - rho * rho) * p.noisePower / 2);
  const phase = 2 * Math.PI * rng.uniform();
  let nr = Math.sqrt(p.noisePower / 2) * rng.normal();
  let ni = Math.sqrt(p.noisePower / 2) * rng.normal();
  const timeS = new Float64Array(n);
  const power = new Float64Array(n);
  for (let k = 0; k < n; k++) {
    const t = p.startS + k / p.envelopeRateHz;
    nr = rho * nr + innov * rng.normal();
    ni = rho * ni + innov * rng.normal();
    const a = p.amplitude(t);
    const re = a * Math.cos(phase) + nr;
    const im = a * Math.sin(phase) + ni;
    timeS[k] = t;
    power[k] = re * re + im * im;
  }
  return { timeS, power, bandwidthHz: p.bandwidthHz };
}
