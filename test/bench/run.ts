// npm run bench — benchmarks, not tests. Every ratio is measured side by side in one run, with
// the two sides interleaved round by round so machine drift affects both alike.
import { fork } from 'node:child_process';
import { readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { availableParallelism, loadavg, tmpdir } from 'node:os';
import { mkdtempSync, readdirSync, rmSync } from 'node:fs';
import * as ort from 'onnxruntime-node';
import { chromium } from '@playwright/test';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/host.ts';
import { request, type Message } from '../../app/protocol/messages.ts';
import { startWebShell } from '../../app/web/serve.ts';
import { authorLarge } from './author-large.ts';
import { renderVariants } from '../../app/engine/variants.ts';
import { DEFAULT_PNG_THREADS, PngWriterPool, sharedPngWriter } from '../../app/engine/png-writer.ts';
import { Worker } from 'node:worker_threads';
import { readPack, writePack } from '../../app/core/pack.ts';
import { decodeNpy, encodeNpy } from '../../app/core/npy.ts';
import { Random } from '../../app/core/random.ts';
import { locate } from '../../app/engine/locate.ts';
import { defaultParameters } from '../../app/core/search/cma-es.ts';
import { FOUND_SSIM, FOUND_DELTA_E } from '../../app/core/search/match.ts';
import type { FloatImage } from '../../app/core/reference-image.ts';

const root = join(import.meta.dirname, '..', '..');
/** `npm run bench -- variants audit`: only those sections (throughput, variants, farm, pack, preview, cold, audit, audit-scaling, audit-measures, locate). */
// PLUMBLINE_BENCH_ONLY=locate (as before) is the same as `-- locate`.
const only = process.env.PLUMBLINE_BENCH_ONLY ? [process.env.PLUMBLINE_BENCH_ONLY] : process.argv.slice(2);
const want = (section: string) => only.length === 0 || only.includes(section);
const THREADS = Number(process.env.PLUMBLINE_THREADS) || 1;
const rows: [string, string, string, string][] = [];
/** The median (for an even count, the mean of the middle two). */
const median = (xs: number[]) => {
  const o = [...xs].sort((a, b) => a - b);
  return o.length % 2 ? o[(o.length - 1) / 2] : (o[o.length / 2 - 1] + o[o.length / 2]) / 2;
};
const pct = (xs: number[], p: number) => [...xs].sort((a, b) => a - b)[Math.min(xs.length - 1, Math.floor(xs.length * p))];

/**
 * How long the bare side warms up before it is timed. One warm-up run is not enough: a fresh
 * session in a fresh process runs well below its steady rate for its first second or so (measured
 * on the demo: 519 img/s in the first 0.7 s, 760–910 img/s after), and the engine side it is
 * compared with is timed over seconds of steady running.
 */
const BARE_WARM_MS = 1500;
/** Each bare measurement runs at least this long. */
const BARE_MIN_MS = 1500;

/**
 * Bare session.run of the synthesis file at one batch size, fetching the outputs the engine
 * fetches (image, and attributes when the card declares them). Kept open and warm across
 * measurements, as the engine's session is: a fresh session on a large generator runs below its
 * steady rate for its first runs, which once made a variant set read 1.2× of "bare".
 */
class Bare {
  #warmed = false;
  private constructor(private readonly session: ort.InferenceSession, private readonly feed: () => Record<string, ort.Tensor>, private readonly fetches: string[], readonly batch: number) {}

  static async open(card: string, batch: number, threads = THREADS): Promise<Bare> {
    const c = JSON.parse(readFileSync(card, 'utf8'));
    const gen = await Generator.open(card, { threads: 1 });
    const codes = await gen.codesForSeeds(Array.from({ length: batch }, (_, i) => i), 0.7);
    const dims = [batch, gen.layout.layers, gen.layout.size];
    await gen.dispose();
    const session = await ort.InferenceSession.create(join(card, '..', c.synthesis.file), { intraOpNumThreads: threads, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' });
    const fetches = [c.synthesis.output, ...(c.synthesis.attributesOutput ? [c.synthesis.attributesOutput] : [])];
    return new Bare(session, () => ({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) }), fetches, batch);
  }

  /** Images/s over at least `images` images and BARE_MIN_MS, after BARE_WARM_MS of warm-up the first time. */
  async rate(images: number): Promise<number> {
    if (!this.#warmed) {
      for (const t = performance.now(); performance.now() - t < BARE_WARM_MS; ) await this.session.run(this.feed(), this.fetches);
      this.#warmed = true;
    }
    const t = performance.now();
    let n = 0;
    while (n < images || performance.now() - t < BARE_MIN_MS) {
      await this.session.run(this.feed(), this.fetches);
      n += this.batch;
    }
    return n / ((performance.now() - t) / 1000);
  }

  async release(): Promise<void> {
    await this.session.release();
  }
}

/** Bare images/s at one batch size (Bare): median of `rounds`, at least `images` images and BARE_MIN_MS each. */
async function bareRate(card: string, batch: number, images: number, rounds: number, threads = THREADS): Promise<number> {
  const bare = await Bare.open(card, batch, threads);
  try {
    const rates: number[] = [];
    for (let r = 0; r < rounds; r++) rates.push(await bare.rate(images));
    return median(rates);
  } finally {
    await bare.release();
  }
}

/** The limit: the best bare configuration over batch sizes at the same thread count. */
async function bestBare(card: string, batches: number[], images: number, rounds: number): Promise<{ batch: number; rate: number; text: string }> {
  let best = { batch: 0, rate: 0 };
  for (const batch of batches) {
    const rate = await bareRate(card, batch, Math.max(images, batch), rounds);
    if (rate > best.rate) best = { batch, rate };
  }
  return { ...best, text: `best bare ${best.rate.toFixed(1)} img/s (batch ${best.batch}, ${THREADS} thread${THREADS > 1 ? 's' : ''})` };
}

async function throughput(label: string, card: string, batch: number, perRound: number, rounds: number) {
  const gen = await Generator.open(card, { threads: THREADS });
  gen.batchSize = batch;
  const c = JSON.parse(readFileSync(card, 'utf8'));
  const synthFile = join(card, '..', c.synthesis.file);
  const bare = await ort.InferenceSession.create(synthFile, { intraOpNumThreads: THREADS, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' });
  const seeds = Array.from({ length: batch }, (_, i) => i);
  const codes = await gen.codesForSeeds(seeds, 0.7);
  const dims = [batch, gen.layout.layers, gen.layout.size];
  const engineRates: number[] = [];
  const bareRates: number[] = [];
  // Warm up both.
  await bare.run({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
  await gen.renderSeeds(seeds, 0.7, []);
  for (let r = 0; r < rounds; r++) {
    let t = performance.now();
    for (let n = 0; n < perRound; n += batch) await bare.run({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
    bareRates.push(perRound / ((performance.now() - t) / 1000));
    t = performance.now();
    // The engine path as its jobs run it: seeds → mapping → truncation for the job, then synthesis
    // and output checks batch by batch.
    const all = Array.from({ length: perRound }, (_, i) => 10_000 + r * perRound + i);
    const jobCodes = await gen.codesForSeeds(all, 0.7);
    const per = gen.layout.layers * gen.layout.size;
    for (let n = 0; n < perRound; n += batch) await gen.synthesize(jobCodes.subarray(n * per, (n + batch) * per), batch);
    engineRates.push(perRound / ((performance.now() - t) / 1000));
  }
  const e = median(engineRates);
  const b = median(bareRates);
  rows.push([`${label}: engine vs bare session.run (batch ${batch}, ${THREADS} thread${THREADS > 1 ? 's' : ''}, both sides)`, `${e.toFixed(1)} img/s`, `${b.toFixed(1)} img/s`, `${(e / b).toFixed(3)}× (target ≥ 0.95)`]);
  // Bare single-image inference time, for the preview comparison.
  const one = await gen.codesForSeeds([3], 0.7);
  const singles: number[] = [];
  for (let i = 0; i < 30; i++) {
    const t = performance.now();
    await bare.run({ [c.synthesis.latentInput]: new ort.Tensor('float32', one, [1, gen.layout.layers, gen.layout.size]) });
    singles.push(performance.now() - t);
  }
  await bare.release();
  await gen.dispose();
  return { single: median(singles) };
}

/**
 * Runs in the page: sets the first slider, notices the new paint at once (the canvas bumps its
 * data-paints attribute after putImageData), then waits for the next animation frame — the
 * moment the frame reaches the screen.
 */
const MEASURE_IN_PAGE = `async (v) => {
  const slider = document.querySelector('#lever-d1');
  const canvas = document.querySelector('[data-testid=preview]');
  const before = Number(canvas.dataset.paints || 0);
  const t0 = performance.now();
  await new Promise((done) => {
    const seen = new MutationObserver(() => {
      if (Number(canvas.dataset.paints) > before) {
        seen.disconnect();
        requestAnimationFrame(() => done());
      }
    });
    seen.observe(canvas, { attributes: true, attributeFilter: ['data-paints'] });
    slider.value = String(v);
    slider.dispatchEvent(new Event('input', { bubbles: true }));
  });
  return performance.now() - t0;
}`;

async function previewLatency(inference: number) {
  const shell = await startWebShell({ quiet: true, threads: THREADS });
  const browser = await chromium.launch({ executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium', args: ['--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--disable-sync'] });
  try {
    const page = await browser.newPage();
    await page.goto(shell.url);
    await page.getByText('engine ready').waitFor();
    await page.locator('#lever-d1').waitFor();
    await page.waitForTimeout(500);
    const times: number[] = [];
    for (let i = 0; i < 60; i++) {
      const value = ((i % 20) - 10) / 4;
      // Passed as source text: the TypeScript loader's helpers do not exist in the page.
      times.push(await page.evaluate(`(${MEASURE_IN_PAGE})(${value === 0 ? 0.05 : value})`));
    }
    const m = median(times.slice(10));
    const p95 = pct(times.slice(10), 0.95);
    rows.push(['demo: preview round trip, slider input → painted frame (web shell)', `median ${m.toFixed(1)} ms, p95 ${p95.toFixed(1)} ms`, `inference ${inference.toFixed(1)} ms`, `median − inference = ${(m - inference).toFixed(1)} ms (target ≤ 15)`]);
  } finally {
    await browser.close();
    await shell.close();
  }
}

async function coldStart() {
  const times: number[] = [];
  for (let i = 0; i < 3; i++) {
    const t0 = performance.now();
    const child = fork(join(root, 'app', 'engine', 'child-entry.ts'), [], { execArgv: ['--import', 'tsx'], serialization: 'advanced', env: { ...process.env, PLUMBLINE_THREADS: String(THREADS) } });
    await new Promise<void>((done, fail) => {
      child.on('message', (m: Message) => {
        if (m.type === 'event' && m.event === 'engine.ready') {
          child.send(request(1, 'model.openDemo', {}));
          child.send(request(2, 'preview.render', { seed: 0, psi: 0.7, edits: [] }));
        }
        if (m.type === 'response' && m.id === 2) (m.ok ? done() : fail(new Error(JSON.stringify(m))));
      });
    });
    times.push(performance.now() - t0);
    child.kill();
  }
  rows.push(['cold start: new engine process → first demo image', `median ${median(times).toFixed(0)} ms`, '', `(${times.map((t) => t.toFixed(0)).join(', ')} ms)`]);
}

/**
 * Variant-set rendering (render, check, PNG, write, manifest) against bare session.run at the same
 * batch size and thread count on the same number of images. Rounds alternate bare and variant
 * set, bare also last; each variant run is compared with the mean of the bare runs just before and
 * just after it, and the row gives the median of those ratios (drift on a shared machine then
 * affects both sides alike, and one noisy round cannot set the figure).
 */
async function variantRow(label: string, card: string, seeds: number[], settings: number, batch: number, limit: string, rounds = 3) {
  const images = seeds.length * settings;
  const gen = await Generator.open(card, { threads: THREADS });
  gen.batchSize = batch;
  const bareSession = await Bare.open(card, batch);
  const bares = [await bareSession.rate(images)];
  const rates: number[] = [];
  let cpuCores = 0;
  const load = loadavg()[0];
  try {
    const v = { name: 'bench', vector: new Float32Array(gen.layout.size).fill(1 / Math.sqrt(gen.layout.size)), layers: null, sigma: 1 };
    const recipe = { format: 'plumbline.variant-recipe' as const, version: 1 as const, name: 'bench', seeds, psi: 0.7, settings: Array.from({ length: settings }, (_, k) => ({ label: `s${k}`, strengths: { bench: k - 1 } })) };
    // Warm the session and the PNG writer's threads (as the app's engine has them when a job
    // starts: both are started once per process); each job itself is timed whole.
    await gen.renderSeeds(seeds.slice(0, batch), 0.7, []);
    const warm = await gen.renderSeeds([0], 0.7, []);
    const warmDir = mkdtempSync(join(tmpdir(), 'plumbline-variants-'));
    await sharedPngWriter().writeFloat(gen.floatImage(warm.images, 0), join(warmDir, 'warm.png'), { durable: false });
    rmSync(warmDir, { recursive: true, force: true });
    for (let r = 0; r < rounds; r++) {
      const out = mkdtempSync(join(tmpdir(), 'plumbline-variants-'));
      try {
        const t = performance.now();
        const cpu0 = process.cpuUsage();
        const job = renderVariants(gen, recipe, [v], out);
        for (;;) if ((await job.next()).done) break;
        const seconds = (performance.now() - t) / 1000;
        rates.push(images / seconds);
        const used = process.cpuUsage(cpu0);
        cpuCores = Math.max(cpuCores, (used.user + used.system) / 1e6 / seconds);
      } finally {
        rmSync(out, { recursive: true, force: true });
      }
      bares.push(await bareSession.rate(images));
    }
  } finally {
    await bareSession.release();
    await gen.dispose();
  }
  const ratios = rates.map((rate, r) => rate / ((bares[r] + bares[r + 1]) / 2));
  const k = ratios.indexOf(median(ratios));
  const bare = (bares[k] + bares[k + 1]) / 2;
  rows.push([`${label}: variant set (render + PNG + write + manifest), batch ${batch}, ${THREADS} thread${THREADS > 1 ? 's' : ''}; median of ${rounds} rounds`, `${rates[k].toFixed(1)} img/s`, `${bare.toFixed(1)} img/s bare, same batch, just before and after (${limit})`, `${ratios[k].toFixed(3)}× (target ≥ 0.9; rounds ${ratios.map((x) => x.toFixed(2)).join(', ')}); process used up to ${cpuCores.toFixed(2)} cores, load ${load.toFixed(1)} on ${availableParallelism()}`]);
}

/**
 * Why a variant set can fall short of bare on a small generator, measured in the same run:
 * - the PNG writer pool the app starts (DEFAULT_PNG_THREADS), alone, converting, encoding,
 *   hashing and writing images of one rendered batch: its images/s over bare's is the most a
 *   variant set can reach here even if inference never shared a core with it;
 * - bare session.run with one thread busy on another core, against bare alone (interleaved
 *   rounds, medians): below 1 means the cores slow each other (shared physical core or memory
 *   bandwidth), so any work running beside inference costs inference time.
 */
async function variantLimitRows(label: string, card: string, batch: number) {
  const gen = await Generator.open(card, { threads: THREADS });
  gen.batchSize = batch;
  const out = mkdtempSync(join(tmpdir(), 'plumbline-writer-'));
  const bare = await Bare.open(card, batch);
  try {
    const r = await gen.renderSeeds(Array.from({ length: batch }, (_, i) => i), 0.7, []);
    const source = gen.floatBatch(r.images, batch);
    // The pool the app starts here, and one thread more (how the pool scales where cores allow).
    for (const threads of [...new Set([DEFAULT_PNG_THREADS, DEFAULT_PNG_THREADS + 1])]) {
      const pool = new PngWriterPool(threads);
      try {
        // Two batches in flight, as the render loop keeps them.
        const writeAll = async (n: number, tag: string) => {
          const inFlight: Promise<unknown>[] = [];
          for (let k = 0; k < n; k += batch) {
            inFlight.push(Promise.all(pool.writeFloatBatch(source, Array.from({ length: batch }, (_, i) => ({ index: i, file: join(out, tag, `i${k + i}.png`), durable: false })))));
            if (inFlight.length > 2) await inFlight.shift();
          }
          await Promise.all(inFlight);
        };
        await writeAll(4 * batch, `warm${threads}`);
        const rates: number[] = [];
        const bares: number[] = [];
        for (let round = 0; round < 3; round++) {
          bares.push(await bare.rate(256));
          const t = performance.now();
          await writeAll(256, `t${threads}r${round}`);
          rates.push(256 / ((performance.now() - t) / 1000));
        }
        const [writer, b] = [median(rates), median(bares)];
        const app = threads === DEFAULT_PNG_THREADS ? `the app's pool here, ${threads}` : `${threads}`;
        rows.push([`${label}: PNG writer pool alone (${app} thread${threads > 1 ? 's' : ''}; convert + encode + hash + atomic write), vs bare render, batch ${batch}`, `${writer.toFixed(1)} img/s`, `${b.toFixed(1)} img/s bare`, `${(writer / b).toFixed(3)}×${threads === DEFAULT_PNG_THREADS ? ': about the most a variant set can reach here' : ' (threads beyond the cores share them)'}`]);
      } finally {
        await pool.close();
      }
    }
  } finally {
    rmSync(out, { recursive: true, force: true });
    await gen.dispose();
  }
  const alone: number[] = [];
  const busy: number[] = [];
  for (let round = 0; round < 3; round++) {
    alone.push(await bare.rate(256));
    const stop = new Int32Array(new SharedArrayBuffer(4));
    const spinner = new Worker('const { workerData } = require("node:worker_threads"); const stop = new Int32Array(workerData); let x = 1; while (Atomics.load(stop, 0) === 0) for (let i = 0; i < 1e5; i++) x = (x * 1103515245 + 12345) | 0;', { eval: true, workerData: stop.buffer });
    try {
      busy.push(await bare.rate(256));
    } finally {
      Atomics.store(stop, 0, 1);
      await new Promise((resolve) => spinner.once('exit', resolve));
    }
  }
  await bare.release();
  const [a, b] = [median(alone), median(busy)];
  rows.push([`this machine: bare session.run (${label}, batch ${batch}, ${THREADS} thread${THREADS > 1 ? 's' : ''}) with one thread spinning on another core, vs alone`, `${b.toFixed(1)} img/s`, `${a.toFixed(1)} img/s alone`, `${(b / a).toFixed(3)}× (1.0: cores independent)`]);
}

/**
 * The farm on the realistic generator, 1 thread per worker: one worker through Redis, two workers
 * through Redis, and one engine on this machine with two threads, all on the same variant set
 * (same batch, same units). Workers are warmed with a small run first (generator loaded), as a
 * standing farm would be.
 *
 * Queue overhead per unit is what each further unit costs on the farm beyond its rendering: the
 * farm and one engine here (1 thread, same batch) each render a set of N units and one of 2N; the
 * per-unit overhead is ((farm 2N − farm N) − (here 2N − here N)) / N, so costs paid once per run
 * (submitting the flow, publishing the generator, collecting the parent, cleaning up) do not
 * count against units — they are their own row. Comparing one 4-unit run against one engine, as
 * before, charged those per-run costs to four units and read 44%.
 */
async function farmRows(card: string) {
  const { startRedis } = await import('../helpers/redis.ts');
  const { startWorker } = await import('../helpers/farm.ts');
  const { Farm } = await import('../../app/engine/farm/coordinator.ts');
  const { renderVariantsOnFarm } = await import('../../app/engine/farm/farm-variants.ts');
  const { BATCHES_PER_VARIANT_UNIT } = await import('../../app/engine/farm/farm-variants.ts');
  const batch = 8;
  const perUnit = batch * BATCHES_PER_VARIANT_UNIT;
  const seedsOf = (n: number, from = 200) => Array.from({ length: n }, (_, i) => from + i);
  // One unit per setting (N = 2 units); twice the seeds make 2N.
  const seeds = seedsOf(perUnit);
  const units = 2;
  const images = seeds.length * 2;
  const redis = await startRedis();
  const workers: Awaited<ReturnType<typeof startWorker>>[] = [];
  const gen = await Generator.open(card, { threads: 1 });
  gen.batchSize = batch;
  const v = { name: 'bench', vector: new Float32Array(gen.layout.size).fill(1 / Math.sqrt(gen.layout.size)), layers: null, sigma: 1 };
  const recipe = (name: string, list: number[]) => ({ format: 'plumbline.variant-recipe' as const, version: 1 as const, name, seeds: list, references: [] as string[], psi: 0.7, settings: [{ label: 'a', strengths: { bench: -1 } }, { label: 'b', strengths: { bench: 1 } }] });
  const timed = async (job: AsyncGenerator<unknown, unknown, void>) => {
    const t = performance.now();
    for (;;) if ((await job.next()).done) break;
    return (performance.now() - t) / 1000;
  };
  const farm = await Farm.connect(redis.url);
  const out = () => mkdtempSync(join(tmpdir(), 'plumbline-farm-bench-'));
  const onFarm = async (name: string, list: number[]) => timed(renderVariantsOnFarm(farm, gen, recipe(name, list), [v], out(), { modelPath: card }));
  const here = async (g: Generator, name: string, list: number[]) => timed(renderVariants(g, recipe(name, list), [v], out()));
  try {
    workers.push(await startWorker(redis.url, 'one'));
    await onFarm('warm1', seeds.slice(0, batch));
    await gen.renderSeeds(seeds.slice(0, batch), 0.7, []);
    const warm = await gen.renderSeeds([0], 0.7, []);
    await sharedPngWriter().writeFloat(gen.floatImage(warm.images, 0), join(out(), 'warm.png'), { durable: false });
    // N = 2 units (32 seeds × 2 settings) and 2N = 4 units (64 seeds): farm (one idle-waiting
    // worker) and here interleaved, two rounds, medians — load from elsewhere then hits both sides.
    const farmN: number[] = [];
    const farm2N: number[] = [];
    const hereN: number[] = [];
    const here2N: number[] = [];
    for (let r = 0; r < 2; r++) {
      farmN.push(await onFarm(`one-${r}`, seedsOf(perUnit, 1000 * r)));
      hereN.push(await here(gen, `here-${r}`, seedsOf(perUnit, 1000 * r)));
      farm2N.push(await onFarm(`one-double-${r}`, seedsOf(2 * perUnit, 1000 * r + 400)));
      here2N.push(await here(gen, `here-double-${r}`, seedsOf(2 * perUnit, 1000 * r + 400)));
    }
    const [one, oneDouble, here1, here1Double] = [farmN, farm2N, hereN, here2N].map(median);
    workers.push(await startWorker(redis.url, 'two'));
    // Warm the second worker too: two units, one for each.
    await onFarm('warm2', seedsOf(perUnit, 5000));
    const two = await onFarm('two', seeds);
    for (const w of workers) await w.stop();
    const gen2 = await Generator.open(card, { threads: 2 });
    gen2.batchSize = batch;
    await gen2.renderSeeds(seeds.slice(0, batch), 0.7, []);
    const here2 = await here(gen2, 'here2', seeds);
    await gen2.dispose();
    const rate = (sec: number) => `${(images / sec).toFixed(2)} img/s`;
    rows.push([`farm, realistic 256², ${images} images in ${units} units of ${perUnit} (batch ${batch}): two workers via Redis vs one worker via Redis (1 thread each)`, rate(two), rate(one), `${(one / two).toFixed(3)}× (2 cores: approaches 2)`]);
    rows.push([`farm: two workers via Redis (1 thread each) vs one engine here with 2 threads, same set and batch`, rate(two), rate(here2), `${(here2 / two).toFixed(3)}× (not a bare row: above 1 means two 1-thread processes beat one 2-thread session, whose split of each batch across threads is not free)`]);
    const unitHere = (here1Double - here1) / units;
    const overheadPerUnit = ((oneDouble - one) - (here1Double - here1)) / units;
    const perRun = (one - here1) - units * overheadPerUnit;
    rows.push([`farm: queue overhead per unit, one worker via Redis vs one engine here (1 thread, batch ${batch}); ${units} vs ${2 * units} units`, `${(overheadPerUnit * 1000).toFixed(0)} ms per unit`, `unit ≈ ${unitHere.toFixed(2)} s here (medians of 2: farm ${one.toFixed(1)} / ${oneDouble.toFixed(1)} s, here ${here1.toFixed(1)} / ${here1Double.toFixed(1)} s)`, `${((100 * overheadPerUnit) / unitHere).toFixed(1)}% (target ≤ 5% for units ≥ 2 s)`]);
    rows.push([`farm: cost once per run (flow, publishing the ${(gen.info.files.reduce((a, f) => a + statSync(f).size, 0) / 1e6).toFixed(0)} MB generator alongside, collecting, clean-up)`, `${(perRun * 1000).toFixed(0)} ms per run`, '', '']);
  } finally {
    for (const w of workers) await w.kill();
    await farm.close();
    await gen.dispose();
    await redis.stop();
  }
}

/** Pack build and verify for 50 directions of 512 dimensions (archive work only: no preview rendering). */
async function packRow() {
  const rng = new Random(5);
  const files: { path: string; bytes: Uint8Array }[] = [];
  const directions = Array.from({ length: 50 }, (_, k) => {
    const v = Float32Array.from({ length: 512 }, () => rng.normal());
    files.push({ path: `directions/d${k}.npy`, bytes: encodeNpy(v, [512]) });
    files.push({ path: `directions/d${k}.json`, bytes: new TextEncoder().encode(JSON.stringify({ format: 'plumbline.directions', version: 1, directions: [{ name: `d${k}` }] })) });
    return { name: `d${k}`, npy: `directions/d${k}.npy`, meta: `directions/d${k}.json`, preview: null, target: null, layers: null, sigma: 1, safeRange: [-2, 2] as [number, number], audit: { verdict: 'pass' as const, reason: '', leakage: { value: 0, low: 0, high: 0 }, pathLength: { value: 0, low: 0, high: 0 }, probes: 128, file: null }, signOff: { status: 'approved' as const, reviewer: 'bench', at: '', note: '' }, previewSpec: null };
  });
  const manifest = { format: 'plumbline.pack' as const, version: 1, createdAt: '', createdBy: 'bench', project: 'bench', generator: { name: 'bench', fingerprint: '0'.repeat(64) }, directions, caution: '' };
  const build: number[] = [];
  const verify: number[] = [];
  let bytes: Uint8Array = new Uint8Array(0);
  for (let r = 0; r < 5; r++) {
    let t = performance.now();
    bytes = await writePack(files, manifest);
    build.push(performance.now() - t);
    t = performance.now();
    const p = await readPack(bytes);
    for (const d of p.manifest.directions) decodeNpy(p.files.get(d.npy)!, d.npy);
    verify.push(performance.now() - t);
  }
  rows.push(['preset pack, 50 directions × 512 dims (archive only)', `build ${median(build).toFixed(1)} ms, verify ${median(verify).toFixed(1)} ms`, `${(bytes.length / 1024).toFixed(0)} KiB`, '']);
}

/** Runs one audit in a fresh process (so peak memory is its own) and returns its figures. */
function auditChild(probes: number, directions: number, step: number, distance = 'ssim', bare = false): Promise<{ ms: number; inRunMs: number; images: number; bare: { rate: number; batch: number; images: number } | null; maxRssMb: number }> {
  return new Promise((done, fail) => {
    const child = fork(join(root, 'test', 'bench', 'audit-child.ts'), [String(probes), String(directions), String(step), distance, ...(bare ? ['bare'] : [])], { execArgv: ['--import', 'tsx'], stdio: ['ignore', 'pipe', 'inherit', 'ipc'], env: { ...process.env, PLUMBLINE_THREADS: String(THREADS) } });
    let out = '';
    child.stdout!.on('data', (c) => (out += c));
    child.on('exit', (code) => (code === 0 ? done(JSON.parse(out.trim().split('\n').pop()!)) : fail(new Error(`audit child exited ${code}`))));
  });
}

async function auditRows(limit: string) {
  for (const distance of ['ssim', 'l2']) {
    const r = await auditChild(64, 2, 0.5, distance, true);
    const rate = r.images / (r.ms / 1000);
    const b = r.bare!;
    // The bare side runs in the audit's own process at its batch size and thread count, one batch
    // after every step of the audit (audit-child.ts says why).
    rows.push([`audit throughput, 64 probes × 2 directions × 9 strengths (+ null baseline, published-form PPL), path length ${distance}, batch ${b.batch}, ${THREADS} thread${THREADS > 1 ? 's' : ''}`, `${rate.toFixed(0)} img/s (${r.images} rendered + scored)`, `${b.rate.toFixed(0)} img/s bare (${b.images} images interleaved with the audit's steps), same batch, outputs and process (${limit})`, `${(rate / b.rate).toFixed(3)}× (target ≥ 0.9)`]);
  }
}

/** Audit memory at growing probe counts and time linearity (section 'audit-scaling'). */
async function auditScalingRows() {
  const mem: [number, number][] = [];
  for (const probes of [64, 256, 1024]) mem.push([probes, (await auditChild(probes, 2, 1)).maxRssMb]);
  const lo = Math.min(...mem.map((m) => m[1]));
  const hi = Math.max(...mem.map((m) => m[1]));
  rows.push(['audit peak memory at 64 / 256 / 1024 probes (fresh process each)', mem.map(([p, m]) => `${p}: ${m.toFixed(0)} MB`).join(', '), '', `max/min ${(hi / lo).toFixed(3)} (target ≤ 1.15)`]);
  // Linear in probes × directions × strengths: fit time = fixed + per-unit · units (least squares).
  const configs: [number, number, number][] = [[32, 1, 1], [64, 1, 1], [64, 2, 1], [64, 2, 0.5], [128, 2, 0.5], [256, 2, 0.5]];
  const points: [number, number][] = [];
  const cells: string[] = [];
  for (const [p, d, step] of configs) {
    const r = await auditChild(p, d, step, 'l2');
    const strengths = Math.round(4 / step) + 1;
    points.push([p * d * strengths, r.ms]);
    cells.push(`${p}×${d}×${strengths}: ${(r.ms / 1000).toFixed(1)} s`);
  }
  const mx = points.reduce((a, [x]) => a + x, 0) / points.length;
  const my = points.reduce((a, [, y]) => a + y, 0) / points.length;
  const slope = points.reduce((a, [x, y]) => a + (x - mx) * (y - my), 0) / points.reduce((a, [x]) => a + (x - mx) ** 2, 0);
  const fixed = my - slope * mx;
  const ssRes = points.reduce((a, [x, y]) => a + (y - fixed - slope * x) ** 2, 0);
  const ssTot = points.reduce((a, [, y]) => a + (y - my) ** 2, 0);
  rows.push(['audit time vs probes × directions × strengths (l2)', cells.join(', '), `fit: ${(fixed / 1000).toFixed(2)} s fixed + ${slope.toFixed(3)} ms per unit`, `R² ${(1 - ssRes / ssTot).toFixed(4)} (linear)`]);
}

/** A generator's own render of a seed as an 8-bit-quantised float reference (what a user's PNG holds). */
async function referenceOf(gen: Generator, seed: number): Promise<FloatImage> {
  const { width, height } = gen.imageSize();
  const rgba = gen.toRgba((await gen.renderSeeds([seed], gen.info.defaultPsi, [])).images, 0);
  const data = new Float32Array(width * height * 3);
  for (let p = 0; p < width * height; p++) for (let c = 0; c < 3; c++) data[p * 3 + c] = rgba.data[p * 4 + c] / 255;
  return { width, height, data };
}

async function runLocate(gen: Generator, ref: FloatImage, options: Parameters<typeof locate>[2]) {
  const job = locate(gen, ref, options);
  for (;;) {
    const s = await job.next();
    if (s.done) return s.value;
  }
}

/** Search evaluations/s against bare session.run at the search's batch (λ of CMA-ES in W) and threads. */
/**
 * `budget` 'whole-batches' uses 4λ evaluations: the random starts (a quarter of the budget) are
 * then exactly one batch of λ and every CMA-ES generation another, so every render on the search
 * side runs at the same batch as bare — like with like.
 */
async function locateThroughput(label: string, card: string, budgetOrRule: number | 'whole-batches', rounds = 3) {
  const gen = await Generator.open(card, { threads: THREADS });
  try {
    const lambda = defaultParameters(gen.layout.size).lambda;
    gen.batchSize = lambda;
    const budget = budgetOrRule === 'whole-batches' ? 4 * lambda : budgetOrRule;
    const c = JSON.parse(readFileSync(card, 'utf8'));
    const bare = await ort.InferenceSession.create(join(card, '..', c.synthesis.file), { intraOpNumThreads: THREADS, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' });
    const codes = await gen.codesForSeeds(Array.from({ length: lambda }, (_, i) => i), 0.7);
    const dims = [lambda, gen.layout.layers, gen.layout.size];
    await bare.run({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
    const ref = await referenceOf(gen, 424_242);
    // Warm the search side as the bare side is warmed: the session at batch λ, and the generator's
    // W prior (built once per open generator, as in the app, where a search follows previews).
    await runLocate(gen, ref, { budget: 50, seed: 99 });
    const search: number[] = [];
    const plain: number[] = [];
    for (let round = 0; round < rounds; round++) {
      let t = performance.now();
      const r = await runLocate(gen, ref, { budget, seed: round + 1 });
      search.push(r.evaluations / ((performance.now() - t) / 1000));
      t = performance.now();
      for (let n = 0; n < budget; n += lambda) await bare.run({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
      plain.push((Math.ceil(budget / lambda) * lambda) / ((performance.now() - t) / 1000));
    }
    await bare.release();
    const e = median(search);
    const b = median(plain);
    rows.push([`${label}: locate evaluations/s vs bare session.run (batch ${lambda} = λ, ${THREADS} thread${THREADS > 1 ? 's' : ''})`, `${e.toFixed(1)} eval/s`, `${b.toFixed(1)} img/s`, `${(e / b).toFixed(3)}× (target ≥ 0.9)`]);
  } finally {
    await gen.dispose();
  }
}

/** Demo: wall time until the best match reaches SSIM 0.95 and mean ΔE00 2, median over 20 unseen seeds. */
async function locateTimeToMatch() {
  const gen = await Generator.open(demoCardPath(), { threads: THREADS });
  try {
    const times: number[] = [];
    const evaluations: number[] = [];
    let found = 0;
    for (let i = 0; i < 20; i++) {
      const ref = await referenceOf(gen, 731_001 + i);
      const t = performance.now();
      const r = await runLocate(gen, ref, { until: { ssim: FOUND_SSIM, deltaE: FOUND_DELTA_E } });
      times.push(performance.now() - t);
      evaluations.push(r.evaluations);
      if (r.found) found++;
    }
    rows.push(['demo: locate, time to SSIM 0.95 & ΔE00 ≤ 2 (20 unseen seeds, default budget)', `median ${(median(times) / 1000).toFixed(2)} s`, `median ${median(evaluations)} evaluations`, `${found}/20 reached within the budget`]);
  } finally {
    await gen.dispose();
  }
}

/** Realistic 256² generator: the match reached in a fixed budget (it renders structured noise, so this is a hard target). */
async function locateLarge(card: string, budget: number) {
  const gen = await Generator.open(card, { threads: THREADS });
  try {
    const ref = await referenceOf(gen, 99);
    const t = performance.now();
    const r = await runLocate(gen, ref, { budget });
    rows.push([`realistic 256²: locate match in a fixed budget of ${budget} evaluations`, `SSIM ${r.ssim.toFixed(3)}, mean ΔE00 ${r.deltaE.toFixed(2)}`, `${((performance.now() - t) / 1000).toFixed(1)} s`, r.found ? 'found' : 'not found (closest reported)']);
  } finally {
    await gen.dispose();
  }
}

/** Where an audit's CPU time goes, by source file (self time in a --cpu-prof profile). */
const TIME_GROUPS: [string, RegExp][] = [
  ['measure', /\/app\/core\/(scorers\/|color\.ts|image\.ts|audit\/(change-map|calibration)\.ts)|\/app\/engine\/(audit\/calibrate|attributes)\.ts/],
  ['statistics', /\/app\/core\/(stats\.ts|audit\/(statistics|verdict)\.ts)/],
  ['path length', /\/app\/core\/(ssim\.ts|audit\/(path-length|ssim-graph)\.ts)/],
];

function selfTimeByGroup(profileFile: string): Record<string, number> {
  const prof = JSON.parse(readFileSync(profileFile, 'utf8')) as { nodes: { id: number; callFrame: { url: string } }[]; samples: number[]; timeDeltas: number[] };
  const group = new Map(prof.nodes.map((n) => [n.id, TIME_GROUPS.find(([, re]) => re.test(n.callFrame.url))?.[0] ?? null]));
  const out: Record<string, number> = Object.fromEntries(TIME_GROUPS.map(([g]) => [g, 0]));
  // Each sample lasts until the next one: its duration is the next time delta (µs).
  for (let i = 0; i + 1 < prof.samples.length; i++) {
    const g = group.get(prof.samples[i]);
    if (g) out[g] += prof.timeDeltas[i + 1] / 1000;
  }
  return out;
}

/** One image-only audit (measures, calibration, change maps) in a fresh profiled process: throughput and time split. */
function auditSplitChild(card: string, probes: number, batch: number, source: string): Promise<{ ms: number; renderMs: number; images: number; changeMaps: number; calibrated: boolean; split: Record<string, number> }> {
  const profDir = mkdtempSync(join(tmpdir(), 'plumbline-prof-'));
  return new Promise((done, fail) => {
    const child = fork(join(root, 'test', 'bench', 'audit-split-child.ts'), [card, String(probes), String(batch), source], { execArgv: ['--import', 'tsx', '--cpu-prof', '--cpu-prof-dir', profDir], stdio: ['ignore', 'pipe', 'inherit', 'ipc'], env: { ...process.env, PLUMBLINE_THREADS: String(THREADS) } });
    let out = '';
    child.stdout!.on('data', (c) => (out += c));
    child.on('exit', (code) => {
      try {
        if (code !== 0) throw new Error(`audit child exited ${code}`);
        const profile = readdirSync(profDir).find((f) => f.endsWith('.cpuprofile'));
        if (!profile) throw new Error('audit child wrote no CPU profile');
        done({ ...JSON.parse(out.trim().split('\n').pop()!), split: selfTimeByGroup(join(profDir, profile)) });
      } catch (err) {
        fail(err);
      } finally {
        rmSync(profDir, { recursive: true, force: true });
      }
    });
  });
}

/** Issue 9: audit throughput from images alone vs bare generator throughput (same batch, same threads), and where the time goes. */
async function auditMeasureRow(label: string, card: string, bare: () => Promise<number>, batch: number, source: string, target: string) {
  // The audit runs for many minutes: bare throughput is taken before and after it and averaged,
  // so load that comes or goes meanwhile weighs on both sides alike.
  const before = await bare();
  const r = await auditSplitChild(card, 64, batch, source);
  const bareRate = (before + (await bare())) / 2;
  const rate = r.images / (r.ms / 1000);
  const share = (v: number) => `${Math.round((100 * v) / r.ms)}%`;
  const other = r.ms - r.renderMs - Object.values(r.split).reduce((a, b) => a + b, 0);
  rows.push([
    `${label}: audit from images alone (measures, calibration, ${r.changeMaps} change maps), 64 probes, batch ${batch}`,
    `${rate.toFixed(1)} img/s (${r.images} rendered + measured)`,
    `${bareRate.toFixed(1)} img/s bare (mean of before ${before.toFixed(1)} and after)`,
    `${(rate / bareRate).toFixed(3)}×${target}; time: render ${share(r.renderMs)}, ${Object.entries(r.split).map(([g, v]) => `${g} ${share(v)}`).join(', ')}, other ${share(other)}`,
  ]);
}

function printRows() {
  const widths = [0, 1, 2, 3].map((k) => Math.max(...rows.map((r) => r[k].length), ['measure', 'plumbline', 'reference', 'ratio'][k].length));
  const line = (r: string[]) => r.map((c, k) => c.padEnd(widths[k])).join(' │ ');
  console.log('\n' + line(['measure', 'plumbline', 'reference', 'ratio']));
  console.log(widths.map((w) => '─'.repeat(w)).join('─┼─'));
  for (const r of rows) console.log(line(r));
}

const demoLimit = want('variants') || want('audit') ? (await bestBare(demoCardPath(), [1, 4, 8, 16, 32, 64], 256, 3)).text : '';
const demo = want('throughput') || want('preview') ? await throughput('demo 128²', demoCardPath(), 16, 256, 15) : null;
if (want('throughput') || want('variants') || want('farm') || want('locate')) {
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  try {
    const large = authorLarge(dir);
    const label = `realistic 256², ${(large.parameters / 1e6).toFixed(1)} M params`;
    if (want('throughput')) await throughput(label, large.card, 4, 8, 3);
    if (want('farm')) await farmRows(large.card);
    if (want('locate')) {
      // Where locate is meant to run: a generator whose render costs far more than the match
      // distance (about 2 ms per candidate at the compare size, whatever the generator's size).
      await locateThroughput(label, large.card, 'whole-batches', 3);
      await locateLarge(large.card, 220);
    }
    if (want('variants')) await variantRow('realistic 256²', large.card, Array.from({ length: 8 }, (_, i) => i + 1), 2, 4, (await bestBare(large.card, [1, 2, 4, 8], 8, 2)).text);
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
if (want('variants')) {
  await variantRow('demo 128²', demoCardPath(), Array.from({ length: 64 }, (_, i) => i), 4, 16, demoLimit);
  await variantLimitRows('demo 128²', demoCardPath(), 16);
}
if (want('pack')) await packRow();
if (want('preview')) await previewLatency(demo!.single);
if (want('cold')) await coldStart();
if (want('audit')) await auditRows(demoLimit);
if (want('audit-scaling')) await auditScalingRows();
if (want('locate')) {
  await locateThroughput('demo 128²', demoCardPath(), 700);
  await locateTimeToMatch();
}
if (want('audit-measures')) {
  // Issue 9: an audit from images alone (measures, calibration, change maps) against bare throughput.
  const dir = mkdtempSync(join(tmpdir(), 'plumbline-bench-'));
  try {
    const large = authorLarge(dir);
    await auditMeasureRow('realistic 256²', large.card, async () => (await bestBare(large.card, [4], 8, 3)).rate, 4, 'random:1', ' (target ≥ 0.8)');
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
  await auditMeasureRow('demo 128²', demoCardPath(), async () => (await bestBare(demoCardPath(), [16], 256, 5)).rate, 16, join(root, 'resources', 'demo', 'sigil-directions.npy'), '');
}
printRows();
