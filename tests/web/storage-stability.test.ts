import { describe, expect, it } from 'vitest';
import { REPORT_VERSION, type Marker, type NoiseDriven, type Report, type Segment } from '../../dsp/types';
import { buildStabilityMap, type MapSession } from '../../web/storage/stability';

/**
 * A bench rig driven through a subcritical Hopf transition (the hysteresis loop of a
 * thermoacoustic system: Gopalakrishnan et al. 2016, Sci. Rep. 6, 35310; REFERENCES.md §12).
 * Known truth: net linear rate r(c) = 0.5 (c − 62) 1/s, so the linear threshold is c = 62 %.
 * Ramp up 40 → 80 % in 5 % steps of 10 s: quiet (noise-driven net decay −r) until 60 %, hum grows
 * at 65 %. Ramp down 75 → 40 %: the hum holds (bistable) down to 55 % and dies at 50 %.
 */
function hysteresisSession(): MapSession {
  const up = [40, 45, 50, 55, 60, 65, 70, 75, 80];
  const down = [75, 70, 65, 60, 55, 50, 45, 40];
  const controls = [...up, ...down];
  const markers: Marker[] = [];
  const segments: Segment[] = [];
  const noiseDriven: NoiseDriven[] = [];
  const rate = (c: number): number => 0.5 * (c - 62);
  let isHumming = false;
  controls.forEach((c, k) => {
    const t0 = k * 10;
    const t1 = t0 + 10;
    markers.push({ timeS: t0, kind: 'setting', label: `firing rate ${c} %`, value: c, unit: '%' });
    const goingDown = k >= up.length;
    if (!isHumming && rate(c) > 0) {
      segments.push({ kind: 'growth', startS: t0, endS: t0 + 2, frequencyHz: 171, ratePerS: rate(c), rateCi95PerS: [rate(c) - 0.2, rate(c) + 0.2], model: 'stuart-landau' });
      segments.push({ kind: 'steady', startS: t0 + 2, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null, limitAmplitudeDbfs: -20 + 0.2 * (c - 65) });
      isHumming = true;
    } else if (isHumming && goingDown && c <= 50) {
      segments.push({ kind: 'decay', startS: t0, endS: t0 + 3, frequencyHz: 171, ratePerS: -2, rateCi95PerS: [-2.2, -1.8] });
      segments.push({ kind: 'quiet', startS: t0 + 3, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null });
      isHumming = false;
    } else if (isHumming) {
      segments.push({ kind: 'steady', startS: t0, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null, limitAmplitudeDbfs: -20 + 0.2 * (c - 65) });
    } else {
      segments.push({ kind: 'quiet', startS: t0, endS: t1, frequencyHz: 171, ratePerS: null, rateCi95PerS: null });
      noiseDriven.push({ startS: t0, endS: t1, frequencyHz: 170, decayRatePerS: -rate(c), decayRateCi95PerS: [-rate(c) - 0.1, -rate(c) + 0.1] });
    }
  });
  const durationS = controls.length * 10;
  const report: Report = {
    reportVersion: REPORT_VERSION,
    sampleRateHz: 48000,
    durationS,
    onsets: [],
    segments,
    noiseDriven,
    summary: { frequencyHz: 171, growthRatePerS: null, decayRatePerS: null, effectiveGainPerS: null, dampingRatio: null, qFactor: null },
  };
  return { id: 'ramp', createdAtMs: Date.UTC(2026, 10, 1), durationS, markers, report };
}

describe('stability map', () => {
  it('finds onset and shut-off thresholds, the hysteresis width and the linear threshold', () => {
    const map = buildStabilityMap([hysteresisSession()]);
    expect(map.steps).toHaveLength(17);
    expect(map.unit).toBe('%');
    expect(map.transitions.map((t) => [t.kind, t.fromControl, t.toControl])).toEqual([
      ['onset', 60, 65],
      ['shut-off', 55, 50],
    ]);
    // Midpoints of the bracketing settings: onset 62.5 %, shut-off 52.5 %, hysteresis 10 %.
    expect(map.onsetControl).toBeCloseTo(62.5, 12);
    expect(map.shutOffControl).toBeCloseTo(52.5, 12);
    expect(map.hysteresis).toBeCloseTo(10, 12);
    // Linear truth r(c) = 0.5 (c − 62): interpolating between 60 % (−1 1/s) and 65 % (+1.5 1/s) gives 62 % exactly.
    expect(map.zeroRateControl).toBeCloseTo(62, 9);
    // Noise-driven steps carry the net decay as a negative rate with its interval.
    const at40 = map.steps[0];
    expect(at40).toMatchObject({ control: 40, state: 'quiet', rateSource: 'noise-driven', ratePerS: -11 });
    expect(at40.rateCi95PerS).toEqual([-11.1, -10.9]);
    // Limit-cycle amplitude follows the control value while humming.
    const at80 = map.steps.find((s) => s.control === 80);
    expect(at80?.limitAmplitudeDbfs).toBeCloseTo(-17, 9);
  });

  it('orders steps across sessions by absolute time, and skips sessions without a report or control values', () => {
    const a = hysteresisSession();
    const later: MapSession = { ...hysteresisSession(), id: 'later', createdAtMs: a.createdAtMs + 86_400_000 };
    const none: MapSession = { id: 'none', createdAtMs: 0, durationS: 5, markers: [{ timeS: 1, kind: 'note', label: 'x' }], report: a.report };
    const map = buildStabilityMap([later, none, a, { ...a, id: 'noreport', report: null }]);
    expect(map.steps).toHaveLength(34);
    expect(map.steps[0].sessionId).toBe('ramp');
    expect(map.steps[33].sessionId).toBe('later');
    // The second day starts quiet again at 40 %: a shut-off between days is not invented (the last step of day 1 is quiet too).
    expect(map.transitions.filter((t) => t.kind === 'onset')).toHaveLength(2);
  });

  it('never mixes control quantities: the most common unit is mapped unless another is asked for', () => {
    const ramp = hysteresisSession();
    const heater: MapSession = { ...hysteresisSession(), id: 'heater', createdAtMs: ramp.createdAtMs + 1e7, markers: [{ timeS: 0, kind: 'setting', label: 'heater power', value: 250, unit: 'W' }] };
    const map = buildStabilityMap([ramp, heater]);
    expect(map.unit).toBe('%');
    expect(map.units).toEqual([{ unit: '%', count: 17 }, { unit: 'W', count: 1 }]);
    expect(map.steps.every((st) => st.unit === '%')).toBe(true);
    const watts = buildStabilityMap([ramp, heater], 'W');
    expect(watts.steps.map((st) => st.control)).toEqual([250]);
    expect(watts.onsetControl).toBeNull();
  });
});
