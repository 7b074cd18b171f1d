/**
 * Figures derived from the fitted rates (DESIGN.md stage 6): effective gain, damping ratio, Q,
 * T60, e-folding and doubling times, stability margin, and the report summary with propagated
 * 95 % intervals.
 *
 * Oscillator relations (REFERENCES.md §5; standard vibration texts, e.g. Rao, Mechanical
 * Vibrations; Thomson & Dahleh, Theory of Vibration with Applications [from memory]): for
 * x'' + 2αx' + ωn²x = 0 the free response is A0·e^{−αt}·cos(ωd t + φ), ωd = √(ωn² − α²). The
 * frequency we measure is the damped one, f = ωd/2π. Exact: ζ = α/ωn = α/√(ωd² + α²),
 * Q = 1/(2ζ) = ωn/(2α). The light-damping approximation ζ ≈ α/(2πf) differs from it by a relative
 * ζ²/2 (2·10⁻⁵ at ζ = 0.005); we use the exact form.
 *
 * Intervals. A monotone transform maps the ends of an interval onto the ends of the new one
 * (decreasing transforms swap them). The sum of two independent estimates (effective gain =
 * growth rate + decay rate, REFERENCES.md §6) gets an interval whose half-widths add in
 * quadrature, each side separately so asymmetric intervals stay asymmetric (normal
 * approximation). The frequency is treated as exact: its relative error is orders of magnitude
 * below that of a rate (REFERENCES.md §8: sd(σ) ≈ 2π·sd(f), and σ ≪ 2πf).
 */
import type { Interval, Summary } from './types';

/** ln 10, for T60 = 3 ln10/α. */
const LN10 = Math.log(10);

/** Damping ratio ζ = α/ωn with ωn = √((2πf)² + α²), f the observed (damped) frequency in Hz, α the decay rate in 1/s (REFERENCES.md §5). */
export function dampingRatio(decayRatePerS: number, frequencyHz: number): number {
  const wd = 2 * Math.PI * frequencyHz;
  return decayRatePerS / Math.sqrt(wd * wd + decayRatePerS * decayRatePerS);
}

/** Quality factor Q = 1/(2ζ) = ωn/(2α) (REFERENCES.md §5). */
export function qFactor(decayRatePerS: number, frequencyHz: number): number {
  return 1 / (2 * dampingRatio(decayRatePerS, frequencyHz));
}

/** Reverberation-style decay time to −60 dB, T60 = 3 ln10/α in s (α in 1/s; REFERENCES.md §5). */
export function t60S(decayRatePerS: number): number {
  return (3 * LN10) / decayRatePerS;
}

/** Half-power (−3 dB) full width of the power spectrum, Δf = α/π in Hz (light damping; REFERENCES.md §5). */
export function halfPowerWidthHz(decayRatePerS: number): number {
  return decayRatePerS / Math.PI;
}

/** Logarithmic decrement δ = α·Td = α/fd per cycle (REFERENCES.md §5). */
export function logDecrement(decayRatePerS: number, frequencyHz: number): number {
  return decayRatePerS / frequencyHz;
}

/** Level change rate of an amplitude e-folding rate: 20·log10(e)·rate, dB/s (8.686 dB/s per 1/s). */
export function levelRateDbPerS(ratePerS: number): number {
  return (20 / Math.LN10) * ratePerS;
}

/** e-folding time 1/|rate| in s. */
export function eFoldingTimeS(ratePerS: number): number {
  return 1 / Math.abs(ratePerS);
}

/** Doubling time ln2/s of a growth (s > 0) or half-life ln2/α of a decay, s. */
export function doublingTimeS(ratePerS: number): number {
  return Math.LN2 / Math.abs(ratePerS);
}

/** Driving (effective gain) rate β = s_g + α, 1/s: growth rate while driven plus decay rate with the driving removed (REFERENCES.md §6). */
export function effectiveGainPerS(growthRatePerS: number, decayRatePerS: number): number {
  return growthRatePerS + decayRatePerS;
}

/** Linear stability margin m = α − β, 1/s; positive is stable (REFERENCES.md §6). */
export function stabilityMarginPerS(decayRatePerS: number, drivingRatePerS: number): number {
  return decayRatePerS - drivingRatePerS;
}

/** Normalised gain β/α: below 1 stable, 1 at the threshold (REFERENCES.md §6). */
export function normalisedGain(drivingRatePerS: number, decayRatePerS: number): number {
  return drivingRatePerS / decayRatePerS;
}

/**
 * Driving rate from a noise-driven (stable, pre-onset) net decay rate α_net and the ring-down
 * decay rate α with the driving removed: β = α − α_net, 1/s (REFERENCES.md §6, §7).
 */
export function drivingRateFromNoisePerS(decayRatePerS: number, netDecayRatePerS: number): number {
  return decayRatePerS - netDecayRatePerS;
}

/** Interval of a sum of two independent estimates: each side's half-width in quadrature (normal approximation). */
export function sumInterval(a: number, ciA: Interval, b: number, ciB: Interval): Interval {
  const lo = Math.hypot(a - ciA[0], b - ciB[0]);
  const hi = Math.hypot(ciA[1] - a, ciB[1] - b);
  return [a + b - lo, a + b + hi];
}

/** Maps an interval through a monotone function (ends swap when it decreases). */
export function mapInterval(ci: Interval, fn: (v: number) => number): Interval {
  const a = fn(ci[0]);
  const b = fn(ci[1]);
  return a <= b ? [a, b] : [b, a];
}

function isFiniteInterval(ci: Interval): boolean {
  return Number.isFinite(ci[0]) && Number.isFinite(ci[1]);
}

/**
 * The report summary of the main tone: frequency (Hz), growth rate s (1/s) and decay rate α
 * (positive, 1/s) with their intervals, effective gain β = s + α, damping ratio and Q from α and f,
 * e-folding and doubling times from s, T60 from α. Intervals follow the rules in the header;
 * an interval that would reach a non-positive decay rate (where ζ, Q, T60 lose meaning) is left
 * out (null), and so is any figure whose inputs are missing.
 */
export function deriveSummary(args: {
  frequencyHz: number | null;
  growth: { ratePerS: number; ci95PerS: Interval } | null;
  decay: { decayRatePerS: number; ci95PerS: Interval } | null;
  limitAmplitudeDbfs?: number | null;
}): Summary {
  const f = args.frequencyHz !== null && args.frequencyHz > 0 && Number.isFinite(args.frequencyHz) ? args.frequencyHz : null;
  const g = args.growth !== null && Number.isFinite(args.growth.ratePerS) ? args.growth : null;
  const d = args.decay !== null && args.decay.decayRatePerS > 0 && Number.isFinite(args.decay.decayRatePerS) ? args.decay : null;
  const dCiPositive = d !== null && isFiniteInterval(d.ci95PerS) && d.ci95PerS[0] > 0;
  const summary: Summary = {
    frequencyHz: f,
    growthRatePerS: g?.ratePerS ?? null,
    decayRatePerS: d?.decayRatePerS ?? null,
    effectiveGainPerS: g !== null && d !== null ? effectiveGainPerS(g.ratePerS, d.decayRatePerS) : null,
    dampingRatio: f !== null && d !== null ? dampingRatio(d.decayRatePerS, f) : null,
    qFactor: f !== null && d !== null ? qFactor(d.decayRatePerS, f) : null,
    growthRateCi95PerS: g !== null && isFiniteInterval(g.ci95PerS) ? [g.ci95PerS[0], g.ci95PerS[1]] : null,
    decayRateCi95PerS: d !== null && isFiniteInterval(d.ci95PerS) ? [d.ci95PerS[0], d.ci95PerS[1]] : null,
    effectiveGainCi95PerS:
      g !== null && d !== null && isFiniteInterval(g.ci95PerS) && isFiniteInterval(d.ci95PerS)
        ? sumInterval(g.ratePerS, g.ci95PerS, d.decayRatePerS, d.ci95PerS)
        : null,
    dampingRatioCi95: f !== null && d !== null && dCiPositive ? mapInterval(d.ci95PerS, (a) => dampingRatio(a, f)) : null,
    qFactorCi95: f !== null && d !== null && dCiPositive ? mapInterval(d.ci95PerS, (a) => qFactor(a, f)) : null,
    eFoldingTimeS: g !== null && g.ratePerS > 0 ? eFoldingTimeS(g.ratePerS) : null,
    doublingTimeS: g !== null && g.ratePerS > 0 ? doublingTimeS(g.ratePerS) : null,
    t60S: d !== null ? t60S(d.decayRatePerS) : null,
    limitAmplitudeDbfs: args.limitAmplitudeDbfs ?? null,
  };
  return summary;
}
