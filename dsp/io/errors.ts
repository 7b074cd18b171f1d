/**
 * Errors of the file readers (WAV, CSV). Each carries a code naming the kind of problem, so the
 * command line can map it to a distinct exit code and the app to a clear message. Pure: no Node,
 * no DOM.
 */

export type InputProblem =
  /** Zero bytes, or the file ends before any sample data. */
  | 'empty-or-truncated'
  /** RIFF/WAVE structure broken (wrong magic, fmt chunk missing or malformed). */
  | 'bad-header'
  /** A WAV encoding the reader does not decode (A-law, µ-law, ADPCM, ...). */
  | 'unsupported-encoding'
  /** NaN or infinite sample values. */
  | 'bad-samples'
  /** Shorter than the minimum duration an analysis needs. */
  | 'too-short'
  /** All zeros, or below the silence floor. */
  | 'silent'
  /** A CSV line that cannot be read (text in a number field, missing value, time steps). */
  | 'bad-csv'
  /** A reader option that does not fit the file (e.g. channel 3 of a stereo file). */
  | 'bad-parameter';

/** A problem with the input file; `message` is one line meant for the user. */
export class InputError extends Error {
  constructor(
    readonly problem: InputProblem,
    message: string,
  ) {
    super(message);
    this.name = 'InputError';
  }
}

/** Shortest input the analysis accepts, s (an onset and a rate need several envelope time constants). */
export const MIN_DURATION_S = 0.5;

/**
 * Peak level at or below which a WAV is called silent: −90 dBFS, about one step of 16-bit PCM
 * (2^−15 = −90.3 dBFS), so a file of zeros or of bare dither is refused.
 */
export const SILENCE_PEAK_FS = 10 ** (-90 / 20);

/** Throws the too-short error when fewer than MIN_DURATION_S of samples were read. */
export function checkDuration(frameCount: number, sampleRateHz: number, what: string): void {
  const durationS = frameCount / sampleRateHz;
  if (durationS < MIN_DURATION_S) {
    throw new InputError('too-short', `${what} holds ${formatDuration(durationS)} of samples; at least ${MIN_DURATION_S} s is needed`);
  }
}

function formatDuration(s: number): string {
  return s < 0.01 ? `${(s * 1000).toPrecision(2)} ms` : `${s.toPrecision(3)} s`;
}
