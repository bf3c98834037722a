// Result bytes through Redis: a worker's sandbox stores each bulk part of a unit's result (a PNG)
// as a binary string under a run-scoped key with the runs' TTL, and the unit's return value names
// only the key, the length and the SHA-256. The coordinator fetches the bytes, checks both, and
// deletes the keys once the unit is merged; the run's clean-up removes whatever is left (a
// rejected result, an attempt that died part way).
import { createHash } from 'node:crypto';
import type { Redis } from 'ioredis';
import { keys, RUN_RECORD_TTL_S, type StoredBytes } from './protocol.ts';
import { deleteMatching } from './connection.ts';

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** Stores one part (the bytes are sent as they are: no copy, no encoding). */
export async function storePart(redis: Redis, key: string, bytes: Uint8Array): Promise<void> {
  await redis.set(key, Buffer.from(bytes.buffer, bytes.byteOffset, bytes.byteLength), 'EX', RUN_RECORD_TTL_S);
}

/**
 * Fetches the parts a result names and checks each: the key must be one of this unit's
 * (keys.unitResults), present, of the stated length and SHA-256. Throws an Error naming `what`
 * of the part and the problem; the caller adds the unit and the worker.
 */
export async function fetchParts(redis: Redis, runId: string, jobId: string, parts: (StoredBytes & { what: string })[]): Promise<Buffer[]> {
  const prefix = keys.unitResults(runId, jobId);
  for (const p of parts) if (!p.key.startsWith(prefix)) throw new Error(`${p.what}: key ${p.key} is not one of this unit's (${prefix}…)`);
  // One round trip for the lot: ioredis pipelines commands sent together on one connection.
  const found = await Promise.all(parts.map((p) => redis.getBuffer(p.key)));
  return parts.map((p, k) => {
    const bytes = found[k];
    if (!bytes) throw new Error(`${p.what}: its bytes are missing from Redis (key ${p.key}; expired, flushed or never stored)`);
    if (bytes.length !== p.bytes) throw new Error(`${p.what}: Redis holds ${bytes.length} bytes under ${p.key}, the worker stated ${p.bytes}`);
    const got = sha(bytes);
    if (got !== p.sha256) throw new Error(`${p.what}: bytes hash to ${got}, the worker claimed ${p.sha256}`);
    return bytes;
  });
}

/** Deletes named parts (merged, or an attempt's own after it failed). */
export async function removeParts(redis: Redis, names: string[]): Promise<void> {
  for (let at = 0; at < names.length; at += 500) await redis.del(...names.slice(at, at + 500));
}

/** Deletes every stored part of a run (its clean-up). */
export async function removeRunParts(redis: Redis, runId: string): Promise<void> {
  await deleteMatching(redis, keys.resultAll(runId));
}
