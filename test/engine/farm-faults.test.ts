// Farm faults, each on a private redis-server on 127.0.0.1: a worker killed mid-unit (its unit
// comes back after stall detection and the set is unchanged), a worker holding another generator
// (refused with both fingerprints; the run fails naming unit, worker and error), a forged result
// (rejected before anything is written), cancel (waiting units removed, none left), and Redis
// restarting empty mid-run (the run fails and says so; the manifest stays incomplete).
import { test, before, after, afterEach } from 'node:test';
import assert from 'node:assert/strict';
import { cpSync, readFileSync, writeFileSync, readdirSync, existsSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync, spawn, type ChildProcess } from 'node:child_process';
import { Queue, Worker } from 'bullmq';
import { redisMissing, startRedis, type TestRedis } from '../helpers/redis.ts';
import { startWorker, type TestWorker } from '../helpers/farm.ts';
import { tempDir } from '../helpers/models.ts';
import { parseFarmUrl, redisOptions } from '../../app/engine/farm/connection.ts';
import { UNIT_QUEUE } from '../../app/engine/farm/protocol.ts';

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
  await alpha.kill();
  const beta = await startWorker(redis.url, 'beta');
  workers.push(beta);
  assert.equal(await run.done, 0, run.out().stderr);
  const { stderr } = run.out();
  // Every unit came from beta, including the one alpha held when it died.
  // 32 seeds × 2 settings: one unit of four batches per setting (farm-variants.ts).
  assert.match(stderr, /worker beta: 2 unit\(s\), 64 image\(s\)/);
  assert.doesNotMatch(stderr, /worker alpha/);
  assert.match(beta.log(), new RegExp(`${held.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')} done`));
  const local = cli('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'local'));
  assert.equal(local.status, 0, local.stderr);
  assert.deepEqual(pngs(join(dir, 'farm')), pngs(join(dir, 'local')));
  for (const f of pngs(join(dir, 'local'))) assert.ok(readFileSync(join(dir, 'farm', f)).equals(readFileSync(join(dir, 'local', f))), `${f}: same bytes`);
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

test('a forged result is rejected before anything of it is written, naming unit and worker', { skip }, async () => {
  const dir = tempDir();
  // A rogue worker answers every unit with an image whose bytes do not match its hash.
  const rogue = new Worker(UNIT_QUEUE, async (job) => ({ kind: 'variants', worker: 'rogue', seconds: 0.1, images: job.data.unit.seeds.map((i: number) => ({ file: `${job.data.recipe.settings[job.data.unit.setting].label}/seed-${String(job.data.recipe.seeds[i]).padStart(6, '0')}.png`, seed: job.data.recipe.seeds[i], sha256: 'a'.repeat(64), png: Buffer.from('not a png').toString('base64') })) }), { connection: redisOptions(parseFarmUrl(redis.url), true), name: 'rogue' });
  try {
    const recipe = writeRecipe(dir, 'forged', 4);
    const r = cliAsync('variants', '--recipe', recipe, '-d', directions, '--out', join(dir, 'out'), '--farm', redis.url);
    assert.equal(await r.done, 1);
    assert.match(r.out().stderr, /result of unit forged '(base|bold)' seeds 100…121 from worker rogue rejected: (base|bold)\/seed-000100\.png: bytes hash to [0-9a-f]{64}, the worker claimed a{64}/);
    assert.deepEqual(pngs(join(dir, 'out')), []);
  } finally {
    await rogue.close();
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
