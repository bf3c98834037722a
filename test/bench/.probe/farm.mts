import { mkdtempSync } from 'node:fs';
import { join } from 'node:path';
import { tmpdir } from 'node:os';
import { Generator } from '../../../app/engine/generator.ts';
import { renderVariants } from '../../../app/engine/variants.ts';
import { authorLarge } from '../author-large.ts';
const { startRedis } = await import('../../helpers/redis.ts');
const { startWorker } = await import('../../helpers/farm.ts');
const { Farm } = await import('../../../app/engine/farm/coordinator.ts');
const { renderVariantsOnFarm } = await import('../../../app/engine/farm/farm-variants.ts');
const dir = mkdtempSync(join(tmpdir(), 'plumbline-fp-'));
const large = authorLarge(dir);
const redis = await startRedis();
const w = await startWorker(redis.url, 'one');
const gen = await Generator.open(large.card, { threads: 1 });
gen.batchSize = 8;
const v = { name: 'bench', vector: new Float32Array(gen.layout.size).fill(1 / Math.sqrt(gen.layout.size)), layers: null, sigma: 1 };
const recipe = (name: string, list: number[]) => ({ format: 'plumbline.variant-recipe' as const, version: 1 as const, name, seeds: list, psi: 0.7, settings: [{ label: 'a', strengths: { bench: -1 } }, { label: 'b', strengths: { bench: 1 } }] });
const farm = await Farm.connect(redis.url);
const seeds = (n: number, from: number) => Array.from({ length: n }, (_, i) => from + i);
for (const [name, list] of [['warm', seeds(8, 0)], ['a', seeds(32, 100)], ['b', seeds(32, 300)]] as const) {
  const t = performance.now();
  let last: any = null;
  const job = renderVariantsOnFarm(farm, gen, recipe(name, [...list]), [v], mkdtempSync(join(tmpdir(), 'fpo-')), { modelPath: large.card, onProgress: (p) => { last = p; console.log(`  +${((performance.now() - t) / 1000).toFixed(2)} s unit done ${p.done}/${p.total}`); } });
  for (;;) if ((await job.next()).done) break;
  console.log(name, 'wall', ((performance.now() - t) / 1000).toFixed(2), 'worker seconds', last.workers.map((x: any) => `${x.units} units ${x.seconds.toFixed(2)} s`).join(', '));
}
await gen.renderSeeds(seeds(8, 0), 0.7, []);
for (const list of [seeds(32, 100)]) {
  const t = performance.now();
  const job = renderVariants(gen, recipe('here', list), [v], mkdtempSync(join(tmpdir(), 'fpo-')));
  for (;;) { const s = await job.next(); if (s.done) break; console.log(`  +${((performance.now() - t) / 1000).toFixed(2)} s`, s.value.done); }
  console.log('here wall', ((performance.now() - t) / 1000).toFixed(2));
}
await w.kill(); await farm.close(); await gen.dispose(); await redis.stop();
process.exit(0);
