import { describe, expect, it } from 'vitest';
import { createRig, firstInstability, leadingMode, linearModes, MAX_HEATER_POWER, renderScenario, simulateRig, type Rig } from '../../dsp/rig-sim';

// The simulator's truth over all Galerkin modes (REFERENCES.md §72). Model: Balasubramanian & Sujith
// 2008 (form and defaults from memory), see dsp/rig-sim.ts.
const tube = (heaterFraction: number): Rig => createRig({ lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: heaterFraction });

/**
 * Number of roots of the characteristic equation 1 + e^{−στ} Σ g_j / D_j(σ) = 0 in the right
 * half-plane, by the argument principle along the imaginary axis: F has no poles there (every D_j is
 * a damped oscillator) and F → 1 on the large arc, so the zeros inside equal the winding of F(iω)
 * around 0 for ω from −W to W (Churchill & Brown, Complex Variables, argument principle — from memory).
 * Written from the rig's mode data only, independent of the continuation and of `characteristic`.
 */
function rightHalfPlaneRoots(rig: Rig, heaterPower: number): number {
  const n = rig.k.length;
  const w = 400; // Σ g/D falls as K k_max / ω² ≈ 0.002 beyond: no winding left out
  const dw = 0.0005; // far below the narrowest resonance width ζ₁ k₁ ≈ 0.08
  let total = 0;
  let prev = Number.NaN;
  for (let om = -w; om <= w; om += dw) {
    let re = 1;
    let im = 0;
    // e^{−iωτ} Σ g_j / D_j(iω), D_j(iω) = k_j² − ω² + 2iζ_j k_j ω.
    let sr = 0;
    let si = 0;
    for (let j = 0; j < n; j++) {
      const g = (Math.sqrt(3) / 2) * heaterPower * rig.k[j] * rig.pAtHeater[j] * rig.uAtHeater[j];
      const dr = rig.k[j] * rig.k[j] - om * om;
      const di = 2 * rig.zeta[j] * rig.k[j] * om;
      const d2 = dr * dr + di * di;
      sr += (g * dr) / d2;
      si += (-g * di) / d2;
    }
    const er = Math.cos(om * rig.tau);
    const ei = -Math.sin(om * rig.tau);
    re += er * sr - ei * si;
    im += er * si + ei * sr;
    const ph = Math.atan2(im, re);
    if (!Number.isNaN(prev)) {
      let d = ph - prev;
      if (d > Math.PI) d -= 2 * Math.PI;
      if (d < -Math.PI) d += 2 * Math.PI;
      total += d;
    }
    prev = ph;
  }
  // Traversed upward along the axis the right half-plane lies on the right: zeros = −winding.
  return Math.round(-total / (2 * Math.PI)) + 0; // + 0 turns −0 into 0
}

describe('first mode to go unstable, over all modes', () => {
  it('heater at a quarter: mode 1 first; no root in the right half-plane just below, one pair just above (argument principle)', () => {
    const rig = tube(0.25);
    const first = firstInstability(rig);
    expect(first?.n).toBe(1);
    const k = first?.heaterPower ?? Number.NaN;
    expect(rightHalfPlaneRoots(rig, 0.99 * k)).toBe(0);
    expect(rightHalfPlaneRoots(rig, 1.01 * k)).toBe(2);
    // At the critical power the root sits on the imaginary axis within the bisection's resolution.
    const m1 = linearModes(rig, k, 1)[0];
    expect(Math.abs(m1.growthRatePerS)).toBeLessThan(1e-6);
  });

  it('heater at 0.1 L: mode 2 goes unstable first; the truth says unstable, names mode 2 and its rate (field report: +3.0 1/s at K = 1.3)', () => {
    const rig = tube(0.1);
    const first = firstInstability(rig);
    expect(first?.n).toBe(2);
    const k = first?.heaterPower ?? Number.NaN;
    expect(rightHalfPlaneRoots(rig, 0.99 * k)).toBe(0);
    expect(rightHalfPlaneRoots(rig, 1.01 * k)).toBe(2);
    const modes = linearModes(rig, 1.3);
    expect(modes[0].growthRatePerS).toBeLessThan(0); // the fundamental alone would say "stable"
    const lead = leadingMode(modes);
    expect(lead.n).toBe(2);
    expect(lead.growthRatePerS).toBeGreaterThan(2.5);
    expect(lead.growthRatePerS).toBeLessThan(3.5);
    const { truth } = renderScenario({
      params: { lengthM: 1, gasTemperatureC: 20, ends: 'open-open', heaterPositionM: 0.1 },
      schedule: [{ atS: 0, heaterPower: 0 }, { atS: 0.2, heaterPower: 1.3 }, { atS: 0.4, heaterPower: 0 }],
      durationS: 0.6,
      sampleRateHz: 16000,
      silenceS: 0,
    });
    expect(truth.criticalModeN).toBe(2);
    expect(truth.criticalHeaterPower).toBeCloseTo(k, 9);
    expect(truth.steps[1].isUnstable).toBe(true);
    expect(truth.steps[1].mode).toBe(2);
    expect(truth.steps[1].growthRatePerS).toBeCloseTo(lead.growthRatePerS, 9);
    // The drop: the mode that was sounding (2) decays at its K = 0 rate.
    expect(truth.steps[2].decayRatePerS).toBeCloseTo(-linearModes(rig, 0)[1].growthRatePerS, 9);
    expect(truth.steps[1].modes).toHaveLength(rig.k.length);
  });

  it('heater at 0.75 L: a root that turns real is no tone; the first to hum is mode 3, not the real root crossing near K = 8.7', () => {
    const rig = tube(0.75);
    const real = linearModes(rig, 8.7, 1)[0];
    expect(real.isOscillating).toBe(false);
    expect(real.growthRatePerS).toBeGreaterThan(0);
    const first = firstInstability(rig);
    expect(first?.n).toBe(3);
    const k = first?.heaterPower ?? Number.NaN;
    expect(k).toBeLessThan(5);
    expect(rightHalfPlaneRoots(rig, 0.99 * k)).toBe(0);
    expect(rightHalfPlaneRoots(rig, 1.01 * k)).toBe(2);
  });

  it('heater at mid-length drives no mode of an open–open tube (P_j U_j = sin(jπ/2) cos(jπ/2) = 0 for every mode; REFERENCES.md §4): null up to the largest power', () => {
    expect(firstInstability(tube(0.5))).toBeNull();
    expect(rightHalfPlaneRoots(tube(0.5), MAX_HEATER_POWER)).toBe(0);
  });
});

describe('bounded inputs (no hang, no non-finite output)', () => {
  const params = { lengthM: 1, gasTemperatureC: 20, ends: 'open-open' as const, heaterPositionM: 0.25 };
  it('refuses a length, temperature, lag, power or forcing outside its range, naming it', () => {
    expect(() => createRig({ ...params, lengthM: 1e308, heaterPositionM: 0.25 })).toThrow(/lengthM must lie from 0.001 to 500 m/);
    expect(() => createRig({ ...params, gasTemperatureC: 1e308 })).toThrow(/temperatureC/);
    expect(() => createRig({ ...params, heatLagS: 1e308 })).toThrow(/heatLagS/);
    expect(() => linearModes(createRig(params), 1e308)).toThrow(/heaterPower must lie from 0 to 10/);
    expect(() => simulateRig({ rig: createRig(params), schedule: [], durationS: 0.1, sampleRateHz: 16000, excitationRms: 1e308 })).toThrow(/excitationRms/);
    expect(() => simulateRig({ rig: createRig(params), schedule: [], durationS: 0.1, sampleRateHz: 16000, initialAmplitude: 1 })).toThrow(/initialAmplitude/);
    expect(() => renderScenario({ params, schedule: [], durationS: 0.1, sampleRateHz: 16000, silenceS: 1e308 })).toThrow(/silenceS/);
  });
  it('refuses a sample rate too low for the tube\'s highest mode (RK4 stability) instead of writing a diverged signal', () => {
    // 10 mm tube: modes up to 171 kHz at 20 °C; 16 kHz × 4 substeps cannot follow them.
    expect(() => simulateRig({ rig: createRig({ ...params, lengthM: 0.01, heaterPositionM: 0.0025 }), schedule: [], durationS: 0.01, sampleRateHz: 16000 })).toThrow(/sampleRateHz must be at least/);
  });
  it('the largest forcing allowed stays finite and below the mean flow (1/3)', () => {
    const r = simulateRig({ rig: createRig(params), schedule: [{ atS: 0, heaterPower: 0 }], durationS: 0.5, sampleRateHz: 16000, excitationRms: 0.1, seed: 3 });
    let peak = 0;
    for (const u of r.heaterVelocity) {
      expect(Number.isFinite(u)).toBe(true);
      peak = Math.max(peak, Math.abs(u));
    }
    expect(peak).toBeLessThan(1 / 3);
  });
});
