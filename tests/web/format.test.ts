import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  decimalsFor,
  formatClock,
  formatDb,
  formatDuration,
  formatHz,
  formatInterval,
  formatPercent,
  formatQ,
  formatQuantity,
  formatRate,
  formatRatio,
  formatSeconds,
  MISSING,
} from '../../web/format';

// Text that must never reach the screen.
const FORBIDDEN = /NaN|undefined|null|Infinity/;

describe('formatRate', () => {
  it('prints value, unit and 95 % interval as in the report contract example', () => {
    // DESIGN.md report contract: ratePerS 8.1, rateCi95PerS [7.6, 8.6].
    expect(formatRate(8.1, [7.6, 8.6])).toBe('8.10 1/s (95 % CI 7.60–8.60)');
  });

  it('keeps at least one decimal for small rates', () => {
    expect(formatRate(2, [1.5, 2.5])).toBe('2.00 1/s (95 % CI 1.50–2.50)');
    expect(formatRate(45.6, null)).toBe('45.6 1/s');
    expect(formatRate(123.4)).toBe('123.4 1/s');
  });

  it('uses "to" for an interval with a negative end, and a typographic minus', () => {
    expect(formatRate(-1.5, [-1.7, -1.3])).toBe('−1.50 1/s (95 % CI −1.70 to −1.30)');
  });

  it('orders interval ends even if given reversed', () => {
    expect(formatInterval([8.6, 7.6], 1)).toBe('(95 % CI 7.6–8.6)');
  });

  it('prints a dash and a reason for missing or non-finite values', () => {
    expect(formatRate(null)).toBe(`${MISSING} (no fit yet)`);
    expect(formatRate(Number.NaN, [1, 2], 'no decay seen')).toBe(`${MISSING} (no decay seen)`);
    expect(formatRate(Number.POSITIVE_INFINITY)).toBe(`${MISSING} (no fit yet)`);
    expect(formatRate(undefined)).toBe(`${MISSING} (no fit yet)`);
  });

  it('gives a narrow interval enough decimals that its ends differ (at most two more)', () => {
    expect(formatRate(4.5, [4.499, 4.501])).toBe('4.500 1/s (95 % CI 4.499–4.501)');
    expect(formatRate(4.5, [4.49, 4.51])).toBe('4.50 1/s (95 % CI 4.49–4.51)');
    expect(formatRate(4.5, [4.4999999, 4.5000001])).toBe('4.5000 1/s (95 % CI 4.5000–4.5000)');
  });

  it('drops an interval with a non-finite end rather than printing it', () => {
    expect(formatRate(3.2, [Number.NaN, 4])).toBe('3.20 1/s');
  });
});

describe('formatHz, formatDb, formatRatio, formatQ', () => {
  it('frequency with one decimal and Hz', () => {
    expect(formatHz(170.04)).toBe('170.0 Hz');
    expect(formatHz(171.2, [171.1, 171.3])).toBe('171.2 Hz (95 % CI 171.1–171.3)');
    expect(formatHz(12_345.6)).toBe('12346 Hz');
    expect(formatHz(Number.NaN)).toBe(`${MISSING} (no tone)`);
  });

  it('levels with one decimal and the given unit', () => {
    expect(formatDb(-23.46, 'dBFS')).toBe('−23.5 dBFS');
    expect(formatDb(93.98, 'dB SPL')).toBe('94.0 dB SPL');
    expect(formatDb(81, 'dB(A)')).toBe('81.0 dB(A)');
    expect(formatDb(Number.NEGATIVE_INFINITY, 'dBFS')).toBe(`${MISSING} (no signal)`);
  });

  it('damping ratio and Q of the REFERENCES.md §5 worked example (f 170 Hz, alpha 5 1/s)', () => {
    // REFERENCES.md §5: zeta = 4.680976e-3, Q = 106.8153.
    expect(formatRatio(4.680976e-3)).toBe('0.00468');
    expect(formatQ(106.8153)).toBe('107');
    expect(formatQ(106.8153, [92.1, 127.6])).toBe('107 (95 % CI 92–128)');
    expect(formatRatio(null)).toBe(`${MISSING} (no decay fit)`);
  });

  it('T60 of the same example in seconds, a doubling time in milliseconds', () => {
    // REFERENCES.md §5: T60 = 1.381551 s; doubling time ln2/5 = 0.138629 s.
    expect(formatSeconds(1.381551)).toBe('1.38 s');
    expect(formatSeconds(0.138629)).toBe('139 ms');
    expect(formatSeconds(0.138629, [0.12, 0.16])).toBe('139 ms (95 % CI 120–160)');
  });

  it('long durations in hours or minutes: NIOSH allowed times (REFERENCES.md §13, 94 dB(A) → 1 h, 100 dB(A) → 15 min)', () => {
    expect(formatDuration(3600)).toBe('1.0 h');
    expect(formatDuration(15 * 60)).toBe('15 min');
    expect(formatDuration(8 * 3600)).toBe('8.0 h');
    expect(formatDuration(42)).toBe('42 s');
    // Just under an hour (94.05 dB(A): 0.99 h) and just under a minute round up into the larger unit.
    expect(formatDuration(3577)).toBe('1.0 h');
    expect(formatDuration(150)).toBe('2.5 min');
    expect(formatDuration(12 * 3600)).toBe('12 h');
    expect(formatDuration(3590)).toBe('1.0 h');
    expect(formatDuration(59.7)).toBe('1.0 min');
    expect(formatDuration(0.5)).toBe('500 ms');
    expect(formatDuration(Number.NaN)).toBe(`${MISSING} (not known)`);
  });

  it('clock and percent', () => {
    expect(formatClock(75.25)).toBe('1:15.3');
    expect(formatClock(4)).toBe('0:04.0');
    expect(formatClock(Number.NaN)).toBe(MISSING);
    expect(formatPercent(0.425)).toBe('43 %');
  });

  it('never prints "-0"', () => {
    expect(formatDb(-0.01, 'dBFS')).toBe('0.0 dBFS');
  });
});

describe('decimalsFor', () => {
  it('gives the decimals for three significant digits', () => {
    expect(decimalsFor(0.00468, 3)).toBe(5);
    expect(decimalsFor(8.1, 3)).toBe(2);
    expect(decimalsFor(106.8, 3)).toBe(0);
    expect(decimalsFor(0, 3)).toBe(2);
  });
});

describe('property: no formatted text ever shows NaN, undefined, null or Infinity', () => {
  // Seeded so a failure is reproducible.
  const anyNumber = fc.oneof(
    fc.double({ noNaN: false }),
    fc.constant(Number.NaN),
    fc.constant(Number.POSITIVE_INFINITY),
    fc.constant(null),
    fc.constant(undefined),
  );
  const anyInterval = fc.oneof(fc.tuple(fc.double(), fc.double()), fc.constant(null), fc.constant(undefined));

  it('holds for every formatter', () => {
    fc.assert(
      fc.property(anyNumber, anyInterval, (v, ci) => {
        const texts = [
          formatRate(v, ci),
          formatHz(v, ci),
          formatDb(v, 'dBFS', ci),
          formatRatio(v, ci),
          formatQ(v, ci),
          formatSeconds(v, ci),
          formatQuantity(v, 'm', ci),
          formatClock(v),
          formatDuration(v),
          formatPercent(v),
        ];
        for (const t of texts) expect(t).not.toMatch(FORBIDDEN);
      }),
      { seed: 20261202, numRuns: 300 },
    );
  });

  it('a shown value always carries its unit', () => {
    fc.assert(
      fc.property(fc.double({ min: -1e6, max: 1e6, noNaN: true }), (v) => {
        expect(formatRate(v)).toMatch(/ 1\/s$/);
        expect(formatHz(v)).toMatch(/ Hz$/);
        expect(formatDb(v, 'dB SPL')).toMatch(/ dB SPL$/);
      }),
      { seed: 7, numRuns: 200 },
    );
  });
});
