import 'fake-indexeddb/auto';
import { describe, expect, it } from 'vitest';
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, resolve } from 'node:path';
import { strFromU8, unzipSync } from 'fflate';
import { openSessionDb } from '../../web/storage/db';
import { buildBundle, sessionWav, shareOrDownload, toJsonText, toSessionFile, trackCsv } from '../../web/storage/export';
import { importBundle, parseWav, readBundle } from '../../web/storage/import';
import { buildReportHtml } from '../../web/storage/report-html';
import { loadFullSession, type FullSession } from '../../web/storage/sessions';
import { crc32 } from '../../web/storage/zip-read';
import { sampleSession } from './export-sample';

let dbCount = 0;
const uniqueName = (): string => `humgauge-export-${process.pid}-${Date.now()}-${dbCount++}`;
const EXPORTED_AT = Date.UTC(2026, 11, 1, 12, 0);

const hasPythonOracle = spawnSync('python3', ['-c', 'import jsonschema'], { stdio: 'ignore' }).status === 0;

/** The parts of a session that an export carries (storage-layout details such as chunk counts are not). */
function carried(s: FullSession): unknown {
  const { frameChunkCount: _a, heartbeatAtMs: _b, audio, ...rest } = s.record;
  void _a;
  void _b;
  return { record: { ...rest, audio: { isKept: audio.isKept, sampleCount: audio.sampleCount, stoppedReason: audio.stoppedReason } }, track: s.track, audio: s.audio };
}

describe('CRC-32', () => {
  it('gives the standard check value for "123456789"', () => {
    // CRC-32/ISO-HDLC (the zip CRC) check value 0xCBF43926: Greg Cook, "Catalogue of parametrised CRC algorithms".
    expect(crc32(new TextEncoder().encode('123456789'))).toBe(0xcbf43926);
  });
});

describe('export → import round trip', () => {
  it('gives back an identical session: every field, every frame, every sample', async () => {
    const original = sampleSession();
    const bundle = buildBundle([original], EXPORTED_AT, { audio: 'float32' });
    const db = await openSessionDb({ name: uniqueName() });
    const result = await importBundle(db, bundle);
    expect(result).toEqual({ imported: [original.record.id], alreadyPresent: [] });
    const back = await loadFullSession(db, original.record.id);
    expect(back).toBeDefined();
    // toEqual compares NaN equal to NaN and −∞ to −∞ (Object.is semantics for numbers).
    expect(carried(back!)).toEqual(carried(original));
    expect(back!.track.some((f) => Number.isNaN(f.frequencyHz))).toBe(true);
    expect(back!.track[0].amplitudeDbfs).toBe(-Infinity);
    // Re-exporting the imported session gives the same session.json, byte for byte.
    expect(toJsonText(toSessionFile(back!, EXPORTED_AT))).toBe(toJsonText(toSessionFile(original, EXPORTED_AT)));
    db.close();
  });

  it('recognises the same session imported twice and writes nothing the second time', async () => {
    const db = await openSessionDb({ name: uniqueName() });
    const bundle = buildBundle([sampleSession(), sampleSession({ id: 'b2', withAudio: false })], EXPORTED_AT);
    expect((await importBundle(db, bundle)).imported).toHaveLength(2);
    const framesBefore = await db.count('frames');
    const again = await importBundle(db, bundle);
    expect(again.imported).toEqual([]);
    expect(again.alreadyPresent.sort()).toEqual(['3f0c6a52-8d1e-4b7a-9c33-0a1b2c3d4e5f', 'b2']);
    expect(await db.count('sessions')).toBe(2);
    expect(await db.count('frames')).toBe(framesBefore);
    db.close();
  });

  it('a bundle of several sessions holds one folder each and a manifest', async () => {
    const files = unzipSync(buildBundle([sampleSession(), sampleSession({ id: 'b2', site: 'Boiler room', withAudio: false })], EXPORTED_AT));
    const names = Object.keys(files).sort();
    expect(names).toContain('manifest.json');
    expect(names.filter((n) => n.endsWith('/session.json'))).toHaveLength(2);
    expect(names.filter((n) => n.endsWith('/audio.wav'))).toHaveLength(1);
    expect(names.filter((n) => n.endsWith('/report.html'))).toHaveLength(2);
    expect(await readBundle(buildBundle([sampleSession()], EXPORTED_AT))).toHaveLength(1);
  });
});

describe.skipIf(!hasPythonOracle)('the bundle read by independent tools (Python zipfile, csv, jsonschema, html.parser)', () => {
  it('is a valid zip, matches the published JSON Schema, and its CSV, WAV and HTML agree with the JSON', () => {
    const hostile = '<script>alert(1)</script><img src=x onerror=alert(2)>';
    const s1 = sampleSession();
    const s2 = sampleSession({ id: 'b2', site: `Boiler room ${hostile}`, notes: hostile, withAudio: false });
    s2.record.markers.push({ timeS: 1, kind: 'note', label: '"><svg onload=alert(3)>' });
    const dir = mkdtempSync(join(tmpdir(), 'humgauge-bundle-'));
    const path = join(dir, 'bundle.zip');
    writeFileSync(path, buildBundle([s1, s2], EXPORTED_AT));
    const out = JSON.parse(execFileSync('python3', [resolve('tests/web/export-oracle.py'), path, resolve('docs/session-bundle.schema.json')]).toString());
    expect(out.badMember).toBeNull();
    expect(out.manifestErrors).toEqual([]);
    const [a, b] = out.sessions;
    // Both satisfy the schema: markup in a text field is data (shown escaped, checked below).
    expect(a.schemaErrors).toEqual([]);
    expect(b.schemaErrors).toEqual([]);
    expect(a.crlf).toBe(true);
    expect(a.header).toEqual(['time_s', 'frequency_hz', 'amplitude_dbfs', 'amplitude_db_spl', 'level_dbfs', 'state', 'is_clipped', 'is_after_gap']);
    expect(a.csvRows).toBe(s1.track.length);
    expect(a.csvMismatches).toBe(0);
    // WAVE format tag 1 = PCM (Microsoft/IBM RIFF specification 1991, with the 1994 update): 16-bit by default.
    expect(a.wav).toMatchObject({ riff: 'RIFF', wave: 'WAVE', formatTag: 1, channels: 1, rateHz: 8000, bits: 16, samples: s1.audio!.length, riffSizeOk: true });
    // Read by Python's struct as signed 16-bit over 32768: within one quantisation step of the samples.
    a.wav.first.forEach((x: number, i: number) => expect(Math.abs(x - s1.audio![i])).toBeLessThanOrEqual(1 / 32768));
    // The hostile text is shown as text: the parser finds no script, image or event handler.
    for (const r of [a, b]) {
      expect(r.htmlTags).not.toContain('script');
      expect(r.htmlTags).not.toContain('img');
      expect(r.htmlHandlers).toEqual([]);
    }
    expect(b.htmlTags).toEqual(a.htmlTags);
  });
});

describe('plain exports', () => {
  it('the CSV writes numbers that read back to the same doubles and leaves NaN empty', () => {
    const track = sampleSession().track;
    const lines = trackCsv(track).split('\r\n');
    expect(lines[0]).toBe('time_s,frequency_hz,amplitude_dbfs,level_dbfs,state,is_clipped,is_after_gap');
    const row = lines[201].split(',');
    // ECMA-262 Number::toString gives the shortest text that round-trips (§6.1.6.1.20).
    expect(Number(row[1])).toBe(track[200].frequencyHz);
    expect(Number(row[2])).toBe(track[200].amplitudeDbfs);
    expect(lines[1].split(',')[1]).toBe('');
  });

  it('the WAV alone is 16-bit PCM that reads back within half a quantisation step', () => {
    const audio = sampleSession().audio!;
    const wav = parseWav(sessionWav(audio, 8000), 'audio.wav');
    expect(wav.sampleRateHz).toBe(8000);
    let worst = 0;
    for (let i = 0; i < audio.length; i++) worst = Math.max(worst, Math.abs(wav.samples[i] - audio[i]));
    // 16-bit PCM step is 1/32768; encodeWav rounds with a 32767 scale for positives, so the error is below one step.
    expect(worst).toBeLessThan(1 / 32768);
  });

  it('the HTML report escapes user text and allows no script by its policy', () => {
    const s = sampleSession({ site: '<script>alert(1)</script>', notes: 'a & b <b>bold</b> "q"' });
    const html = buildReportHtml(s.record, s.track, EXPORTED_AT);
    expect(html).not.toContain('<script>alert');
    expect(html).toContain('&lt;script&gt;alert(1)&lt;/script&gt;');
    expect(html).toContain('a &amp; b &lt;b&gt;bold&lt;/b&gt; &quot;q&quot;');
    expect(html).toContain("default-src 'none'");
    // Two inline SVG plots and the figures with units and intervals.
    expect(html.match(/<svg /g)).toHaveLength(2);
    expect(html).toMatch(/Growth rate<\/th><td>[0-9.]+ 1\/s \(95 % CI/);
  });

  it('session.json text carries non-finite numbers as tokens, never as null', () => {
    const text = toJsonText(toSessionFile(sampleSession(), EXPORTED_AT));
    expect(text).toContain('"-Infinity"');
    expect(text).toContain('"NaN"');
    const files = unzipSync(buildBundle([sampleSession()], EXPORTED_AT));
    const manifest = JSON.parse(strFromU8(files['manifest.json']));
    expect(manifest).toMatchObject({ format: 'humgauge-bundle', schemaVersion: 2 });
  });
});

describe('sharing', () => {
  /** Runs fn with a stand-in navigator (Web Share API level 2: canShare({ files }) and share()). */
  async function withNavigator<T>(nav: object, fn: () => Promise<T>): Promise<T> {
    const before = Object.getOwnPropertyDescriptor(globalThis, 'navigator');
    Object.defineProperty(globalThis, 'navigator', { value: nav, configurable: true, writable: true });
    try {
      return await fn();
    } finally {
      if (before) Object.defineProperty(globalThis, 'navigator', before);
      else delete (globalThis as { navigator?: unknown }).navigator;
    }
  }

  it('hands the file to the share sheet where canShare({ files }) says yes, and reports a cancel as such', async () => {
    const shared: ShareData[] = [];
    const bytes = new TextEncoder().encode('time_s\r\n');
    const nav = { canShare: (d: ShareData) => Array.isArray(d.files) && d.files.length === 1, share: async (d: ShareData) => void shared.push(d) };
    expect(await withNavigator(nav, () => shareOrDownload(bytes, 'a.csv', 'text/csv'))).toBe('shared');
    const file = shared[0].files![0];
    expect(file.name).toBe('a.csv');
    expect(file.type).toBe('text/csv');
    expect(new Uint8Array(await file.arrayBuffer())).toEqual(bytes);
    const cancelling = { ...nav, share: async () => Promise.reject(new DOMException('cancelled', 'AbortError')) };
    expect(await withNavigator(cancelling, () => shareOrDownload(bytes, 'a.csv', 'text/csv'))).toBe('cancelled');
  });
});
