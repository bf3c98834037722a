// Bootstrap intervals against the exhaustive worked example of METHODS §4.1 (x = [1,2,3,4,10],
// the mean, all 5⁵ = 3125 resamples, NumPy 'linear' quantiles; values there agree between
// Python/NumPy/SciPy and an independent JS implementation): a = 0.08485281, BCa mid-rank
// [2.0, 8.2], strict [2.0, 7.451595], percentile [1.8, 7.2]. Normal quantiles against standard
// normal table values (common practice).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Random } from '../../app/core/random.ts';
import { ProbeBootstrap, RunningMoments, bcaInterval, jackknifeAcceleration, normalCdf, normalQuantile, percentileInterval, quantileSorted } from '../../app/core/stats.ts';

const x = [1, 2, 3, 4, 10];
const exhaustive: number[] = [];
for (let a = 0; a < 5; a++) for (let b = 0; b < 5; b++) for (let c = 0; c < 5; c++) for (let d = 0; d < 5; d++) for (let e = 0; e < 5; e++) exhaustive.push((x[a] + x[b] + x[c] + x[d] + x[e]) / 5);
const jack = x.map((_, i) => x.filter((__, j) => j !== i).reduce((s, v) => s + v, 0) / 4);

test('the exhaustive bootstrap of the mean of [1,2,3,4,10]', () => {
  assert.equal(exhaustive.length, 3125);
  assert.equal(exhaustive.filter((v) => v < 4).length, 1553);
  assert.equal(exhaustive.filter((v) => v === 4).length, 221);
  assert.ok(Math.abs(jackknifeAcceleration(jack) - 0.08485281) < 1e-8);
  const pc = percentileInterval(exhaustive);
  assert.ok(Math.abs(pc[0] - 1.8) < 1e-9 && Math.abs(pc[1] - 7.2) < 1e-9, `percentile ${pc}`);
  const mid = bcaInterval(exhaustive, 4, jack, 0.95, 'mid-rank');
  assert.ok(Math.abs(mid[0] - 2) < 1e-6 && Math.abs(mid[1] - 8.2) < 1e-6, `BCa mid-rank ${mid}`);
  const strict = bcaInterval(exhaustive, 4, jack, 0.95, 'strict');
  assert.ok(Math.abs(strict[0] - 2) < 1e-6 && Math.abs(strict[1] - 7.451595) < 1e-6, `BCa strict ${strict}`);
});

test('normal quantiles and CDF match table values', () => {
  assert.ok(Math.abs(normalQuantile(0.975) - 1.959963985) < 1e-8);
  assert.ok(Math.abs(normalQuantile(0.5)) < 1e-12);
  assert.ok(Math.abs(normalQuantile(0.001) + 3.090232306) < 1e-7);
  assert.ok(Math.abs(normalCdf(1.959963985) - 0.975) < 1e-7);
  assert.ok(Math.abs(normalCdf(-1) - 0.158655254) < 1e-7);
});

test('NumPy linear quantiles', () => {
  // np.quantile([1, 2, 3, 4, 10], [0.1, 0.5, 0.9]) = [1.4, 3.0, 7.6]
  assert.deepEqual([0.1, 0.5, 0.9].map((q) => Math.round(quantileSorted([1, 2, 3, 4, 10], q) * 1e9) / 1e9), [1.4, 3, 7.6]);
});

test('streaming moments equal the two-pass sample variance', () => {
  const m = new RunningMoments();
  const data = [2, 4, 4, 4, 5, 5, 7, 9];
  data.forEach((v) => m.push(v));
  assert.equal(m.mean, 5);
  assert.ok(Math.abs(m.variance - 32 / 7) < 1e-12);
});

test('the probe bootstrap covers the true mean about 95% of the time and is reproducible', () => {
  let covered = 0;
  const trials = 200;
  const rng = new Random(9);
  for (let t = 0; t < trials; t++) {
    const col = Float64Array.from({ length: 30 }, () => 1 + rng.normal());
    const bs = new ProbeBootstrap(30, 1000, t);
    const r = bs.interval([col], (m) => m[0]);
    if (r.low <= 1 && 1 <= r.high) covered++;
  }
  assert.ok(covered / trials > 0.88 && covered / trials < 0.99, `coverage ${covered / trials}`);
  const c = Float64Array.from({ length: 20 }, (_, i) => i * 0.3);
  assert.deepEqual(new ProbeBootstrap(20, 500, 4).interval([c], (m) => m[0]), new ProbeBootstrap(20, 500, 4).interval([c], (m) => m[0]));
});
