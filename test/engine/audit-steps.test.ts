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
import { measureDirection, renderWorstProbes } from '../../app/engine/audit/measure.ts';
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
