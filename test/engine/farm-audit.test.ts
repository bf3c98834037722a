// An audit on a farm (two worker processes, a private redis-server on 127.0.0.1) equals the same
// audit on one machine in every number — same probes, same bootstrap seed — except timing fields.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawn } from 'node:child_process';
import { redisMissing, startRedis, type TestRedis } from '../helpers/redis.ts';
import { startWorker, type TestWorker } from '../helpers/farm.ts';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => new Promise<{ status: number | null; stdout: string; stderr: string }>((done) => {
  const c = spawn(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { stdio: ['ignore', 'pipe', 'pipe'] });
  let stdout = '';
  let stderr = '';
  c.stdout.on('data', (b) => (stdout += b));
  c.stderr.on('data', (b) => (stderr += b));
  c.on('exit', (status) => done({ status, stdout, stderr }));
});
const skip = redisMissing() ?? false;
let redis: TestRedis;
const workers: TestWorker[] = [];
before(async () => {
  if (!skip) redis = await startRedis();
});
after(async () => {
  for (const w of workers) await w.kill();
  await redis?.stop();
});

/** Fields that record when or how long, not what was measured. */
const TIMING = /^(createdAt|startedAt|finishedAt|seconds|elapsed.*|duration.*|.*Ms)$/;
const withoutTiming = (v: unknown): unknown => {
  if (Array.isArray(v)) return v.map(withoutTiming);
  if (v && typeof v === 'object') return Object.fromEntries(Object.entries(v).filter(([k]) => !TIMING.test(k)).map(([k, x]) => [k, withoutTiming(x)]));
  return v;
};

test('an audit on two farm workers equals the one-machine audit in every number', { skip }, async () => {
  workers.push(await startWorker(redis.url, 'left'), await startWorker(redis.url, 'right'));
  const dir = tempDir();
  // 100 probes in units of 64 (four batches of 16): chunks of 64 and 36 per direction.
  const args = ['audit', '-d', join(root, 'resources', 'demo', 'sigil-directions.npy'), '--only', 'crest_size,hue_shift,outline_bold', '--probes', '100', '--strengths', '-2:2:0.5', '--resamples', '300', '--seed', '4'];
  const [local, farm] = [await cli(...args, '--json', join(dir, 'local.json')), await cli(...args, '--json', join(dir, 'farm.json'), '--farm', redis.url)];
  assert.equal(local.status, 0, local.stderr);
  assert.equal(farm.status, 0, farm.stderr);
  const a = JSON.parse(readFileSync(join(dir, 'local.json'), 'utf8'));
  const b = JSON.parse(readFileSync(join(dir, 'farm.json'), 'utf8'));
  assert.equal(a.directions.length, 3);
  // The null baseline (16 random directions, rendered on the farm as its own units) is in both
  // reports, and every direction is placed against it: the equality below covers those numbers too.
  assert.equal(a.nullBaseline?.directions, 16);
  for (const d of a.directions) assert.ok(d.nullBaseline, `${d.name} has no null-baseline percentiles`);
  assert.deepEqual(withoutTiming(b), withoutTiming(a));
  // The table printed is the same too, and the workers rendered every unit: 3 directions and one
  // null group per layer rule in use, each in 2 probe chunks.
  assert.equal(farm.stdout.replace(/^wrote .*$/m, ''), local.stdout.replace(/^wrote .*$/m, ''));
  const units = [...farm.stderr.matchAll(/worker (left|right): (\d+) unit\(s\)/g)].map((m) => [m[1], Number(m[2])] as const);
  assert.equal(units.reduce((s, [, n]) => s + n, 0), (3 + a.nullBaseline.rules.length) * 2, farm.stderr);
});
