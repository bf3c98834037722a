// Generator files through Redis: the coordinator publishes the files of the loaded generator for
// one run (chunked, SHA-256 per chunk, size-capped, removed when the run ends); a worker that
// cannot reach the files on shared storage fetches them into its scratch folder, checking every
// chunk. Either way the worker then checks the whole generator's fingerprint before loading it.
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, statSync } from 'node:fs';
import { dirname, join, relative, resolve, sep } from 'node:path';
import type { Redis } from 'ioredis';
import { writeFileAtomic } from '../../core/atomic-write.ts';
import { PlumblineError } from '../../core/errors.ts';
import { keys, publishedModelSchema, RUN_RECORD_TTL_S, type PublishedModel } from './protocol.ts';
import { deleteMatching } from './connection.ts';

/** 4 MiB per chunk: well under Redis's 512 MB string limit and small enough to retry cheaply. */
export const MODEL_CHUNK_BYTES = 4 * 1024 * 1024;
/** Published models above this size are refused (set a larger cap or use shared storage). */
export const DEFAULT_MODEL_CAP_BYTES = 1024 * 1024 * 1024;

/**
 * A worker that needs the published files waits this long for them: publishing runs beside the
 * run's start, and a 1 GB generator (the cap) takes seconds to read, hash and store.
 */
export const PUBLISH_WAIT_MS = 120_000;
const PUBLISH_POLL_MS = 200;

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** Publishes `files` (paths; the first is the entry) for a run. Names are relative to the entry's folder. */
export async function publishModel(redis: Redis, runId: string, files: string[], capBytes = DEFAULT_MODEL_CAP_BYTES): Promise<PublishedModel> {
  const root = dirname(resolve(files[0]));
  const total = files.reduce((a, f) => a + statSync(f).size, 0);
  if (total > capBytes) throw new PlumblineError('farm', `the generator's files hold ${(total / 1e6).toFixed(0)} MB, over the ${(capBytes / 1e6).toFixed(0)} MB cap for publishing through Redis; put them on storage the workers can reach (--path-map)`);
  const meta: PublishedModel = { entry: '', files: [], chunkBytes: MODEL_CHUNK_BYTES };
  for (const [index, file] of files.entries()) {
    const name = relative(root, resolve(file)).split(sep).join('/');
    if (name.startsWith('..')) throw new PlumblineError('farm', `${file}: generator files must sit in or below the folder of ${files[0]} to be published`, { file });
    if (index === 0) meta.entry = name;
    const bytes = new Uint8Array(readFileSync(file));
    const chunks: string[] = [];
    for (let at = 0, k = 0; at < bytes.length || k === 0; at += MODEL_CHUNK_BYTES, k++) {
      const part = bytes.subarray(at, at + MODEL_CHUNK_BYTES);
      chunks.push(sha(part));
      await redis.set(keys.modelChunk(runId, index, k), Buffer.from(part.buffer, part.byteOffset, part.byteLength), 'EX', RUN_RECORD_TTL_S);
      if (at + MODEL_CHUNK_BYTES >= bytes.length) break;
    }
    meta.files.push({ name, size: bytes.length, chunks });
  }
  await redis.set(keys.modelMeta(runId), JSON.stringify(meta), 'EX', RUN_RECORD_TTL_S);
  return meta;
}

export async function unpublishModel(redis: Redis, runId: string): Promise<void> {
  const meta = await redis.get(keys.modelMeta(runId));
  if (!meta) {
    // Publishing stopped part way (no list yet): remove whatever chunks it stored.
    await deleteMatching(redis, keys.modelAll(runId));
    return;
  }
  const m = publishedModelSchema.parse(JSON.parse(meta));
  const doomed = [keys.modelMeta(runId), ...m.files.flatMap((f, i) => f.chunks.map((_, k) => keys.modelChunk(runId, i, k)))];
  await redis.del(...doomed);
}

/**
 * Fetches a run's published files into `folder` (inside the worker's scratch), checking each
 * chunk's SHA-256 and each file's size, and returns the entry file's path. Files already there
 * with the right chunks are kept.
 */
export async function fetchModel(redis: Redis, runId: string, folder: string, worker: string, waitMs = PUBLISH_WAIT_MS): Promise<string> {
  // The coordinator publishes while units are already being taken; the list is written last.
  let raw = await redis.get(keys.modelMeta(runId));
  for (const until = Date.now() + waitMs; !raw && Date.now() < until; raw = await redis.get(keys.modelMeta(runId))) await new Promise((r) => setTimeout(r, PUBLISH_POLL_MS));
  if (!raw) throw new PlumblineError('farm', `worker ${worker}: the generator files for run ${runId} are not published in Redis after ${waitMs / 1000} s (removed, the run has ended, or publishing failed)`);
  const meta = publishedModelSchema.parse(JSON.parse(raw));
  const base = resolve(folder);
  for (const [index, f] of meta.files.entries()) {
    const target = resolve(base, f.name);
    if (!target.startsWith(base + sep)) throw new PlumblineError('farm', `worker ${worker}: published file name '${f.name}' leaves the scratch folder`);
    if (existsSync(target) && statSync(target).size === f.size && chunksOf(readFileSync(target), meta.chunkBytes).every((c, k) => c === f.chunks[k])) continue;
    const parts: Buffer[] = [];
    for (let k = 0; k < f.chunks.length; k++) {
      const part = await redis.getBuffer(keys.modelChunk(runId, index, k));
      if (!part) throw new PlumblineError('farm', `worker ${worker}: chunk ${k} of ${f.name} is missing from Redis`);
      const got = sha(part);
      if (got !== f.chunks[k]) throw new PlumblineError('farm', `worker ${worker}: chunk ${k} of ${f.name} has SHA-256 ${got}, expected ${f.chunks[k]}`);
      parts.push(part);
    }
    const bytes = Buffer.concat(parts);
    if (bytes.length !== f.size) throw new PlumblineError('farm', `worker ${worker}: ${f.name} is ${bytes.length} bytes, expected ${f.size}`);
    mkdirSync(dirname(target), { recursive: true });
    writeFileAtomic(target, bytes);
  }
  return join(base, meta.entry);
}

function chunksOf(bytes: Uint8Array, size: number): string[] {
  const out: string[] = [];
  for (let at = 0; at < bytes.length || out.length === 0; at += size) {
    out.push(sha(bytes.subarray(at, at + size)));
    if (at + size >= bytes.length) break;
  }
  return out;
}
