import 'fake-indexeddb/auto';
import { describe, expect, it } from 'vitest';
import { strFromU8, strToU8, unzipSync, zipSync, type Unzipped } from 'fflate';
import { openSessionDb, type SessionDb } from '../../web/storage/db';
import { buildBundle } from '../../web/storage/export';
import { importBundle, parseJsonSafely } from '../../web/storage/import';
import { bytesSource, DEFAULT_ZIP_LIMITS, listZip } from '../../web/storage/zip-read';
import { sampleSession } from './export-sample';
import { loadFullSession } from '../../web/storage/sessions';
import { cyclesOf, VERSION_1_MISSING } from '../../web/run/cycles';

let dbCount = 0;
const uniqueName = (): string => `humgauge-import-${process.pid}-${Date.now()}-${dbCount++}`;
const AT = Date.UTC(2026, 11, 1);

async function nothingWritten(db: SessionDb): Promise<void> {
  expect(await db.count('sessions')).toBe(0);
  expect(await db.count('frames')).toBe(0);
  expect(await db.count('audio')).toBe(0);
}

/** Imports into a fresh database, expecting a refusal whose message matches; checks nothing was written. */
async function expectRefused(bytes: Uint8Array, message: RegExp, limits = DEFAULT_ZIP_LIMITS): Promise<void> {
  const db = await openSessionDb({ name: uniqueName() });
  await expect(importBundle(db, bytes, limits)).rejects.toThrow(message);
  await nothingWritten(db);
  db.close();
}

/** A valid two-session bundle, unpacked, for editing. */
function unpacked(): { files: Unzipped; folders: string[] } {
  const files = unzipSync(buildBundle([sampleSession(), sampleSession({ id: 'second-0001', site: 'Boiler room' })], AT));
  const folders = JSON.parse(strFromU8(files['manifest.json'])).sessions.map((s: { folder: string }) => s.folder);
  return { files, folders };
}

/** Edits the session.json of the second session (as parsed JSON) and re-zips. */
function withSecondSession(edit: (json: Record<string, any>) => void): Uint8Array {
  const { files, folders } = unpacked();
  const name = `${folders[1]}/session.json`;
  const json = JSON.parse(strFromU8(files[name]));
  edit(json);
  files[name] = strToU8(JSON.stringify(json));
  return zipSync(files);
}

function withSecondSessionText(edit: (text: string) => string): Uint8Array {
  const { files, folders } = unpacked();
  const name = `${folders[1]}/session.json`;
  const before = strFromU8(files[name]);
  const after = edit(before);
  expect(after).not.toBe(before);
  files[name] = strToU8(after);
  return zipSync(files);
}

describe('a valid bundle imports', () => {
  it('writes both sessions', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const r = await importBundle(db, zipSync(unpacked().files));
    expect(r.imported).toHaveLength(2);
    db.close();
  });
});

describe('a bundle exported with a report of version 1 (before per-tone cycles) still imports', () => {
  it('imports it unchanged, and the cycle table rebuilds its cycles and says what it lacks', async () => {
    // A version-1 report: no cycles, no harmonics, no per-cycle medians, tones without cycles.
    const bytes = withSecondSession((json) => {
      const r = json.session.report;
      r.reportVersion = 1;
      r.tones = [{ frequencyHz: 171.2, isSteadyLine: false }];
      for (const k of Object.keys(r.summary)) if (/Cycle/.test(k)) delete r.summary[k];
      for (const s of r.segments) delete s.isImpulseResponse;
    });
    const db = await openSessionDb({ name: uniqueName() });
    const result = await importBundle(db, bytes);
    expect(result.imported).toHaveLength(2);
    const full = await loadFullSession(db, 'second-0001');
    expect(full?.record.report?.reportVersion).toBe(1);
    const rc = cyclesOf(full!.record.report!);
    expect(rc.missing).toEqual(VERSION_1_MISSING);
    expect(rc.tones.flatMap((t) => t.cycles).length).toBeGreaterThan(0);
    db.close();
  });
});

describe('broken or hostile zips are refused and nothing is written', () => {
  it('bytes that are not a zip', async () => {
    await expectRefused(new TextEncoder().encode('this is a text file, not a bundle at all'), /not a zip/);
  });

  it('a zip cut short', async () => {
    const good = buildBundle([sampleSession()], AT);
    await expectRefused(good.subarray(0, Math.floor(good.length * 0.6)), /not a zip|damaged/);
  });

  it('a member whose compressed data was altered (CRC-32 or inflate fails)', async () => {
    const bytes = buildBundle([sampleSession({ withAudio: false })], AT).slice();
    const entry = (await listZip(bytesSource(bytes))).find((e) => e.name.endsWith('session.json'))!;
    // Flip bytes in the middle of the deflate stream (30-byte local header plus the name precede the data).
    const mid = entry.localOffset + 30 + entry.name.length + Math.floor(entry.compressedSize / 2);
    for (let i = 0; i < 8; i++) bytes[mid + i] ^= 0x5a;
    await expectRefused(bytes, /damaged|CRC-32/);
  });

  it('a zip whose declared contents exceed the limit (checked before inflating)', async () => {
    const bytes = buildBundle([sampleSession()], AT);
    await expectRefused(bytes, /would expand to more than/, { ...DEFAULT_ZIP_LIMITS, maxTotalBytes: 100_000 });
    await expectRefused(bytes, /more than the 50000 bytes accepted/, { ...DEFAULT_ZIP_LIMITS, maxEntryBytes: 50_000 });
  });

  it('a zip bomb whose headers understate the inflated size is stopped while inflating', async () => {
    // session.json padded with 64 MiB of JSON whitespace deflates to ~64 KiB; the headers then claim 1000 bytes.
    const { files, folders } = unpacked();
    const name = `${folders[1]}/session.json`;
    const padded = new Uint8Array(files[name].length + 64 * 1024 * 1024).fill(0x20);
    padded.set(files[name]);
    files[name] = padded;
    const bomb = zipSync(files, { level: 9 });
    expect(bomb.length).toBeLessThan(1024 * 1024);
    const dv = new DataView(bomb.buffer, bomb.byteOffset, bomb.byteLength);
    const entry = (await listZip(bytesSource(bomb))).find((e) => e.name === name)!;
    expect(entry.size).toBe(padded.length);
    // APPNOTE 4.3.7 / 4.3.12: uncompressed size at offset 22 of the local header and 24 of the central record.
    dv.setUint32(entry.localOffset + 22, 1000, true);
    for (let p = 0; p + 46 < bomb.length; p++) {
      if (dv.getUint32(p, true) === 0x02014b50 && strFromU8(bomb.subarray(p + 46, p + 46 + name.length)) === name) dv.setUint32(p + 24, 1000, true);
    }
    expect((await listZip(bytesSource(bomb))).find((e) => e.name === name)!.size).toBe(1000);
    await expectRefused(bomb, /inflates beyond the 1000 bytes its header declares/);
  });

  it('a member with an unsafe path', async () => {
    const { files } = unpacked();
    files['../outside.json'] = strToU8('{}');
    await expectRefused(zipSync(files), /unsafe name/);
  });

  it('no manifest', async () => {
    const { files } = unpacked();
    delete files['manifest.json'];
    await expectRefused(zipSync(files), /no manifest\.json/);
  });
});

describe('hostile or broken session JSON is refused and nothing is written (not even the valid first session)', () => {
  it('a __proto__ key', async () => {
    await expectRefused(withSecondSessionText((t) => t.replace(/"meta": ?\{/, '"meta": {"__proto__": {"isAdmin": true},')), /"__proto__" is not allowed/);
  });

  it('a constructor key', async () => {
    await expectRefused(withSecondSessionText((t) => t.replace(/"report": ?\{/, '"report": {"constructor": {"name": "x"},')), /"constructor" is not allowed/);
    expect(() => parseJsonSafely('{"a":{"prototype":1}}', 'x.json')).toThrow(/"prototype" is not allowed/);
  });

  it('an unexpected key', async () => {
    await expectRefused(withSecondSession((j) => (j.session.meta.colour = 'red')), /session\.meta\.colour: unexpected field/);
    await expectRefused(withSecondSession((j) => (j.extra = 1)), /extra: unexpected field/);
  });

  it('HTML or script in a text field is data, accepted as typed (it is escaped wherever shown)', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const r = await importBundle(db, withSecondSession((j) => (j.session.meta.notes = 'ok <script>alert(1)</script>')));
    expect(r.imported).toHaveLength(2);
    db.close();
  });

  it('text that merely uses "<" as less-than is accepted', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const r = await importBundle(db, withSecondSession((j) => (j.session.meta.notes = 'flow < 2 m/s, ΔT <5 K, f < fs/2')));
    expect(r.imported).toHaveLength(2);
    db.close();
  });

  it('numbers out of range', async () => {
    await expectRefused(withSecondSession((j) => (j.session.meta.sampleRateHz = 5e6)), /sample rate must be at most 768000/);
    await expectRefused(withSecondSession((j) => (j.track.timeS[3] = 'NaN')), /track time must be a finite number \(frame 3\)/);
    await expectRefused(withSecondSession((j) => (j.track.frequencyHz[300] = 'high')), /track frequency must be a number .*\(frame 300\)/);
    await expectRefused(withSecondSession((j) => (j.session.markers[0].value = 'Infinity')), /marker control value must be a number/);
    await expectRefused(withSecondSession((j) => (j.session.report.summary.growthRatePerS = 'lots')), /growth rate must be a number/);
    await expectRefused(withSecondSession((j) => (j.session.meta.geometry.gasTemperatureC = -300)), /gas temperature must be -190–3000 °C/);
  });

  it('a track whose columns differ in length', async () => {
    await expectRefused(withSecondSession((j) => j.track.state.pop()), /columns differ in length/);
  });

  it('a wrong format or a future schema version', async () => {
    await expectRefused(withSecondSession((j) => (j.schemaVersion = 3)), /schemaVersion must be 2/);
    await expectRefused(withSecondSession((j) => (j.format = 'other')), /format must be/);
  });

  it('session and manifest disagree, or the audio does not match', async () => {
    await expectRefused(withSecondSession((j) => (j.session.id = 'someone-else')), /but the manifest says/);
    await expectRefused(withSecondSession((j) => (j.session.audio.sampleCount = 5)), /audio\.wav would expand to 48044 bytes, but 5 samples of 16-bit or float audio take 54 or 64/);
    await expectRefused(withSecondSession((j) => (j.session.meta.sampleRateHz = 16000)), /runs at 8000 Hz, but the session says 16000 Hz/);
  });

  it('invalid JSON', async () => {
    await expectRefused(withSecondSessionText((t) => t.slice(0, -20)), /is not valid JSON/);
  });
});
