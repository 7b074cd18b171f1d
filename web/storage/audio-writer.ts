/**
 * The raw-audio half of a session recording: blocks are held, then written to the `audio` store in
 * chunks of at most a second, each put awaited before the next, in one transaction with the
 * session record's audio counters. The track half (recorder.ts) writes the same record: each side
 * reads the stored record inside its own transaction and changes only its own fields (here the
 * sample and chunk counts and the duration they imply), so neither undoes the other.
 *
 * The app runs it in a worker of its own (audio.worker.ts, through createAudioSink in
 * off-thread.ts): copying seconds of audio into IndexedDB costs milliseconds per second of audio,
 * and a file analysed at a hundred times real time delivers a hundred seconds a second.
 */
import type { SessionDb, SessionRecord } from './db';

export interface AudioWriter {
  /** Holds a block for the next flush; the writer keeps the block (the caller no longer writes to it). */
  append(block: Float32Array): void;
  /** Writes what is held; rejects with the browser's error when the write fails (nothing of it stays). */
  flush(): Promise<void>;
  /** Lets go of what is held and refuses further blocks; resolves once no write is under way. */
  drop(): Promise<void>;
}

/**
 * Joins blocks into consecutive chunks of at most `maxSamples` (every chunk full but the last). A
 * block that fills its own buffer and starts a chunk is stored as it is when it fills the chunk or
 * ends the input (no copy: the analysis worker hands over whole one-second chunks).
 */
export function secondChunks(blocks: readonly Float32Array[], maxSamples: number): Float32Array[] {
  let total = 0;
  for (const b of blocks) total += b.length;
  const out: Float32Array[] = [];
  let current: Float32Array | null = null;
  let filled = 0;
  for (const b of blocks) {
    if (current === null && b.byteOffset === 0 && b.byteLength === b.buffer.byteLength && (b.length === maxSamples || (b.length === total && total <= maxSamples))) {
      if (b.length > 0) out.push(b);
      total -= b.length;
      continue;
    }
    let at = 0;
    while (at < b.length) {
      current ??= new Float32Array(Math.min(maxSamples, total));
      const n = Math.min(b.length - at, current.length - filled);
      current.set(b.subarray(at, at + n), filled);
      filled += n;
      at += n;
      total -= n;
      if (filled === current.length) {
        out.push(current);
        current = null;
        filled = 0;
      }
    }
  }
  return out;
}

/** Aborts a failed transaction and silences the rejections of what it held. */
export function abandon(tx: { abort(): void; done: Promise<void> }, writes: Promise<unknown>[]): void {
  try {
    tx.abort();
  } catch {
    /* already aborted by the browser */
  }
  tx.done.catch(() => undefined);
  for (const w of writes) w.catch(() => undefined);
}

/**
 * A writer for session `sessionId`, recorded at `sampleRateHz`; `connect` gives the connection to
 * write with (asked before every write, so one the browser closed after a failure is replaced).
 */
export function createAudioWriter(sessionId: string, sampleRateHz: number, connect: () => Promise<SessionDb>): AudioWriter {
  let pending: Float32Array[] = [];
  let isDropped = false;
  let chain: Promise<unknown> = Promise.resolve();
  const chunkSamples = Math.max(1, Math.round(sampleRateHz));

  const write = async (): Promise<void> => {
    const blocks = pending;
    pending = [];
    if (isDropped || blocks.length === 0) return;
    const db = await connect();
    const chunks = secondChunks(blocks, chunkSamples);
    const writes: Promise<unknown>[] = [];
    const tx = db.transaction(['sessions', 'audio'], 'readwrite');
    try {
      const sessions = tx.objectStore('sessions');
      const stored = await sessions.get(sessionId);
      if (!stored) throw new Error('the session record is missing');
      let sampleCount = stored.audio.sampleCount;
      let chunkCount = stored.audio.chunkCount;
      for (const samples of chunks) {
        const put = tx.objectStore('audio').put({ sessionId, seq: chunkCount++, startSample: sampleCount, samples });
        writes.push(put);
        sampleCount += samples.length;
        await put;
      }
      const next: SessionRecord = { ...stored, audio: { ...stored.audio, sampleCount, chunkCount }, durationS: Math.max(stored.durationS, sampleCount / sampleRateHz) };
      writes.push(sessions.put(next));
      await Promise.all([...writes, tx.done]);
    } catch (err) {
      abandon(tx, writes);
      throw err;
    }
  };

  return {
    append(block) {
      if (!isDropped && block.length > 0) pending.push(block);
    },
    flush() {
      const run = chain.then(write);
      chain = run.catch(() => undefined);
      return run;
    },
    drop() {
      isDropped = true;
      pending = [];
      return chain.then(() => undefined);
    },
  };
}
