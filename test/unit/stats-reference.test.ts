// Statistics against SciPy/NumPy run through Debian's /usr/bin/python3 (outside references):
//  - Clopper–Pearson bounds against scipy.stats.binomtest(x, n).proportion_ci(method='exact')
//    over a grid of x and n;
//  - the Beta quantile against scipy.stats.beta.ppf;
//  - NumPy's percentile with method='lower' / 'higher' (the 1st/99th-percentile filter of the
//    published PPL code, METHODS §1.2);
//  - BCa intervals of ProbeBootstrap against scipy.stats.bootstrap(method='BCa') on fixed data.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Random } from '../../app/core/random.ts';
import { ProbeBootstrap, betaQuantile, clopperPearson, percentileRank, percentileSorted } from '../../app/core/stats.ts';
import { runPythonJson, scipySkip, scipyVersions } from '../helpers/python.ts';

test(`Clopper–Pearson bounds equal SciPy's binomtest exact interval (${scipyVersions ?? 'SciPy missing'})`, { skip: scipySkip }, () => {
  const cases: [number, number][] = [];
  for (const n of [1, 2, 3, 5, 10, 17, 30, 48, 64, 100, 128, 500, 2000]) for (const x of new Set([0, 1, 2, 3, Math.floor(n / 3), Math.floor(n / 2), n - 2, n - 1, n])) if (x >= 0 && x <= n) cases.push([x, n]);
  const ref = runPythonJson<[number, number][][]>(`
import json, sys
from scipy.stats import binomtest
cases = json.load(sys.stdin)
out = []
for conf in (0.95, 0.9, 0.99):
    row = []
    for x, n in cases:
        ci = binomtest(x, n).proportion_ci(confidence_level=conf, method='exact')
        row.append([ci.low, ci.high])
    out.append(row)
print(json.dumps(out))`, cases);
  [0.95, 0.9, 0.99].forEach((conf, c) =>
    cases.forEach(([x, n], i) => {
      const got = clopperPearson(x, n, conf);
      // Agreement to 1e-9 absolute: both solve the same Beta quantile to near machine precision.
      assert.ok(Math.abs(got.low - ref[c][i][0]) < 1e-9 && Math.abs(got.high - ref[c][i][1]) < 1e-9, `x=${x} n=${n} conf=${conf}: ours [${got.low}, ${got.high}] SciPy [${ref[c][i]}]`);
    }),
  );
  // Rule of three (common practice): with 0 of n, the two-sided 95% upper bound is 1 − 0.025^{1/n} ≈ 3.7/n.
  assert.ok(Math.abs(clopperPearson(0, 48).high - (1 - 0.025 ** (1 / 48))) < 1e-12);
  assert.throws(() => clopperPearson(3, 2), /0 ≤ x ≤ n/);
});

test('Beta quantiles equal scipy.stats.beta.ppf', { skip: scipySkip }, () => {
  const cases: [number, number, number][] = [[0.025, 1, 47], [0.975, 5, 44], [0.5, 0.5, 0.5], [0.001, 200, 3], [0.999, 2, 2000], [0.3, 30.5, 12.25]];
  const ref = runPythonJson<number[]>(`
import json, sys
from scipy.stats import beta
print(json.dumps([beta.ppf(p, a, b) for p, a, b in json.load(sys.stdin)]))`, cases);
  cases.forEach(([p, a, b], i) => assert.ok(Math.abs(betaQuantile(p, a, b) - ref[i]) < 1e-10, `B(${p}; ${a}, ${b}) ours ${betaQuantile(p, a, b)} SciPy ${ref[i]}`));
});

test("percentile 'lower' / 'higher' equal NumPy's", { skip: scipySkip }, () => {
  const rng = new Random(5);
  const sets = [3, 7, 10, 99, 100, 101, 257, 1000].map((n) => Array.from({ length: n }, () => rng.normal()).sort((a, b) => a - b));
  const percents = [0, 1, 2.5, 50, 97.5, 99, 100];
  const ref = runPythonJson<number[][][]>(`
import json, sys
import numpy as np
sets, percents = json.load(sys.stdin)
print(json.dumps([[[float(np.percentile(np.array(s), p, method=m)) for p in percents] for m in ('lower', 'higher')] for s in sets]))`, [sets, percents]);
  sets.forEach((s, i) =>
    (['lower', 'higher'] as const).forEach((m, k) => percents.forEach((p, j) => assert.equal(percentileSorted(s, p, m), ref[i][k][j], `n=${s.length} ${m} ${p}%`))),
  );
});

test("percentile rank equals SciPy's percentileofscore(kind='mean')", { skip: scipySkip }, () => {
  const sample = [0.1, 0.5, 0.5, 0.9, 1.2, 3, 3, 3, 7, 8];
  const values = [-1, 0.5, 1, 3, 8, 9];
  const ref = runPythonJson<number[]>(`
import json, sys
from scipy.stats import percentileofscore
s, v = json.load(sys.stdin)
print(json.dumps([float(percentileofscore(s, x, kind='mean')) for x in v]))`, [sample, values]);
  values.forEach((v, i) => assert.ok(Math.abs(percentileRank(sample, v) - ref[i]) < 1e-12, `${v}: ${percentileRank(sample, v)} vs ${ref[i]}`));
});

test('BCa intervals agree with scipy.stats.bootstrap(method="BCa") within Monte Carlo error', { skip: scipySkip }, () => {
  // Fixed skewed data (exponential and a correlated second column), 40 probes.
  const rng = new Random(77);
  const n = 40;
  const x = Array.from({ length: n }, () => -Math.log(1 - rng.uniform()));
  const y = x.map((v) => 0.5 * v + 0.3 + 0.4 * Math.abs(rng.normal()));
  const B = 20_000;
  // SciPy's own spread over 8 seeds gives the Monte Carlo standard deviation of each endpoint.
  const ref = runPythonJson<{ mean: number[][]; ratio: number[][] }>(`
import json, sys
import numpy as np
from scipy.stats import bootstrap
x, y, B = json.load(sys.stdin)
x = np.array(x); y = np.array(y)
out = {'mean': [], 'ratio': []}
for seed in range(8):
    rs = np.random.RandomState(seed)
    m = bootstrap((x,), np.mean, n_resamples=B, method='BCa', confidence_level=0.95, random_state=rs).confidence_interval
    out['mean'].append([m.low, m.high])
    r = bootstrap((x, y), lambda a, b, axis=-1: np.mean(b, axis=axis) / np.mean(a, axis=axis), paired=True, vectorized=True, n_resamples=B, method='BCa', confidence_level=0.95, random_state=rs).confidence_interval
    out['ratio'].append([r.low, r.high])
print(json.dumps(out))`, [x, y, B]);
  const boot = new ProbeBootstrap(n, B, 3);
  const ours = {
    mean: boot.interval([Float64Array.from(x)], (m) => m[0]),
    ratio: boot.interval([Float64Array.from(x), Float64Array.from(y)], (m) => m[1] / m[0]),
  };
  for (const key of ['mean', 'ratio'] as const) {
    for (const [end, k] of [['low', 0], ['high', 1]] as const) {
      const vals = ref[key].map((r) => r[k]);
      const centre = vals.reduce((a, b) => a + b, 0) / vals.length;
      const sd = Math.sqrt(vals.reduce((a, b) => a + (b - centre) ** 2, 0) / (vals.length - 1));
      // Tolerance: our endpoint and SciPy's are two independent Monte Carlo estimates of the same
      // BCa endpoint, so their difference has SD ≈ √2·sd; 4·√2·sd is exceeded by chance with
      // probability < 1e-4 (normal tails). A floor of 0.2 % of the endpoint covers an unluckily
      // small spread among only 8 seeds.
      const tolerance = Math.max(4 * Math.SQRT2 * sd, 0.002 * Math.abs(centre));
      const got = ours[key][end];
      console.log(`BCa ${key} ${end}: ours ${got.toFixed(5)}, SciPy mean of 8 seeds ${centre.toFixed(5)}, MC sd ${sd.toExponential(2)}, tolerance ${tolerance.toExponential(2)}`);
      assert.ok(Math.abs(got - centre) < tolerance, `${key} ${end}: ours ${got}, SciPy ${centre} ± ${sd} (tolerance ${tolerance})`);
    }
  }
});
