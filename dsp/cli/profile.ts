/**
 * Reader of a temperature profile for `humgauge modes --profile FILE`: CSV lines "x_m,temp_c"
 * (an optional header line, '#' comments, ',' ';' or tab between the two numbers), streamed so a
 * huge or one-line file is refused after a bounded read, with at most 80 characters of a bad line
 * quoted in the one-line message.
 */

import type { ProfilePoint } from '../duct';
import { CliError, EXIT } from './io';
import { quote } from './options';
import { openInput } from './read-file';

/** Longest profile line read, bytes ("x_m,temp_c" with comments fits many times over). */
export const PROFILE_MAX_LINE_BYTES = 1024;
/** Most points taken: far beyond a measured profile (thermocouples every few cm of a long duct). */
export const PROFILE_MAX_POINTS = 100_000;

/** Incremental parser: push bytes, then end() for the points. Throws CliError(BAD_CSV) naming the line. */
export function createProfileParser(): { push(bytes: Uint8Array): void; end(): ProfilePoint[] } {
  const points: ProfilePoint[] = [];
  const decoder = new TextDecoder('utf-8');
  let line = '';
  let lineNo = 0;
  const take = (raw: string): void => {
    lineNo++;
    const text = raw.trim();
    if (text === '' || text.startsWith('#')) return;
    const cells = text.split(/[,;\t]/).map((c) => c.trim());
    if (cells.length < 2) throw new CliError(`profile line ${lineNo}: expected "x_m,temp_c", got "${quote(text)}"`, EXIT.BAD_CSV);
    const x = Number(cells[0]);
    const t = Number(cells[1]);
    if (!Number.isFinite(x) || !Number.isFinite(t) || cells[0] === '' || cells[1] === '') {
      if (points.length === 0 && Number.isNaN(x)) return; // header line
      throw new CliError(`profile line ${lineNo}: "${quote(text)}" is not two numbers`, EXIT.BAD_CSV);
    }
    if (points.length >= PROFILE_MAX_POINTS) throw new CliError(`profile: more than ${PROFILE_MAX_POINTS} points`, EXIT.BAD_CSV);
    points.push({ xM: x, temperatureC: t });
  };
  return {
    push(bytes: Uint8Array): void {
      const parts = decoder.decode(bytes, { stream: true }).split('\n');
      for (let i = 0; i < parts.length; i++) {
        line += parts[i];
        if (line.length > PROFILE_MAX_LINE_BYTES) {
          throw new CliError(`profile line ${lineNo + 1}: longer than ${PROFILE_MAX_LINE_BYTES} characters, starting "${quote(line.trim())}"`, EXIT.BAD_CSV);
        }
        if (i < parts.length - 1) {
          take(line.replace(/\r$/, ''));
          line = '';
        }
      }
    },
    end(): ProfilePoint[] {
      line += decoder.decode();
      if (line !== '') take(line.replace(/\r$/, ''));
      if (points.length === 0) throw new CliError('profile: no data rows (expected lines "x_m,temp_c")', EXIT.BAD_CSV);
      return points;
    },
  };
}

/** Parses a whole profile held in memory (tests, small texts). */
export function parseProfileCsv(text: string): ProfilePoint[] {
  const p = createProfileParser();
  p.push(new TextEncoder().encode(text));
  return p.end();
}

/** Streams the profile file ("-" = standard input); UNREADABLE names the file. */
export async function readProfile(path: string): Promise<ProfilePoint[]> {
  let input;
  try {
    input = await openInput(path);
  } catch (e) {
    if (e instanceof CliError) throw new CliError(`--profile ${path}: ${e.message}`, e.exitCode);
    throw e;
  }
  const p = createProfileParser();
  for await (const chunk of input.chunks()) p.push(chunk);
  return p.end();
}
