/**
 * `humgauge modes`: plane-wave modes of a duct from its length, diameter, ends and gas temperature
 * (uniform, with a heater splitting it into a cold and a hot zone, or a measured temperature
 * profile), the Rayleigh reading of the heater for each mode, and, given a measured tone, the
 * matching mode and the mean gas temperature it implies. Also holds the small argument helpers
 * that `humgauge simulate` shares.
 */
import { readFile } from 'node:fs/promises';
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
  type ProfilePoint,
} from '../duct';
import { matchMeasuredFrequency, type MeasuredMatch } from '../duct-match';
import type { DuctGeometry } from '../types';
import { num } from './format';
import { CliError, EXIT, type CliIo } from './io';

export const MODES_HELP = `Usage: humgauge modes --length M --diameter M [options]

Predicts the plane-wave modes of a straight duct, with end corrections and the
gas temperature; with a heater, the duct is split into a cold zone below it and
a hot zone above it and solved by transfer matrices.

Options
  --length M            duct length, m (required)
  --diameter M          inner diameter, m (required)
  --ends KIND           open-open (default), open-closed, closed-closed
  --closed-end WHICH    for open-closed: upstream (default; closed at the bottom) or downstream
  --open-end KIND       end correction of open ends: unflanged (default, 0.6133 a),
                        flanged (0.8216 a) or none
  --temp C              gas temperature, °C (default 20); below the heater with --heater
  --heater M            heater position from the upstream (lower) end, m
  --hot-temp C          gas temperature above the heater, °C (with --heater)
  --flow DIR            mean flow through the heater: upward (default), downward, none
  --profile FILE        temperature profile, CSV "x_m,temp_c" (linear between points)
  --gamma G             ratio of specific heats, held constant (default: air's γ(T)
                        from the NBS table, 1.401 at -23 °C to 1.309 at 1227 °C)
  --molar-mass G_MOL    molar mass, g/mol (default: air, R = 287.05 J/(kg K))
  --count N             number of modes (default 5, at most 200)
  --measured HZ         a measured tone: every mode it can be, with the gas temperature
                        each implies; the best plausible one (-90 to 2130 °C) first
  --measured-std HZ     standard uncertainty of the measured frequency (default 0.5 Hz)
  --length-std M        standard uncertainty of the length (default 0.005 m)
  --json                print JSON: { "modes": [{ "n", "frequencyHz", ... }], ... }
  -h, --help            this text

Example
  humgauge modes --length 1.2 --diameter 0.048 --temp 20
  humgauge modes --length 1 --diameter 0.04 --heater 0.25 --hot-temp 200 --open-end none
  humgauge modes --length 1.2 --diameter 0.048 --measured 171 --json
`;

/** Splits `--name value` / `--name=value` / `--flag` arguments; names in `flags` take no value. */
export function parseOptions(args: string[], known: string[], flags: string[]): Map<string, string> {
  const out = new Map<string, string>();
  for (let i = 0; i < args.length; i++) {
    const a = args[i];
    if (a === '-h' || a === '--help') {
      out.set('help', '');
      continue;
    }
    if (!a.startsWith('--')) throw new CliError(`unexpected argument "${a}" (see --help)`, EXIT.USAGE);
    const eq = a.indexOf('=');
    const name = eq > 0 ? a.slice(2, eq) : a.slice(2);
    if (!known.includes(name) && !flags.includes(name)) throw new CliError(`unknown option --${name} (see --help)`, EXIT.USAGE);
    if (flags.includes(name)) {
      out.set(name, '');
      continue;
    }
    const value = eq > 0 ? a.slice(eq + 1) : args[++i];
    if (value === undefined || value === '') throw new CliError(`--${name} needs a value`, EXIT.USAGE);
    if (out.has(name)) throw new CliError(`--${name} given twice`, EXIT.USAGE);
    out.set(name, value);
  }
  return out;
}

/** A finite number from option `name`, or undefined when absent; BAD_PARAMETER if it is not a number. */
export function numberOption(opts: Map<string, string>, name: string, unit: string): number | undefined {
  const raw = opts.get(name);
  if (raw === undefined) return undefined;
  const v = Number(raw);
  if (raw.trim() === '' || !Number.isFinite(v)) throw new CliError(`--${name} must be a number${unit ? ` of ${unit}` : ''}, got "${raw}"`, EXIT.BAD_PARAMETER);
  return v;
}

/** One of the allowed words for option `name` (USAGE otherwise). */
export function choiceOption<T extends string>(opts: Map<string, string>, name: string, allowed: readonly T[], fallback: T): T {
  const raw = opts.get(name);
  if (raw === undefined) return fallback;
  if (!(allowed as readonly string[]).includes(raw)) throw new CliError(`--${name} must be one of ${allowed.join(', ')}, got "${raw}"`, EXIT.USAGE);
  return raw as T;
}

/**
 * One line on stderr and the exit code: model RangeErrors become BAD_PARAMETER, root-finder
 * failures NO_CONVERGENCE. `names` maps the model's parameter names to the command's options.
 */
export function failWith(e: unknown, io: CliIo, command: string, names: Record<string, string> = {}): number {
  if (e instanceof RangeError) {
    let msg = e.message;
    for (const [from, to] of Object.entries(names)) msg = msg.replace(new RegExp(`\\b${from}\\b`, 'g'), to);
    io.err(`humgauge ${command}: ${msg}\n`);
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

/** Parses a profile CSV "x_m,temp_c" (optional header line, '#' comments); BAD_CSV with the line number on error. */
export function parseProfileCsv(text: string): ProfilePoint[] {
  const points: ProfilePoint[] = [];
  const lines = text.split(/\r?\n/);
  for (let i = 0; i < lines.length; i++) {
    const line = lines[i].trim();
    if (line === '' || line.startsWith('#')) continue;
    const cells = line.split(/[,;\t]/).map((c) => c.trim());
    if (cells.length < 2) throw new CliError(`profile line ${i + 1}: expected "x_m,temp_c", got "${line}"`, EXIT.BAD_CSV);
    const x = Number(cells[0]);
    const t = Number(cells[1]);
    if (!Number.isFinite(x) || !Number.isFinite(t) || cells[0] === '' || cells[1] === '') {
      if (points.length === 0 && Number.isNaN(x)) continue; // header line
      throw new CliError(`profile line ${i + 1}: "${line}" is not two numbers`, EXIT.BAD_CSV);
    }
    points.push({ xM: x, temperatureC: t });
  }
  if (points.length === 0) throw new CliError('profile: no data rows (expected lines "x_m,temp_c")', EXIT.BAD_CSV);
  return points;
}

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

/** Model parameter → option, for messages (units agree). */
const OPTION_NAMES: Record<string, string> = {
  lengthM: '--length',
  diameterM: '--diameter',
  gasTemperatureC: '--temp',
  heaterPositionM: '--heater',
  hotTemperatureC: '--hot-temp',
  measuredHz: '--measured',
  frequencyStdHz: '--measured-std',
  lengthStdM: '--length-std',
  heaterXM: '--heater',
  gamma: '--gamma',
};

const KNOWN = ['length', 'diameter', 'ends', 'closed-end', 'open-end', 'temp', 'heater', 'hot-temp', 'flow', 'profile', 'gamma', 'molar-mass', 'count', 'measured', 'measured-std', 'length-std'];

/** Runs `humgauge modes`; returns the exit code. */
export async function runModes(args: string[], io: CliIo): Promise<number> {
  try {
    const o = parseOptions(args, KNOWN, ['json']);
    if (o.has('help')) {
      io.out(MODES_HELP);
      return EXIT.OK;
    }
    const lengthM = numberOption(o, 'length', 'm');
    const diameterM = numberOption(o, 'diameter', 'm');
    if (lengthM === undefined) throw new CliError('--length is required (duct length in m)', EXIT.USAGE);
    if (diameterM === undefined) throw new CliError('--diameter is required (inner diameter in m)', EXIT.USAGE);
    const ends = choiceOption(o, 'ends', ['open-open', 'open-closed', 'closed-closed'] as const, 'open-open');
    const closedEnd = choiceOption(o, 'closed-end', ['upstream', 'downstream'] as const, 'upstream');
    const openEnd = choiceOption(o, 'open-end', ['unflanged', 'flanged', 'none'] as const, 'unflanged');
    const flow = choiceOption(o, 'flow', ['upward', 'downward', 'none'] as const, 'upward') as MeanFlow;
    const gasTemperatureC = numberOption(o, 'temp', '°C') ?? 20;
    const heaterPositionM = numberOption(o, 'heater', 'm');
    const hotTemperatureC = numberOption(o, 'hot-temp', '°C');
    const count = numberOption(o, 'count', '') ?? 5;
    if (!Number.isInteger(count) || count < 1 || count > 200) throw new CliError(`--count must be a whole number from 1 to 200, got ${count}`, EXIT.BAD_PARAMETER);
    const gamma = numberOption(o, 'gamma', '');
    const molarMassG = numberOption(o, 'molar-mass', 'g/mol');
    // Air's γ(T) unless a constant γ is given; a molar mass alone keeps air's γ(T) (a flue gas near air).
    let gas: GasProperties = AIR;
    if (gamma !== undefined) gas = gasFromMolarMass(gamma, molarMassG !== undefined ? molarMassG / 1000 : 8.314462618 / AIR.specificGasConstantJPerKgK);
    else if (molarMassG !== undefined) gas = airLikeGas(molarMassG / 1000);
    if (o.has('profile') && (heaterPositionM !== undefined || hotTemperatureC !== undefined)) {
      throw new CliError('--profile and --heater/--hot-temp exclude each other', EXIT.USAGE);
    }
    const geom: DuctGeometry = { lengthM, diameterM, ends, openEnd, gasTemperatureC, heaterPositionM, hotTemperatureC };
    if (heaterPositionM === undefined) delete geom.heaterPositionM;
    if (hotTemperatureC === undefined) delete geom.hotTemperatureC;
    let model: DuctModel = { ...ductModelFromGeometry(geom, gas), closedEnd };
    const profilePath = o.get('profile');
    if (profilePath !== undefined) {
      let text: string;
      try {
        text = await readFile(profilePath, 'utf8');
      } catch (e) {
        throw new CliError(`${profilePath}: cannot be read (${(e as { code?: string }).code ?? 'error'})`, EXIT.UNREADABLE);
      }
      model = { ...model, zones: zonesFromProfile(parseProfileCsv(text), lengthM) };
    }
    const pred = predictModes(model, count);
    const heaterX = heaterPositionM;
    const rayleigh = heaterX === undefined ? null : pred.modes.map((m) => rayleighReading(model, m.frequencyHz, heaterX, flow));
    const measuredHz = numberOption(o, 'measured', 'Hz');
    const match =
      measuredHz === undefined
        ? null
        : matchMeasuredFrequency(
            model,
            measuredHz,
            // The defaults (0.5 Hz, 5 mm) shrink for a tone or duct smaller than them: an uncertainty is at most the quantity.
            { frequencyStdHz: numberOption(o, 'measured-std', 'Hz') ?? Math.min(0.5, measuredHz), lengthStdM: numberOption(o, 'length-std', 'm') ?? Math.min(0.005, lengthM) },
            Math.max(count, 12),
          );
    const cEnds = model.zones.map((z) => speedOfSoundMPerS(z.temperatureC, gas));
    const gammas = model.zones.map((z) => gammaAtK(gas, z.temperatureC - ABSOLUTE_ZERO_C));
    const warnings = [...pred.warnings, ...(match ? match.warnings.filter((w) => !pred.warnings.includes(w)) : [])];
    const best = match?.best ?? null;
    if (o.has('json')) {
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
    lines.push(`Duct ${num(lengthM, 4)} m long, ${num(diameterM * 1000, 4)} mm inner diameter, ${ends}${ends === 'open-closed' ? ` (closed ${closedEnd})` : ''}, open ends ${openEnd}`);
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
    return failWith(e, io, 'modes', OPTION_NAMES);
  }
}
