/**
 * The streaming analysis (docs/DESIGN.md): one object for the live microphone and for files.
 * push(block) conditions the samples (condition.ts), keeps their recent history (history.ts),
 * frames the spectrum (spectrum.ts), follows each tone's identity, envelope and regime
 * (tones.ts, tone-store.ts, regime.ts), announces onsets live with the short-frame detector
 * (live-onset.ts) and emits the live outputs (live.ts); finish() relabels noise (noise-label.ts), groups the tracks into tones
 * (grouping.ts), fits every segment (segment-fit.ts) and assembles the report (report.ts). Every
 * stage runs sample by sample on its own state and frame work happens at fixed sample counts, so
 * results do not depend on how the input is cut into blocks. The regime of a tone reads its
 * envelope only up to the centre of the latest spectral frame, so the band background (from that
 * frame) and the envelope describe the same moment.
 */
import { CONDITION_MAX_BLOCK, createConditionState, gapCondition, stepCondition, type ConditionState, type SpanList } from './condition';
import { groupTones, wideBandIsClear } from './grouping';
import { breakHistory, createHistory, stepHistory, storeFrame, type History } from './history';
import { beginLive, collectLive, createLiveState, emitRows, liveSegments, type LiveState } from './live';
import { classifyTransitions } from './line-class';
import { relabelNoiseSegments } from './noise-label';
import { closeQuietStretch, createQuietStore, openQuietStretch, QUIET_AFTER_DECAY_S, QUIET_GUARD_S, stepQuietFrame, stepQuietStore, type QuietStore, type ResonanceContext } from './quiet-store';
import { beginRegimeStep, finishRegime, STATE_DECAY, STATE_GROWTH, STATE_QUIET, STATE_STEADY } from './regime';
import { modeStatisticsEntry } from './mode-statistics';
import { closeSteadyStretch, createSteadyStore, openSteadyStretch, STEADY_SETTLE_S, stepSteadyStore, type SteadyStore } from './steady-store';
import { assembleReport } from './report';
import { fitReachS, fitSegment, type FittedSegment } from './segment-fit';
import { computeSpectrumFrame, createSpectrumState, feedSpectrum, resetSpectrumFraming, type SpectrumState } from './spectrum';
import { createTimeBase, jAtTime, rebaseAfterGap, timeOfJ, type TimeBase } from './time-base';
import { createToneEnvelope, ENVELOPE_RATE_HZ } from './tone-store';
import { createLiveOnsetState, gapLiveOnset, stepLiveOnset, type LiveOnsetState } from './live-onset';
import { advanceRegime, breakTones, createToneSet, maxEnvelopeChunk, resumeTonesAfterGap, retireIdleTones, stepToneEnvelopes, stepTonesAtFrame, type ToneSet } from './tones';
import { quantisationFloorDbfs } from './levels';
import type { Analysis, AnalysisConfig, AnalysisUpdate, ClippedSpan, Marker, ModeStatistics, Report, Segment } from './types';

/** Analysis frame length, s (rounded to a power of two of samples): ~3 Hz bins. */
const FRAME_S = 0.32;

/** Mutable per-run state: the states of the stages. */
interface PipelineState {
  cfg: Required<AnalysisConfig>;
  cond: ConditionState;
  /** Analysis sample rate, Hz. */
  fsA: number;
  spec: SpectrumState;
  tb: TimeBase;
  hist: History;
  tones: ToneSet;
  quiet: QuietStore;
  /** Steady-hum stretches (sharing the quiet store's ring) and the growth rate from noise of quiet stretches. */
  steady: SteadyStore;
  quietModeStatistics: ModeStatistics[];
  live: LiveState;
  /**
   * Short-frame sequential onset detector (live-onset.ts): the one source of live onsets. The
   * regime's confirmation on the long frame comes half a frame late and cannot yet tell a step or a
   * knock from a growth (finish() does), so it announces nothing.
   */
  liveOnset: LiveOnsetState;
  markers: Marker[];
  warnings: string[];
  spectrumDbfs: Float32Array;
  hasSpectrum: boolean;
  /** spectrumDbfs lags the latest frame (converted when read). */
  isSpectrumDbStale: boolean;
  sawFrame: boolean;
  isFinished: boolean;
}

function createPipelineState(config: AnalysisConfig): PipelineState {
  const cfg: Required<AnalysisConfig> = {
    sampleRateHz: config.sampleRateHz,
    bandLowHz: config.bandLowHz ?? 20,
    bandHighHz: config.bandHighHz ?? 4000,
    mainsHz: config.mainsHz ?? 0,
    sampleBits: config.sampleBits ?? 0,
    announceOnsets: config.announceOnsets ?? true,
  };
  if (!(cfg.mainsHz === 0 || cfg.mainsHz === 50 || cfg.mainsHz === 60)) throw new RangeError(`mainsHz must be 50 or 60 Hz (or 0: detect), got ${cfg.mainsHz}`);
  const cond = createConditionState(cfg);
  const fsA = cond.outputRateHz;
  const frameSize = 2 ** Math.round(Math.log2(FRAME_S * fsA));
  const spec = createSpectrumState({ sampleRateHz: fsA, frameSize, hopSize: frameSize / 2 });
  const envM = Math.max(1, Math.round(fsA / ENVELOPE_RATE_HZ));
  const probe = createToneEnvelope(fsA, envM);
  const loBin = Math.max(1, Math.floor(cond.bandLowHz / spec.binHz));
  const quiet = createQuietStore(fsA, spec);
  const hiBin = Math.min(spec.binCount - 1, Math.ceil(cond.bandHighHz / spec.binHz));
  return {
    cfg,
    cond,
    fsA,
    spec,
    tb: createTimeBase({ inputRateHz: cfg.sampleRateHz, decimation: cond.decimation, conditionDelayS: cond.delayS, envM, envDelayS: probe.delayS }),
    hist: createHistory({ analysisRateHz: fsA, spec, envRateHz: probe.outputRateHz, envBandwidthHz: probe.bandwidthHz, loBin, hiBin }),
    tones: createToneSet(spec, fsA, envM),
    quiet,
    steady: createSteadyStore(quiet.ring, fsA),
    quietModeStatistics: [],
    live: createLiveState(probe.outputRateHz),
    liveOnset: createLiveOnsetState({ sampleRateHz: fsA, bandLowHz: cond.bandLowHz, bandHighHz: cond.bandHighHz }),
    markers: [],
    warnings: [],
    spectrumDbfs: new Float32Array(spec.binCount).fill(-200),
    hasSpectrum: false,
    isSpectrumDbStale: false,
    sawFrame: false,
    isFinished: false,
  };
}

function resonanceContext(ps: PipelineState): ResonanceContext {
  return {
    spec: ps.spec,
    loBin: ps.hist.loBin,
    hiBin: ps.hist.hiBin,
    bandHighHz: ps.cond.bandHighHz,
    steadyHz: [...ps.tones.alive, ...ps.tones.retired].filter((t) => t.isSteadyLine || t.regime.state === STATE_STEADY).map((t) => t.tone.freqHz),
  };
}

function closeQuiet(ps: PipelineState, jEnd: number): void {
  if (!ps.quiet.isOpen) return;
  const timeOf = (j: number): number => timeOfJ(ps.tb, j);
  closeQuietStretch(ps.quiet, jEnd, ps.hist, resonanceContext(ps), timeOf, ps.warnings, (x, centreHz, j0) =>
    ps.quietModeStatistics.push(modeStatisticsEntry(x, ps.fsA, { centreHz, startS: Math.max(0, timeOf(j0)), endS: timeOf(jEnd - 1), isClipped: ps.hist.lastClipJ >= j0 })),
  );
}

function closeSteady(ps: PipelineState, jEnd: number): void {
  closeSteadyStretch(ps.steady, jEnd, (j) => timeOfJ(ps.tb, j), (j) => ps.hist.lastClipJ >= j);
}

/**
 * Steady-hum store: open while every active tone holds its limit cycle, closed (back to where a
 * tone started to grow or decay again) when one leaves it. Never open with the quiet store.
 */
function updateSteady(ps: PipelineState): void {
  const { tb } = ps;
  const steadyHz: number[] = [];
  let changeJ = Infinity;
  for (const tr of ps.tones.alive) {
    if (tr.isSteadyLine) continue;
    const st = tr.regime.state;
    if (st === STATE_STEADY) steadyHz.push(tr.tone.freqHz);
    else if (st === STATE_GROWTH || st === STATE_DECAY) changeJ = Math.min(changeJ, jAtTime(tb, ps.fsA, tr.timeS[Math.min(tr.regime.segStart, tr.n - 1)]));
  }
  const isSteady = changeJ === Infinity && steadyHz.length > 0;
  if (!isSteady && ps.steady.isOpen) closeSteady(ps, Math.max(ps.steady.startJ, Math.min(tb.j, changeJ) - Math.round(QUIET_GUARD_S * ps.fsA)));
  else if (isSteady && !ps.steady.isOpen && !ps.quiet.isOpen) openSteadyStretch(ps.steady, tb.j + Math.round(STEADY_SETTLE_S * ps.fsA), steadyHz);
}

/** Work done at each spectral frame. */
function processFrame(ps: PipelineState): void {
  const { spec, tb, hist, tones } = ps;
  computeSpectrumFrame(spec);
  ps.sawFrame = true;
  const frameIdx = spec.frameCount - 1;
  const tF = timeOfJ(tb, tb.j - 1 - (spec.frameSize - 1) / 2);
  storeFrame(hist, frameIdx, spec.power, tF);
  stepQuietFrame(ps.quiet, hist, frameIdx, tb.j);
  stepTonesAtFrame(tones, spec, hist, tb, frameIdx, tF, hist.lastClipJ >= tb.j - spec.frameSize);
  // Regimes up to the frame centre.
  let anyActive = false;
  let earliestGrowthJ = Infinity;
  for (const tr of tones.alive) {
    beginRegimeStep(tr.regime);
    advanceRegime(hist, spec.frameCount, tr, tF);
    collectLive(ps.live, tr);
    if (!tr.isSteadyLine && tr.regime.state > STATE_QUIET) {
      anyActive = true;
      // Where this tone left the quiet state, in analysis samples.
      const segs = tr.regime.segments;
      const startIdx = segs.length > 0 ? segs[segs.length - 1].endIdx : tr.regime.segStart;
      const jAt = jAtTime(tb, ps.fsA, tr.timeS[Math.min(startIdx, tr.n - 1)]);
      if (jAt < earliestGrowthJ) earliestGrowthJ = jAt;
    }
  }
  emitRows(ps.live, tb, hist, tones.alive, tF);
  updateSteady(ps);
  // Quiet store for noise-driven damping.
  if (anyActive && ps.quiet.isOpen) closeQuiet(ps, Math.max(ps.quiet.startJ, Math.min(tb.j, earliestGrowthJ) - Math.round(QUIET_GUARD_S * ps.fsA)));
  else if (!anyActive && !ps.quiet.isOpen) {
    // The stretch starts a guard after the last tone went quiet, so a decay's tail stays out.
    openQuietStretch(ps.quiet, spec.frameCount > 1 ? tb.j + Math.round(QUIET_AFTER_DECAY_S * ps.fsA) : tb.j);
  }
  retireIdleTones(tones, spec, hist, frameIdx);
}

/** Processes the conditioner's output samples. */
function processConditioned(ps: PipelineState): void {
  const { cond, tb, hist, tones, spec } = ps;
  const x = cond.out;
  const cnt = cond.outCount;
  let i = 0;
  while (i < cnt) {
    const k = Math.min(cnt - i, spec.toFrame, maxEnvelopeChunk(tones));
    const j0 = tb.j;
    stepQuietStore(ps.quiet, x, i, i + k, j0);
    stepSteadyStore(ps.steady, x, i, i + k, j0);
    const j = stepHistory(hist, x, cond.outUnusable, i, i + k, j0, tb.envM);
    stepToneEnvelopes(tones, x, i, i + k, j0, tb, hist);
    if (ps.cfg.announceOnsets) {
      stepLiveOnset(ps.liveOnset, x, i, i + k);
      for (let q = 0; q < ps.liveOnset.onsetCount; q++) ps.live.onsets.push({ timeS: timeOfJ(tb, ps.liveOnset.onsetJ[q]), frequencyHz: ps.liveOnset.onsetFreqHz[q] });
    }
    tb.j = j;
    if (feedSpectrum(spec, x, i, i + k)) processFrame(ps);
    i += k;
  }
}

/**
 * The latest frame's spectrum in dBFS, null before the first frame. Only the analysed band is
 * converted (the rest stays at the floor value). 10·log10 p is taken as (10/ln 10)·ln p: Math.log
 * costs about 60 % of Math.log10 and the float32 dB agree. The frame's power stays in the spectrum
 * state until the next frame, so a late conversion gives the numbers an immediate one would.
 */
function latestSpectrumDbfs(ps: PipelineState): Float32Array | null {
  if (!ps.hasSpectrum) return null;
  if (ps.isSpectrumDbStale) {
    const p = ps.spec.power;
    const out = ps.spectrumDbfs;
    const hi = Math.min(out.length, ps.hist.hiBin + 1);
    const dbPerNeper = 10 / Math.LN10;
    for (let k = 0; k < hi; k++) out[k] = dbPerNeper * Math.log(p[k] > 1e-20 ? p[k] : 1e-20);
    ps.isSpectrumDbStale = false;
  }
  return ps.spectrumDbfs;
}

function push(ps: PipelineState, block: Float32Array): AnalysisUpdate {
  if (ps.isFinished) throw new Error('push() after finish(): start a new analysis');
  ps.sawFrame = false;
  let peak = 0;
  let isClipped = false;
  for (let s = 0; s < block.length; s += CONDITION_MAX_BLOCK) {
    const part = block.subarray(s, Math.min(block.length, s + CONDITION_MAX_BLOCK));
    stepCondition(ps.cond, part);
    if (ps.cond.peakAbs > peak) peak = ps.cond.peakAbs;
    if (ps.cond.isClipped) isClipped = true;
    processConditioned(ps);
  }
  ps.tb.durationInputSamples += block.length;
  if (ps.sawFrame) {
    ps.hasSpectrum = true;
    ps.isSpectrumDbStale = true;
  }
  const { frames, onsets, closed } = ps.live;
  // Fresh outputs from here on: rows and segments a gap() settles before the next push go there,
  // not into this update, which its reader may already have copied.
  beginLive(ps.live);
  let segments: Segment[] | null = null;
  return {
    frames,
    onsets,
    // Fitted when first read (a reader of the report alone never pays for the live fits).
    get segments() {
      segments ??= liveSegments(closed);
      return segments;
    },
    // Converted when first read (a reader of the report alone never pays for the logarithms).
    get spectrumDbfs() {
      return latestSpectrumDbfs(ps);
    },
    spectrumBinHz: ps.spec.binHz,
    peakAbs: peak,
    isClipped,
  };
}

function gap(ps: PipelineState, missingSamples: number): void {
  if (!(missingSamples > 0) || !Number.isFinite(missingSamples)) return;
  const missing = Math.round(missingSamples);
  const { tb, hist, tones, spec, live } = ps;
  // Everything before the gap is settled with the last background.
  breakTones(tones, hist, spec.frameCount);
  emitRows(live, tb, hist, tones.alive, Infinity);
  closeQuiet(ps, tb.j);
  closeSteady(ps, tb.j);
  gapCondition(ps.cond, missing);
  resetSpectrumFraming(spec);
  const jNext = rebaseAfterGap(tb, missing);
  gapLiveOnset(ps.liveOnset, jNext);
  breakHistory(hist, jNext, spec.frameCount);
  // Rows resume at the first envelope time after the gap (envelope times lag the samples by the filter delay).
  live.rowG = jNext / tb.envM + Math.ceil(tb.envDelayS * (ps.fsA / tb.envM));
  live.rowAfterGap = true;
  resumeTonesAfterGap(tones, spec.frameCount);
}

function finish(ps: PipelineState): Report {
  if (ps.isFinished) throw new Error('finish() called twice');
  ps.isFinished = true;
  const { tones, hist, spec } = ps;
  for (const tr of tones.alive) {
    advanceRegime(hist, spec.frameCount, tr, Infinity);
    finishRegime(tr.regime, tr.n);
  }
  closeQuiet(ps, ps.tb.j);
  closeSteady(ps, ps.tb.j);
  const all = [...tones.retired, ...tones.alive.filter((t) => t.regime.segments.length > 0)];
  for (const tr of all) {
    const cleared = relabelNoiseSegments(tr);
    classifyTransitions(tr);
    // A ring-down now starts at its step: the noise test again, on the segments that moved.
    relabelNoiseSegments(tr, cleared);
  }
  // A line that never rises above the input format's quantisation error may be a product of quantising a strong tone.
  const floorPower = ps.cfg.sampleBits > 0 ? 10 ** (quantisationFloorDbfs(ps.cfg.sampleBits) / 10) : 0;
  const grouping = groupTones(all, spec.binHz, floorPower);
  const others = [...tones.alive, ...tones.retired];
  const fitted: FittedSegment[] = [];
  for (const tr of all) {
    if (grouping.artefacts.has(tr)) continue;
    const segs = tr.regime.segments;
    // A track with no active segment of its own (never left the quiet, or all told by another
    // track or tone) gives no segments.
    if (!segs.some((s) => s.state !== STATE_QUIET && s.endIdx > s.startIdx && !grouping.dropped.has(s))) continue;
    for (let i = 0; i < segs.length; i++) {
      if (segs[i].endIdx <= segs[i].startIdx || grouping.dropped.has(segs[i])) continue;
      const isWide = segs[i].state !== STATE_QUIET && wideBandIsClear(tr, ...fitReachS(tr, segs[i]), others, grouping.artefacts, spec.binHz);
      fitted.push(fitSegment(tr, segs, i, { isWide, markers: ps.markers, warnings: ps.warnings, frequencyOf: grouping.frequencyOf }));
    }
  }
  const spansOf = (l: SpanList): ClippedSpan[] => Array.from({ length: l.count }, (_, i) => ({ startS: l.startS[i], endS: l.endS[i] }));
  const report = assembleReport({
    sampleRateHz: ps.cfg.sampleRateHz,
    durationS: ps.tb.durationInputSamples / ps.cfg.sampleRateHz,
    grouping,
    fitted,
    noiseDriven: ps.quiet.results,
    clipped: spansOf(ps.cond.clips),
    clipDropped: ps.cond.clips.dropped,
    silences: spansOf(ps.cond.silences),
    silenceDropped: ps.cond.silences.dropped,
    bandLimitedToHz: ps.cfg.bandHighHz > ps.cond.bandHighHz ? ps.cond.bandHighHz : null,
    binHz: spec.binHz,
    mainsHz: ps.cfg.mainsHz,
    warnings: ps.warnings,
  });
  report.modeStatistics = [...ps.quietModeStatistics, ...ps.steady.results].sort((a, b) => a.startS - b.startS);
  return report;
}

/**
 * Creates the streaming analysis (docs/DESIGN.md). push(block) takes mono samples at
 * config.sampleRateHz (full scale ±1) in blocks of any length and returns what it added: track rows
 * (about 100 per second, lagging the input by about half a spectral frame), onsets as soon as they
 * are seen (time = where the tone last sat at the band background; the report's onset time comes
 * from the fitted growth curve), closed segments with a provisional rate (an exponential fit of
 * the segment's envelope, or a 'log-linear' slope when that fails; growth and decay of the noise
 * show as quiet), and the latest spectrum. gap(n) records n missing input samples (segments and
 * fits do not join across it; later times, and the report's durationS, include them, so durationS
 * = (samples pushed + samples signalled missing) / sampleRateHz); mark() adds a user marker
 * ('driving-off' fixes where a decay starts); finish() fits every segment again and returns the
 * report, whose figures are the final ones. Throws RangeError for a bad configuration; push()
 * after finish() throws.
 */
export function createAnalysis(config: AnalysisConfig): Analysis {
  const ps = createPipelineState(config);
  return {
    push: (block) => push(ps, block),
    gap: (missing) => gap(ps, missing),
    mark: (marker) => {
      ps.markers.push({ ...marker });
    },
    finish: () => finish(ps),
  };
}
