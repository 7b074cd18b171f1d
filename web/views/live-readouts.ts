/**
 * The big readouts of the Listen screen: the verdict at a glance with its margin, then frequency,
 * level, regime, growth and decay rates, effective gain, damping ratio and Q, each with its unit
 * and 95 % interval. Text changes only when the value changes, so screen readers are not flooded.
 */
import type { Interval, Onset, Report } from '../../dsp/types';
import type { LiveSummary } from '../worker/live-summary';
import type { MarginEstimate } from '../worker/protocol';
import type { Calibration } from '../settings';
import type { InputKind } from '../run/live-model';
import { TIME_WEIGHTING_WORDS, type TimeWeighting } from '../run/time-weighting';
import { verdictOf } from '../run/verdict';
import { paFromSplDb } from '../run/sensor';
import { aWeightedToneDb, EU_EXPOSURE_VALUES, exposureCaution } from '../../dsp/levels';
import { formatDb, formatDuration, formatHz, formatPa, formatQ, formatRate, formatRatio, formatSeconds, isShowable, MISSING } from '../format';
import { el } from './dom';

/** Below this, phone microphones roll off (levels read low; rates are unaffected). Common practice. */
export const LOW_FREQUENCY_NOTE_HZ = 100;

/** Below this the input is digital silence (or its numerical floor), dBFS: 16-bit dither sits near −101 dBFS. */
const SILENCE_DBFS = -140;

/** Exposure action values for the cautions, dB(A): EU Directive 2003/10/EC Art. 3 (REFERENCES.md §13). */
export const LOWER_ACTION_DBA = EU_EXPOSURE_VALUES.lowerAction.lex8hDba;
export const UPPER_ACTION_DBA = EU_EXPOSURE_VALUES.upperAction.lex8hDba;

export interface ReadoutInput {
  summary: LiveSummary;
  margin: MarginEstimate | null;
  /** The latest onset announced as it happened, and how many were. */
  lastOnset: Onset | null;
  onsetCount: number;
  /** Time-weighted levels, dBFS (full-scale sine = 0 dBFS). */
  levelDbfs: number;
  toneDbfs: number;
  /** dBFS → dB SPL offset (a microphone's calibration or the scale of Pa sensor data). */
  calibration: Calibration | undefined;
  /** Show the tone level A-weighted (IEC 61672-1) when calibrated. */
  isAWeighted: boolean;
  inputKind: InputKind;
  weighting: TimeWeighting;
  isFinal?: boolean;
}

export interface Readouts {
  update(input: ReadoutInput): void;
  /** The final figures of a finished record (the whole record's fits refine the live ones). */
  showFinal(report: Report, input: ReadoutInput): void;
}

interface Tile {
  value: HTMLElement;
  detail: HTMLElement;
  root: HTMLElement;
}

/** Splits "7.02 1/s (95 % CI 6.80–7.25)" into the value and its interval (shown smaller, unbroken). */
export function splitInterval(text: string): [string, string] {
  const at = text.indexOf(' (95 % CI');
  return at < 0 ? [text, ''] : [text.slice(0, at), text.slice(at + 1)];
}

/** The record's latest onset as the report times it (from the fitted growth curve, with its interval), and how many it found. */
export function latestReportOnset(report: Report): { timeS: number; ci95S: Interval | null; frequencyHz: number; count: number } | null {
  let best: { timeS: number; ci95S: Interval | null; frequencyHz: number; count: number } | null = null;
  for (const tone of report.tones ?? []) {
    for (const c of tone.cycles ?? []) {
      if (c.onsetS !== null && (best === null || c.onsetS > best.timeS)) best = { timeS: c.onsetS, ci95S: c.onsetCi95S, frequencyHz: tone.frequencyHz, count: 0 };
    }
  }
  // A report without cycles (version 1) lists its onsets alone.
  const last = report.onsets[report.onsets.length - 1];
  if (best === null && last !== undefined) best = { timeS: last.timeS, ci95S: null, frequencyHz: last.frequencyHz, count: 0 };
  if (best !== null) best.count = report.onsets.length;
  return best;
}

/** The readouts inside `host`. */
export function createReadouts(host: HTMLElement): Readouts {
  const add = (key: string, label: string, isBig = false): Tile => {
    const labelEl = el('div', { className: 'tile-label', id: `readout-${key}-label`, text: label });
    const value = el('div', { className: 'tile-value', attrs: { 'aria-labelledby': labelEl.id } });
    value.dataset.testid = `value-${key}`;
    const detail = el('div', { className: 'tile-detail' });
    const root = el('div', { className: `tile${isBig ? ' tile-big' : ''}`, id: `readout-${key}` }, labelEl, value, detail);
    host.append(root);
    return { value, detail, root };
  };
  const verdict = add('verdict', 'Verdict', true);
  verdict.root.classList.add('tile-verdict');
  // The verdict is announced when it changes; the numbers are not, they change too often.
  verdict.value.setAttribute('aria-live', 'polite');
  const freq = add('frequency', 'Frequency', true);
  const level = add('level', 'Level', true);
  const regime = add('regime', 'Regime', true);
  const onset = add('onset', 'Onset (tone set in)');
  const growth = add('growth', 'Growth rate');
  const decay = add('decay', 'Decay rate');
  const gain = add('gain', 'Effective gain (growth + decay)');
  const zeta = add('damping', 'Damping ratio');
  const q = add('q', 'Q (quality factor)');

  const setText = (node: HTMLElement, text: string): void => {
    if (node.textContent !== text) node.textContent = text;
  };
  /** Shows a formatted value, its interval in a smaller unbroken line; a missing one ("— (reason)") shows the dash big and the reason small. */
  const setValue = (tile: Tile, text: string, detail = ''): void => {
    const missing = text.startsWith(`${MISSING} (`) ? text.slice(MISSING.length + 2, -1) : null;
    const [main, ci] = missing === null ? splitInterval(text) : [MISSING, ''];
    if (tile.value.textContent !== `${main}${ci ? ` ${ci}` : ''}`) {
      tile.value.replaceChildren(main, ...(ci ? [' ', el('span', { className: 'ci', text: ci })] : []));
    }
    setText(tile.detail, missing === null ? detail : missing);
    tile.root.classList.toggle('is-missing', missing !== null);
  };

  const showLevel = (input: ReadoutInput, toneHz: number): number => {
    const { levelDbfs, toneDbfs, calibration, isAWeighted, inputKind, weighting } = input;
    const timeWords = TIME_WEIGHTING_WORDS[weighting];
    if (calibration && isShowable(levelDbfs) && levelDbfs > SILENCE_DBFS) {
      const spl = levelDbfs + calibration.offsetDb;
      const toneSpl = isShowable(toneDbfs) ? toneDbfs + calibration.offsetDb : Number.NaN;
      if (inputKind === 'sensor') {
        // Sensor data in Pa: pressure amplitudes, no A-weighting (a transducer in a duct is not a listener).
        setText(level.value, formatDb(spl, 'dB SPL'));
        setText(level.detail, `${isShowable(toneSpl) ? `tone ${formatPa(paFromSplDb(toneSpl))} rms, ${formatDb(toneSpl, 'dB SPL')} · ` : ''}all ${formatPa(paFromSplDb(spl))} rms · ${timeWords}`);
        level.root.classList.remove('is-missing', 'is-loud');
        return Number.NaN;
      }
      const toneDba = isShowable(toneSpl) && isShowable(toneHz) && toneHz > 0 ? aWeightedToneDb(toneSpl, toneHz) : Number.NaN;
      let note: string;
      let loudness = Number.NaN;
      if (isAWeighted && isShowable(toneDba)) {
        setText(level.value, `${formatDb(toneDba, 'dB(A)')} tone`);
        note = `all sound ${formatDb(spl, 'dB SPL')} · ${formatDb(levelDbfs, 'dBFS')}`;
        loudness = toneDba;
      } else {
        setText(level.value, formatDb(spl, 'dB SPL'));
        note = `tone ${formatDb(toneSpl, 'dB SPL')} · ${formatDb(levelDbfs, 'dBFS')}`;
        if (isShowable(toneDba)) {
          note += ` · tone ${formatDb(toneDba, 'dB(A)')}`;
          loudness = toneDba;
        }
      }
      note += ` · ${timeWords}`;
      // Exposure against the common action values (EU 2003/10/EC; NIOSH 1998), via dsp/levels.ts.
      if (isShowable(loudness) && loudness >= LOWER_ACTION_DBA) {
        const c = exposureCaution(loudness);
        note += c.isProtectionAdvised
          ? ` — loud: wear hearing protection; NIOSH allows ${formatDuration(c.allowedTimeH * 3600)} a day at this level.`
          : ` — above the ${LOWER_ACTION_DBA} dB(A) lower action value if it lasted a working day.`;
      }
      setText(level.detail, note);
      level.root.classList.remove('is-missing');
      level.root.classList.toggle('is-loud', isShowable(loudness) && loudness >= LOWER_ACTION_DBA);
      return loudness;
    }
    setValue(
      level,
      formatDb(levelDbfs > SILENCE_DBFS ? levelDbfs : Number.NaN, 'dBFS', null, isShowable(levelDbfs) ? 'digital silence' : 'no signal'),
      `${isShowable(toneDbfs) && toneDbfs > SILENCE_DBFS ? `tone ${formatDb(toneDbfs, 'dBFS')} · ` : ''}uncalibrated · ${timeWords}`,
    );
    level.root.classList.remove('is-loud');
    return Number.NaN;
  };

  /** Live: the latest onset announced as it happened; at the end, the report's, timed by the fitted growth curve. */
  const showOnset = (input: ReadoutInput, report?: Report): void => {
    const plural = (n: number): string => `${n} onset${n === 1 ? '' : 's'}`;
    if (input.isFinal && report) {
      const o = latestReportOnset(report);
      if (o === null) setValue(onset, formatSeconds(null, null, 'no onset in this record'));
      else setValue(onset, `at ${formatSeconds(o.timeS, o.ci95S)}`, `${formatHz(o.frequencyHz)} · ${plural(o.count)} in the record · from the fitted growth`);
      return;
    }
    const o = input.lastOnset;
    if (o === null) setValue(onset, formatSeconds(null, null, 'none seen yet'));
    // The short frame's bin (tens of Hz wide) places the tone only roughly: the Frequency tile gives it.
    else setValue(onset, `at ${formatSeconds(o.timeS)}`, `${plural(input.onsetCount)} so far · announced as it happened; the report times it from the fitted growth`);
  };

  const update = (input: ReadoutInput, report?: Report): void => {
    const { summary, isFinal } = input;
    // The frequency stays beside its rates after the tone stops: the latest tracked one, else the rates' own.
    const latest = summary.latestFrequencyHz;
    const v = verdictOf({ summary, margin: input.margin, noiseDriven: report?.noiseDriven, modeStatistics: report?.modeStatistics, segments: report?.segments, isFinal });
    // Without a tone, the frequency of the resonance whose damping the verdict reports.
    const marginHz = v.marginFrequencyHz;
    let f = isFinal && summary.frequencyHz !== null ? summary.frequencyHz : isShowable(latest) ? latest : summary.frequencyHz;
    let isMarginFrequency = false;
    if (!isShowable(f) && isShowable(marginHz)) {
      f = marginHz;
      isMarginFrequency = true;
    }
    const isRatesOnly = !isFinal && !isShowable(latest) && isShowable(f) && !isMarginFrequency;
    const isMicrophone = input.inputKind !== 'sensor';
    const rollOff = isMicrophone && isShowable(f) && f < LOW_FREQUENCY_NOTE_HZ;
    setValue(
      freq,
      formatHz(f, null, isFinal ? 'no tone found' : 'no tone'),
      [isRatesOnly ? 'tone no longer heard; frequency of the rates below' : '', isMarginFrequency ? 'resonance excited by the noise (no tone sounding)' : '', rollOff ? `Below ${LOW_FREQUENCY_NOTE_HZ} Hz phone microphones roll off: levels read low, rates are unaffected.` : ''].filter(Boolean).join(' · '),
    );
    freq.root.classList.toggle('has-note', rollOff);

    // The tone's level shows while a tone is heard (its weighted level falls away after it).
    const loudness = showLevel(isShowable(latest) || isFinal ? input : { ...input, toneDbfs: Number.NaN }, isShowable(f) ? f : Number.NaN);

    setText(verdict.value, v.headline);
    setText(verdict.detail, `${v.margin} · ${v.basis}`);
    verdict.root.dataset.verdict = v.kind;
    // One state on the screen: a loud tone is never called quiet.
    const regimeWord = isShowable(loudness) && loudness >= LOWER_ACTION_DBA && v.regimeWord === 'Quiet' ? 'Tone present' : v.regimeWord;
    setText(regime.value, regimeWord);
    regime.root.dataset.regime = summary.regime;
    setText(regime.detail, isFinal ? 'at the end of the record' : '');

    showOnset(input, report);
    setValue(growth, formatRate(summary.growthRatePerS, summary.growthRateCi95PerS, 'no growth seen yet'), isShowable(summary.doublingTimeS) ? `doubling time ${formatSeconds(summary.doublingTimeS)}` : '');
    setValue(decay, formatRate(summary.decayRatePerS, summary.decayRateCi95PerS, 'no decay seen yet'), isShowable(summary.t60S) ? `T60 ${formatSeconds(summary.t60S)}` : '');
    setValue(gain, formatRate(summary.effectiveGainPerS, summary.effectiveGainCi95PerS, 'needs growth and decay'));
    setValue(zeta, formatRatio(summary.dampingRatio, summary.dampingRatioCi95, 'needs a decay'));
    setValue(q, formatQ(summary.qFactor, summary.qFactorCi95, 'needs a decay'));
  };

  return {
    update: (input) => update(input),
    showFinal(report, input) {
      const summary: LiveSummary = {
        ...input.summary,
        ...report.summary,
        latestFrequencyHz: report.summary.frequencyHz ?? input.summary.latestFrequencyHz,
      };
      update({ ...input, summary, isFinal: true }, report);
    },
  };
}
