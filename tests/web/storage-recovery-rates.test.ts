import 'fake-indexeddb/auto';
import { describe, expect, it } from 'vitest';
import { MIN_SAMPLE_RATE_HZ } from '../../dsp/condition';
import { createAnalysis } from '../../dsp/index';
import { recoveryCycle } from './recovery-signal';
import { openSessionDb } from '../../web/storage/db';
import { createSessionRecorder } from '../../web/storage/recorder';
import { analyseStoredAudio } from '../../web/storage/reanalyse';
import { recoverInterruptedSessions } from '../../web/storage/sessions';

// Recovery analyses stored audio at every rate the analysis itself takes (dsp/condition.ts):
// a pressure sensor logged at 500 Hz is analysed again, not merely summarised.
describe('recovery at the lowest sample rate the analysis accepts', () => {
  it('re-analyses a 500 Hz sensor record into the report the analysis gives directly', async () => {
    const fs = MIN_SAMPLE_RATE_HZ;
    expect(fs).toBe(500);
    // A 40 Hz hum cycle (dsp/synth.ts): onset 1 s, growth 6 1/s, off at 5 s, decay 4 1/s.
    const signal = recoveryCycle(fs, 40, 5);
    const db = await openSessionDb({ name: `humgauge-recovery-rate-${process.pid}-${Date.now()}` });
    let clock = 1_000_000;
    const rec = await createSessionRecorder({ source: 'file', sampleRateHz: fs, keepAudio: true }, { db, useTimer: false, nowMs: () => clock });
    for (let i = 0; i < signal.length; i += 256) rec.appendAudio(signal.subarray(i, Math.min(signal.length, i + 256)));
    await rec.flush();
    clock += 60_000;
    expect(await recoverInterruptedSessions(db, analyseStoredAudio, clock, async () => false)).toEqual([rec.id]);
    const stored = (await db.get('sessions', rec.id))!;
    const direct = createAnalysis({ sampleRateHz: fs });
    direct.push(signal);
    expect(stored.report).toEqual(direct.finish());
    db.close();
  });
});
