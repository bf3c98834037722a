// The audit's rendering steps, each on its own, on the linear test generator G(z) = A z (a 16×16
// image; attribute 'first' = z₀), where every measurement has a closed form: an edit of s σ-units
// along u moves z₀ by s·σ_u·u₀, so Δ/σ_first = s·σ_u·u₀/σ_first exactly; the mean-squared-difference
// path length is σ_u²·mean((A u)²) for every probe and strength (METHODS §1.5). The attribute
// spread is checked against NumPy's sample standard deviation (ddof = 1) of the same codes
// (/usr/bin/python3), and thumbnails decode with fast-png (an outside library).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { decode } from 'fast-png';
import { Generator } from '../../app/engine/generator.ts';
import { resolveAttributes } from '../../app/engine/attributes.ts';
import { planAudit } from '../../app/core/audit/plan.ts';
import { measureAttributeSpread, sampleProbes } from '../../app/engine/audit/probes.ts';
import { measureDirection, measureNullBaseline, renderWorstProbes } from '../../app/engine/audit/measure.ts';
import { cardGenerator, tempDir } from '../helpers/models.ts';

const PYTHON = '/usr/bin/python3';
const hasNumpy = existsSync(PYTHON) && spawnSync(PYTHON, ['-c', 'import numpy'], { encoding: 'utf8' }).status === 0;

let gen: Generator;
let weights: Float32Array;
before(async () => {
  const made = cardGenerator(tempDir());
  weights = made.weights;
  gen = await Generator.open(made.card, { threads: 1 });
});
after(async () => gen.dispose());

async function drain<T>(job: AsyncGenerator<unknown, T, void>): Promise<{ value: T; steps: number }> {
  for (let steps = 0; ; steps++) {
    const s = await job.next();
    if (s.done) return { value: s.value, steps };
  }
}

test('sampling, then render and score, each alone, give the closed-form values', { skip: hasNumpy ? false : `${PYTHON} with numpy is not available here` }, async () => {
  const u = { name: 'u', target: 'first', layers: null, vector: Float32Array.from([0.6, 0.8, 0, 0]), sigma: 1.3 };
  const plan = planAudit({ probes: 6, attributes: ['first'], strengths: [-2, -1, 0, 1, 2], sigmaSamples: 64, pathLength: { distance: 'l2', epsilon: 0.01, spikeRatio: 5 }, combinations: 'none' }, [u], gen.layout, ['first'], false);
  let done = 0;
  const tick = (label: string) => ({ done: ++done, total: 0, label });
  const spread = await drain(measureAttributeSpread(gen, plan, resolveAttributes(gen, ['first']), [u], tick));
  const codes = Array.from(await gen.codesForSeeds(plan.sigmaSeeds, 1));
  const py = spawnSync(PYTHON, ['-c', 'import json,sys,numpy as np; c=np.array(json.load(sys.stdin)).reshape(-1,4); print(c[:,0].std(ddof=1))'], { input: JSON.stringify(codes), encoding: 'utf8' });
  assert.equal(py.status, 0, py.stderr);
  const sigmaFirst = Number(py.stdout);
  assert.ok(Math.abs(spread.value.sigma[0] - sigmaFirst) < 1e-5 * sigmaFirst, `σ_first ${spread.value.sigma[0]} vs NumPy ${sigmaFirst}`);
  assert.equal(spread.steps, Math.ceil(64 / gen.batchSize), 'one progress step per σ batch');

  const probes = await drain(sampleProbes(gen, plan, spread.value.specs, tick));
  assert.equal(probes.value.baseScores.length, 6);
  const context = { gen, plan, probes: probes.value, specs: spread.value.specs, sigma: spread.value.sigma, ssimModel: null };
  const run = await drain(measureDirection(context, u, tick));
  const size = 3 * 16 * 16;
  let s2 = 0;
  for (let k = 0; k < size; k++) s2 += (0.6 * weights[k] + 0.8 * weights[size + k]) ** 2;
  const analytic = (1.3 * 1.3 * s2) / size;
  plan.grid.forEach((s, gi) => {
    const row = run.value.measurements.change[gi];
    if (s === 0) return assert.equal(row, null);
    for (const v of row![0]) assert.ok(Math.abs(v - (s * 1.3 * 0.6) / sigmaFirst) < 1e-4, `Δ/σ at ${s}: ${v}`);
  });
  for (const column of run.value.measurements.pathLength) for (const v of column) assert.ok(Math.abs(v - analytic) / analytic < 1e-3, `path length ${v} vs ${analytic}`);

  const thumbs = await renderWorstProbes(context, u, [{ index: 0, seed: plan.seeds[0], strength: 2, attribute: 'first', leakage: 0.123456789 }]);
  assert.equal(thumbs[0].leakage, 0.123457);
  for (const png of [thumbs[0].before, thumbs[0].after]) {
    assert.ok(png instanceof Uint8Array);
    const img = decode(png);
    assert.deepEqual([img.width, img.height], [16, 16], 'a 16-pixel image is not scaled up');
  }
});

test('the null baseline gives the closed-form values with one shared unedited render per batch', { skip: hasNumpy ? false : `${PYTHON} with numpy is not available here` }, async () => {
  // Two random-like directions on the linear generator: at ±2 σ-units Δ/σ_first = ±2·σ_u·u₀/σ_first
  // and the end-point path length (strength 0) is σ_u²·mean((A u)²), as in the test above.
  const nulls = [
    { name: 'null_0', target: null, layers: null, vector: Float32Array.from([0.6, 0.8, 0, 0]), sigma: 1.3 },
    { name: 'null_1', target: null, layers: null, vector: Float32Array.from([0, 0.6, 0, 0.8]), sigma: 0.7 },
  ];
  const plan = planAudit({ probes: 6, attributes: ['first'], strengths: [-2, 0, 2], sigmaSamples: 64, pathLength: { distance: 'l2', epsilon: 0.01, spikeRatio: 5 }, combinations: 'none' }, nulls, gen.layout, ['first'], false);
  const nullPlan = { ...plan, grid: [-2, 0, 2], pathLengthGrid: [0] };
  let done = 0;
  const tick = (label: string) => ({ done: ++done, total: 0, label });
  const spread = await drain(measureAttributeSpread(gen, plan, resolveAttributes(gen, ['first']), nulls, tick));
  const probes = await drain(sampleProbes(gen, plan, spread.value.specs, tick));
  const sigmaFirst = spread.value.sigma[0];
  const context = { gen, plan: nullPlan, probes: probes.value, specs: spread.value.specs, sigma: spread.value.sigma, ssimModel: null };
  const synthesize = gen.synthesize.bind(gen);
  let renders = 0;
  gen.synthesize = ((...args: Parameters<Generator['synthesize']>) => (renders++, synthesize(...args))) as Generator['synthesize'];
  let run;
  try {
    run = await drain(measureNullBaseline(context, nulls, tick));
  } finally {
    gen.synthesize = synthesize;
  }
  const batches = Math.ceil(6 / gen.batchSize);
  // Only edited renders are new: ±reference and one ε step per direction, the unedited one shared.
  assert.equal(renders, batches * (1 + 3 * nulls.length), 'renders per batch: 1 shared + 3 per random direction');
  assert.equal(run.steps, batches * nulls.length, 'one progress step per direction and batch');
  const size = 3 * 16 * 16;
  nulls.forEach((d, k) => {
    const m = run.value[k];
    assert.equal(m.change[1], null, 'nothing to compare at strength 0');
    for (const [gi, s] of [[0, -2], [2, 2]] as const) for (const v of m.change[gi]![0]) assert.ok(Math.abs(v - (s * d.sigma * d.vector[0]) / sigmaFirst) < 1e-4, `${d.name} Δ/σ at ${s}: ${v}`);
    let s2 = 0;
    for (let q = 0; q < size; q++) {
      let a = 0;
      for (let r = 0; r < 4; r++) a += d.vector[r] * weights[r * size + q];
      s2 += a * a;
    }
    const analytic = (d.sigma * d.sigma * s2) / size;
    for (const v of m.pathLength[0]) assert.ok(Math.abs(v - analytic) / analytic < 1e-3, `${d.name} path length ${v} vs ${analytic}`);
  });
});
