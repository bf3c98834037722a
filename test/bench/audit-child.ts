// One audit in a fresh process, for the benchmark: prints {ms, images, bare, maxRssMb} as JSON.
// Usage: tsx test/bench/audit-child.ts <probes> <directions> <strength step> [distance]
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
// The bare reference in the same process, at the same batch size and thread count as the audit:
// session.run of the synthesis file alone on 256 images, after one warm-up batch.
const bareImagesPerSecond = await (async () => {
  const card = JSON.parse(readFileSync(demoCardPath(), 'utf8'));
  const gen = host.generator!;
  const batch = gen.batchSize;
  const session = await ort.InferenceSession.create(join(demoCardPath(), '..', card.synthesis.file), { intraOpNumThreads: Number(process.env.PLUMBLINE_THREADS) || 1, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' });
  const codes = await gen.codesForSeeds(Array.from({ length: batch }, (_, i) => i), 0.7);
  const feed = () => ({ [card.synthesis.latentInput]: new ort.Tensor('float32', codes, [batch, gen.layout.layers, gen.layout.size]) });
  await session.run(feed());
  const t = performance.now();
  const runs = Math.ceil(256 / batch);
  for (let k = 0; k < runs; k++) await session.run(feed());
  const rate = (runs * batch) / ((performance.now() - t) / 1000);
  await session.release();
  return { rate, batch };
})();
// Count every image the audit renders by wrapping the session's run.
let images = 0;
const proto = (ort.InferenceSession as unknown as { prototype: { run: unknown } }).prototype;
const run = proto.run;
proto.run = async function (this: ort.InferenceSession, feeds: Record<string, ort.Tensor>, ...rest: unknown[]) {
  const input = Object.values(feeds)[0];
  if (input.dims.length === 3) images += input.dims[0];
  const t = performance.now();
  const r = await (run as (...a: unknown[]) => Promise<unknown>).call(this, feeds, ...rest);
  inRun += performance.now() - t;
  return r;
};
let inRun = 0;
const t0 = performance.now();
const job = runAudit(host.generator!, dirs, { probes, strengths, combinations: 'none', groundTruthSamples: 0, sigmaSamples: 256, pathLength: { distance: distance as 'ssim', epsilon: 0.01, spikeRatio: 5 } });
for (;;) if ((await job.next()).done) break;
const ms = performance.now() - t0;
process.stdout.write(JSON.stringify({ ms, inRunMs: inRun, images, bare: bareImagesPerSecond, maxRssMb: process.resourceUsage().maxRSS / 1024 }) + '\n');
await host.dispose();
