// The PNG writer pool: files written on worker threads hold exactly encodePng's bytes, decode to
// the same pixels with an independent decoder (fast-png), float images converted there match the
// render thread's conversion — one at a time or handed over as whole batches — and failures name
// the file (or the generator, for bad values).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync, mkdirSync, rmSync } from 'node:fs';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import { encodePng, PngEncoder, type RgbaImage } from '../../app/core/image.ts';
import { PngWriterPool } from '../../app/engine/png-writer.ts';
import { Random } from '../../app/core/random.ts';
import { tempDir } from '../helpers/models.ts';
import { decodeRgba } from '../helpers/png.ts';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/workspace.ts';

function noise(width: number, height: number, seed: number): RgbaImage {
  const rng = new Random(seed);
  const data = new Uint8ClampedArray(width * height * 4);
  for (let i = 0; i < data.length; i++) data[i] = i % 4 === 3 ? 255 : Math.floor(rng.uniform() * 256);
  return { width, height, data };
}

test('images written by the pool are byte-identical to encodePng and decode to the same pixels', async () => {
  const dir = tempDir();
  const pool = new PngWriterPool(2);
  try {
    const images = Array.from({ length: 12 }, (_, k) => noise(17 + k, 9 + 2 * k, k));
    const expected = images.map((img) => encodePng(img));
    const pixels = images.map((img) => img.data.slice());
    const written = await Promise.all(images.map((img, k) => pool.write(img, join(dir, 'sub', `i${k}.png`))));
    written.forEach((w, k) => {
      const bytes = readFileSync(w.file);
      assert.deepEqual(new Uint8Array(bytes), expected[k], `image ${k}: same bytes as the main-thread encoder`);
      assert.equal(w.sha256, createHash('sha256').update(bytes).digest('hex'));
      assert.equal(w.bytes, bytes.length);
      // Outside check: fast-png (an independent PNG decoder) reads back the original pixels.
      const back = decodeRgba(bytes);
      assert.equal(back.width, images[k].width);
      assert.deepEqual(new Uint8ClampedArray(back.data), pixels[k]);
    });
  } finally {
    await pool.close();
  }
});

test('a write that cannot happen is rejected with the file named', async () => {
  const dir = tempDir();
  writeFileSync(join(dir, 'blocker'), 'a file, not a folder');
  mkdirSync(join(dir, 'ok'));
  const pool = new PngWriterPool(1);
  try {
    await assert.rejects(pool.write(noise(4, 4, 1), join(dir, 'blocker', 'x.png')), (err: Error & { code?: string }) => err.code === 'write-failed' && err.message.includes(join(dir, 'blocker', 'x.png')));
    // The pool keeps working after a failed write.
    const w = await pool.write(noise(4, 4, 2), join(dir, 'ok', 'y.png'));
    assert.ok(readFileSync(w.file).length > 0);
  } finally {
    await pool.close();
  }
});

test('float images converted on the pool write the same bytes as toRgba + encodePng on the render thread; bad values keep their error codes', async () => {
  const dir = tempDir();
  const pool = new PngWriterPool(2);
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  try {
    const r = await gen.renderSeeds([5, 6, 7], 0.7, []);
    for (let i = 0; i < 3; i++) {
      const rgba = gen.toRgba(r.images, i);
      const w = await pool.writeFloat(gen.floatImage(r.images, i), join(dir, `f${i}.png`), { keepPixels: true });
      assert.deepEqual(new Uint8Array(readFileSync(w.file)), encodePng(rgba), `image ${i}: same bytes`);
      assert.deepEqual(w.pixels?.data, rgba.data, `image ${i}: the pixels sent back are toRgba's`);
      // Outside check: fast-png reads back toRgba's pixels.
      assert.deepEqual(decodeRgba(readFileSync(w.file)).data, rgba.data);
    }
    const bad = gen.floatImage(r.images, 0);
    bad.values[17] = Number.NaN;
    await assert.rejects(pool.writeFloat(bad, join(dir, 'nan.png')), (err: Error & { code?: string }) => err.code === 'output-not-finite' && err.message.includes(bad.origin));
    const far = gen.floatImage(r.images, 1);
    far.values[3] = 1e6;
    await assert.rejects(pool.writeFloat(far, join(dir, 'far.png')), (err: Error & { code?: string }) => err.code === 'output-out-of-range');
  } finally {
    await gen.dispose();
    await pool.close();
  }
});

test('PngEncoder, which keeps its scanline buffer between images, gives encodePng\'s bytes for every size in any order', () => {
  const encoder = new PngEncoder();
  for (const [w, h, seed] of [[16, 16, 1], [16, 16, 2], [33, 7, 3], [1, 1, 4], [16, 16, 5], [128, 96, 6]]) {
    const img = noise(w, h, seed);
    assert.deepEqual(encoder.encode(img), encodePng(img), `${w}×${h} (seed ${seed})`);
  }
});

test('whole batches handed to the pool write and encode the same bytes as toRgba + encodePng; a bad image fails alone; the batch array can be reused at once', async () => {
  const dir = tempDir();
  const pool = new PngWriterPool(2);
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  try {
    const seeds = [[5, 6, 7, 8, 9], [10, 11, 12]];
    for (const [b, list] of seeds.entries()) {
      // Two rounds: the second batch goes through the shared buffer the first one left.
      const r = await gen.renderSeeds(list, 0.7, []);
      const expected = list.map((_, k) => gen.toRgba(r.images, k));
      const written = pool.writeFloatBatch(gen.floatBatch(r.images, list.length), list.map((_, k) => ({ index: k, file: join(dir, `b${b}`, `i${k}.png`), keepPixels: k % 2 === 0 })));
      const encoded = pool.encodeFloatBatch(gen.floatBatch(r.images, list.length), list.map((_, k) => k).reverse());
      // The pool copied the batch: scribbling over it now changes nothing written.
      r.images.fill(0);
      const w = await Promise.all(written);
      const e = await Promise.all(encoded);
      list.forEach((_, k) => {
        const png = encodePng(expected[k]);
        assert.deepEqual(new Uint8Array(readFileSync(join(dir, `b${b}`, `i${k}.png`))), png, `batch ${b} image ${k}: same bytes`);
        assert.equal(w[k].sha256, createHash('sha256').update(png).digest('hex'));
        assert.deepEqual(w[k].pixels?.data, k % 2 === 0 ? expected[k].data : undefined, `batch ${b} image ${k}: pixels back only when asked for`);
        assert.deepEqual(e[list.length - 1 - k].png, png, `batch ${b} image ${k}: encoded only, same bytes`);
        // Outside check: fast-png reads back toRgba's pixels.
        assert.deepEqual(decodeRgba(png).data, expected[k].data);
      });
    }
    const r = await gen.renderSeeds([1, 2, 3], 0.7, []);
    const per = r.images.length / 3;
    r.images[per + 17] = Number.NaN;
    const results = await Promise.allSettled(pool.writeFloatBatch(gen.floatBatch(r.images, 3), [0, 1, 2].map((k) => ({ index: k, file: join(dir, 'bad', `i${k}.png`) }))));
    assert.deepEqual(results.map((x) => x.status), ['fulfilled', 'rejected', 'fulfilled']);
    const err = (results[1] as PromiseRejectedResult).reason as Error & { code?: string };
    assert.equal(err.code, 'output-not-finite');
    assert.ok(err.message.includes(gen.floatBatch(r.images, 3).origin), err.message);
    assert.throws(() => pool.writeFloatBatch(gen.floatBatch(r.images, 3), [{ index: 3, file: join(dir, 'x.png') }]), /image 3 of a batch of 3/);
  } finally {
    await gen.dispose();
    await pool.close();
  }
});

test('a folder removed between two jobs is made again: the pool remembers the folders it made, and forgets one that is gone', async () => {
  const dir = tempDir();
  const pool = new PngWriterPool(1);
  try {
    const first = await pool.write(noise(5, 4, 1), join(dir, 'set', 'a', 'x.png'));
    assert.ok(readFileSync(first.file).length > 0);
    rmSync(join(dir, 'set'), { recursive: true });
    const again = await pool.write(noise(5, 4, 2), join(dir, 'set', 'a', 'y.png'));
    assert.deepEqual(new Uint8Array(readFileSync(again.file)), encodePng(noise(5, 4, 2)));
  } finally {
    await pool.close();
  }
});
