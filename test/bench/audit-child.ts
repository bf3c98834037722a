// One audit in a fresh process, for the benchmark: prints {ms, images, bare, maxRssMb} as JSON.
// Usage: tsx test/bench/audit-child.ts <probes> <directions> <strength step> [distance] [bare]
import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import * as ort from 'onnxruntime-node';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { runAudit } from '../../app/engine/audit/run.ts';

const [probes, count, step, distance] = [Number(process.argv[2]), Number(process.argv[3]), Number(process.argv[4]), process.argv[5] ?? 'ssim'];
const host = new Workspace({ threads: Number(process.env.PLUMBLINE_THREADS) || 1 });
await host.openModel(demoCardPath());
const dirs = host.openDirections(new URL('../../resources/demo/sigil-directions.npy', import.meta.url).pathname).directions.slice(0, count).map((d) => {
  const x = host.direction(d.id);
  return { name: x.name, target: x.target, layers: x.layers, vector: x.vector, sigma: x.sigma };
});
const strengths: number[] = [];
for (let s = -2; s <= 2 + 1e-9; s += step) strengths.push(Math.round(s * 1000) / 1000);
// The bare reference (with a 5th argument 'bare'): session.run of the synthesis file alone, in the
// same process, at the audit's batch size and thread count, fetching the outputs the engine
// fetches — one bare batch after every step of the audit, timed apart from it, so both sides see
// the same moments of a shared machine. Before, the bare side ran once, before the audit, for 256
// images after one warm-up run: a fresh process's first second runs at about half its later rate
// (measured: 519 img/s in the first 0.7 s, 760–910 after), so "bare" was timed slow and the audit
// fast, and the row read above 1.0.
const withBare = process.argv[6] === 'bare';
/** Both sides run this long before anything is timed (the fresh-process slow start above). */
const WARM_MS = 1500;
const card = JSON.parse(readFileSync(demoCardPath(), 'utf8'));
const fetches = [card.synthesis.output, ...(card.synthesis.attributesOutput ? [card.synthesis.attributesOutput] : [])];
const gen = host.generator!;
const batch = gen.batchSize;
const bare = withBare ? await ort.InferenceSession.create(join(demoCardPath(), '..', card.synthesis.file), { intraOpNumThreads: Number(process.env.PLUMBLINE_THREADS) || 1, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' }) : null;
const bareCodes = await gen.codesForSeeds(Array.from({ length: batch }, (_, i) => i), 0.7);
const feed = () => ({ [card.synthesis.latentInput]: new ort.Tensor('float32', bareCodes, [batch, gen.layout.layers, gen.layout.size]) });
for (const t = performance.now(); performance.now() - t < WARM_MS; ) {
  await gen.synthesize(bareCodes, batch);
  await bare?.run(feed(), fetches);
}
// Count every image the audit renders by wrapping the session's run (bare batches excluded).
let images = 0;
let inRun = 0;
let inBare = false;
const proto = (ort.InferenceSession as unknown as { prototype: { run: unknown } }).prototype;
const run = proto.run;
proto.run = async function (this: ort.InferenceSession, feeds: Record<string, ort.Tensor>, ...rest: unknown[]) {
  const input = Object.values(feeds)[0];
  if (!inBare && input.dims.length === 3) images += input.dims[0];
  const t = performance.now();
  const r = await (run as (...a: unknown[]) => Promise<unknown>).call(this, feeds, ...rest);
  if (!inBare) inRun += performance.now() - t;
  return r;
};
let ms = 0;
let bareMs = 0;
let bareImages = 0;
const job = runAudit(gen, dirs, { probes, strengths, combinations: 'none', groundTruthSamples: 0, sigmaSamples: 256, pathLength: { distance: distance as 'ssim', epsilon: 0.01, spikeRatio: 5 } });
for (;;) {
  let t = performance.now();
  const step = await job.next();
  ms += performance.now() - t;
  if (step.done || !bare) {
    if (step.done) break;
    continue;
  }
  inBare = true;
  t = performance.now();
  await bare.run(feed(), fetches);
  bareMs += performance.now() - t;
  bareImages += batch;
  inBare = false;
}
proto.run = run;
await bare?.release();
const bareImagesPerSecond = bare ? { rate: bareImages / (bareMs / 1000), batch, images: bareImages } : null;
process.stdout.write(JSON.stringify({ ms, inRunMs: inRun, images, bare: bareImagesPerSecond, maxRssMb: process.resourceUsage().maxRSS / 1024 }) + '\n');
await host.dispose();
