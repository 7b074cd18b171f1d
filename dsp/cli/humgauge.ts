/**
 * The `humgauge` command: dispatches to `analyze`, `modes` and `simulate`. Bundled into
 * dist-cli/humgauge.js (vite.cli.config.ts); runs when executed directly, not when imported.
 */

import { realpathSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { ANALYZE_HELP, reportFailure, runAnalyze } from './analyze';
import { CliError, EXIT, processIo, type CliIo } from './io';
import { runModes } from './modes';
import { runSimulate } from './simulate';

/** Version shown by --version (package.json "version"). */
export const VERSION = '0.1.0';

/** Text of `humgauge --help`: commands, the analyze options, the exit codes. */
export const MAIN_HELP = `humgauge ${VERSION} - thermoacoustic hum analyser

Usage
  humgauge analyze FILE... [options]  tones, onsets, growth/decay rates with 95 % intervals
  humgauge modes [options]            duct mode frequencies, mode identification
  humgauge simulate [options]         heated-tube simulator, writes a demo WAV
  humgauge COMMAND --help             options of one command
  humgauge --version

${ANALYZE_HELP.replace(/^Usage: /, 'analyze: ')}
Exit codes
  0  success
  1  internal error (please report it)
  2  usage error (unknown command or option, no input file given, malformed option value:
     numbers are decimal, e.g. -40 or 2.5e-3, not 0x10 or 1,2)
  3  file cannot be read (missing, no permission, a directory)
  4  empty or truncated file
  5  broken RIFF/WAVE header, or neither WAV nor CSV
  6  unsupported encoding (A-law, µ-law, ADPCM, other format tags, rate outside 0.5-192 kHz)
  7  NaN or infinite samples (or values past the 32-bit float range), WAV or CSV
  8  too short (under 0.5 s)
  9  silent (all zeros, or peak below -90 dBFS; a constant CSV)
  10 unreadable CSV line (text in a number field, missing value, time not rising, irregular steps)
  11 parameter outside its physical range, or not fitting the input (channel the file
     lacks, band above half the rate)
  12 a computation did not converge (modes)
  13 output could not be written (simulate --out, analyze --summary/--json-dir)
  14 several files: at least one failed (its row in the summary names the problem)
`;

/** Runs the command line with `args` (process.argv without node and script); returns the exit code. */
export async function main(args: string[], io: CliIo): Promise<number> {
  const [command, ...rest] = args;
  try {
    switch (command) {
      case undefined:
        io.err(`humgauge: no command given\n\n${MAIN_HELP}`);
        return EXIT.USAGE;
      case '-h':
      case '--help':
      case 'help':
        io.out(MAIN_HELP);
        return EXIT.OK;
      case '-V':
      case '--version':
        io.out(`humgauge ${VERSION}\n`);
        return EXIT.OK;
      case 'analyze':
      case 'analyse':
        return await runAnalyze(rest, io);
      case 'modes':
        return await runModes(rest, io);
      case 'simulate':
        return await runSimulate(rest, io);
      default:
        throw new CliError(`unknown command "${command}" (commands: analyze, modes, simulate; see humgauge --help)`, EXIT.USAGE);
    }
  } catch (e) {
    return reportFailure(e, io, 'humgauge');
  }
}

function isEntryPoint(): boolean {
  const script = process.argv[1];
  if (!script) return false;
  try {
    return realpathSync(script) === realpathSync(fileURLToPath(import.meta.url));
  } catch {
    return false;
  }
}

if (isEntryPoint()) {
  const io = processIo();
  // A closed pipe (e.g. `| head`) ends the output quietly.
  process.stdout.on('error', (e: NodeJS.ErrnoException) => {
    if (e.code === 'EPIPE') process.exit(EXIT.OK);
    process.stderr.write(`humgauge: cannot write the output: ${e.message}\n`);
    process.exit(EXIT.WRITE_FAILED);
  });
  main(process.argv.slice(2), io).then(
    (code) => {
      process.exitCode = code;
    },
    (e: unknown) => {
      process.stderr.write(`humgauge: internal error: ${e instanceof Error ? e.message : String(e)}\n`);
      process.exitCode = EXIT.INTERNAL;
    },
  );
}
