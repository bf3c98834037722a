// Farm addresses: redis://[user:password@]host:port[/db] → connection options for BullMQ's Redis
// client, and the same address with the password hidden, for messages and status lines; key scans.
import type { Redis } from 'ioredis';
import { PlumblineError } from '../../core/errors.ts';

export interface FarmAddress {
  host: string;
  port: number;
  username?: string;
  password?: string;
  db: number;
  tls: boolean;
}

/** Redis's default port (redis.io/docs, common practice). */
const DEFAULT_REDIS_PORT = 6379;

export function parseFarmUrl(url: string, password?: string): FarmAddress {
  let u: URL;
  try {
    u = new URL(url);
  } catch {
    throw new PlumblineError('bad-request', `--farm '${url}' is not an address; expected redis://[user:password@]host:port`);
  }
  if (u.protocol !== 'redis:' && u.protocol !== 'rediss:') throw new PlumblineError('bad-request', `--farm '${redact(url)}' must start with redis:// (or rediss:// for TLS)`);
  if (!u.hostname) throw new PlumblineError('bad-request', `--farm '${redact(url)}' names no host`);
  const port = u.port ? Number(u.port) : DEFAULT_REDIS_PORT;
  const db = u.pathname && u.pathname !== '/' ? Number(u.pathname.slice(1)) : 0;
  if (!Number.isInteger(db) || db < 0) throw new PlumblineError('bad-request', `--farm '${redact(url)}': the database number after the port must be an integer ≥ 0`);
  return {
    host: u.hostname.replace(/^\[|\]$/g, ''),
    port,
    username: u.username ? decodeURIComponent(u.username) : undefined,
    password: password ?? (u.password ? decodeURIComponent(u.password) : undefined),
    db,
    tls: u.protocol === 'rediss:',
  };
}

/** The address with any password replaced by ***. */
export function redact(url: string): string {
  return url.replace(/^(rediss?:\/\/[^:@/]*:)[^@/]*@/, '$1***@');
}

export function describe(a: FarmAddress): string {
  return `${a.tls ? 'rediss' : 'redis'}://${a.username ? `${a.username}@` : ''}${a.host}:${a.port}${a.db ? `/${a.db}` : ''}`;
}

/**
 * Options for the Redis client. Workers need `maxRetriesPerRequest: null` (BullMQ blocks on
 * Redis and must not give up while it restarts); the coordinator bounds its own waits instead.
 */
export function redisOptions(a: FarmAddress, forWorker: boolean) {
  return {
    host: a.host,
    port: a.port,
    username: a.username,
    password: a.password,
    db: a.db,
    ...(a.tls ? { tls: {} } : {}),
    maxRetriesPerRequest: forWorker ? null : 3,
    enableOfflineQueue: true,
  };
}

/** Every key matching `pattern`, one SCAN batch at a time (never KEYS, which blocks the server while it runs). */
export async function forEachKeyBatch(redis: Redis, pattern: string, each: (found: string[]) => unknown): Promise<void> {
  let cursor = '0';
  do {
    const [next, found] = await redis.scan(cursor, 'MATCH', pattern, 'COUNT', 500);
    cursor = next;
    if (found.length) await each(found);
  } while (cursor !== '0');
}

/** Deletes every key matching `pattern`. */
export async function deleteMatching(redis: Redis, pattern: string): Promise<void> {
  await forEachKeyBatch(redis, pattern, (found) => redis.del(...found));
}

/**
 * Whether an error means Redis could not be reached or answered (a restart, a network break), as
 * opposed to an answer that was wrong: ioredis gives up a command after its retries
 * (MaxRetriesPerRequestError) or finds the connection closed.
 */
export function isConnectionError(err: unknown): boolean {
  if (!(err instanceof Error)) return false;
  const code = (err as NodeJS.ErrnoException).code ?? '';
  return err.name === 'MaxRetriesPerRequestError' || ['ECONNREFUSED', 'ECONNRESET', 'EPIPE', 'ETIMEDOUT', 'EHOSTUNREACH', 'ENETUNREACH'].includes(code) || /Connection is closed|Stream isn't writeable|Redis did not answer/.test(err.message);
}
