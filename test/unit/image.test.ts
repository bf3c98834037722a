// Tensor → 8-bit conversion. Reference: the common StyleGAN-family convention
// uint8 = clamp(x·127.5 + 128) truncated (METHODS §6, NVIDIA's scripts; common practice).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { decode } from 'fast-png';
import { encodePng, tensorToRgba, tileImages } from '../../app/core/image.ts';
import { decodeRgba } from '../helpers/png.ts';

test('[-1, 1] maps to 0..255 like x·127.5 + 128 truncated, with clamping', () => {
  const values = [-1, -0.5, 0, 0.5, 1, 3, -3, 0.99];
  const t = new Float32Array(values.length * 3);
  values.forEach((v, i) => { t[i] = v; t[values.length + i] = v; t[2 * values.length + i] = v; });
  const img = tensorToRgba(t, 0, 1, values.length);
  const expected = values.map((v) => Math.min(255, Math.max(0, Math.floor(v * 127.5 + 128))));
  assert.deepEqual(Array.from({ length: values.length }, (_, i) => img.data[i * 4]), expected);
});

test('NHWC layout reads interleaved channels', () => {
  const t = Float32Array.from([-1, 0, 1]);
  const img = tensorToRgba(t, 0, 1, 1, 'NHWC');
  assert.deepEqual(Array.from(img.data), [0, 128, 255, 255]);
});

test('PNG output decodes to the same pixels', () => {
  const img = tileImages([{ width: 2, height: 2, data: new Uint8ClampedArray(16).fill(200) }], 1, 1, 10);
  const back = decodeRgba(encodePng(img));
  assert.equal(back.width, 4);
  assert.deepEqual(Array.from(back.data), Array.from(img.data));
});

test('conversion refuses NaN, infinite and far-out values instead of writing them as pixels', () => {
  for (const bad of [NaN, Infinity, -Infinity, 3.5]) {
    const t = new Float32Array(12).fill(0.25);
    t[7] = bad;
    assert.throws(() => tensorToRgba(t, 0, 2, 2), (e: Error) => (Number.isFinite(bad) ? /far outside the declared range/ : /not finite/).test(e.message));
  }
  // Mild overshoot (within one span of the range) is clamped, as generators do overshoot a little.
  const ok = tensorToRgba(Float32Array.from([1.4, -1.4, 0]), 0, 1, 1);
  assert.deepEqual(Array.from(ok.data), [255, 0, 128, 255]);
});

test('opaque images are written as RGB (colour type 2), others as RGBA (6); fast-png reads back every pixel of both', () => {
  const w = 37;
  const h = 23;
  // Gradients, a flat band and values that wrap when differenced (0 under 255), so the "up" filter's mod-256 arithmetic is exercised.
  const opaque = new Uint8ClampedArray(w * h * 4).map((_, i) => (i % 4 === 3 ? 255 : Math.floor(i / (4 * w)) >= 10 && Math.floor(i / (4 * w)) < 14 ? 90 : (i * 7919 + Math.floor(i / (4 * w)) * 131) % 256));
  const translucent = opaque.slice();
  translucent[4 * (w * 5 + 7) + 3] = 128;
  for (const [data, channels, colourType] of [[opaque, 3, 2], [translucent, 4, 6]] as const) {
    const png = encodePng({ width: w, height: h, data });
    // IHDR: width, height, bit depth, colour type at bytes 16–25 (ISO/IEC 15948 §11.2.2).
    assert.deepEqual([new DataView(png.buffer, png.byteOffset).getUint32(16), new DataView(png.buffer, png.byteOffset).getUint32(20), png[24], png[25]], [w, h, 8, colourType]);
    const raw = decode(png);
    assert.equal(raw.channels, channels);
    assert.deepEqual(Array.from(raw.data), Array.from(data).filter((_, i) => channels === 4 || i % 4 !== 3));
  }
});

test('samePixels compares what a PNG shows, not how it is compressed: a PNG from another encoder (fast-png) with the same pixels matches', async () => {
  const { samePixels } = await import('../../app/core/image.ts');
  const { encode } = await import('fast-png');
  const w = 20;
  const h = 9;
  const data = new Uint8ClampedArray(w * h * 4).map((_, i) => (i % 4 === 3 ? 255 : (i * 37) % 256));
  const ours = encodePng({ width: w, height: h, data });
  const theirs = encode({ width: w, height: h, data: new Uint8Array(data), channels: 4, depth: 8 });
  assert.notDeepEqual(Array.from(theirs), Array.from(ours), 'the two encoders write different bytes');
  assert.deepEqual(samePixels(ours, ours, 'x.png'), { same: true, detail: 'byte for byte' });
  assert.equal(samePixels(ours, theirs, 'x.png').same, true);
  const changed = data.slice();
  changed[4 * 13 + 1] ^= 1;
  const r = samePixels(ours, encode({ width: w, height: h, data: new Uint8Array(changed), channels: 4, depth: 8 }), 'x.png');
  assert.deepEqual(r, { same: false, detail: `1 of ${w * h} pixels differ` });
  assert.match(samePixels(ours, new Uint8Array([1, 2, 3]), 'previews/x.png').detail, /cannot be compared/);
});
