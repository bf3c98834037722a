// A pool of worker threads that encode RGBA images to PNG and write them atomically, so a batch
// job's main thread goes straight back to inference instead of waiting on compression and disk.
// The bytes are exactly encodePng's (the threads call the same function).
import { Worker } from 'node:worker_threads';
import { availableParallelism } from 'node:os';
import { extname } from 'node:path';
import { fileURLToPath } from 'node:url';
import type { RgbaImage } from '../core/image.ts';
import type { FloatBatchSource, FloatImageSource } from './generator.ts';
import { PlumblineError } from '../core/errors.ts';

export interface WrittenPng {
  file: string;
  sha256: string;
  bytes: number;
  /** The 8-bit pixels, when asked for (keepPixels). */
  pixels?: RgbaImage;
  /** The PNG bytes, from encodeFloat (nothing is written then). */
  png?: Uint8Array;
}

interface Pending {
  resolve: (w: WrittenPng) => void;
  reject: (e: Error) => void;
  width: number;
  height: number;
  /** The synthesis file a float image came from (named in a bad-value error). */
  origin?: string;
}

/**
 * Threads: one fewer than the cores, at least one, at most four — inference keeps a core, and
 * beyond four the disk, not deflate, is the limit for images of a few hundred kilobytes.
 */
export const DEFAULT_PNG_THREADS = Math.max(1, Math.min(4, availableParallelism() - 1));

// The thread file sits beside this one: .js when compiled to out/, .ts under tsx (tests, CLI),
// where the thread must first register tsx's loader itself (loader hooks do not reach threads).
const threadFile = new URL(`./png-writer-thread${extname(fileURLToPath(import.meta.url))}`, import.meta.url);

export function startThread(file: URL): Worker {
  if (!file.pathname.endsWith('.ts')) return new Worker(file);
  const bootstrap = `import(${JSON.stringify(import.meta.resolve('tsx/esm/api'))}).then((m) => { m.register(); return import(${JSON.stringify(file.href)}); });`;
  return new Worker(bootstrap, { eval: true });
}

/** One image of a float batch for writeFloatBatch: which image, where to, and whether its pixels come back. */
export interface BatchWrite {
  index: number;
  file: string;
  durable?: boolean;
  keepPixels?: boolean;
}

/** Shared batch buffers kept for reuse: enough for the batches a render loop keeps in flight. */
const SPARE_BATCH_BUFFERS = 4;

export class PngWriterPool {
  readonly #workers: Worker[] = [];
  readonly #pending = new Map<number, Pending>();
  readonly #load: number[] = [];
  /** Shared buffers that held a batch whose images are all answered, ready for the next. */
  readonly #spare: SharedArrayBuffer[] = [];
  #next = 1;
  #failed: Error | null = null;
  #closing = false;

  constructor(threads = DEFAULT_PNG_THREADS) {
    for (let k = 0; k < threads; k++) {
      const w = startThread(threadFile);
      w.on('message', (m: { id: number; file: string; sha256?: string; bytes?: number; pixels?: ArrayBuffer; png?: ArrayBuffer; error?: string; output?: { finite: boolean } }) => {
        const p = this.#pending.get(m.id);
        if (!p) return;
        this.#pending.delete(m.id);
        // An idle thread must not keep the process alive; a busy one must.
        if (--this.#load[k] === 0) w.unref();
        // A bad value in the generator's output: the same codes and words as Generator.toRgba.
        if (m.output && p.origin) p.reject(new PlumblineError(m.output.finite ? 'output-out-of-range' : 'output-not-finite', `${p.origin}: the generator produced a bad image (${m.error})`, { file: p.origin }));
        else if (m.error !== undefined) p.reject(new PlumblineError('write-failed', `${m.file}: ${m.error}`, { file: m.file }));
        else p.resolve({ file: m.file, sha256: m.sha256!, bytes: m.bytes!, pixels: m.pixels ? { width: p.width, height: p.height, data: new Uint8ClampedArray(m.pixels) } : undefined, png: m.png ? new Uint8Array(m.png) : undefined });
      });
      w.on('error', (err) => this.#fail(err));
      w.on('exit', (code) => {
        if (!this.#closing) this.#fail(new Error(`exited with code ${code}`));
      });
      w.unref();
      this.#workers.push(w);
      this.#load.push(0);
    }
  }

  /** True once a thread has died; a new pool is needed. */
  get broken(): boolean {
    return this.#failed !== null;
  }

  /** Images queued or being written. */
  get inFlight(): number {
    return this.#pending.size;
  }

  /**
   * Encodes and writes one image. The image's pixel buffer is handed to the thread (transferred,
   * not copied) when it owns its whole ArrayBuffer; do not use `image.data` afterwards.
   */
  write(image: RgbaImage, file: string, options: { durable?: boolean } = {}): Promise<WrittenPng> {
    return this.#post(image.data, image.width, image.height, file, options);
  }

  /**
   * Converts one float image to 8 bits (tensorToRgba), encodes and writes it, all on a thread: the
   * render loop only copies the image out (Generator.floatImage). Its `values` are transferred.
   * `keepPixels` sends the 8-bit pixels back, for contact sheets.
   */
  writeFloat(source: FloatImageSource, file: string, options: { durable?: boolean; keepPixels?: boolean } = {}): Promise<WrittenPng> {
    return this.#post(source.values, source.width, source.height, file, options, source);
  }

  /** As writeFloat, but only encodes: the PNG bytes come back (`png`) and no file is written. */
  encodeFloat(source: FloatImageSource): Promise<WrittenPng & { png: Uint8Array }> {
    return this.#post(source.values, source.width, source.height, '', {}, source) as Promise<WrittenPng & { png: Uint8Array }>;
  }

  /**
   * Converts, encodes and writes images of one rendered batch (Generator.floatBatch). The batch is
   * copied once into a shared buffer the pool recycles, and each thread gets one message naming
   * its images in it: the render loop neither copies each image out into fresh memory nor posts
   * a message per image. The batch's own array can be reused as soon as this returns.
   */
  writeFloatBatch(batch: FloatBatchSource, items: BatchWrite[]): Promise<WrittenPng>[] {
    return this.#postBatch(batch, items.map((it) => ({ index: it.index, file: it.file, durable: it.durable ?? true, keepPixels: it.keepPixels ?? false })));
  }

  /** As writeFloatBatch, but only encodes: the PNG bytes come back (`png`) and no file is written. */
  encodeFloatBatch(batch: FloatBatchSource, indices: number[]): Promise<WrittenPng & { png: Uint8Array }>[] {
    return this.#postBatch(batch, indices.map((index) => ({ index, file: '', durable: false, keepPixels: false }))) as Promise<WrittenPng & { png: Uint8Array }>[];
  }

  #postBatch(batch: FloatBatchSource, items: { index: number; file: string; durable: boolean; keepPixels: boolean }[]): Promise<WrittenPng>[] {
    if (this.#failed) return items.map(() => Promise.reject(this.#failed));
    const per = batch.width * batch.height * 3;
    for (const it of items) if (!(Number.isInteger(it.index) && it.index >= 0 && it.index < batch.count)) throw new RangeError(`image ${it.index} of a batch of ${batch.count}`);
    const bytes = batch.count * per * 4;
    if (batch.images.length < batch.count * per) throw new RangeError(`a batch of ${batch.count} images of ${per} values holds only ${batch.images.length}`);
    // The smallest spare buffer that fits, else a new one (spares are warm: no first-touch cost).
    let at = -1;
    for (let i = 0; i < this.#spare.length; i++) if (this.#spare[i].byteLength >= bytes && (at < 0 || this.#spare[i].byteLength < this.#spare[at].byteLength)) at = i;
    const shared = at >= 0 ? this.#spare.splice(at, 1)[0] : new SharedArrayBuffer(bytes);
    new Float32Array(shared, 0, batch.count * per).set(batch.images.subarray(0, batch.count * per));
    const byThread = new Map<number, { id: number; index: number; file: string; durable: boolean; keepPixels: boolean }[]>();
    const promises = items.map((it) => {
      const id = this.#next++;
      const k = this.#leastLoaded();
      if (!byThread.has(k)) byThread.set(k, []);
      byThread.get(k)!.push({ id, ...it });
      return new Promise<WrittenPng>((resolve, reject) => this.#pending.set(id, { resolve, reject, width: batch.width, height: batch.height, origin: batch.origin }));
    });
    for (const [k, list] of byThread) this.#workers[k].postMessage({ batch: shared, width: batch.width, height: batch.height, float: { layout: batch.layout, range: batch.range }, items: list });
    // Every image answered (or failed): the buffer is free again.
    void Promise.allSettled(promises).then(() => {
      if (this.#spare.length < SPARE_BATCH_BUFFERS) this.#spare.push(shared);
    });
    return promises;
  }

  /** The thread with the fewest images queued, now holding one more. */
  #leastLoaded(): number {
    let k = 0;
    for (let i = 1; i < this.#load.length; i++) if (this.#load[i] < this.#load[k]) k = i;
    if (this.#load[k]++ === 0) this.#workers[k].ref();
    return k;
  }

  #post(data: Uint8ClampedArray | Float32Array, width: number, height: number, file: string, options: { durable?: boolean; keepPixels?: boolean }, float?: FloatImageSource): Promise<WrittenPng> {
    if (this.#failed) return Promise.reject(this.#failed);
    const id = this.#next++;
    const k = this.#leastLoaded();
    const whole = data.byteOffset === 0 && data.byteLength === data.buffer.byteLength && data.buffer instanceof ArrayBuffer;
    const buffer = whole ? (data.buffer as ArrayBuffer) : (data.slice().buffer as ArrayBuffer);
    return new Promise<WrittenPng>((resolve, reject) => {
      this.#pending.set(id, { resolve, reject, width, height, origin: float?.origin });
      this.#workers[k].postMessage({ id, file, width, height, buffer, durable: options.durable ?? true, keepPixels: options.keepPixels ?? false, float: float ? { layout: float.layout, range: float.range } : undefined }, [buffer]);
    });
  }

  #fail(err: Error) {
    this.#failed = new PlumblineError('write-failed', `PNG writer thread failed: ${err.message}`);
    for (const p of this.#pending.values()) p.reject(this.#failed);
    this.#pending.clear();
  }

  async close(): Promise<void> {
    this.#closing = true;
    await Promise.all(this.#workers.map((w) => w.terminate()));
  }
}

let shared: PngWriterPool | null = null;

/**
 * The process's pool, started on first use and kept: a long-lived engine process pays the thread
 * start once, not per job. Idle threads do not keep the process alive.
 */
export function sharedPngWriter(): PngWriterPool {
  if (!shared || shared.broken) shared = new PngWriterPool();
  return shared;
}
