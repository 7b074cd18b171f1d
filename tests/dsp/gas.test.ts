import { describe, expect, it } from 'vitest';
import {
  AIR,
  AIR_FIXED_GAMMA,
  airLikeGas,
  ductModelFromGeometry,
  gammaAtK,
  predictModes,
  speedOfSoundHumidAirMPerS,
  speedOfSoundMPerS,
  temperatureForSpeedC,
  temperatureSensitivityToSpeed,
} from '../../dsp/duct';

// γ(T) of air and its effect on the duct modes: values of REFERENCES.md §70 (NBS Circular 564 table,
// computed with numpy/scipy by tests/reference/duct_values.py).
describe('γ(T) of air (REFERENCES.md §70)', () => {
  it('interpolates the NBS table: γ(20 °C) 1.400137, γ(300 °C) 1.378685, γ(600 °C) 1.346685; rows exact; ends held', () => {
    expect(gammaAtK(AIR, 293.15)).toBeCloseTo(1.400137, 6);
    expect(gammaAtK(AIR, 573.15)).toBeCloseTo(1.378685, 6);
    expect(gammaAtK(AIR, 873.15)).toBeCloseTo(1.346685, 6);
    expect(gammaAtK(AIR, 550)).toBe(1.381);
    expect(gammaAtK(AIR, 100)).toBe(1.401);
    expect(gammaAtK(AIR, 2500)).toBe(1.309);
    expect(gammaAtK(AIR_FIXED_GAMMA, 873.15)).toBe(1.4);
  });
  it('speed of sound with γ(T): 343.2488, 434.3626, 476.2615, 580.9734 m/s at 20, 200, 300, 600 °C (§1 gives 476.26 and 580.97)', () => {
    expect(speedOfSoundMPerS(20)).toBeCloseTo(343.2488, 3);
    expect(speedOfSoundMPerS(200)).toBeCloseTo(434.3626, 3);
    expect(speedOfSoundMPerS(300)).toBeCloseTo(476.2615, 3);
    expect(speedOfSoundMPerS(600)).toBeCloseTo(580.9734, 3);
    // The error a constant γ = 1.4 leaves: 0.39 % at 200 °C, 1.96 % at 600 °C (§70 table).
    expect(speedOfSoundMPerS(200, AIR_FIXED_GAMMA) / speedOfSoundMPerS(200) - 1).toBeCloseTo(0.0039, 4);
    expect(speedOfSoundMPerS(600, AIR_FIXED_GAMMA) / speedOfSoundMPerS(600) - 1).toBeCloseTo(0.0196, 4);
  });
  it('inverts c → T with γ(T) (round trip over the gas range) and gives d ln T / d ln c = 2 for a constant γ', () => {
    for (let t = -190; t <= 3000; t += 37) expect(temperatureForSpeedC(speedOfSoundMPerS(t))).toBeCloseTo(t, 8);
    expect(temperatureSensitivityToSpeed(300, AIR_FIXED_GAMMA)).toBe(2);
    // Near 375 °C (648 K, rows 600–650 K: slope −1.2e-4 /K): 2 / (1 − 648 × 1.2e-4 / 1.3716) = 2.1204 (§71 example).
    expect(temperatureSensitivityToSpeed(375.3216)).toBeCloseTo(2.1204, 3);
  });
  it('modes of the §2 tube with γ(T): 139.5958 Hz at 20 °C, 167.2969 Hz at 150 °C', () => {
    const g = { lengthM: 1.2, diameterM: 0.048, ends: 'open-open' as const, openEnd: 'unflanged' as const, gasTemperatureC: 20 };
    expect(predictModes(ductModelFromGeometry(g), 3).modes[0].frequencyHz).toBeCloseTo(139.5958, 3);
    expect(predictModes(ductModelFromGeometry(g), 3).modes[2].frequencyHz).toBeCloseTo(418.7873, 3);
    expect(predictModes(ductModelFromGeometry({ ...g, gasTemperatureC: 150 }), 1).modes[0].frequencyHz).toBeCloseTo(167.2969, 3);
  });
  it('two-zone §3 tube with γ per zone (E3 with ξ = (γ₁/c₁)/(γ₂/c₂)): 196.2504, 411.5054, 616.1991, 807.2789 Hz', () => {
    const m = predictModes(
      ductModelFromGeometry({ lengthM: 1, diameterM: 0.04, ends: 'open-open', openEnd: 'none', gasTemperatureC: 20, heaterPositionM: 0.25, hotTemperatureC: 200 }),
      4,
    ).modes.map((x) => x.frequencyHz);
    const want = [196.2504, 411.5054, 616.1991, 807.2789];
    for (let i = 0; i < 4; i++) expect(Math.abs(m[i] - want[i])).toBeLessThan(0.001);
  });
  it('a flue gas near air keeps γ(T) with its own molar mass: c ∝ 1/sqrt(M)', () => {
    expect(speedOfSoundMPerS(300, airLikeGas(0.0285)) / speedOfSoundMPerS(300)).toBeCloseTo(Math.sqrt(8.314462618 / 0.0285 / 287.05), 9);
  });
  it('Cramer 1993 humid air only inside its stated validity (0–30 °C, 60–110 kPa)', () => {
    expect(() => speedOfSoundHumidAirMPerS(200, 101325, 50)).toThrow(/temperatureC/);
    expect(() => speedOfSoundHumidAirMPerS(20, 1e308, 50)).toThrow(/pressurePa/);
  });
});
