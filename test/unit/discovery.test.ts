// Discovery and repair against outside references and planted truth:
//  - PCA against ml-matrix's singular value decomposition of the centred data (a different algorithm);
//  - closed-form factorization recovers a planted dominant direction in an authored ONNX model, and
//    its eigenvectors match ml-matrix's SVD of the normalised weight;
//  - the linear boundary recovers a planted normal; projection off boundaries equals the
//    two-condition formula of InterFaceGAN (METHODS §2.3) and leaves a vector orthogonal to them.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Matrix, SingularValueDecomposition } from 'ml-matrix';
import { Random } from '../../app/core/random.ts';
import { differenceOfMeans, linearBoundary, pcaDirections, projectOff, sefaDirections } from '../../app/core/discovery/methods.ts';
import { angleDegrees, dot, unit } from '../../app/core/discovery/linalg.ts';
import { GraphBuilder } from '../../app/core/onnx/graph-builder.ts';
import { decodeModel } from '../../app/core/onnx/inspect.ts';
import { latentWeights } from '../../app/core/onnx/trace.ts';

function correlatedSamples(n: number, d: number, seed: number): Float32Array {
  const rng = new Random(seed);
  const mix = Array.from({ length: d }, () => Array.from({ length: d }, () => rng.normal()));
  const out = new Float32Array(n * d);
  for (let i = 0; i < n; i++) {
    const z = Array.from({ length: d }, (_, k) => rng.normal() * (k + 1));
    for (let a = 0; a < d; a++) {
      let s = 3;
      for (let b = 0; b < d; b++) s += mix[a][b] * z[b];
      out[i * d + a] = s;
    }
  }
  return out;
}

test('PCA components and variances agree with ml-matrix SVD of the centred data', () => {
  const d = 8;
  const n = 600;
  const x = correlatedSamples(n, d, 1);
  const { directions } = pcaDirections(x, d, 4);
  const mean = Array.from({ length: d }, (_, k) => { let s = 0; for (let i = 0; i < n; i++) s += x[i * d + k]; return s / n; });
  const centred = new Matrix(n, d);
  for (let i = 0; i < n; i++) for (let k = 0; k < d; k++) centred.set(i, k, x[i * d + k] - mean[k]);
  const svd = new SingularValueDecomposition(centred);
  directions.forEach((dir, j) => {
    const ref = svd.rightSingularVectors.getColumn(j);
    assert.ok(angleDegrees(dir.vector, ref) < 1e-3, `component ${j}: ${angleDegrees(dir.vector, ref)}°`);
    const sd = svd.diagonal[j] / Math.sqrt(n - 1);
    assert.ok(Math.abs(dir.score - sd) / sd < 1e-6, `σ of component ${j}`);
    let big = 0;
    for (let k = 1; k < d; k++) if (Math.abs(dir.vector[k]) > Math.abs(dir.vector[big])) big = k;
    assert.ok(dir.vector[big] > 0, 'sign convention: largest coefficient positive');
  });
});

test('closed-form factorization finds a planted dominant direction in an authored ONNX model', () => {
  const d = 16;
  const c = 24;
  const rng = new Random(2);
  const u = unit(Array.from({ length: d }, () => rng.normal()));
  const v = Array.from({ length: c }, () => rng.normal());
  const A = new Float32Array(d * c);
  for (let i = 0; i < d; i++) for (let j = 0; j < c; j++) A[i * c + j] = 6 * u[i] * v[j] + 0.3 * rng.normal();
  const g = new GraphBuilder('planted');
  const ws = g.input('ws', ['N', 2, d]);
  const row = g.op('Reshape', [g.op('Gather', [ws, g.int64s('l', [1])], { axis: 1 }), g.int64s('s', [-1, d])]);
  const y = g.matmul(g.sub(row, g.tensor('avg', new Float32Array(d), [d])), g.tensor('style', A, [d, c]));
  g.output(g.sigmoid(y), 'out', ['N', c]);
  const weights = latentWeights(decodeModel(g.toModel(), 'planted.onnx'), 'ws', d);
  assert.equal(weights.length, 1);
  assert.equal(weights[0].layer, 1, 'the trace records the W+ row read by Gather');
  const found = sefaDirections(weights, d, 3);
  assert.ok(angleDegrees(found[0].vector, u) < 3, `planted direction recovered within ${angleDegrees(found[0].vector, u).toFixed(2)}°`);
  assert.ok(found[0].score > 3 * found[1].score, 'and it dominates');
  // Eigenvectors of W·Wᵀ (columns normalised) are the left singular vectors of the normalised W.
  const Wn = new Matrix(d, c);
  for (let j = 0; j < c; j++) {
    let norm = 0;
    for (let i = 0; i < d; i++) norm += A[i * c + j] ** 2;
    for (let i = 0; i < d; i++) Wn.set(i, j, A[i * c + j] / Math.sqrt(norm));
  }
  const svd = new SingularValueDecomposition(Wn);
  for (let j = 0; j < 3; j++) {
    assert.ok(angleDegrees(found[j].vector, svd.leftSingularVectors.getColumn(j)) < 1e-2, `eigenvector ${j}`);
    assert.ok(Math.abs(found[j].score - svd.diagonal[j] ** 2) < 1e-3 * found[j].score, `eigenvalue ${j}`);
  }
});

test('the linear boundary recovers a planted normal and reports held-out accuracy', () => {
  const d = 12;
  const n = 3000;
  const rng = new Random(4);
  const truth = unit(Array.from({ length: d }, () => rng.normal()));
  const x = new Float32Array(n * d);
  const scores = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    for (let k = 0; k < d; k++) x[i * d + k] = rng.normal() + 0.5;
    scores[i] = dot(x.subarray(i * d, (i + 1) * d), truth) + 0.05 * rng.normal();
  }
  const r = linearBoundary(x, d, scores, { fraction: 0.1, seed: 1 });
  assert.ok(angleDegrees(r.vector, truth) < 6, `angle ${angleDegrees(r.vector, truth).toFixed(2)}°`);
  assert.ok(dot(r.vector, truth) > 0, 'points towards higher scores');
  assert.ok(r.accuracy > 0.95, `held-out accuracy ${r.accuracy}`);
  assert.equal(r.perSide, 300);
});

test('projection off boundaries: orthogonal to each, and equal to the InterFaceGAN two-condition formula', () => {
  const rng = new Random(8);
  const n1 = unit(Array.from({ length: 10 }, () => rng.normal()));
  const c1 = unit(Array.from({ length: 10 }, () => rng.normal()));
  const c2 = unit(Array.from({ length: 10 }, () => rng.normal()));
  const r = projectOff(n1, [c1, c2]);
  assert.ok(Math.abs(dot(r, c1)) < 1e-6 && Math.abs(dot(r, c2)) < 1e-6);
  // METHODS §2.3: α = (p1 − p2·c12)/(1 − c12²), β = (p2 − p1·c12)/(1 − c12²), n' = n1 − αc1 − βc2.
  const p1 = dot(n1, c1);
  const p2 = dot(n1, c2);
  const c12 = dot(c1, c2);
  const a = (p1 - p2 * c12) / (1 - c12 * c12);
  const b = (p2 - p1 * c12) / (1 - c12 * c12);
  const ref = unit(Array.from(n1, (v, i) => v - a * c1[i] - b * c2[i]));
  assert.ok(angleDegrees(r, ref) < 1e-3 && dot(r, ref) > 0);
  assert.throws(() => projectOff(c1, [c1]), /nothing is left/);
});

test('difference of means', () => {
  const pos = Float32Array.from([2, 0, 4, 0]);
  const neg = Float32Array.from([0, 0, 0, 0]);
  assert.deepEqual(Array.from(differenceOfMeans(pos, neg, 2)), [1, 0]);
});
