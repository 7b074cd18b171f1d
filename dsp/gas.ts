/**
 * Gas properties for the duct model: the physical ranges every input is checked against, the ratio
 * of specific heats of air as it falls with temperature, the speed of sound and its inverse.
 * Temperatures in °C (K where the name says so), speeds in m/s. Sources in docs/REFERENCES.md §1
 * and §70.
 */

/** Universal gas constant, J/(mol·K) (CODATA 2018 exact value). */
export const UNIVERSAL_GAS_CONSTANT_J_PER_MOL_K = 8.314462618;

/** Absolute zero in °C. */
export const ABSOLUTE_ZERO_C = -273.15;

/** A closed range [min, max] of a physical input. */
export interface PhysicalRange {
  min: number;
  max: number;
}

/**
 * Gas temperatures the model accepts, °C (REFERENCES.md §70): from −190 °C, about where air
 * condenses at atmospheric pressure (dew point 81.6 K), to 3000 °C, about the hottest fuel–oxygen
 * flame; beyond either end the gas is not the ideal gas of fixed composition that c = sqrt(γ R T) describes.
 */
export const GAS_TEMPERATURE_RANGE_C: PhysicalRange = { min: -190, max: 3000 };

/**
 * Gas temperatures plausible in a duct, °C, for telling which mode a measured tone is
 * (REFERENCES.md §70): from −90 °C, the coldest air measured on Earth (−89.2 °C), to 2130 °C,
 * the adiabatic flame temperature of hydrogen in air (2400 K), hotter than any hydrocarbon flame in air.
 */
export const PLAUSIBLE_GAS_TEMPERATURE_C: PhysicalRange = { min: -90, max: 2130 };

/**
 * Duct lengths, m: 1 mm to 500 m (a model of a pipe shorter than its wall is thick says nothing;
 * the tallest industrial chimneys are about 420 m; REFERENCES.md §70).
 */
export const LENGTH_RANGE_M: PhysicalRange = { min: 0.001, max: 500 };

/** Inner diameters, m: 1 mm (a capillary, where viscous losses already dominate) to 20 m (the widest stacks and wind tunnels). */
export const DIAMETER_RANGE_M: PhysicalRange = { min: 0.001, max: 20 };

/**
 * Ratio of specific heats of an ideal gas: above 1 (c_p = c_v + R) and at most 5/3, the monatomic
 * value (c_v ≥ 3R/2: translation alone; kinetic theory, REFERENCES.md §70). The lower end is open.
 */
export const GAMMA_RANGE: PhysicalRange = { min: 1, max: 5 / 3 };

/** Molar masses, kg/mol: hydrogen (2.016 g/mol, the lightest gas) to 400 g/mol (above uranium hexafluoride, 352 g/mol). */
export const MOLAR_MASS_RANGE_KG_PER_MOL: PhysicalRange = { min: 0.002, max: 0.4 };

/** Throws a RangeError naming the parameter when value is not a finite number within [range.min, range.max]. */
export function checkRange(name: string, value: number, range: PhysicalRange, unit: string): void {
  if (!Number.isFinite(value) || value < range.min || value > range.max) {
    throw new RangeError(`${name} must lie from ${range.min} to ${range.max}${unit ? ' ' + unit : ''}, got ${value}${unit ? ' ' + unit : ''}`);
  }
}

/** Throws a RangeError naming the parameter unless the temperature lies in GAS_TEMPERATURE_RANGE_C. */
export function checkGasTemperatureC(name: string, temperatureC: number): void {
  if (!Number.isFinite(temperatureC)) throw new RangeError(`${name} must be a finite temperature in °C, got ${temperatureC}`);
  if (temperatureC <= ABSOLUTE_ZERO_C) throw new RangeError(`${name} must be above absolute zero (−273.15 °C), got ${temperatureC} °C`);
  checkRange(name, temperatureC, GAS_TEMPERATURE_RANGE_C, '°C');
}

/**
 * Ratio of specific heats of dry air as an ideal gas, [T in K, γ]: NBS Circular 564 (1955) from
 * 250 to 1000 K, B. G. Kyle's formula (1984, error < 1 %) from 1100 to 1500 K, as tabulated in
 * REFERENCES.md §70. Linear between rows, held at the end values outside.
 */
export const AIR_GAMMA_TABLE_K: readonly (readonly [number, number])[] = [
  [250, 1.401], [300, 1.4], [350, 1.398], [400, 1.395], [450, 1.391], [500, 1.387], [550, 1.381],
  [600, 1.376], [650, 1.37], [700, 1.364], [750, 1.359], [800, 1.354], [900, 1.344], [1000, 1.336],
  [1100, 1.331], [1200, 1.324], [1300, 1.318], [1400, 1.313], [1500, 1.309],
];

/** Ideal-gas properties: ratio of specific heats (constant, or from a table over temperature) and specific gas constant, J/(kg·K). */
export interface GasProperties {
  /** γ when there is no table (and the room-temperature value when there is one). */
  gamma: number;
  specificGasConstantJPerKgK: number;
  /** γ against temperature [T in K, γ], ascending in T; overrides `gamma` when present. */
  gammaTableK?: readonly (readonly [number, number])[];
}

/** Dry air with γ(T) from the NBS table (REFERENCES.md §70), R = 287.05 J/(kg·K): the model's default gas. */
export const AIR: GasProperties = { gamma: 1.4, specificGasConstantJPerKgK: 287.05, gammaTableK: AIR_GAMMA_TABLE_K };

/** Dry air with γ fixed at 1.4, R = 287.05 J/(kg·K): the convention of the REFERENCES.md §1–§3 worked values. */
export const AIR_FIXED_GAMMA: GasProperties = { gamma: 1.4, specificGasConstantJPerKgK: 287.05 };

/** Gas from a constant γ and a molar mass (kg/mol): R = R_u / M. Throws RangeError naming the parameter outside their physical ranges. */
export function gasFromMolarMass(gamma: number, molarMassKgPerMol: number): GasProperties {
  if (!Number.isFinite(gamma) || gamma <= GAMMA_RANGE.min || gamma > GAMMA_RANGE.max) {
    throw new RangeError(`gamma must be above 1 and at most 5/3 (1.667, a monatomic gas), got ${gamma}`);
  }
  checkRange('molarMassKgPerMol', molarMassKgPerMol, MOLAR_MASS_RANGE_KG_PER_MOL, 'kg/mol');
  return { gamma, specificGasConstantJPerKgK: UNIVERSAL_GAS_CONSTANT_J_PER_MOL_K / molarMassKgPerMol };
}

/** Gas with air's γ(T) table and another molar mass (kg/mol): a flue gas near air's composition. */
export function airLikeGas(molarMassKgPerMol: number): GasProperties {
  checkRange('molarMassKgPerMol', molarMassKgPerMol, MOLAR_MASS_RANGE_KG_PER_MOL, 'kg/mol');
  return { ...AIR, specificGasConstantJPerKgK: UNIVERSAL_GAS_CONSTANT_J_PER_MOL_K / molarMassKgPerMol };
}

/** γ of the gas at temperatureK (table interpolation, or the constant). */
export function gammaAtK(gas: GasProperties, temperatureK: number): number {
  const t = gas.gammaTableK;
  if (!t || t.length === 0) return gas.gamma;
  if (temperatureK <= t[0][0]) return t[0][1];
  const last = t[t.length - 1];
  if (temperatureK >= last[0]) return last[1];
  let i = 1;
  while (i < t.length - 1 && t[i][0] < temperatureK) i++;
  const [x0, y0] = t[i - 1];
  const [x1, y1] = t[i];
  return y0 + ((y1 - y0) * (temperatureK - x0)) / (x1 - x0);
}

/** Highest temperature, °C, the gas's γ table covers (Infinity for a constant γ): beyond it γ is held. */
export function gammaTableTopC(gas: GasProperties): number {
  const t = gas.gammaTableK;
  return t && t.length > 0 ? t[t.length - 1][0] + ABSOLUTE_ZERO_C : Number.POSITIVE_INFINITY;
}

/**
 * Adiabatic speed of sound of an ideal gas, m/s: c = sqrt(γ(T) R T), T in K (e.g. J. O. Smith,
 * "Physical Audio Signal Processing", CCRMA, "Speed of sound in air"; γ(T) REFERENCES.md §70).
 */
export function speedOfSoundMPerS(temperatureC: number, gas: GasProperties = AIR): number {
  checkGasTemperatureC('temperatureC', temperatureC);
  const tK = temperatureC - ABSOLUTE_ZERO_C;
  return Math.sqrt(gammaAtK(gas, tK) * gas.specificGasConstantJPerKgK * tK);
}

/**
 * Gas temperature (°C) at which the speed of sound is cMPerS: solves γ(T) R T = c² by fixed-point
 * iteration T ← c² / (γ(T) R). The map contracts by |T γ′(T) / γ| ≤ 0.05 over the air table
 * (steepest rows 500–550 K), so 60 iterations reach rounding; a constant γ needs one. The result
 * may lie outside GAS_TEMPERATURE_RANGE_C; it is always above absolute zero.
 */
export function temperatureForSpeedC(cMPerS: number, gas: GasProperties = AIR): number {
  if (!Number.isFinite(cMPerS) || cMPerS <= 0) throw new RangeError(`cMPerS must be a positive finite number of m/s, got ${cMPerS}`);
  const c2r = (cMPerS * cMPerS) / gas.specificGasConstantJPerKgK;
  let tK = c2r / gas.gamma;
  for (let i = 0; i < 60; i++) {
    const next = c2r / gammaAtK(gas, tK);
    if (Math.abs(next - tK) <= 1e-13 * tK) return next + ABSOLUTE_ZERO_C;
    tK = next;
  }
  return tK + ABSOLUTE_ZERO_C;
}

/**
 * d ln T / d ln c of the inverse above: 2 / (1 + T γ′(T)/γ(T)) (2 for a constant γ), by a central
 * difference over ±0.5 K; used to carry a relative uncertainty of c to T.
 */
export function temperatureSensitivityToSpeed(temperatureC: number, gas: GasProperties = AIR): number {
  const tK = temperatureC - ABSOLUTE_ZERO_C;
  if (!gas.gammaTableK) return 2;
  const h = Math.min(0.5, tK / 4);
  const dLnGamma = Math.log(gammaAtK(gas, tK + h) / gammaAtK(gas, tK - h)) / Math.log((tK + h) / (tK - h));
  return 2 / (1 + dLnGamma);
}

/**
 * Speed of sound in humid air with CO₂, m/s, by Cramer's interpolating polynomial (O. Cramer 1993,
 * "The variation of the specific heat ratio and the speed of sound in air with temperature,
 * pressure, humidity, and CO₂ concentration", JASA 93(5) 2510; coefficients as in REFERENCES.md §1).
 * Valid 0–30 °C; water-vapour mole fraction from relative humidity with the enhancement factor and
 * saturation pressure given there.
 */
export function speedOfSoundHumidAirMPerS(temperatureC: number, pressurePa: number, relativeHumidityPct: number, co2MoleFraction = 0.0004): number {
  // Cramer's stated validity: 0–30 °C, 60–110 kPa.
  checkRange('temperatureC', temperatureC, { min: 0, max: 30 }, '°C');
  checkRange('pressurePa', pressurePa, { min: 60000, max: 110000 }, 'Pa');
  if (!Number.isFinite(relativeHumidityPct) || relativeHumidityPct < 0 || relativeHumidityPct > 100) {
    throw new RangeError(`relativeHumidityPct must lie from 0 to 100, got ${relativeHumidityPct}`);
  }
  if (!Number.isFinite(co2MoleFraction) || co2MoleFraction < 0 || co2MoleFraction > 0.01) {
    throw new RangeError(`co2MoleFraction must lie from 0 to 0.01, got ${co2MoleFraction}`);
  }
  const t = temperatureC;
  const tK = t - ABSOLUTE_ZERO_C;
  const p = pressurePa;
  const psv = Math.exp(1.2378847e-5 * tK * tK - 1.9121316e-2 * tK + 33.93711047 - 6.3431645e3 / tK);
  const fe = 1.00062 + 3.14e-8 * p + 5.6e-7 * t * t;
  const xw = ((relativeHumidityPct / 100) * fe * psv) / p;
  const xc = co2MoleFraction;
  const a = [331.5024, 0.603055, -0.000528, 51.471935, 0.1495874, -0.000782, -1.82e-7, 3.73e-8, -2.93e-10, -85.20931, -0.228525, 5.91e-5, -2.835149, -2.15e-13, 29.179762, 0.000486];
  return (
    a[0] + a[1] * t + a[2] * t * t +
    (a[3] + a[4] * t + a[5] * t * t) * xw +
    (a[6] + a[7] * t + a[8] * t * t) * p +
    (a[9] + a[10] * t + a[11] * t * t) * xc +
    a[12] * xw * xw + a[13] * p * p + a[14] * xc * xc + a[15] * xw * p * xc
  );
}
