import { describe, expect, it } from 'vitest';
import {
  AIR,
  AIR_FIXED_GAMMA,
  brentRoot,
  ductModelFromGeometry,
  ductResidual,
  endCorrectionM,
  gasFromMolarMass,
  modeShape,
  predictModes,
  rayleighReading,
  speedOfSoundHumidAirMPerS,
  speedOfSoundMPerS,
  zonesFromProfile,
  type DuctModel,
} from '../../dsp/duct';
import { matchMeasuredFrequency } from '../../dsp/duct-match';
import type { DuctGeometry } from '../../dsp/types';

// Test vectors are those of docs/REFERENCES.md ("REFERENCES.md" below), numbered as in its table.
// The §1–§3 worked values take γ = 1.4 at every temperature (AIR_FIXED_GAMMA); γ(T) has its own
// vectors in tests/dsp/gas.test.ts (REFERENCES.md §70).
const bench: DuctGeometry = { lengthM: 1.2, diameterM: 0.048, ends: 'open-open', openEnd: 'unflanged', gasTemperatureC: 20 };
const fixed = (g: DuctGeometry): DuctModel => ductModelFromGeometry(g, AIR_FIXED_GAMMA);

describe('speed of sound', () => {
  it('matches c = sqrt(γ R T) at 0, 20, 300, 600 °C (vectors 1–4)', () => {
    // REFERENCES.md §1 table, computed with γ 1.4, R 287.05; formula J. O. Smith, Physical Audio Signal Processing.
    expect(speedOfSoundMPerS(0, AIR_FIXED_GAMMA)).toBeCloseTo(331.3168, 3);
    expect(speedOfSoundMPerS(20, AIR_FIXED_GAMMA)).toBeCloseTo(343.232, 3);
    expect(speedOfSoundMPerS(300, AIR_FIXED_GAMMA)).toBeCloseTo(479.9289, 3);
    expect(speedOfSoundMPerS(600, AIR_FIXED_GAMMA)).toBeCloseTo(592.362, 3);
  });
  it('uses another γ (vector 5: NBS Circular 564 γ at 600 °C)', () => {
    expect(Math.abs(speedOfSoundMPerS(600, { gamma: 1.3467, specificGasConstantJPerKgK: 287.05 }) - 580.97)).toBeLessThan(0.05);
  });
  it('builds a gas from molar mass: air 28.9647 g/mol gives R ≈ 287.05 (REFERENCES.md §1)', () => {
    const g = gasFromMolarMass(1.4, 0.0289647);
    expect(Math.abs(g.specificGasConstantJPerKgK - 287.055)).toBeLessThan(0.001);
    // Helium, γ 5/3, M 4.0026 g/mol: c ≈ 1007 m/s at 20 °C (from memory; handbook tables give ~1007 m/s).
    expect(Math.abs(speedOfSoundMPerS(20, gasFromMolarMass(5 / 3, 0.0040026)) - 1007)).toBeLessThan(2);
    expect(AIR.gammaTableK).toBeDefined();
  });
  it('humid air by Cramer 1993 (vector 6)', () => {
    expect(Math.abs(speedOfSoundHumidAirMPerS(20, 101325, 50, 0.0004) - 343.987)).toBeLessThan(0.005);
    expect(Math.abs(speedOfSoundHumidAirMPerS(20, 101325, 0, 0.0004) - 343.36)).toBeLessThan(0.005);
  });
  it('rejects temperatures at or below absolute zero and non-finite values', () => {
    expect(() => speedOfSoundMPerS(-274)).toThrow(/absolute zero/);
    expect(() => speedOfSoundMPerS(Number.NaN)).toThrow(RangeError);
  });
});

describe('straight ducts', () => {
  it('end correction unflanged 0.6133 a (vector 7, Levine & Schwinger 1948) and flanged 0.8216 a (Norris & Sheng 1989, from memory)', () => {
    expect(Math.abs(endCorrectionM(0.024, 'unflanged') - 0.0147192)).toBeLessThan(1e-7);
    expect(Math.abs(endCorrectionM(0.024, 'flanged') - 0.019718)).toBeLessThan(1e-6);
    expect(endCorrectionM(0.024, 'none')).toBe(0);
  });
  it('open–open with unflanged ends at 20 and 150 °C (vectors 8, 9; REFERENCES.md §2 table)', () => {
    const m20 = predictModes(fixed(bench), 3).modes.map((m) => m.frequencyHz);
    expect(Math.abs(m20[0] - 139.5889)).toBeLessThan(0.001);
    expect(Math.abs(m20[1] - 279.1779)).toBeLessThan(0.001);
    expect(Math.abs(m20[2] - 418.7668)).toBeLessThan(0.001);
    const m150 = predictModes(fixed({ ...bench, gasTemperatureC: 150 }), 1).modes;
    expect(Math.abs(m150[0].frequencyHz - 167.7078)).toBeLessThan(0.001);
  });
  it('open–open flanged and uncorrected (REFERENCES.md §2 table)', () => {
    expect(Math.abs(predictModes(fixed({ ...bench, openEnd: 'flanged' }), 1).modes[0].frequencyHz - 138.4629)).toBeLessThan(0.001);
    expect(Math.abs(predictModes(fixed({ ...bench, openEnd: 'none' }), 1).modes[0].frequencyHz - 143.0133)).toBeLessThan(0.001);
  });
  it('quarter-wave (open–closed) odd multiples (vectors 10, 11)', () => {
    const m = predictModes(fixed({ ...bench, ends: 'open-closed' }), 3).modes.map((x) => x.frequencyHz);
    expect(Math.abs(m[0] - 70.6402)).toBeLessThan(0.001);
    expect(Math.abs(m[1] - 211.9206)).toBeLessThan(0.001);
    expect(Math.abs(m[2] - 353.2009)).toBeLessThan(0.001);
    const h = predictModes(fixed({ ...bench, ends: 'open-closed', gasTemperatureC: 150 }), 1).modes;
    expect(Math.abs(h[0].frequencyHz - 84.87)).toBeLessThan(0.001);
  });
  it('closed–closed: f_n = n c / (2 L) without end corrections (common practice)', () => {
    const m = predictModes(fixed({ ...bench, ends: 'closed-closed' }), 2).modes;
    expect(Math.abs(m[0].frequencyHz - 343.232 / 2.4)).toBeLessThan(0.001);
    expect(Math.abs(m[1].frequencyHz - 343.232 / 1.2)).toBeLessThan(0.001);
  });
  it('transfer matrices agree with the closed form for a uniform duct split into zones (independent agreement)', () => {
    for (const ends of ['open-open', 'open-closed', 'closed-closed'] as const) {
      const one = fixed({ ...bench, ends });
      const split: DuctModel = { ...one, zones: zonesFromProfile([{ xM: 0, temperatureC: 20 }], 1.2, 7) };
      const a = predictModes(one, 4).modes;
      const b = predictModes(split, 4);
      expect(b.method).toBe('transfer-matrix');
      for (let i = 0; i < 4; i++) expect(Math.abs(a[i].frequencyHz - b.modes[i].frequencyHz)).toBeLessThan(1e-6);
    }
  });
  it('warns above the first cross-mode cut-on 1.84 c/(π d)', () => {
    const wide = predictModes(fixed({ ...bench, diameterM: 0.6 }), 6);
    // 1.8412 × 343.232 / (π × 0.6) = 335.3 Hz (common practice formula, computed here).
    expect(Math.abs(wide.cutOnHz - 335.26)).toBeLessThan(0.05);
    expect(wide.modes.some((m) => m.isAboveCutOn)).toBe(true);
    expect(wide.warnings.join(' ')).toMatch(/cut-on/);
    expect(predictModes(fixed(bench), 6).warnings).toEqual([]);
  });
});

describe('two-zone duct (REFERENCES.md §3, eq. E3)', () => {
  const two: DuctGeometry = { lengthM: 1, diameterM: 0.04, ends: 'open-open', openEnd: 'none', gasTemperatureC: 20, heaterPositionM: 0.25, hotTemperatureC: 200 };
  it('roots 196.9157, 412.6275, 617.6955, 809.5449 Hz (vector 12)', () => {
    const m = predictModes(fixed(two), 4).modes.map((x) => x.frequencyHz);
    const want = [196.9157, 412.6275, 617.6955, 809.5449];
    for (let i = 0; i < 4; i++) expect(Math.abs(m[i] - want[i])).toBeLessThan(0.001);
  });
  it('uniform limit n × 171.6160 Hz (vector 13)', () => {
    const m = predictModes(fixed({ ...two, hotTemperatureC: 20 }), 4).modes;
    for (let i = 0; i < 4; i++) expect(Math.abs(m[i].frequencyHz - 171.616 * (i + 1))).toBeLessThan(0.001);
  });
  it('other heater positions and hot temperatures (REFERENCES.md §3 worked values)', () => {
    const at = (x: number, hot: number): number[] => predictModes(fixed({ ...two, heaterPositionM: x, hotTemperatureC: hot }), 2).modes.map((m) => m.frequencyHz);
    const a = at(0.5, 200);
    expect(Math.abs(a[0] - 194.7561)).toBeLessThan(0.001);
    expect(Math.abs(a[1] - 379.2065)).toBeLessThan(0.001);
    const b = at(0.75, 200);
    expect(Math.abs(b[0] - 187.7761)).toBeLessThan(0.001);
    expect(Math.abs(b[1] - 366.2196)).toBeLessThan(0.001);
    const c = at(0.25, 300);
    expect(Math.abs(c[0] - 207.9689)).toBeLessThan(0.001);
    expect(Math.abs(c[1] - 444.843)).toBeLessThan(0.001);
  });
  it('each root satisfies E3 written out independently', () => {
    const c1 = speedOfSoundMPerS(20, AIR_FIXED_GAMMA);
    const c2 = speedOfSoundMPerS(200, AIR_FIXED_GAMMA);
    const xi = Math.sqrt((200 + 273.15) / (20 + 273.15));
    const e3 = (f: number): number => {
      const w = 2 * Math.PI * f;
      return xi * Math.sin((w * 0.25) / c1) * Math.cos((w * 0.75) / c2) + Math.cos((w * 0.25) / c1) * Math.sin((w * 0.75) / c2);
    };
    for (const m of predictModes(fixed(two), 4).modes) {
      // E3 has slope of order L/c ≈ 1e-2 per Hz·2π; a 1e-8 Hz root error gives |E3| < 1e-8.
      expect(Math.abs(e3(m.frequencyHz))).toBeLessThan(1e-7);
    }
  });
  it('a piecewise profile with a step at the heater reproduces the two-zone roots', () => {
    const base = fixed({ ...two, heaterPositionM: undefined, hotTemperatureC: undefined });
    // Step between 0.2499 and 0.2501 m: 4000 zones of 0.25 mm put the step at a zone boundary.
    const zones = zonesFromProfile([{ xM: 0, temperatureC: 20 }, { xM: 0.25, temperatureC: 20 }, { xM: 0.25 + 1e-9, temperatureC: 200 }], 1, 4000);
    const m = predictModes({ ...base, zones }, 2).modes;
    expect(Math.abs(m[0].frequencyHz - 196.9157)).toBeLessThan(0.01);
    expect(Math.abs(m[1].frequencyHz - 412.6275)).toBeLessThan(0.01);
  });
  it('rejects a heater outside the duct and a bad hot temperature', () => {
    expect(() => ductModelFromGeometry({ ...two, heaterPositionM: 1.5 })).toThrow(/heaterPositionM/);
    expect(() => ductModelFromGeometry({ ...two, heaterPositionM: 0 })).toThrow(/heaterPositionM/);
    expect(() => ductModelFromGeometry({ ...two, hotTemperatureC: -300 })).toThrow(/absolute zero/);
    expect(() => ductModelFromGeometry({ ...two, hotTemperatureC: undefined })).toThrow(/hotTemperatureC/);
  });
});

describe('mode shapes and the Rayleigh reading', () => {
  const plain = fixed({ lengthM: 1, diameterM: 0.04, ends: 'open-open', openEnd: 'none', gasTemperatureC: 20 });
  it('open–open fundamental: p ∝ sin(πx/L), u ∝ cos(πx/L) (REFERENCES.md §4)', () => {
    const s = modeShape(plain, 171.616, 11);
    for (let i = 0; i < 11; i++) {
      const x = s.xM[i];
      expect(Math.abs(s.pressure[i] - Math.sin(Math.PI * x))).toBeLessThan(1e-4);
      expect(Math.abs(s.velocity[i] - Math.cos(Math.PI * x))).toBeLessThan(1e-4);
    }
  });
  it('index 0.5 sin(2πx/L): +0.5 at L/4, −0.5 at 3L/4 (vector 14), 0.4755 at 0.2 L', () => {
    const f = predictModes(plain, 1).modes[0].frequencyHz;
    expect(Math.abs(rayleighReading(plain, f, 0.25, 'upward').index - 0.5)).toBeLessThan(1e-12);
    expect(Math.abs(rayleighReading(plain, f, 0.75, 'upward').index + 0.5)).toBeLessThan(1e-12);
    expect(Math.abs(rayleighReading(plain, f, 0.2, 'upward').index - 0.4755)).toBeLessThan(1e-4);
    expect(rayleighReading(plain, f, 0.25, 'upward').reading).toBe('drives');
    expect(rayleighReading(plain, f, 0.75, 'upward').reading).toBe('damps');
    expect(rayleighReading(plain, f, 0.25, 'downward').reading).toBe('damps');
  });
  it('no mean flow, no driving (REFERENCES.md §4, King\'s law)', () => {
    const r = rayleighReading(plain, 171.6, 0.25, 'none');
    expect(r.index).toBe(0);
    expect(r.reading).toBe('neutral');
  });
  it('second mode: the heater at L/4 sits at a pressure maximum and velocity node (index 0)', () => {
    const f2 = predictModes(plain, 2).modes[1].frequencyHz;
    expect(rayleighReading(plain, f2, 0.25, 'upward').reading).toBe('neutral');
    expect(rayleighReading(plain, f2, 0.1, 'upward').reading).toBe('drives');
  });
});

describe('measured frequency → mode and gas temperature (γ = 1.4)', () => {
  it('the fundamental at 150 °C is recognised and its temperature recovered (inverse of vector 9)', () => {
    const m = matchMeasuredFrequency(fixed(bench), 167.7078, { frequencyStdHz: 0, lengthStdM: 0 });
    expect(m.best?.n).toBe(1);
    expect(Math.abs((m.best?.temperatureC ?? 0) - 150)).toBeLessThan(0.01);
    expect(m.best?.temperatureStdK).toBe(0);
  });
  it('propagates u(T)/T = 2 sqrt((u_f/f)² + (u_L/L)²) for a constant γ (GUM first order)', () => {
    const m = matchMeasuredFrequency(fixed(bench), 279.1779, { frequencyStdHz: 1, lengthStdM: 0.01 });
    const c2 = m.candidates.find((c) => c.n === 2);
    expect(c2?.plausible).toBe(true);
    expect(Math.abs((c2?.temperatureC ?? 0) - 20)).toBeLessThan(0.01);
    const rel = 2 * Math.hypot(1 / 279.1779, 0.01 / 1.229438);
    expect(Math.abs((c2?.temperatureStdK ?? 0) - rel * 293.15)).toBeLessThan(0.01);
    // The interval is T exp(±1.96 u/T): asymmetric, around 20 °C.
    const tK = (c2?.temperatureC ?? 0) + 273.15;
    expect(c2?.temperatureCi95C[0]).toBeCloseTo(tK * Math.exp(-1.96 * rel) - 273.15, 4);
    expect(c2?.temperatureCi95C[1]).toBeCloseTo(tK * Math.exp(1.96 * rel) - 273.15, 4);
  });
  it('agrees with a finite-difference propagation of the length uncertainty', () => {
    const base = matchMeasuredFrequency(fixed(bench), 171, { frequencyStdHz: 0, lengthStdM: 0.002 }).best;
    const longer = matchMeasuredFrequency(fixed({ ...bench, lengthM: 1.202 }), 171, { frequencyStdHz: 0, lengthStdM: 0 }).best;
    // One standard uncertainty of length moves T by about u(T) (linear regime: 0.17 % of L).
    expect(base && longer).toBeTruthy();
    if (!base || !longer) return;
    expect(Math.abs(longer.temperatureC - base.temperatureC - base.temperatureStdK) / base.temperatureStdK).toBeLessThan(0.01);
  });
  it('rejects a frequency outside 0.01 Hz–100 kHz and uncertainties larger than the quantity', () => {
    expect(() => matchMeasuredFrequency(fixed(bench), 0)).toThrow(/measuredHz/);
    expect(() => matchMeasuredFrequency(fixed(bench), 1e308)).toThrow(/measuredHz/);
    expect(() => matchMeasuredFrequency(fixed(bench), 171, { frequencyStdHz: 172, lengthStdM: 0 })).toThrow(/frequencyStdHz/);
    expect(() => matchMeasuredFrequency(fixed(bench), 171, { frequencyStdHz: 0, lengthStdM: 1e308 })).toThrow(/lengthStdM/);
  });
});

describe('bad input and the root finder', () => {
  it('names the parameter for non-positive or non-finite geometry', () => {
    expect(() => ductModelFromGeometry({ ...bench, lengthM: 0 })).toThrow(/lengthM/);
    expect(() => ductModelFromGeometry({ ...bench, lengthM: Number.POSITIVE_INFINITY })).toThrow(/lengthM/);
    expect(() => ductModelFromGeometry({ ...bench, diameterM: -1 })).toThrow(/diameterM/);
    expect(() => ductModelFromGeometry({ ...bench, gasTemperatureC: -280 })).toThrow(/gasTemperatureC/);
  });
  it('refuses values outside the physical ranges (REFERENCES.md §70) before computing anything', () => {
    expect(() => ductModelFromGeometry({ ...bench, lengthM: 1e308 })).toThrow(/lengthM must lie from 0.001 to 500 m/);
    expect(() => ductModelFromGeometry({ ...bench, lengthM: 0.0005 })).toThrow(/lengthM/);
    expect(() => ductModelFromGeometry({ ...bench, diameterM: 1e-320 })).toThrow(/diameterM/);
    expect(() => ductModelFromGeometry({ ...bench, gasTemperatureC: 1e308 })).toThrow(/gasTemperatureC must lie from -190 to 3000 °C/);
    expect(() => ductModelFromGeometry({ ...bench, gasTemperatureC: -200 })).toThrow(/gasTemperatureC/);
    expect(() => ductModelFromGeometry({ ...bench, heaterPositionM: 0.3, hotTemperatureC: 1e308 })).toThrow(/hotTemperatureC/);
    expect(() => zonesFromProfile([{ xM: 0, temperatureC: 20 }, { xM: 1, temperatureC: 1e308 }], 1.2)).toThrow(/profile point 2 temperature/);
    expect(() => zonesFromProfile([{ xM: 0, temperatureC: 20 }], 1.2, 1e9)).toThrow(/segmentCount/);
    expect(() => gasFromMolarMass(1e308, 0.029)).toThrow(/gamma/);
    expect(() => gasFromMolarMass(1, 0.029)).toThrow(/gamma/);
    expect(() => gasFromMolarMass(1.4, 1e308)).toThrow(/molarMassKgPerMol/);
    expect(() => gasFromMolarMass(1.4, 0.0001)).toThrow(/molarMassKgPerMol/);
    // A zone list that a caller built by hand is checked as well.
    const model = ductModelFromGeometry(bench);
    expect(() => predictModes({ ...model, zones: [{ lengthM: 0.6, temperatureC: 20 }, { lengthM: 0.6, temperatureC: 1e308 }] }, 3)).toThrow(/zone temperatureC/);
    expect(() => predictModes({ ...model, zones: [{ lengthM: 0.6, temperatureC: 20 }] }, 3)).toThrow(/add up/);
  });
  it('the hot-zone and profile inputs of the hang report finish with finite modes at the ends of the ranges', () => {
    // The mode scan is bounded (dsp/duct.ts): the extreme contrast allowed, −190 °C below a 3000 °C hot zone, and the
    // largest mode count still finish; every frequency is finite.
    const hot = ductModelFromGeometry({ ...bench, gasTemperatureC: -190, heaterPositionM: 0.3, hotTemperatureC: 3000 });
    const p = predictModes(hot, 40);
    expect(p.modes).toHaveLength(40);
    for (const m of p.modes) expect(Number.isFinite(m.frequencyHz)).toBe(true);
    expect(Number.isFinite(p.cutOnHz)).toBe(true);
    expect(p.warnings.join(' ')).toMatch(/tabulated up to 1227 °C/);
  });
  it('Brent finds √2 and refuses an interval without a sign change', () => {
    expect(Math.abs(brentRoot((x) => x * x - 2, 0, 2) - Math.SQRT2)).toBeLessThan(1e-12);
    expect(() => brentRoot((x) => x * x + 1, -1, 1)).toThrow(/bracket/);
  });
  it('ductResidual vanishes at the predicted modes', () => {
    const model = ductModelFromGeometry({ ...bench, heaterPositionM: 0.3, hotTemperatureC: 250 });
    for (const m of predictModes(model, 3).modes) expect(Math.abs(ductResidual(model, m.frequencyHz))).toBeLessThan(1e-8);
    expect(AIR.gamma).toBe(1.4);
  });
});

describe('quarter-wave orientation', () => {
  const flue = (closedEnd: 'upstream' | 'downstream'): DuctModel => ({
    ...ductModelFromGeometry({ lengthM: 2, diameterM: 0.1, ends: 'open-closed', openEnd: 'none', gasTemperatureC: 20 }),
    closedEnd,
  });
  it('pressure is largest at the closed end and zero at the open end (common practice)', () => {
    const f = predictModes(flue('upstream'), 1).modes[0].frequencyHz;
    expect(Math.abs(f - speedOfSoundMPerS(20) / 8)).toBeLessThan(1e-9); // c / (4 L)
    const up = modeShape(flue('upstream'), f, 21);
    expect(Math.abs(up.pressure[0])).toBeCloseTo(1, 6);
    expect(Math.abs(up.pressure[20])).toBeLessThan(1e-6);
    expect(Math.abs(up.velocity[0])).toBeLessThan(1e-6);
    const down = modeShape(flue('downstream'), f, 21);
    expect(Math.abs(down.pressure[20])).toBeCloseTo(1, 6);
    expect(Math.abs(down.pressure[0])).toBeLessThan(1e-6);
  });
  it('a two-zone quarter-wave duct matches its own transfer-matrix-free equation', () => {
    // Closed at x = 0 (p = cos(k1 x) in zone 1), open at L: tan(k1 x1) tan(k2 (L − x1)) = ξ with ξ = ρ1c1/(ρ2c2) = sqrt(T2/T1)
    // (plane-wave matching as in REFERENCES.md §3, derived here for these ends).
    const model: DuctModel = { ...fixed({ lengthM: 2, diameterM: 0.1, ends: 'open-closed', openEnd: 'none', gasTemperatureC: 20, heaterPositionM: 0.5, hotTemperatureC: 250 }), closedEnd: 'upstream' };
    const c1 = speedOfSoundMPerS(20, AIR_FIXED_GAMMA);
    const c2 = speedOfSoundMPerS(250, AIR_FIXED_GAMMA);
    const xi = Math.sqrt((250 + 273.15) / (20 + 273.15));
    for (const m of predictModes(model, 3).modes) {
      const w = 2 * Math.PI * m.frequencyHz;
      const a = (w * 0.5) / c1;
      const b = (w * 1.5) / c2;
      // Written without tangents to avoid poles: cos a cos b − (1/ξ)·sin a sin b = 0 ⇔ ξ cos a cos b = sin a sin b.
      expect(Math.abs(xi * Math.cos(a) * Math.cos(b) - Math.sin(a) * Math.sin(b))).toBeLessThan(1e-8);
    }
  });
});
