import 'fake-indexeddb/auto';
import { describe, expect, it } from 'vitest';
import { createAnalysis } from '../../dsp/index';
import { recoveryCycle } from './recovery-signal';
import { openSessionDb } from '../../web/storage/db';
import { createSessionRecorder } from '../../web/storage/recorder';
import { analyseStoredAudio, reanalyseInThread } from '../../web/storage/reanalyse';
import { recoverInterruptedSessions } from '../../web/storage/sessions';

describe('recovery by analysing the stored audio again', () => {
  it('gives the report the analysis gives on the whole signal (the stored audio is the signal, sample for sample)', async () => {
    // A hum cycle of known truth: onset 1 s, growth 6 1/s into a 0.2 limit, off at 5 s, decay 4 1/s (dsp/synth.ts).
    const fs = 8000;
    const signal = recoveryCycle(fs, 171, 3);
    const db = await openSessionDb({ name: `humgauge-recovery-${process.pid}-${Date.now()}` });
    let clock = 1_000_000;
    const rec = await createSessionRecorder({ source: 'microphone', sampleRateHz: fs, keepAudio: true }, { db, useTimer: false, nowMs: () => clock });
    // Blocks as the capture delivers them, written about once a second; the tab dies after the last write.
    for (let i = 0; i < signal.length; i += 2048) {
      rec.appendAudio(signal.subarray(i, Math.min(signal.length, i + 2048)));
      if ((i / 2048) % 4 === 3) await rec.flush();
    }
    await rec.flush();
    clock += 60_000;
    const ids = await recoverInterruptedSessions(db, analyseStoredAudio, clock, async () => false);
    expect(ids).toEqual([rec.id]);
    const stored = (await db.get('sessions', rec.id))!;
    expect(stored.status).toBe('recovered');
    // Independent run of the same analysis over the original samples, cut differently (DESIGN.md: results do not depend on blocking).
    const direct = createAnalysis({ sampleRateHz: fs });
    for (let i = 0; i < signal.length; i += 1000) direct.push(signal.subarray(i, Math.min(signal.length, i + 1000)));
    const expected = direct.finish();
    expect(stored.report).toEqual(expected);
    expect(stored.report?.onsets.length).toBeGreaterThan(0);
    db.close();
  });

  it('re-analyses a stored session with a band and markers by the same routine (the report the analysis gives on the signal)', async () => {
    const fs = 8000;
    const signal = recoveryCycle(fs, 171, 4);
    const db = await openSessionDb({ name: `humgauge-reanalyse-${process.pid}-${Date.now()}` });
    const rec = await createSessionRecorder({ source: 'file', sampleRateHz: fs, keepAudio: true }, { db, useTimer: false });
    for (let i = 0; i < signal.length; i += 2048) rec.appendAudio(signal.subarray(i, Math.min(signal.length, i + 2048)));
    await rec.finish(createAnalysis({ sampleRateHz: fs }).finish());
    const markers = [{ timeS: 5, kind: 'driving-off', label: 'off' }];
    const fractions: number[] = [];
    const report = await reanalyseInThread(db, rec.id, { bandLowHz: 100, bandHighHz: 400, markers }, (f) => fractions.push(f));
    const direct = createAnalysis({ sampleRateHz: fs, bandLowHz: 100, bandHighHz: 400 });
    direct.mark(markers[0]!);
    for (let i = 0; i < signal.length; i += 1000) direct.push(signal.subarray(i, Math.min(signal.length, i + 1000)));
    expect(report).toEqual(direct.finish());
    for (let k = 1; k < fractions.length; k++) expect(fractions[k]).toBeGreaterThan(fractions[k - 1]!);
    await expect(reanalyseInThread(db, 'no-such-session', { markers: [] }, () => undefined)).rejects.toThrow(/no longer stored/);
    db.close();
  });
});
