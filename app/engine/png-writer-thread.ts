// One thread of PngWriterPool: converts a float image to 8 bits when given one (tensorToRgba, with
// its value checks), encodes with the shared encoder and writes atomically.
import { parentPort } from 'node:worker_threads';
import { createHash } from 'node:crypto';
import { encodePng, tensorToRgba, OutputValueError } from '../core/image.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';

interface WriteMessage {
  id: number;
  file: string;
  width: number;
  height: number;
  buffer: ArrayBuffer;
  durable: boolean;
  /** Present when `buffer` holds float values (one image) rather than RGBA bytes. */
  float?: { layout: 'NCHW' | 'NHWC'; range: [number, number] };
  /** Send the RGBA pixels back (for contact sheets). */
  keepPixels?: boolean;
}

parentPort!.on('message', (m: WriteMessage) => {
  try {
    const data = m.float ? tensorToRgba(new Float32Array(m.buffer), 0, m.height, m.width, m.float.layout, m.float.range).data : new Uint8ClampedArray(m.buffer);
    const png = encodePng({ width: m.width, height: m.height, data });
    // No file: encode only, and send the bytes back (a farm worker returns them through Redis).
    if (m.file) writeFileAtomic(m.file, png, { durable: m.durable });
    const pixels = m.keepPixels ? data.buffer : undefined;
    const bytes = m.file ? undefined : png.buffer;
    parentPort!.postMessage({ id: m.id, file: m.file, sha256: createHash('sha256').update(png).digest('hex'), bytes: png.length, pixels, png: bytes }, [...(pixels ? [pixels as ArrayBuffer] : []), ...(bytes ? [bytes as ArrayBuffer] : [])]);
  } catch (err) {
    const output = err instanceof OutputValueError ? { finite: err.finite } : undefined;
    parentPort!.postMessage({ id: m.id, file: m.file, error: (err as Error).message, output });
  }
});
