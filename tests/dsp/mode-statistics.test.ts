import { describe, expect, it } from 'vitest';
import {
  amplitudePdfLogNormaliser,
  erfcx,
  estimateEnvelopeStatistics,
  fitNormalFormExact,
  NO_BAND_FILTER,
  truncatedGaussianFromMoments,
} from '../../dsp/envelope-statistics';
import { estimateModeStatistics, reconcileRoutes, regimeFromInterval } from '../../dsp/mode-statistics';
import { createRng, normalFormMode, synthesize } from '../../dsp/synth';

/** Moments E[y], E[y²] of exp(a·y − b·y²) on y ≥ 0 by Simpson quadrature (independent of the closed forms). */
function quadratureMoments(a: number, b: number): [number, number] {
  const peak = b > 0 ? Math.max(0, a / (2 * b)) : 0;
  // 12 standard deviations of the untruncated Gaussian, plus 40 e-folds of the exponential part when a < 0.
  const width = (b > 0 ? 12 / Math.sqrt(2 * b) : 0) + (a < 0 ? 40 / -a : 0);
  const top = peak + width;
  const n = 200000;
  const h = top / n;
  let z = 0;
  let m1 = 0;
  let m2 = 0;
  const lnMax = b > 0 ? a * peak - b * peak * peak : 0;
  for (let i = 0; i <= n; i++) {
    const y = i * h;
    const w = i === 0 || i === n ? 1 : i % 2 ? 4 : 2;
    const f = w * Math.exp(a * y - b * y * y - lnMax);
    z += f;
    m1 += f * y;
    m2 += f * y * y;
  }
  return [m1 / z, m2 / z];
}

describe('normal-form PDF: normalisation and maximum likelihood (REFERENCES.md §40)', () => {
  it('erfcx matches exp(x²)·erfc(x) from Python math.erfc (REFERENCES.md §40) to 1e-13', () => {
    const cases: [number, number][] = [
      [0, 1],
      [0.5, 0.615690344192926],
      [1, 0.427583576155807],
      [2, 0.255395676310506],
      [5, 0.110704637733069],
    ];
    // The reference values carry 15 significant digits.
    for (const [x, want] of cases) expect(Math.abs(erfcx(x) / want - 1)).toBeLessThan(1e-13);
    // Continuity where the series hands over to the continued fraction.
    expect(Math.abs(erfcx(2 - 1e-12) / erfcx(2) - 1)).toBeLessThan(1e-11);
  });

  it('ln Z of P(A) = A exp((2νA² − κA⁴)/σ²)/Z agrees with the quadrature values of REFERENCES.md §40', () => {
    const cases: [number, number, number, number][] = [
      [-5, 0, 0.01, -7.600902459542],
      [-5, 100, 0.01, -7.619989149721],
      [0, 100, 0.01, -5.419099604183],
      [2, 100, 0.01, -0.728294030537],
      [10, 1000, 0.01, 4.122751157764],
    ];
    // The sheet gives 12 decimals; its quadrature agreed with the closed form to 1e-12.
    for (const [nu, kappa, s2, want] of cases) expect(Math.abs(amplitudePdfLogNormaliser(nu, kappa, s2) - want)).toBeLessThan(1e-11);
  });

  it('the likelihood equations recover (a, b) from moments computed by quadrature, from a steady hum to the exponential boundary', () => {
    for (const [a, b] of [
      [400, 10000],
      [50, 1000],
      [0, 500],
      [-30, 200],
      [-2, 0.01],
    ]) {
      const [m1, m2] = quadratureMoments(a, b);
      const got = truncatedGaussianFromMoments(m1, m2);
      expect(got).not.toBeNull();
      if (got === null) continue;
      // Quadrature error ~1e-9 relative; the bisection resolves the shape to 1e-12.
      expect(Math.abs(got.a - a)).toBeLessThan(1e-5 * Math.max(1, Math.abs(a)) + 1e-3 * Math.sqrt(b));
      expect(Math.abs(got.b - b)).toBeLessThan(1e-4 * Math.max(b, 1));
    }
    // A ratio E[y²]/E[y]² ≥ 2 is the exponential law (stable, b = 0); ≤ 1 is no law at all.
    expect(truncatedGaussianFromMoments(2, 9)).toMatchObject({ a: -0.5, b: 0 });
    expect(truncatedGaussianFromMoments(2, 4)).toBeNull();
  });

  it('the SDE convention and the PDF agree: simulated E|u|² matches the mean of the stationary law (derivation in REFERENCES.md §40)', () => {
    for (const [nu, kappa] of [
      [-5, 0],
      [4, 400],
    ]) {
      const s2 = 0.01;
      const sig = normalFormMode({ sampleRateHz: 4000, durationS: 200, frequencyHz: 500, growthRatePerS: nu, saturation: kappa, noiseIntensity: s2, measurementNoiseRms: 0, envelopeEvery: 4, seed: 3 });
      let mean = 0;
      for (let i = 0; i < sig.envelopeRe.length; i++) mean += (sig.envelopeRe[i] ** 2 + sig.envelopeIm[i] ** 2) / sig.envelopeRe.length;
      const [m1] = quadratureMoments((2 * nu) / s2, kappa / s2);
      // 200 s holds ≥ 800 relaxation times: the sample mean's spread is a few per cent (√(2/800) ≈ 5 % for the exponential law).
      expect(Math.abs(mean / m1 - 1)).toBeLessThan(0.12);
    }
  });
});

describe('envelope statistics on the exact envelope', () => {
  it('both routes recover ν of a stable mode, a mode at threshold and a hum within their intervals', () => {
    for (const [nu, kappa] of [
      [-8, 0],
      [0, 1000],
      [8, 800],
    ]) {
      const sig = normalFormMode({ sampleRateHz: 8000, durationS: 60, frequencyHz: 500, growthRatePerS: nu, saturation: kappa, noiseIntensity: 0.01, measurementNoiseRms: 0, envelopeEvery: 25, seed: 21 });
      const u = { re: sig.envelopeRe, im: sig.envelopeIm, rateHz: sig.envelopeRateHz };
      const st = estimateEnvelopeStatistics(u, NO_BAND_FILTER);
      for (const r of [st.pdf, st.driftDiffusion]) {
        expect(r.isValid).toBe(true);
        expect(r.ci95PerS[0]).toBeLessThan(nu);
        expect(r.ci95PerS[1]).toBeGreaterThan(nu);
      }
      // σ² from the short-lag increments: quadratic variation of 60 s at 320 Hz pins it to ~1 %.
      expect(Math.abs(st.pdf.noiseIntensity / 0.01 - 1)).toBeLessThan(0.05);
      const ideal = fitNormalFormExact(u);
      // Euler residuals at Δt = 3.1 ms read E|Δu|² = σ²Δt(1 − rΔt/2 + …): about r·Δt/2 ≈ 2.5 % low at r = 16 1/s.
      expect(Math.abs(ideal.noiseIntensity / 0.01 - 1)).toBeLessThan(0.05);
    }
  });
});

describe('estimateModeStatistics on recordings of the normal form', () => {
  const record = (nu: number, kappa: number, seed: number, fs = 16000, durationS = 30, scale = 1) =>
    normalFormMode({ sampleRateHz: fs, durationS, frequencyHz: 210, growthRatePerS: nu, saturation: kappa / (scale * scale), noiseIntensity: 0.01 * scale * scale, measurementNoiseRms: 0.003 * scale, seed });

  it('calls stable, near-threshold and humming from the interval, holding the truth', () => {
    for (const [nu, kappa, regime] of [
      [-8, 0, 'stable'],
      [8, 800, 'humming'],
    ] as const) {
      const r = estimateModeStatistics(record(nu, kappa, 5).samples, 16000, { centreHz: 210 });
      expect(r.isValid).toBe(true);
      expect(r.regime).toBe(regime);
      // A 95 % interval misses one time in 20 (the bench measures coverage); 1.5 half-widths is a ~3-sd bound.
      expect(Math.abs(r.growthRatePerS - nu)).toBeLessThan(0.75 * (r.ci95PerS[1] - r.ci95PerS[0]));
      expect(Math.abs(r.frequencyHz - 210)).toBeLessThan(0.5);
    }
    const near = estimateModeStatistics(record(0, 1000, 6).samples, 16000, { centreHz: 210 });
    expect(near.regime).toBe('near-threshold');
  });

  it('says it cannot tell: shorter than 20 s, clipped input, a second mode in the band', () => {
    const short = estimateModeStatistics(record(-8, 0, 7, 16000, 12).samples, 16000, { centreHz: 210 });
    expect(short.regime).toBe('undetermined');
    expect(short.reason).toMatch(/shorter than 20 s/);
    const x = record(-8, 0, 8).samples;
    expect(estimateModeStatistics(x, 16000, { centreHz: 210, isClipped: true }).regime).toBe('undetermined');
    // A second resonance 15 Hz away, as strong: the band holds two modes.
    const other = normalFormMode({ sampleRateHz: 16000, durationS: 30, frequencyHz: 225, growthRatePerS: -6, saturation: 0, noiseIntensity: 0.01, measurementNoiseRms: 0, seed: 9 }).samples;
    const two = Float32Array.from(x, (v, i) => v + other[i]);
    const r = estimateModeStatistics(two, 16000, { centreHz: 210 });
    expect(r.regime).toBe('undetermined');
    expect(r.reason).toMatch(/second mode/);
    // One mode alone over a sloping (red) floor is not two modes.
    const red = synthesize({ sampleRateHz: 16000, durationS: 30, noiseRms: 0.01, seed: 4 });
    let lp = 0;
    for (let i = 0; i < red.length; i++) {
      lp += 0.05 * (red[i] - lp);
      red[i] = lp + x[i];
    }
    expect(estimateModeStatistics(red, 16000, { centreHz: 210 }).reason ?? '').not.toMatch(/second mode/);
  });

  it('property: scaling the recording leaves ν unchanged and scales κ by 1/c², σ² by c² (the model is homogeneous in u)', () => {
    const x = record(-6, 0, 12).samples;
    const a = estimateModeStatistics(x, 16000, { centreHz: 210 });
    for (const c of [0.01, 30]) {
      const b = estimateModeStatistics(Float32Array.from(x, (v) => v * c), 16000, { centreHz: 210 });
      // float32 rounding of the scaled samples only: far below the interval.
      expect(Math.abs(b.growthRatePerS - a.growthRatePerS)).toBeLessThan(1e-3 * (a.ci95PerS[1] - a.ci95PerS[0]));
      expect(b.noiseIntensity / (a.noiseIntensity * c * c)).toBeCloseTo(1, 3);
    }
  });

  it('property: the same envelope on a carrier sampled at 16 and 48 kHz gives the same ν', () => {
    // One envelope at 48 kHz (every third value reused at 16 kHz), carrier rendered at each rate.
    const sig = normalFormMode({ sampleRateHz: 48000, durationS: 30, frequencyHz: 210, growthRatePerS: 6, saturation: 600, noiseIntensity: 0.01, measurementNoiseRms: 0, envelopeEvery: 3, seed: 13 });
    const rng = createRng(99);
    const x16 = new Float32Array(sig.envelopeRe.length);
    const w = (2 * Math.PI * 210) / 16000;
    for (let i = 0; i < x16.length; i++) x16[i] = sig.envelopeRe[i] * Math.cos(w * i) - sig.envelopeIm[i] * Math.sin(w * i) + 0.003 * rng.normal();
    const rng48 = createRng(98);
    const x48 = Float32Array.from(sig.samples, (v) => v + 0.003 * rng48.normal());
    const a = estimateModeStatistics(x16, 16000, { centreHz: 210 });
    const b = estimateModeStatistics(x48, 48000, { centreHz: 210 });
    // Only the band filter's sampling and the measurement noise differ: the difference is a small share of the interval.
    expect(Math.abs(a.growthRatePerS - b.growthRatePerS)).toBeLessThan(0.25 * (a.ci95PerS[1] - a.ci95PerS[0]));
    expect(a.regime).toBe(b.regime);
  });

  it('property: time reversal does not flip the sign of ν', () => {
    // In a transient fit, reversing time turns a growth into a decay (s → −s). Here it does not apply:
    // the record is stationary and the normal form's drift is a gradient (−∇V, V = −ν|u|²/2 + κ|u|⁴/4)
    // with additive isotropic noise, so the process satisfies detailed balance and its reversed
    // record has the same law (Risken 1989, The Fokker-Planck Equation, §6.1 [memory]). A stable mode
    // stays stable and a hum stays a hum: the estimate must be (nearly) unchanged, not negated.
    for (const [nu, kappa] of [
      [-6, 0],
      [6, 600],
    ]) {
      const x = record(nu, kappa, 17).samples;
      const a = estimateModeStatistics(x, 16000, { centreHz: 210 });
      const b = estimateModeStatistics(Float32Array.from(x).reverse(), 16000, { centreHz: 210 });
      expect(b.regime).toBe(a.regime);
      expect(Math.abs(b.growthRatePerS - a.growthRatePerS)).toBeLessThan(0.3 * (a.ci95PerS[1] - a.ci95PerS[0]));
    }
  });
});

describe('reconciliation and regime (REFERENCES.md §42)', () => {
  const est = (nu: number, lo: number, hi: number) => ({ isValid: true, growthRatePerS: nu, ci95PerS: [lo, hi] as [number, number], saturation: 0, noiseIntensity: 1 });
  it('takes the narrowest agreeing route, and widens to cover all when they disagree', () => {
    const agree = reconcileRoutes([
      { name: 'a', est: est(-5, -7, -3) },
      { name: 'b', est: est(-5.5, -6.5, -4.5) },
    ]);
    expect(agree?.method).toBe('b');
    expect(agree?.est.ci95PerS).toEqual([-6.5, -4.5]);
    const apart = reconcileRoutes([
      { name: 'a', est: est(-1, -1.5, -0.5) },
      { name: 'b', est: est(-5, -5.4, -4.6) },
    ]);
    expect(apart?.method).toBe('b+disagree');
    expect(apart?.est.ci95PerS).toEqual([-5.4, -0.5]);
  });
  it('regime from the sign the interval allows', () => {
    expect(regimeFromInterval([-3, -1])).toBe('stable');
    expect(regimeFromInterval([-1, 2])).toBe('near-threshold');
    expect(regimeFromInterval([0.5, 2])).toBe('humming');
  });
});
