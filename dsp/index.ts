/**
 * Public surface of the analysis core (dsp/): the streaming analysis and its report types, the
 * stages it is built from, and the fits, formulas and models it uses. The app and the command
 * line import from here.
 */
export * from './types';
export { createAnalysis } from './pipeline';
export { CLIP_LEVEL, CLIP_RUN_SAMPLES, createConditionState, gapCondition, stepCondition, type ConditionConfig, type ConditionState } from './condition';
export { computeSpectrumFrame, createSpectrumState, feedSpectrum, HANN_ENBW_BINS, type SpectrumConfig, type SpectrumState } from './spectrum';
export { createPeakList, findPeaks, groupHarmonics, hannAmplitudeResponse, hannPeakOffset, neighbourNoisePower, type PeakList } from './peak';
export { createTrackerState, isMainsMultiple, stepTracker, type ToneTrack, type TrackerState } from './track';
export { bandPowerFromBinPower, createEnvelopeState, resetEnvelope, setEnvelopeFrequency, stepEnvelope, type EnvelopeConfig, type EnvelopeState } from './envelope';
export { createRegimeState, regimeKind, stepRegime, type RegimeSegment, type RegimeState } from './regime';
export * from './fit';
export * from './fit-saturation';
export * from './stats';
export * from './baseband';
export * from './damping';
export * from './derived';
export * from './levels';
export * from './duct';
export * from './crlb';
export * from './rig-sim';
export * from './synth';
export * from './duct-match';
