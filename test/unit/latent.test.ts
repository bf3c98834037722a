// Latent arithmetic against definitions: truncation w' = c + ψ(w − c) (StyleGAN's truncation
// trick, METHODS §6); σ units = std of projections (GANSpace lat_stdev, METHODS §4.2).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { applyEdits, broadcastLayers, directionSigma, truncate } from '../../app/core/latent.ts';
import { Random, latentForSeed } from '../../app/core/random.ts';

test('truncation interpolates towards the centre', () => {
  const w = Float32Array.from([2, -2, 4, 0]);
  const c = Float32Array.from([1, 1]);
  assert.deepEqual(Array.from(truncate(w, c, 0.5)), [1.5, -0.5, 2.5, 0.5]);
  assert.deepEqual(Array.from(truncate(w, c, 1)), Array.from(w));
  assert.deepEqual(Array.from(truncate(w, c, 0)), [1, 1, 1, 1]);
});

test('edits touch only their layer range', () => {
  const codes = broadcastLayers(new Float32Array(2 * 2), { layers: 3, size: 2 });
  applyEdits(codes, { layers: 3, size: 2 }, [{ vector: Float32Array.from([1, 0]), layers: [1, 2], step: 2 }]);
  assert.deepEqual(Array.from(codes), [0, 0, 2, 0, 0, 0, 0, 0, 2, 0, 0, 0]);
});

test('σ of a direction equals sqrt(dᵀΣd) for samples with a known covariance', () => {
  // x = (2a, a + b) with a, b ~ N(0,1): Σ = [[4, 2], [2, 2]]; for d = (1,0)/1: σ = 2; d = (0,1): √2.
  const rng = new Random(7);
  const n = 40000;
  const s = new Float32Array(n * 2);
  for (let i = 0; i < n; i++) {
    const a = rng.normal();
    const b = rng.normal();
    s[2 * i] = 2 * a;
    s[2 * i + 1] = a + b;
  }
  assert.ok(Math.abs(directionSigma(s, 2, Float32Array.from([1, 0]), 1, null) - 2) < 0.03);
  assert.ok(Math.abs(directionSigma(s, 2, Float32Array.from([0, 1]), 1, null) - Math.SQRT2) < 0.03);
  const d = Float32Array.from([Math.SQRT1_2, Math.SQRT1_2]);
  assert.ok(Math.abs(directionSigma(s, 2, d, 1, null) - Math.sqrt(0.5 * (4 + 2 + 2 + 2))) < 0.04);
});

test('seeded latents are reproducible and standard normal', () => {
  assert.deepEqual(Array.from(latentForSeed(42, 16)), Array.from(latentForSeed(42, 16)));
  assert.notDeepEqual(Array.from(latentForSeed(42, 16)), Array.from(latentForSeed(43, 16)));
  const rng = new Random(1);
  let m = 0;
  let v = 0;
  let tail = 0;
  const n = 200000;
  for (let i = 0; i < n; i++) {
    const x = rng.normal();
    m += x;
    v += x * x;
    if (Math.abs(x) > 1.959964) tail++;
  }
  m /= n;
  v = v / n - m * m;
  assert.ok(Math.abs(m) < 0.01, `mean ${m}`);
  assert.ok(Math.abs(v - 1) < 0.015, `variance ${v}`);
  // P(|X| > 1.959964) = 0.05 for a standard normal (standard normal table).
  assert.ok(Math.abs(tail / n - 0.05) < 0.003, `tail ${tail / n}`);
});
