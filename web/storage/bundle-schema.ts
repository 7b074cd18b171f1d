/**
 * The layout of an exported session (session.json inside a bundle) and its validation with
 * valibot. The same layout is published as JSON Schema in docs/session-bundle.schema.json.
 *
 * JSON has no NaN or infinities, yet a track holds NaN (no tone) and a level may be −∞; such
 * values travel as the strings "NaN", "Infinity" and "-Infinity" wherever a measured value may
 * be non-finite, so an export → import round trip gives back every number bit for bit.
 */
import * as v from 'valibot';
import { DIAMETER_RANGE_M, GAS_TEMPERATURE_RANGE_C, LENGTH_RANGE_M } from '../../dsp/duct';
import type { PhysicalRange } from '../../dsp/gas';
import type { Marker, RegimeKind, Report } from '../../dsp/types';
import { DB_VERSION, type SessionRecord } from './db';

export const BUNDLE_FORMAT = 'humgauge-bundle';
export const SESSION_FORMAT = 'humgauge-session';
/** Layout version of session.json and manifest.json (follows the database schema). */
export const BUNDLE_SCHEMA_VERSION = DB_VERSION;

/**
 * Largest session.json, bytes (REFERENCES.md §81; export refuses to write more): the track of two hours (twice the hour-long
 * recording the bench uses) at 100 frames/s (99 measured at 48 kHz), each frame at most 125 bytes
 * of JSON (four numbers of at most 24 characters in ECMAScript's shortest form, a state and two
 * booleans, with separators; 98 measured on a noisy recording), plus 16 MiB for notes, markers and
 * the report: about 107 MB. An hour of track is about 35 MB.
 */
export const SESSION_JSON_MAX_BYTES = 2 * 3600 * 100 * 125 + 16 * 1024 * 1024;

const NON_FINITE = ['NaN', 'Infinity', '-Infinity'] as const;

/** JSON encoding of a measured value: non-finite numbers become tokens. */
export function encodeNumber(x: number): number | (typeof NON_FINITE)[number] {
  if (Number.isFinite(x)) return x;
  return Number.isNaN(x) ? 'NaN' : x > 0 ? 'Infinity' : '-Infinity';
}

function decodeNumber(x: number | (typeof NON_FINITE)[number]): number {
  if (typeof x === 'number') return x;
  return x === 'NaN' ? Number.NaN : x === 'Infinity' ? Infinity : -Infinity;
}

/** A finite number in [min, max]. */
const finite = (min: number, max: number, what: string) =>
  v.pipe(v.number(`${what} must be a number`), v.minValue(min, `${what} must be at least ${min}`), v.maxValue(max, `${what} must be at most ${max}`));

/** Any finite number (an input the app takes as typed, or a figure it computed). */
const anyFinite = (what: string) => v.pipe(v.number(`${what} must be a number`), v.finite(`${what} must be a finite number`));

/**
 * A measured value: any number, or a non-finite token. The analysis may give any figure (a Q of
 * millions on a long quiet record, an interval with an infinite end), so none is refused.
 */
const measured = (what: string) =>
  v.pipe(v.union([v.number(`${what} must be a number`), v.picklist(NON_FINITE, `${what} must be a number`)], `${what} must be a number`), v.transform(decodeNumber));

/**
 * Longest text accepted in each text field, characters: the same limits bind the app's entry
 * fields (maxlength) and the import, so whatever the app stores it also imports. Any characters
 * are accepted: text is data, and every place that shows it escapes it (DOM text nodes; the HTML
 * report escapes &, <, >, " and ').
 */
export const TEXT_LIMITS = {
  site: 200,
  equipment: 200,
  notes: 20_000,
  /** Longer than any file system's name limit (255 bytes on ext4, NTFS, APFS). */
  fileName: 1000,
  markerKind: 50,
  markerLabel: 500,
  markerUnit: 30,
  calibrationSource: 300,
  captureSetting: 200,
  segmentModel: 200,
  reportWarning: 10_000,
  historyEntry: 1000,
  audioNote: 200,
} as const;

const text = (maxLength: number, what: string) => v.pipe(v.string(`${what} must be text`), v.maxLength(maxLength, `${what} is longer than ${maxLength} characters`));

const interval = (what: string) => v.nullable(v.strictTuple([measured(what), measured(what)], `${what} must be a pair [low, high]`));
const rate = (what: string) => measured(what);
/** Times of markers, gaps and the session: finite and not before the start. */
const TIME = (what: string) => v.pipe(anyFinite(what), v.minValue(0, `${what} must be at least 0`));
const FREQ = (what: string) => measured(what);
const DB = (what: string) => measured(what);
/** Sample rates a session may have, Hz: pressure sensors log from a few hundred Hz, audio up to 768 kHz. */
const MIN_RATE_HZ = 100;
const MAX_RATE_HZ = 768_000;
const REGIME = v.picklist(['quiet', 'growth', 'steady', 'decay'], 'state must be quiet, growth, steady or decay');

export const MarkerSchema = v.strictObject({
  timeS: TIME('marker time'),
  kind: text(TEXT_LIMITS.markerKind, 'marker kind'),
  label: text(TEXT_LIMITS.markerLabel, 'marker label'),
  value: v.optional(anyFinite('marker control value')),
  unit: v.optional(text(TEXT_LIMITS.markerUnit, 'marker unit')),
});

const SegmentSchema = v.strictObject({
  kind: REGIME,
  startS: measured('segment start'),
  endS: measured('segment end'),
  frequencyHz: FREQ('segment frequency'),
  ratePerS: v.nullable(rate('segment rate')),
  rateCi95PerS: interval('segment rate interval'),
  model: v.optional(v.nullable(text(TEXT_LIMITS.segmentModel, 'segment model'))),
  limitAmplitudeDbfs: v.optional(v.nullable(DB('limit amplitude'))),
  isImpulseResponse: v.optional(v.boolean()),
});

const NoiseDrivenSchema = v.strictObject({
  startS: measured('noise-driven start'),
  endS: measured('noise-driven end'),
  frequencyHz: FREQ('noise-driven frequency'),
  decayRatePerS: rate('noise-driven decay rate'),
  decayRateCi95PerS: v.strictTuple([rate('decay interval'), rate('decay interval')]),
  lorentzianDecayRatePerS: v.optional(rate('Lorentzian decay rate')),
  lorentzianCi95PerS: v.optional(v.strictTuple([rate('Lorentzian interval'), rate('Lorentzian interval')])),
  autocorrelationDecayRatePerS: v.optional(rate('autocorrelation decay rate')),
  autocorrelationCi95PerS: v.optional(v.strictTuple([rate('autocorrelation interval'), rate('autocorrelation interval')])),
});

/** report.modeStatistics (dsp/types.ts ModeStatistics): the growth rate from the noise per stretch. */
const ModeStatisticsSchema = v.strictObject({
  frequencyHz: FREQ('mode-statistics frequency'),
  startS: measured('mode-statistics start'),
  endS: measured('mode-statistics end'),
  linearGrowthRatePerS: v.nullable(rate('linear growth rate from noise')),
  linearGrowthRateCi95PerS: interval('linear growth rate interval'),
  saturation: v.nullable(measured('saturation')),
  noiseIntensity: v.nullable(measured('noise intensity')),
  regime: v.picklist(['stable', 'near-threshold', 'humming', 'undetermined'], 'regime must be stable, near-threshold, humming or undetermined'),
  method: text(TEXT_LIMITS.segmentModel, 'mode-statistics method'),
  reason: v.optional(text(TEXT_LIMITS.reportWarning, 'mode-statistics reason')),
});

const optNum = (what: string) => v.optional(v.nullable(rate(what)));
const optCi = (what: string) => v.optional(interval(what));

const SummarySchema = v.strictObject({
  frequencyHz: v.nullable(FREQ('summary frequency')),
  growthRatePerS: v.nullable(rate('growth rate')),
  decayRatePerS: v.nullable(rate('decay rate')),
  effectiveGainPerS: v.nullable(rate('effective gain')),
  dampingRatio: v.nullable(rate('damping ratio')),
  qFactor: v.nullable(rate('Q')),
  growthRateCi95PerS: optCi('growth rate interval'),
  decayRateCi95PerS: optCi('decay rate interval'),
  effectiveGainCi95PerS: optCi('effective gain interval'),
  dampingRatioCi95: optCi('damping ratio interval'),
  qFactorCi95: optCi('Q interval'),
  eFoldingTimeS: optNum('e-folding time'),
  doublingTimeS: optNum('doubling time'),
  t60S: optNum('T60'),
  limitAmplitudeDbfs: v.optional(v.nullable(DB('limit amplitude'))),
  growthRateCycleMedianPerS: optNum('median growth rate'),
  growthRateCycleSpreadPerS: optNum('growth rate spread'),
  decayRateCycleMedianPerS: optNum('median decay rate'),
  decayRateCycleSpreadPerS: optNum('decay rate spread'),
  cycleCount: v.optional(finite(0, 1e6, 'cycle count')),
});

const CycleSchema = v.strictObject({
  startS: TIME('cycle start'),
  endS: TIME('cycle end'),
  onsetS: v.nullable(TIME('cycle onset')),
  onsetCi95S: interval('onset interval'),
  growthRatePerS: v.nullable(rate('cycle growth rate')),
  growthRateCi95PerS: interval('cycle growth interval'),
  limitAmplitudeDbfs: v.nullable(DB('cycle limit amplitude')),
  limitAmplitudeCi95Dbfs: v.nullable(v.strictTuple([DB('limit interval'), DB('limit interval')])),
  decayRatePerS: v.nullable(rate('cycle decay rate')),
  decayRateCi95PerS: interval('cycle decay interval'),
  isImpulseResponse: v.boolean(),
});

export const ReportSchema = v.strictObject({
  reportVersion: v.pipe(finite(1, 1000, 'report version'), v.integer('report version must be a whole number')),
  sampleRateHz: finite(MIN_RATE_HZ, MAX_RATE_HZ, 'report sample rate'),
  durationS: measured('report duration'),
  onsets: v.pipe(v.array(v.strictObject({ timeS: measured('onset time'), frequencyHz: FREQ('onset frequency') })), v.maxLength(100_000, 'too many onsets')),
  segments: v.pipe(v.array(SegmentSchema), v.maxLength(100_000, 'too many segments')),
  noiseDriven: v.pipe(v.array(NoiseDrivenSchema), v.maxLength(100_000, 'too many noise-driven estimates')),
  modeStatistics: v.optional(v.pipe(v.array(ModeStatisticsSchema), v.maxLength(100_000, 'too many mode-statistics entries'))),
  summary: SummarySchema,
  tones: v.optional(
    v.pipe(
      v.array(
        v.strictObject({
          frequencyHz: FREQ('tone frequency'),
          isSteadyLine: v.boolean(),
          isMainsFrequency: v.optional(v.boolean()),
          cycles: v.optional(v.pipe(v.array(CycleSchema), v.maxLength(100_000))),
          harmonics: v.optional(v.pipe(v.array(v.strictObject({ k: v.pipe(finite(2, 1000, 'harmonic order'), v.integer('harmonic order must be a whole number')), frequencyHz: FREQ('harmonic frequency') })), v.maxLength(1000))),
        }),
      ),
      v.maxLength(1000),
    ),
  ),
  clipped: v.optional(v.pipe(v.array(v.strictObject({ startS: measured('clipped start'), endS: measured('clipped end') })), v.maxLength(100_000))),
  warnings: v.optional(v.pipe(v.array(text(TEXT_LIMITS.reportWarning, 'report warning')), v.maxLength(1000, 'too many warnings'))),
});

/** Duct geometry within the duct model's ranges (dsp/duct.ts, the Duct screen's too), naming the field. */
const inRange = (what: string, r: PhysicalRange, unit: string) =>
  v.pipe(anyFinite(what), v.minValue(r.min, `${what} must be ${r.min}–${r.max} ${unit}`), v.maxValue(r.max, `${what} must be ${r.min}–${r.max} ${unit}`));
const GeometrySchema = v.strictObject({
  lengthM: inRange('duct length', LENGTH_RANGE_M, 'm'),
  diameterM: inRange('duct diameter', DIAMETER_RANGE_M, 'm'),
  ends: v.picklist(['open-open', 'open-closed', 'closed-closed'], 'duct ends must be open-open, open-closed or closed-closed'),
  openEnd: v.picklist(['unflanged', 'flanged', 'none'], 'open end must be unflanged, flanged or none'),
  closedEnd: v.optional(v.picklist(['upstream', 'downstream'], 'closed end must be upstream or downstream')),
  gasTemperatureC: inRange('gas temperature', GAS_TEMPERATURE_RANGE_C, '°C'),
  heaterPositionM: v.optional(inRange('heater position', { min: 0, max: LENGTH_RANGE_M.max }, 'm')),
  hotTemperatureC: v.optional(inRange('hot gas temperature', GAS_TEMPERATURE_RANGE_C, '°C')),
});

const MetaSchema = v.strictObject({
  source: v.picklist(['microphone', 'file', 'import'], 'source must be microphone, file or import'),
  fileName: v.optional(text(TEXT_LIMITS.fileName, 'file name')),
  sampleRateHz: finite(MIN_RATE_HZ, MAX_RATE_HZ, 'sample rate'),
  site: text(TEXT_LIMITS.site, 'site'),
  equipment: text(TEXT_LIMITS.equipment, 'equipment'),
  notes: text(TEXT_LIMITS.notes, 'notes'),
  geometry: v.optional(GeometrySchema),
  calibrationOffsetDb: v.optional(anyFinite('calibration offset')),
  calibrationSource: v.optional(text(TEXT_LIMITS.calibrationSource, 'calibration source')),
  captureSettings: v.optional(
    v.pipe(
      v.record(v.pipe(v.string(), v.regex(/^[A-Za-z0-9_]{1,64}$/, 'capture setting names are letters, digits and _')), v.union([text(TEXT_LIMITS.captureSetting, 'capture setting'), anyFinite('capture setting'), v.boolean()])),
      v.check((r) => Object.keys(r).length <= 50, 'too many capture settings'),
    ),
  ),
});

const MAX_FRAMES = 10_000_000;

/**
 * A track column checked in one tight loop (a per-item schema costs seconds on an hour of
 * track): `accept` says whether one item is valid; the first bad item is named with its index.
 */
function column<T>(what: string, problem: string, accept: (x: unknown) => boolean, decode: (x: unknown) => T) {
  return v.pipe(
    v.custom<unknown[]>((x) => Array.isArray(x), `${what} must be a list`),
    v.rawCheck<unknown[]>(({ dataset, addIssue }) => {
      if (!dataset.typed) return;
      const a = dataset.value;
      if (a.length > MAX_FRAMES) {
        addIssue({ message: `track longer than ${MAX_FRAMES} frames` });
        return;
      }
      for (let i = 0; i < a.length; i++) {
        if (!accept(a[i])) {
          addIssue({ message: `${what} ${problem} (frame ${i})` });
          return;
        }
      }
    }),
    v.transform((a: unknown[]): T[] => a.map(decode)),
  );
}

const isToken = (x: unknown): boolean => x === 'NaN' || x === 'Infinity' || x === '-Infinity';
/** A column of measured numbers: any finite number, and where allowed a non-finite token. */
const numberColumn = (what: string, allowNonFinite: boolean) =>
  column<number>(
    what,
    allowNonFinite ? 'must be a number (or NaN/Infinity/-Infinity)' : 'must be a finite number',
    (x) => (typeof x === 'number' && Number.isFinite(x)) || (allowNonFinite && isToken(x)),
    (x) => decodeNumber(x as number | (typeof NON_FINITE)[number]),
  );
const REGIME_SET = new Set<unknown>(['quiet', 'growth', 'steady', 'decay']);

export const TrackColumnsSchema = v.pipe(
  v.strictObject({
    timeS: numberColumn('track time', false),
    frequencyHz: numberColumn('track frequency', true),
    amplitudeDbfs: numberColumn('track amplitude', true),
    levelDbfs: numberColumn('track level', true),
    state: column<RegimeKind>('track state', 'must be quiet, growth, steady or decay', (x) => REGIME_SET.has(x), (x) => x as RegimeKind),
    isClipped: column<boolean>('track clipping', 'must be true or false', (x) => typeof x === 'boolean', (x) => x as boolean),
    isAfterGap: column<boolean>('track gaps', 'must be true or false', (x) => typeof x === 'boolean', (x) => x as boolean),
  }),
  v.check((t) => [t.frequencyHz, t.amplitudeDbfs, t.levelDbfs, t.state, t.isClipped, t.isAfterGap].every((c) => c.length === t.timeS.length), 'track columns differ in length'),
);

export const SessionSchema = v.strictObject({
  id: v.pipe(v.string('id must be text'), v.regex(/^[A-Za-z0-9-]{1,64}$/, 'id must be 1-64 letters, digits or dashes')),
  createdAtMs: v.pipe(finite(0, 8.64e15, 'creation time'), v.integer('creation time must be whole milliseconds')),
  updatedAtMs: v.pipe(finite(0, 8.64e15, 'update time'), v.integer('update time must be whole milliseconds')),
  status: v.picklist(['complete', 'interrupted', 'recovered'], 'status must be complete, interrupted or recovered'),
  meta: MetaSchema,
  markers: v.pipe(v.array(MarkerSchema), v.maxLength(10_000, 'too many markers')),
  gaps: v.pipe(v.array(v.strictObject({ timeS: TIME('gap time'), missingS: TIME('gap length') })), v.maxLength(100_000, 'too many gaps')),
  report: v.nullable(ReportSchema),
  durationS: TIME('duration'),
  audio: v.strictObject({
    isKept: v.boolean(),
    sampleCount: v.pipe(finite(0, 1e11, 'audio sample count'), v.integer('audio sample count must be whole')),
    stoppedReason: v.optional(text(TEXT_LIMITS.audioNote, 'audio note')),
  }),
  history: v.pipe(v.array(text(TEXT_LIMITS.historyEntry, 'history entry')), v.maxLength(1000, 'too many history entries')),
});

export const SessionFileSchema = v.strictObject({
  format: v.literal(SESSION_FORMAT, `format must be "${SESSION_FORMAT}"`),
  schemaVersion: v.literal(BUNDLE_SCHEMA_VERSION, `schemaVersion must be ${BUNDLE_SCHEMA_VERSION} (this bundle was made by another version of the app)`),
  exportedAtMs: v.pipe(finite(0, 8.64e15, 'export time'), v.integer()),
  session: SessionSchema,
  track: TrackColumnsSchema,
});

export const ManifestSchema = v.strictObject({
  format: v.literal(BUNDLE_FORMAT, `format must be "${BUNDLE_FORMAT}"`),
  schemaVersion: v.literal(BUNDLE_SCHEMA_VERSION, `schemaVersion must be ${BUNDLE_SCHEMA_VERSION} (this bundle was made by another version of the app)`),
  exportedAtMs: v.pipe(finite(0, 8.64e15, 'export time'), v.integer()),
  sessions: v.pipe(
    v.array(
      v.strictObject({
        id: v.pipe(v.string(), v.regex(/^[A-Za-z0-9-]{1,64}$/, 'id must be 1-64 letters, digits or dashes')),
        folder: v.pipe(v.string(), v.regex(/^[A-Za-z0-9._-]{1,100}$/, 'folder names are letters, digits, dot, dash and underscore')),
        hasAudio: v.boolean(),
      }),
    ),
    v.minLength(1, 'the bundle lists no session'),
    v.maxLength(1000, 'a bundle holds at most 1000 sessions'),
  ),
});

export type SessionFile = v.InferOutput<typeof SessionFileSchema>;
export type Manifest = v.InferOutput<typeof ManifestSchema>;
export type ExportedSession = v.InferOutput<typeof SessionSchema>;

// Compile-time guard: the validated layout and the app's types must agree both ways, so a field
// added to Report or Marker in dsp/types.ts fails the type check here until the schema learns it.
type Validated<T> = v.InferOutput<typeof ReportSchema> extends T ? (T extends v.InferOutput<typeof ReportSchema> ? true : false) : false;
const reportMatches: Validated<Report> = true;
const markerMatches: v.InferOutput<typeof MarkerSchema> extends Marker ? (Marker extends v.InferOutput<typeof MarkerSchema> ? true : false) : false = true;
const sessionFits: ExportedSession extends Pick<SessionRecord, 'id' | 'createdAtMs' | 'updatedAtMs' | 'meta' | 'markers' | 'gaps' | 'report' | 'durationS' | 'history'> ? true : false = true;
/** True when A and B have exactly the same keys (an optional field added to one side alone fails). */
type SameKeys<A, B> = [Exclude<keyof A, keyof B>, Exclude<keyof B, keyof A>] extends [never, never] ? true : false;
type Out<S extends v.GenericSchema> = v.InferOutput<S>;
const sameKeys: [
  SameKeys<Report, Out<typeof ReportSchema>>,
  SameKeys<Report['summary'], Out<typeof SummarySchema>>,
  SameKeys<Report['segments'][number], Out<typeof SegmentSchema>>,
  SameKeys<Report['noiseDriven'][number], Out<typeof NoiseDrivenSchema>>,
  SameKeys<NonNullable<Report['modeStatistics']>[number], Out<typeof ModeStatisticsSchema>>,
  SameKeys<Marker, Out<typeof MarkerSchema>>,
  SameKeys<SessionRecord['meta'], Out<typeof MetaSchema>>,
  SameKeys<NonNullable<SessionRecord['meta']['geometry']>, Out<typeof GeometrySchema>>,
] = [true, true, true, true, true, true, true, true];
void sameKeys;
void reportMatches;
void markerMatches;
void sessionFits;
