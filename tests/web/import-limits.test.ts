// Zip bombs and oversized files: refused from their declared sizes before anything is inflated,
// from the file size before anything is read, and while inflating when the headers lie; each with
// a message that says what is wrong (never "not valid JSON").
import { describe, expect, it } from 'vitest';
import { strFromU8, unzipSync, zipSync } from 'fflate';
import { buildBundle } from '../../web/storage/export';
import { SESSION_JSON_MAX_BYTES } from '../../web/storage/bundle-schema';
import { ImportError, readBundle } from '../../web/storage/import';
import { bytesSource, listZip } from '../../web/storage/zip-read';
import { sampleSession } from './export-sample';

const AT = Date.UTC(2026, 11, 2);

/** Sets the uncompressed size of `name` in its local header and its central record (APPNOTE 4.3.7 / 4.3.12: offsets 22 and 24). */
async function declareSize(zip: Uint8Array, name: string, size: number): Promise<Uint8Array> {
  const out = zip.slice();
  const dv = new DataView(out.buffer);
  const entry = (await listZip(bytesSource(out))).find((e) => e.name === name)!;
  dv.setUint32(entry.localOffset + 22, size, true);
  for (let p = 0; p + 46 < out.length; p++) {
    if (dv.getUint32(p, true) === 0x02014b50 && strFromU8(out.subarray(p + 46, p + 46 + name.length)) === name) dv.setUint32(p + 24, size, true);
  }
  return out;
}

/** A file-backed bundle that counts the bytes read from it (a Blob read slice by slice). */
function countingBlob(bytes: Uint8Array, declaredSize = bytes.length): { blob: Blob; bytesRead: () => number } {
  let read = 0;
  const blob = {
    size: declaredSize,
    slice(start: number, end: number) {
      const part = bytes.subarray(start, end);
      read += part.length;
      return { arrayBuffer: async () => part.slice().buffer };
    },
  } as unknown as Blob;
  return { blob, bytesRead: () => read };
}

const refusal = async (p: Promise<unknown>): Promise<string> => {
  const err = await p.then(() => null, (e: unknown) => e);
  expect(err).toBeInstanceOf(ImportError);
  return (err as Error).message;
};

describe('sizes are checked before reading and inflating', () => {
  it('a file larger than a bundle may be is refused from its size alone, without reading a byte', async () => {
    const { blob, bytesRead } = countingBlob(new Uint8Array(0), 1.2e9);
    const message = await refusal(readBundle(blob));
    expect(message).toMatch(/The file is 1\.2 GB, more than the 1\.1 GB a bundle may be/);
    expect(bytesRead()).toBe(0);
  });

  it('a session.json declaring 1 GB (a 1 MB bomb) is refused before inflating, naming the limit', async () => {
    // With a second of 48 kHz-like audio the file is far longer than the 64 kB end record that is always read.
    const s = sampleSession();
    s.audio = new Float32Array(1_000_000).map((_, i) => 0.1 * Math.sin(i / 5));
    const good = buildBundle([s], AT);
    const name = Object.keys(unzipSync(good)).find((n) => n.endsWith('session.json'))!;
    const bomb = await declareSize(good, name, 1e9);
    const { blob, bytesRead } = countingBlob(bomb);
    const message = await refusal(readBundle(blob));
    expect(message).toMatch(/session\.json would expand to 1\.0 GB, more than the 106\.8 MB the JSON of a session can need/);
    expect(message).not.toMatch(/JSON \(|not valid JSON/);
    // Only the end of the file (end record, directory, manifest) and a local header were read.
    expect(bytesRead()).toBeLessThan(100_000);
    expect(good.length).toBeGreaterThan(2_000_000);
  });

  it('the JSON limit holds two hours of track with room to spare', () => {
    // 2 h at 100 frames/s and 125 bytes/frame, plus 16 MiB (bundle-schema.ts): the measured hour is about 35 MB.
    expect(SESSION_JSON_MAX_BYTES).toBe(2 * 3600 * 100 * 125 + 16 * 1024 * 1024);
    expect(SESSION_JSON_MAX_BYTES).toBeGreaterThan(2 * 35e6);
  });

  it('a real bomb under the declared limit but lying about its size is stopped while inflating, at the declared size', async () => {
    // session.json padded with 200 MB of JSON whitespace deflates to ~200 kB; the headers claim 5000 bytes.
    const good = unzipSync(buildBundle([sampleSession({ withAudio: false })], AT));
    const name = Object.keys(good).find((n) => n.endsWith('session.json'))!;
    const padded = new Uint8Array(good[name].length + 200e6).fill(0x20);
    padded.set(good[name]);
    const bomb = await declareSize(zipSync({ ...good, [name]: padded }, { level: 6 }), name, 5000);
    expect(bomb.length).toBeLessThan(1.5e6);
    const message = await refusal(readBundle(bomb));
    expect(message).toMatch(/inflates beyond the 5000 bytes its header declares/);
  });

  it('an audio.wav whose size does not fit the session\'s sample count is refused before it is read', async () => {
    const s = sampleSession();
    const good = buildBundle([s], AT);
    const name = Object.keys(unzipSync(good)).find((n) => n.endsWith('audio.wav'))!;
    const message = await refusal(readBundle(await declareSize(good, name, 900e6)));
    expect(message).toMatch(new RegExp(`audio\\.wav would expand to 900000000 bytes, but ${s.audio!.length} samples of 16-bit or float audio take ${44 + 2 * s.audio!.length} or ${44 + 4 * s.audio!.length}`));
  });
});
