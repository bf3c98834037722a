// Path-length pieces against outside references:
//  - analytic values on a linear generator G(w) = A·w (mean squared difference: the exact value
//    σ²·mean((A·u)²) per σ-step, and mean((A·(w2 − w1))²) for the published lerp form);
//  - the 1st/99th-percentile filter of the published PPL code (Karras et al. 2019:
//    np.percentile(d, 1, interpolation='lower') … 99 'higher', keep lo ≤ d ≤ hi, mean) against
//    NumPy's percentile with method='lower'/'higher' through /usr/bin/python3;
//  - the colour-aware default sees a pure CIELAB hue rotation (CIE 15 LCh(ab): L* and C* fixed)
//    that brightness-only SSIM barely sees.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { Random } from '../../app/core/random.ts';
import { DEFAULT_PATH_DISTANCE, DISTANCE_EXPONENT, PUBLISHED_PPL_EPSILON, filteredMean, imageDistance, lerpPair, pathLengthUnits, type ImageLayout } from '../../app/core/audit/path-length.ts';
import { runPythonJson, scipySkip } from '../helpers/python.ts';

const H = 16;
const W = 16;
const D = 4;
const size = 3 * H * W;
const geometry: ImageLayout = { height: H, width: W, layout: 'NCHW', range: [-1, 1] };
const rng = new Random(8);
const A = Float32Array.from({ length: size * D }, () => 0.1 * rng.normal());
const render = (w: ArrayLike<number>) => {
  const img = new Float32Array(size);
  for (let k = 0; k < size; k++) for (let j = 0; j < D; j++) img[k] += A[j * size + k] * w[j];
  return img;
};

test('path length on a linear generator equals its analytic value (l2, exponent 2)', () => {
  const u = [0.6, 0.8, 0, 0];
  const sigma = 1.3;
  const eps = 0.01;
  let au2 = 0;
  for (let k = 0; k < size; k++) {
    let v = 0;
    for (let j = 0; j < D; j++) v += A[j * size + k] * u[j];
    au2 += v * v;
  }
  const analytic = (sigma * sigma * au2) / size;
  for (const t of [-2, 0, 1.5]) {
    const w0 = [0.3, -0.2, 0.5, 0.1];
    const a = render(w0.map((v, j) => v + t * sigma * u[j]));
    const b = render(w0.map((v, j) => v + (t + eps) * sigma * u[j]));
    const got = imageDistance('l2', a, 0, b, 0, geometry) / eps ** DISTANCE_EXPONENT.l2;
    // float32 images: relative error of a few 1e-4 at this ε (common practice: fp32 PPL, METHODS §1.3).
    assert.ok(Math.abs(got - analytic) / analytic < 2e-3, `t=${t}: ${got} vs ${analytic}`);
  }
});

test('the published lerp form on a linear generator equals mean((A(w2 − w1))²) at ε = 1e-4', () => {
  const w1 = [0.5, -1, 0.2, 0.7];
  const w2 = [-0.3, 0.4, 1.1, -0.6];
  let exact = 0;
  for (let k = 0; k < size; k++) {
    let v = 0;
    for (let j = 0; j < D; j++) v += A[j * size + k] * (w2[j] - w1[j]);
    exact += v * v;
  }
  exact /= size;
  for (const t of [0, 0.25, 0.9]) {
    const [a, b] = lerpPair(w1, w2, t);
    const got = imageDistance('l2', render(a), 0, render(b), 0, geometry) / PUBLISHED_PPL_EPSILON ** 2;
    // float32 codes and images at ε = 1e-4: a difference of ~1e-4 carries ~1e-3 relative rounding.
    assert.ok(Math.abs(got - exact) / exact < 2e-2, `t=${t}: ${got} vs ${exact}`);
  }
});

test("the 1st/99th-percentile filter equals the published code's with NumPy's percentile", { skip: scipySkip }, () => {
  const r = new Random(4);
  const sets = [50, 100, 101, 333, 2000].map((n) => Array.from({ length: n }, () => Math.exp(2 * r.normal())));
  const ref = runPythonJson<[number, number, number, number][]>(`
import json, sys
import numpy as np
out = []
for d in json.load(sys.stdin):
    d = np.array(d)
    lo = np.percentile(d, 1, method='lower')
    hi = np.percentile(d, 99, method='higher')
    kept = d[np.logical_and(lo <= d, d <= hi)]
    out.append([float(lo), float(hi), float(kept.mean()), int(kept.size)])
print(json.dumps(out))`, sets);
  sets.forEach((d, i) => {
    const got = filteredMean(d);
    assert.deepEqual(got.bounds, [ref[i][0], ref[i][1]], `bounds n=${d.length}`);
    assert.equal(got.kept, ref[i][3]);
    assert.ok(Math.abs(got.mean - ref[i][2]) <= 1e-12 * ref[i][2], `mean n=${d.length}`);
  });
});

test('the colour-aware default sees a hue rotation that luma SSIM barely sees', () => {
  // A 32×32 textured patch; the edit rotates the CIELAB hue of every pixel by 40° (L*, C* fixed).
  assert.equal(DEFAULT_PATH_DISTANCE, 'ssim-lab');
  const n = 32;
  const g: ImageLayout = { height: n, width: n, layout: 'NCHW', range: [0, 1] };
  const r = new Random(2);
  const base = new Float32Array(3 * n * n);
  const rotated = new Float32Array(3 * n * n);
  // Colours chosen in CIELAB and converted with the standard's inverse (CIE 15, sRGB IEC 61966-2-1).
  const labToSrgb = (L: number, a: number, b: number): number[] => {
    const fy = (L + 16) / 116;
    const fx = fy + a / 500;
    const fz = fy - b / 200;
    const inv = (f: number) => (f ** 3 > 216 / 24389 ? f ** 3 : (116 * f - 16) / (24389 / 27));
    const [X, Y, Z] = [0.95047 * inv(fx), inv(fy), 1.08883 * inv(fz)];
    const lin = [3.2404542 * X - 1.5371385 * Y - 0.4985314 * Z, -0.969266 * X + 1.8760108 * Y + 0.041556 * Z, 0.0556434 * X - 0.2040259 * Y + 1.0572252 * Z];
    return lin.map((v) => (v <= 0.0031308 ? 12.92 * v : 1.055 * v ** (1 / 2.4) - 0.055));
  };
  for (let p = 0; p < n * n; p++) {
    const L = 55 + 8 * Math.sin(p * 0.3) + 2 * r.normal();
    const C = 25;
    const h = 0.5 + 0.2 * Math.cos(p * 0.17);
    const [c0, c1] = [labToSrgb(L, C * Math.cos(h), C * Math.sin(h)), labToSrgb(L, C * Math.cos(h + (40 * Math.PI) / 180), C * Math.sin(h + (40 * Math.PI) / 180))];
    for (let c = 0; c < 3; c++) {
      base[c * n * n + p] = c0[c];
      rotated[c * n * n + p] = c1[c];
    }
  }
  const lab = imageDistance('ssim-lab', base, 0, rotated, 0, g);
  const luma = imageDistance('ssim', base, 0, rotated, 0, g);
  assert.ok(lab > 10 * luma, `ssim-lab ${lab} vs luma ssim ${luma}`);
  assert.match(pathLengthUnits('ssim-lab'), /per σ²/);
  assert.match(pathLengthUnits('ciede2000'), /mean ΔE00 per σ$/);
});
