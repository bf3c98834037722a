// Defined attributes (issue 9 part 5) against outside references: the AUC against SciPy's
// Mann–Whitney U (scipy.stats.mannwhitneyu, U/(n₁n₂)), the logistic-regression coefficients
// against scipy.optimize.minimize on the same objective, ridge against numpy.linalg.solve of the
// normal equations, the cross-validated R² against NumPy refitting the same folds, and the HOG
// block of a 16×16 image worked out by hand from Dalal & Triggs' (2005) definition.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { Random } from '../../app/core/random.ts';
import { auc, assignFolds, crossValidate, fitDefinedAttribute, fitStandardisation, logisticObjective, logisticRegression, ridgeRegression, rSquared, AUC_FLOOR, LOGISTIC_LAMBDA, RIDGE_LAMBDA } from '../../app/core/attributes/fit.ts';
import { colourHistograms, describeImage, descriptorNames, descriptorSpec, hogDescriptor, labPlanes, resampleArea, subjectMask, type MeasureSource } from '../../app/core/attributes/descriptor.ts';

const PYTHON = '/usr/bin/python3';
const probe = existsSync(PYTHON) ? spawnSync(PYTHON, ['-c', 'import numpy, scipy; print(scipy.__version__)'], { encoding: 'utf8' }) : null;
const skip = probe?.status === 0 ? false : `${PYTHON} with numpy and scipy is not available here (${probe ? (probe.stderr || '').trim().split('\n').pop() : 'no such file'})`;

/** Runs Python with a JSON document on stdin; returns its JSON stdout. */
function python(code: string, input: unknown): any {
  const r = spawnSync(PYTHON, ['-c', code], { input: JSON.stringify(input), encoding: 'utf8', maxBuffer: 64 << 20 });
  assert.equal(r.status, 0, r.stderr);
  return JSON.parse(r.stdout);
}

/** Fixed data: n rows of d normal features, a planted linear signal in the first two. */
function data(n: number, d: number, seed: number) {
  const rng = new Random(seed);
  const X = Array.from({ length: n }, () => Array.from({ length: d }, () => rng.normal()));
  const score = X.map((r) => 1.5 * r[0] - r[1] + 0.8 * rng.normal());
  return { X, score, rng };
}

test('AUC equals U/(n1·n2) from scipy.stats.mannwhitneyu, ties included', { skip }, () => {
  const rng = new Random(5);
  // Scores rounded to one decimal so ties occur between and within classes.
  const pos = Array.from({ length: 23 }, () => Math.round((rng.normal() + 0.7) * 10) / 10);
  const neg = Array.from({ length: 31 }, () => Math.round(rng.normal() * 10) / 10);
  const ref = python('import json,sys\nfrom scipy.stats import mannwhitneyu\nd=json.load(sys.stdin)\nr=mannwhitneyu(d["p"], d["n"], alternative="two-sided")\nprint(json.dumps(r.statistic/(len(d["p"])*len(d["n"]))))', { p: pos, n: neg });
  const mine = auc([...pos, ...neg], [...pos.map(() => true), ...neg.map(() => false)]);
  assert.ok(Math.abs(mine - ref) < 1e-12, `${mine} vs scipy ${ref}`);
  // Definition checks that need no library: perfect order 1, reversed 0, all tied ½.
  assert.equal(auc([1, 2, 3, 4], [false, false, true, true]), 1);
  assert.equal(auc([4, 3, 2, 1], [false, false, true, true]), 0);
  assert.equal(auc([7, 7, 7, 7], [false, true, false, true]), 0.5);
});

test('logistic regression: the coefficients scipy.optimize.minimize finds for the same L2 objective', { skip }, () => {
  for (const [n, d] of [[60, 5], [30, 45]] as const) {
    const { X, score } = data(n, d, 11 + d);
    const y = score.map((s) => (s > 0 ? 1 : 0));
    const m = logisticRegression(X, y, LOGISTIC_LAMBDA);
    // The same objective written independently in NumPy, minimised by BFGS with its analytic gradient.
    const ref = python(
      `import json,sys
import numpy as np
from scipy.optimize import minimize
d=json.load(sys.stdin); X=np.array(d["X"]); y=np.array(d["y"],float); lam=d["lam"]
def f(t):
    w=t[:-1]; z=X@w+t[-1]
    return np.sum(np.logaddexp(0,z)-y*z)+lam/2*w@w
def g(t):
    w=t[:-1]; p=1/(1+np.exp(-(X@w+t[-1])))
    return np.concatenate([X.T@(p-y)+lam*w,[np.sum(p-y)]])
r=minimize(f,np.zeros(X.shape[1]+1),jac=g,method="BFGS",options={"gtol":1e-10,"maxiter":10000})
print(json.dumps({"t":r.x.tolist(),"f":float(r.fun)}))`,
      { X, y, lam: LOGISTIC_LAMBDA },
    );
    const t: number[] = ref.t;
    const worst = Math.max(...t.slice(0, -1).map((v, j) => Math.abs(v - m.weights[j])), Math.abs(t.at(-1)! - m.intercept));
    assert.ok(worst < 1e-5, `n=${n} d=${d}: largest coefficient difference ${worst}`);
    assert.ok(logisticObjective(X, y, m, LOGISTIC_LAMBDA) <= ref.f + 1e-9, 'Newton reaches at least scipy’s minimum');
  }
});

test('ridge regression: numpy.linalg.solve of the normal equations with an unpenalised intercept (n > d and n < d)', { skip }, () => {
  for (const [n, d] of [[50, 6], [20, 60]] as const) {
    const { X, score } = data(n, d, 40 + d);
    const y = score.map((s) => 3 + 2 * s);
    const m = ridgeRegression(X, y, RIDGE_LAMBDA);
    const ref: number[] = python(
      `import json,sys
import numpy as np
d=json.load(sys.stdin); X=np.array(d["X"]); y=np.array(d["y"]); lam=d["lam"]
A=np.hstack([X,np.ones((X.shape[0],1))]); P=lam*np.eye(A.shape[1]); P[-1,-1]=0
print(json.dumps(np.linalg.solve(A.T@A+P,A.T@y).tolist()))`,
      { X, y, lam: RIDGE_LAMBDA },
    );
    const worst = Math.max(...ref.slice(0, -1).map((v, j) => Math.abs(v - m.weights[j])), Math.abs(ref.at(-1)! - m.intercept));
    assert.ok(worst < 1e-8, `n=${n} d=${d}: largest coefficient difference ${worst}`);
  }
});

test('cross-validated R²: NumPy refitting standardisation and ridge on the same folds gives the same pooled and per-fold R²', { skip }, () => {
  const { X, score } = data(45, 8, 77);
  const y = score.map((s) => 10 + 3 * s);
  const cv = crossValidate(X, y, 'ratings', 5, 3);
  const fold = Array.from(assignFolds(new Float64Array(45), 5, 3));
  const ref = python(
    `import json,sys
import numpy as np
d=json.load(sys.stdin); X=np.array(d["X"]); y=np.array(d["y"]); f=np.array(d["fold"]); lam=d["lam"]
oof=np.zeros(len(y)); per=[]
for k in range(5):
    tr=f!=k; te=f==k
    mu=X[tr].mean(0); sd=X[tr].std(0)
    Z=(X[tr]-mu)/sd; A=np.hstack([Z,np.ones((tr.sum(),1))]); P=lam*np.eye(A.shape[1]); P[-1,-1]=0
    beta=np.linalg.solve(A.T@A+P,A.T@y[tr])
    oof[te]=((X[te]-mu)/sd)@beta[:-1]+beta[-1]
    per.append(1-np.sum((y[te]-oof[te])**2)/np.sum((y[te]-y[te].mean())**2))
print(json.dumps({"r2":1-np.sum((y-oof)**2)/np.sum((y-y.mean())**2),"per":per}))`,
    { X, y, fold, lam: RIDGE_LAMBDA },
  );
  assert.ok(Math.abs(cv.value - ref.r2) < 1e-9, `${cv.value} vs numpy ${ref.r2}`);
  cv.perFold.forEach((v, k) => assert.ok(Math.abs(v - ref.per[k]) < 1e-9, `fold ${k}`));
  // Standardisation is the population (ddof = 0) mean and SD, as NumPy's default.
  const s = fitStandardisation(X);
  const np = python('import json,sys\nimport numpy as np\nX=np.array(json.load(sys.stdin))\nprint(json.dumps([X.mean(0).tolist(),X.std(0).tolist()]))', X);
  s.mean.forEach((v, j) => assert.ok(Math.abs(v - np[0][j]) < 1e-12 && Math.abs(s.std[j] - np[1][j]) < 1e-12));
});

test('folds: deterministic from the seed, stratified, different for another seed', () => {
  const labels = Array.from({ length: 37 }, (_, i) => (i < 12 ? 1 : 0));
  const a = assignFolds(labels, 5, 9);
  assert.deepEqual(a, assignFolds(labels, 5, 9));
  assert.notDeepEqual(a, assignFolds(labels, 5, 10));
  for (let f = 0; f < 5; f++) {
    const inFold = labels.filter((_, i) => a[i] === f);
    const pos = inFold.filter((v) => v === 1).length;
    // 12 positives over 5 folds: 2 or 3 each; 25 negatives: 5 each (round-robin dealing).
    assert.ok(pos === 2 || pos === 3, `fold ${f} has ${pos} positives`);
    assert.ok(inFold.length - pos >= 4 && inFold.length - pos <= 6);
  }
  assert.equal(rSquared([1, 2, 3], [1, 2, 3]), 1);
  assert.equal(rSquared([1, 2, 3], [2, 2, 2]), 0);
});

test('the floor: planted tags are accepted, coin-flip tags are refused with the reason; few examples are flagged noisy', () => {
  const { X, score, rng } = data(80, 10, 123);
  const planted = fitDefinedAttribute('planted', X, score.map((s) => (s > 0 ? 1 : 0)), 'tags', 1);
  assert.equal(planted.refused, null);
  assert.ok(planted.accuracy.value > 0.85, `planted AUC ${planted.accuracy.value}`);
  assert.equal(planted.accuracy.noisy, false);
  const coin = fitDefinedAttribute('coin', X, X.map(() => (rng.uniform() < 0.5 ? 1 : 0)), 'tags', 1);
  assert.ok(coin.accuracy.value < AUC_FLOOR, `coin AUC ${coin.accuracy.value}`);
  assert.match(coin.refused!, /cross-validated AUC 0\.\d{3} over 5 folds is below the floor 0\.75/);
  const few = fitDefinedAttribute('few', X.slice(0, 24), score.slice(0, 24).map((s) => (s > 0 ? 1 : 0)), 'tags', 1);
  assert.equal(few.accuracy.noisy, true);
  assert.match(few.accuracy.note!, /fewer than 20 per class/);
  const rated = fitDefinedAttribute('rated', X, score, 'ratings', 1);
  assert.equal(rated.accuracy.metric, 'r2');
  assert.ok(rated.accuracy.value > 0.5 && rated.refused === null, `R² ${rated.accuracy.value}`);
  assert.throws(() => fitDefinedAttribute('lonely', X.slice(0, 5), [1, 0, 0, 0, 0], 'tags'), /at least 2 seeds that have it/);
  assert.throws(() => fitDefinedAttribute('flat', X.slice(0, 5), [3, 3, 3, 3, 3], 'ratings'), /every rating is the same/);
});

// The worked HOG example (derived by hand from the definition in descriptor.ts / Dalal & Triggs
// 2005). A 16×16 image, 1 in the top-right quadrant (x ≥ 8, y < 8) and 0 elsewhere; 8-px cells,
// one 2×2-cell block, 9 bins centred at 10°, 30°, …, 170°.
//  Gradients (centred difference, zero on the border rows/columns of each axis):
//   x = 7,  y = 0…7:  gx = +1, gy = 0  → 0°,   votes ½ to bin 0 (10°) and ½ to bin 8 (170°)
//   x = 8,  y = 0…6:  gx = +1, gy = 0  → 0°,   same split
//   x = 8,  y = 7:    gx = +1, gy = −1 → 135°, magnitude √2: ¾ to bin 6 (130°), ¼ to bin 7 (150°)
//   x = 9…15, y = 7:  gx = 0,  gy = −1 → 90°,  all to bin 4 (90°)
//   x = 8…15, y = 8:  gx = 0,  gy = −1 → 90°,  all to bin 4
//  Cells (row-major): (0,0) bins 0 and 8 = 4 each; (0,1) bins 0 and 8 = 3.5 each, bin 4 = 7,
//  bin 6 = ¾√2, bin 7 = ¼√2; (1,0) empty; (1,1) bin 4 = 8.
//  ‖v‖² = 2·16 + 2·12.25 + 49 + (9/16)·2 + (1/16)·2 + 64 = 170.75. After dividing by ‖v‖ every
//  whole-number vote exceeds 0.2 (3.5/√170.75 = 0.268) and is clipped to 0.2; ¾√2/‖v‖ and ¼√2/‖v‖
//  are not. Renormalised: 0.2/r, (¾√2/‖v‖)/r, (¼√2/‖v‖)/r with r² = 6·0.04 + (1.125 + 0.125)/170.75.
test('HOG of the hand-worked 16×16 quadrant image', () => {
  const img = new Float64Array(256);
  for (let y = 0; y < 8; y++) for (let x = 8; x < 16; x++) img[y * 16 + x] = 1;
  const h = hogDescriptor(img, 16, 16, { cell: 8, bins: 9, blockCells: 2, stride: 1, clip: 0.2, epsilon: 0 });
  const norm = Math.sqrt(170.75);
  const a = (0.75 * Math.SQRT2) / norm;
  const b = (0.25 * Math.SQRT2) / norm;
  const r = Math.sqrt(6 * 0.04 + a * a + b * b);
  const expected = new Array(36).fill(0);
  for (const i of [0, 8, 9, 9 + 4, 9 + 8, 27 + 4]) expected[i] = 0.2 / r;
  expected[9 + 6] = a / r;
  expected[9 + 7] = b / r;
  assert.equal(h.length, 36);
  h.forEach((v, i) => assert.ok(Math.abs(v - expected[i]) < 1e-12, `value ${i}: ${v} vs ${expected[i]}`));
  // Hand values to 4 decimals: 0.4022 (clipped), 0.1632 and 0.0544.
  assert.ok(Math.abs(h[0] - 0.4022) < 1e-4 && Math.abs(h[15] - 0.1632) < 1e-4 && Math.abs(h[16] - 0.0544) < 1e-4);
  // A flat image has no gradient: all zeros (the ε keeps the division defined).
  assert.ok(hogDescriptor(new Float64Array(256).fill(0.3), 16, 16, { cell: 8, bins: 9, blockCells: 2, stride: 1, clip: 0.2, epsilon: 1e-5 }).every((v) => v === 0));
});

test('area resampling is a box mean for integer factors and preserves the mean for others', () => {
  const src = Float64Array.from({ length: 64 }, (_, i) => i);
  const half = resampleArea(src, 8, 8, 4);
  assert.equal(half[0], (0 + 1 + 8 + 9) / 4);
  const odd = resampleArea(src, 8, 8, 3);
  const mean = (a: Float64Array) => a.reduce((s, v) => s + v, 0) / a.length;
  assert.ok(Math.abs(mean(odd) - mean(src)) < 1e-9);
});

test('colour histograms: subject and background split by the border ΔE*ab, each summing to 1 per channel', () => {
  // 10×10 mid-grey ground with a 4×4 pure red (sRGB 255,0,0) square: CIELAB L* 53.24, a* 80.09,
  // b* 67.20 (CIE 15 / IEC 61966-2-1; widely tabulated values, from memory).
  const w = 10;
  const data = new Uint8ClampedArray(w * w * 4);
  for (let p = 0; p < w * w; p++) {
    const x = p % w;
    const y = Math.floor(p / w);
    data.set(x >= 3 && x < 7 && y >= 3 && y < 7 ? [255, 0, 0, 255] : [128, 128, 128, 255], p * 4);
  }
  const img = { width: w, height: w, data };
  const lab = labPlanes(img);
  assert.ok(Math.abs(lab.L[33] - 53.24) < 0.01 && Math.abs(lab.a[33] - 80.09) < 0.01 && Math.abs(lab.b[33] - 67.2) < 0.01);
  const mask = subjectMask(lab, w, w);
  assert.equal(mask.reduce((s, v) => s + v, 0), 16);
  const subj = colourHistograms(lab, mask, 1);
  // L* 53.24 → bin ⌊53.24/12.5⌋ = 4; a* 80.09 ≥ 80 → last bin 7; b* 67.2 → ⌊(67.2+80)/20⌋ = 7.
  assert.deepEqual([subj[4], subj[8 + 7], subj[16 + 7]], [1, 1, 1]);
  const bg = colourHistograms(lab, mask, 0);
  // Grey 128: L* ≈ 53.6 → bin 4; a* = b* = 0 → bin 4 (range −80…80 in 20-wide bins).
  assert.deepEqual([bg[4], bg[8 + 4], bg[16 + 4]], [1, 1, 1]);
  // The whole descriptor: measures first (circular ones as cos, sin), then histograms, then HOG.
  const source: MeasureSource = { names: ['m', 'angle'], periods: [undefined, 180], measure: () => [2.5, 45] };
  const spec = descriptorSpec(source);
  const v = describeImage(img, source, spec);
  assert.equal(v.length, spec.length);
  assert.equal(descriptorNames(spec).length, spec.length);
  // 2 measures (one circular: 3 values), 48 histogram, 16 contrast, 12 radial, 324 HOG values.
  assert.equal(spec.length, 3 + 48 + 16 + 12 + 324);
  assert.ok(Math.abs(v[1] - Math.cos(Math.PI / 2)) < 1e-12 && Math.abs(v[2] - 1) < 1e-12);
});

test('subject mask: a dark frame and a thin ring are not the subject; a background-coloured inset is', () => {
  // 64×64 mid-grey card, a 3-px near-black frame touching the border, a 1-px green ring of radius
  // 25 (its filled extent, π·25² ≈ 1963 px, is 48% of the image: more than the 45% a subject may
  // enclose), and a red disc of radius 8 with a grey (background-coloured) hole of radius 3.
  const w = 64;
  const data = new Uint8ClampedArray(w * w * 4);
  const inDisc = (x: number, y: number) => Math.hypot(x - 32, y - 32) <= 8;
  for (let y = 0; y < w; y++)
    for (let x = 0; x < w; x++) {
      const r = Math.hypot(x - 32, y - 32);
      let c = [128, 128, 128];
      if (x < 3 || y < 3 || x >= w - 3 || y >= w - 3) c = [20, 20, 20];
      else if (Math.abs(r - 25) < 0.5) c = [40, 200, 60];
      else if (inDisc(x, y) && r > 3) c = [220, 30, 30];
      data.set([...c, 255], (y * w + x) * 4);
    }
  const mask = subjectMask(labPlanes({ width: w, height: w, data }), w, w);
  let expected = 0;
  for (let p = 0; p < w * w; p++) {
    const want = inDisc(p % w, Math.floor(p / w)) ? 1 : 0;
    expected += want;
    assert.equal(mask[p], want, `pixel (${p % w}, ${Math.floor(p / w)})`);
  }
  assert.ok(expected > 190, 'the disc, hole included');
});
