/**
 * Typed access to tests/reference/analysis-values.json (every entry's source is in its `source`
 * field and in tests/reference/SOURCES.md).
 */
import raw from './analysis-values.json';

export interface ReferenceValue {
  inputs: Record<string, unknown>;
  expected: number | number[];
  tol: number;
  source: string;
}

const table = raw as unknown as Record<string, ReferenceValue>;

/** The reference entry `key`; throws when it is missing so a renamed key cannot pass silently. */
export function ref(key: string): ReferenceValue {
  const v = table[key];
  if (v === undefined) throw new Error(`no reference value ${key}`);
  return v;
}

/** Expected scalar of an entry. */
export function expectedScalar(key: string): number {
  const e = ref(key).expected;
  if (typeof e !== 'number') throw new Error(`${key} holds a list`);
  return e;
}

/** Expected list of an entry. */
export function expectedList(key: string): number[] {
  const e = ref(key).expected;
  if (!Array.isArray(e)) throw new Error(`${key} holds a scalar`);
  return e;
}
