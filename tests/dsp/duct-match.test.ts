import { describe, expect, it } from 'vitest';
import { AIR_FIXED_GAMMA, ductModelFromGeometry, predictModes } from '../../dsp/duct';
import { matchMeasuredFrequency } from '../../dsp/duct-match';
import type { DuctGeometry } from '../../dsp/types';

// Tone → candidate modes over the plausible temperatures (REFERENCES.md §71; values computed with
// numpy/scipy by tests/reference/duct_values.py from the §70 γ table, §1 c = sqrt(γ R T), §2 modes).
const fieldTube: DuctGeometry = { lengthM: 1, diameterM: 0.05, ends: 'open-open', openEnd: 'unflanged', gasTemperatureC: 20 };
const benchTube: DuctGeometry = { lengthM: 1.2, diameterM: 0.048, ends: 'open-open', openEnd: 'unflanged', gasTemperatureC: 20 };
const heated: DuctGeometry = { lengthM: 1, diameterM: 0.04, ends: 'open-open', openEnd: 'none', gasTemperatureC: 20, heaterPositionM: 0.25, hotTemperatureC: 200 };
const u = { frequencyStdHz: 0.5, lengthStdM: 0.005 };

describe('candidates over the plausible temperatures', () => {
  it('245 Hz in a 1 m tube left at 20 °C is mode 1 at 375.3 °C, not mode 2 at −114.6 °C (§71 table)', () => {
    const m = matchMeasuredFrequency(ductModelFromGeometry(fieldTube), 245, u);
    expect(m.best?.n).toBe(1);
    expect(m.isAmbiguous).toBe(false);
    const [c1, c2] = m.candidates;
    expect(c1.n).toBe(1);
    expect(c1.temperatureC).toBeCloseTo(375.3216, 2);
    expect(c1.temperatureCi95C[0]).toBeCloseTo(361.291, 1);
    expect(c1.temperatureCi95C[1]).toBeCloseTo(389.662, 1);
    expect(c1.plausible).toBe(true);
    expect(c2.n).toBe(2);
    expect(c2.temperatureC).toBeCloseTo(-114.5981, 2);
    expect(c2.plausible).toBe(false);
    // Mode 3 would need −202.7 °C: below where air condenses, so no candidate at all.
    expect(m.candidates.map((c) => c.n)).toEqual([1, 2]);
  });

  it('with γ fixed at 1.4 mode 2 reads −114.48 °C, the figure of the field report', () => {
    const m = matchMeasuredFrequency(ductModelFromGeometry(fieldTube, AIR_FIXED_GAMMA), 245, u);
    expect(m.candidates[1].temperatureC).toBeCloseTo(-114.4848, 2);
    expect(m.candidates[0].temperatureC).toBeCloseTo(361.5107, 2);
  });

  it('400 Hz in the §2 tube is ambiguous: mode 2 at 339.8 °C or mode 3 at −5.8 °C; the nearer to 20 °C is best', () => {
    const m = matchMeasuredFrequency(ductModelFromGeometry(benchTube), 400, u);
    const byN = new Map(m.candidates.map((c) => [c.n, c]));
    expect(byN.get(1)?.temperatureC).toBeCloseTo(2301.3703, 2);
    expect(byN.get(1)?.plausible).toBe(false); // hotter than a hydrogen flame in air
    expect(byN.get(2)?.temperatureC).toBeCloseTo(339.8347, 2);
    expect(byN.get(3)?.temperatureC).toBeCloseTo(-5.8107, 2);
    expect(byN.get(4)?.temperatureC).toBeCloseTo(-122.8089, 2);
    expect(byN.get(4)?.plausible).toBe(false);
    expect(m.isAmbiguous).toBe(true);
    expect(m.best?.n).toBe(3);
    expect(m.warnings.join(' ')).toMatch(/2 modes fit at plausible gas temperatures \(mode 2 at 340 °C, mode 3 at -6 °C\)/);
  });

  it('a tone no mode reaches at a plausible temperature has no best candidate, and says so', () => {
    const m = matchMeasuredFrequency(ductModelFromGeometry(fieldTube), 20, u);
    expect(m.best).toBeNull();
    expect(m.warnings.join(' ')).toMatch(/no plane-wave mode/);
    expect(m.candidates.every((c) => !c.plausible)).toBe(true);
  });

  it('a mode above the cross-mode cut-on is never plausible', () => {
    // d 0.6 m in a 1 m tube: 1.8412 L_eff / (π d) = 1.8412 × 1.36798 / (π × 0.6) = 1.336, so only κ = n/2 < 1.336 (n ≤ 2) are plane waves.
    const m = matchMeasuredFrequency(ductModelFromGeometry({ ...fieldTube, diameterM: 0.6 }), 600, u);
    for (const c of m.candidates) expect(c.isAboveCutOn).toBe(c.n > 2);
    expect(m.candidates.filter((c) => c.isAboveCutOn).every((c) => !c.plausible)).toBe(true);
  });
});

describe('a duct with a heater: equivalent uniform temperature, interval widened for the model error', () => {
  it('the model\'s own mode 1 reads the §71 equivalent 111.3 °C, and the interval covers the mean 155 °C', () => {
    const model = ductModelFromGeometry(heated);
    const f1 = predictModes(model, 1).modes[0].frequencyHz;
    const m = matchMeasuredFrequency(model, f1, { frequencyStdHz: 0, lengthStdM: 0 });
    expect(m.isEquivalentTemperature).toBe(true);
    const c = m.candidates[0];
    expect(c.temperatureC).toBeCloseTo(111.317, 2);
    // Half-width: |ln(T_eq / T̄)| = 0.10762 of T_eq (§71), as a rectangular error.
    expect(c.modelErrorK).toBeCloseTo(0.10762 * (111.317 + 273.15), 1);
    expect(c.temperatureCi95C[0]).toBeLessThan(111.317);
    expect(c.temperatureCi95C[1]).toBeGreaterThan(155);
    expect(m.warnings.join(' ')).toMatch(/equivalent uniform/);
  });

  it('when the rig is hotter than typed (20/260 °C against 20/200 °C), the interval still covers the true mean 200 °C', () => {
    // §71: the 20/260 °C tube hums at 202.6452 Hz (mode 1) and 430.5962 Hz (mode 2).
    const model = ductModelFromGeometry(heated);
    for (const [n, f] of [[1, 202.6452], [2, 430.5962]] as const) {
      const c = matchMeasuredFrequency(model, f, { frequencyStdHz: 0, lengthStdM: 0 }).candidates.find((x) => x.n === n);
      expect(c?.plausible).toBe(true);
      expect(c?.temperatureCi95C[0]).toBeLessThan(200);
      expect(c?.temperatureCi95C[1]).toBeGreaterThan(200);
    }
    // The mode-1 gap of that layout, ln ratio −0.14216 (§71), sets the width: larger than the typed layout's 0.10762.
    const c1 = matchMeasuredFrequency(model, 202.6452, { frequencyStdHz: 0, lengthStdM: 0 }).candidates[0];
    expect(c1.modelErrorK / (c1.temperatureC + 273.15)).toBeCloseTo(0.14216, 3);
  });

  it('a uniform duct has no model error', () => {
    const m = matchMeasuredFrequency(ductModelFromGeometry(fieldTube), 245, u);
    expect(m.isEquivalentTemperature).toBe(false);
    expect(m.candidates.every((c) => c.modelErrorK === 0)).toBe(true);
  });
});
