// A private redis-server for one test file: a free port on 127.0.0.1 only, a temporary folder,
// no snapshots and no append-only file, a password; stopped and its folder removed afterwards.
import { spawn, type ChildProcess } from 'node:child_process';
import { createServer, connect } from 'node:net';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { tmpdir } from 'node:os';
import { randomBytes } from 'node:crypto';

export const REDIS_SERVER = process.env.REDIS_SERVER ?? '/usr/bin/redis-server';

export interface TestRedis {
  port: number;
  password: string;
  /** redis://:password@127.0.0.1:port */
  url: string;
  dir: string;
  /** Stops the server (SIGKILL: a crash, as far as clients can tell). */
  kill(): Promise<void>;
  /** Starts it again on the same port, empty (nothing was persisted). */
  restart(): Promise<void>;
  stop(): Promise<void>;
}

/** Why Redis tests cannot run here, or null when they can. */
export function redisMissing(): string | null {
  return existsSync(REDIS_SERVER) ? null : `${REDIS_SERVER} not found (apt-get install redis-server; .ci/run does)`;
}

async function freePort(): Promise<number> {
  return new Promise((done, fail) => {
    const s = createServer();
    s.once('error', fail);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => done(port));
    });
  });
}

/** Sends PING (authenticated) until +PONG comes back, or fails after `ms`. */
async function waitReady(port: number, password: string, ms = 10_000): Promise<void> {
  const until = Date.now() + ms;
  for (;;) {
    const ok = await new Promise<boolean>((done) => {
      const c = connect(port, '127.0.0.1');
      let got = '';
      c.once('error', () => done(false));
      c.on('data', (b) => {
        got += b.toString();
        if (got.includes('+PONG')) {
          c.destroy();
          done(true);
        } else if (got.includes('-')) {
          c.destroy();
          done(false);
        }
      });
      c.once('connect', () => c.write(`AUTH ${password}\r\nPING\r\n`));
    });
    if (ok) return;
    if (Date.now() > until) throw new Error(`redis-server on 127.0.0.1:${port} did not answer PING within ${ms} ms`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

export async function startRedis(): Promise<TestRedis> {
  const missing = redisMissing();
  if (missing) throw new Error(missing);
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-redis-'));
  const port = await freePort();
  const password = randomBytes(12).toString('hex');
  let child: ChildProcess | null = null;
  const launch = async () => {
    child = spawn(REDIS_SERVER, [
      '--port', String(port), '--bind', '127.0.0.1', '--protected-mode', 'yes', '--dir', dir,
      '--save', '', '--appendonly', 'no', '--requirepass', password, '--logfile', join(dir, 'redis.log'),
      '--daemonize', 'no',
    ], { stdio: 'ignore' });
    const exited = new Promise<never>((_, fail) => child!.once('exit', (code) => fail(new Error(`redis-server exited with code ${code}; see ${join(dir, 'redis.log')}`))));
    await Promise.race([waitReady(port, password), exited]);
    exited.catch(() => {});
  };
  const kill = async () => {
    const c = child as ChildProcess | null;
    if (!c || c.exitCode !== null || c.signalCode !== null) return;
    await new Promise<void>((done) => {
      c.once('exit', () => done());
      c.kill('SIGKILL');
    });
  };
  await launch();
  return {
    port, password, dir,
    url: `redis://:${password}@127.0.0.1:${port}`,
    kill,
    restart: async () => {
      await kill();
      await launch();
    },
    stop: async () => {
      await kill();
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
