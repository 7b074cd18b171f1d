// CSV reader for pressure-sensor exports. Expectations come from the file layout itself (RFC 4180
// comma-separated lines) and from the sample-rate rule of the shared recipe (RECIPE.md §2: the
// rate is the mean spacing over all rows; rounded timestamps read from one step gave 48077 Hz
// instead of 48000, measured there).
import { describe, expect, it } from 'vitest';
import { createCsvDecoder, decodeCsv } from '../../dsp/io/csv';
import { InputError, type InputProblem } from '../../dsp/io/errors';

const text = (s: string): Uint8Array => new TextEncoder().encode(s);

function series(rateHz: number, seconds: number, decimals: number, withHeader = true): string {
  const n = Math.round(rateHz * seconds);
  const lines = withHeader ? ['time_s,pressure_pa'] : [];
  for (let i = 0; i < n; i++) lines.push(`${(i / rateHz).toFixed(decimals)},${(2 * Math.sin((2 * Math.PI * 170 * i) / rateHz)).toFixed(5)}`);
  return lines.join('\n') + '\n';
}

function fails(csv: string, opts = {}): { problem: InputProblem | 'none'; message: string } {
  try {
    decodeCsv(text(csv), opts);
  } catch (e) {
    if (e instanceof InputError) return { problem: e.problem, message: e.message };
    throw e;
  }
  return { problem: 'none', message: '' };
}

describe('layouts', () => {
  it('time_s,pressure_pa with a header: values and the rate from the mean spacing', () => {
    const { samples, summary } = decodeCsv(text(series(1000, 0.6, 6)));
    expect(samples.length).toBe(600);
    expect(summary.hasTimeColumn).toBe(true);
    expect(summary.valueColumnName).toBe('pressure_pa');
    // Timestamps printed to 1 µs over 0.599 s: the mean spacing is exact to ~1e-6 relative.
    expect(summary.sampleRateHz).toBeCloseTo(1000, 3);
    expect(samples[250]).toBeCloseTo(2 * Math.sin((2 * Math.PI * 170 * 250) / 1000), 4);
  });

  it('48 kHz timestamps rounded to 1 µs: single steps jitter ±5 %, yet the rate is 48000 Hz and no jitter error', () => {
    // RECIPE.md §2: reading the rate from one rounded step gives 48077 Hz; the mean over all rows is right.
    const { summary } = decodeCsv(text(series(48000, 0.6, 6)));
    expect(Math.abs(summary.sampleRateHz - 48000)).toBeLessThan(0.2);
  });

  it('columns found by name in any order, semicolons, CRLF, BOM, comments and blank lines', () => {
    const csv = '\ufeff# exported by the bench logger\r\npressure_pa;time_s\r\n' + Array.from({ length: 600 }, (_, i) => `${i % 7};${(i * 0.001).toFixed(3)}`).join('\r\n') + '\r\n\r\n';
    const { samples, summary } = decodeCsv(text(csv));
    expect(samples.length).toBe(600);
    expect(samples[9]).toBe(2);
    expect(summary.timeColumnName).toBe('time_s');
    expect(summary.sampleRateHz).toBeCloseTo(1000, 6);
  });

  it('one column with a given rate; a last line without newline is kept', () => {
    const csv = 'pressure_pa\n' + Array.from({ length: 500 }, (_, i) => String(Math.sin(i))).join('\n');
    const { samples, summary } = decodeCsv(text(csv), { rateHz: 1000 });
    expect(samples.length).toBe(500);
    expect(samples[499]).toBeCloseTo(Math.sin(499), 6);
    expect(summary.sampleRateHz).toBe(1000);
  });

  it('headerless two columns read as time, value', () => {
    const { summary } = decodeCsv(text(series(2000, 0.5, 6, false)));
    expect(summary.hasTimeColumn).toBe(true);
    expect(summary.sampleRateHz).toBeCloseTo(2000, 2);
  });

  it('gives the same values whatever the size of the pushed pieces', () => {
    const bytes = text(series(1000, 0.6, 6));
    const whole = decodeCsv(bytes).samples;
    for (const piece of [1, 5, 17, 1000]) {
      const dec = createCsvDecoder();
      const got: number[] = [];
      for (let o = 0; o < bytes.length; o += piece) got.push(...dec.push(bytes.subarray(o, o + piece)));
      got.push(...dec.end().samples);
      expect(Float32Array.from(got)).toEqual(whole);
    }
  });
});

describe('bad input names the line', () => {
  const good = series(1000, 0.6, 6).split('\n');
  const withLine = (lineIndex: number, line: string): string => good.map((l, i) => (i === lineIndex ? line : l)).join('\n');

  it('text in a number field', () => {
    const r = fails(withLine(100, '0.099000,abc'));
    expect(r.problem).toBe('bad-csv');
    expect(r.message).toMatch(/^line 101: pressure_pa "abc" is not a number/);
  });

  it('missing value', () => {
    const r = fails(withLine(42, '0.041000,'));
    expect(r.problem).toBe('bad-csv');
    expect(r.message).toMatch(/^line 43: missing pressure_pa/);
  });

  it('missing field (wrong count)', () => {
    const r = fails(withLine(7, '0.006000'));
    expect(r.message).toMatch(/^line 8: expected 2 fields, found 1/);
  });

  it('non-monotonic time', () => {
    const r = fails(withLine(300, '0.250000,0.1'));
    expect(r.problem).toBe('bad-csv');
    expect(r.message).toMatch(/^line 301: time 0\.250000 s does not rise/);
  });

  it('a repeated timestamp', () => {
    expect(fails(withLine(300, '0.298000,0.1')).message).toMatch(/^line 301: .*does not rise/);
  });

  it('irregular time steps beyond 1 % plus the timestamp resolution', () => {
    // Step 1 ms, timestamps to 1 µs: tolerance 10 µs + 1 µs; a 20 µs late sample is jitter.
    const r = fails(withLine(200, '0.199020,0.1'));
    expect(r.problem).toBe('bad-csv');
    expect(r.message).toMatch(/^line 201: time step .* irregular sampling/);
    // 5 µs late is within tolerance.
    expect(fails(withLine(200, '0.199005,0.1')).problem).toBe('none');
  });

  it('one column without --rate', () => {
    const r = fails('p\n1\n2\n3\n');
    expect(r.problem).toBe('bad-csv');
    expect(r.message).toMatch(/--rate/);
  });

  it('binary data', () => {
    expect(fails('RIFF\0\0\0\0WAVE').problem).toBe('bad-csv');
  });

  it('empty file and header only', () => {
    expect(fails('').problem).toBe('empty-or-truncated');
    expect(fails('time_s,pressure_pa\n').problem).toBe('empty-or-truncated');
  });

  it('too short and constant', () => {
    expect(fails(series(1000, 0.4, 6)).problem).toBe('too-short');
    const flat = 'time_s,pressure_pa\n' + Array.from({ length: 600 }, (_, i) => `${(i / 1000).toFixed(3)},101325`).join('\n');
    expect(fails(flat).problem).toBe('silent');
  });
});
