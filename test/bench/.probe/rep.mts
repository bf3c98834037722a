import { readFileSync } from 'node:fs';
import { join } from 'node:path';
import * as ort from 'onnxruntime-node';
import { Generator } from '../../../app/engine/generator.ts';
import { demoCardPath } from '../../../app/engine/workspace.ts';
const card = demoCardPath();
const c = JSON.parse(readFileSync(card, 'utf8'));
const gen = await Generator.open(card, { threads: 1 });
const batch = 16;
const codes = await gen.codesForSeeds(Array.from({ length: batch }, (_, i) => i), 0.7);
const dims = [batch, gen.layout.layers, gen.layout.size];
const bare = await ort.InferenceSession.create(join(card, '..', c.synthesis.file), { intraOpNumThreads: 1, interOpNumThreads: 1, executionMode: 'sequential', graphOptimizationLevel: 'all' });
const feed = () => ({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
const line = [];
for (let r = 0; r < 10; r++) {
  const t = performance.now(); let n = 0; const c0 = process.cpuUsage();
  while (performance.now() - t < 700) { await bare.run(feed()); n += batch; }
  const cu = process.cpuUsage(c0);
  line.push(`${(n / ((performance.now() - t) / 1000)).toFixed(0)}(${((cu.user + cu.system) / 1000 / (performance.now() - t)).toFixed(2)})`);
}
console.log(line.join(' '));
