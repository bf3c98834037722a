// Reading a reference image for `locate`: PNG and JPEG from bytes to a float RGB image at the
// generator's size, with the refusals a file from outside needs.
//
// Decoders. PNG: fast-png (already a dependency; pure JS, all PNG colour types and depths,
// palette + tRNS). JPEG: jpeg-js — pure JavaScript, so the engine needs no native add-on rebuilt
// per Electron ABI; baseline and progressive; built-in caps on resolution and memory as a second
// line behind ours; tens of milliseconds for a one-megapixel image, which is noise beside a
// search of thousands of generator evaluations.
//
// Rules, all stated to the user in the report:
//  - Colour: every image is treated as sRGB (IEC 61966-2-1). Embedded ICC profiles, PNG gAMA/cHRM
//    and JPEG EXIF orientation are not applied.
//  - Grey is copied to R, G and B; 16-bit samples are scaled to [0, 1] by /65535 (no rounding
//    to 8 bits first).
//  - Alpha is composited over FLATTEN_COLOUR in linear light (the physically meaningful blend).
//  - Fit: centre-crop to the generator's aspect ratio (the largest centred window of that ratio),
//    then area resampling (each output pixel the coverage-weighted mean of the input pixels under
//    it), in linear light, then re-encoded to sRGB. Cropping keeps the subject's proportions; a
//    generator never draws padding, so padding would be a target it cannot make.
//  - Caps (decompression bombs): file size and pixel count, read from the header BEFORE any
//    pixel data is inflated or decoded.
import { decode as decodePngBytes, convertIndexedToRgb, hasPngSignature } from 'fast-png';
import jpeg from 'jpeg-js';
import { PlumblineError } from './errors.ts';
import { srgbDecode } from './color.ts';

/** Files above this size are refused unread (a 50 MP photo is ~25 MB as JPEG, ≤ 150 MB as 8-bit PNG only when incompressible). */
export const MAX_FILE_BYTES = 64 * 1024 * 1024;
/** Pixel cap: 50 megapixels, above any camera a studio hands in (≈ 8,660 × 5,773) and below what exhausts the engine's memory as float RGBA (50 M × 16 B = 800 MB). */
export const MAX_PIXELS = 50_000_000;
/** Alpha is flattened onto white (sRGB 1, 1, 1): concept art is usually delivered on white. */
export const FLATTEN_COLOUR: [number, number, number] = [1, 1, 1];

export interface DecodeLimits {
  maxFileBytes?: number;
  maxPixels?: number;
}

/** A float RGB image, interleaved, sRGB-encoded values in [0, 1]. */
export interface FloatImage {
  width: number;
  height: number;
  data: Float32Array;
}

export interface DecodedReference {
  format: 'png' | 'jpeg';
  /** Size of the file as decoded, before fitting. */
  sourceWidth: number;
  sourceHeight: number;
  /** What was done to it, in words, for the report. */
  notes: string[];
  image: FloatImage;
}

const JPEG_SOI = [0xff, 0xd8, 0xff];

function refuse(file: string, message: string): PlumblineError {
  return new PlumblineError('image-invalid', `${file}: ${message}`, { file });
}

/** Width and height from the PNG IHDR chunk (bytes 16–23), without inflating anything. */
function pngHeaderSize(bytes: Uint8Array, file: string): [number, number] {
  if (bytes.length < 33) throw refuse(file, `the PNG ends after ${bytes.length} bytes, before its header is complete (33 bytes needed)`);
  const type = String.fromCharCode(...bytes.subarray(12, 16));
  if (type !== 'IHDR') throw refuse(file, `the PNG's first chunk is '${type}', expected 'IHDR'`);
  const v = new DataView(bytes.buffer, bytes.byteOffset, bytes.byteLength);
  return [v.getUint32(16), v.getUint32(20)];
}

/** Width and height from the first JPEG start-of-frame marker (SOF0–SOF15 except DHT/JPG/DAC). */
function jpegHeaderSize(bytes: Uint8Array, file: string): [number, number] {
  let at = 2;
  while (at + 4 <= bytes.length) {
    if (bytes[at] !== 0xff) throw refuse(file, `the JPEG has no marker at byte ${at} (found 0x${bytes[at].toString(16)})`);
    const marker = bytes[at + 1];
    if (marker === 0xff) {
      at++;
      continue;
    }
    if (marker === 0xd8 || (marker >= 0xd0 && marker <= 0xd7) || marker === 0x01) {
      at += 2;
      continue;
    }
    const length = (bytes[at + 2] << 8) | bytes[at + 3];
    const isSof = marker >= 0xc0 && marker <= 0xcf && marker !== 0xc4 && marker !== 0xc8 && marker !== 0xcc;
    if (isSof) {
      if (at + 9 > bytes.length) break;
      return [(bytes[at + 7] << 8) | bytes[at + 8], (bytes[at + 5] << 8) | bytes[at + 6]];
    }
    if (marker === 0xda || marker === 0xd9) break;
    at += 2 + length;
  }
  throw refuse(file, 'the JPEG ends before its frame header (SOF): the file is truncated or not a JPEG image');
}

function checkPixels(width: number, height: number, file: string, maxPixels: number): void {
  if (width === 0 || height === 0) throw refuse(file, `the image is ${width} × ${height} pixels; an empty image cannot be matched`);
  if (width * height > maxPixels) {
    throw new PlumblineError('image-too-large', `${file}: the image is ${width} × ${height} = ${(width * height).toLocaleString('en')} pixels, over the cap of ${maxPixels.toLocaleString('en')}; scale it down first`, { file });
  }
}

/** Linear-light RGBA planes from any decoded PNG layout. */
function pngToLinear(png: ReturnType<typeof decodePngBytes>, notes: string[]): { rgb: Float32Array; alpha: Float32Array | null } {
  const { width, height } = png;
  const n = width * height;
  let data: ArrayLike<number> = png.data;
  let channels = png.channels;
  let max = png.depth === 16 ? 65535 : 255;
  if (png.palette) {
    data = convertIndexedToRgb(png as Parameters<typeof convertIndexedToRgb>[0]);
    channels = data.length / n;
    max = 255;
    notes.push('palette image expanded to RGB');
  } else if (png.depth < 8) {
    // fast-png leaves 1/2/4-bit grey unpacked as one sample per byte with the original maximum.
    max = 2 ** png.depth - 1;
  }
  if (png.depth === 16) notes.push('16-bit samples scaled to [0, 1] (no 8-bit rounding)');
  if (channels <= 2) notes.push('grey image copied to R, G and B');
  const rgb = new Float32Array(n * 3);
  const hasAlpha = channels === 2 || channels === 4;
  const alpha = hasAlpha ? new Float32Array(n) : null;
  // tRNS on a grey or RGB image names one transparent colour.
  const key = !png.palette && png.transparency && !hasAlpha ? Array.from(png.transparency) : null;
  const lut = Float32Array.from({ length: max + 1 }, (_, i) => srgbDecode(i / max));
  let keyed = 0;
  for (let p = 0; p < n; p++) {
    const base = p * channels;
    let r: number, g: number, b: number;
    if (channels <= 2) r = g = b = data[base];
    else {
      r = data[base];
      g = data[base + 1];
      b = data[base + 2];
    }
    rgb[p * 3] = lut[r];
    rgb[p * 3 + 1] = lut[g];
    rgb[p * 3 + 2] = lut[b];
    if (alpha) alpha[p] = data[base + channels - 1] / max;
    if (key && (channels <= 2 ? r === key[0] : r === key[0] && g === key[1] && b === key[2])) keyed++;
  }
  if (key && keyed > 0) {
    const a = new Float32Array(n).fill(1);
    for (let p = 0; p < n; p++) {
      const base = p * channels;
      const hit = channels <= 2 ? data[base] === key[0] : data[base] === key[0] && data[base + 1] === key[1] && data[base + 2] === key[2];
      if (hit) a[p] = 0;
    }
    return { rgb, alpha: a };
  }
  return { rgb, alpha };
}

function flatten(rgb: Float32Array, alpha: Float32Array | null, notes: string[]): void {
  if (!alpha) return;
  let partial = false;
  const bg = FLATTEN_COLOUR.map(srgbDecode);
  for (let p = 0; p < alpha.length; p++) {
    const a = alpha[p];
    if (a >= 1) continue;
    partial = true;
    for (let c = 0; c < 3; c++) rgb[p * 3 + c] = a * rgb[p * 3 + c] + (1 - a) * bg[c];
  }
  if (partial) notes.push(`transparency flattened onto sRGB (${FLATTEN_COLOUR.join(', ')}) in linear light`);
}

/**
 * Centre crop to width:height, then area resampling, in linear light; returns sRGB-encoded floats.
 * Input is linear RGB interleaved [h, w, 3].
 */
export function fitLinear(rgb: Float32Array, w: number, h: number, width: number, height: number): { image: FloatImage; crop: [number, number, number, number] } {
  // Largest centred window with the target's aspect ratio (fractional edges allowed).
  const target = width / height;
  let cw = w;
  let ch = h;
  if (w / h > target) cw = h * target;
  else ch = w / target;
  const x0 = (w - cw) / 2;
  const y0 = (h - ch) / 2;
  const sx = cw / width;
  const sy = ch / height;
  // Per output column/row: the input cells it covers and their coverage weights.
  const spans = (start: number, step: number, count: number, limit: number) =>
    Array.from({ length: count }, (_, o) => {
      const a = start + o * step;
      const b = a + step;
      const cells: number[] = [];
      const weights: number[] = [];
      for (let i = Math.floor(a); i < Math.min(limit, Math.ceil(b)); i++) {
        const cover = Math.min(b, i + 1) - Math.max(a, i);
        if (cover > 1e-9) {
          cells.push(i);
          weights.push(cover / step);
        }
      }
      return { cells, weights };
    });
  const cols = spans(x0, sx, width, w);
  const rows = spans(y0, sy, height, h);
  // Separable: rows first into [height, w, 3], then columns.
  const tmp = new Float32Array(height * w * 3);
  for (let oy = 0; oy < height; oy++) {
    const { cells, weights } = rows[oy];
    for (let k = 0; k < cells.length; k++) {
      const src = cells[k] * w * 3;
      const wt = weights[k];
      const dst = oy * w * 3;
      for (let i = 0; i < w * 3; i++) tmp[dst + i] += wt * rgb[src + i];
    }
  }
  const out = new Float32Array(width * height * 3);
  for (let oy = 0; oy < height; oy++)
    for (let ox = 0; ox < width; ox++) {
      const { cells, weights } = cols[ox];
      for (let c = 0; c < 3; c++) {
        let s = 0;
        for (let k = 0; k < cells.length; k++) s += weights[k] * tmp[(oy * w + cells[k]) * 3 + c];
        out[(oy * width + ox) * 3 + c] = srgbEncode(s);
      }
    }
  return { image: { width, height, data: out }, crop: [x0, y0, cw, ch] };
}

/** sRGB transfer function encode, IEC 61966-2-1, clamped to [0, 1]. */
export function srgbEncode(v: number): number {
  const x = Math.min(1, Math.max(0, v));
  return x <= 0.0031308 ? 12.92 * x : 1.055 * x ** (1 / 2.4) - 0.055;
}

/** Reads PNG or JPEG bytes into a float image of the generator's size (see the rules above). */
export function decodeReference(bytes: Uint8Array, file: string, width: number, height: number, limits: DecodeLimits = {}): DecodedReference {
  const maxFile = limits.maxFileBytes ?? MAX_FILE_BYTES;
  const maxPixels = limits.maxPixels ?? MAX_PIXELS;
  if (bytes.length > maxFile) {
    throw new PlumblineError('image-too-large', `${file}: the file is ${bytes.length.toLocaleString('en')} bytes, over the cap of ${maxFile.toLocaleString('en')}`, { file });
  }
  const notes: string[] = ['treated as sRGB (embedded colour profiles and EXIF orientation are not applied)'];
  let linear: Float32Array;
  let sw: number;
  let sh: number;
  let format: 'png' | 'jpeg';
  if (hasPngSignature(bytes)) {
    format = 'png';
    [sw, sh] = pngHeaderSize(bytes, file);
    checkPixels(sw, sh, file, maxPixels);
    let png: ReturnType<typeof decodePngBytes>;
    try {
      png = decodePngBytes(bytes, { checkCrc: true });
    } catch (err) {
      throw refuse(file, `the PNG cannot be decoded (${(err as Error).message}); the file may be truncated or damaged`);
    }
    const expected = png.width * png.height * (png.palette ? 1 : png.channels);
    if (png.data.length < expected) throw refuse(file, `the PNG holds ${png.data.length} samples, ${expected} expected; the file is truncated`);
    const { rgb, alpha } = pngToLinear(png, notes);
    flatten(rgb, alpha, notes);
    linear = rgb;
  } else if (JPEG_SOI.every((b, i) => bytes[i] === b)) {
    format = 'jpeg';
    [sw, sh] = jpegHeaderSize(bytes, file);
    checkPixels(sw, sh, file, maxPixels);
    let img: { width: number; height: number; data: Uint8Array };
    try {
      img = jpeg.decode(bytes, { useTArray: true, formatAsRGBA: true, tolerantDecoding: false, maxResolutionInMP: maxPixels / 1e6 + 1, maxMemoryUsageInMB: 2048 });
    } catch (err) {
      throw refuse(file, `the JPEG cannot be decoded (${(err as Error).message ?? err}); the file may be truncated or damaged`);
    }
    const n = img.width * img.height;
    linear = new Float32Array(n * 3);
    const lut = Float32Array.from({ length: 256 }, (_, i) => srgbDecode(i / 255));
    for (let p = 0; p < n; p++) for (let c = 0; c < 3; c++) linear[p * 3 + c] = lut[img.data[p * 4 + c]];
  } else {
    const head = Array.from(bytes.subarray(0, 8), (b) => b.toString(16).padStart(2, '0')).join(' ');
    throw refuse(file, `not a PNG or JPEG image (the file starts with ${head || 'nothing: it is empty'})`);
  }
  const { image, crop } = fitLinear(linear, sw, sh, width, height);
  const cropped = Math.abs(crop[2] - sw) > 1e-6 || Math.abs(crop[3] - sh) > 1e-6;
  if (cropped) notes.push(`centre-cropped from ${sw} × ${sh} to ${crop[2].toFixed(1)} × ${crop[3].toFixed(1)} (the generator's aspect ratio)`);
  if (sw !== width || sh !== height) notes.push(`area-resampled in linear light to ${width} × ${height}`);
  return { format, sourceWidth: sw, sourceHeight: sh, notes, image };
}
