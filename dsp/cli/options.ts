/**
 * Option parsing shared by every command: one table per command declares each option's kind,
 * value, range and help line; Node's `util.parseArgs` splits the arguments, and the helpers here
 * turn values into numbers and words by one set of rules, so `--`, `--x=v`, unknown options,
 * repeated options and numbers behave the same in `analyze`, `modes` and `simulate`.
 *
 * Rules (stated in `humgauge --help`):
 * - a malformed value (not a decimal number, a word outside the list) is a usage error (exit 2);
 * - a number outside the option's physical range is a parameter error (exit 11);
 * - numbers are decimal: `1500`, `-40`, `2.5e-3`. Hexadecimal, `1,2`, `Infinity`, `NaN` and
 *   values that overflow double precision are refused; `--x -40` takes -40 as the value.
 */

import { parseArgs } from 'node:util';
import { CliError, EXIT } from './io';

/** One option of a command. */
export interface OptionSpec {
  /** 'flag' takes no value; the others take one. */
  kind: 'flag' | 'number' | 'text' | 'choice';
  /** One-letter alias (e.g. 'h'). */
  short?: string;
  /** Name of the value in the help text, e.g. 'HZ'. */
  value?: string;
  /** Help text; '\n' starts a continuation line. */
  help: string;
  /** Allowed words of a 'choice'. */
  choices?: readonly string[];
  /** Other accepted spellings of a choice → the canonical word. */
  aliases?: Readonly<Record<string, string>>;
  /** Unit of a number, for messages ('' for dimensionless). */
  unit?: string;
  /** Physical range of a number (inclusive unless `isMinExclusive`). */
  min?: number;
  max?: number;
  isMinExclusive?: boolean;
  isInteger?: boolean;
  /** A number option that also accepts `-inf` (e.g. "no noise"). */
  acceptsMinusInfinity?: boolean;
}

export type OptionTable = Readonly<Record<string, OptionSpec>>;

/** The options every command understands. */
export const HELP_OPTION: OptionSpec = { kind: 'flag', short: 'h', help: 'this text' };

/** The arguments of one command, split and checked against its table. */
export interface ParsedArgs {
  command: string;
  table: OptionTable;
  /** Raw values by option name (flags: 'true'). */
  values: Map<string, string>;
  positionals: string[];
}

/** Decimal numbers only (no hex, no thousands separators, no words). */
const NUMBER_RE = /^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/;
const MINUS_INFINITY_RE = /^-inf(inity)?$/i;

/** Splits `args` by the command's table; throws CliError(USAGE) with one line naming the option. */
export function parseCommandArgs(command: string, table: OptionTable, args: string[]): ParsedArgs {
  const options: Record<string, { type: 'string' | 'boolean'; short?: string; multiple: true }> = {};
  for (const [name, spec] of Object.entries(table)) {
    options[name] = { type: spec.kind === 'flag' ? 'boolean' : 'string', multiple: true, ...(spec.short ? { short: spec.short } : {}) };
  }
  const see = `see humgauge ${command} --help`;
  let parsed;
  try {
    parsed = parseArgs({ args: joinNegativeValues(table, args), options, allowPositionals: true, strict: true });
  } catch (e) {
    throw new CliError(`${parseProblem(e)} (${see})`, EXIT.USAGE);
  }
  const values = new Map<string, string>();
  for (const [name, v] of Object.entries(parsed.values)) {
    const list = v as (string | boolean)[];
    const spec = table[name];
    if (spec.kind !== 'flag' && list.length > 1) throw new CliError(`--${name} given twice (${see})`, EXIT.USAGE);
    const raw = list[list.length - 1];
    if (spec.kind !== 'flag' && String(raw).trim() === '') throw new CliError(`--${name} needs a value (${see})`, EXIT.USAGE);
    values.set(name, String(raw));
  }
  return { command, table, values, positionals: parsed.positionals };
}

/**
 * `--temp -40` / `-x -40`: parseArgs reads a value starting with '-' as a missing value; a
 * negative number (or `-inf` where accepted) after an option that takes a value is its value.
 */
function joinNegativeValues(table: OptionTable, args: string[]): string[] {
  const out: string[] = [];
  for (let i = 0; i < args.length; i++) {
    const a = args[i];
    if (a === '--') {
      out.push(...args.slice(i));
      break;
    }
    const name = a.startsWith('--') ? a.slice(2) : a.length === 2 && a[0] === '-' ? shortName(table, a[1]) : null;
    const spec = name !== null ? table[name] : undefined;
    const next = args[i + 1];
    if (spec && spec.kind !== 'flag' && next !== undefined && next.startsWith('-') && (NUMBER_RE.test(next) || MINUS_INFINITY_RE.test(next))) {
      out.push(`--${name}=${next}`);
      i++;
      continue;
    }
    out.push(a);
  }
  return out;
}

function shortName(table: OptionTable, letter: string): string | null {
  for (const [name, spec] of Object.entries(table)) if (spec.short === letter) return name;
  return null;
}

/** One line for a parseArgs error (its own messages span several lines). */
function parseProblem(e: unknown): string {
  const msg = e instanceof Error ? e.message : String(e);
  const code = (e as { code?: string }).code;
  const opt = /'(-{1,2}[^' ]+)/.exec(msg)?.[1] ?? '';
  if (code === 'ERR_PARSE_ARGS_UNKNOWN_OPTION') return `unknown option ${opt}`;
  if (code === 'ERR_PARSE_ARGS_INVALID_OPTION_VALUE') {
    return /does not take an argument/.test(msg) ? `${opt} takes no value` : `${opt} needs a value`;
  }
  if (code === 'ERR_PARSE_ARGS_UNEXPECTED_POSITIONAL') return `unexpected argument ${/'([^']*)'/.exec(msg)?.[1] ?? ''}`.trimEnd();
  return msg.split('\n')[0];
}

export function hasFlag(p: ParsedArgs, name: string): boolean {
  return p.values.has(name);
}

export function textOption(p: ParsedArgs, name: string): string | undefined {
  return p.values.get(name);
}

/**
 * The number given for option `name` (undefined when absent), checked against the table:
 * malformed → USAGE, outside the physical range → BAD_PARAMETER, both naming the option.
 */
export function numberOption(p: ParsedArgs, name: string): number | undefined {
  const raw = p.values.get(name);
  if (raw === undefined) return undefined;
  return parseNumberValue(`--${name}`, raw.trim(), p.table[name]);
}

/** Checks one number text against a spec (shared by options and list values such as --band, --steps). */
export function parseNumberValue(label: string, raw: string, spec: Pick<OptionSpec, 'unit' | 'min' | 'max' | 'isMinExclusive' | 'isInteger' | 'acceptsMinusInfinity'>): number {
  const unit = spec.unit ? ` ${spec.unit}` : '';
  if (spec.acceptsMinusInfinity && MINUS_INFINITY_RE.test(raw)) return -Infinity;
  if (!NUMBER_RE.test(raw)) {
    throw new CliError(`${label} wants a decimal number${spec.unit ? ` of ${spec.unit}` : ''}, got "${quote(raw)}"`, EXIT.USAGE);
  }
  const v = Number(raw);
  const range = rangeText(spec);
  if (!Number.isFinite(v)) throw new CliError(`${label} ${quote(raw)} is too large${range ? ` (${range})` : ''}`, EXIT.BAD_PARAMETER);
  if (spec.isInteger && !Number.isInteger(v)) throw new CliError(`${label} must be a whole number${range ? ` ${range}` : ''}, got ${raw}`, EXIT.BAD_PARAMETER);
  const below = spec.min !== undefined && (spec.isMinExclusive ? !(v > spec.min) : !(v >= spec.min));
  const above = spec.max !== undefined && !(v <= spec.max);
  if (below || above) throw new CliError(`${label} ${raw}${unit} is outside its range (${range})`, EXIT.BAD_PARAMETER);
  return v;
}

function rangeText(spec: Pick<OptionSpec, 'unit' | 'min' | 'max' | 'isMinExclusive'>): string {
  const u = spec.unit ? ` ${spec.unit}` : '';
  // Six significant digits: a bound such as 5/3 reads 1.66667.
  const min = spec.min !== undefined ? +spec.min.toPrecision(6) : undefined;
  const max = spec.max !== undefined ? +spec.max.toPrecision(6) : undefined;
  if (min !== undefined && max !== undefined) {
    return spec.isMinExclusive ? `above ${min} and at most ${max}${u}` : `${min} to ${max}${u}`;
  }
  if (min !== undefined) return `${spec.isMinExclusive ? 'above' : 'at least'} ${min}${u}`;
  if (max !== undefined) return `at most ${max}${u}`;
  return '';
}

/** The word given for a 'choice' option (aliases mapped to the canonical word); USAGE otherwise. */
export function choiceOption<T extends string>(p: ParsedArgs, name: string, fallback: T): T {
  const raw = p.values.get(name);
  if (raw === undefined) return fallback;
  const spec = p.table[name];
  const word = spec.aliases?.[raw] ?? raw;
  if (!(spec.choices ?? []).includes(word)) {
    throw new CliError(`--${name} must be one of ${(spec.choices ?? []).join(', ')}, got "${quote(raw)}"`, EXIT.USAGE);
  }
  return word as T;
}

/** At most 80 characters of user text in a message, with an ellipsis when cut. */
export function quote(text: string, max = 80): string {
  return text.length > max ? `${text.slice(0, max)}…` : text;
}

/** The "Options" block of a help text, generated from the table (two-space indent, aligned help). */
export function optionsHelp(table: OptionTable): string {
  const heads = Object.entries(table).map(([name, spec]) => {
    const short = spec.short ? `-${spec.short}, ` : '';
    return `${short}--${name}${spec.kind === 'flag' ? '' : ` ${spec.value ?? 'VALUE'}`}`;
  });
  const col = Math.max(...heads.map((h) => h.length)) + 2;
  const lines: string[] = [];
  Object.values(table).forEach((spec, i) => {
    const [first, ...more] = spec.help.split('\n');
    lines.push(`  ${heads[i].padEnd(col)}${first}`);
    for (const m of more) lines.push(`  ${' '.repeat(col)}${m}`);
  });
  return lines.join('\n') + '\n';
}

/**
 * Model parameter names (RangeError messages of dsp/duct.ts, dsp/rig-sim.ts, dsp/condition.ts and
 * the readers) → the option a user types. One table for every command; commands pass their own
 * overrides where one model name maps to different options (e.g. simulate's --lag-ms is in ms).
 */
export const MODEL_PARAMETER_OPTIONS: Readonly<Record<string, string>> = {
  lengthM: '--length',
  diameterM: '--diameter',
  gasTemperatureC: '--temp',
  temperatureC: '--temp',
  heaterPositionM: '--heater',
  heaterXM: '--heater',
  hotTemperatureC: '--hot-temp',
  measuredHz: '--measured',
  frequencyStdHz: '--measured-std',
  lengthStdM: '--length-std',
  gamma: '--gamma',
  molarMassKgPerMol: '--molar-mass',
  count: '--count',
  modeCount: '--modes',
  heatLagS: '--lag-ms',
  durationS: '--duration',
  silenceS: '--silence',
  peakLevel: '--peak',
  micPositionM: '--mic',
  noiseDbfs: '--noise-dbfs',
  excitationRms: '--excitation',
  heaterPower: '--steps power',
  seed: '--seed',
  sampleRateHz: '--rate',
  bandLowHz: '--band',
  bandHighHz: '--band',
};

/** Replaces model parameter names in a message by option names (whole words only). */
export function withOptionNames(message: string, names: Readonly<Record<string, string>> = MODEL_PARAMETER_OPTIONS): string {
  let msg = message;
  for (const [from, to] of Object.entries(names)) msg = msg.replace(new RegExp(`\\b${from}\\b`, 'g'), to);
  return msg;
}
