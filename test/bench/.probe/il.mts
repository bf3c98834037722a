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
console.log('outputs', bare.outputNames, 'inputs', bare.inputNames, c.synthesis);
const feed = () => ({ [c.synthesis.latentInput]: new ort.Tensor('float32', codes, dims) });
await bare.run(feed()); await gen.synthesize(codes, batch);
const fetchImg = [c.synthesis.imageOutput ?? bare.outputNames[0]];
for (let r = 0; r < 4; r++) {
  let t = performance.now(); for (let k = 0; k < 16; k++) await bare.run(feed()); const b = 256 / ((performance.now() - t) / 1000);
  t = performance.now(); for (let k = 0; k < 16; k++) await gen.synthesize(codes, batch); const e = 256 / ((performance.now() - t) / 1000);
  t = performance.now(); for (let k = 0; k < 16; k++) await bare.run(feed(), fetchImg); const b2 = 256 / ((performance.now() - t) / 1000);
  console.log(`bare ${b.toFixed(0)}  engine ${e.toFixed(0)}  bare-image-only ${b2.toFixed(0)}`);
}
