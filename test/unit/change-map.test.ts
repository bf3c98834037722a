// Change maps and consistency across seeds (METHODS §9.3) on worked synthetic cases whose answer
// is known by counting pixels: a hard-edged 20×20 square on a 64×64 canvas has an interior (eroded
// 2 px) of 16×16 = 256 px, an edge band out to 5 px beyond it of 30×30 − 256 = 644 px and a
// background of 4096 − 900 = 3196 px. The per-pixel ΔE00 is checked against colorjs.io's
// deltaE2000 (Sharma, Wu & Dalal 2005) given the CIELAB (D65) coordinates of the same 8-bit colours.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import Color from 'colorjs.io';
import { ChangeMapAccumulator, changeMapImage, consistencyAcrossProbes } from '../../app/core/audit/change-map.ts';
import type { RgbaImage } from '../../app/core/image.ts';

const N = 64;
function squareImage(subject: number[], background: number[]): RgbaImage {
  const data = new Uint8ClampedArray(N * N * 4);
  for (let y = 0; y < N; y++)
    for (let x = 0; x < N; x++) data.set([...(x >= 22 && x < 42 && y >= 20 && y < 40 ? subject : background), 255], (y * N + x) * 4);
  return { width: N, height: N, data };
}

/** CIEDE2000 by colorjs.io on D65 CIELAB coordinates (its own 'lab' space is D50, so the coordinates are passed through it unchanged). */
function referenceDeltaE00(a: number[], b: number[]): number {
  const lab = (c: number[]) => new Color('lab', new Color('srgb', c.map((v) => v / 255) as [number, number, number]).to('lab-d65').coords.map((v) => v ?? 0) as [number, number, number]);
  return lab(a).deltaE2000(lab(b));
}

const RED = [200, 40, 30];
const ORANGE = [220, 130, 30];

test('a background-only change: the map is the colour difference there, and the background holds 3196 of 3696 changed pixels', () => {
  const acc = new ChangeMapAccumulator();
  acc.add(squareImage(RED, [128, 128, 128]), squareImage(RED, [150, 150, 150]));
  acc.add(squareImage(RED, [128, 128, 128]), squareImage(RED, [100, 100, 100]));
  const s = acc.summary();
  const d1 = referenceDeltaE00([128, 128, 128], [150, 150, 150]);
  const d2 = referenceDeltaE00([128, 128, 128], [100, 100, 100]);
  assert.equal(s.probes, 2);
  assert.ok(Math.abs(s.map[0] - (d1 + d2) / 2) < 1e-4, `map ${s.map[0]} vs colorjs ${(d1 + d2) / 2}`);
  assert.equal(s.map[30 * N + 32], 0, 'the subject did not change');
  // Changed pixels: 3196 background + 500 background-coloured pixels inside the edge band.
  assert.ok(Math.abs(s.shares.background - 3196 / 3696) < 1e-9);
  assert.ok(Math.abs(s.shares.edge - 500 / 3696) < 1e-9);
  assert.equal(s.shares.subject, 0);
  assert.ok(Math.abs(s.meanDeltaE - ((d1 + d2) / 2) * (3696 / 4096)) < 1e-4);
});

test('a subject-colour change: 256 of its 400 pixels are interior, 144 on the edge band; nothing in the background', () => {
  const acc = new ChangeMapAccumulator();
  acc.add(squareImage(RED, [128, 128, 128]), squareImage(ORANGE, [128, 128, 128]));
  const s = acc.summary();
  assert.ok(Math.abs(s.map[30 * N + 32] - referenceDeltaE00(RED, ORANGE)) < 1e-4);
  assert.ok(Math.abs(s.shares.subject - 256 / 400) < 1e-9);
  assert.ok(Math.abs(s.shares.edge - 144 / 400) < 1e-9);
  assert.equal(s.shares.background, 0);
});

test('the change-map image is black where nothing changed and white at full scale', () => {
  const img = changeMapImage(Float32Array.from([0, 10, 20, 40]), 4, 1, 20);
  assert.deepEqual(Array.from(img.data.slice(0, 4)), [0, 0, 0, 255]);
  assert.deepEqual(Array.from(img.data.slice(8, 12)), [255, 255, 255, 255]);
  assert.deepEqual(Array.from(img.data.slice(12, 16)), [255, 255, 255, 255]);
  assert.ok(img.data[4] > img.data[5] && img.data[5] >= img.data[6], 'half scale is a warm colour');
});

test('consistency across seeds: coefficient of variation (sample SD) and share of sign flips against the median, by hand', () => {
  // effects 1, 2, 3, −1, 2: median 2, mean 1.4, sample SD √(((−.4)²+.6²+1.6²+(−2.4)²+.6²)/4) = √2.3.
  const c = consistencyAcrossProbes([1, 2, 3, -1, 2, NaN]);
  assert.equal(c.probes, 5);
  assert.equal(c.median, 2);
  assert.ok(Math.abs(c.mean - 1.4) < 1e-12);
  assert.ok(Math.abs(c.coefficientOfVariation - Math.sqrt(2.3) / 1.4) < 1e-12);
  assert.equal(c.flipShare, 1 / 5);
  const none = consistencyAcrossProbes([0.5, 0.5, 0.5]);
  assert.equal(none.coefficientOfVariation, 0);
  assert.equal(none.flipShare, 0);
});
