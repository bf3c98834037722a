import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/host.ts';
import { locate } from '../../app/engine/locate.ts';
import { defaultParameters } from '../../app/core/search/cma-es.ts';
const gen = await Generator.open(demoCardPath(), { threads: 1 });
gen.batchSize = defaultParameters(gen.layout.size).lambda;
const { width, height } = gen.imageSize();
const rgba = gen.toRgba((await gen.renderSeeds([424242], gen.info.defaultPsi, [])).images, 0);
const data = new Float32Array(width * height * 3);
for (let p = 0; p < width * height; p++) for (let c = 0; c < 3; c++) data[p * 3 + c] = rgba.data[p * 4 + c] / 255;
for (let r = 0; r < 2; r++) {
  const t = performance.now();
  const job = locate(gen, { width, height, data }, { budget: 1400, seed: r + 1 });
  let s; for (;;) { s = await job.next(); if (s.done) break; }
  console.log('evals', (s.value as any).evaluations, 'ms', performance.now() - t, 'layout', gen.layout.size, gen.batchSize);
}
await gen.dispose();
