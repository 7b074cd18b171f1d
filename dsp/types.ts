/**
 * Shared types of the analysis pipeline and its report (the contract of DESIGN.md).
 * Units are in the names: Hz, S (seconds), PerS (amplitude e-folding rate, 1/s), Dbfs.
 * Rates: positive grows, negative decays; `decayRatePerS` fields are positive numbers.
 */

/**
 * Version of the report layout; bump when a field is renamed, dropped or changes meaning.
 * 2: tones are decided by envelope behaviour (a line on a mains multiple that behaves as a hum is a
 * tone; steady lines keep their steady segments); a knock gives ring-down decays marked
 * isImpulseResponse and no onset; tones carry their cycles; the summary gives per-cycle medians.
 */
export const REPORT_VERSION = 2;

export type RegimeKind = 'quiet' | 'growth' | 'steady' | 'decay';

/** A 95 % interval [low, high] in the unit of the value it belongs to. */
export type Interval = [number, number];

/** Configuration of one analysis run. Only sampleRateHz is required. */
export interface AnalysisConfig {
  /** Rate of the samples given to push(), Hz (500 to 192 000; dsp/condition.ts MIN_SAMPLE_RATE_HZ). */
  sampleRateHz: number;
  /** Band of interest, Hz. Defaults 20 and 4000. */
  bandLowHz?: number;
  bandHighHz?: number;
  /**
   * Mains frequency, Hz (50 or 60), used only to label lines on its multiples; 0 or absent:
   * taken from the steady lines of the record when one lies on a multiple of 50 or 60 Hz.
   */
  mainsHz?: number;
  /**
   * Bits of the sample format over full scale (a 16-bit WAV: 16; a CSV: log2(2/step) of its
   * printed resolution after scaling, maybe fractional). A tone must stand above the format's
   * quantisation error (dsp/levels.ts quantisationFloorDbfs): a weaker line may be a product of
   * quantising a strong tone. Omitted (or 0) for float samples and live audio.
   */
  sampleBits?: number;
  /**
   * Announce onsets as they happen (push()'s `onsets`, from the short-frame detector in
   * dsp/live-onset.ts). Default true. A driver that wants the report only (the command line on
   * files) sets false: the detector, the largest stage of push(), is skipped, push() returns no
   * onsets, and the report is the same (its onsets come from finish()'s fits).
   */
  announceOnsets?: boolean;
}

/** A user marker typed while recording ("driving off", "firing rate 60 %"). */
export interface Marker {
  timeS: number;
  /** 'driving-on' | 'driving-off' | 'setting' | 'note' (free for other uses). */
  kind: string;
  label: string;
  /** Optional numeric control value (firing rate %, heater power W, ...). */
  value?: number;
  unit?: string;
}

/** One row of the per-frame track (about 50-100 rows per second). */
export interface TrackFrame {
  timeS: number;
  /** Tracked main tone, Hz; NaN when no tone. */
  frequencyHz: number;
  /** Band-limited envelope amplitude of the main tone, dBFS (full scale sine = 0 dBFS, RMS-based). */
  amplitudeDbfs: number;
  /** Broadband level of the frame, dBFS (RMS re full scale). */
  levelDbfs: number;
  state: RegimeKind;
  /** True when the frame held clipped samples. */
  isClipped: boolean;
  /** True for the first frame after a gap in the input (suspended capture). */
  isAfterGap: boolean;
}

export interface Onset {
  timeS: number;
  frequencyHz: number;
}

export interface Segment {
  kind: RegimeKind;
  startS: number;
  endS: number;
  frequencyHz: number;
  /** Linear (small-amplitude) rate, 1/s; null for quiet segments. */
  ratePerS: number | null;
  rateCi95PerS: Interval | null;
  /**
   * Which model produced the rate: 'exponential', 'stuart-landau', 'generalised-saturation',
   * 'log-linear' (a straight line through ln A, used only for a live segment when the exponential
   * fit fails), or null. Rates of live segments (push()) are provisional; finish() fits every
   * segment again and its report holds the final figures.
   */
  model?: string | null;
  /** Limit-cycle amplitude in dBFS for growth-into-saturation and steady segments. */
  limitAmplitudeDbfs?: number | null;
  /** A decay that rings down after a step (a knock): an impulse response, with no onset. */
  isImpulseResponse?: boolean;
}

/**
 * One cycle of a tone: its onset, growth, limit level and decay, each with a 95 % interval (null
 * where the cycle has no such part: a tone sounding from the start has no onset, a ring-down no
 * growth). decayRatePerS is a positive number.
 */
export interface Cycle {
  startS: number;
  endS: number;
  onsetS: number | null;
  onsetCi95S: Interval | null;
  growthRatePerS: number | null;
  growthRateCi95PerS: Interval | null;
  limitAmplitudeDbfs: number | null;
  limitAmplitudeCi95Dbfs: Interval | null;
  decayRatePerS: number | null;
  decayRateCi95PerS: Interval | null;
  /** The cycle is a ring-down after a knock. */
  isImpulseResponse: boolean;
}

/** A tone (or steady line) of the record. */
export interface ToneEntry {
  frequencyHz: number;
  /** Its envelope never grew or decayed exponentially (steps only: a line switched on and off). */
  isSteadyLine: boolean;
  /** It lies on a multiple (1st-4th) of the mains frequency: a label, not a rule. */
  isMainsFrequency?: boolean;
  /** Its cycles in time order. */
  cycles?: Cycle[];
  /**
   * Lines grouped under this tone as its harmonics (near k·f with an envelope locked to the
   * tone's, dsp/locking.ts), so they are not tones of their own. Absent when not listed.
   */
  harmonics?: HarmonicEntry[];
}

/** A harmonic of a tone: its order k (2, 3, ...) and its frequency, Hz. */
export interface HarmonicEntry {
  k: number;
  frequencyHz: number;
}

export interface NoiseDriven {
  startS: number;
  endS: number;
  frequencyHz: number;
  decayRatePerS: number;
  decayRateCi95PerS: Interval;
  /** The two estimates behind decayRatePerS. */
  lorentzianDecayRatePerS?: number;
  lorentzianCi95PerS?: Interval;
  autocorrelationDecayRatePerS?: number;
  autocorrelationCi95PerS?: Interval;
}

/** Regime a stretch of noise-driven operation supports ('undetermined' when the data cannot tell). */
export type NoiseRegime = 'stable' | 'near-threshold' | 'humming' | 'undetermined';

/**
 * The mode's normal form du = (ν − κ|u|²)u dt + σ dW fitted to one stretch of steady operation (quiet
 * or steady hum) of one tone, from the statistics of its envelope (dsp/mode-statistics.ts).
 */
export interface ModeStatistics {
  frequencyHz: number;
  startS: number;
  endS: number;
  /** ν, 1/s: negative when stable (its magnitude is the net damping), positive when humming. */
  linearGrowthRatePerS: number | null;
  linearGrowthRateCi95PerS: Interval | null;
  /** κ, 1/(s·FS²), FS the full-scale peak amplitude of the tone. */
  saturation: number | null;
  /** σ², FS²/s. */
  noiseIntensity: number | null;
  regime: NoiseRegime;
  /** 'amplitude-pdf', 'drift-diffusion' or 'lorentzian' ('+disagree' when the routes disagree and the interval covers them all). */
  method: string;
  /** Why the regime is 'undetermined' (too short, second mode in the band, clipped input). */
  reason?: string;
}

export interface Summary {
  frequencyHz: number | null;
  growthRatePerS: number | null;
  decayRatePerS: number | null;
  effectiveGainPerS: number | null;
  dampingRatio: number | null;
  qFactor: number | null;
  growthRateCi95PerS?: Interval | null;
  decayRateCi95PerS?: Interval | null;
  effectiveGainCi95PerS?: Interval | null;
  dampingRatioCi95?: Interval | null;
  qFactorCi95?: Interval | null;
  eFoldingTimeS?: number | null;
  doublingTimeS?: number | null;
  t60S?: number | null;
  limitAmplitudeDbfs?: number | null;
  /** Median across the main tone's cycles of their growth and decay rates, 1/s, and the spread (1.4826 × median absolute deviation, a robust sd). */
  growthRateCycleMedianPerS?: number | null;
  growthRateCycleSpreadPerS?: number | null;
  decayRateCycleMedianPerS?: number | null;
  decayRateCycleSpreadPerS?: number | null;
  /** Cycles of the main tone. */
  cycleCount?: number;
}

export interface ClippedSpan {
  startS: number;
  endS: number;
}

export interface Report {
  reportVersion: number;
  sampleRateHz: number;
  durationS: number;
  onsets: Onset[];
  segments: Segment[];
  noiseDriven: NoiseDriven[];
  /** Linear growth rate from the noise, per tone and stretch of steady operation. */
  modeStatistics?: ModeStatistics[];
  summary: Summary;
  /** Tones and steady lines seen (mains hum included), strongest first, with their cycles. */
  tones?: ToneEntry[];
  clipped?: ClippedSpan[];
  warnings?: string[];
}

/** What push() reports: the rows added since the previous call (those a gap() settled included) and events that closed. Valid until the next push(). */
export interface AnalysisUpdate {
  frames: TrackFrame[];
  onsets: Onset[];
  segments: Segment[];
  /** Latest magnitude spectrum (dBFS per bin) of the analysis frame, and its bin width. */
  spectrumDbfs: Float32Array | null;
  spectrumBinHz: number;
  /** Peak absolute sample value of this block (0-1 full scale) and whether it clipped. */
  peakAbs: number;
  isClipped: boolean;
}

/** The streaming analysis: one object for the live microphone and for files. */
export interface Analysis {
  push(block: Float32Array): AnalysisUpdate;
  /** Input missing for this many samples (suspended capture): the track shows a gap, fits do not join across it. */
  gap(missingSamples: number): void;
  mark(marker: Marker): void;
  finish(): Report;
}

/**
 * Envelope samples handed to the fits (dsp/fit.ts). `power` is the mean-square envelope A² of the
 * tone in a narrow band (background included), sampled at `timeS`; `bandwidthHz` is the envelope
 * low-pass bandwidth, which sets how correlated neighbouring samples are.
 */
export interface EnvelopeSeries {
  timeS: Float64Array;
  power: Float64Array;
  bandwidthHz: number;
  /** When each sample is the mean of several envelope samples (tone-store.ts buildSeries): theirs. */
  blocks?: EnvelopeBlocks;
}

/** The envelope samples behind block means: sample i of a series averages ticks start[i] .. start[i + 1] − 1 of tickS (their times, s). */
export interface EnvelopeBlocks {
  tickS: Float64Array;
  start: Int32Array;
}

/** Result of fitting A²(t) = P0·exp(2 s (t − t0)) + N² (dsp/fit.ts fitExponential). */
export interface RateFit {
  isValid: boolean;
  ratePerS: number;
  ci95PerS: Interval;
  /** Amplitude A at refTimeS (same unit as sqrt(power)). */
  amplitudeAtRef: number;
  refTimeS: number;
  backgroundPower: number;
  /** Effective number of independent envelope samples used for the interval. */
  nEffective: number;
  /** Why the fit is invalid, when it is. */
  reason?: string;
}

/** Growth into saturation (Stuart–Landau closed form, or a more flexible model when the data reject it). */
export interface SaturationFit extends RateFit {
  model: 'stuart-landau' | 'generalised-saturation';
  limitAmplitude: number;
  /** Time at which A reaches half the limit amplitude, s. */
  halfTimeS: number;
}

/** One decay-rate estimate with its interval (positive number, 1/s). */
export interface DecayEstimate {
  isValid: boolean;
  decayRatePerS: number;
  ci95PerS: Interval;
  reason?: string;
}

/** Duct geometry and gas state, as stored with a session and used by dsp/duct.ts. Lengths in m, temperatures in °C. */
export interface DuctGeometry {
  lengthM: number;
  diameterM: number;
  ends: 'open-open' | 'open-closed' | 'closed-closed';
  openEnd: 'unflanged' | 'flanged' | 'none';
  /** For an open–closed duct: which end is closed (default 'downstream'). */
  closedEnd?: 'upstream' | 'downstream';
  gasTemperatureC: number;
  /** Heater (compact heat source) position from the upstream (lower) end, m, and the gas temperature downstream of it, °C. */
  heaterPositionM?: number;
  hotTemperatureC?: number;
}
