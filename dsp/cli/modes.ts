/**
 * `humgauge modes`: plane-wave modes of a duct from its length, diameter, ends and gas temperature
 * (uniform, with a heater splitting it into a cold and a hot zone, or a measured temperature
 * profile), the Rayleigh reading of the heater for each mode, and, given a measured tone, the
 * matching mode and the mean gas temperature it implies. Options follow the shared rules of
 * options.ts; failWith and the profile reader are shared with `humgauge simulate`.
 */
import {
  ABSOLUTE_ZERO_C,
  AIR,
  airLikeGas,
  ductModelFromGeometry,
  gammaAtK,
  gasFromMolarMass,
  predictModes,
  rayleighReading,
  speedOfSoundMPerS,
  zonesFromProfile,
  type DuctModel,
  type GasProperties,
  type MeanFlow,
} from '../duct';
import { GAMMA_RANGE, MOLAR_MASS_RANGE_KG_PER_MOL } from '../gas';
import { DEFAULT_MATCH_UNCERTAINTY, matchMeasuredFrequency, type MeasuredMatch } from '../duct-match';
import type { DuctGeometry } from '../types';
import { num } from './format';
import { readProfile } from './profile';
import { CliError, EXIT, type CliIo } from './io';
import {
  HELP_OPTION,
  MODEL_PARAMETER_OPTIONS,
  choiceOption,
  hasFlag,
  numberOption,
  optionsHelp,
  parseCommandArgs,
  quote,
  textOption,
  withOptionNames,
  type OptionTable,
} from './options';

/** Options of `humgauge modes` (ranges of the model's own inputs are checked in dsp/duct.ts). */
export const MODES_OPTIONS: OptionTable = {
  length: { kind: 'number', value: 'M', unit: 'm', help: 'duct length, m (required)' },
  diameter: { kind: 'number', value: 'M', unit: 'm', help: 'inner diameter, m (required)' },
  ends: {
    kind: 'choice',
    value: 'KIND',
    choices: ['open-open', 'closed-open', 'closed-closed'],
    aliases: { 'open-closed': 'closed-open' },
    help: 'open-open (default), closed-open (one end closed; open-closed is the\nsame), closed-closed',
  },
  'closed-end': { kind: 'choice', value: 'WHICH', choices: ['upstream', 'downstream'], help: 'for closed-open: upstream (default; closed at the bottom) or downstream' },
  'open-end': { kind: 'choice', value: 'KIND', choices: ['unflanged', 'flanged', 'none'], help: 'end correction of open ends: unflanged (default, 0.6133 a),\nflanged (0.8216 a) or none' },
  temp: { kind: 'number', value: 'C', unit: '°C', help: 'gas temperature, °C (default 20); below the heater with --heater' },
  heater: { kind: 'number', value: 'M', unit: 'm', help: 'heater position from the upstream (lower) end, m' },
  'hot-temp': { kind: 'number', value: 'C', unit: '°C', help: 'gas temperature above the heater, °C (with --heater)' },
  flow: { kind: 'choice', value: 'DIR', choices: ['upward', 'downward', 'none'], help: 'mean flow through the heater: upward (default), downward, none' },
  profile: { kind: 'text', value: 'FILE', help: 'temperature profile, CSV "x_m,temp_c" (linear between points)' },
  // The model's own ranges (dsp/gas.ts GAMMA_RANGE, MOLAR_MASS_RANGE_KG_PER_MOL).
  gamma: { kind: 'number', value: 'G', unit: '', min: GAMMA_RANGE.min, isMinExclusive: true, max: GAMMA_RANGE.max, help: 'ratio of specific heats, above 1 and at most 5/3 (a monatomic\ngas), held constant; default air\'s γ(T) (NBS table,\n1.401 at -23 °C to 1.309 at 1227 °C)' },
  'molar-mass': {
    kind: 'number',
    value: 'G_MOL',
    unit: 'g/mol',
    min: MOLAR_MASS_RANGE_KG_PER_MOL.min * 1000,
    max: MOLAR_MASS_RANGE_KG_PER_MOL.max * 1000,
    help: 'molar mass, g/mol, 2 to 400 (default: air, R = 287.05 J/(kg K))',
  },
  count: { kind: 'number', value: 'N', unit: '', min: 1, max: 200, isInteger: true, help: 'number of modes (default 5, at most 200)' },
  measured: { kind: 'number', value: 'HZ', unit: 'Hz', help: 'a measured tone: every mode it can be, with the gas temperature\neach implies; the best plausible one (-90 to 2130 °C) first' },
  'measured-std': { kind: 'number', value: 'HZ', unit: 'Hz', help: 'standard uncertainty of the measured frequency (default 0.5 Hz)' },
  'length-std': { kind: 'number', value: 'M', unit: 'm', help: 'standard uncertainty of the length (default 0.005 m)' },
  json: { kind: 'flag', help: 'print JSON: { "modes": [{ "n", "frequencyHz", ... }], ... }' },
  help: HELP_OPTION,
};

export const MODES_HELP = `Usage: humgauge modes --length M --diameter M [options]

Predicts the plane-wave modes of a straight duct, with end corrections and the
gas temperature; with a heater, the duct is split into a cold zone below it and
a hot zone above it and solved by transfer matrices.

Options
${optionsHelp(MODES_OPTIONS)}
Example
  humgauge modes --length 1.2 --diameter 0.048 --temp 20
  humgauge modes --length 1 --diameter 0.04 --heater 0.25 --hot-temp 200 --open-end none
  humgauge modes --length 1.2 --diameter 0.048 --measured 171 --json
`;

/**
 * One line on stderr and the exit code: model RangeErrors become BAD_PARAMETER, root-finder
 * failures NO_CONVERGENCE. `names` maps the model's parameter names to the command's options.
 */
export function failWith(e: unknown, io: CliIo, command: string, names: Readonly<Record<string, string>> = MODEL_PARAMETER_OPTIONS): number {
  if (e instanceof RangeError) {
    io.err(`humgauge ${command}: ${withOptionNames(e.message, names)}\n`);
    return /root finder|converge/.test(e.message) ? EXIT.NO_CONVERGENCE : EXIT.BAD_PARAMETER;
  }
  if (e instanceof CliError) {
    io.err(`humgauge ${command}: ${e.message}\n`);
    return e.exitCode;
  }
  const msg = e instanceof Error ? e.message : String(e);
  io.err(`humgauge ${command}: internal error: ${msg.split('\n')[0]}\n`);
  return EXIT.INTERNAL;
}

export { parseProfileCsv } from './profile';

/** Readable lines for a measured tone: the best plausible mode, then every candidate with the temperature it implies. */
export function measuredLines(match: MeasuredMatch, measuredHz: number): string[] {
  const lines: string[] = [];
  const best = match.best;
  const what = match.isEquivalentTemperature ? 'Equivalent uniform gas temperature' : 'Mean gas temperature';
  const interval = (c: { temperatureCi95C: [number, number] }): string => `${c.temperatureCi95C[0].toFixed(1)} to ${c.temperatureCi95C[1].toFixed(1)} °C`;
  if (best) {
    lines.push(`Measured ${num(measuredHz, 5)} Hz: mode ${best.n}${match.isAmbiguous ? ' (ambiguous, see the candidates)' : ''} (predicted ${best.predictedHz.toFixed(3)} Hz at the temperatures given, ${best.relativeDeviation >= 0 ? '+' : ''}${(best.relativeDeviation * 100).toFixed(2)} %)`);
    lines.push(`${what} for an exact match: ${best.temperatureC.toFixed(1)} °C, u = ${best.temperatureStdK.toFixed(1)} K (95 % ${interval(best)})`);
  } else {
    lines.push(`Measured ${num(measuredHz, 5)} Hz: no mode of this duct at a plausible gas temperature (${match.plausibleRangeC[0]} to ${match.plausibleRangeC[1]} °C)`);
  }
  if (match.candidates.length === 0) return lines;
  lines.push(`Candidates: the uniform gas temperature that puts each mode at ${num(measuredHz, 5)} Hz`);
  const header = ['mode', 'temperature (°C)', '95 % interval', 'plausible'];
  const rows = match.candidates.map((c) => [
    String(c.n),
    c.temperatureC.toFixed(1),
    interval(c),
    c.plausible ? (c === best ? 'yes, best' : 'yes') : c.isAboveCutOn ? 'no (above cut-on)' : 'no',
  ]);
  const widths = header.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)));
  const fmt = (cells: string[]): string => cells.map((c, k) => (k <= 1 ? c.padStart(widths[k]) : c.padEnd(widths[k]))).join('  ').trimEnd();
  lines.push(fmt(header), widths.map((w) => '-'.repeat(w)).join('  '), ...rows.map(fmt));
  return lines;
}

/** Runs `humgauge modes`; returns the exit code. */
export async function runModes(args: string[], io: CliIo): Promise<number> {
  try {
    const o = parseCommandArgs('modes', MODES_OPTIONS, args);
    if (o.positionals.length > 0) throw new CliError(`unexpected argument "${quote(o.positionals[0])}" (see humgauge modes --help)`, EXIT.USAGE);
    if (hasFlag(o, 'help')) {
      io.out(MODES_HELP);
      return EXIT.OK;
    }
    const lengthM = numberOption(o, 'length');
    const diameterM = numberOption(o, 'diameter');
    if (lengthM === undefined) throw new CliError('--length is required (duct length in m)', EXIT.USAGE);
    if (diameterM === undefined) throw new CliError('--diameter is required (inner diameter in m)', EXIT.USAGE);
    const endsWord = choiceOption<'open-open' | 'closed-open' | 'closed-closed'>(o, 'ends', 'open-open');
    // The model's name for one closed end is 'open-closed'; which end is closed is --closed-end.
    const ends = endsWord === 'closed-open' ? 'open-closed' : endsWord;
    const closedEnd = choiceOption<'upstream' | 'downstream'>(o, 'closed-end', 'upstream');
    const openEnd = choiceOption<'unflanged' | 'flanged' | 'none'>(o, 'open-end', 'unflanged');
    const flow = choiceOption<MeanFlow>(o, 'flow', 'upward');
    const gasTemperatureC = numberOption(o, 'temp') ?? 20;
    const heaterPositionM = numberOption(o, 'heater');
    const hotTemperatureC = numberOption(o, 'hot-temp');
    const count = numberOption(o, 'count') ?? 5;
    const gamma = numberOption(o, 'gamma');
    const molarMassG = numberOption(o, 'molar-mass');
    // Air's γ(T) unless a constant γ is given; a molar mass alone keeps air's γ(T) (a flue gas near air).
    let gas: GasProperties = AIR;
    if (gamma !== undefined) gas = gasFromMolarMass(gamma, molarMassG !== undefined ? molarMassG / 1000 : 8.314462618 / AIR.specificGasConstantJPerKgK);
    else if (molarMassG !== undefined) gas = airLikeGas(molarMassG / 1000);
    if (o.values.has('profile') && (heaterPositionM !== undefined || hotTemperatureC !== undefined)) {
      throw new CliError('--profile and --heater/--hot-temp exclude each other', EXIT.USAGE);
    }
    const geom: DuctGeometry = { lengthM, diameterM, ends, openEnd, gasTemperatureC, heaterPositionM, hotTemperatureC };
    if (heaterPositionM === undefined) delete geom.heaterPositionM;
    if (hotTemperatureC === undefined) delete geom.hotTemperatureC;
    let model: DuctModel = { ...ductModelFromGeometry(geom, gas), closedEnd };
    const profilePath = textOption(o, 'profile');
    if (profilePath !== undefined) {
      model = { ...model, zones: zonesFromProfile(await readProfile(profilePath), lengthM) };
    }
    const pred = predictModes(model, count);
    const heaterX = heaterPositionM;
    const rayleigh = heaterX === undefined ? null : pred.modes.map((m) => rayleighReading(model, m.frequencyHz, heaterX, flow));
    const measuredHz = numberOption(o, 'measured');
    const match =
      measuredHz === undefined
        ? null
        : matchMeasuredFrequency(
            model,
            measuredHz,
            // The defaults shrink for a tone or duct smaller than them: an uncertainty is at most the quantity.
            {
              frequencyStdHz: numberOption(o, 'measured-std') ?? Math.min(DEFAULT_MATCH_UNCERTAINTY.frequencyStdHz, measuredHz),
              lengthStdM: numberOption(o, 'length-std') ?? Math.min(DEFAULT_MATCH_UNCERTAINTY.lengthStdM, lengthM),
            },
            Math.max(count, 12),
          );
    const cEnds = model.zones.map((z) => speedOfSoundMPerS(z.temperatureC, gas));
    const gammas = model.zones.map((z) => gammaAtK(gas, z.temperatureC - ABSOLUTE_ZERO_C));
    const warnings = [...pred.warnings, ...(match ? match.warnings.filter((w) => !pred.warnings.includes(w)) : [])];
    const best = match?.best ?? null;
    if (hasFlag(o, 'json')) {
      const json = {
        modes: pred.modes.map((m, i) => ({
          n: m.n,
          frequencyHz: m.frequencyHz,
          isAboveCutOn: m.isAboveCutOn,
          ...(rayleigh ? { rayleighIndex: rayleigh[i].index, rayleighReading: rayleigh[i].reading } : {}),
        })),
        method: pred.method,
        effectiveLengthM: pred.effectiveLengthM,
        speedOfSoundMPerS: cEnds.length === 1 ? cEnds[0] : null,
        speedOfSoundRangeMPerS: [Math.min(...cEnds), Math.max(...cEnds)],
        cutOnHz: pred.cutOnHz,
        gammaRange: [Math.min(...gammas), Math.max(...gammas)],
        ...(match
          ? {
              measured: {
                frequencyHz: measuredHz,
                n: best ? best.n : null,
                predictedHz: best ? best.predictedHz : null,
                relativeDeviation: best ? best.relativeDeviation : null,
                temperatureC: best ? best.temperatureC : null,
                temperatureStdK: best ? best.temperatureStdK : null,
                temperatureCi95C: best ? best.temperatureCi95C : null,
                isAmbiguous: match.isAmbiguous,
                isEquivalentTemperature: match.isEquivalentTemperature,
                plausibleRangeC: match.plausibleRangeC,
                candidates: match.candidates,
              },
            }
          : {}),
        warnings,
      };
      io.out(JSON.stringify(json, null, 2) + '\n');
      return EXIT.OK;
    }
    const lines: string[] = [];
    const cText = cEnds.length === 1 ? `${num(cEnds[0], 5)} m/s` : `${num(Math.min(...cEnds), 5)} to ${num(Math.max(...cEnds), 5)} m/s`;
    lines.push(`Duct ${num(lengthM, 4)} m long, ${num(diameterM * 1000, 4)} mm inner diameter, ${endsWord}${endsWord === 'closed-open' ? ` (closed ${closedEnd})` : ''}, open ends ${openEnd}`);
    lines.push(`Speed of sound ${cText}; effective length ${num(pred.effectiveLengthM, 5)} m; cross-mode cut-on ${num(pred.cutOnHz, 4)} Hz`);
    lines.push(`Solved by ${pred.method === 'closed-form' ? 'the closed form f = κ c / L_eff' : 'transfer matrices and Brent root finding'}`);
    lines.push('');
    const header = ['n', 'frequency (Hz)', ...(rayleigh ? [`heater (${flow} flow)`] : []), 'note'];
    const rows = pred.modes.map((m, i) => [
      String(m.n),
      m.frequencyHz.toFixed(3),
      ...(rayleigh ? [`${rayleigh[i].reading} (${rayleigh[i].index >= 0 ? '+' : ''}${rayleigh[i].index.toFixed(3)})`] : []),
      m.isAboveCutOn ? 'above cut-on' : '',
    ]);
    const widths = header.map((h, c) => Math.max(h.length, ...rows.map((r) => r[c].length)));
    const fmt = (cells: string[]): string => cells.map((c, k) => (k <= 1 ? c.padStart(widths[k]) : c.padEnd(widths[k]))).join('  ').trimEnd();
    lines.push(fmt(header), widths.map((w) => '-'.repeat(w)).join('  '), ...rows.map(fmt));
    if (match && measuredHz !== undefined) lines.push('', ...measuredLines(match, measuredHz));
    for (const w of warnings) lines.push(`warning: ${w}`);
    io.out(lines.join('\n') + '\n');
    return EXIT.OK;
  } catch (e) {
    return failWith(e, io, 'modes');
  }
}
