// What crosses Redis between the coordinator and the workers: queue and key names, the unit
// payloads and the unit results, each as a zod schema — a result is validated before it is
// merged, whatever worker sent it.
import { z } from 'zod';

/** Every key and queue of the farm starts with this, so a shared Redis stays tidy. */
export const FARM_PREFIX = 'plumbline';
/** All work units of all runs go to this queue; any worker takes any unit. */
export const UNIT_QUEUE = 'plumbline-units';
/** One queue per run holds the run's parent job (the flow's root, which collects the units). */
export const runQueueName = (runId: string) => `plumbline-run-${runId}`;

export const keys = {
  worker: (name: string) => `${FARM_PREFIX}:farm:worker:${name}`,
  workers: `${FARM_PREFIX}:farm:worker:*`,
  run: (runId: string) => `${FARM_PREFIX}:farm:run:${runId}`,
  runs: `${FARM_PREFIX}:farm:run:*`,
  cancel: (runId: string) => `${FARM_PREFIX}:farm:cancel:${runId}`,
  modelMeta: (runId: string) => `${FARM_PREFIX}:farm:model:${runId}:meta`,
  modelChunk: (runId: string, file: number, chunk: number) => `${FARM_PREFIX}:farm:model:${runId}:${file}:${chunk}`,
  modelAll: (runId: string) => `${FARM_PREFIX}:farm:model:${runId}:*`,
  /**
   * One stored result part (a PNG) of one attempt at one unit: binary, written by the worker's
   * sandbox, read and deleted by the coordinator once merged (result-store.ts). The attempt token
   * keeps a retried unit's parts apart from those of an attempt that went on after losing its lock.
   */
  result: (runId: string, jobId: string, attempt: string, part: number) => `${FARM_PREFIX}:farm:result:${runId}:${jobId}:${attempt}:${part}`,
  /** Every stored part of one unit (any attempt): what a result of that unit may name. */
  unitResults: (runId: string, jobId: string) => `${FARM_PREFIX}:farm:result:${runId}:${jobId}:`,
  /** Every stored part of a run, for the run's clean-up. */
  resultAll: (runId: string) => `${FARM_PREFIX}:farm:result:${runId}:*`,
};

/** A worker re-announces itself this often, and is forgotten when it has been silent for three times as long. */
export const WORKER_HEARTBEAT_MS = 5_000;
/** Run records outlive a crashed coordinator by a day at most. */
export const RUN_RECORD_TTL_S = 24 * 3600;

const hex64 = z.string().regex(/^[0-9a-f]{64}$/);

export const modelRefSchema = z.object({
  /** The generator fingerprint every worker must reproduce before it renders. */
  fingerprint: hex64,
  /** The card or .onnx path on the coordinator's machine (workers map it with --path-map). */
  path: z.string().min(1),
  mappingPath: z.string().optional(),
  /** True when the files are also published into Redis for this run. */
  published: z.boolean(),
});
export type ModelRef = z.infer<typeof modelRefSchema>;

export const publishedModelSchema = z.object({
  /** The entry file (card or .onnx) among `files`. */
  entry: z.string(),
  files: z.array(z.object({
    name: z.string().regex(/^[A-Za-z0-9_.-]+(\/[A-Za-z0-9_.-]+)*$/).refine((n) => !n.split('/').includes('..'), 'no ..'),
    size: z.number().int().min(0),
    chunks: z.array(hex64),
  })).min(1),
  chunkBytes: z.number().int().positive(),
});
export type PublishedModel = z.infer<typeof publishedModelSchema>;

const directionSchema = z.object({
  name: z.string(),
  vector: z.array(z.number()),
  layers: z.tuple([z.number().int(), z.number().int()]).nullable(),
  sigma: z.number(),
});

export const variantUnitDataSchema = z.object({
  kind: z.literal('variants'),
  runId: z.string(),
  unitName: z.string(),
  model: modelRefSchema,
  recipe: z.unknown(),
  directions: z.array(directionSchema),
  unit: z.object({ setting: z.number().int().min(0), seeds: z.array(z.number().int().min(0)).min(1) }),
  batch: z.number().int().positive(),
});
export type VariantUnitData = z.infer<typeof variantUnitDataSchema>;

/**
 * Bytes a worker stored in Redis beside its result (keys.result): the result names the key, the
 * length and the SHA-256, and the coordinator checks both before it uses the bytes. Bulk bytes
 * never travel in a job's return value (which BullMQ copies through the sandbox's IPC, the job
 * hash, the parent's list of child values and back, as JSON).
 */
export const storedBytesSchema = z.object({
  key: z.string().min(1).max(300),
  bytes: z.number().int().min(0),
  sha256: hex64,
});
export type StoredBytes = z.infer<typeof storedBytesSchema>;

export const variantUnitResultSchema = z.object({
  kind: z.literal('variants'),
  worker: z.string(),
  seconds: z.number().nonnegative(),
  /** Each image's PNG is stored under `key` (storedBytesSchema); `sha256` is the PNG file's hash. */
  images: z.array(storedBytesSchema.extend({ file: z.string(), seed: z.number().int().min(0) })),
});
export type VariantUnitResult = z.infer<typeof variantUnitResultSchema>;

/** What a worker publishes about itself for `plumbline farm status`. */
export const workerRecordSchema = z.object({
  name: z.string(),
  host: z.string(),
  threads: z.number().int(),
  fingerprint: z.string().nullable(),
  imagesPerSecond: z.number().nullable(),
  units: z.number().int(),
  busy: z.string().nullable(),
  since: z.string(),
});
export type WorkerRecord = z.infer<typeof workerRecordSchema>;

export const runRecordSchema = z.object({
  runId: z.string(),
  kind: z.enum(['variants', 'audit']),
  label: z.string(),
  units: z.number().int(),
  state: z.enum(['running', 'done', 'failed', 'cancelled']),
  startedAt: z.string(),
  message: z.string().optional(),
});
export type RunRecord = z.infer<typeof runRecordSchema>;
