// The match distance and the W prior against outside references:
//  - colour SSIM of grey images equals ssim.js 3.5.0 ('original' Gaussian mode) on the 8-bit
//    values (SSIM is unchanged when values and L are scaled together: v/255 with L = 1);
//  - mean ΔE00 equals colorjs.io 0.7.1's deltaE2000 on its 'lab-d65' coordinates of the same
//    sRGB colours, averaged over pixels;
//  - the Mahalanobis distance equals SciPy's scipy.spatial.distance.mahalanobis with the inverse
//    of NumPy's second-moment matrix (Debian's /usr/bin/python3).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import { ssim as ssimJs } from 'ssim.js';
import Color from 'colorjs.io';
import { MatchTarget, matchFigures, toPlanes, COMPARE_SIZE, FOUND_SSIM, FOUND_DELTA_E, DELTA_E_SCALE } from '../../app/core/search/match.ts';
import { LatentPrior } from '../../app/core/search/latent-prior.ts';
import { Random } from '../../app/core/random.ts';
import type { FloatImage } from '../../app/core/reference-image.ts';

function greyPair(w: number, h: number, seed: number): [number[], number[]] {
  const rng = new Random(seed);
  const a = Array.from({ length: w * h }, (_, i) => Math.round(128 + 100 * Math.sin(i * 0.07) * Math.cos(i * 0.013)));
  const b = a.map((v) => Math.min(255, Math.max(0, Math.round(v + rng.normal() * 12))));
  return [a, b];
}
const greyImage = (g: number[], w: number, h: number): FloatImage => ({ width: w, height: h, data: Float32Array.from(g.flatMap((v) => [v / 255, v / 255, v / 255])) });
const rgbaOf = (g: number[], w: number, h: number) => {
  const data = new Uint8ClampedArray(w * h * 4);
  g.forEach((v, i) => data.set([v, v, v, 255], i * 4));
  return { data, width: w, height: h } as unknown as ImageData;
};

test('report SSIM equals ssim.js on grey images', () => {
  for (const [w, h, seed] of [[40, 32, 1], [64, 64, 2], [33, 50, 3]]) {
    const [a, b] = greyPair(w, h, seed);
    const ref = ssimJs(rgbaOf(a, w, h), rgbaOf(b, w, h), { ssim: 'original', downsample: false }).mssim;
    const ours = matchFigures(greyImage(a, w, h), greyImage(b, w, h)).ssim;
    assert.ok(Math.abs(ours - ref) < 1e-6, `${w}×${h}: ${ours} vs ssim.js ${ref}`);
  }
});

test('report mean ΔE00 equals colorjs.io averaged over pixels', () => {
  const rng = new Random(9);
  const w = 24;
  const h = 20;
  const a = Float32Array.from({ length: w * h * 3 }, () => rng.uniform());
  const b = a.map((v) => Math.min(1, Math.max(0, v + 0.08 * rng.normal())));
  let sum = 0;
  for (let p = 0; p < w * h; p++) {
    // colorjs's deltaE2000 converts to its D50 'lab'; so the D65 coordinates are handed over as Lab values.
    const la = new Color('srgb', [a[p * 3], a[p * 3 + 1], a[p * 3 + 2]]).to('lab-d65').coords as [number, number, number];
    const lb = new Color('srgb', [b[p * 3], b[p * 3 + 1], b[p * 3 + 2]]).to('lab-d65').coords as [number, number, number];
    sum += new Color('lab', la).deltaE2000(new Color('lab', lb));
  }
  const ref = sum / (w * h);
  const ours = matchFigures({ width: w, height: h, data: a }, { width: w, height: h, data: b }).deltaE;
  // colorjs derives its sRGB matrix from rounded published values; ours from the primaries: a few 1e-4 apart.
  assert.ok(Math.abs(ours - ref) < 2e-3, `${ours} vs colorjs ${ref}`);
});

test('search distance: zero for the reference itself, grows with difference, weights as documented', () => {
  const w = 128;
  const h = 128;
  const rng = new Random(4);
  const ref = Float32Array.from({ length: w * h * 3 }, (_, i) => 0.5 + 0.4 * Math.sin(i * 0.001) * Math.cos((i % 384) * 0.05));
  const target = new MatchTarget({ width: w, height: h, data: ref });
  // Float64 sums in a different order for the two sides: 1e-9 of rounding.
  const self = target.terms(toPlanes({ width: w, height: h, data: ref }));
  assert.ok(Math.abs(self.ssim - 1) < 1e-9 && self.deltaE < 1e-9 && self.rmsLow < 1e-9, JSON.stringify(self));
  let last = 0;
  for (const noise of [0.01, 0.03, 0.1]) {
    const b = ref.map((v) => Math.min(1, Math.max(0, v + noise * rng.normal())));
    const t = target.terms(toPlanes({ width: w, height: h, data: b }));
    assert.ok(t.distance > last, `noise ${noise}: ${t.distance} not above ${last}`);
    assert.ok(Math.abs(t.distance - (1 - t.ssim + t.deltaE / DELTA_E_SCALE + t.rmsLow)) < 1e-12);
    last = t.distance;
  }
  // The thresholds give equal 0.05 contributions (the stated rationale for the weights).
  assert.ok(Math.abs(1 - FOUND_SSIM - FOUND_DELTA_E / DELTA_E_SCALE) < 1e-12);
  assert.equal(COMPARE_SIZE, 64);
});

const python = '/usr/bin/python3';
const havePython = existsSync(python) && spawnSync(python, ['-c', 'import numpy, scipy'], { encoding: 'utf8' }).status === 0;

test('Mahalanobis distance and whitening agree with SciPy', { skip: havePython ? false : 'Debian /usr/bin/python3 with numpy and scipy is not available' }, () => {
  const n = 6;
  const m = 500;
  const rng = new Random(11);
  const mix = Array.from({ length: n * n }, () => rng.normal());
  const centre = Float32Array.from({ length: n }, () => rng.normal());
  const centred = new Float32Array(m * n);
  for (let i = 0; i < m; i++) {
    const z = Array.from({ length: n }, () => rng.normal());
    for (let a = 0; a < n; a++) for (let b = 0; b < n; b++) centred[i * n + a] += mix[a * n + b] * z[b];
  }
  const prior = LatentPrior.fromCentredSamples(centre, centred);
  const probes = Array.from({ length: 4 }, () => Float32Array.from({ length: n }, (_, k) => centre[k] + 2 * rng.normal()));
  const code = `
import json, sys, numpy as np
from scipy.spatial.distance import mahalanobis
d = json.load(sys.stdin)
X = np.array(d['centred'], dtype=np.float64).reshape(-1, ${n})
VI = np.linalg.inv(X.T @ X / X.shape[0])
print(json.dumps([mahalanobis(p, d['centre'], VI) for p in d['probes']]))`;
  const r = spawnSync(python, ['-c', code], { input: JSON.stringify({ centred: Array.from(centred), centre: Array.from(centre), probes: probes.map((p) => Array.from(p)) }), encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  const ref = JSON.parse(r.stdout) as number[];
  probes.forEach((p, i) => assert.ok(Math.abs(prior.mahalanobis(p) - ref[i]) < 1e-4 * ref[i], `${prior.mahalanobis(p)} vs SciPy ${ref[i]}`));
  // Round trip: toLatent(toSearch(w)) = w.
  const back = new Float32Array(n);
  prior.toLatent(prior.toSearch(probes[0]), back);
  back.forEach((v, k) => assert.ok(Math.abs(v - probes[0][k]) < 1e-4));
});

test('difference image: black where equal, white at ΔE00 ≥ 10 (white vs black is ΔE00 100, CIE 15 L* range)', async () => {
  const { differenceImage } = await import('../../app/core/search/match.ts');
  const a: FloatImage = { width: 2, height: 1, data: Float32Array.from([0.3, 0.5, 0.7, 1, 1, 1]) };
  const b: FloatImage = { width: 2, height: 1, data: Float32Array.from([0.3, 0.5, 0.7, 0, 0, 0]) };
  const d = differenceImage(a, b);
  assert.deepEqual(Array.from(d.data), [0, 0, 0, 255, 255, 255, 255, 255]);
});
