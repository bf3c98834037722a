// The one message schema shared by renderer, engine host, web shell, Electron main and CLI.
// Every boundary validates what it receives with these schemas. Binary payloads (images) travel
// as Uint8Array values: transferred over MessagePorts, as binary frames over WebSockets (see
// frames.ts), never as base64 text.
import { z } from 'zod';
import { directionNameSchema, variantLabelSchema } from './names.ts';

export const PROTOCOL_VERSION = 1;

export { errorDataSchema, ERROR_CATALOGUE, ERROR_CODES, type ErrorCode, type ErrorData } from './errors.ts';
import { errorDataSchema, type ErrorData } from './errors.ts';
export type WireError = ErrorData;

const bytes = z.custom<Uint8Array>((v) => v instanceof Uint8Array, { message: "expected binary bytes (Uint8Array)" });
/** The largest seed the engine accepts (seeds are unsigned 32-bit integers). */
export const SEED_MAX = 0xffffffff;
const seed = z.number().int().min(0).max(SEED_MAX);
const psi = z.number().min(0).max(2);
/** Largest edit strength (σ) any request may carry. */
export const MAX_STRENGTH = 50;
const strength = z.number().finite().min(-MAX_STRENGTH).max(MAX_STRENGTH);
/** A named reference (a located latent pinned in the project); same rule as app/engine/references.ts. */
const referenceName = /^[A-Za-z0-9_-][A-Za-z0-9_.-]{0,119}$/;

/** Random probe latents an audit accepts; with pinned seeds the set must still hold at least 2 (an interval needs 2). */
export const PROBE_LIMITS = { min: 0, max: 100_000, minTotal: 2 } as const;
/** Evaluations a locate search accepts (app/engine/locate.ts: fewer than 50 leave no room past the random starts). */
export const LOCATE_BUDGET = { min: 50, max: 1_000_000 } as const;
/** Per-tab session id: names the holder of a project's lock (kept in sessionStorage, so a reload keeps it). */
const session = z.string().regex(/^[A-Za-z0-9_-]{8,64}$/);
/** A written reason for an override or a forced render (the rule module sets the minimum length). */
const reason = z.string().max(4000);
/** Variant-set settings as the studio keeps them in the project (strengths by direction name). */
export const variantDraftSchema = z.object({
  name: z.string().max(80),
  seeds: z.string().max(400),
  /** Named references of the project rendered beside the seeds. */
  references: z.array(z.string().max(80)).max(1000).default([]),
  out: z.string().max(4096),
  settings: z.array(z.object({ label: z.string().max(60), strengths: z.record(z.string(), strength) })).max(200),
});
export type VariantDraft = z.infer<typeof variantDraftSchema>;

/**
 * Random directions per layer rule in the app's null baseline. Smaller than the CLI's 16 so an
 * interactive audit stays quick; percentiles among 8 are coarse (steps of 12.5%), which is why
 * the audit screen and the report state the count beside each percentile. Ask for more per audit.
 */
export const APP_NULL_DIRECTIONS = 8;

export const editSchema = z.object({ direction: z.string().min(1), strength });
export type Edit = z.infer<typeof editSchema>;


export const attributeInfoSchema = z.object({ name: z.string(), unit: z.string().optional(), description: z.string().optional() });

export const modelInfoSchema = z.object({
  id: z.string(),
  name: z.string(),
  description: z.string(),
  fingerprint: z.string().regex(/^[0-9a-f]{64}$/),
  files: z.array(z.string()),
  space: z.enum(['z', 'w', 'w+']),
  latentSize: z.number().int().positive(),
  layers: z.number().int().positive(),
  hasMapping: z.boolean(),
  width: z.number().int().positive(),
  height: z.number().int().positive(),
  defaultPsi: z.number(),
  attributes: z.array(attributeInfoSchema),
  assumptions: z.array(z.string()),
  demoDirections: z.string().nullable(),
  caution: z.string().nullable(),
});
export type ModelInfo = z.infer<typeof modelInfoSchema>;

export type ReviewStatusName = 'draft' | 'in-review' | 'approved' | 'rejected';
export const reviewEntrySchema = z.object({
  at: z.string(),
  direction: z.string(),
  vectorHash: z.string(),
  status: z.enum(['draft', 'in-review', 'approved', 'rejected']),
  reviewer: z.string(),
  note: z.string(),
  /** Present when the step broke a sign-off rule on purpose: the written reason. */
  override: z.string().optional(),
  /** What the approval gate said at the time of an override (e.g. "its last audit failed: …"). */
  gate: z.string().optional(),
});
export type ReviewEntry = z.infer<typeof reviewEntrySchema>;

export const signOffSchema = z.object({
  status: z.enum(['draft', 'in-review', 'approved', 'rejected']),
  /** True when the last approval was for a different vector: the direction changed since. */
  approvalReset: z.boolean(),
  history: z.array(reviewEntrySchema),
  /** The approval gate from app/core/signoff-rules.ts: may it be approved plainly, and why not. */
  gate: z.object({ state: z.enum(['passing', 'failed', 'needs-review', 'too-few-probes', 'stale', 'unaudited']), explanation: z.string() }).optional(),
  /** Each status and whether this direction may move there now: yes, only with an override, or no. */
  transitions: z.array(z.object({ to: z.enum(['draft', 'in-review', 'approved', 'rejected']), allowed: z.enum(['yes', 'override', 'no']), why: z.string() })).optional(),
  /** Every stored audit of this direction, newest first; current = of its present vector. */
  audits: z.array(z.object({ at: z.string(), file: z.string(), verdict: z.enum(['pass', 'review', 'fail', 'no-measure']), reason: z.string(), probes: z.number(), current: z.boolean() })).optional(),
});
export type SignOff = z.infer<typeof signOffSchema>;

export const directionInfoSchema = z.object({
  id: z.string(),
  name: z.string(),
  target: z.string().nullable(),
  layers: z.tuple([z.number().int(), z.number().int()]).nullable(),
  /** Std of the latent projection onto the direction over random samples: one strength unit. */
  sigma: z.number().positive(),
  notes: z.string(),
  method: z.string(),
  /** Provenance record (method, parameters, samples, seed, generator fingerprint, parent). */
  source: z.record(z.string(), z.unknown()).default({}),
  kept: z.boolean().default(true),
  signOff: signOffSchema.nullable().default(null),
});
export type DirectionInfo = z.infer<typeof directionInfoSchema>;

/** A defined attribute as the app shows it: its cross-validated accuracy goes wherever it is used. */
export const definedAttributeInfoSchema = z.object({
  name: z.string(),
  kind: z.enum(['tags', 'ratings']),
  metric: z.enum(['auc', 'r2']),
  value: z.number(),
  floor: z.number(),
  folds: z.number(),
  has: z.number(),
  lacks: z.number(),
  noisy: z.boolean(),
  note: z.string().nullable(),
  /** The accuracy in words, as reports print it. */
  accuracy: z.string(),
  file: z.string().nullable(),
});
export type DefinedAttributeInfo = z.infer<typeof definedAttributeInfoSchema>;

export const imageSchema = z.object({ width: z.number().int(), height: z.number().int(), rgba: bytes });
export type WireImage = z.infer<typeof imageSchema>;

const interval = z.object({ value: z.number().nullable(), low: z.number().nullable(), high: z.number().nullable() });
/** A reading that may be "not measurable": NaN or ±Infinity over a MessagePort, null after JSON. */
const reading = z.custom<number | null>((v) => v === null || typeof v === 'number', { message: 'expected a number or null' });
const regionShares = z.object({ subject: z.number(), edge: z.number(), background: z.number() });
/** Where a direction acts: the mean per-pixel CIEDE2000 map (its PNG travels separately) and its shares by region. */
/** A direction's change map image (PNG bytes), sent beside the report like the thumbnails. */
const changeMapPngSchema = z.object({ direction: z.string(), png: bytes });
const changeMapWireSchema = z.object({ width: z.number(), height: z.number(), probes: z.number(), fullScale: z.number(), meanDeltaE: z.number(), shares: regionShares });
/** An apparent leak no larger than the instrument's own noise floor or cross-talk, set aside. */
const withinInstrumentSchema = z.object({ attribute: z.string(), change: reading, ratio: reading, noiseFloor: reading, crossTalk: reading, via: z.string().optional() });
/** Which verdict threshold a measure's detection limit hides: 'fail' (cannot see a failing leak), 'review' (cannot tell pass from review), null (sees one at the pass threshold). */
const blindToSchema = z.enum(['fail', 'review']);
/** A measure blind at a threshold in one direction's audit: its detection limit (σ), and the attribute whose exact operation's cross-talk set it (absent: its noise floor). */
const blindMeasureSchema = z.object({ attribute: z.string(), limit: reading, blindTo: blindToSchema, via: z.string().optional() });
/**
 * The instrument calibrated on this probe set: per measure, its noise floor, its cross-talk under
 * each exact operation and its detection limit at the audit's thresholds (absent in reports made
 * before the limit was reported).
 */
const calibrationWireSchema = z.object({
  probes: z.number(),
  operations: z.object({ invisible: z.array(z.string()), exact: z.array(z.string()) }),
  measures: z.record(z.string(), z.object({ noiseFloor: reading, crossTalk: z.record(z.string(), reading), detectionLimit: reading.optional(), blindTo: blindToSchema.nullable().optional() })),
  floorMultiple: z.number(),
  crossTalkMultiple: z.number(),
});
/** The audit report as it crosses the protocol (thumbnails travel separately, as binary PNG). */
export const auditWireSchema = z.object({
  format: z.literal('plumbline.audit'),
  version: z.literal(1),
  generator: z.object({ name: z.string(), fingerprint: z.string() }),
  probes: z.object({ count: z.number(), psi: z.number() }).passthrough(),
  attributes: z.array(z.object({ name: z.string(), unit: z.string(), source: z.string(), sigma: z.number(), judged: z.boolean().optional(), accuracy: z.string().optional() })),
  warnings: z.array(z.string()),
  caution: z.string(),
  settings: z.object({ referenceStrength: z.number(), leakPass: z.number(), leakFail: z.number() }).passthrough(),
  directions: z.array(z.object({
    name: z.string(),
    target: z.string(),
    targetChosen: z.boolean(),
    verdict: z.enum(['pass', 'review', 'fail', 'no-measure']),
    reason: z.string(),
    targetEffect: interval,
    dependency: z.record(z.string(), interval),
    leakage: interval.extend({ strength: z.number(), attribute: z.string() }).passthrough(),
    /** Probes whose own leak reaches leakPass, with the Clopper–Pearson interval of their share. */
    exceedance: z.object({ threshold: z.number(), probes: z.number(), count: z.number(), share: z.number(), low: z.number(), high: z.number() }).optional(),
    /** Percentiles among random directions (null baseline); null when none ran. */
    nullBaseline: z.object({ count: z.number(), targetEffect: z.number(), leakage: z.number(), pathLength: z.number() }).nullable().optional(),
    pathLength: interval.extend({ distance: z.string(), units: z.string().optional() }).passthrough(),
    safeRange: z.tuple([z.number(), z.number()]),
    breaksAt: z.number().nullable(),
    curves: z.object({ strengths: z.array(z.number()), attributes: z.record(z.string(), z.object({ mean: z.array(z.number()), low: z.array(z.number()), high: z.array(z.number()) })) }),
    leakageCurve: z.array(z.number().nullable()),
    pathLengthCurve: z.object({ strengths: z.array(z.number()), mean: z.array(z.number()), low: z.array(z.number()), high: z.array(z.number()) }),
    withinInstrument: z.array(withinInstrumentSchema).optional(),
    blind: z.array(blindMeasureSchema).optional(),
    notMeasurable: z.record(z.string(), z.number()).optional(),
    changeMap: changeMapWireSchema.nullable().optional(),
    consistency: z.object({ probes: z.number(), median: reading, mean: reading, coefficientOfVariation: reading, flipShare: reading }).optional(),
  }).passthrough()),
  combinations: z.array(z.object({ a: z.string(), b: z.string(), attribute: z.string(), attributeInteraction: interval, imageInteraction: interval, verdict: z.string() })),
  calibration: calibrationWireSchema.nullable().optional(),
  noSubject: z.object({ probes: z.number(), of: z.number() }).nullable().optional(),
}).passthrough();
export type AuditWire = z.infer<typeof auditWireSchema>;

/** Which queue a method waits in: control (in order, between job batches), preview (latest wins, before the next job batch) or job (queued, cancellable, with progress). */
export type Lane = 'control' | 'preview' | 'job';

/**
 * The one cancelled result. Every job method may answer with it instead of its outcome;
 * cancellation is a result, not an error (shared/STYLE.md, habit 6). Declared here once: the
 * job methods below declare only their outcome, and resultSchemas adds this alternative.
 */
export const cancelledSchema = z.object({ cancelled: z.literal(true) });
export type Cancelled = z.infer<typeof cancelledSchema>;

function declare<L extends Lane, P extends z.ZodType, R extends z.ZodObject | z.ZodType>(lane: L, params: P, result: R) {
  return { lane, params, result };
}

export const referenceInfoSchema = z.object({ name: z.string(), ssim: z.number(), deltaE: z.number(), found: z.boolean(), imageSha256: z.string(), evaluations: z.number().int(), budget: z.number().int() });
export type ReferenceInfo = z.infer<typeof referenceInfoSchema>;

const uiStateSchema = z.object({
  seed, psi, strengths: z.record(z.string(), strength), pinned: z.array(seed).max(10_000), tags: z.record(z.string(), z.enum(['has', 'lacks'])),
  variants: variantDraftSchema.optional(),
  auditProbes: z.number().int().min(PROBE_LIMITS.min).max(PROBE_LIMITS.max).optional(),
});
/** Who holds a project's lock: process, machine, session and when it last renewed. */
export const lockHolderSchema = z.object({ pid: z.number().int(), host: z.string(), session: z.string(), at: z.string(), /** the operating-system account that holds it (older locks lack it) */ user: z.string().max(256).optional() });
export type LockHolder = z.infer<typeof lockHolderSchema>;
/**
 * The holder as a window is told it: never its session id, which would let another tab speak for
 * the holder (the web shell binds each connection to the one session it declares).
 */
export const lockHolderWireSchema = lockHolderSchema.omit({ session: true });
export type LockHolderWire = z.infer<typeof lockHolderWireSchema>;
/** A holder without its session id, for the wire. */
export const holderForWire = (h: LockHolder | null): LockHolderWire | null => (h ? { pid: h.pid, host: h.host, at: h.at, ...(h.user ? { user: h.user } : {}) } : null);
const candidateSchema = z.object({ direction: directionInfoSchema, strip: z.array(imageSchema), stripSeeds: z.array(seed), stripStrengths: z.array(z.number()) });
/** A render farm as the engine sees it (the password never comes back). */
const farmWorkerSchema = z.object({ name: z.string(), host: z.string(), threads: z.number().int(), fingerprint: z.string().nullable(), imagesPerSecond: z.number().nullable(), units: z.number().int(), busy: z.string().nullable(), since: z.string() });
const farmStatusSchema = z.object({
  connected: z.boolean(),
  /** The farm's address with any password replaced by ***. */
  url: z.string().nullable(),
  workers: z.array(farmWorkerSchema),
  runs: z.array(z.object({ runId: z.string(), kind: z.enum(['variants', 'audit']), label: z.string(), units: z.number().int(), state: z.enum(['running', 'done', 'failed', 'cancelled']), startedAt: z.string(), message: z.string().optional() })),
});
/** Per-worker figures of a farm job, on its progress events. */
export const farmProgressSchema = z.array(z.object({ worker: z.string(), units: z.number().int(), images: z.number().int(), seconds: z.number(), imagesPerSecond: z.number(), busy: z.string().nullable() }));

const thumbnailSchema = z.object({ direction: z.string(), seed: seed.nullable(), reference: z.string().optional(), strength: z.number(), attribute: z.string(), leakage: z.number(), before: bytes, after: bytes });

/**
 * Every method, declared once: its lane, its parameter schema and its result schema (for jobs,
 * the outcome without the cancelled alternative). Adding a method means adding one entry here and
 * one handler in app/engine/handlers/ — nothing else.
 */
export const methods = {
  'engine.hello': declare('control', z.object({}), z.object({ protocol: z.number(), engine: z.string(), threads: z.number(), model: modelInfoSchema.nullable() })),
  /** Audits and variant sets go to this farm until 'farm.disconnect'; the engine keeps the password in memory only. */
  'farm.connect': declare('control', z.object({ url: z.string().min(1).max(2048), password: z.string().max(1024).optional() }), farmStatusSchema),
  'farm.disconnect': declare('control', z.object({}), farmStatusSchema),
  'farm.status': declare('control', z.object({}), farmStatusSchema),
  'model.openDemo': declare('control', z.object({}), modelInfoSchema),
  'model.open': declare('control', z.object({ path: z.string().min(1), mappingPath: z.string().min(1).optional() }), modelInfoSchema),
  'directions.open': declare('control', z.object({ path: z.string().min(1) }), z.object({ file: z.string(), directions: z.array(directionInfoSchema) })),
  'directions.list': declare('control', z.object({}), z.object({ directions: z.array(directionInfoSchema) })),
  'directions.keep': declare('control', z.object({ id: z.string().min(1), name: directionNameSchema }), directionInfoSchema),
  'preview.render': declare('preview', z.object({ seed, psi, edits: z.array(editSchema).max(64), reference: z.string().regex(referenceName).optional() }), z.union([
    z.object({ superseded: z.literal(true) }),
    z.object({ superseded: z.literal(false), seed, image: imageSchema, attributes: z.array(z.number()), millis: z.number() }),
  ])),
  'grid.render': declare('job', z.object({ seeds: z.array(seed).min(1).max(256), psi }), z.object({ images: z.array(z.object({ seed, image: imageSchema })) })),
  /** Cancels a queued or running job by the id of the request that started it. */
  'job.cancel': declare('control', z.object({ requestId: z.number().int() }), z.object({ cancelled: z.boolean() })),
  'lab.discover': declare('job', z.object({
    method: z.enum(['pca', 'sefa', 'boundary', 'means']),
    components: z.number().int().min(1).max(64).default(6),
    samples: z.number().int().min(64).max(200_000).default(3000),
    seed: z.number().int().min(0).max(SEED_MAX).default(1),
    layers: z.tuple([z.number().int().min(0), z.number().int().min(1)]).nullable().default(null),
    attribute: z.string().min(1).optional(),
    positive: z.array(seed).max(10_000).default([]),
    negative: z.array(seed).max(10_000).default([]),
    name: z.string().min(1).max(120).optional(),
    /** Seeds and strengths for the preview strips of each candidate. */
    stripSeeds: z.array(seed).min(1).max(8).default([0, 1, 2]),
    stripStrengths: z.array(strength).min(1).max(9).default([-3, -1.5, 0, 1.5, 3]),
  }), z.object({ candidates: z.array(candidateSchema) })),
  'audit.run': declare('job', z.object({
    directions: z.array(z.string().min(1)).min(1).max(64),
    probes: z.number().int().min(PROBE_LIMITS.min).max(PROBE_LIMITS.max).default(64),
    pinnedSeeds: z.array(seed).max(10_000).default([]),
    /** Named references of the open project added to the probes after the seeds (their latents as stored, no truncation). */
    references: z.array(z.string().regex(referenceName)).max(1000).optional(),
    psi: psi.default(0.7),
    seed: z.number().int().min(0).max(SEED_MAX).default(1),
    referenceStrength: z.number().positive().max(10).default(2),
    /** Leak thresholds in σ of the leaked attribute (see VERDICT_RULE in app/protocol/verdict-rule.ts). */
    leakPass: z.number().positive().max(10).default(0.2),
    leakFail: z.number().positive().max(10).default(0.5),
    /** Random directions per layer rule for the null baseline (0 skips it); the report states the count beside every percentile. */
    nullDirections: z.number().int().min(0).max(256).default(APP_NULL_DIRECTIONS),
    combinations: z.enum(['all', 'none']).default('all'),
    /** Defined attributes of the open project (or this session) to audit with, by name. */
    defined: z.array(z.string().min(1)).max(32).optional(),
    /** Target attribute per direction id, overriding the direction's own (e.g. a defined attribute). */
    targets: z.record(z.string(), z.string().min(1)).optional(),
  }), z.object({ report: auditWireSchema, thumbnails: z.array(thumbnailSchema), changeMaps: z.array(changeMapPngSchema).default([]), savedAs: z.string().nullable() })),
  /** Fits an attribute from seeds tagged has / lacks; saved into the open project unless refused below the accuracy floor. */
  'attributes.define': declare('job', z.object({
    name: z.string().regex(/^[A-Za-z][A-Za-z0-9_.-]{0,63}$/, 'a name of letters, digits, _ . - starting with a letter'),
    has: z.array(seed).max(10_000),
    lacks: z.array(seed).max(10_000),
    psi,
  }), z.object({ attribute: definedAttributeInfoSchema, refused: z.string().nullable() })),
  'attributes.list': declare('control', z.object({}), z.object({ attributes: z.array(definedAttributeInfoSchema) })),
  'lab.repair': declare('job', z.object({ direction: z.string().min(1), against: z.array(z.string().min(1)).min(1).max(32), hold: z.union([z.literal('others'), z.array(z.string())]).default([]) }),
    z.object({ direction: directionInfoSchema, boundaries: z.array(z.object({ attribute: z.string(), accuracy: z.number(), role: z.string() })) })),
  'project.open': declare('control', z.object({ path: z.string().min(1), create: z.boolean().default(false), session: session.optional() }),
    z.object({
      path: z.string(), name: z.string(), generatorFingerprint: z.string().nullable(), generatorMatches: z.boolean(), directions: z.array(directionInfoSchema), audits: z.array(z.string()), ui: uiStateSchema.nullable(),
      /** Entries refused on open (bad names, files outside the project), each with its reason. */
      refused: z.array(z.string()).optional(),
      /** True when another window or tab holds the project's lock: this one may look but not write. */
      readOnly: z.boolean().default(false),
      lockHolder: lockHolderWireSchema.nullable().default(null),
      /** Discovery candidates not yet kept or discarded, as left in the project. */
      candidates: z.array(candidateSchema).default([]),
    })),
  /** Renews (or, once free, takes) this session's lock on the open project; releases it with release. */
  'project.lock': declare('control', z.object({ session, release: z.boolean().default(false) }), z.object({ readOnly: z.boolean(), lockHolder: lockHolderWireSchema.nullable() })),
  /** Every stored audit of the open project merged: the newest result per direction, with history. */
  'audit.history': declare('control', z.object({}), z.object({ report: auditWireSchema.nullable(), thumbnails: z.array(thumbnailSchema), changeMaps: z.array(changeMapPngSchema).default([]), files: z.array(z.string()) })),
  /** Full-size images of probes before and after a direction's edit (enlarged worst probes; repair before/after). */
  'lab.probeImages': declare('control', z.object({ direction: z.string().min(1), seeds: z.array(seed).min(1).max(8), strength, psi }), z.object({ images: z.array(z.object({ seed, before: bytes, after: bytes })) })),
  /** Renamed under the same name rule as keep (app/protocol/names.ts). */
  'directions.rename': declare('control', z.object({ id: z.string().min(1), name: directionNameSchema }), directionInfoSchema),
  /** Takes a kept direction out (its project files move to directions/deleted/). */
  'directions.delete': declare('control', z.object({ id: z.string().min(1) }), z.object({ directions: z.array(directionInfoSchema) })),
  /** Drops unkept discovery candidates (and their copies in the project's candidates/). */
  'directions.discard': declare('control', z.object({ ids: z.array(z.string().min(1)).min(1).max(256) }), z.object({ discarded: z.number().int() })),
  'project.saveUi': declare('control', uiStateSchema, z.object({ savedAt: z.string() })),
  'project.review': declare('control', z.object({ direction: z.string().min(1), status: z.enum(['draft', 'in-review', 'approved', 'rejected']), reviewer: z.string().min(1).max(120), note: z.string().max(4000).default(''), override: reason.optional() }),
    z.object({ direction: z.string(), signOff: signOffSchema })),
  'variants.render': declare('job', z.object({
    name: z.string().regex(/^[A-Za-z0-9_.-]{1,80}$/, 'letters, digits, _ . - only'),
    seeds: z.array(seed).min(1).max(10_000),
    /** Named references of the open project rendered beside the seeds (their latents as stored). */
    references: z.array(z.string().regex(referenceName)).max(1000).optional(),
    psi,
    /** Strengths keyed by direction id. */
    settings: z.array(z.object({ label: variantLabelSchema, strengths: z.record(z.string(), strength) })).min(1).max(200),
    out: z.string().min(1),
    /** Forces settings the use rules refuse (unapproved, rejected, outside the safe range); recorded in the manifest. */
    forceReason: reason.optional(),
  }), z.object({ out: z.string(), rendered: z.number(), reused: z.number(), replaced: z.number().optional(), contactSheet: bytes, sheet: z.object({ shown: z.number(), of: z.number(), what: z.string() }).optional() })),
  /** `out` is the absolute path the user chose; an existing file is replaced only with `overwrite`. */
  'pack.build': declare('control', z.object({ out: z.string().min(1), overwrite: z.boolean().optional() }), z.object({ file: z.string(), directions: z.array(z.string()), skipped: z.array(z.string()), bytes: z.number() })),
  /** Finds the latent of a reference image (docs/locate.md); progress plus locate.preview events. */
  'locate.run': declare('job', z.object({ image: bytes, fileName: z.string().min(1).max(1000), budget: z.number().int().min(LOCATE_BUDGET.min).max(LOCATE_BUDGET.max).default(3000), space: z.enum(['w', 'w+']).default('w'), seed: seed.default(1) }), z.object({
    found: z.boolean(), ssim: z.number(), deltaE: z.number(), message: z.string(), evaluations: z.number().int(), budget: z.number().int(),
    imageSha256: z.string(), notes: z.array(z.string()), reference: imageSchema, match: imageSchema, difference: imageSchema, caution: z.string(),
  })),
  /** Stores the last finished locate result in the open project as a named reference. */
  'reference.pin': declare('control', z.object({ name: z.string().regex(referenceName, 'letters, digits, _ . - only (1 to 120)') }), referenceInfoSchema),
  'reference.list': declare('control', z.object({}), z.object({ references: z.array(referenceInfoSchema) })),
  'pack.import': declare('control', z.object({ path: z.string().min(1) }), z.object({ imported: z.array(z.string()), directions: z.array(directionInfoSchema) })),
} as const;

export type Method = keyof typeof methods;
export type Params<M extends Method> = z.infer<(typeof methods)[M]['params']>;
/** What a method's handler returns: for a job, its outcome without the cancelled alternative. */
export type Outcome<M extends Method> = z.infer<(typeof methods)[M]['result']>;
export type JobMethod = { [M in Method]: (typeof methods)[M]['lane'] extends 'job' ? M : never }[Method];
/** What a request answers with: for a job, the one cancelled result or its outcome marked not cancelled. */
export type Result<M extends Method> = M extends JobMethod ? Cancelled | ({ cancelled: false } & Outcome<M>) : Outcome<M>;

export const laneOf = (method: Method): Lane => methods[method].lane;

/** Parameter schemas by method (derived from `methods`). */
export const requestSchemas = Object.fromEntries(Object.entries(methods).map(([m, d]) => [m, d.params])) as { [M in Method]: (typeof methods)[M]['params'] };

/** Result schemas by method (derived from `methods`); job results also accept the cancelled result. */
export const resultSchemas = Object.fromEntries(Object.entries(methods).map(([m, d]) => [m, d.lane === 'job' ? z.union([cancelledSchema, (d.result as z.ZodObject).extend({ cancelled: z.literal(false) })]) : d.result])) as unknown as Record<Method, z.ZodType>;

export const requestSchema = z.object({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('request'),
  id: z.number().int().nonnegative(),
  method: z.enum(Object.keys(requestSchemas) as [Method, ...Method[]]),
  params: z.unknown(),
  /** The window the request came from, stamped by the web shell (app/engine/request-session.ts). */
  session: z.string().min(1).max(200).optional(),
});
export type RequestMessage = { v: 1; type: 'request'; id: number; method: Method; params: unknown; session?: string };

export const responseSchema = z.discriminatedUnion('ok', [
  z.object({ v: z.literal(PROTOCOL_VERSION), type: z.literal('response'), id: z.number().int(), ok: z.literal(true), result: z.unknown() }),
  z.object({ v: z.literal(PROTOCOL_VERSION), type: z.literal('response'), id: z.number().int(), ok: z.literal(false), error: errorDataSchema }),
]);
export type ResponseMessage = z.infer<typeof responseSchema>;

export const eventSchemas = {
  'job.progress': z.object({ requestId: z.number().int(), done: z.number().int(), total: z.number().int(), label: z.string(), workers: farmProgressSchema.optional() }),
  'engine.ready': z.object({ engine: z.string(), restarted: z.boolean() }),
  'engine.stopped': z.object({ reason: z.string(), code: z.number().nullable(), restarting: z.boolean() }),
  'model.changed': z.object({ model: modelInfoSchema }),
  /** The best match so far of a running locate job (at most a few per second). */
  'locate.preview': z.object({ requestId: z.number().int(), image: imageSchema, ssim: z.number(), deltaE: z.number(), done: z.number().int(), total: z.number().int() }),
} as const;
export type EventName = keyof typeof eventSchemas;
export type EventData<E extends EventName> = z.infer<(typeof eventSchemas)[E]>;

export const eventSchema = z.object({
  v: z.literal(PROTOCOL_VERSION),
  type: z.literal('event'),
  event: z.enum(Object.keys(eventSchemas) as [EventName, ...EventName[]]),
  data: z.unknown(),
});
export type EventMessage = { v: 1; type: 'event'; event: EventName; data: unknown };

export type Message = RequestMessage | ResponseMessage | EventMessage;

export class ProtocolError extends Error {
  readonly code = 'protocol';
}

function describe(issues: z.core.$ZodIssue[]): string {
  return issues
    .slice(0, 4)
    .map((i) => `${i.path.length ? i.path.join('.') : '(message)'}: ${i.message}`)
    .join('; ');
}

/** Validates any incoming message and, for requests, its parameters. Throws ProtocolError. */
export function parseMessage(raw: unknown): Message {
  if (typeof raw !== 'object' || raw === null) throw new ProtocolError(`expected a message object, got ${raw === null ? 'null' : typeof raw}`);
  const type = (raw as { type?: unknown }).type;
  if (type === 'request') {
    const r = requestSchema.safeParse(raw);
    if (!r.success) throw new ProtocolError(`bad request: ${describe(r.error.issues)}`);
    const p = requestSchemas[r.data.method].safeParse(r.data.params);
    if (!p.success) throw new ProtocolError(`bad parameters for ${r.data.method}: ${describe(p.error.issues)}`);
    return { ...r.data, params: p.data } as RequestMessage;
  }
  if (type === 'response') {
    const r = responseSchema.safeParse(raw);
    if (!r.success) throw new ProtocolError(`bad response: ${describe(r.error.issues)}`);
    return r.data;
  }
  if (type === 'event') {
    const r = eventSchema.safeParse(raw);
    if (!r.success) throw new ProtocolError(`bad event: ${describe(r.error.issues)}`);
    const d = eventSchemas[r.data.event].safeParse(r.data.data);
    if (!d.success) throw new ProtocolError(`bad data for event ${r.data.event}: ${describe(d.error.issues)}`);
    return { ...r.data, data: d.data } as EventMessage;
  }
  throw new ProtocolError(`unknown message type ${JSON.stringify(type)} (expected request, response or event)`);
}

export function parseResult<M extends Method>(method: M, raw: unknown): Result<M> {
  const r = resultSchemas[method].safeParse(raw);
  if (!r.success) throw new ProtocolError(`bad result for ${method}: ${describe(r.error.issues)}`);
  return r.data as Result<M>;
}

export function request<M extends Method>(id: number, method: M, params: Params<M>): RequestMessage {
  return { v: PROTOCOL_VERSION, type: 'request', id, method, params };
}

export function event<E extends EventName>(name: E, data: EventData<E>): EventMessage {
  return { v: PROTOCOL_VERSION, type: 'event', event: name, data };
}
