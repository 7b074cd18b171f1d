/**
 * File access for the command line (Node): opening with clear messages, sniffing the kind of file,
 * and streaming its bytes in fixed-size pieces so any length is read in bounded memory.
 */

import { createReadStream } from 'node:fs';
import { open, stat } from 'node:fs/promises';
import { extname } from 'node:path';
import type { Readable } from 'node:stream';
import { CliError, EXIT } from './io';

/** Bytes per read: large enough to amortise system calls, small enough to keep memory flat. */
export const CHUNK_BYTES = 1 << 16;

export type InputKind = 'wav' | 'csv';

/** Turns a Node file-system error into a one-line message with the UNREADABLE exit code. */
export function fsProblem(e: unknown): CliError {
  const code = (e as { code?: string }).code;
  const text =
    code === 'ENOENT'
      ? 'no such file'
      : code === 'EACCES' || code === 'EPERM'
        ? 'permission denied'
        : code === 'EISDIR'
          ? 'is a directory, not a file'
          : `cannot be read (${code ?? (e as Error).message})`;
  return new CliError(text, EXIT.UNREADABLE);
}

/** Size in bytes of a regular file; throws CliError(UNREADABLE) for a missing file or a directory. */
export async function fileSize(path: string): Promise<number> {
  try {
    const s = await stat(path);
    if (s.isDirectory()) throw Object.assign(new Error('directory'), { code: 'EISDIR' });
    return s.size;
  } catch (e) {
    throw fsProblem(e);
  }
}

/**
 * Decides WAV or CSV from the first bytes (RIFF/RF64/RIFX magic) and, failing that, from the name.
 * Anything else with NUL bytes is neither; text goes to the CSV reader, which says what is wrong.
 */
export async function sniffKind(path: string): Promise<InputKind> {
  let head: Uint8Array;
  try {
    const fh = await open(path, 'r');
    try {
      const buf = new Uint8Array(512);
      const { bytesRead } = await fh.read(buf, 0, buf.length, 0);
      head = buf.subarray(0, bytesRead);
    } finally {
      await fh.close();
    }
  } catch (e) {
    throw fsProblem(e);
  }
  return kindFromHead(head, path);
}

/** WAV from the RIFF/RF64/RIFX magic, else from the name; text goes to the CSV reader. */
function kindFromHead(head: Uint8Array, path: string): InputKind {
  const magic = String.fromCharCode(...head.subarray(0, 4));
  if (magic === 'RIFF' || magic === 'RF64' || magic === 'RIFX') return 'wav';
  const ext = extname(path).toLowerCase();
  if (ext === '.wav' || ext === '.wave') return 'wav';
  if (ext === '.csv' || ext === '.txt' || ext === '.tsv' || ext === '.dat') return 'csv';
  if (head.includes(0)) {
    throw new CliError('neither a WAV file (no RIFF header) nor a CSV text file', EXIT.BAD_HEADER);
  }
  return 'csv';
}

/** Streams the file's bytes in pieces of CHUNK_BYTES (one buffer, reused: consume each piece before the next). */
export async function* readChunks(path: string, chunkBytes = CHUNK_BYTES): AsyncGenerator<Uint8Array> {
  let fh;
  try {
    fh = await open(path, 'r');
  } catch (e) {
    throw fsProblem(e);
  }
  try {
    const buf = new Uint8Array(chunkBytes);
    for (;;) {
      let bytesRead: number;
      try {
        ({ bytesRead } = await fh.read(buf, 0, chunkBytes, null));
      } catch (e) {
        throw fsProblem(e);
      }
      if (bytesRead === 0) return;
      yield buf.subarray(0, bytesRead);
    }
  } finally {
    await fh.close();
  }
}

/**
 * An input opened for reading: a regular file (known size, can be read again) or a stream
 * (standard input as "-", a pipe, `<(…)`, a device), read once from the start.
 */
export interface Input {
  path: string;
  kind: InputKind;
  /** Size in bytes of a regular file; null for a stream. */
  size: number | null;
  /** The bytes from the start, in pieces (each valid until the next is asked for). */
  chunks(): AsyncGenerator<Uint8Array>;
}

/** Opens `path` ("-" = standard input); sniffs WAV or CSV from the first bytes. Throws CliError. */
export async function openInput(path: string, stdin: () => Readable = () => process.stdin): Promise<Input> {
  if (path !== '-') {
    let st;
    try {
      st = await stat(path);
    } catch (e) {
      throw fsProblem(e);
    }
    if (st.isDirectory()) throw fsProblem(Object.assign(new Error('directory'), { code: 'EISDIR' }));
    // /proc files say size 0 but hold text: read those, like pipes, as streams.
    if (st.isFile() && st.size > 0) {
      const kind = await sniffKind(path);
      return { path, kind, size: st.size, chunks: () => readChunks(path) };
    }
  }
  const stream = path === '-' ? stdin() : createReadStream(path, { highWaterMark: CHUNK_BYTES });
  const it = streamChunks(stream);
  // The first bytes decide the kind; they are handed out again as the first piece.
  const head: Uint8Array[] = [];
  let headBytes = 0;
  let done = false;
  while (headBytes < 512) {
    const r = await it.next();
    if (r.done) {
      done = true;
      break;
    }
    head.push(Uint8Array.from(r.value));
    headBytes += r.value.length;
  }
  const first = concat(head);
  const kind = kindFromHead(first, path === '-' ? '' : path);
  let used = false;
  return {
    path,
    kind,
    size: null,
    chunks: async function* () {
      if (used) throw new CliError('a stream can be read only once', EXIT.INTERNAL);
      used = true;
      if (first.length > 0) yield first;
      if (done) return;
      for (;;) {
        const r = await it.next();
        if (r.done) return;
        yield r.value;
      }
    },
  };
}

async function* streamChunks(stream: Readable): AsyncGenerator<Uint8Array> {
  try {
    for await (const c of stream) yield c as Uint8Array;
  } catch (e) {
    throw fsProblem(e);
  }
}

/** The bytes of `parts` one after another, in a new array. */
export function concat(parts: readonly Uint8Array[]): Uint8Array {
  const out = new Uint8Array(parts.reduce((n, p) => n + p.length, 0));
  let o = 0;
  for (const p of parts) {
    out.set(p, o);
    o += p.length;
  }
  return out;
}
