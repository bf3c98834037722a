// Conversions between generator tensors and 8-bit images.
import { constants as zlibConstants, crc32, deflateSync } from 'node:zlib';
import { decode } from 'fast-png';

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
 * zlib settings for every PNG this program writes: run-length matches only (Z_RLE). After the
 * "up" filter a generator's image has few exact repeats further back than one pixel, so a full
 * match search costs time and saves little, while flat areas (contact-sheet backgrounds, strips)
 * still shrink to almost nothing. Measured here against the previous sub filter + RGBA + level 1:
 * a 128² demo image 0.52 ms / 18.1 KB against 0.66 ms / 20.3 KB, a 256² image of the realistic
 * test generator 1.7 ms / 140 KB against 5.5 ms / 167 KB.
 */
const PNG_DEFLATE = { level: 1, strategy: zlibConstants.Z_RLE } as const;

/**
 * 8-bit PNG (ISO/IEC 15948): colour type 2 (RGB) when every pixel is opaque — a generator's
 * images always are — else 6 (RGBA); the "up" filter on every row; native zlib (PNG_DEFLATE).
 * Deterministic for a given zlib.
 */
export function encodePng(image: RgbaImage): Uint8Array {
  const channels = isOpaque(image) ? 3 : 4;
  return assemblePng(image, channels, deflateSync(filterRows(image, channels), PNG_DEFLATE));
}

/**
 * encodePng's bytes, with the filtered scanlines in a buffer kept from one image to the next: a
 * writer thread encodes thousands of same-sized images, and on some machines (virtual machines
 * that hand freed pages back to their host) touching fresh memory costs as much as filtering it.
 */
export class PngEncoder {
  #raw = new Uint8Array(0);

  /** `opaque`: the caller knows every alpha is 255 (tensorToRgba's output), so it is not checked again. */
  encode(image: RgbaImage, opaque = isOpaque(image)): Uint8Array {
    const channels = opaque ? 3 : 4;
    const size = (image.width * channels + 1) * image.height;
    if (this.#raw.length !== size) this.#raw = new Uint8Array(size);
    return assemblePng(image, channels, deflateSync(filterRows(image, channels, this.#raw), PNG_DEFLATE));
  }
}

function isOpaque(image: RgbaImage): boolean {
  const d = image.data;
  for (let i = 3; i < d.length; i += 4) if (d[i] !== 255) return false;
  return true;
}

/**
 * Scanlines of `channels` (3: RGB, 4: RGBA) bytes per pixel with the "up" filter, each prefixed by
 * its filter byte (into `raw` when given: every byte is written). The first row's prior row counts
 * as zeros (ISO/IEC 15948 §9.2), so it is stored as it is.
 */
function filterRows(image: RgbaImage, channels: 3 | 4, raw = new Uint8Array((image.width * channels + 1) * image.height)): Uint8Array {
  const { width: w, height: h, data } = image;
  const stride = w * 4;
  for (let y = 0; y < h; y++) {
    let o = y * (w * channels + 1);
    raw[o++] = 2; // filter: up
    const row = y * stride;
    if (y === 0) {
      for (let i = 0; i < stride; i += 4) for (let c = 0; c < channels; c++) raw[o++] = data[i + c];
    } else if (channels === 3) {
      // Differences mod 256 (the Uint8Array store wraps them).
      for (let i = row; i < row + stride; i += 4) {
        raw[o] = data[i] - data[i - stride];
        raw[o + 1] = data[i + 1] - data[i + 1 - stride];
        raw[o + 2] = data[i + 2] - data[i + 2 - stride];
        o += 3;
      }
    } else {
      for (let i = row; i < row + stride; i++) raw[o++] = data[i] - data[i - stride];
    }
  }
  return raw;
}

/**
 * A PNG this program wrote (encodePng: 8-bit RGB or RGBA), back as RGBA pixels, e.g. a kept
 * variant image for the contact sheet. Decoded with fast-png; anything else is refused.
 */
export function decodeOwnPng(bytes: Uint8Array, file: string): RgbaImage {
  const png = decode(bytes);
  if (png.depth !== 8 || (png.channels !== 3 && png.channels !== 4)) throw new Error(`${file}: expected an 8-bit RGB or RGBA PNG, found ${png.channels} channel(s) of ${png.depth} bits`);
  if (png.channels === 4) return { width: png.width, height: png.height, data: new Uint8ClampedArray(png.data.buffer, png.data.byteOffset, png.data.byteLength) };
  const n = png.width * png.height;
  const data = new Uint8ClampedArray(n * 4);
  for (let p = 0, q = 0; p < n * 4; p += 4, q += 3) {
    data[p] = png.data[q];
    data[p + 1] = png.data[q + 1];
    data[p + 2] = png.data[q + 2];
    data[p + 3] = 255;
  }
  return { width: png.width, height: png.height, data };
}

/** Whether two PNGs hold the same pixels; `detail` says how they compare (bytes, size, pixels). */
export function samePixels(mine: Uint8Array, theirs: Uint8Array, theirName: string): { same: boolean; detail: string } {
  if (Buffer.from(mine).equals(Buffer.from(theirs))) return { same: true, detail: 'byte for byte' };
  let a: RgbaImage;
  let b: RgbaImage;
  try {
    a = decodeOwnPng(mine, 'the re-rendered preview');
    b = decodeOwnPng(theirs, theirName);
  } catch (err) {
    return { same: false, detail: `cannot be compared: ${(err as Error).message}` };
  }
  if (a.width !== b.width || a.height !== b.height) return { same: false, detail: `${a.width}×${a.height} against ${b.width}×${b.height}` };
  let differ = 0;
  for (let i = 0; i < a.data.length; i += 4) if (a.data[i] !== b.data[i] || a.data[i + 1] !== b.data[i + 1] || a.data[i + 2] !== b.data[i + 2] || a.data[i + 3] !== b.data[i + 3]) differ++;
  return differ === 0 ? { same: true, detail: 'pixel for pixel; the PNG files differ only in how they are compressed' } : { same: false, detail: `${differ} of ${a.width * a.height} pixels differ` };
}

/** Signature, IHDR, one IDAT and IEND, written straight into the one output array. */
function assemblePng(image: RgbaImage, channels: 3 | 4, idat: Uint8Array): Uint8Array {
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
    out.set([8, channels === 3 ? 2 : 6, 0, 0, 0], b + 8); // depth 8, colour type 2 (RGB) or 6 (RGBA), deflate, adaptive filtering, no interlace
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
