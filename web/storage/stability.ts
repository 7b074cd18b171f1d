/**
 * Stability map: growth/decay rate and limit-cycle amplitude against a control value (firing
 * rate, heater power), gathered across sessions and across the settings markers within them.
 * The sequence of settings in time shows where the system crosses from stable to humming and
 * back; with a subcritical (hysteretic) transition the onset lies above the shut-off value
 * (Gopalakrishnan et al. 2016, Sci. Rep. 6, 35310, on a thermoacoustic subcritical Hopf
 * transition; REFERENCES.md §12).
 */
import { studentTQuantile, Z_975 } from '../../dsp/stats';
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
  /** Where the rate came from: 'growth', 'decay', 'from noise' (report.modeStatistics), 'noise-driven'. */
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
  /** Where a straight line through every rate predicts it crosses zero (REFERENCES.md §44), or null with fewer than two settings. */
  predictedZero: ZeroPrediction | null;
  /**
   * Onset and shut-off thresholds (midpoint of the two settings either side of the first onset /
   * last shut-off) and their difference, the hysteresis width; null when not observed.
   */
  onsetControl: number | null;
  shutOffControl: number | null;
  /**
   * Hysteresis (onset − shut-off) and the range the settings bracket it to: null ("not
   * determined") until both an onset and a shut-off are observed and their brackets exclude zero
   * (two settings either side of one threshold bracket both at once: 0 lies in the range).
   */
  hysteresis: number | null;
  hysteresisRange: Interval | null;
}

/** The control value at which the line ν = c0 + c1·x crosses zero. */
export interface ZeroPrediction {
  control: number;
  /** Fieller 95 % interval; null when the slope is not significantly non-zero (the crossing is not determined). */
  ci95: Interval | null;
  /** Settings used and the span of their controls. */
  pointCount: number;
  observedRange: Interval;
  /** Distance from the nearest observed setting (0 inside the observed range), in control units and in observed spans. */
  extrapolation: number;
  extrapolationSpans: number;
  /** Slope dν/dx (1/s per control unit). */
  slopePerUnit: number;
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
      // The settled behaviour: after a change of setting the system grows or decays for a while, so
      // the state is what the second half of the span holds (hum = growth or steady).
      const mid = t0 + span / 2;
      const humLateS = inSpan.filter((g) => g.kind === 'steady' || g.kind === 'growth').reduce((acc, g) => acc + overlap(g.startS, g.endS, mid, t1), 0);
      const steady = inSpan.filter((g) => g.kind === 'steady' && typeof g.limitAmplitudeDbfs === 'number');
      const state: MapState = humLateS > (t1 - mid) / 2 ? 'humming' : 'quiet';
      const growth = inSpan.find((g) => g.kind === 'growth' && g.ratePerS !== null);
      const decay = inSpan.find((g) => g.kind === 'decay' && g.ratePerS !== null);
      const noise = s.report.noiseDriven.find((n) => overlap(n.startS, n.endS, t0, t1) > span / 3);
      const fromNoise = (s.report.modeStatistics ?? []).find((n) => n.linearGrowthRatePerS !== null && n.linearGrowthRateCi95PerS !== null && overlap(n.startS, n.endS, t0, t1) > span / 3);
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
      } else if (fromNoise) {
        ratePerS = fromNoise.linearGrowthRatePerS;
        ci = fromNoise.linearGrowthRateCi95PerS;
        source = 'from noise';
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
  let hysteresisRange: Interval | null = null;
  if (onset && shut) {
    const lo = Math.min(onset.fromControl, onset.toControl) - Math.max(shut.fromControl, shut.toControl);
    const hi = Math.max(onset.fromControl, onset.toControl) - Math.min(shut.fromControl, shut.toControl);
    hysteresisRange = [lo, hi];
  }
  const isHysteresisDetermined = hysteresisRange !== null && (hysteresisRange[0] > 0 || hysteresisRange[1] < 0);

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
    predictedZero: predictZeroCrossing(steps),
    onsetControl,
    shutOffControl,
    hysteresis: isHysteresisDetermined && onsetControl !== null && shutOffControl !== null ? onsetControl - shutOffControl : null,
    hysteresisRange: isHysteresisDetermined ? hysteresisRange : null,
  };
}

/**
 * Weighted least-squares line ν = c0 + c1·x through the settings with a rate and interval
 * (weights 1/sd², sd from the 95 % interval), its zero x0 = −c0/c1 and Fieller's 95 % interval
 * (Fieller 1954; REFERENCES.md §44). When the points scatter more than their intervals allow
 * (reduced χ² > 1) the covariance is scaled by it and Student-t with n − 2 degrees of freedom is
 * used (Birge ratio; common practice).
 */
export function predictZeroCrossing(steps: readonly MapStep[]): ZeroPrediction | null {
  const pts = steps.filter((s) => s.ratePerS !== null && Number.isFinite(s.ratePerS) && s.rateCi95PerS !== null && s.rateCi95PerS[1] > s.rateCi95PerS[0]);
  const xs = pts.map((p) => p.control);
  if (pts.length < 2 || Math.max(...xs) === Math.min(...xs)) return null;
  let sw = 0;
  let swx = 0;
  let swxx = 0;
  let swy = 0;
  let swxy = 0;
  const w = pts.map((p) => {
    const ci = p.rateCi95PerS as Interval;
    const sd = (ci[1] - ci[0]) / (2 * Z_975);
    return 1 / (sd * sd);
  });
  pts.forEach((p, i) => {
    const x = p.control;
    const y = p.ratePerS as number;
    sw += w[i];
    swx += w[i] * x;
    swxx += w[i] * x * x;
    swy += w[i] * y;
    swxy += w[i] * x * y;
  });
  const det = sw * swxx - swx * swx;
  const c1 = (sw * swxy - swx * swy) / det;
  const c0 = (swy - c1 * swx) / sw;
  let chi2 = 0;
  pts.forEach((p, i) => {
    chi2 += w[i] * ((p.ratePerS as number) - c0 - c1 * p.control) ** 2;
  });
  const dof = pts.length - 2;
  const birge = dof > 0 ? Math.max(1, chi2 / dof) : 1;
  const v00 = (swxx / det) * birge;
  const v01 = (-swx / det) * birge;
  const v11 = (sw / det) * birge;
  const q = birge > 1 && dof > 0 ? studentTQuantile(0.975, dof) : Z_975;
  const lo = Math.min(...xs);
  const hi = Math.max(...xs);
  const base = { pointCount: pts.length, observedRange: [lo, hi] as Interval, slopePerUnit: c1 };
  if (c1 === 0 || !Number.isFinite(c1)) return null;
  const x0 = -c0 / c1;
  const extrapolation = x0 < lo ? lo - x0 : x0 > hi ? x0 - hi : 0;
  // Fieller: (c0 + c1 x)² ≤ q² (v00 + 2 v01 x + v11 x²), bounded when c1² > q² v11.
  const A = c1 * c1 - q * q * v11;
  const B = 2 * (c0 * c1 - q * q * v01);
  const C = c0 * c0 - q * q * v00;
  const disc = B * B - 4 * A * C;
  let ci95: Interval | null = null;
  if (A > 0 && disc >= 0) {
    const r = Math.sqrt(disc);
    ci95 = [(-B - r) / (2 * A), (-B + r) / (2 * A)];
  }
  return { ...base, control: x0, ci95, extrapolation, extrapolationSpans: extrapolation / (hi - lo) };
}
