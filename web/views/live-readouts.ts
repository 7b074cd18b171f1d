/**
 * The big readouts of the Listen screen (frequency, level, regime, growth and decay rates,
 * effective gain, damping ratio, Q), each with its unit and 95 % interval, and the table of the
 * final report. Text changes only when the value changes, so screen readers are not flooded.
 */
import type { Report, RegimeKind } from '../../dsp/types';
import type { LiveSummary } from '../worker/live-summary';
import type { Calibration } from '../settings';
import { aWeightedToneDb, EU_EXPOSURE_VALUES, exposureCaution } from '../../dsp/levels';
import { formatClock, formatDb, formatDuration, formatHz, formatQ, formatRate, formatRatio, formatSeconds, isShowable, MISSING } from '../format';

/** Below this, phone microphones roll off (levels read low; rates are unaffected). Common practice. */
export const LOW_FREQUENCY_NOTE_HZ = 100;

/** Below this the input is digital silence (or its numerical floor), dBFS: 16-bit dither sits near −101 dBFS. */
const SILENCE_DBFS = -140;

/** Exposure action values for the cautions, dB(A): EU Directive 2003/10/EC Art. 3 (REFERENCES.md §13). */
export const LOWER_ACTION_DBA = EU_EXPOSURE_VALUES.lowerAction.lex8hDba;
export const UPPER_ACTION_DBA = EU_EXPOSURE_VALUES.upperAction.lex8hDba;

export interface ReadoutInput {
  summary: LiveSummary;
  levelDbfs: number;
  toneDbfs: number;
  calibration: Calibration | undefined;
  /** Show the tone level A-weighted (IEC 61672-1) when calibrated. */
  isAWeighted: boolean;
  isFinal?: boolean;
}

export interface Readouts {
  update(input: ReadoutInput): void;
  renderReport(report: Report, title: string): HTMLElement[];
}

const REGIME_WORDS: Record<RegimeKind, string> = {
  quiet: 'Quiet',
  growth: 'Growing',
  steady: 'Steady hum',
  decay: 'Dying away',
};

interface Tile {
  value: HTMLElement;
  detail: HTMLElement;
  root: HTMLElement;
}

/** The readouts inside `host`. */
export function createReadouts(host: HTMLElement): Readouts {
  const tiles = new Map<string, Tile>();
  const add = (key: string, label: string, isBig = false): Tile => {
    const root = document.createElement('div');
    root.className = `tile${isBig ? ' tile-big' : ''}`;
    root.id = `readout-${key}`;
    const l = document.createElement('div');
    l.className = 'tile-label';
    l.textContent = label;
    l.id = `readout-${key}-label`;
    const value = document.createElement('div');
    value.className = 'tile-value';
    value.setAttribute('aria-labelledby', l.id);
    value.dataset.testid = `value-${key}`;
    const detail = document.createElement('div');
    detail.className = 'tile-detail';
    root.append(l, value, detail);
    host.append(root);
    const t = { value, detail, root };
    tiles.set(key, t);
    return t;
  };
  const freq = add('frequency', 'Frequency', true);
  const level = add('level', 'Level', true);
  const regime = add('regime', 'Regime', true);
  // A change of regime (growing, steady, dying away) is announced; the numbers are not, they change too often.
  regime.value.setAttribute('aria-live', 'polite');
  const growth = add('growth', 'Growth rate');
  const decay = add('decay', 'Decay rate');
  const gain = add('gain', 'Effective gain (growth + decay)');
  const zeta = add('damping', 'Damping ratio');
  const q = add('q', 'Q (quality factor)');

  const setText = (node: HTMLElement, text: string): void => {
    if (node.textContent !== text) node.textContent = text;
  };
  /** Shows a formatted value; a missing one ("— (reason)") shows the dash big and the reason small. */
  const setValue = (tile: Tile, text: string, detail = ''): void => {
    const missing = text.startsWith(`${MISSING} (`) ? text.slice(MISSING.length + 2, -1) : null;
    setText(tile.value, missing === null ? text : MISSING);
    setText(tile.detail, missing === null ? detail : missing);
    tile.root.classList.toggle('is-missing', missing !== null);
  };

  return {
    update({ summary, levelDbfs, toneDbfs, calibration, isAWeighted, isFinal }) {
      const f = isFinal && summary.frequencyHz !== null ? summary.frequencyHz : summary.latestFrequencyHz;
      setValue(freq, formatHz(f, null, isFinal ? 'no tone found' : 'no tone'), isShowable(f) && f < LOW_FREQUENCY_NOTE_HZ ? `Below ${LOW_FREQUENCY_NOTE_HZ} Hz phone microphones roll off: levels read low, rates are unaffected.` : '');
      freq.root.classList.toggle('has-note', isShowable(f) && f < LOW_FREQUENCY_NOTE_HZ);

      const toneHz = summary.latestFrequencyHz;
      if (calibration && isShowable(levelDbfs) && levelDbfs > SILENCE_DBFS) {
        const spl = levelDbfs + calibration.offsetDb;
        const toneSpl = isShowable(toneDbfs) ? toneDbfs + calibration.offsetDb : Number.NaN;
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
      } else {
        setValue(level, formatDb(levelDbfs > SILENCE_DBFS ? levelDbfs : Number.NaN, 'dBFS', null, isShowable(levelDbfs) ? 'digital silence' : 'no signal'), isShowable(toneDbfs) ? `tone ${formatDb(toneDbfs, 'dBFS')} · uncalibrated` : 'uncalibrated');
        level.root.classList.remove('is-loud');
      }

      setText(regime.value, REGIME_WORDS[summary.regime] ?? summary.regime);
      regime.root.dataset.regime = summary.regime;
      setText(regime.detail, isFinal ? 'at the end of the record' : '');

      setValue(growth, formatRate(summary.growthRatePerS, summary.growthRateCi95PerS, 'no growth seen yet'), isShowable(summary.doublingTimeS) ? `doubling time ${formatSeconds(summary.doublingTimeS)}` : '');
      setValue(decay, formatRate(summary.decayRatePerS, summary.decayRateCi95PerS, 'no decay seen yet'), isShowable(summary.t60S) ? `T60 ${formatSeconds(summary.t60S)}` : '');
      setValue(gain, formatRate(summary.effectiveGainPerS, summary.effectiveGainCi95PerS, 'needs growth and decay'));
      setValue(zeta, formatRatio(summary.dampingRatio, summary.dampingRatioCi95, 'needs a decay'));
      setValue(q, formatQ(summary.qFactor, summary.qFactorCi95, 'needs a decay'));
    },

    renderReport(report, title) {
      const h = document.createElement('h2');
      h.textContent = title;
      const p = document.createElement('p');
      p.textContent = `${formatSeconds(report.durationS)} at ${report.sampleRateHz} Hz · ${report.onsets.length} onset${report.onsets.length === 1 ? '' : 's'} · ${report.segments.length} segment${report.segments.length === 1 ? '' : 's'}`;
      const table = document.createElement('table');
      table.className = 'segments';
      const caption = document.createElement('caption');
      caption.textContent = 'Segments of the record';
      const head = document.createElement('tr');
      for (const t of ['Regime', 'From', 'To', 'Frequency', 'Rate']) {
        const th = document.createElement('th');
        th.scope = 'col';
        th.textContent = t;
        head.append(th);
      }
      table.append(caption, head);
      for (const s of report.segments) {
        const tr = document.createElement('tr');
        tr.dataset.kind = s.kind;
        const cells = [
          REGIME_WORDS[s.kind] ?? s.kind,
          formatClock(s.startS),
          formatClock(s.endS),
          formatHz(s.frequencyHz),
          s.kind === 'quiet' ? '—' : formatRate(s.ratePerS, s.rateCi95PerS, s.kind === 'steady' ? 'steady' : 'no fit'),
        ];
        for (const c of cells) {
          const td = document.createElement('td');
          td.textContent = c;
          tr.append(td);
        }
        table.append(tr);
      }
      const out: HTMLElement[] = [h, p, table];
      if (report.clipped?.length) {
        const cp = document.createElement('p');
        cp.className = 'alert clipped-note';
        const spans = report.clipped.slice(0, 5).map((c) => `${formatClock(c.startS)}–${formatClock(c.endS)}`).join(', ');
        cp.textContent = `The input clipped (${spans}${report.clipped.length > 5 ? ', …' : ''}): levels there read low and rates fitted across it are unreliable. Move the phone further away.`;
        out.push(cp);
      }
      for (const n of report.noiseDriven) {
        const np = document.createElement('p');
        np.textContent = `Noise-excited resonance at ${formatHz(n.frequencyHz)} (${formatClock(n.startS)}–${formatClock(n.endS)}): decay rate ${formatRate(n.decayRatePerS, n.decayRateCi95PerS)}.`;
        out.push(np);
      }
      if (report.warnings?.length) {
        const ul = document.createElement('ul');
        ul.className = 'notes';
        for (const w of report.warnings) {
          const li = document.createElement('li');
          li.textContent = w;
          ul.append(li);
        }
        out.push(ul);
      }
      return out;
    },
  };
}
