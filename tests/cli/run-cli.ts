import type { CliIo } from '../../dsp/cli/io';
import { main } from '../../dsp/cli/humgauge';

/** What one command-line run printed and returned. */
export interface Captured {
  code: number;
  out: string;
  err: string;
}

/** Runs the command line in-process with `args`, capturing stdout and stderr (`isErrTty`: stderr is a terminal). */
export async function runCli(args: string[], isErrTty = false): Promise<Captured> {
  let out = '';
  let err = '';
  const io: CliIo = { out: (t) => void (out += t), err: (t) => void (err += t), isErrTty };
  const code = await main(args, io);
  return { code, out, err };
}
