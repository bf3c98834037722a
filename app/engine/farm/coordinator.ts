// The coordinating side of a farm run: publishes the generator for the run, submits the run's
// work units as one BullMQ flow (a parent job in the run's own queue waits for every unit), follows
// the units, validates each result before handing it on, and on cancel removes the units still
// waiting and flags the running ones to stop at their next batch. Redis losing the run (a restart
// without persistence) or going silent fails the run with a message — never a partial result.
import { randomBytes } from 'node:crypto';
import { FlowProducer, Job, Queue, Worker } from 'bullmq';
import { Redis } from 'ioredis';
import type { z } from 'zod';
import { PlumblineError } from '../../core/errors.ts';
import { describe, forEachKeyBatch, isConnectionError, parseFarmUrl, redisOptions, type FarmAddress } from './connection.ts';
import { publishModel, unpublishModel } from './model-store.ts';
import { removeRunParts } from './result-store.ts';
import { keys, RUN_RECORD_TTL_S, runQueueName, UNIT_QUEUE, workerRecordSchema, runRecordSchema, type ModelRef, type RunRecord, type WorkerRecord } from './protocol.ts';

/** Attempts per unit (the first run plus two retries) before the run fails. */
export const UNIT_ATTEMPTS = 3;
/** Wait between attempts of a failed unit. */
const RETRY_DELAY_MS = 500;
/** How often the coordinator looks at its units. */
const POLL_MS = 150;
/** Redis silent this long: the run fails rather than wait forever. */
export const REDIS_SILENCE_LIMIT_MS = 30_000;
/** After a cancel, running units get this long to notice the flag at their next batch. */
const CANCEL_GRACE_MS = 60_000;

export interface FarmUnit {
  name: string;
  data: Record<string, unknown>;
}

/** Per-worker figures for a progress panel. */
export interface WorkerProgress {
  worker: string;
  units: number;
  images: number;
  seconds: number;
  imagesPerSecond: number;
  busy: string | null;
}

export interface RunProgress {
  runId: string;
  done: number;
  total: number;
  workers: WorkerProgress[];
}

export interface RunOptions<R> {
  kind: 'variants' | 'audit';
  label: string;
  model: { fingerprint: string; files: string[]; path: string; mappingPath?: string };
  /** Publish the generator files into Redis for workers without shared storage (default true). */
  publish?: boolean;
  units: FarmUnit[];
  schema: z.ZodType<R>;
  /**
   * Checks a schema-valid result against its unit, fetching and checking any bytes it stored in
   * Redis (result-store.ts; `jobId` is the unit's job, whose keys the result may name); throws to
   * reject it. Returns the images in it.
   */
  check: (unit: FarmUnit, result: R, where: { runId: string; jobId: string }) => number | Promise<number>;
  isCancelled?: () => boolean;
  attempts?: number;
  /** Told when a unit leaves the worker that held it and goes round again. */
  onNote?: (line: string) => void;
}

export class Farm {
  readonly address: FarmAddress;
  readonly redis: Redis;
  readonly #connection: ReturnType<typeof redisOptions>;

  private constructor(address: FarmAddress) {
    this.address = address;
    this.#connection = redisOptions(address, false);
    this.redis = new Redis({ ...this.#connection, lazyConnect: true });
  }

  static async connect(url: string, password?: string): Promise<Farm> {
    const farm = new Farm(parseFarmUrl(url, password));
    // ioredis reports refusals (wrong password, unknown user) as error events; keep the latest for the message.
    let refusal: Error | null = null;
    farm.redis.on('error', (err: Error) => (refusal = err));
    try {
      await withTimeout(farm.redis.connect().then(() => farm.redis.ping()), 10_000, `no answer from the farm's Redis at ${describe(farm.address)} within 10 s`);
    } catch (err) {
      farm.redis.disconnect();
      const m = ((refusal as Error | null) ?? (err as Error)).message;
      const hint = farm.address.password === undefined ? ' (no password was given: set PLUMBLINE_FARM_PASSWORD, or user:password in the URL)' : '';
      const tls = farm.address.tls && /no answer/.test(m) ? ' (rediss:// speaks TLS: is this Redis set up for TLS?)' : '';
      throw new PlumblineError('farm', /NOAUTH|WRONGPASS|AUTH/i.test(m) ? `the farm's Redis at ${describe(farm.address)} refused the password or user${hint}: ${m}` : `cannot reach the farm's Redis at ${describe(farm.address)}${tls}: ${m}`);
    }
    return farm;
  }

  async close(): Promise<void> {
    this.redis.disconnect();
  }

  /** A warning when no worker is announced on this farm (and database): a run would wait, silently, for one. */
  async noWorkersWarning(): Promise<string | null> {
    if ((await this.workers()).length > 0) return null;
    return `no worker is on the farm at ${describe(this.address)}${this.address.db ? ` (database ${this.address.db}: workers must name the same one)` : ''}; the run waits until one starts (plumbline worker --farm …)`;
  }

  async workers(): Promise<WorkerRecord[]> {
    const found = await this.#scan(keys.workers);
    const out: WorkerRecord[] = [];
    for (const k of found) {
      const raw = await this.redis.get(k);
      const parsed = raw ? workerRecordSchema.safeParse(JSON.parse(raw)) : null;
      if (parsed?.success) out.push(parsed.data);
    }
    return out.sort((a, b) => a.name.localeCompare(b.name));
  }

  async runs(): Promise<RunRecord[]> {
    const found = await this.#scan(keys.runs);
    const out: RunRecord[] = [];
    for (const k of found) {
      const raw = await this.redis.get(k);
      const parsed = raw ? runRecordSchema.safeParse(JSON.parse(raw)) : null;
      if (parsed?.success) out.push(parsed.data);
    }
    return out.sort((a, b) => a.startedAt.localeCompare(b.startedAt));
  }

  async #scan(pattern: string): Promise<string[]> {
    const out: string[] = [];
    await forEachKeyBatch(this.redis, pattern, (found) => out.push(...found));
    return out;
  }

  /**
   * Runs units on the farm. Yields progress as units finish and each validated result as
   * `{ unit, result }` through `accept`; returns when every unit is merged. Throws PlumblineError
   * ('farm' or 'cancelled') otherwise.
   */
  async *run<R>(o: RunOptions<R>, accept: (unit: FarmUnit, result: R) => void | Promise<void>): AsyncGenerator<RunProgress, void, void> {
    const runId = randomBytes(6).toString('hex');
    const attempts = o.attempts ?? UNIT_ATTEMPTS;
    const record: RunRecord = { runId, kind: o.kind, label: o.label, units: o.units.length, state: 'running', startedAt: new Date().toISOString() };
    const saveRecord = () => this.redis.set(keys.run(runId), JSON.stringify(record), 'EX', RUN_RECORD_TTL_S).catch(() => {});
    // Publishing (reading, hashing and storing the generator's files) runs while the units are
    // submitted and taken: workers that reach the files on shared storage never wait for it, and a
    // worker that needs them waits for the published list, which is written last (model-store.ts).
    const publish = o.publish ?? true;
    let publishError: Error | null = null;
    const publishing = publish ? publishModel(this.redis, runId, o.model.files).then(() => undefined, (err: Error) => void (publishError = err)) : null;
    const model: ModelRef = { fingerprint: o.model.fingerprint, path: o.model.path, mappingPath: o.model.mappingPath, published: publish };
    await saveRecord();
    const flow = new FlowProducer({ connection: this.#connection });
    const units = new Queue(UNIT_QUEUE, { connection: this.#connection });
    // Connection errors while Redis restarts are handled by the polling below (silence limit, lost run).
    flow.on('error', () => {});
    units.on('error', () => {});
    // The parent job runs here once every unit has completed: it collects the units' values.
    const parentWorker = new Worker(runQueueName(runId), async (job: Job) => ({ units: Object.keys(await job.getChildrenValues()).length }), { connection: { ...this.#connection, maxRetriesPerRequest: null } });
    parentWorker.on('error', () => {});
    const byId = new Map<string, FarmUnit>();
    const finished = new Set<string>();
    const workers = new Map<string, WorkerProgress>();
    /** Which worker held each running unit at the last poll. */
    const holders = new Map<string, string>();
    let parentId = '';
    let cancelled = false;
    try {
      const tree = await flow.add({
        name: `run ${runId}`,
        queueName: runQueueName(runId),
        data: { runId },
        children: o.units.map((u) => ({
          name: u.name,
          queueName: UNIT_QUEUE,
          data: { ...u.data, runId, unitName: u.name, model },
          opts: { attempts, backoff: { type: 'fixed', delay: RETRY_DELAY_MS }, failParentOnFailure: true },
        })),
      });
      parentId = tree.job.id!;
      (tree.children ?? []).forEach((c, k) => byId.set(c.job.id!, o.units[k]));
      let lastContact = Date.now();
      let cancelAt = 0;
      const silenceTooLong = (err: unknown) => new PlumblineError('farm', `lost the farm's Redis at ${describe(this.address)} for ${REDIS_SILENCE_LIMIT_MS / 1000} s: ${(err as Error).message}`);
      while (finished.size < byId.size) {
        await new Promise((r) => setTimeout(r, POLL_MS));
        if (publishError) throw new PlumblineError('farm', `run ${runId}: publishing the generator's files through Redis failed: ${(publishError as Error).message}`);
        if (!cancelled && o.isCancelled?.()) {
          cancelled = true;
          cancelAt = Date.now();
          try {
            await this.redis.set(keys.cancel(runId), '1', 'EX', RUN_RECORD_TTL_S);
            // Units not yet started are removed; running ones stop at their next batch.
            for (const id of byId.keys()) {
              const job = await Job.fromId(units, id);
              if (job && ['waiting', 'delayed', 'prioritized', 'wait'].includes(await job.getState())) await job.remove().catch(() => {});
            }
          } catch (err) {
            // Redis away: the clean-up below flags and removes them again, if it can.
            if (!isConnectionError(err)) throw err;
          }
        }
        let states: { id: string; job: Job | undefined; state: string; by: string | null; progress: string | null }[];
        try {
          states = await withTimeout(Promise.all([...byId.keys()].filter((id) => !finished.has(id)).map(async (id) => {
            // State first, then the job: a job read before its completion would lack its result.
            // Only finished units are read whole (their result, or their failure); for the others
            // two fields are enough, so a poll does not re-read every waiting unit's payload.
            const state = await units.getJobState(id);
            if (state === 'completed' || state === 'failed') {
              const job = await Job.fromId(units, id);
              return { id, job, state: job ? state : 'missing', by: (job as (Job & { processedBy?: string }) | undefined)?.processedBy ?? null, progress: null };
            }
            if (state === 'unknown') return { id, job: undefined, state: 'missing', by: null, progress: null };
            // 'pb' is where BullMQ keeps the name of the worker that took the job (prepareJobForProcessing.lua).
            const [by, progress] = await this.redis.hmget(units.toKey(id), 'pb', 'progress');
            if (by === null && progress === null && !(await this.redis.exists(units.toKey(id)))) return { id, job: undefined, state: 'missing', by: null, progress: null };
            return { id, job: undefined, state, by, progress };
          })), 5_000, 'Redis did not answer');
          const alive = await this.redis.exists(keys.run(runId));
          lastContact = Date.now();
          if (!alive) throw new PlumblineError('farm', `the farm's Redis at ${describe(this.address)} no longer holds run ${runId} (it restarted without persistence, or was flushed); nothing from this run was kept — run it again`);
        } catch (err) {
          if (err instanceof PlumblineError) throw err;
          if (Date.now() - lastContact > REDIS_SILENCE_LIMIT_MS) throw silenceTooLong(err);
          continue;
        }
        // Who holds a unit now is read afresh each poll: a worker that died holding one is not shown busy.
        for (const w of workers.values()) w.busy = null;
        for (const { id, job, state, by: processedBy, progress } of states) {
          const unit = byId.get(id)!;
          if (cancelled && (state === 'missing' || state === 'failed' || state === 'unknown')) {
            finished.add(id);
            continue;
          }
          if (state === 'missing') throw new PlumblineError('farm', `the farm's Redis at ${describe(this.address)} lost unit ${unit.name} of run ${runId} (restarted without persistence, or flushed); nothing from this run was kept — run it again`);
          const by = processedBy ?? 'unknown worker';
          if (state === 'failed' && job) {
            throw new PlumblineError('farm', `run ${runId} failed: unit ${unit.name} failed ${job.attemptsMade} time(s); last on worker ${by}: ${job.failedReason}`);
          }
          // A unit that left its worker (it died, stalled or failed the attempt) goes round again: say so.
          const held = holders.get(id);
          if (held !== undefined && ((state === 'active' && processedBy && processedBy !== held) || ['waiting', 'wait', 'delayed', 'prioritized'].includes(state))) {
            o.onNote?.(`unit ${unit.name} left worker ${held} (it stopped, stalled or failed the attempt)${state === 'active' ? `; now on worker ${processedBy}` : '; it waits for a worker'}`);
            holders.delete(id);
          }
          if (state === 'active' && processedBy) holders.set(id, processedBy);
          // A unit's progress is a JSON object once its worker has reported a batch.
          if (state === 'active' && progress?.startsWith('{')) {
            const w = workers.get(by) ?? { worker: by, units: 0, images: 0, seconds: 0, imagesPerSecond: 0, busy: null };
            w.busy = unit.name;
            workers.set(by, w);
          }
          if (state !== 'completed' || !job) continue;
          const parsed = o.schema.safeParse(job.returnvalue);
          if (!parsed.success) throw new PlumblineError('farm', `result of unit ${unit.name} from worker ${by} rejected: ${parsed.error.issues.slice(0, 3).map((i) => `${i.path.join('.') || '(root)'}: ${i.message}`).join('; ')}`);
          let images: number;
          try {
            images = await o.check(unit, parsed.data, { runId, jobId: id });
          } catch (err) {
            // Redis away while fetching the unit's bytes is no fault of the result: read it again at the next poll.
            if (isConnectionError(err)) {
              if (Date.now() - lastContact > REDIS_SILENCE_LIMIT_MS) throw silenceTooLong(err);
              break;
            }
            throw new PlumblineError('farm', `result of unit ${unit.name} from worker ${(parsed.data as { worker?: string }).worker ?? by} rejected: ${(err as Error).message}`);
          }
          await accept(unit, parsed.data);
          finished.add(id);
          const name = (parsed.data as { worker?: string }).worker ?? by;
          // A unit can leave a dead worker and finish on another between two polls (a fast unit): say so here too.
          const before = holders.get(id);
          if (before !== undefined && before !== name) o.onNote?.(`unit ${unit.name} left worker ${before} (it stopped, stalled or failed the attempt); finished on worker ${name}`);
          holders.delete(id);
          const w = workers.get(name) ?? { worker: name, units: 0, images: 0, seconds: 0, imagesPerSecond: 0, busy: null };
          w.units++;
          w.images += images;
          w.seconds += (parsed.data as { seconds?: number }).seconds ?? 0;
          w.imagesPerSecond = w.seconds > 0 ? w.images / w.seconds : 0;
          w.busy = null;
          workers.set(name, w);
          yield { runId, done: finished.size, total: byId.size, workers: [...workers.values()] };
        }
        if (cancelled && Date.now() - cancelAt > CANCEL_GRACE_MS) break;
      }
      if (cancelled) throw new PlumblineError('farm', `run ${runId} cancelled: units not started were removed, running ones stopped at their next batch`);
      // Every unit is in: the parent collects their values; its count must match.
      const parent = await waitForParent(runQueueName(runId), parentId, this.#connection);
      if (parent !== byId.size) throw new PlumblineError('farm', `run ${runId}: the flow's parent collected ${parent} unit values, expected ${byId.size}`);
      record.state = 'done';
    } catch (err) {
      record.state = cancelled ? 'cancelled' : 'failed';
      record.message = (err as Error).message;
      // Whatever Redis call met the outage, the run fails saying so, not with the client's own words alone.
      if (!(err instanceof PlumblineError) && isConnectionError(err)) throw new PlumblineError('farm', `run ${runId} failed: lost the farm's Redis at ${describe(this.address)} (${(err as Error).message}); run the same command again when it is back${o.kind === 'variants' ? ' (finished images are kept)' : ''}`);
      throw err;
    } finally {
      if (record.state === 'running') {
        // Left early (the caller stopped following the run): a cancel.
        record.state = 'cancelled';
        record.message = 'cancelled';
      }
      if (record.state !== 'done') {
        // Stop the rest of the run: flag running units (they stop at their next batch), drop waiting ones.
        await this.redis.set(keys.cancel(runId), '1', 'EX', RUN_RECORD_TTL_S).catch(() => {});
        for (const id of byId.keys()) if (!finished.has(id)) await units.remove(id).catch(() => {});
      }
      await saveRecord();
      await parentWorker.close().catch(() => {});
      if (publishing) {
        await publishing;
        await unpublishModel(this.redis, runId).catch(() => {});
      }
      // Results are merged: the units' stored values and any bytes they stored leave Redis (merged
      // units' bytes are already gone; these are a rejected result's, or a failed attempt's).
      for (const id of byId.keys()) await units.remove(id).catch(() => {});
      await removeRunParts(this.redis, runId).catch(() => {});
      const runQueue = new Queue(runQueueName(runId), { connection: this.#connection });
      await runQueue.obliterate({ force: true }).catch(() => {});
      await runQueue.close().catch(() => {});
      await units.close().catch(() => {});
      await flow.close().catch(() => {});
    }
  }
}

async function waitForParent(queueName: string, id: string, connection: ReturnType<typeof redisOptions>): Promise<number> {
  const queue = new Queue(queueName, { connection });
  try {
    const until = Date.now() + REDIS_SILENCE_LIMIT_MS;
    for (;;) {
      const state = await queue.getJobState(id);
      const job = state === 'unknown' ? undefined : await Job.fromId(queue, id);
      if (!job) throw new PlumblineError('farm', `the run's parent job ${id} is gone from Redis`);
      if (state === 'completed') return (job.returnvalue as { units: number }).units;
      if (state === 'failed') throw new PlumblineError('farm', `the run's parent job failed: ${job.failedReason}`);
      if (Date.now() > until) throw new PlumblineError('farm', `the run's parent job did not complete within ${REDIS_SILENCE_LIMIT_MS / 1000} s of its last unit (state ${state})`);
      await new Promise((r) => setTimeout(r, POLL_MS));
    }
  } finally {
    await queue.close();
  }
}

function withTimeout<T>(p: Promise<T>, ms: number, message: string): Promise<T> {
  let timer: NodeJS.Timeout;
  return Promise.race([p, new Promise<never>((_, fail) => (timer = setTimeout(() => fail(new Error(message)), ms)))]).finally(() => clearTimeout(timer));
}
