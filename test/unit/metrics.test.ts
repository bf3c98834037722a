// Disentanglement metrics against their definitions on worked cases: MIG (Chen et al. 2018) and
// DCI (Eastwood & Williams 2018). Mutual information follows sklearn's mutual_info_score (nats).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { dci, dciFromImportance, discretise, mig, mutualInformation } from '../../app/core/metrics.ts';
import { Random } from '../../app/core/random.ts';

test('mutual information of discrete labels, worked by hand', () => {
  const x = Int32Array.from([0, 0, 1, 1]);
  assert.ok(Math.abs(mutualInformation(x, x) - Math.LN2) < 1e-12, 'I(X;X) = H(X) = ln 2 for a fair bit');
  assert.equal(mutualInformation(x, Int32Array.from([0, 1, 0, 1])), 0, 'independent');
  // p(x,y) = {(0,0): 1/2, (1,0): 1/4, (1,1): 1/4}, p(x) = (1/2, 1/2), p(y) = (3/4, 1/4): I = Σ p(x,y) ln[p(x,y) / (p(x)p(y))].
  const a = Int32Array.from([0, 0, 1, 1]);
  const b = Int32Array.from([0, 0, 0, 1]);
  const expected = 0.5 * Math.log(0.5 / (0.5 * 0.75)) + 0.25 * Math.log(0.25 / (0.5 * 0.75)) + 0.25 * Math.log(0.25 / (0.5 * 0.25));
  assert.ok(Math.abs(mutualInformation(a, b) - expected) < 1e-12);
  assert.deepEqual(Array.from(discretise([0, 0.5, 1, 0.26], 4)), [0, 2, 3, 1]);
});

test('DCI from importance matrices: identity, uniform and redundant codes', () => {
  const id = dciFromImportance([[1, 0, 0], [0, 1, 0], [0, 0, 1]]);
  assert.equal(id.disentanglement, 1);
  assert.equal(id.completeness, 1);
  const uniform = dciFromImportance([[1, 1], [1, 1]]);
  assert.ok(Math.abs(uniform.disentanglement) < 1e-12 && Math.abs(uniform.completeness) < 1e-12);
  // Two codes both for factor 0: each code is disentangled (D = 1) but factor 0 is spread (C = 0).
  const redundant = dciFromImportance([[1, 0], [1, 0]]);
  assert.equal(redundant.disentanglement, 1);
  assert.ok(Math.abs(redundant.completeness) < 1e-12);
});

function samples(n: number, mixAngle: number) {
  const rng = new Random(21);
  const codes = new Float64Array(n * 2);
  const factors = new Float64Array(n * 2);
  const c = Math.cos(mixAngle);
  const s = Math.sin(mixAngle);
  for (let i = 0; i < n; i++) {
    const f0 = rng.uniform();
    const f1 = rng.uniform();
    factors[2 * i] = f0;
    factors[2 * i + 1] = f1;
    codes[2 * i] = c * f0 + s * f1;
    codes[2 * i + 1] = -s * f0 + c * f1;
  }
  return { codes, factors };
}

test('MIG and DCI: axis-aligned codes score high, 45°-mixed codes low', () => {
  const aligned = samples(4000, 0);
  const mixed = samples(4000, Math.PI / 4);
  const ma = mig(aligned.codes, 2, aligned.factors, 2).mig;
  const mm = mig(mixed.codes, 2, mixed.factors, 2).mig;
  assert.ok(ma > 0.85, `aligned MIG ${ma}`);
  assert.ok(mm < 0.15, `mixed MIG ${mm}`);
  const da = dci(aligned.codes, 2, aligned.factors, 2);
  const dm = dci(mixed.codes, 2, mixed.factors, 2);
  assert.ok(da.disentanglement > 0.99 && da.completeness > 0.99 && da.informativeness > 0.99);
  assert.ok(dm.disentanglement < 0.01, `mixed D ${dm.disentanglement}`);
  assert.ok(dm.informativeness > 0.99, 'a rotation loses no information');
});
