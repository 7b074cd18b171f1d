/**
 * Public surface of the analysis core (dsp/). The app and the command line import from here.
 */
export * from './types';
export { createAnalysis, describeAnalysis } from './pipeline';
export { createConditionState, stepCondition, gapCondition, type ConditionState, type ConditionConfig } from './condition';
export { createSpectrumState, feedSpectrum, computeSpectrumFrame, type SpectrumState, type SpectrumConfig } from './spectrum';
export { hannPeakOffset, hannAmplitudeResponse, findPeaks, groupHarmonics, createPeakList, type PeakList } from './peak';
export { isMainsLine } from './track';
export { createEnvelopeState, setEnvelopeFrequency, resetEnvelope, stepEnvelope, type EnvelopeState } from './envelope';
