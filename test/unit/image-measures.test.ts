// Image measures against outside references: ssim.js 3.5.0 in its Gaussian ('original') mode and
// Wang et al. (2004) constants; check values of METHODS §5.3–5.6 for SSIM, colourfulness
// (Hasler & Süsstrunk 2003), variance of the Laplacian and image moments.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { ssim as ssimJs } from 'ssim.js';
import { ssim } from '../../app/core/ssim.ts';
import { colourfulness, imageMoments, laplacianVariance, measureImage, IMAGE_MEASURES } from '../../app/core/scorers/measures.ts';
import { Random } from '../../app/core/random.ts';

// The METHODS §5.3 check pair: I1[y][x] = (11x + 7y) mod 256; I2 = clamp(I1 + 3·((x + 2y) mod 7) − 9).
const W = 24;
const I1 = Array.from({ length: W * W }, (_, i) => (11 * (i % W) + 7 * Math.floor(i / W)) % 256);
const I2 = I1.map((v, i) => Math.min(255, Math.max(0, v + 3 * (((i % W) + 2 * Math.floor(i / W)) % 7) - 9)));
const rgbaOf = (g: number[], w: number, h: number) => {
  const data = new Uint8ClampedArray(w * h * 4);
  g.forEach((v, i) => data.set([v, v, v, 255], i * 4));
  return { data, width: w, height: h, colorSpace: 'srgb' } as unknown as ImageData;
};

test('SSIM of the METHODS check pair: 0.97549740 (Gaussian) and 0.99458869 (11×11 box)', () => {
  assert.deepEqual(I2.slice(0, 11), [0, 5, 19, 33, 47, 61, 75, 68, 82, 96, 110]);
  assert.ok(Math.abs(ssim(I1, I2, W, W) - 0.9754974) < 1e-6);
  assert.ok(Math.abs(ssim(I1, I2, W, W, { window: 'box' }) - 0.99458869) < 1e-6);
});

test('SSIM agrees with ssim.js (Gaussian mode) on constructed pairs', () => {
  const rng = new Random(3);
  for (let t = 0; t < 6; t++) {
    const w = 32 + t * 8;
    const h = 28 + t * 4;
    const a = Array.from({ length: w * h }, (_, i) => Math.round(128 + 100 * Math.sin(i * 0.05 * (t + 1)) * Math.cos(i * 0.011)));
    const b = a.map((v) => Math.min(255, Math.max(0, Math.round(v + rng.normal() * (5 + 5 * t)))));
    const ref = ssimJs(rgbaOf(a, w, h), rgbaOf(b, w, h), { ssim: 'original', downsample: false }).mssim;
    assert.ok(Math.abs(ssim(a, b, w, h) - ref) < 1e-6, `pair ${t}: ${ssim(a, b, w, h)} vs ssim.js ${ref}`);
  }
  assert.equal(ssim(I1, I1, W, W), 1);
});

test('colourfulness: {red, blue} = 272.618694 (population SD), grey = 0', () => {
  const two = { width: 2, height: 1, data: new Uint8ClampedArray([255, 0, 0, 255, 0, 0, 255, 255]) };
  assert.ok(Math.abs(colourfulness(two) - 272.618694) < 1e-6);
  const grey = { width: 4, height: 4, data: new Uint8ClampedArray(64).fill(128) };
  assert.equal(colourfulness(grey), 0);
});

test('variance of the Laplacian of I1: 16789.095827 interior, 16712.469136 with reflect-101 borders', () => {
  assert.ok(Math.abs(laplacianVariance(I1, W, W, 'interior') - 16789.095827) < 1e-6);
  assert.ok(Math.abs(laplacianVariance(I1, W, W, 'reflect101') - 16712.469136) < 1e-6);
});

test('image moments of the METHODS §5.6 masks', () => {
  const mask = (f: (x: number, y: number) => boolean) => Array.from({ length: 64 }, (_, i) => (f(i % 8, Math.floor(i / 8)) ? 1 : 0));
  const rect = imageMoments(mask((x, y) => x >= 1 && x <= 6 && y >= 3 && y <= 4), 8, 8);
  assert.deepEqual([rect.m00, rect.cx, rect.cy, rect.mu20, rect.mu02, rect.mu11, rect.theta], [12, 3.5, 3.5, 35, 3, 0, 0]);
  const diag = imageMoments(mask((x, y) => x === y), 8, 8);
  assert.deepEqual([diag.mu20, diag.mu02, diag.mu11, diag.theta], [42, 42, 42, 45]);
  assert.equal(imageMoments(mask((x, y) => x + y === 7), 8, 8).theta, -45);
  const L = imageMoments(mask((x, y) => (x === 1 && y >= 1 && y <= 5) || (y === 5 && x >= 1 && x <= 4)), 8, 8);
  assert.deepEqual([L.m00, L.cx, L.cy, L.mu20, L.mu02, L.mu11], [8, 1.75, 3.75, 9.5, 17.5, 7.5]);
  assert.ok(Math.abs(L.theta - 59.036243) < 1e-6);
});

test('the built-in measures see a drawn subject: size, centroid, orientation and colours', () => {
  // A 40×20 orange rectangle on a grey 64×64 canvas, offset to the right. Expected values are the
  // rectangle's own geometry (area 800 px², centroid (40, 32) in pixel-centre coordinates + ½).
  const w = 64;
  const data = new Uint8ClampedArray(w * w * 4);
  for (let y = 0; y < w; y++)
    for (let x = 0; x < w; x++) {
      const inside = x >= 20 && x < 60 && y >= 22 && y < 42;
      data.set(inside ? [230, 120, 30, 255] : [90, 90, 90, 255], (y * w + x) * 4);
    }
  const m = measureImage({ width: w, height: w, data });
  const get = (n: string) => m[IMAGE_MEASURES.findIndex((x) => x.name === n)];
  assert.ok(Math.abs(get('subject_radius') - Math.sqrt(800 / Math.PI) / 64) < 1e-9, `radius ${get('subject_radius')}`);
  assert.ok(Math.abs(get('subject_x') - 40 / 64) < 1e-9);
  assert.ok(Math.abs(get('subject_y') - 32 / 64) < 1e-9);
  assert.equal(get('shape_fold'), 2, 'a 2:1 rectangle is two-fold');
  assert.ok(Math.abs(get('orientation')) < 1e-9, 'wide rectangle lies along x');
  // Principal variances of a w×h block of pixels are (w² − 1)/12 and (h² − 1)/12 (variance of a
  // discrete uniform distribution, textbook): elongation 1 − 399/1599.
  assert.ok(Math.abs(get('shape_elongation') - (1 - 399 / 1599)) < 1e-9);
  assert.ok(get('subject_chroma') > 50 && get('background_chroma') < 1);
  assert.ok(Number.isNaN(get('background_hue')), 'a grey background has no hue');
  assert.ok(get('subject_hue') > 40 && get('subject_hue') < 80, `orange hue ${get('subject_hue')}`);
  assert.ok(Math.abs(get('symmetry') - 1) < 1e-9, 'a rectangle is mirror-symmetric about its own axes');
});
