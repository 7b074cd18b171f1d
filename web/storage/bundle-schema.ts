/**
 * The layout of an exported session (session.json inside a bundle) and its validation with
 * valibot. The same layout is published as JSON Schema in docs/session-bundle.schema.json.
 *
 * JSON has no NaN or infinities, yet a track holds NaN (no tone) and a level may be −∞; such
 * values travel as the strings "NaN", "Infinity" and "-Infinity" wherever a measured value may
 * be non-finite, so an export → import round trip gives back every number bit for bit.
 */
import * as v from 'valibot';
import type { Marker, RegimeKind, Report } from '../../dsp/types';
import { DB_VERSION, type SessionRecord } from './db';

export const BUNDLE_FORMAT = 'humgauge-bundle';
export const SESSION_FORMAT = 'humgauge-session';
/** Layout version of session.json and manifest.json (follows the database schema). */
export const BUNDLE_SCHEMA_VERSION = DB_VERSION;

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

/** A measured value: a number in [min, max], or a non-finite token. */
const real = (min: number, max: number, what: string) =>
  v.pipe(v.union([finite(min, max, what), v.picklist(NON_FINITE, `${what} must be a number`)], `${what} must be a number`), v.transform(decodeNumber));

/**
 * Markup: "<" directly followed by a letter, "!", "/" or "?" opens a tag, comment or declaration
 * in an HTML parser (WHATWG HTML Living Standard, tokenization, "tag open state"); plus script
 * URLs. "<" before a space or a digit ("flow < 2 m/s", "<5 %") is plain text and allowed.
 */
const MARKUP = /<[a-z!?/]|javascript:/i;
/** Control characters other than tab, line feed and carriage return. */
// eslint-disable-next-line no-control-regex
const CONTROL = /[\u0000-\u0008\u000b\u000c\u000e-\u001f\u007f]/;

/** True when text holds tag-like markup or a script URL (refused in every text field of a session). */
export function hasMarkup(text: string): boolean {
  return MARKUP.test(text);
}

const text = (maxLength: number, what: string) =>
  v.pipe(
    v.string(`${what} must be text`),
    v.maxLength(maxLength, `${what} is longer than ${maxLength} characters`),
    v.check((s) => !MARKUP.test(s), `${what} holds HTML or script markup, which a session may not carry`),
    v.check((s) => !CONTROL.test(s), `${what} holds control characters`),
  );

const interval = (what: string) => v.nullable(v.strictTuple([real(-1e6, 1e6, what), real(-1e6, 1e6, what)], `${what} must be a pair [low, high]`));
const rate = (what: string) => real(-1e6, 1e6, what);
const TIME = (what: string) => finite(0, 1e7, what);
const FREQ = (what: string) => real(0, 1e6, what);
const DB = (what: string) => real(-1000, 1000, what);
const REGIME = v.picklist(['quiet', 'growth', 'steady', 'decay'], 'state must be quiet, growth, steady or decay');

export const MarkerSchema = v.strictObject({
  timeS: TIME('marker time'),
  kind: text(50, 'marker kind'),
  label: text(500, 'marker label'),
  value: v.optional(finite(-1e9, 1e9, 'marker control value')),
  unit: v.optional(text(30, 'marker unit')),
});

const SegmentSchema = v.strictObject({
  kind: REGIME,
  startS: TIME('segment start'),
  endS: TIME('segment end'),
  frequencyHz: FREQ('segment frequency'),
  ratePerS: v.nullable(rate('segment rate')),
  rateCi95PerS: interval('segment rate interval'),
  model: v.optional(v.nullable(text(40, 'segment model'))),
  limitAmplitudeDbfs: v.optional(v.nullable(DB('limit amplitude'))),
  isImpulseResponse: v.optional(v.boolean()),
});

const NoiseDrivenSchema = v.strictObject({
  startS: TIME('noise-driven start'),
  endS: TIME('noise-driven end'),
  frequencyHz: FREQ('noise-driven frequency'),
  decayRatePerS: rate('noise-driven decay rate'),
  decayRateCi95PerS: v.strictTuple([rate('decay interval'), rate('decay interval')]),
  lorentzianDecayRatePerS: v.optional(rate('Lorentzian decay rate')),
  lorentzianCi95PerS: v.optional(v.strictTuple([rate('Lorentzian interval'), rate('Lorentzian interval')])),
  autocorrelationDecayRatePerS: v.optional(rate('autocorrelation decay rate')),
  autocorrelationCi95PerS: v.optional(v.strictTuple([rate('autocorrelation interval'), rate('autocorrelation interval')])),
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
  sampleRateHz: finite(1, 1e7, 'report sample rate'),
  durationS: TIME('report duration'),
  onsets: v.pipe(v.array(v.strictObject({ timeS: TIME('onset time'), frequencyHz: FREQ('onset frequency') })), v.maxLength(100_000, 'too many onsets')),
  segments: v.pipe(v.array(SegmentSchema), v.maxLength(100_000, 'too many segments')),
  noiseDriven: v.pipe(v.array(NoiseDrivenSchema), v.maxLength(100_000, 'too many noise-driven estimates')),
  summary: SummarySchema,
  tones: v.optional(
    v.pipe(
      v.array(v.strictObject({ frequencyHz: FREQ('tone frequency'), isSteadyLine: v.boolean(), isMainsFrequency: v.optional(v.boolean()), cycles: v.optional(v.pipe(v.array(CycleSchema), v.maxLength(100_000))) })),
      v.maxLength(1000),
    ),
  ),
  clipped: v.optional(v.pipe(v.array(v.strictObject({ startS: TIME('clipped start'), endS: TIME('clipped end') })), v.maxLength(100_000))),
  warnings: v.optional(v.pipe(v.array(text(2000, 'report warning')), v.maxLength(1000, 'too many warnings'))),
});

const GeometrySchema = v.strictObject({
  lengthM: finite(0, 1000, 'duct length'),
  diameterM: finite(0, 100, 'duct diameter'),
  ends: v.picklist(['open-open', 'open-closed', 'closed-closed'], 'duct ends must be open-open, open-closed or closed-closed'),
  openEnd: v.picklist(['unflanged', 'flanged', 'none'], 'open end must be unflanged, flanged or none'),
  gasTemperatureC: finite(-273.15, 3000, 'gas temperature'),
  heaterPositionM: v.optional(finite(0, 1000, 'heater position')),
  hotTemperatureC: v.optional(finite(-273.15, 3000, 'hot gas temperature')),
});

const MetaSchema = v.strictObject({
  source: v.picklist(['microphone', 'file', 'import'], 'source must be microphone, file or import'),
  fileName: v.optional(text(300, 'file name')),
  sampleRateHz: v.pipe(finite(1000, 768_000, 'sample rate'), v.integer('sample rate must be a whole number of Hz')),
  site: text(200, 'site'),
  equipment: text(200, 'equipment'),
  notes: text(20_000, 'notes'),
  geometry: v.optional(GeometrySchema),
  calibrationOffsetDb: v.optional(finite(-300, 300, 'calibration offset')),
  calibrationSource: v.optional(text(300, 'calibration source')),
  captureSettings: v.optional(
    v.pipe(
      v.record(v.pipe(v.string(), v.regex(/^[A-Za-z0-9_]{1,64}$/, 'capture setting names are letters, digits and _')), v.union([text(200, 'capture setting'), finite(-1e9, 1e9, 'capture setting'), v.boolean()])),
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
const numberColumn = (what: string, min: number, max: number, allowNonFinite: boolean) =>
  column<number>(
    what,
    `must be at least ${min} and at most ${max}${allowNonFinite ? ' (or NaN/Infinity/-Infinity)' : ''}`,
    (x) => (typeof x === 'number' && x >= min && x <= max) || (allowNonFinite && isToken(x)),
    (x) => decodeNumber(x as number | (typeof NON_FINITE)[number]),
  );
const REGIME_SET = new Set<unknown>(['quiet', 'growth', 'steady', 'decay']);

export const TrackColumnsSchema = v.pipe(
  v.strictObject({
    timeS: numberColumn('track time', 0, 1e7, false),
    frequencyHz: numberColumn('track frequency', 0, 1e6, true),
    amplitudeDbfs: numberColumn('track amplitude', -1000, 1000, true),
    levelDbfs: numberColumn('track level', -1000, 1000, true),
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
    stoppedReason: v.optional(text(200, 'audio note')),
  }),
  history: v.pipe(v.array(text(1000, 'history entry')), v.maxLength(1000, 'too many history entries')),
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
void reportMatches;
void markerMatches;
void sessionFits;
