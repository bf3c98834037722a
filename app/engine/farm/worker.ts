// `plumbline worker`: takes work units from the farm's queue and renders them in a sandboxed
// child process (unit-processor.ts), announcing itself (name, threads, loaded generator, images/s)
// for `plumbline farm status`.
import { hostname, tmpdir } from 'node:os';
import { join, extname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { mkdirSync } from 'node:fs';
import { Worker, type Job } from 'bullmq';
import { Redis } from 'ioredis';
import { describe, isConnectionError, parseFarmUrl, redisOptions } from './connection.ts';
import { keys, UNIT_QUEUE, WORKER_HEARTBEAT_MS, type WorkerRecord } from './protocol.ts';
import { Farm } from './coordinator.ts';
import { WORKER_SETTINGS_ENV, type WorkerSettings } from './unit-processor.ts';

export interface WorkerOptions {
  url: string;
  password?: string;
  name?: string;
  threads?: number;
  scratch?: string;
  pathMaps?: [string, string][];
  /**
   * How long a unit's lock lasts without renewal, and how often stalled units are looked for.
   * BullMQ's defaults (30 s, 30 s) suit production; tests shorten them to see a killed worker sooner.
   */
  lockMs?: number;
  stalledCheckMs?: number;
  log?: (line: string) => void;
}

/** Units that stall (their worker vanished) this many times fail instead of going round again. */
export const MAX_STALLED = 2;
/** Weight of the newest unit in the images/s average (exponential moving average). */
const RATE_WEIGHT = 0.3;

const processorFile = fileURLToPath(new URL(`./unit-processor${extname(fileURLToPath(import.meta.url))}`, import.meta.url));

export interface RunningWorker {
  name: string;
  close(): Promise<void>;
}

export async function startFarmWorker(o: WorkerOptions): Promise<RunningWorker> {
  const address = parseFarmUrl(o.url, o.password);
  const name = o.name ?? `${hostname()}-${process.pid}`;
  const scratch = o.scratch ?? join(tmpdir(), `plumbline-worker-${name.replace(/[^A-Za-z0-9_.-]/g, '_')}`);
  mkdirSync(scratch, { recursive: true });
  const threads = o.threads ?? 1;
  const settings: WorkerSettings = { name, threads, url: o.url, password: o.password, scratch, pathMaps: o.pathMaps ?? [] };
  // The sandbox is a child process of this one and inherits its environment.
  process.env[WORKER_SETTINGS_ENV] = JSON.stringify(settings);
  const log = o.log ?? (() => {});
  // One clear answer before anything starts: a refused password or an unreachable Redis ends the
  // command with the same words as farm status, instead of retrying forever.
  await (await Farm.connect(o.url, o.password)).close();
  // Later outages are ridden out (the clients reconnect); each kind of error is said once a minute, not per retry.
  const said = new Map<string, number>();
  const calmly = (err: Error) => {
    const now = Date.now();
    if (now - (said.get(err.message) ?? 0) < 60_000) return;
    said.set(err.message, now);
    log(`${name}: ${err.message}${isConnectionError(err) ? ' (Redis away; retrying until it is back)' : ''}`);
  };
  const redis = new Redis(redisOptions(address, true));
  redis.on('error', calmly);
  const record: WorkerRecord = { name, host: hostname(), threads, fingerprint: null, imagesPerSecond: null, units: 0, busy: null, since: new Date().toISOString() };
  const announce = () => redis.set(keys.worker(name), JSON.stringify(record), 'PX', 3 * WORKER_HEARTBEAT_MS).catch(() => {});
  await announce();
  const heartbeat = setInterval(announce, WORKER_HEARTBEAT_MS);
  const worker = new Worker(UNIT_QUEUE, processorFile, {
    connection: redisOptions(address, true),
    concurrency: 1,
    useWorkerThreads: false,
    name,
    lockDuration: o.lockMs ?? 30_000,
    stalledInterval: o.stalledCheckMs ?? 30_000,
    maxStalledCount: MAX_STALLED,
    // Under tsx (the CLI, tests) the sandbox needs the TypeScript loader; compiled builds do not.
    ...(processorFile.endsWith('.ts') && !process.execArgv.some((a) => a.includes('tsx')) ? { workerForkOptions: { execArgv: [...process.execArgv, '--import', import.meta.resolve('tsx')] } } : {}),
  });
  worker.on('active', (job: Job) => {
    record.busy = String(job.data?.unitName ?? job.id);
    void announce();
  });
  worker.on('completed', (job: Job, result: { images?: unknown[]; probes?: number; imagesRendered?: number; seconds?: number }) => {
    record.busy = null;
    record.units++;
    record.fingerprint = job.data?.model?.fingerprint ?? record.fingerprint;
    const images = result?.imagesRendered ?? result?.images?.length ?? 0;
    if (result?.seconds && images) {
      const rate = images / result.seconds;
      record.imagesPerSecond = record.imagesPerSecond === null ? rate : (1 - RATE_WEIGHT) * record.imagesPerSecond + RATE_WEIGHT * rate;
    }
    log(`${name}: ${job.data?.unitName ?? job.id} done (${images} images)`);
    void announce();
  });
  worker.on('failed', (job: Job | undefined, err: Error) => {
    record.busy = null;
    log(`${name}: ${job?.data?.unitName ?? job?.id ?? 'a unit'} failed: ${err.message}`);
    void announce();
  });
  worker.on('error', calmly);
  await worker.waitUntilReady();
  log(`worker ${name} (${threads} thread${threads > 1 ? 's' : ''}) waiting for units on ${describe(address)}; scratch ${scratch}`);
  return {
    name,
    close: async () => {
      clearInterval(heartbeat);
      await worker.close();
      await redis.del(keys.worker(name)).catch(() => {});
      redis.disconnect();
    },
  };
}
