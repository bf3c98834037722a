// Conversions between generator tensors and 8-bit images.
import { crc32, deflate, deflateSync } from 'node:zlib';

export interface RgbaImage {
  width: number;
  height: number;
  /** RGBA, 8 bits per channel, row-major. */
  data: Uint8ClampedArray;
}

/**
 * One image of a float batch in [lo, hi] to RGBA8. `layout` says where channels are.
 * Rounds to nearest and clamps, the common convention for GAN outputs (x·127.5 + 128, truncated).
 */
export function tensorToRgba(
  values: Float32Array,
  index: number,
  height: number,
  width: number,
  layout: 'NCHW' | 'NHWC' = 'NCHW',
  range: [number, number] = [-1, 1],
  /** Where to put the pixels (width × height × 4 bytes), e.g. a buffer kept between images; a new one if absent. */
  into?: Uint8ClampedArray,
): RgbaImage {
  const plane = height * width;
  const base = index * plane * 3;
  if (into && into.length !== plane * 4) throw new RangeError(`tensorToRgba: into holds ${into.length} bytes, expected ${plane * 4}`);
  const out = into ?? new Uint8ClampedArray(plane * 4);
  const scale = 255 / (range[1] - range[0]);
  const lo = range[0];
  const span = range[1] - range[0];
  const min = lo - span;
  const max = range[1] + span;
  // One channel at a time, with the layout decided once: where a channel's values start and how
  // far apart they lie. The loop is this function's whole cost, run for every image written.
  const step = layout === 'NCHW' ? 1 : 3;
  for (let ch = 0; ch < 3; ch++) {
    let at = base + (layout === 'NCHW' ? ch * plane : ch);
    for (let p = 0, o = ch; p < plane; p++, at += step, o += 4) {
      const v = values[at];
      // Every value is read here anyway, so this is where NaN, ±Inf and far values are caught for sure.
      if (!(v >= min && v <= max)) throw new OutputValueError(v, range);
      out[o] = Math.floor((v - lo) * scale + 0.5); // Uint8ClampedArray clamps
    }
  }
  for (let o = 3; o < out.length; o += 4) out[o] = 255;
  return { width, height, data: out };
}

/** A value that cannot be an image value: NaN, ±Inf, or more than one span outside the range. */
export class OutputValueError extends Error {
  constructor(readonly value: number, readonly range: [number, number]) {
    super(Number.isFinite(value) ? `value ${value.toPrecision(4)} is far outside the declared range [${range[0]}, ${range[1]}]` : `value ${value} is not finite`);
  }
  get finite(): boolean {
    return Number.isFinite(this.value);
  }
}

/**
 * 8-bit RGBA PNG (ISO/IEC 15948): the "sub" filter on every row and native zlib at level 1.
 * About five times faster than a pure-JS deflate, and deterministic for a given zlib.
 */
export function encodePng(image: RgbaImage): Uint8Array {
  return assemblePng(image, deflateSync(filterRows(image), { level: 1 }));
}

/**
 * encodePng's bytes, with the filtered scanlines in a buffer kept from one image to the next: a
 * writer thread encodes thousands of same-sized images, and on some machines (virtual machines
 * that hand freed pages back to their host) touching fresh memory costs as much as filtering it.
 */
export class PngEncoder {
  #raw = new Uint8Array(0);

  encode(image: RgbaImage): Uint8Array {
    const size = (image.width * 4 + 1) * image.height;
    if (this.#raw.length !== size) this.#raw = new Uint8Array(size);
    return assemblePng(image, deflateSync(filterRows(image, this.#raw), { level: 1 }));
  }
}

/**
 * The same bytes as encodePng, with the compression on zlib's thread pool: it overlaps with
 * inference on the main thread when a batch job renders many images.
 */
export function encodePngAsync(image: RgbaImage): Promise<Uint8Array> {
  const raw = filterRows(image);
  return new Promise((resolve, reject) => deflate(raw, { level: 1 }, (err, idat) => (err ? reject(err) : resolve(assemblePng(image, idat)))));
}

/** Scanlines with the "sub" filter, each prefixed by its filter byte (into `raw` when given: every byte is written). */
function filterRows(image: RgbaImage, raw = new Uint8Array((image.width * 4 + 1) * image.height)): Uint8Array {
  const { width: w, height: h, data } = image;
  const stride = w * 4;
  for (let y = 0; y < h; y++) {
    const o = y * (stride + 1) + 1;
    raw[o - 1] = 1; // filter: sub
    const row = y * stride;
    // The first pixel has no left neighbour (it counts as 0); the rest are differences, mod 256 by the Uint8Array store.
    for (let i = 0; i < 4 && i < stride; i++) raw[o + i] = data[row + i];
    for (let i = 4; i < stride; i++) raw[o + i] = data[row + i] - data[row + i - 4];
  }
  return raw;
}

/** Signature, IHDR, one IDAT and IEND, written straight into the one output array. */
function assemblePng(image: RgbaImage, idat: Uint8Array): Uint8Array {
  const out = new Uint8Array(8 + 25 + 12 + idat.length + 12);
  const dv = new DataView(out.buffer);
  out.set([137, 80, 78, 71, 13, 10, 26, 10]);
  let at = 8;
  // A chunk: length, type, body, CRC-32 of type and body (ISO/IEC 15948 §5.3).
  const chunk = (type: string, length: number, body: (at: number) => void) => {
    dv.setUint32(at, length);
    for (let i = 0; i < 4; i++) out[at + 4 + i] = type.charCodeAt(i);
    body(at + 8);
    dv.setUint32(at + 8 + length, crc32(out.subarray(at + 4, at + 8 + length)));
    at += 12 + length;
  };
  chunk('IHDR', 13, (b) => {
    dv.setUint32(b, image.width);
    dv.setUint32(b + 4, image.height);
    out.set([8, 6, 0, 0, 0], b + 8); // depth 8, colour type 6 (RGBA), deflate, adaptive filtering, no interlace
  });
  chunk('IDAT', idat.length, (b) => out.set(idat, b));
  chunk('IEND', 0, () => {});
  return out;
}

/** Box-averages an image by an integer factor (each output pixel is the rounded mean of f×f inputs). */
export function downsampleImage(img: RgbaImage, factor: number): RgbaImage {
  const f = Math.max(1, Math.floor(factor));
  const w = Math.floor(img.width / f);
  const h = Math.floor(img.height / f);
  const data = new Uint8ClampedArray(w * h * 4);
  for (let y = 0; y < h; y++)
    for (let x = 0; x < w; x++)
      for (let c = 0; c < 4; c++) {
        let s = 0;
        for (let dy = 0; dy < f; dy++) for (let dx = 0; dx < f; dx++) s += img.data[((y * f + dy) * img.width + x * f + dx) * 4 + c];
        data[(y * w + x) * 4 + c] = Math.round(s / (f * f));
      }
  return { width: w, height: h, data };
}

/** Places images in a grid (for contact sheets and previews). */
export function tileImages(images: RgbaImage[], columns: number, gap = 2, background = 24): RgbaImage {
  if (images.length === 0) throw new RangeError('tileImages: no images');
  const w = images[0].width;
  const h = images[0].height;
  const rows = Math.ceil(images.length / columns);
  const width = columns * w + (columns + 1) * gap;
  const height = rows * h + (rows + 1) * gap;
  const data = new Uint8ClampedArray(width * height * 4).fill(background);
  for (let i = 3; i < data.length; i += 4) data[i] = 255;
  images.forEach((img, k) => {
    const ox = gap + (k % columns) * (w + gap);
    const oy = gap + Math.floor(k / columns) * (h + gap);
    for (let y = 0; y < h; y++) data.set(img.data.subarray(y * w * 4, (y + 1) * w * 4), ((oy + y) * width + ox) * 4);
  });
  return { width, height, data };
}
