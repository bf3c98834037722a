// Decoding PNGs in tests with fast-png (an independent decoder from npm), as RGBA: our encoder
// writes opaque images as RGB (colour type 2), and the pixels compared are RGBA in memory.
import { decode } from 'fast-png';

export function decodeRgba(bytes: Uint8Array): { width: number; height: number; channels: number; data: Uint8ClampedArray } {
  const png = decode(bytes);
  if (png.depth !== 8 || (png.channels !== 3 && png.channels !== 4)) throw new Error(`expected an 8-bit RGB or RGBA PNG, got ${png.channels} channels of ${png.depth} bits`);
  const n = png.width * png.height;
  const data = new Uint8ClampedArray(n * 4);
  for (let p = 0; p < n; p++) for (let c = 0; c < 4; c++) data[p * 4 + c] = c < png.channels ? png.data[p * png.channels + c] : 255;
  return { width: png.width, height: png.height, channels: png.channels, data };
}
