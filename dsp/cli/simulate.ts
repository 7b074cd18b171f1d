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
import { choiceOption, failWith, numberOption, parseOptions } from './modes';
import { CliError, EXIT, type CliIo } from './io';

export const SIMULATE_HELP = `Usage: humgauge simulate --out FILE.wav [options]

Simulates a heated tube (Galerkin acoustic modes, a compact heater with a
time-lagged King's-law heat release, modal damping) while the heater power is
switched, and writes the microphone signal as a mono 16-bit WAV plus its truth
as JSON (FILE.truth.json): for each power step the leading mode (the one that
grows fastest, or decays slowest, of all modes) with its linear growth rate
(1/s) and frequency (Hz) from the model's characteristic equation, the decay
rate when the power drops, and the power at which the first mode turns unstable.

Options
  --out FILE          output WAV (required)
  --truth FILE        truth JSON (default: FILE with .truth.json)
  --length M          tube length, m (default 1)
  --diameter M        inner diameter, m (recorded in the truth; default 0.035)
  --ends KIND         open-open (default, a bench tube) or closed-open (a flue)
  --temp C            mean gas temperature, °C (default 20)
  --heater M          heater position from the lower end, m (default a quarter of the length)
  --lag-ms MS         heat-release time lag, ms (default 0.2 L/c)
  --modes N           Galerkin modes (default 10)
  --steps LIST        heater-power schedule "t_s:K,t_s:K,...", K dimensionless
                      (default 0:0,3:0.8,13:0)
  --duration S        simulated time, s (default 17.5); 0.5 s of exact zeros follow
  --silence S         trailing zeros, s (default 0.5)
  --rate HZ           sample rate, Hz (default 16000)
  --noise-dbfs DB     white measurement noise, dBFS (default -60; -inf for none)
  --peak LEVEL        largest sample, full scale = 1 (default 0.5)
  --mic M             microphone position from the lower end, m (default 0.9 L; closed end for a flue)
  --excitation X      RMS of the random modal forcing (flow noise), dimensionless (default 2e-5)
  --seed N            random seed (default 1)
  -h, --help          this text

Example
  humgauge simulate --steps 0:0,2:0.9,10:0 --duration 14 --out rig.wav
`;

/** Parses "t:K,t:K" into power steps. */
export function parseSteps(text: string): PowerStep[] {
  const steps: PowerStep[] = [];
  for (const part of text.split(',')) {
    const m = /^\s*([^:]+):([^:]+)\s*$/.exec(part);
    const atS = m ? Number(m[1]) : Number.NaN;
    const heaterPower = m ? Number(m[2]) : Number.NaN;
    if (!m || !Number.isFinite(atS) || !Number.isFinite(heaterPower)) throw new CliError(`--steps: "${part}" is not "time_s:power"`, EXIT.BAD_PARAMETER);
    if (atS < 0) throw new CliError(`--steps: time must be ≥ 0 s, got ${atS}`, EXIT.BAD_PARAMETER);
    if (heaterPower < 0) throw new CliError(`--steps: heater power must be ≥ 0, got ${heaterPower}`, EXIT.BAD_PARAMETER);
    if (steps.length > 0 && atS <= steps[steps.length - 1].atS) throw new CliError('--steps: times must increase', EXIT.BAD_PARAMETER);
    steps.push({ atS, heaterPower });
  }
  return steps;
}

const KNOWN = ['out', 'truth', 'length', 'diameter', 'ends', 'temp', 'heater', 'lag-ms', 'modes', 'steps', 'duration', 'silence', 'rate', 'noise-dbfs', 'peak', 'mic', 'seed', 'excitation'];

/** Runs `humgauge simulate`; returns the exit code. */
export async function runSimulate(args: string[], io: CliIo): Promise<number> {
  try {
    const o = parseOptions(args, KNOWN, []);
    if (o.has('help')) {
      io.out(SIMULATE_HELP);
      return EXIT.OK;
    }
    const out = o.get('out');
    if (out === undefined) throw new CliError('--out is required (the WAV file to write)', EXIT.USAGE);
    const lengthM = numberOption(o, 'length', 'm') ?? 1;
    const diameterM = numberOption(o, 'diameter', 'm') ?? 0.035;
    if (!(diameterM > 0)) throw new CliError(`--diameter must be a positive number of m, got ${diameterM}`, EXIT.BAD_PARAMETER);
    const ends = choiceOption(o, 'ends', ['open-open', 'closed-open'] as const, 'open-open') as RigEnds;
    const gasTemperatureC = numberOption(o, 'temp', '°C') ?? 20;
    const heaterPositionM = numberOption(o, 'heater', 'm') ?? lengthM / 4;
    const lagMs = numberOption(o, 'lag-ms', 'ms');
    const modeCount = numberOption(o, 'modes', '') ?? 10;
    const durationS = numberOption(o, 'duration', 's') ?? 17.5;
    const silenceS = numberOption(o, 'silence', 's') ?? 0.5;
    const rateHz = numberOption(o, 'rate', 'Hz') ?? 16000;
    if (!Number.isInteger(rateHz) || rateHz < 8000 || rateHz > 192000) throw new CliError(`--rate must be a whole number of Hz from 8000 to 192000, got ${rateHz}`, EXIT.BAD_PARAMETER);
    const noiseRaw = o.get('noise-dbfs');
    const noiseDbfs = noiseRaw !== undefined && /^-inf(inity)?$/i.test(noiseRaw) ? -Infinity : (numberOption(o, 'noise-dbfs', 'dBFS') ?? -60);
    const peakLevel = numberOption(o, 'peak', '') ?? 0.5;
    const micPositionM = numberOption(o, 'mic', 'm');
    const seed = numberOption(o, 'seed', '') ?? 1;
    const excitationRms = numberOption(o, 'excitation', '') ?? 2e-5;
    if (excitationRms < 0) throw new CliError(`--excitation must be ≥ 0, got ${excitationRms}`, EXIT.BAD_PARAMETER);
    if (!Number.isInteger(seed)) throw new CliError(`--seed must be a whole number, got ${seed}`, EXIT.BAD_PARAMETER);
    const schedule = parseSteps(o.get('steps') ?? '0:0,3:0.8,13:0');
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
    const truthPath = o.get('truth') ?? out.replace(/\.wav$/i, '') + '.truth.json';
    const wav = encodeWav(samples, rateHz, 'pcm16');
    try {
      await writeFile(out, wav);
      await writeFile(truthPath, JSON.stringify({ ...truth, diameterM, noiseDbfs: Number.isFinite(noiseDbfs) ? noiseDbfs : null }, null, 2) + '\n');
    } catch (e) {
      throw new CliError(`cannot write ${out} (${(e as { code?: string }).code ?? (e as Error).message})`, EXIT.WRITE_FAILED);
    }
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
    return failWith(e, io, 'simulate', {
      lengthM: '--length',
      gasTemperatureC: '--temp',
      heaterPositionM: '--heater',
      modeCount: '--modes',
      durationS: '--duration',
      silenceS: '--silence',
      peakLevel: '--peak',
      micPositionM: '--mic',
      noiseDbfs: '--noise-dbfs',
      excitationRms: '--excitation',
      sampleRateHz: '--rate',
    });
  }
}
