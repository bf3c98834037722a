// Farm faults, each on a private redis-server on 127.0.0.1: a worker killed mid-unit (its unit
// comes back after stall detection and the set is unchanged), a worker holding another generator
// (refused with both fingerprints; the run fails naming unit, worker and error), a forged result
// (its stored PNG bytes missing, of another length, tampered with, or under a key not its own:
// rejected before anything is written, and no result keys left in Redis), cancel (waiting units removed, none left), and Redis
// restarting empty mid-run (the run fails and says so; the manifest stays incomplete).
import { test, before, after, afterEach } from 'node:test';
import assert from 'node:assert/strict';
import { cpSync, readFileSync, writeFileSync, readdirSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync, spawn, type ChildProcess } from 'node:child_process';
import { createHash } from 'node:crypto';
import { Queue, Worker, type Job } from 'bullmq';
import { Redis } from 'ioredis';
import { redisMissing, startRedis, type TestRedis } from '../helpers/redis.ts';
import { running, startWorker, type TestWorker } from '../helpers/farm.ts';
import { tempDir } from '../helpers/models.ts';
import { parseFarmUrl, redisOptions } from '../../app/engine/farm/connection.ts';
import { keys, UNIT_QUEUE } from '../../app/engine/farm/protocol.ts';

const root = join(import.meta.dirname, '..', '..');
const demoDir = join(root, 'resources', 'demo');
const cliArgs = (...args: string[]) => [join(root, 'app', 'cli', 'bin.js'), ...args];
const cli = (...args: string[]) => spawnSync(process.execPath, cliArgs(...args), { encoding: 'utf8' });
function cliAsync(...args: string[]): { child: ChildProcess; out: () => { stdout: string; stderr: string }; done: Promise<number | null> } {
  const child = spawn(process.execPath, cliArgs(...args), { stdio: ['ignore', 'pipe', 'pipe'] });
  let stdout = '';
  let stderr = '';
  child.stdout!.on('data', (b) => (stdout += b));
  child.stderr!.on('data', (b) => (stderr += b));
  return { child, out: () => ({ stdout, stderr }), done: new Promise((r) => child.on('exit', (code) => r(code))) };
}
const directions = join(demoDir, 'sigil-directions.npy');
const seeds = (n: number) => Array.from({ length: n }, (_, i) => 100 + 7 * i);
const recipeOf = (name: string, n: number) => ({ format: 'plumbline.variant-recipe', version: 1, name, seeds: seeds(n), psi: 0.7, settings: [{ label: 'base', strengths: {} }, { label: 'bold', strengths: { outline_bold: 1.5 } }] });
const skip = redisMissing() ?? false;
const pngs = (dir: string) => (existsSync(dir) ? readdirSync(dir, { recursive: true }) : []).map(String).filter((f) => f.endsWith('.png')).sort();
const until = async (what: string, ok: () => boolean | Promise<boolean>, ms = 60_000) => {
  const end = Date.now() + ms;
  while (!(await ok())) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
};
const status = () => JSON.parse(cli('farm', 'status', '--farm', redis.url, '--json').stdout);

let redis: TestRedis;
let workers: TestWorker[] = [];
before(async () => {
  if (!skip) redis = await startRedis();
});
afterEach(async () => {
  for (const w of workers) await w.kill();
  workers = [];
});
after(async () => {
  await redis?.stop();
});

function writeRecipe(dir: string, name: string, n: number): string {
  const file = join(dir, `${name}.json`);
  writeFileSync(file, JSON.stringify(recipeOf(name, n)));
  return file;
}

test('a worker killed mid-unit: its unit is retried on another worker after stall detection; the set is unchanged', { skip }, async () => {
  const dir = tempDir();
  const recipe = writeRecipe(dir, 'killed', 32);
  const alpha = await startWorker(redis.url, 'alpha');
  workers.push(alpha);
  const run = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'farm'), '--farm', redis.url);
  // alpha announces the unit it holds; loading the generator inside the first unit takes a while.
  let held = '';
  await until('alpha to take a unit', () => {
    const a = status().workers.find((w: { name: string }) => w.name === 'alpha');
    held = a?.busy ?? '';
    return !!held;
  });
  // Killed alone, as a crash or the out-of-memory killer would: its sandbox must notice and exit
  // by itself (one once spun a core for minutes after its worker died).
  const sandboxes = await alpha.killAlone();
  assert.ok(sandboxes.length > 0, 'alpha had a sandbox process');
  await until("alpha's sandbox to exit on its own", () => sandboxes.every((pid) => !running(pid)));
  const beta = await startWorker(redis.url, 'beta');
  workers.push(beta);
  assert.equal(await run.done, 0, run.out().stderr);
  const { stderr } = run.out();
  // Every unit came from beta, including the one alpha held when it died.
  // 32 seeds × 2 settings: one unit of four batches per setting (farm-variants.ts).
  assert.match(stderr, /worker beta: 2 unit\(s\), 64 image\(s\)/);
  assert.doesNotMatch(stderr, /worker alpha:/);
  // The run said that the unit left alpha and went round again.
  assert.match(stderr, new RegExp(`farm: unit ${held.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} left worker alpha`));
  assert.match(beta.log(), new RegExp(`${held.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} done`));
  const local = cli('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'local'));
  assert.equal(local.status, 0, local.stderr);
  assert.deepEqual(pngs(join(dir, 'farm')), pngs(join(dir, 'local')));
  for (const f of pngs(join(dir, 'local'))) assert.ok(readFileSync(join(dir, 'farm', f)).equals(readFileSync(join(dir, 'local', f))), `${f}: same bytes`);
  // Whatever alpha stored of its unit before it died went with the run's clean-up.
  assert.deepEqual(await resultKeysLeft(), []);
});

test('a worker holding another generator refuses it, naming both fingerprints; the run fails naming unit, worker and error', { skip }, async () => {
  const dir = tempDir();
  // The same files with one changed word in the card: another fingerprint.
  const other = join(dir, 'other-demo');
  cpSync(demoDir, other, { recursive: true });
  const card = join(other, 'sigil.card.json');
  const c = JSON.parse(readFileSync(card, 'utf8'));
  writeFileSync(card, JSON.stringify({ ...c, description: `${c.description} (edited)` }, null, 2));
  workers.push(await startWorker(redis.url, 'mapped', ['--path-map', `${demoDir}=${other}`]));
  const recipe = writeRecipe(dir, 'refused', 4);
  const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', redis.url, '--no-publish-model');
  assert.equal(await r.done, 1);
  const { stderr } = r.out();
  const expected = JSON.parse(cli('inspect').stdout).fingerprint;
  const found = JSON.parse(cli('inspect', '-m', card).stdout).fingerprint;
  assert.notEqual(expected, found);
  assert.match(stderr, /unit refused 'base' seeds 100…121 failed 3 time\(s\); last on worker mapped/);
  assert.ok(stderr.includes(`worker mapped refused ${card}: expected generator fingerprint ${expected}, found ${found}`), stderr);
  // No unit finished: no images and no manifest claiming anything.
  assert.deepEqual(pngs(join(dir, 'out')), []);
  assert.ok(!existsSync(join(dir, 'out', 'manifest.json')) || JSON.parse(readFileSync(join(dir, 'out', 'manifest.json'), 'utf8')).complete === false);
});

/** What a rogue worker does to the PNG bytes it names in its result. */
type Forgery = 'hash' | 'missing' | 'length' | 'tampered' | 'foreign';

/**
 * A rogue worker's answer to a variant unit: each image's bytes stored (or not) under a result key,
 * and a return value that misstates them as `mode` says.
 */
async function forge(mode: Forgery, job: Job, store: Redis) {
  const { recipe, unit, runId } = job.data;
  const label = recipe.settings[unit.setting].label;
  const images = [];
  for (const [k, i] of (unit.seeds as number[]).entries()) {
    const seed = recipe.seeds[i];
    const bytes = Buffer.from(`not a png ${k}`);
    const key = mode === 'foreign' ? keys.modelMeta(runId) : keys.result(runId, job.id!, 'rogue', k);
    let sha256 = createHash('sha256').update(bytes).digest('hex');
    if (mode === 'hash') sha256 = 'a'.repeat(64);
    if (mode !== 'missing' && mode !== 'foreign') await store.set(key, bytes);
    // Changed after the hash was taken: the same length, other bytes.
    if (mode === 'tampered') await store.set(key, Buffer.from(`not a PNG ${k}`));
    images.push({ file: `${label}/seed-${String(seed).padStart(6, '0')}.png`, seed, key, bytes: bytes.length + (mode === 'length' ? 1 : 0), sha256 });
  }
  return { kind: 'variants', worker: 'rogue', seconds: 0.1, images };
}

/** The result parts left in Redis (result-store.ts), any run. */
async function resultKeysLeft(): Promise<string[]> {
  const admin = new Redis(redisOptions(parseFarmUrl(redis.url), false));
  try {
    return await admin.keys('plumbline:farm:result:*');
  } finally {
    admin.disconnect();
  }
}

test('a forged result is rejected before anything of it is written, naming unit, worker and what is wrong with the stored bytes; no result keys remain', { skip }, async () => {
  let mode: Forgery = 'hash';
  const store = new Redis(redisOptions(parseFarmUrl(redis.url), false));
  const rogue = new Worker(UNIT_QUEUE, async (job) => forge(mode, job, store), { connection: redisOptions(parseFarmUrl(redis.url), true), name: 'rogue' });
  const expected: Record<Forgery, RegExp> = {
    hash: /bytes hash to [0-9a-f]{64}, the worker claimed a{64}/,
    tampered: /bytes hash to [0-9a-f]{64}, the worker claimed [0-9a-f]{64}/,
    missing: /its bytes are missing from Redis \(key plumbline:farm:result:[0-9a-f]+:[0-9a-f-]+:rogue:0;/,
    length: /Redis holds 11 bytes under plumbline:farm:result:[0-9a-f]+:[0-9a-f-]+:rogue:0, the worker stated 12/,
    foreign: /key plumbline:farm:model:[0-9a-f]+:meta is not one of this unit's/,
  };
  try {
    for (const m of Object.keys(expected) as Forgery[]) {
      mode = m;
      const dir = tempDir();
      // One setting: one unit, so nothing of the rogue's is still running when the run ends.
      const recipe = join(dir, `forged-${m}.json`);
      writeFileSync(recipe, JSON.stringify({ ...recipeOf(`forged-${m}`, 4), settings: [{ label: 'base', strengths: {} }] }));
      const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', redis.url);
      assert.equal(await r.done, 1, `${m}: ${r.out().stderr}`);
      const stderr = r.out().stderr;
      assert.match(stderr, new RegExp(`result of unit forged-${m} 'base' seeds 100…121 from worker rogue rejected: base/seed-000100\\.png: `), `${m}: ${stderr}`);
      assert.match(stderr, expected[m], `${m}: ${stderr}`);
      assert.deepEqual(pngs(join(dir, 'out')), [], m);
      assert.deepEqual(await resultKeysLeft(), [], `${m}: the run's clean-up removed the stored bytes`);
    }
  } finally {
    await rogue.close();
    store.disconnect();
  }
});

test('cancel removes the units still waiting and leaves none behind', { skip }, async () => {
  const dir = tempDir();
  const recipe = writeRecipe(dir, 'cancelled', 160);
  workers.push(await startWorker(redis.url, 'solo'));
  const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', redis.url);
  await until('the first images', () => existsSync(join(dir, 'out', 'manifest.json')));
  r.child.kill('SIGINT');
  assert.equal(await r.done, 130, r.out().stderr);
  const queue = new Queue(UNIT_QUEUE, { connection: redisOptions(parseFarmUrl(redis.url), false) });
  try {
    await until('no units waiting or running', async () => {
      const counts = await queue.getJobCounts('waiting', 'active', 'delayed', 'prioritized', 'waiting-children');
      return Object.values(counts).every((n) => n === 0);
    }, 20_000);
  } finally {
    await queue.close();
  }
  // The unit that was running stops at its next batch and removes the images it had stored.
  await until('no result keys left', async () => (await resultKeysLeft()).length === 0, 20_000);
  const manifest = JSON.parse(readFileSync(join(dir, 'out', 'manifest.json'), 'utf8'));
  assert.equal(manifest.complete, false);
  assert.ok(manifest.images.length < 320, `${manifest.images.length} images rendered of 320`);
  assert.equal(status().runs.at(-1).state, 'cancelled');
});

test('Redis restarting empty mid-run fails the run with a clear message; nothing is reported complete', { skip }, async () => {
  const dir = tempDir();
  const recipe = writeRecipe(dir, 'restarted', 160);
  workers.push(await startWorker(redis.url, 'steady'));
  const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', redis.url);
  await until('the first images', () => existsSync(join(dir, 'out', 'manifest.json')));
  await redis.restart();
  assert.equal(await r.done, 1, r.out().stderr);
  assert.match(r.out().stderr, /no longer holds run|lost unit/);
  assert.equal(JSON.parse(readFileSync(join(dir, 'out', 'manifest.json'), 'utf8')).complete, false);
});

test('a Redis that is away is told apart from a Redis that answered wrongly: only the first is an outage to ride out or report as one', { skip }, async () => {
  const { isConnectionError } = await import('../../app/engine/farm/connection.ts');
  // Nothing listens on this port once the server is stopped: the client's own error after its retries.
  const { startRedis } = await import('../helpers/redis.ts');
  const gone = await startRedis();
  const url = gone.url;
  await gone.stop();
  const away = new Redis({ ...redisOptions(parseFarmUrl(url), false), maxRetriesPerRequest: 1, retryStrategy: () => 50, lazyConnect: false });
  away.on('error', () => {});
  const outage = await away.get('x').then(() => null, (err: Error) => err);
  away.disconnect();
  assert.ok(outage, 'the command failed');
  assert.equal(isConnectionError(outage), true, `${outage!.name}: ${outage!.message}`);
  // A reply error (wrong type) from a Redis that is there is not an outage.
  const here = new Redis(redisOptions(parseFarmUrl(redis.url), false));
  await here.set('plumbline-test:string', 'v');
  const wrong = await here.lpush('plumbline-test:string', 'x').then(() => null, (err: Error) => err);
  await here.del('plumbline-test:string');
  here.disconnect();
  assert.ok(wrong && /WRONGTYPE/.test(wrong.message));
  assert.equal(isConnectionError(wrong), false);
  assert.equal(isConnectionError(new Error('image 3 is not a PNG')), false);
});

test('a run on a farm database without workers warns that it will wait; SIGTERM then cancels it as Ctrl+C does, leaving no units queued for nobody', { skip }, async () => {
  const dir = tempDir();
  const recipe = writeRecipe(dir, 'unserved', 8);
  // Database 5: the workers of the other tests (and of the default database) do not serve it.
  const url = `${redis.url}/5`;
  const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', url);
  await until('the warning', () => /no worker is on the farm at .*\/5 \(database 5: workers must name the same one\); the run waits/.test(r.out().stderr), 30_000);
  const queue = new Queue(UNIT_QUEUE, { connection: redisOptions(parseFarmUrl(url), false) });
  try {
    await until('its units queued', async () => (await queue.getJobCounts('waiting')).waiting > 0, 30_000);
    r.child.kill('SIGTERM');
    assert.equal(await r.done, 130, r.out().stderr);
    const counts = await queue.getJobCounts('waiting', 'active', 'delayed', 'prioritized', 'waiting-children');
    assert.ok(Object.values(counts).every((n) => n === 0), JSON.stringify(counts));
  } finally {
    await queue.close();
  }
  const runs = JSON.parse(cli('farm', 'status', '--farm', url, '--json').stdout).runs;
  assert.equal(runs.at(-1).state, 'cancelled');
});
