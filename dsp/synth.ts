/**
 * Seeded test signals of known truth: tones with chosen envelopes, white noise at a chosen level
 * with loudness steps, mains hum with harmonics, and noise-driven resonances. Used by the tests,
 * the bench and the demo generator. Pure: the seed fixes every sample.
 */

/** Small seeded PRNG (mulberry32, public-domain algorithm by T. Ettinger) with Gaussian draws (Box–Muller). */
export interface Rng {
  /** Uniform in [0, 1). */
  uniform(): number;
  /** Standard normal. */
  normal(): number;
}

export function createRng(seed: number): Rng {
  let a = seed >>> 0;
  let spare = NaN;
  const uniform = (): number => {
    a = (a + 0x6d2b79f5) >>> 0;
    let t = a;
    t = Math.imul(t ^ (t >>> 15), t | 1);
    t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
    return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
  };
  const normal = (): number => {
    if (!Number.isNaN(spare)) {
      const s = spare;
      spare = NaN;
      return s;
    }
    let u = uniform();
    while (u <= 1e-300) u = uniform();
    const r = Math.sqrt(-2 * Math.log(u));
    const th = 2 * Math.PI * uniform();
    spare = r * Math.sin(th);
    return r * Math.cos(th);
  };
  return { uniform, normal };
}

/** Amplitude (peak, full scale = 1) of a tone as a function of time in seconds. */
export type EnvelopeFn = (timeS: number) => number;

export interface ToneSpec {
  frequencyHz: number;
  envelope: EnvelopeFn;
  phaseRad?: number;
  /** Extra harmonics as [order, relative amplitude] pairs. */
  harmonics?: [number, number][];
}

export interface SignalSpec {
  sampleRateHz: number;
  durationS: number;
  tones?: ToneSpec[];
  /** RMS of white Gaussian noise (full scale = 1). */
  noiseRms?: number;
  /** Broadband loudness steps: from atS on, the noise is scaled by 10^(gainDb/20). */
  noiseSteps?: { atS: number; gainDb: number }[];
  seed?: number;
}

/** Renders a signal; tones sum with white noise. */
export function synthesize(spec: SignalSpec): Float32Array {
  const fs = spec.sampleRateHz;
  const n = Math.round(spec.durationS * fs);
  const out = new Float32Array(n);
  for (const tone of spec.tones ?? []) {
    const w = (2 * Math.PI * tone.frequencyHz) / fs;
    const ph = tone.phaseRad ?? 0;
    const harm = tone.harmonics ?? [];
    for (let i = 0; i < n; i++) {
      const a = tone.envelope(i / fs);
      if (a === 0) continue;
      let v = Math.cos(w * i + ph);
      for (const [order, rel] of harm) v += rel * Math.cos(order * (w * i + ph));
      out[i] += a * v;
    }
  }
  const noiseRms = spec.noiseRms ?? 0;
  if (noiseRms > 0) {
    const rng = createRng(spec.seed ?? 1);
    const steps = [...(spec.noiseSteps ?? [])].sort((p, q) => p.atS - q.atS);
    let k = 0;
    let gain = noiseRms;
    for (let i = 0; i < n; i++) {
      while (k < steps.length && i / fs >= steps[k].atS) gain = noiseRms * 10 ** (steps[k++].gainDb / 20);
      out[i] += gain * rng.normal();
    }
  }
  return out;
}

/** Constant amplitude between startS and endS (zero elsewhere). */
export function steadyEnvelope(amplitude: number, startS = 0, endS = Infinity): EnvelopeFn {
  return (t) => (t >= startS && t < endS ? amplitude : 0);
}

/** A exp(rate (t − refS)) for t ≥ startS (zero before). */
export function exponentialEnvelope(amplitudeAtRef: number, ratePerS: number, refS = 0, startS = 0): EnvelopeFn {
  return (t) => (t >= startS ? amplitudeAtRef * Math.exp(ratePerS * (t - refS)) : 0);
}

/**
 * Hum cycle: Stuart–Landau growth dA/dt = sA − kA³ from `startAmplitude` at onsetS into the limit
 * amplitude, then from offS a free exponential decay at decayPerS (positive). Closed form of the
 * Landau equation: A(t) = A∞ / sqrt(1 + (A∞²/A0² − 1) exp(−2 s (t − t0))) (REFERENCES.md §6).
 */
export function humCycleEnvelope(p: {
  onsetS: number;
  startAmplitude: number;
  growthPerS: number;
  limitAmplitude: number;
  offS: number;
  decayPerS: number;
}): EnvelopeFn {
  const ratio = (p.limitAmplitude * p.limitAmplitude) / (p.startAmplitude * p.startAmplitude) - 1;
  const landau = (t: number): number => p.limitAmplitude / Math.sqrt(1 + ratio * Math.exp(-2 * p.growthPerS * (t - p.onsetS)));
  const atOff = landau(p.offS);
  return (t) => {
    if (t < p.onsetS) return 0;
    if (t < p.offS) return landau(t);
    return atOff * Math.exp(-p.decayPerS * (t - p.offS));
  };
}

/** Mains hum: fundamental (50 or 60 Hz) with harmonics 2..count at relative level rel^(k−1). */
export function mainsHum(frequencyHz: number, amplitude: number, count = 5, rel = 0.5): ToneSpec {
  const harmonics: [number, number][] = [];
  for (let k = 2; k <= count; k++) harmonics.push([k, rel ** (k - 1)]);
  return { frequencyHz, envelope: steadyEnvelope(amplitude), harmonics };
}

/**
 * A stable mode excited by white noise: x'' + 2α x' + ω0² x = ξ. Exact discrete update of the
 * analytic signal z (complex Ornstein–Uhlenbeck, dz = (−α + iω0) z dt + noise), x = Re z
 * (REFERENCES.md §7). `rmsAmplitude` sets the RMS of x.
 */
export function noiseDrivenMode(p: {
  sampleRateHz: number;
  durationS: number;
  frequencyHz: number;
  decayPerS: number;
  rmsAmplitude: number;
  seed?: number;
}): Float32Array {
  const fs = p.sampleRateHz;
  const n = Math.round(p.durationS * fs);
  const rng = createRng(p.seed ?? 7);
  const decay = Math.exp(-p.decayPerS / fs);
  const rot = (2 * Math.PI * p.frequencyHz) / fs;
  const ar = decay * Math.cos(rot);
  const ai = decay * Math.sin(rot);
  // Stationary E|z|² = 2 rms² (x = Re z carries half); per-step innovation keeps it stationary.
  const varZ = 2 * p.rmsAmplitude * p.rmsAmplitude;
  const q = Math.sqrt((varZ * (1 - decay * decay)) / 2);
  let zr = Math.sqrt(varZ / 2) * rng.normal();
  let zi = Math.sqrt(varZ / 2) * rng.normal();
  const out = new Float32Array(n);
  for (let i = 0; i < n; i++) {
    const nr = ar * zr - ai * zi + q * rng.normal();
    const ni = ar * zi + ai * zr + q * rng.normal();
    zr = nr;
    zi = ni;
    out[i] = zr;
  }
  return out;
}

/** A mode obeying the normal form with noise, its exact envelope and the recording of it. */
export interface NormalFormSignal {
  /** The recording: Re(u·e^{iωt}) plus white measurement noise. */
  samples: Float32Array;
  /** The envelope u (noise-free, unfiltered) every `envelopeEvery` samples, for the ideal estimator. */
  envelopeRe: Float64Array;
  envelopeIm: Float64Array;
  envelopeRateHz: number;
}

/**
 * A mode driven by noise through the normal form of a Hopf bifurcation,
 * du = (ν − κ|u|²)u dt + σ dW (Itô, W complex with E[dW dW*] = dt; REFERENCES.md §40), integrated
 * by Euler–Maruyama at the sample rate (Kloeden & Platen 1992 [memory]; the step 1/fs is at least
 * 800 times shorter than any relaxation time at |ν| ≤ 20 1/s) and mapped onto a carrier:
 * x = Re(u e^{iωt}) + measurement noise of RMS `measurementNoiseRms`. The start is drawn near the
 * stationary law (Rayleigh for ν < 0, the limit-cycle amplitude √(ν/κ) otherwise) and a burn-in of
 * 10 relaxation times is run before the first sample.
 */
export function normalFormMode(p: {
  sampleRateHz: number;
  durationS: number;
  frequencyHz: number;
  growthRatePerS: number;
  saturation: number;
  noiseIntensity: number;
  measurementNoiseRms: number;
  envelopeEvery?: number;
  seed?: number;
}): NormalFormSignal {
  const fs = p.sampleRateHz;
  const n = Math.round(p.durationS * fs);
  const every = p.envelopeEvery ?? 1;
  const rng = createRng(p.seed ?? 11);
  const dt = 1 / fs;
  const nu = p.growthRatePerS;
  const kappa = p.saturation;
  const q = Math.sqrt((p.noiseIntensity * dt) / 2);
  const start = nu > 0 && kappa > 0 ? Math.sqrt(nu / kappa) : Math.sqrt(p.noiseIntensity / (2 * Math.max(Math.abs(nu), 1e-3)));
  let ur = start;
  let ui = 0;
  const relax = Math.max(Math.abs(nu), 2 * nu, Math.sqrt(Math.max(kappa * p.noiseIntensity, 1e-12)));
  const burn = Math.min(Math.round((10 / relax) * fs), 60 * fs);
  const step = (): void => {
    const c = (nu - kappa * (ur * ur + ui * ui)) * dt;
    const nr = ur + c * ur + q * rng.normal();
    const ni = ui + c * ui + q * rng.normal();
    ur = nr;
    ui = ni;
  };
  for (let i = 0; i < burn; i++) step();
  const out = new Float32Array(n);
  const m = Math.floor((n - 1) / every) + 1;
  const envRe = new Float64Array(m);
  const envIm = new Float64Array(m);
  const w = (2 * Math.PI * p.frequencyHz) / fs;
  const noise = p.measurementNoiseRms;
  for (let i = 0; i < n; i++) {
    if (i % every === 0) {
      envRe[i / every] = ur;
      envIm[i / every] = ui;
    }
    // float64 phase: w·i errs by ~1e-9 rad after 10⁷ samples.
    const ph = w * i;
    out[i] = ur * Math.cos(ph) - ui * Math.sin(ph) + noise * rng.normal();
    step();
  }
  return { samples: out, envelopeRe: envRe, envelopeIm: envIm, envelopeRateHz: fs / every };
}
