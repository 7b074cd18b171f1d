import { describe, expect, it } from 'vitest';
import { characteristic, createRig, firstInstability, kingFirstHarmonic, linearModes, renderScenario, simulateRig, type Rig } from '../../dsp/rig-sim';
import { createAnalysis } from '../../dsp/index';
import type { Report } from '../../dsp/types';
import { AIR_FIXED_GAMMA, speedOfSoundMPerS } from '../../dsp/duct';

// Model: Balasubramanian & Sujith 2008, Phys. Fluids 20, 044103 (form and defaults from memory), see dsp/rig-sim.ts.
const fs = 16000;
const bench = (): Rig => createRig({ lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25 });

/** Least-squares slope of ln(peak |x|) per cycle against time: an estimator independent of the characteristic equation. */
function logSlope(x: Float64Array, fs: number, fromS: number, toS: number): number {
  const ts: number[] = [];
  const ls: number[] = [];
  for (let i = Math.round(fromS * fs) + 1; i < Math.round(toS * fs) - 1; i++) {
    const a = Math.abs(x[i - 1]);
    const b = Math.abs(x[i]);
    const c = Math.abs(x[i + 1]);
    if (b > a && b >= c && x[i] > 0) {
      // Parabolic interpolation of the peak (J. O. Smith, Spectral Audio Signal Processing, 2011).
      const den = a - 2 * b + c;
      const d = den === 0 ? 0 : (0.5 * (a - c)) / den;
      ts.push((i + d) / fs);
      ls.push(Math.log(b - 0.25 * (a - c) * d));
    }
  }
  const n = ts.length;
  const mt = ts.reduce((p, q) => p + q, 0) / n;
  const ml = ls.reduce((p, q) => p + q, 0) / n;
  let sxy = 0;
  let sxx = 0;
  for (let i = 0; i < n; i++) {
    sxy += (ts[i] - mt) * (ls[i] - ml);
    sxx += (ts[i] - mt) ** 2;
  }
  return sxy / sxx;
}

describe('characteristic equation', () => {
  it('without heater power, each mode is a damped oscillator: rate −ζω, frequency ω sqrt(1 − ζ²) (REFERENCES.md §5)', () => {
    const rig = bench();
    const modes = linearModes(rig, 0, 3);
    const c = speedOfSoundMPerS(20, AIR_FIXED_GAMMA); // the simulator's gas unless one is given
    for (const m of modes) {
      const j = m.n - 1;
      const zeta = (0.1 * m.n + 0.06 / Math.sqrt(m.n)) / (2 * Math.PI); // Matveev-type damping, from memory
      const w = (m.n * Math.PI * c) / 1; // rad/s, L = 1 m
      expect(Math.abs(m.growthRatePerS + zeta * w) / (zeta * w)).toBeLessThan(1e-9);
      expect(Math.abs(m.frequencyHz - (w * Math.sqrt(1 - zeta * zeta)) / (2 * Math.PI)) / m.frequencyHz).toBeLessThan(1e-9);
      expect(rig.zeta[j]).toBeCloseTo(zeta, 12);
    }
  });

  it('a small heater power shifts the root by the first-order perturbation −g e^{−στ}/D′(σ) (Taylor expansion)', () => {
    const rig = bench();
    const K = 0.002;
    const s0 = linearModes(rig, 0, 1)[0];
    const s1 = linearModes(rig, K, 1)[0];
    const sr = s0.growthRatePerS * rig.timeScaleS;
    const si = 2 * Math.PI * s0.frequencyHz * rig.timeScaleS;
    // Mode 1 alone (other modes' terms are O(K²) in the shift): δ = −g₁ e^{−σ₀τ} / (2σ₀ + 2ζk).
    const g = (Math.sqrt(3) / 2) * K * Math.PI * Math.sin(Math.PI * 0.25) * Math.cos(Math.PI * 0.25);
    const er = Math.exp(-sr * rig.tau) * Math.cos(si * rig.tau);
    const ei = -Math.exp(-sr * rig.tau) * Math.sin(si * rig.tau);
    const dr = 2 * sr + 2 * rig.zeta[0] * Math.PI;
    const di = 2 * si;
    const den = dr * dr + di * di;
    const deltaRe = (-g * (er * dr + ei * di)) / den;
    const got = (s1.growthRatePerS - s0.growthRatePerS) * rig.timeScaleS;
    expect(Math.abs(got - deltaRe) / Math.abs(deltaRe)).toBeLessThan(0.02);
    expect(got).toBeGreaterThan(0); // heater in the lower half with upward flow drives the fundamental (REFERENCES.md §4)
  });

  it('the root makes the full N×N delay matrix singular (determinant by Gaussian elimination, independent of the rank-one reduction)', () => {
    const rig = bench();
    const K = 0.9;
    const m = linearModes(rig, K, 1)[0];
    const s: [number, number] = [m.growthRatePerS * rig.timeScaleS, 2 * Math.PI * m.frequencyHz * rig.timeScaleS];
    const det = (z: [number, number]): number => {
      const n = rig.k.length;
      const re: number[][] = [];
      const im: number[][] = [];
      const ex = Math.exp(-z[0] * rig.tau);
      const er = ex * Math.cos(z[1] * rig.tau);
      const ei = -ex * Math.sin(z[1] * rig.tau);
      for (let i = 0; i < n; i++) {
        re.push([]);
        im.push([]);
        const b = (Math.sqrt(3) / 2) * K * rig.k[i] * rig.pAtHeater[i];
        for (let j = 0; j < n; j++) {
          const cj = rig.uAtHeater[j];
          re[i].push(b * cj * er);
          im[i].push(b * cj * ei);
        }
        re[i][i] += z[0] * z[0] - z[1] * z[1] + 2 * rig.zeta[i] * rig.k[i] * z[0] + rig.k[i] * rig.k[i];
        im[i][i] += 2 * z[0] * z[1] + 2 * rig.zeta[i] * rig.k[i] * z[1];
      }
      // |det| relative to the product of diagonal magnitudes (scale-free), partial pivoting.
      let logAbs = 0;
      let scale = 0;
      for (let i = 0; i < n; i++) scale += Math.log(Math.hypot(re[i][i], im[i][i]));
      for (let c = 0; c < n; c++) {
        let p = c;
        for (let r = c + 1; r < n; r++) if (Math.hypot(re[r][c], im[r][c]) > Math.hypot(re[p][c], im[p][c])) p = r;
        [re[c], re[p]] = [re[p], re[c]];
        [im[c], im[p]] = [im[p], im[c]];
        const pr = re[c][c];
        const pi = im[c][c];
        const pm = pr * pr + pi * pi;
        logAbs += 0.5 * Math.log(pm);
        for (let r = c + 1; r < n; r++) {
          const fr = (re[r][c] * pr + im[r][c] * pi) / pm;
          const fi = (im[r][c] * pr - re[r][c] * pi) / pm;
          for (let q = c; q < n; q++) {
            const a = re[c][q];
            const b = im[c][q];
            re[r][q] -= fr * a - fi * b;
            im[r][q] -= fr * b + fi * a;
          }
        }
      }
      return Math.exp(logAbs - scale);
    };
    expect(det(s)).toBeLessThan(1e-8);
    // Control: 1 % away from the root the matrix is far from singular.
    expect(det([s[0], s[1] * 1.01])).toBeGreaterThan(1e-3);
    const h = characteristic(rig, K, 0, s);
    expect(Math.hypot(h[0], h[1])).toBeLessThan(1e-8);
  });

  it('bench tube of 1 m at 20 °C: fundamental 150–250 Hz, growth rates a few to tens of 1/s (the target range of the brief)', () => {
    const rig = bench();
    const kc = firstInstability(rig)?.heaterPower ?? Number.NaN;
    expect(kc).toBeGreaterThan(0.1);
    expect(kc).toBeLessThan(2);
    const m = linearModes(rig, 1.3 * kc, 1)[0];
    expect(m.frequencyHz).toBeGreaterThan(150);
    expect(m.frequencyHz).toBeLessThan(250);
    expect(m.growthRatePerS).toBeGreaterThan(2);
    expect(m.growthRatePerS).toBeLessThan(60);
    expect(Math.abs(linearModes(rig, kc, 1)[0].growthRatePerS)).toBeLessThan(1e-6);
  });

  it('King\'s law first harmonic: 0 without mean flow, 0.100381 with u₀ = 1, U = 0.2 (vector 15)', () => {
    expect(Math.abs(kingFirstHarmonic(0, 0.2))).toBeLessThan(1e-5);
    expect(Math.abs(kingFirstHarmonic(1, 0.2) - 0.100381)).toBeLessThan(1e-5);
  });
});

describe('time series', () => {
  it.each([0.72, 0.8, 1.0, 0.4])('small-amplitude log-slope agrees with the characteristic equation at K = $0 (within 0.5 percent)', (K) => {
    const rig = bench();
    const want = linearModes(rig, K, 1)[0].growthRatePerS;
    const r = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: K }], durationS: 1.0, sampleRateHz: fs, initialAmplitude: 1e-9, excitationRms: 0 });
    // Skip 0.15 s: the other Galerkin modes, excited by the heater coupling, decay at ≥ 80 1/s (e^−12 by then).
    // Amplitude stays below 1e-5 ≪ 1/3, where sqrt(1/3 + u) is linear to 1e-5 relative. RK4 at ~370 steps
    // per period and linear interpolation of the lag leave rate errors of order (ω dt)²/8 ≈ 4e-5; the
    // peak-picking slope over ~150 cycles adds < 1e-3. Measured agreement: 2e-4 or better; bound 0.5 %.
    const got = logSlope(r.pressure, fs, 0.15, 1.0);
    expect(Math.abs(got - want) / Math.abs(want)).toBeLessThan(0.005);
  });

  it('closed–open flue basis: small-amplitude log-slope agrees with the characteristic equation (within 0.5 percent)', () => {
    // Same estimator on the quarter-wave basis (U = sin, P = −cos, k = (j − ½)π): the demo flue scenario.
    const rig = createRig({ lengthM: 2.2, gasTemperatureC: 120, ends: 'closed-open', heaterPositionM: 0.5, heatLagS: 0.014 });
    const want = linearModes(rig, 0.75, 1)[0];
    expect(want.frequencyHz).toBeGreaterThan(40);
    expect(want.frequencyHz).toBeLessThan(50);
    const r = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 0.75 }], durationS: 3, sampleRateHz: fs, initialAmplitude: 1e-9, excitationRms: 0 });
    // Higher modes decay at ≥ 50 1/s: skip 0.3 s. 2.7 s hold ~125 cycles.
    const got = logSlope(r.pressure, fs, 0.3, 3);
    expect(Math.abs(got - want.growthRatePerS) / want.growthRatePerS).toBeLessThan(0.005);
  });

  it('a stable setting dies away and an unstable one grows into a limit cycle', () => {
    const rig = bench();
    const kc = firstInstability(rig)?.heaterPower ?? Number.NaN;
    const peak = (x: Float64Array, from: number, to: number): number => {
      let m = 0;
      for (let i = Math.round(from * fs); i < Math.round(to * fs); i++) m = Math.max(m, Math.abs(x[i]));
      return m;
    };
    const stable = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 0.8 * kc }], durationS: 2, sampleRateHz: fs, initialAmplitude: 1e-3, excitationRms: 0 });
    expect(peak(stable.pressure, 1.8, 2)).toBeLessThan(0.1 * peak(stable.pressure, 0, 0.2));
    const unstable = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 1.3 * kc }], durationS: 4, sampleRateHz: fs, initialAmplitude: 1e-3, excitationRms: 0 });
    const late = peak(unstable.pressure, 3.5, 4);
    expect(late).toBeGreaterThan(30 * peak(unstable.pressure, 0, 0.2));
    // Limit cycle: the amplitude has stopped growing (within 1 %) between 3.0–3.5 s and 3.5–4 s.
    expect(Math.abs(late / peak(unstable.pressure, 3.0, 3.5) - 1)).toBeLessThan(0.01);
    // Saturation by King's law: the heater velocity swings beyond the mean flow (1/3) in the limit cycle.
    expect(peak(unstable.heaterVelocity, 3.5, 4)).toBeGreaterThan(1 / 3);
  });

  it('switching the heater off gives the free decay at the K = 0 rate (log-slope within 2 %)', () => {
    const rig = bench();
    const r = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 1.0 }, { atS: 1.5, heaterPower: 0 }], durationS: 2.5, sampleRateHz: fs, initialAmplitude: 1e-3, excitationRms: 0 });
    const want = linearModes(rig, 0, 1)[0].growthRatePerS;
    // After the switch the lagged term still acts for τ (0.6 ms), then the system is linear: skip 50 ms.
    const got = logSlope(r.pressure, fs, 1.55, 2.3);
    expect(Math.abs(got - want) / Math.abs(want)).toBeLessThan(0.02);
  });

  it('is reproducible from its seed and changes with another seed', () => {
    const rig = bench();
    const a = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 0.3 }], durationS: 0.2, sampleRateHz: fs, seed: 5 });
    const b = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 0.3 }], durationS: 0.2, sampleRateHz: fs, seed: 5 });
    const c = simulateRig({ rig, schedule: [{ atS: 0, heaterPower: 0.3 }], durationS: 0.2, sampleRateHz: fs, seed: 6 });
    expect(a.pressure).toEqual(b.pressure);
    expect(a.pressure).not.toEqual(c.pressure);
  });
});

describe('scenario truth', () => {
  it('limit cycle: zero-crossing frequency agrees with the peak of a direct DFT (independent estimator)', () => {
    const { samples, truth } = renderScenario({
      params: { lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25 },
      schedule: [{ atS: 0, heaterPower: 0.9 }],
      durationS: 4,
      sampleRateHz: fs,
      noiseDbfs: -Infinity,
      silenceS: 0,
      excitationRms: 1e-5, // starts the growth; 100 dB below the limit cycle
    });
    const lc = truth.steps[0].limitCycle;
    expect(lc).not.toBeNull();
    if (!lc) return;
    // |Σ x e^{−iωt}| over the last second, maximised by golden-section search near the tube mode.
    const from = 3 * fs;
    const mag = (f: number): number => {
      let re = 0;
      let im = 0;
      for (let i = from; i < 4 * fs; i++) {
        const ph = (2 * Math.PI * f * i) / fs;
        re += samples[i] * Math.cos(ph);
        im -= samples[i] * Math.sin(ph);
      }
      return Math.hypot(re, im);
    };
    let a = 165;
    let b = 190;
    const g = (Math.sqrt(5) - 1) / 2;
    for (let k = 0; k < 40; k++) {
      const c = b - g * (b - a);
      const d = a + g * (b - a);
      if (mag(c) > mag(d)) b = d;
      else a = c;
    }
    const fDft = (a + b) / 2;
    // A steady tone over 1 s: both estimators are unbiased to far below 0.1 Hz (harmonics are orthogonal).
    expect(Math.abs(lc.frequencyHz - fDft)).toBeLessThan(0.1);
    // Peak 0.5 full scale with harmonics: RMS level a little below a 0.5 sine (−6.0 dBFS).
    expect(lc.amplitudeDbfs).toBeLessThan(-5.9);
    expect(lc.amplitudeDbfs).toBeGreaterThan(-12);
  });
});

describe('bad input', () => {
  it('names the parameter', () => {
    expect(() => createRig({ lengthM: 0, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25 })).toThrow(/lengthM/);
    expect(() => createRig({ lengthM: 1, gasTemperatureC: -300, ends: 'open-open', heaterPositionM: 0.25 })).toThrow(/absolute zero/);
    expect(() => createRig({ lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 1.2 })).toThrow(/heaterPositionM/);
    expect(() => createRig({ lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.25, modeCount: 0 })).toThrow(/modeCount/);
    expect(() => linearModes(bench(), -1)).toThrow(/heaterPower/);
    expect(() => simulateRig({ rig: bench(), schedule: [], durationS: -1, sampleRateHz: fs })).toThrow(/durationS/);
    expect(() => simulateRig({ rig: bench(), schedule: [{ atS: 0, heaterPower: Number.NaN }], durationS: 1, sampleRateHz: fs })).toThrow(/heaterPower/);
  });
});

describe('against the streaming analyser (dsp/pipeline.ts createAnalysis)', () => {
  const params = { lengthM: 1, gasTemperatureC: 20, ends: 'open-open' as const, heaterPositionM: 0.25 };
  function analyse(samples: Float32Array): Report {
    const a = createAnalysis({ sampleRateHz: fs });
    for (let i = 0; i < samples.length; i += 2048) a.push(samples.subarray(i, Math.min(samples.length, i + 2048)));
    return a.finish();
  }
  // Identifies the tube's fundamental among the analyser's tones (harmonics lie ≥ 2× away). Only a
  // selector: frequency accuracy is the tracker's own test; the check here is the growth rate.
  const near = (fHz: number, targetHz: number): boolean => Math.abs(fHz - targetHz) / targetHz < 0.1;

  it.each([
    [0.72, 11],
    [0.9, 3],
  ])('fitted growth rate matches the characteristic equation within 5 percent, K = $0, seed $1', (K, seed) => {
    // Heater on at 3 s: the noise-driven mode (about −69 dBFS) grows to the limit cycle (about −7 dBFS),
    // a linear stretch of ~60 dB, i.e. 1.5 s at 4.8 1/s and 0.55 s at 12.9 1/s: hundreds of envelope
    // samples, so the fit's own 95 % interval is a few per cent and 5 % leaves room for it (brief, issue 5).
    const { samples, truth } = renderScenario({
      params,
      schedule: [{ atS: 0, heaterPower: 0 }, { atS: 3, heaterPower: K }, { atS: 8, heaterPower: 0 }],
      durationS: 9,
      sampleRateHz: fs,
      noiseDbfs: -80,
      excitationRms: 5e-4,
      seed,
    });
    const want = truth.steps[1];
    const report = analyse(samples);
    const growth = report.segments.filter((s) => s.kind === 'growth' && s.ratePerS !== null && near(s.frequencyHz, want.frequencyHz) && s.startS > 2.5 && s.startS < 4);
    expect(growth.length).toBeGreaterThan(0);
    const rate = growth[0].ratePerS ?? Number.NaN;
    expect(Math.abs(rate - want.growthRatePerS) / want.growthRatePerS).toBeLessThan(0.05);
    expect(report.onsets.some((o) => near(o.frequencyHz, want.frequencyHz) && o.timeS > 2.5 && o.timeS < 4)).toBe(true);
  });

  it('a stable heater setting gives no onset at the tube mode', () => {
    // K = 0.3: net decay about 14 1/s, half the cold damping, so the noise-driven level rises only ~3 dB.
    // (Closer to the threshold, K = 0.5 at 5 1/s, the noise-driven level rises ~7 dB when the heater comes on.)
    const { samples, truth } = renderScenario({
      params,
      schedule: [{ atS: 0, heaterPower: 0 }, { atS: 2, heaterPower: 0.3 }],
      durationS: 6,
      sampleRateHz: fs,
      noiseDbfs: -80,
      excitationRms: 5e-4,
      seed: 4,
    });
    expect(truth.steps[1].isUnstable).toBe(false);
    expect(truth.steps[1].growthRatePerS).toBeLessThan(-10);
    const report = analyse(samples);
    expect(report.onsets.filter((o) => near(o.frequencyHz, truth.steps[1].frequencyHz))).toEqual([]);
  });
});
