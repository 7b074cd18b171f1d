import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { ductModelFromGeometry, matchMeasuredFrequency, predictModes, zonesFromProfile, type DuctModel } from '../../dsp/duct';
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
  it('modes ascend and scale as sqrt(T) (c = sqrt(γ R T): REFERENCES.md §1)', () => {
    fc.assert(
      fc.property(geometry, fc.double({ min: -40, max: 900, noNaN: true }), (g: DuctGeometry, t2) => {
        const a = predictModes(ductModelFromGeometry(g), 5).modes;
        const b = predictModes(ductModelFromGeometry({ ...g, gasTemperatureC: t2 }), 5).modes;
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

  it('the inferred temperature of a predicted mode is the duct temperature (round trip)', () => {
    fc.assert(
      fc.property(geometry, fc.integer({ min: 1, max: 4 }), (g: DuctGeometry, n) => {
        const model = ductModelFromGeometry(g);
        const f = predictModes(model, n).modes[n - 1].frequencyHz;
        const m = matchMeasuredFrequency(model, f, { frequencyStdHz: 0, lengthStdM: 0 });
        expect(m.n).toBe(n);
        expect(Math.abs(m.temperatureC - g.gasTemperatureC)).toBeLessThan(1e-6);
      }),
      params,
    );
  });

  it('a heated duct lies between the all-cold and all-hot ducts, mode by mode', () => {
    // The plane-wave equation is (T p′)′ + (ω²/(γ R)) p = 0 up to constants (ρ ∝ 1/T, ρc² = γ p̄ uniform),
    // a Sturm–Liouville problem with constant weight: by the minimax principle each eigenvalue rises
    // with T(x) (Courant & Hilbert, Methods of Mathematical Physics I, ch. VI — from memory).
    fc.assert(
      fc.property(
        geometry,
        fc.double({ min: 0.05, max: 0.95, noNaN: true }),
        fc.double({ min: 1, max: 700, noNaN: true }),
        (g: DuctGeometry, frac, rise) => {
          const hot = g.gasTemperatureC + rise;
          const heated = predictModes(ductModelFromGeometry({ ...g, heaterPositionM: frac * g.lengthM, hotTemperatureC: hot }), 4).modes;
          const cold = predictModes(ductModelFromGeometry(g), 4).modes;
          const allHot = predictModes(ductModelFromGeometry({ ...g, gasTemperatureC: hot }), 4).modes;
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
