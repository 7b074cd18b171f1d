/**
 * Stability map: growth/decay rate and limit-cycle amplitude against a control value (firing
 * rate, heater power), gathered across sessions and across the settings markers within them.
 * The sequence of settings in time shows where the system crosses from stable to humming and
 * back; with a subcritical (hysteretic) transition the onset lies above the shut-off value
 * (Gopalakrishnan et al. 2016, Sci. Rep. 6, 35310, on a thermoacoustic subcritical Hopf
 * transition; REFERENCES.md §12).
 */
import type { Interval, Marker, Report } from '../../dsp/types';

export type MapState = 'quiet' | 'humming';

/** One setting held for a while: its control value and what the system did there. */
export interface MapStep {
  sessionId: string;
  /** Absolute time of the start of the setting, ms since 1970 (orders the steps). */
  atMs: number;
  control: number;
  unit: string;
  state: MapState;
  /** Net linear rate at this setting, 1/s (growth > 0; stable decay < 0), with its 95 % interval. */
  ratePerS: number | null;
  rateCi95PerS: Interval | null;
  /** Where the rate came from: 'growth', 'decay', 'noise-driven'. */
  rateSource: string | null;
  /** Limit-cycle amplitude while humming, dBFS. */
  limitAmplitudeDbfs: number | null;
}

/** A change of state between two successive settings. */
export interface MapTransition {
  kind: 'onset' | 'shut-off';
  fromControl: number;
  toControl: number;
  atMs: number;
}

export interface StabilityMap {
  steps: MapStep[];
  transitions: MapTransition[];
  /** The control quantity mapped (its unit); steps in other units are left out. */
  unit: string;
  /** Every control unit found, with its number of steps, most common first. */
  units: { unit: string; count: number }[];
  /** Control value where the net rate crosses zero (linear interpolation between neighbouring settings), if it does. */
  zeroRateControl: number | null;
  /**
   * Onset and shut-off thresholds (midpoint of the two settings either side of the first onset /
   * last shut-off) and their difference, the hysteresis width; null when not observed.
   */
  onsetControl: number | null;
  shutOffControl: number | null;
  hysteresis: number | null;
}

/** What the map needs of a session. */
export interface MapSession {
  id: string;
  createdAtMs: number;
  durationS: number;
  markers: readonly Marker[];
  report: Report | null;
}

function overlap(a0: number, a1: number, b0: number, b1: number): number {
  return Math.max(0, Math.min(a1, b1) - Math.max(a0, b0));
}

/**
 * Cuts each session at its markers carrying a control value; in each span the report's segments
 * give the state (humming if a growth or steady segment covers a third of the span, or a steady
 * segment exists), the rate (growth, else decay, else noise-driven net decay) and the limit amplitude.
 */
export function buildSteps(sessions: readonly MapSession[]): MapStep[] {
  const steps: MapStep[] = [];
  for (const s of sessions) {
    if (!s.report) continue;
    const settings = s.markers.filter((m) => typeof m.value === 'number' && Number.isFinite(m.value)).sort((a, b) => a.timeS - b.timeS);
    for (let k = 0; k < settings.length; k++) {
      const m = settings[k];
      const t0 = m.timeS;
      const t1 = k + 1 < settings.length ? settings[k + 1].timeS : Math.max(s.durationS, s.report.durationS);
      if (!(t1 > t0)) continue;
      const span = t1 - t0;
      const inSpan = s.report.segments.filter((g) => overlap(g.startS, g.endS, t0, t1) > 0);
      const humS = inSpan.filter((g) => g.kind === 'steady' || g.kind === 'growth').reduce((acc, g) => acc + overlap(g.startS, g.endS, t0, t1), 0);
      const steady = inSpan.filter((g) => g.kind === 'steady' && typeof g.limitAmplitudeDbfs === 'number');
      // A hum that starts is a growth into a steady state; a hum that stops is a decay to quiet.
      const last = inSpan.length ? inSpan.reduce((a, b) => (b.endS > a.endS ? b : a)) : null;
      const endsHumming = last ? last.kind === 'steady' || last.kind === 'growth' : false;
      const state: MapState = endsHumming || humS > span / 3 ? 'humming' : 'quiet';
      const growth = inSpan.find((g) => g.kind === 'growth' && g.ratePerS !== null);
      const decay = inSpan.find((g) => g.kind === 'decay' && g.ratePerS !== null);
      const noise = s.report.noiseDriven.find((n) => overlap(n.startS, n.endS, t0, t1) > span / 3);
      let ratePerS: number | null = null;
      let ci: Interval | null = null;
      let source: string | null = null;
      if (growth) {
        ratePerS = growth.ratePerS;
        ci = growth.rateCi95PerS;
        source = 'growth';
      } else if (decay) {
        ratePerS = decay.ratePerS;
        ci = decay.rateCi95PerS;
        source = 'decay';
      } else if (noise) {
        ratePerS = -noise.decayRatePerS;
        ci = [-noise.decayRateCi95PerS[1], -noise.decayRateCi95PerS[0]];
        source = 'noise-driven';
      }
      const limits = steady.map((g) => g.limitAmplitudeDbfs as number);
      steps.push({
        sessionId: s.id,
        atMs: s.createdAtMs + t0 * 1000,
        control: m.value as number,
        unit: m.unit ?? '',
        state,
        ratePerS,
        rateCi95PerS: ci,
        rateSource: source,
        limitAmplitudeDbfs: limits.length ? Math.max(...limits) : null,
      });
    }
  }
  return steps.sort((a, b) => a.atMs - b.atMs);
}

/**
 * The map of one control quantity (`unit`; default the most common one): steps in time order,
 * their transitions, thresholds and the zero crossing of the rate. Values in different units
 * (firing rate in %, heater power in W) are never mixed.
 */
export function buildStabilityMap(sessions: readonly MapSession[], unit?: string): StabilityMap {
  const allSteps = buildSteps(sessions);
  const counts = new Map<string, number>();
  for (const s of allSteps) counts.set(s.unit, (counts.get(s.unit) ?? 0) + 1);
  const units = [...counts.entries()].map(([u, count]) => ({ unit: u, count })).sort((a, b) => b.count - a.count || a.unit.localeCompare(b.unit));
  const chosen = unit !== undefined && counts.has(unit) ? unit : (units[0]?.unit ?? '');
  const steps = allSteps.filter((s) => s.unit === chosen);
  const transitions: MapTransition[] = [];
  for (let i = 1; i < steps.length; i++) {
    const a = steps[i - 1];
    const b = steps[i];
    if (a.state === b.state) continue;
    transitions.push({ kind: b.state === 'humming' ? 'onset' : 'shut-off', fromControl: a.control, toControl: b.control, atMs: b.atMs });
  }
  const onset = transitions.find((t) => t.kind === 'onset');
  const shut = [...transitions].reverse().find((t) => t.kind === 'shut-off');
  const onsetControl = onset ? (onset.fromControl + onset.toControl) / 2 : null;
  const shutOffControl = shut ? (shut.fromControl + shut.toControl) / 2 : null;

  // Zero crossing of the rate against the control value: average rates at equal controls, sort, interpolate.
  const byControl = new Map<number, number[]>();
  for (const s of steps) if (s.ratePerS !== null && Number.isFinite(s.ratePerS)) byControl.set(s.control, [...(byControl.get(s.control) ?? []), s.ratePerS]);
  const pts = [...byControl.entries()].map(([c, r]) => [c, r.reduce((x, y) => x + y, 0) / r.length] as const).sort((p, q) => p[0] - q[0]);
  let zeroRateControl: number | null = null;
  for (let i = 1; i < pts.length; i++) {
    const [c0, r0] = pts[i - 1];
    const [c1, r1] = pts[i];
    if (r0 === 0) {
      zeroRateControl = c0;
      break;
    }
    if ((r0 < 0 && r1 >= 0) || (r0 > 0 && r1 <= 0)) {
      zeroRateControl = c0 + ((0 - r0) * (c1 - c0)) / (r1 - r0);
      break;
    }
  }
  return {
    steps,
    transitions,
    unit: chosen,
    units,
    zeroRateControl,
    onsetControl,
    shutOffControl,
    hysteresis: onsetControl !== null && shutOffControl !== null ? onsetControl - shutOffControl : null,
  };
}
