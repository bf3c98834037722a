// One thread of PngWriterPool: converts a float image to 8 bits when given one (tensorToRgba, with
// its value checks), encodes with the shared encoder and writes atomically. A batch message names
// several images of one rendered batch held in a shared buffer; each is answered on its own.
import { parentPort } from 'node:worker_threads';
import { createHash } from 'node:crypto';
import { PngEncoder, tensorToRgba, OutputValueError } from '../core/image.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { mkdirSync } from 'node:fs';
import { dirname } from 'node:path';

interface FloatFormat {
  layout: 'NCHW' | 'NHWC';
  range: [number, number];
}

interface WriteMessage {
  id: number;
  file: string;
  width: number;
  height: number;
  buffer: ArrayBuffer;
  durable: boolean;
  /** Present when `buffer` holds float values (one image) rather than RGBA bytes. */
  float?: FloatFormat;
  /** Send the RGBA pixels back (for contact sheets). */
  keepPixels?: boolean;
}

/** Images `index` of a float batch in a shared buffer (the pool recycles it once every image is answered). */
interface BatchMessage {
  batch: SharedArrayBuffer;
  width: number;
  height: number;
  float: FloatFormat;
  items: { id: number; index: number; file: string; durable: boolean; keepPixels: boolean }[];
}

// Kept between images of the same size: the 8-bit pixels (unless they are sent back) and the
// encoder's filtered scanlines. Fresh memory per image is what made this thread slow on machines
// where a first touch of a page is expensive.
const encoder = new PngEncoder();
let pixels = new Uint8ClampedArray(0);

/** Folders this thread has made (or found): a variant set writes thousands of files into a few. */
const folders = new Set<string>();

function finish(id: number, file: string, data: Uint8ClampedArray, width: number, height: number, durable: boolean, keepPixels: boolean, opaque?: boolean) {
  const png = encoder.encode({ width, height, data }, opaque);
  // No file: encode only, and send the bytes back (a farm worker stores them in Redis).
  if (file) {
    const folder = dirname(file);
    if (!folders.has(folder)) {
      mkdirSync(folder, { recursive: true });
      if (folders.size >= 4096) folders.clear();
      folders.add(folder);
    }
    try {
      writeFileAtomic(file, png, { durable, folderExists: true });
    } catch (err) {
      // The folder may have been removed since (a new job into a fresh folder of the same name): forget it, make it again.
      if ((err as NodeJS.ErrnoException).code !== 'ENOENT') throw err;
      folders.delete(folder);
      writeFileAtomic(file, png, { durable });
      folders.add(folder);
    }
  }
  const back = keepPixels ? (data.buffer as ArrayBuffer) : undefined;
  const bytes = file ? undefined : (png.buffer as ArrayBuffer);
  parentPort!.postMessage({ id, file, sha256: createHash('sha256').update(png).digest('hex'), bytes: png.length, pixels: back, png: bytes }, [...(back ? [back] : []), ...(bytes ? [bytes] : [])]);
}

function failed(id: number, file: string, err: unknown) {
  const output = err instanceof OutputValueError ? { finite: err.finite } : undefined;
  parentPort!.postMessage({ id, file, error: (err as Error).message, output });
}

parentPort!.on('message', (m: WriteMessage | BatchMessage) => {
  if ('batch' in m) {
    const values = new Float32Array(m.batch);
    for (const it of m.items) {
      try {
        // Pixels sent back leave with their buffer; the others reuse this thread's.
        const into = it.keepPixels ? undefined : pixels.length === m.width * m.height * 4 ? pixels : (pixels = new Uint8ClampedArray(m.width * m.height * 4));
        const rgba = tensorToRgba(values, it.index, m.height, m.width, m.float.layout, m.float.range, into);
        // tensorToRgba sets every alpha to 255.
        finish(it.id, it.file, rgba.data, m.width, m.height, it.durable, it.keepPixels, true);
      } catch (err) {
        failed(it.id, it.file, err);
      }
    }
    return;
  }
  try {
    const data = m.float ? tensorToRgba(new Float32Array(m.buffer), 0, m.height, m.width, m.float.layout, m.float.range).data : new Uint8ClampedArray(m.buffer);
    finish(m.id, m.file, data, m.width, m.height, m.durable, m.keepPixels ?? false, m.float ? true : undefined);
  } catch (err) {
    failed(m.id, m.file, err);
  }
});
