/**
 * Heated-tube simulator: integrates the reduced-order model of dsp/rig-model.ts (Galerkin modes, a
 * compact heater with a time-lagged, modified King's-law heat release; Balasubramanian & Sujith
 * 2008, from memory) with fixed-step RK4 for a switched heater power, and renders demo scenarios
 * with their truth from the model's characteristic equation. The model's exports are re-exported here.
 */
import { checkHeaterPower, createRig, firstInstability, leadingMode, linearModes, pressureShape, type LinearMode, type Rig, type RigParams } from './rig-model';
import { createRng } from './synth';

export * from './rig-model';

const SQRT_THIRD = Math.sqrt(1 / 3);

/**
 * Largest RMS of the white modal forcing (dimensionless; the mean flow is 1/3). Driven by white
 * forcing of intensity x², the first mode's amplitude has standard deviation x / sqrt(4 ζ₁ k₁³)
 * ≈ 0.56 x for the default damping (random-vibration result for a damped oscillator, e.g. Crandall &
 * Mark 1963 — from memory), so at 0.1 the noise-driven velocity stays near a sixth of the mean flow.
 */
export const MAX_EXCITATION_RMS = 0.1;

/**
 * Largest RK4 step times the highest Galerkin wavenumber, dt·k_max: RK4 is stable on an undamped
 * oscillator up to 2√2 (Butcher, Numerical Methods for ODEs — from memory); 1 leaves room for the
 * damping and keeps the phase error per step below 1e-3.
 */
const MAX_STEP_TIMES_WAVENUMBER = 1;

function positive(name: string, v: number, unit: string): void {
  if (!Number.isFinite(v) || v <= 0) throw new RangeError(`${name} must be a positive finite number of ${unit}, got ${v}`);
}

/**
 * First Fourier (cosine) coefficient of sqrt|u₀ + U cos θ| over one cycle, (1/π)∫ sqrt|u₀ + U cos θ| cos θ dθ:
 * the part of a King's-law heat release at the acoustic frequency (King 1914 — from memory;
 * REFERENCES.md §4: 0 for u₀ = 0, 0.100381 for u₀ = 1, U = 0.2). Midpoint rule, 200 000 points.
 */
export function kingFirstHarmonic(meanVelocity: number, amplitude: number): number {
  const n = 200000;
  let acc = 0;
  for (let i = 0; i < n; i++) {
    const th = ((i + 0.5) * 2 * Math.PI) / n;
    acc += Math.sqrt(Math.abs(meanVelocity + amplitude * Math.cos(th))) * Math.cos(th);
  }
  return (acc * 2) / n;
}

/** One step of the heater schedule: from atS on, heater power K (dimensionless). */
export interface PowerStep {
  atS: number;
  heaterPower: number;
}

export interface SimulationSpec {
  rig: Rig;
  schedule: PowerStep[];
  durationS: number;
  sampleRateHz: number;
  /** Microphone position from the upstream end, m (default: 0.1 L from the downstream end for open–open, at the closed end otherwise). */
  micPositionM?: number;
  /** RMS of the white modal excitation (flow noise), dimensionless per sample (default 2e-5). */
  excitationRms?: number;
  /** Initial modal velocity amplitude of mode 1 (default 0). */
  initialAmplitude?: number;
  /** RK4 steps per audio sample (default 4). */
  substeps?: number;
  seed?: number;
}

export interface SimulationResult {
  /** Pressure at the microphone, dimensionless (multiply by γ M p̄ for Pa). */
  pressure: Float64Array;
  /** Velocity at the heater u′_f, dimensionless (1/3 = mean flow). */
  heaterVelocity: Float64Array;
}

/**
 * Integrates the nonlinear delay system with fixed-step RK4; the lagged velocity comes from a
 * ring buffer of past u′_f with linear interpolation (stage times fall between steps). Output at
 * sampleRateHz. Allocates its buffers once; the loop allocates nothing.
 */
export function simulateRig(spec: SimulationSpec): SimulationResult {
  const { rig } = spec;
  positive('durationS', spec.durationS, 's');
  positive('sampleRateHz', spec.sampleRateHz, 'Hz');
  if (spec.durationS * spec.sampleRateHz > 2e7) throw new RangeError('simulation too long: durationS × sampleRateHz must stay below 2e7 samples');
  const sched = [...spec.schedule].sort((a, b) => a.atS - b.atS);
  for (const st of sched) {
    if (!Number.isFinite(st.atS) || st.atS < 0) throw new RangeError(`schedule time must be ≥ 0 s, got ${st.atS}`);
    checkHeaterPower(st.heaterPower);
  }
  const substeps = spec.substeps ?? 4;
  if (!Number.isInteger(substeps) || substeps < 1 || substeps > 64) throw new RangeError(`substeps must be an integer from 1 to 64, got ${substeps}`);
  const n = rig.k.length;
  const total = Math.round(spec.durationS * spec.sampleRateHz);
  const dt = 1 / (spec.sampleRateHz * rig.timeScaleS * substeps); // dimensionless step
  if (dt * rig.k[n - 1] > MAX_STEP_TIMES_WAVENUMBER) {
    const needHz = Math.ceil((rig.k[n - 1] / (MAX_STEP_TIMES_WAVENUMBER * rig.timeScaleS * substeps)));
    throw new RangeError(
      `sampleRateHz must be at least ${needHz} Hz for this tube, got ${spec.sampleRateHz} Hz: its highest Galerkin mode is ${(rig.k[n - 1] / (2 * Math.PI * rig.timeScaleS)).toFixed(0)} Hz (fewer modes, modeCount, or a longer tube lower it)`,
    );
  }
  if (rig.tau < dt) throw new RangeError(`heatLagS must be at least one integration step (${(dt * rig.timeScaleS).toExponential(2)} s)`);
  const L = rig.params.lengthM;
  const micM = spec.micPositionM ?? (rig.params.ends === 'open-open' ? 0.9 * L : 0);
  if (!Number.isFinite(micM) || micM < 0 || micM > L) throw new RangeError(`micPositionM must lie within the tube (0 to ${L} m), got ${micM}`);
  const micShape = new Float64Array(n);
  for (let j = 0; j < n; j++) micShape[j] = -pressureShape(rig.params.ends, rig.k[j], micM / L) / rig.k[j];
  const excitation = spec.excitationRms ?? 2e-5;
  if (!Number.isFinite(excitation) || excitation < 0 || excitation > MAX_EXCITATION_RMS) {
    throw new RangeError(`excitationRms must lie from 0 to ${MAX_EXCITATION_RMS}, got ${excitation}`);
  }
  const initialAmplitude = spec.initialAmplitude ?? 0;
  if (!Number.isFinite(initialAmplitude) || Math.abs(initialAmplitude) > 1 / 3) {
    throw new RangeError(`initialAmplitude must lie from −1/3 to 1/3 (the mean flow), got ${initialAmplitude}`);
  }
  const rng = createRng(spec.seed ?? 1);

  const y = new Float64Array(2 * n); // η then ξ = η̇
  const yt = new Float64Array(2 * n);
  const k1 = new Float64Array(2 * n);
  const k2 = new Float64Array(2 * n);
  const k3 = new Float64Array(2 * n);
  const k4 = new Float64Array(2 * n);
  const noise = new Float64Array(n);
  y[0] = initialAmplitude;
  // History of u′_f at every step; enough for the lag plus one step.
  const histLen = Math.ceil(rig.tau / dt) + 4;
  const hist = new Float64Array(histLen);
  let histHead = 0; // index of the value at the current time
  let stepCount = 0;
  const lagSteps = rig.tau / dt;

  const pressure = new Float64Array(total);
  const heaterVelocity = new Float64Array(total);
  let power = 0;
  let schedIdx = 0;

  // u′_f at (current step − lagSteps + offsetSteps), linear interpolation, zero before t = 0.
  const lagged = (offsetSteps: number): number => {
    const back = lagSteps - offsetSteps; // steps into the past, ≥ 0 since τ ≥ dt ≥ offset
    const i0 = Math.floor(back);
    const w = back - i0;
    const a = i0 <= stepCount ? hist[(histHead - i0 + histLen) % histLen] : 0;
    const b = i0 + 1 <= stepCount ? hist[(histHead - i0 - 1 + histLen) % histLen] : 0;
    return a * (1 - w) + b * w;
  };
  const deriv = (state: Float64Array, uLag: number, out: Float64Array): void => {
    const h = power === 0 ? 0 : power * (Math.sqrt(Math.abs(SQRT_THIRD * SQRT_THIRD + uLag)) - SQRT_THIRD);
    for (let j = 0; j < n; j++) {
      const eta = state[j];
      const xi = state[n + j];
      out[j] = xi;
      out[n + j] = -2 * rig.zeta[j] * rig.k[j] * xi - rig.k[j] * rig.k[j] * eta - rig.k[j] * rig.pAtHeater[j] * h + noise[j];
    }
  };
  const uAtHeater = (state: Float64Array): number => {
    let u = 0;
    for (let j = 0; j < n; j++) u += state[j] * rig.uAtHeater[j];
    return u;
  };
  hist[0] = uAtHeater(y);

  for (let i = 0; i < total; i++) {
    const tS = i / spec.sampleRateHz;
    while (schedIdx < sched.length && sched[schedIdx].atS <= tS) power = sched[schedIdx++].heaterPower;
    // White excitation held over one audio sample; scaled so its effect does not depend on substeps.
    for (let j = 0; j < n; j++) noise[j] = excitation === 0 ? 0 : (excitation * rng.normal()) / Math.sqrt(dt * substeps);
    for (let s = 0; s < substeps; s++) {
      deriv(y, lagged(0), k1);
      for (let q = 0; q < 2 * n; q++) yt[q] = y[q] + 0.5 * dt * k1[q];
      const uHalf = lagged(0.5);
      deriv(yt, uHalf, k2);
      for (let q = 0; q < 2 * n; q++) yt[q] = y[q] + 0.5 * dt * k2[q];
      deriv(yt, uHalf, k3);
      for (let q = 0; q < 2 * n; q++) yt[q] = y[q] + dt * k3[q];
      deriv(yt, lagged(1), k4);
      for (let q = 0; q < 2 * n; q++) y[q] += (dt / 6) * (k1[q] + 2 * k2[q] + 2 * k3[q] + k4[q]);
      histHead = (histHead + 1) % histLen;
      hist[histHead] = uAtHeater(y);
      stepCount++;
    }
    let p = 0;
    for (let j = 0; j < n; j++) p += micShape[j] * y[n + j];
    // The inputs are bounded and RK4 runs inside its stability limit, so this guards the model, not the user.
    if (!Number.isFinite(p)) throw new RangeError(`the simulation diverged at ${(i / spec.sampleRateHz).toFixed(3)} s: lower the heater power or the excitation`);
    pressure[i] = p;
    heaterVelocity[i] = hist[histHead];
  }
  return { pressure, heaterVelocity };
}

/** Mean frequency (upward zero crossings, linear interpolation) and RMS level in dBFS of gain·x over [fromS, toS). */
function measureCycle(x: Float64Array, gain: number, fs: number, fromS: number, toS: number): { frequencyHz: number; amplitudeDbfs: number } | null {
  const i0 = Math.max(1, Math.round(fromS * fs));
  const i1 = Math.min(x.length, Math.round(toS * fs));
  let first = Number.NaN;
  let last = Number.NaN;
  let count = 0;
  let sumSq = 0;
  for (let i = i0; i < i1; i++) {
    sumSq += gain * gain * x[i] * x[i];
    if (x[i - 1] < 0 && x[i] >= 0) {
      const t = (i - 1 + x[i - 1] / (x[i - 1] - x[i])) / fs;
      if (count === 0) first = t;
      last = t;
      count++;
    }
  }
  if (count < 3 || i1 <= i0 || sumSq === 0) return null;
  const rms = Math.sqrt(sumSq / (i1 - i0));
  return { frequencyHz: (count - 1) / (last - first), amplitudeDbfs: 20 * Math.log10(rms * Math.SQRT2) };
}

/** A recording made from the simulator: options beyond the simulation itself. */
export interface ScenarioSpec {
  params: RigParams;
  schedule: PowerStep[];
  /** Simulated time, s (exact zeros follow for silenceS). */
  durationS: number;
  sampleRateHz: number;
  /** Largest absolute sample of the simulated part, full scale = 1 (default 0.5). */
  peakLevel?: number;
  /** White measurement noise, dBFS (RMS re a full-scale sine, whose RMS is 1/√2); -Infinity for none. Default −60. */
  noiseDbfs?: number;
  /** Exact digital silence appended at the end, s (default 0.5; a WAV used as a fake microphone needs ≥ 0.25 s). */
  silenceS?: number;
  micPositionM?: number;
  excitationRms?: number;
  seed?: number;
}

/** What the recording holds, from the characteristic equation: one entry per schedule step. */
export interface ScenarioTruth {
  model: string;
  sampleRateHz: number;
  durationS: number;
  silenceFromS: number;
  speedOfSoundMPerS: number;
  timeScaleS: number;
  heatLagS: number;
  /** Lowest heater power at which any oscillating mode turns unstable; null if none does up to MAX_HEATER_POWER. */
  criticalHeaterPower: number | null;
  /** That mode's number and its frequency at that power, Hz; null with criticalHeaterPower. */
  criticalModeN: number | null;
  criticalFrequencyHz: number | null;
  noiseDbfs: number;
  seed: number;
  params: RigParams;
  steps: {
    atS: number;
    heaterPower: number;
    /** The leading mode: the oscillating mode with the largest linear growth rate at this power (leadingMode). */
    mode: number;
    /** Its linear rate, 1/s (> 0 grows) and frequency, Hz. */
    growthRatePerS: number;
    frequencyHz: number;
    /**
     * Positive decay rate, 1/s, when the step lowers the power and no mode then hums: the rate of the
     * mode that led the step before (the one sounding when the power drops).
     */
    decayRatePerS: number | null;
    /** Some oscillating mode grows at this power (the leading mode's rate is > 0). */
    isUnstable: boolean;
    /**
     * Measured on the simulated (noise-free) signal over the last second of the step, when the
     * step is unstable and lasts ≥ 2 s: mean frequency from interpolated upward zero crossings (Hz)
     * and RMS level (dBFS, re a full-scale sine). The nonlinear limit cycle, not a model root.
     */
    limitCycle: { frequencyHz: number; amplitudeDbfs: number } | null;
    /** Every Galerkin mode at this power, non-oscillating roots flagged. */
    modes: LinearMode[];
  }[];
}

/**
 * Renders a heater-power scenario as audio (scaled to peakLevel, with white measurement noise and
 * trailing exact zeros) together with its truth from the characteristic equation.
 */
export function renderScenario(spec: ScenarioSpec): { samples: Float32Array; truth: ScenarioTruth } {
  const rig = createRig(spec.params);
  const peakLevel = spec.peakLevel ?? 0.5;
  if (!Number.isFinite(peakLevel) || peakLevel <= 0 || peakLevel > 1) throw new RangeError(`peakLevel must lie in (0, 1], got ${peakLevel}`);
  const noiseDbfs = spec.noiseDbfs ?? -60;
  if (Number.isNaN(noiseDbfs) || noiseDbfs > 0) throw new RangeError(`noiseDbfs must be ≤ 0 dBFS, got ${noiseDbfs}`);
  const silenceS = spec.silenceS ?? 0.5;
  if (!Number.isFinite(silenceS) || silenceS < 0 || silenceS > 600) throw new RangeError(`silenceS must lie from 0 to 600 s, got ${silenceS}`);
  const seed = spec.seed ?? 1;
  const sim = simulateRig({
    rig,
    schedule: spec.schedule,
    durationS: spec.durationS,
    sampleRateHz: spec.sampleRateHz,
    micPositionM: spec.micPositionM,
    excitationRms: spec.excitationRms,
    seed,
  });
  let peak = 0;
  for (let i = 0; i < sim.pressure.length; i++) peak = Math.max(peak, Math.abs(sim.pressure[i]));
  const gain = peak > 0 ? peakLevel / peak : 0;
  const nSim = sim.pressure.length;
  const samples = new Float32Array(nSim + Math.round(silenceS * spec.sampleRateHz));
  const noiseRms = Number.isFinite(noiseDbfs) ? 10 ** (noiseDbfs / 20) / Math.SQRT2 : 0;
  const rng = createRng(seed + 7919);
  for (let i = 0; i < nSim; i++) samples[i] = gain * sim.pressure[i] + (noiseRms > 0 ? noiseRms * rng.normal() : 0);
  const critical = firstInstability(rig);
  const sorted = [...spec.schedule].sort((a, b) => a.atS - b.atS);
  let previousPower = 0;
  let previousLead = 1;
  const steps = sorted.map((st, i) => {
    const endS = i + 1 < sorted.length ? Math.min(sorted[i + 1].atS, spec.durationS) : spec.durationS;
    const modes = linearModes(rig, st.heaterPower);
    const lead = leadingMode(modes);
    const isDrop = st.heaterPower < previousPower;
    const wasSounding = modes[previousLead - 1];
    previousPower = st.heaterPower;
    previousLead = lead.n;
    const isUnstable = lead.growthRatePerS > 0;
    return {
      atS: st.atS,
      heaterPower: st.heaterPower,
      mode: lead.n,
      growthRatePerS: lead.growthRatePerS,
      frequencyHz: lead.frequencyHz,
      decayRatePerS: isDrop && !isUnstable && wasSounding.isOscillating ? -wasSounding.growthRatePerS : null,
      isUnstable,
      limitCycle: isUnstable && endS - st.atS >= 2 ? measureCycle(sim.pressure, gain, spec.sampleRateHz, endS - 1, endS) : null,
      modes,
    };
  });
  return {
    samples,
    truth: {
      model: 'Galerkin heated-tube model with time-lagged modified King\'s law (Balasubramanian & Sujith 2008, from memory)',
      sampleRateHz: spec.sampleRateHz,
      durationS: samples.length / spec.sampleRateHz,
      silenceFromS: nSim / spec.sampleRateHz,
      speedOfSoundMPerS: rig.cMPerS,
      timeScaleS: rig.timeScaleS,
      heatLagS: rig.tau * rig.timeScaleS,
      criticalHeaterPower: critical ? critical.heaterPower : null,
      criticalModeN: critical ? critical.n : null,
      criticalFrequencyHz: critical ? critical.frequencyHz : null,
      noiseDbfs,
      seed,
      params: spec.params,
      steps,
    },
  };
}
