import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { AIR_FIXED_GAMMA, ductModelFromGeometry, predictModes, zonesFromProfile, type DuctModel } from '../../dsp/duct';
import { matchMeasuredFrequency } from '../../dsp/duct-match';
import type { DuctGeometry } from '../../dsp/types';

// Property tests over random ducts (seeded, 100 cases each).
const geometry = fc.record({
  lengthM: fc.double({ min: 0.2, max: 10, noNaN: true }),
  diameterM: fc.double({ min: 0.005, max: 0.1, noNaN: true }),
  ends: fc.constantFrom('open-open' as const, 'open-closed' as const, 'closed-closed' as const),
  openEnd: fc.constantFrom('unflanged' as const, 'flanged' as const, 'none' as const),
  gasTemperatureC: fc.double({ min: -40, max: 900, noNaN: true }),
});
const params = { numRuns: 100, seed: 20261202 };

describe('duct properties', () => {
  it('modes ascend and scale as sqrt(T) for a constant γ (c = sqrt(γ R T): REFERENCES.md §1)', () => {
    fc.assert(
      fc.property(geometry, fc.double({ min: -40, max: 900, noNaN: true }), (g: DuctGeometry, t2) => {
        const a = predictModes(ductModelFromGeometry(g, AIR_FIXED_GAMMA), 5).modes;
        const b = predictModes(ductModelFromGeometry({ ...g, gasTemperatureC: t2 }, AIR_FIXED_GAMMA), 5).modes;
        const ratio = Math.sqrt((t2 + 273.15) / (g.gasTemperatureC + 273.15));
        for (let i = 0; i < 5; i++) {
          if (i > 0) expect(a[i].frequencyHz).toBeGreaterThan(a[i - 1].frequencyHz);
          expect(Math.abs(b[i].frequencyHz / a[i].frequencyHz - ratio)).toBeLessThan(1e-12);
        }
      }),
      params,
    );
  });

  it('transfer matrices over a split uniform duct agree with the closed form (independent agreement)', () => {
    fc.assert(
      fc.property(geometry, fc.integer({ min: 2, max: 9 }), (g: DuctGeometry, parts) => {
        const one = ductModelFromGeometry(g);
        const split: DuctModel = { ...one, zones: zonesFromProfile([{ xM: 0, temperatureC: g.gasTemperatureC }], g.lengthM, parts) };
        const a = predictModes(one, 4).modes;
        const b = predictModes(split, 4).modes;
        // Brent stops at 1e-10 relative; the chained matrices lose a few ulps per zone.
        for (let i = 0; i < 4; i++) expect(Math.abs(b[i].frequencyHz / a[i].frequencyHz - 1)).toBeLessThan(1e-8);
      }),
      params,
    );
  });

  it('the inferred temperature of a predicted mode is the duct temperature, with air\'s γ(T) (round trip)', () => {
    fc.assert(
      fc.property(geometry, fc.integer({ min: 1, max: 4 }), (g: DuctGeometry, n) => {
        const model = ductModelFromGeometry(g);
        const pred = predictModes(model, n).modes[n - 1];
        const m = matchMeasuredFrequency(model, pred.frequencyHz, { frequencyStdHz: 0, lengthStdM: 0 });
        const c = m.candidates.find((x) => x.n === n);
        expect(c).toBeDefined();
        expect(Math.abs((c?.temperatureC ?? Number.NaN) - g.gasTemperatureC)).toBeLessThan(1e-6);
        // A plane-wave mode at a plausible temperature is the best candidate: it sits exactly on the prediction.
        if (!pred.isAboveCutOn) expect(m.best?.n).toBe(n);
      }),
      params,
    );
  });

  it('candidates: finite, within the gas range, intervals above absolute zero for any tone and uncertainty in range', () => {
    fc.assert(
      fc.property(
        geometry,
        fc.double({ min: 0.01, max: 1e5, noNaN: true }),
        fc.double({ min: 0, max: 1, noNaN: true }),
        fc.double({ min: 0, max: 1, noNaN: true }),
        (g: DuctGeometry, fHz, uf, ul) => {
          const m = matchMeasuredFrequency(ductModelFromGeometry(g), fHz, { frequencyStdHz: uf * fHz, lengthStdM: ul * g.lengthM });
          for (const c of m.candidates) {
            expect(c.temperatureC).toBeGreaterThanOrEqual(-190);
            expect(c.temperatureC).toBeLessThanOrEqual(3000);
            expect(c.temperatureCi95C[0]).toBeGreaterThan(-273.15);
            expect(Number.isFinite(c.temperatureCi95C[1])).toBe(true);
            expect(Number.isFinite(c.temperatureStdK)).toBe(true);
          }
          expect(m.isAmbiguous).toBe(m.candidates.filter((c) => c.plausible).length > 1);
          if (m.best) expect(m.best.plausible).toBe(true);
        },
      ),
      params,
    );
  });

  it('a heated duct lies between the all-cold and all-hot ducts, mode by mode', () => {
    // The plane-wave equation is (T p′)′ + (ω²/(γ R)) p = 0 up to constants (ρ ∝ 1/T, ρc² = γ p̄ uniform),
    // a Sturm–Liouville problem with constant weight (for a constant γ): by the minimax principle each eigenvalue rises
    // with T(x) (Courant & Hilbert, Methods of Mathematical Physics I, ch. VI — from memory).
    fc.assert(
      fc.property(
        geometry,
        fc.double({ min: 0.05, max: 0.95, noNaN: true }),
        fc.double({ min: 1, max: 700, noNaN: true }),
        (g: DuctGeometry, frac, rise) => {
          const hot = g.gasTemperatureC + rise;
          const heated = predictModes(ductModelFromGeometry({ ...g, heaterPositionM: frac * g.lengthM, hotTemperatureC: hot }, AIR_FIXED_GAMMA), 4).modes;
          const cold = predictModes(ductModelFromGeometry(g, AIR_FIXED_GAMMA), 4).modes;
          const allHot = predictModes(ductModelFromGeometry({ ...g, gasTemperatureC: hot }, AIR_FIXED_GAMMA), 4).modes;
          for (let i = 0; i < 4; i++) {
            expect(heated[i].frequencyHz).toBeGreaterThan(cold[i].frequencyHz * (1 - 1e-9));
            expect(heated[i].frequencyHz).toBeLessThan(allHot[i].frequencyHz * (1 + 1e-9));
          }
        },
      ),
      params,
    );
  });
});
