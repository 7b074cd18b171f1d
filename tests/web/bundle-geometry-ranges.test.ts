import { readFileSync } from 'node:fs';
import * as v from 'valibot';
import { describe, expect, it } from 'vitest';
import { DIAMETER_RANGE_M, GAS_TEMPERATURE_RANGE_C, LENGTH_RANGE_M } from '../../dsp/duct';
import { SessionSchema } from '../../web/storage/bundle-schema';
import { toJsonText, toSessionFile } from '../../web/storage/export';
import { sampleSession } from './export-sample';

// A bundle's duct geometry is held to the duct model's own ranges (dsp/gas.ts, re-exported by
// dsp/duct.ts: what the Duct screen accepts), in the valibot schema and the published JSON Schema.
describe('duct geometry in a bundle', () => {
  const geometrySchema = JSON.parse(readFileSync('docs/session-bundle.schema.json', 'utf8'));
  const findGeometry = (node: unknown): Record<string, { minimum?: number; maximum?: number }> | null => {
    if (typeof node !== 'object' || node === null) return null;
    const rec = node as Record<string, unknown>;
    const props = rec.properties as Record<string, unknown> | undefined;
    if (props && typeof props.lengthM === 'object' && typeof props.diameterM === 'object') return props as Record<string, { minimum?: number; maximum?: number }>;
    for (const child of Object.values(rec)) {
      const found = findGeometry(child);
      if (found) return found;
    }
    return null;
  };

  it('the published JSON Schema states the model ranges', () => {
    const g = findGeometry(geometrySchema)!;
    expect([g.lengthM.minimum, g.lengthM.maximum]).toEqual([LENGTH_RANGE_M.min, LENGTH_RANGE_M.max]);
    expect([g.diameterM.minimum, g.diameterM.maximum]).toEqual([DIAMETER_RANGE_M.min, DIAMETER_RANGE_M.max]);
    expect([g.gasTemperatureC.minimum, g.gasTemperatureC.maximum]).toEqual([GAS_TEMPERATURE_RANGE_C.min, GAS_TEMPERATURE_RANGE_C.max]);
    expect([g.hotTemperatureC.minimum, g.hotTemperatureC.maximum]).toEqual([GAS_TEMPERATURE_RANGE_C.min, GAS_TEMPERATURE_RANGE_C.max]);
  });

  it('the import refuses a geometry the model refuses, naming the field, and keeps one at the range ends', () => {
    const session = (JSON.parse(toJsonText(toSessionFile(sampleSession(), Date.UTC(2026, 11, 3)))) as { session: { meta: { geometry: object } } }).session;
    const withGeometry = (patch: Record<string, number>) => ({ ...session, meta: { ...session.meta, geometry: { ...session.meta.geometry, ...patch } } });
    const issue = (patch: Record<string, number>): string => {
      const r = v.safeParse(SessionSchema, withGeometry(patch));
      return r.success ? '' : r.issues.map((i) => i.message).join('; ');
    };
    expect(issue({ lengthM: LENGTH_RANGE_M.max * 1.01 })).toMatch(/duct length must be/);
    expect(issue({ diameterM: DIAMETER_RANGE_M.min / 2 })).toMatch(/duct diameter must be/);
    expect(issue({ gasTemperatureC: GAS_TEMPERATURE_RANGE_C.min - 1 })).toMatch(/gas temperature must be/);
    expect(issue({ lengthM: LENGTH_RANGE_M.max, diameterM: DIAMETER_RANGE_M.min, gasTemperatureC: GAS_TEMPERATURE_RANGE_C.max })).toBe('');
  });
});
