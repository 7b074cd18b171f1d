/**
 * `humgauge simulate`: renders a heated-tube scenario from the reduced-order simulator
 * (dsp/rig-sim.ts) as a mono 16-bit WAV plus a truth file (JSON) holding, for each heater-power
 * step, the characteristic-equation growth rate and frequency and, when the power drops, the decay rate.
 *
 * The bundled demo recordings are made with (after `npm run build:cli`; the output is the same
 * bit for bit on every run, the seed fixing all noise):
 *   node dist-cli/humgauge.js simulate --length 1 --diameter 0.035 --temp 20 --heater 0.25 \
 *     --steps 0:0,3:0.72,13:0 --duration 17.5 --rate 16000 --noise-dbfs -52 --excitation 5e-4 \
 *     --seed 11 --out public/demo/bench-tube.wav
 *   node dist-cli/humgauge.js simulate --ends closed-open --length 2.2 --diameter 0.15 --temp 120 \
 *     --heater 0.5 --lag-ms 14 --steps 0:0,2:0.75,12:0 --duration 16 --rate 16000 --noise-dbfs -52 \
 *     --excitation 5e-4 --seed 23 --out public/demo/boiler-flue.wav
 * Bench tube: a 1 m open tube, heater a quarter up, switched on at 3 s (hums, saturates), off at 13 s
 * (dies away). Boiler flue: a 2.2 m flue closed at the appliance, burner 0.5 m up, on at 2 s, off at 12 s.
 * (the truth files go beside them as *.truth.json; each step names its leading mode, the oscillating
 * mode with the largest growth rate over all modes, and the truth the first mode to go unstable). Both carry a room background of −52 dBFS
 * broadband (a phone in a lab or boiler room), about 50 dB under the limit cycle.
 */
import { writeFile } from 'node:fs/promises';
import { encodeWav } from '../io/wav-write';
import { renderScenario, type PowerStep, type RigEnds } from '../rig-sim';
import { CliError, EXIT, type CliIo } from './io';
import { failWith } from './modes';
import { HELP_OPTION, choiceOption, hasFlag, numberOption, optionsHelp, parseCommandArgs, parseNumberValue, quote, textOption, type OptionTable } from './options';

/** Options of `humgauge simulate` (the rig's own ranges are checked in dsp/rig-sim.ts). */
export const SIMULATE_OPTIONS: OptionTable = {
  out: { kind: 'text', value: 'FILE', help: 'output WAV (required)' },
  truth: { kind: 'text', value: 'FILE', help: 'truth JSON (default: FILE with .truth.json)' },
  length: { kind: 'number', value: 'M', unit: 'm', help: 'tube length, m (default 1)' },
  diameter: { kind: 'number', value: 'M', unit: 'm', min: 0, isMinExclusive: true, help: 'inner diameter, m (recorded in the truth; default 0.035)' },
  ends: {
    kind: 'choice',
    value: 'KIND',
    choices: ['open-open', 'closed-open'],
    aliases: { 'open-closed': 'closed-open' },
    help: 'open-open (default, a bench tube) or closed-open (a flue closed at\nthe lower end; open-closed is the same, as in humgauge modes)',
  },
  temp: { kind: 'number', value: 'C', unit: '°C', help: 'mean gas temperature, °C (default 20)' },
  heater: { kind: 'number', value: 'M', unit: 'm', help: 'heater position from the lower end, m (default a quarter of the length)' },
  // Heat-release lags of flames and heated gauzes are fractions of an acoustic period (ms); a second is far past any.
  'lag-ms': { kind: 'number', value: 'MS', unit: 'ms', min: 0, isMinExclusive: true, max: 1000, help: 'heat-release time lag, ms (default 0.2 L/c; at most 1000)' },
  modes: { kind: 'number', value: 'N', unit: '', help: 'Galerkin modes (default 10)' },
  steps: { kind: 'text', value: 'LIST', help: 'heater-power schedule "t_s:K,t_s:K,...", K dimensionless\n(default 0:0,3:0.8,13:0)' },
  duration: { kind: 'number', value: 'S', unit: 's', min: 0, isMinExclusive: true, max: 3600, help: 'simulated time, s (default 17.5, at most 3600)' },
  silence: { kind: 'number', value: 'S', unit: 's', min: 0, max: 60, help: 'trailing exact zeros, s (default 0.5)' },
  // Microphone rates: the rig's ten modes reach about 1.7 kHz, which must stay below half the rate.
  rate: { kind: 'number', value: 'HZ', unit: 'Hz', min: 8000, max: 192000, isInteger: true, help: 'sample rate, Hz (default 16000; 8000 to 192000)' },
  // Below −200 dBFS a 16-bit file holds no trace of the noise: −inf says "none" plainly.
  'noise-dbfs': { kind: 'number', value: 'DB', unit: 'dBFS', min: -200, max: 0, acceptsMinusInfinity: true, help: 'white measurement noise, dBFS (default -60; -inf for none)' },
  peak: { kind: 'number', value: 'LEVEL', unit: '', help: 'largest sample, full scale = 1 (default 0.5)' },
  mic: { kind: 'number', value: 'M', unit: 'm', help: 'microphone position from the lower end, m (default 0.9 L; closed end for a flue)' },
  // The modal amplitudes are in units of the mean flow velocity, where King's law saturates
  // (u' ~ 1/3): forcing of that order is no longer flow noise but the driving itself.
  excitation: { kind: 'number', value: 'X', unit: '', min: 0, max: 0.1, help: 'RMS of the random modal forcing (flow noise), dimensionless,\n0 to 0.1 (default 2e-5)' },
  seed: { kind: 'number', value: 'N', unit: '', min: 0, max: 2 ** 32 - 1, isInteger: true, help: 'random seed, a whole number (default 1)' },
  help: HELP_OPTION,
};

export const SIMULATE_HELP = `Usage: humgauge simulate --out FILE.wav [options]

Simulates a heated tube (Galerkin acoustic modes, a compact heater with a
time-lagged King's-law heat release, modal damping) while the heater power is
switched, and writes the microphone signal as a mono 16-bit WAV plus its truth
as JSON (FILE.truth.json): for each power step the leading mode (the one that
grows fastest, or decays slowest, of all modes) with its linear growth rate
(1/s) and frequency (Hz) from the model's characteristic equation, the decay
rate when the power drops, and the power at which the first mode turns unstable.

Options
${optionsHelp(SIMULATE_OPTIONS)}
Example
  humgauge simulate --steps 0:0,2:0.9,10:0 --duration 14 --out rig.wav
`;

/** A step's time: within the longest simulation (--duration). */
const STEP_TIME = { unit: 's', min: 0, max: 3600 };
/**
 * A step's heater power K (dimensionless): onset lies near K ≈ 0.5-1 for the bench tube and the
 * truth searches the critical power up to K = 10; 100 bounds it well beyond any rig.
 */
const STEP_POWER = { unit: '', min: 0, max: 100 };

/** Parses "t:K,t:K" into power steps (numbers by the shared option rules). */
export function parseSteps(text: string): PowerStep[] {
  const steps: PowerStep[] = [];
  for (const part of text.split(',')) {
    const m = /^\s*([^:]+):([^:]+)\s*$/.exec(part);
    if (!m) throw new CliError(`--steps: "${quote(part)}" is not "time_s:power"`, EXIT.USAGE);
    const atS = parseNumberValue('--steps time', m[1].trim(), STEP_TIME);
    const heaterPower = parseNumberValue('--steps power', m[2].trim(), STEP_POWER);
    if (steps.length > 0 && atS <= steps[steps.length - 1].atS) throw new CliError('--steps: times must increase', EXIT.BAD_PARAMETER);
    steps.push({ atS, heaterPower });
  }
  return steps;
}

/** Writes one output file; a failure names that file and the option that chose it. */
async function writeOutput(path: string, option: string, data: Uint8Array | string): Promise<void> {
  try {
    await writeFile(path, data);
  } catch (e) {
    throw new CliError(`cannot write ${path} (${option}): ${(e as { code?: string }).code ?? (e as Error).message}`, EXIT.WRITE_FAILED);
  }
}

/** Runs `humgauge simulate`; returns the exit code. */
export async function runSimulate(args: string[], io: CliIo): Promise<number> {
  try {
    const o = parseCommandArgs('simulate', SIMULATE_OPTIONS, args);
    if (o.positionals.length > 0) throw new CliError(`unexpected argument "${quote(o.positionals[0])}" (see humgauge simulate --help)`, EXIT.USAGE);
    if (hasFlag(o, 'help')) {
      io.out(SIMULATE_HELP);
      return EXIT.OK;
    }
    const out = textOption(o, 'out');
    if (out === undefined) throw new CliError('--out is required (the WAV file to write)', EXIT.USAGE);
    const lengthM = numberOption(o, 'length') ?? 1;
    const diameterM = numberOption(o, 'diameter') ?? 0.035;
    const ends = choiceOption<RigEnds>(o, 'ends', 'open-open');
    const gasTemperatureC = numberOption(o, 'temp') ?? 20;
    const heaterPositionM = numberOption(o, 'heater') ?? lengthM / 4;
    const lagMs = numberOption(o, 'lag-ms');
    const modeCount = numberOption(o, 'modes') ?? 10;
    const durationS = numberOption(o, 'duration') ?? 17.5;
    const silenceS = numberOption(o, 'silence') ?? 0.5;
    const rateHz = numberOption(o, 'rate') ?? 16000;
    const noiseDbfs = numberOption(o, 'noise-dbfs') ?? -60;
    const peakLevel = numberOption(o, 'peak') ?? 0.5;
    const micPositionM = numberOption(o, 'mic');
    const seed = numberOption(o, 'seed') ?? 1;
    const excitationRms = numberOption(o, 'excitation') ?? 2e-5;
    const schedule = parseSteps(textOption(o, 'steps') ?? '0:0,3:0.8,13:0');
    const { samples, truth } = renderScenario({
      params: { lengthM, gasTemperatureC, ends, heaterPositionM, modeCount, ...(lagMs !== undefined ? { heatLagS: lagMs / 1000 } : {}) },
      schedule,
      durationS,
      sampleRateHz: rateHz,
      silenceS,
      noiseDbfs,
      peakLevel,
      micPositionM,
      excitationRms,
      seed,
    });
    const truthPath = textOption(o, 'truth') ?? out.replace(/\.wav$/i, '') + '.truth.json';
    const wav = encodeWav(samples, rateHz, 'pcm16');
    await writeOutput(out, '--out', wav);
    await writeOutput(truthPath, textOption(o, 'truth') !== undefined ? '--truth' : 'the truth file', JSON.stringify({ ...truth, diameterM, noiseDbfs: Number.isFinite(noiseDbfs) ? noiseDbfs : null }, null, 2) + '\n');
    const lines = [`wrote ${out} (${(samples.length / rateHz).toFixed(2)} s, ${rateHz} Hz, 16-bit mono) and ${truthPath}`];
    for (const st of truth.steps) {
      const rate = st.growthRatePerS;
      lines.push(
        `  from ${st.atS.toFixed(2)} s, K = ${st.heaterPower}: mode ${st.mode} ${st.frequencyHz.toFixed(2)} Hz, ${rate >= 0 ? 'grows' : 'decays'} at ${Math.abs(rate).toFixed(3)} 1/s` +
          (st.limitCycle ? `; limit cycle ${st.limitCycle.frequencyHz.toFixed(2)} Hz at ${st.limitCycle.amplitudeDbfs.toFixed(1)} dBFS` : ''),
      );
    }
    io.out(lines.join('\n') + '\n');
    return EXIT.OK;
  } catch (e) {
    return failWith(e, io, 'simulate');
  }
}
