// Tensor → 8-bit conversion. Reference: the common StyleGAN-family convention
// uint8 = clamp(x·127.5 + 128) truncated (METHODS §6, NVIDIA's scripts; common practice).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { decode } from 'fast-png';
import { encodePng, tensorToRgba, tileImages } from '../../app/core/image.ts';

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
  const back = decode(encodePng(img));
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

test('the thread-pool PNG encoder writes the same bytes as the synchronous one', async () => {
  const { encodePngAsync } = await import('../../app/core/image.ts');
  const data = new Uint8ClampedArray(64 * 48 * 4).map((_, i) => (i * 7919) % 251);
  const img = { width: 64, height: 48, data };
  assert.deepEqual(Array.from(await encodePngAsync(img)), Array.from(encodePng(img)));
  assert.deepEqual(Array.from(decode(await encodePngAsync(img)).data), Array.from(data));
});
