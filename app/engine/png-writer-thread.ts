// One thread of PngWriterPool: encodes with the shared encoder and writes atomically.
import { parentPort } from 'node:worker_threads';
import { createHash } from 'node:crypto';
import { encodePng } from '../core/image.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';

parentPort!.on('message', (m: { id: number; file: string; width: number; height: number; buffer: ArrayBuffer; durable: boolean }) => {
  try {
    const png = encodePng({ width: m.width, height: m.height, data: new Uint8ClampedArray(m.buffer) });
    writeFileAtomic(m.file, png, { durable: m.durable });
    parentPort!.postMessage({ id: m.id, file: m.file, sha256: createHash('sha256').update(png).digest('hex'), bytes: png.length });
  } catch (err) {
    parentPort!.postMessage({ id: m.id, file: m.file, error: (err as Error).message });
  }
});
