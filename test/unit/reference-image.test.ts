// Reading reference images. Test files are made with the encoders of fast-png and jpeg-js (outside
// libraries); expected values come from the sRGB standard (IEC 61966-2-1): linear 0.5 encodes to
// 0.735357 (8-bit 188, common practice), and from arithmetic on the stated rules.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { encode as encodePng } from 'fast-png';
import jpeg from 'jpeg-js';
import { decodeReference, srgbEncode, MAX_PIXELS } from '../../app/core/reference-image.ts';
import { PlumblineError } from '../../app/core/errors.ts';

const SRGB_OF_HALF_LINEAR = 0.735357; // IEC 61966-2-1 encode of 0.5: 1.055·0.5^(1/2.4) − 0.055

function rejects(fn: () => unknown, code: string, pattern: RegExp) {
  assert.throws(fn, (err: unknown) => err instanceof PlumblineError && err.code === code && pattern.test(err.message) && err.message.includes('ref.png'));
}

test('srgbEncode matches the standard at linear 0.5 and the breakpoint', () => {
  assert.ok(Math.abs(srgbEncode(0.5) - SRGB_OF_HALF_LINEAR) < 1e-6);
  assert.ok(Math.abs(srgbEncode(0.0031308) - 0.04045) < 1e-5); // the two branches meet (IEC 61966-2-1)
});

test('not an image: clear error naming the file and what it starts with', () => {
  rejects(() => decodeReference(new TextEncoder().encode('hello, world'), 'ref.png', 8, 8), 'image-invalid', /not a PNG or JPEG.*68 65 6c 6c/);
  rejects(() => decodeReference(new Uint8Array(0), 'ref.png', 8, 8), 'image-invalid', /empty/);
});

test('truncated PNG is refused, not half-read', () => {
  const png = encodePng({ width: 32, height: 32, data: new Uint8Array(32 * 32 * 3).map((_, i) => (i * 37) & 255), channels: 3, depth: 8 });
  rejects(() => decodeReference(png.subarray(0, 20), 'ref.png', 8, 8), 'image-invalid', /ends after 20 bytes/);
  rejects(() => decodeReference(png.subarray(0, png.length - 40), 'ref.png', 8, 8), 'image-invalid', /truncated|cannot be decoded/);
});

test('over the pixel cap: refused from the header, before inflating', () => {
  // A real PNG header that claims 20,000 × 20,000 pixels with almost no data behind it.
  const small = encodePng({ width: 1, height: 1, data: new Uint8Array(3), channels: 3, depth: 8 });
  const big = Uint8Array.from(small);
  const v = new DataView(big.buffer);
  v.setUint32(16, 20000);
  v.setUint32(20, 20000);
  rejects(() => decodeReference(big, 'ref.png', 8, 8), 'image-too-large', /20000 × 20000 = 400,000,000 pixels, over the cap of 50,000,000/);
  assert.equal(MAX_PIXELS, 50_000_000);
  // File-size cap.
  rejects(() => decodeReference(small, 'ref.png', 8, 8, { maxFileBytes: 10 }), 'image-too-large', /bytes, over the cap of 10/);
});

test('grey 8-bit and 16-bit: copied to RGB; 16-bit keeps its precision', () => {
  const g8 = encodePng({ width: 4, height: 4, data: new Uint8Array(16).fill(188), channels: 1, depth: 8 });
  const r8 = decodeReference(g8, 'grey.png', 4, 4);
  for (const v of r8.image.data) assert.ok(Math.abs(v - 188 / 255) < 1e-6);
  assert.ok(r8.notes.some((n) => /grey/.test(n)));
  const value = 48193; // not a multiple of 257, so 8-bit rounding would show
  const g16 = encodePng({ width: 4, height: 4, data: new Uint16Array(16).fill(value), channels: 1, depth: 16 });
  const r16 = decodeReference(g16, 'grey16.png', 4, 4);
  for (const v of r16.image.data) assert.ok(Math.abs(v - value / 65535) < 2e-6, `${v} vs ${value / 65535}`);
  assert.ok(Math.abs(value / 65535 - Math.round((value / 65535) * 255) / 255) > 1e-4);
  assert.ok(r16.notes.some((n) => /16-bit/.test(n)));
});

test('alpha: half-transparent black over the white flatten colour is linear 0.5', () => {
  const data = new Uint8Array(4 * 4 * 4);
  for (let p = 0; p < 16; p++) data.set([0, 0, 0, 128], p * 4);
  const r = decodeReference(encodePng({ width: 4, height: 4, data, channels: 4, depth: 8 }), 'alpha.png', 4, 4);
  const expected = srgbEncode(1 - 128 / 255);
  for (const v of r.image.data) assert.ok(Math.abs(v - expected) < 1e-5);
  assert.ok(Math.abs(expected - 0.7332) < 1e-3); // ≈ the standard's 0.7354 at exactly 0.5 alpha
  assert.ok(r.notes.some((n) => /flattened/.test(n)));
});

test('odd aspect ratio: centre crop, then area resample in linear light', () => {
  // 300 × 100: left third red, middle third a 2 × 2 black/white checkerboard, right third blue.
  const w = 300;
  const h = 100;
  const data = new Uint8Array(w * h * 3);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++) {
      const o = (y * w + x) * 3;
      if (x < 100) data.set([255, 0, 0], o);
      else if (x >= 200) data.set([0, 0, 255], o);
      else data.fill((x + y) % 2 ? 255 : 0, o, o + 3);
    }
  const r = decodeReference(encodePng({ width: w, height: h, data, channels: 3, depth: 8 }), 'wide.png', 10, 10);
  // The centred square is exactly the middle third; each output pixel averages 10 × 10 cells
  // of the checkerboard: half black, half white in linear light → sRGB 0.735357.
  for (const v of r.image.data) assert.ok(Math.abs(v - SRGB_OF_HALF_LINEAR) < 1e-5, String(v));
  assert.ok(r.notes.some((n) => /centre-cropped from 300 × 100 to 100\.0 × 100\.0/.test(n)));
  // Tall image, non-integer ratio: size and range only.
  const tall = decodeReference(encodePng({ width: 37, height: 101, data: new Uint8Array(37 * 101 * 3).fill(40), channels: 3, depth: 8 }), 'tall.png', 16, 16);
  assert.equal(tall.image.data.length, 16 * 16 * 3);
  for (const v of tall.image.data) assert.ok(Math.abs(v - 40 / 255) < 1e-5);
});

test('palette PNG and JPEG decode to the colours written', () => {
  const pal = encodePng({ width: 2, height: 2, data: new Uint8Array([0, 1, 1, 0]), channels: 1, depth: 8, palette: [[255, 0, 0], [0, 255, 0]] });
  const rp = decodeReference(pal, 'pal.png', 2, 2);
  assert.deepEqual(Array.from(rp.image.data.subarray(0, 6), (v) => Math.round(v * 255)), [255, 0, 0, 0, 255, 0]);
  // JPEG of a flat colour: lossy, but a flat block decodes within a few codes of the input.
  const rgba = new Uint8Array(64 * 48 * 4);
  for (let p = 0; p < 64 * 48; p++) rgba.set([200, 120, 40, 255], p * 4);
  const jp = jpeg.encode({ width: 64, height: 48, data: rgba }, 95).data;
  const rj = decodeReference(new Uint8Array(jp), 'flat.jpg', 8, 8);
  assert.equal(rj.format, 'jpeg');
  assert.equal(rj.sourceWidth, 64);
  const mean = [0, 1, 2].map((c) => rj.image.data.filter((_, i) => i % 3 === c).reduce((a, b) => a + b, 0) / 64);
  [200, 120, 40].forEach((v, c) => assert.ok(Math.abs(mean[c] * 255 - v) < 4, `${mean[c] * 255} vs ${v}`));
  rejects(() => decodeReference(new Uint8Array(jp).subarray(0, 12), 'ref.png', 8, 8), 'image-invalid', /JPEG/);
});
