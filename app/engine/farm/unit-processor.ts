// The sandboxed processor of a farm worker: BullMQ runs this file in a child process, so
// inference never blocks the worker's event loop and its lock renewals. It loads a generator only
// after its fingerprint checks out, renders one unit, stores the unit's PNGs in Redis under the
// run's result keys and hands BullMQ a small result naming them; on disk it writes nothing except
// the generator files it fetches into the worker's scratch folder.
import { hostname } from 'node:os';
import { randomBytes } from 'node:crypto';
import { existsSync } from 'node:fs';
import { join } from 'node:path';
import { Redis } from 'ioredis';
import { UnrecoverableError, type SandboxedJob } from 'bullmq';
import { Generator, fingerprintModel } from '../generator.ts';
import { PlumblineError } from '../../core/errors.ts';
import { recipeSchema, synthesizeVariantUnit } from '../variants.ts';
import { sharedPngWriter } from '../png-writer.ts';
import { fetchModel } from './model-store.ts';
import { removeParts, storePart } from './result-store.ts';
import { auditUnit, isAuditUnit } from './audit-units.ts';
import { keys, variantUnitDataSchema, type ModelRef, type VariantUnitResult } from './protocol.ts';
import { parseFarmUrl, redisOptions } from './connection.ts';

/** Set by the worker process before it starts the sandbox (see worker.ts). */
export interface WorkerSettings {
  name: string;
  threads: number;
  url: string;
  password?: string;
  scratch: string;
  /** [from, to] path prefixes: the coordinator's path → this machine's path. */
  pathMaps: [string, string][];
}
export const WORKER_SETTINGS_ENV = 'PLUMBLINE_FARM_WORKER';
/** A failed attempt waits this long at most to remove the images it stored (the keys expire anyway). */
const CLEANUP_WAIT_MS = 5_000;

// The sandbox must not outlive its worker. Killed outright (kill -9, the kernel's out-of-memory
// killer), the worker cannot stop it. Idle, the sandbox sees its IPC channel close and exits. Busy,
// its next message (progress, result) fails (EPIPE) before the channel's closing is noticed;
// BullMQ's handler of that failure sends a message about it, which fails again, round and round
// in next-tick callbacks that never let the event loop (and the 'disconnect' event) run: the
// process spun a core for minutes, deaf to SIGTERM (BullMQ waits for the job). So a message that
// cannot reach the worker ends the process instead.
if (process.send) {
  process.once('disconnect', () => process.exit(1));
  const send = process.send.bind(process) as (...args: unknown[]) => boolean;
  process.send = ((...args: unknown[]) => {
    if (!process.connected) process.exit(1);
    const last = args.length - 1;
    if (typeof args[last] === 'function') {
      const callback = args[last] as (err: Error | null) => void;
      args[last] = (err: Error | null) => (channelGone(err) ? process.exit(1) : callback(err));
    }
    try {
      return send(...args);
    } catch (err) {
      if (channelGone(err)) process.exit(1);
      throw err;
    }
  }) as typeof process.send;
}

function channelGone(err: unknown): boolean {
  return ['EPIPE', 'ECONNRESET', 'ERR_IPC_CHANNEL_CLOSED'].includes((err as NodeJS.ErrnoException | null)?.code ?? '');
}

const settings: WorkerSettings = JSON.parse(process.env[WORKER_SETTINGS_ENV] ?? 'null') ?? { name: hostname(), threads: 1, url: '', scratch: '', pathMaps: [] };
let redis: Redis | null = null;
// Its errors (Redis away) surface as failed commands, and the worker process says them once a minute; unhandled, ioredis printed each retry with a stack.
const connection = () => (redis ??= new Redis(redisOptions(parseFarmUrl(settings.url, settings.password), true)).on('error', () => {}));
let loaded: { fingerprint: string; gen: Generator } | null = null;

export function mapPath(path: string, maps: [string, string][]): string {
  for (const [from, to] of maps) if (path === from || path.startsWith(from.endsWith('/') ? from : `${from}/`)) return to + path.slice(from.length);
  return path;
}

/** The run's generator, loaded only once its fingerprint equals the one the coordinator sent. */
export async function generatorFor(model: ModelRef, runId: string): Promise<Generator> {
  if (loaded?.fingerprint === model.fingerprint) return loaded.gen;
  const local = mapPath(model.path, settings.pathMaps);
  let entry: string;
  let mapping = model.mappingPath ? mapPath(model.mappingPath, settings.pathMaps) : undefined;
  if (existsSync(local)) entry = local;
  else if (model.published) {
    entry = await fetchModel(connection(), runId, join(settings.scratch, 'models', model.fingerprint), settings.name);
    mapping = undefined;
  } else throw new PlumblineError('farm', `worker ${settings.name}: cannot reach the generator at ${local}${local !== model.path ? ` (mapped from ${model.path})` : ''} and the coordinator did not publish it`);
  const found = fingerprintModel(entry, mapping).fingerprint;
  if (found !== model.fingerprint) throw new PlumblineError('farm', `worker ${settings.name} refused ${entry}: expected generator fingerprint ${model.fingerprint}, found ${found}`);
  if (loaded) await loaded.gen.dispose();
  loaded = null;
  const gen = await Generator.open(entry, { threads: settings.threads, mappingPath: mapping });
  // Checked again on the loaded model: the files could have changed between the two reads.
  if (gen.info.fingerprint !== model.fingerprint) {
    await gen.dispose();
    throw new PlumblineError('farm', `worker ${settings.name} refused ${entry}: expected generator fingerprint ${model.fingerprint}, found ${gen.info.fingerprint}`);
  }
  loaded = { fingerprint: model.fingerprint, gen };
  return gen;
}

/** Throws when the run was cancelled; called before every batch. */
export async function checkCancelled(runId: string): Promise<void> {
  if (await connection().exists(keys.cancel(runId))) throw new UnrecoverableError(`run ${runId} was cancelled`);
}

async function variantUnit(job: SandboxedJob): Promise<VariantUnitResult> {
  const data = variantUnitDataSchema.parse(job.data);
  const recipe = recipeSchema.parse(data.recipe);
  const started = performance.now();
  await checkCancelled(data.runId);
  const gen = await generatorFor(data.model, data.runId);
  gen.batchSize = data.batch;
  const directions = data.directions.map((d) => ({ ...d, vector: Float32Array.from(d.vector) }));
  // Batch by batch, as one machine renders the same seeds; each batch's conversion and PNG
  // encoding run on a thread while the next batch renders, and each PNG goes to Redis as its own
  // binary key as soon as it is encoded: the return value names keys, lengths and hashes only.
  const pool = sharedPngWriter();
  const redis = connection();
  const attempt = randomBytes(4).toString('hex');
  const stored: string[] = [];
  const encoded: Promise<VariantUnitResult['images'][number]>[] = [];
  let done = false;
  try {
    for (let at = 0; at < data.unit.seeds.length; at += data.batch) {
      if (at > 0) await checkCancelled(data.runId);
      const r = await synthesizeVariantUnit(gen, recipe, directions, { setting: data.unit.setting, seeds: data.unit.seeds.slice(at, at + data.batch) });
      const pngs = pool.encodeFloatBatch(gen.floatBatch(r.images, r.seeds.length), r.seeds.map((_, k) => k));
      encoded.push(...r.seeds.map(async (seed, k) => {
        const e = await pngs[k];
        const key = keys.result(data.runId, String(job.id), attempt, at + k);
        stored.push(key);
        await storePart(redis, key, e.png);
        // Farm units hold seeds only (a recipe with references renders on one machine).
        return { file: r.files[k], seed: seed!, key, bytes: e.png.byteLength, sha256: e.sha256 };
      }));
      await job.updateProgress({ worker: settings.name, done: Math.min(data.unit.seeds.length, at + data.batch), total: data.unit.seeds.length });
    }
    const images = await Promise.all(encoded);
    done = true;
    return { kind: 'variants', worker: settings.name, seconds: (performance.now() - started) / 1000, images };
  } finally {
    await Promise.allSettled(encoded);
    // A failed or cancelled attempt takes its stored images with it (the run's clean-up and the
    // keys' expiry catch what a killed one leaves).
    // Bounded: this connection waits for a Redis that is away, and the worker must not hang here.
    if (!done && stored.length) await Promise.race([removeParts(redis, stored).catch(() => {}), new Promise((r) => setTimeout(r, CLEANUP_WAIT_MS).unref())]);
  }
}

export default async function processUnit(job: SandboxedJob): Promise<unknown> {
  try {
    if (isAuditUnit(job.data)) return await auditUnit(job, settings.name, (data) => generatorFor(data.model, data.runId), checkCancelled);
    return await variantUnit(job);
  } catch (err) {
    if (err instanceof UnrecoverableError) throw err;
    // The message names the unit and this worker, so a run that fails says where and why.
    throw new Error(`unit ${(job.data as { unitName?: string }).unitName ?? job.id} on worker ${settings.name}: ${(err as Error).message}`);
  }
}
