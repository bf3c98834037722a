// The engine host: one per process. Owns the loaded generator and direction sets, answers
// protocol requests from any number of ports, and schedules work on two lanes:
//  - preview: latest request wins; a newer preview supersedes one that has not started, and a
//    preview always runs before the next job batch, so it waits at most one batch;
//  - jobs: queued, run batch by batch, cancellable between batches, streaming progress.
// onnxruntime's run() blocks this process's event loop, so fairness comes from small batches and
// yielding (setImmediate) between them.
import { readFileSync, existsSync } from 'node:fs';
import { basename, dirname, join, resolve } from 'node:path';
import { fileURLToPath } from 'node:url';
import { PlumblineError, toErrorData } from '../core/errors.ts';
import { readDirections, parseDirectionsMeta, type Direction } from '../core/directions.ts';
import { directionSigma, type EditVector } from '../core/latent.ts';
import {
  PROTOCOL_VERSION, ProtocolError, event, parseMessage, type DirectionInfo, type EventMessage, type Message, type Method,
  type Params, type RequestMessage, type ResponseMessage, type Result,
} from '../protocol/messages.ts';
import { Generator } from './generator.ts';
import { defaultThreads } from './sessions.ts';

export const ENGINE_VERSION = 'plumbline-engine/0.1.0';

export interface Port {
  post(message: Message): void;
}

export function demoCardPath(): string {
  const fromEnv = process.env.PLUMBLINE_RESOURCES;
  const root = fromEnv ? resolve(fromEnv) : resolve(dirname(fileURLToPath(import.meta.url)), '..', '..', 'resources');
  return join(root, 'demo', 'sigil.card.json');
}

interface LoadedDirection extends Direction {
  id: string;
  sigma: number;
}

interface Job {
  jobId: number;
  request: RequestMessage;
  port: Port;
  cancelled: boolean;
  steps: AsyncGenerator<{ done: number; total: number; label: string }, unknown, void>;
}

export interface HostOptions {
  threads?: number;
}

export class EngineHost {
  #generator: Generator | null = null;
  #directions = new Map<string, LoadedDirection>();
  #nextDirection = 1;
  #nextJob = 1;
  #preview: { request: RequestMessage; port: Port } | null = null;
  #control: { request: RequestMessage; port: Port }[] = [];
  #jobs: Job[] = [];
  #pumping = false;
  readonly threads: number;

  constructor(options: HostOptions = {}) {
    this.threads = options.threads ?? defaultThreads();
  }

  get generator(): Generator | null {
    return this.#generator;
  }

  /** Entry point for every incoming message from a port. Never throws. */
  receive(raw: unknown, port: Port): void {
    let message: Message;
    try {
      message = parseMessage(raw);
    } catch (err) {
      const id = typeof (raw as { id?: unknown })?.id === 'number' ? (raw as { id: number }).id : -1;
      port.post(errorResponse(id, { code: 'protocol', message: (err as ProtocolError).message }));
      return;
    }
    if (message.type !== 'request') {
      port.post(errorResponse(-1, { code: 'protocol', message: `the engine accepts requests only, got a ${message.type}` }));
      return;
    }
    const req = message;
    switch (req.method) {
      case 'preview.render':
        if (this.#preview) this.#preview.port.post(ok(this.#preview.request.id, { superseded: true }));
        this.#preview = { request: req, port };
        break;
      case 'job.cancel': {
        const { jobId } = req.params as Params<'job.cancel'>;
        const job = this.#jobs.find((j) => j.jobId === jobId || j.request.id === jobId);
        if (job) job.cancelled = true;
        port.post(ok(req.id, { cancelled: !!job }));
        return;
      }
      case 'grid.render':
        this.#jobs.push({ jobId: this.#nextJob++, request: req, port, cancelled: false, steps: this.#gridJob(req.params as Params<'grid.render'>) });
        break;
      default:
        this.#control.push({ request: req, port });
    }
    void this.#pump();
  }

  async #pump(): Promise<void> {
    if (this.#pumping) return;
    this.#pumping = true;
    try {
      for (;;) {
        if (this.#control.length) {
          const { request, port } = this.#control.shift()!;
          await this.#answer(request, port, () => this.#handleControl(request));
        } else if (this.#preview) {
          const { request, port } = this.#preview;
          this.#preview = null;
          await this.#answer(request, port, () => this.#renderPreview(request.params as Params<'preview.render'>));
        } else if (this.#jobs.length) {
          const job = this.#jobs[0];
          if (job.cancelled) {
            this.#jobs.shift();
            job.port.post(ok(job.request.id, { cancelled: true }));
            await job.steps.return(undefined);
          } else {
            try {
              const step = await job.steps.next();
              if (step.done) {
                this.#jobs.shift();
                job.port.post(ok(job.request.id, step.value));
              } else {
                job.port.post(event('job.progress', { jobId: job.jobId, requestId: job.request.id, ...step.value }));
              }
            } catch (err) {
              this.#jobs.shift();
              job.port.post(errorResponse(job.request.id, toErrorData(err)));
            }
          }
        } else break;
        await new Promise((r) => setImmediate(r));
      }
    } finally {
      this.#pumping = false;
    }
  }

  async #answer(request: RequestMessage, port: Port, run: () => Promise<unknown>): Promise<void> {
    try {
      port.post(ok(request.id, await run()));
    } catch (err) {
      port.post(errorResponse(request.id, toErrorData(err)));
    }
  }

  async #handleControl(req: RequestMessage): Promise<unknown> {
    switch (req.method as Method) {
      case 'engine.hello':
        return { protocol: PROTOCOL_VERSION, engine: ENGINE_VERSION, threads: this.threads, model: this.#generator?.info ?? null } satisfies Result<'engine.hello'>;
      case 'model.openDemo':
        return this.openModel(demoCardPath());
      case 'model.open': {
        const p = req.params as Params<'model.open'>;
        return this.openModel(p.path, p.mappingPath);
      }
      case 'directions.open':
        return this.openDirections((req.params as Params<'directions.open'>).path);
      default:
        throw new PlumblineError('bad-request', `unhandled method ${req.method}`);
    }
  }

  /** Loads a generator, releasing the previous one only once the new one is ready. */
  async openModel(path: string, mappingPath?: string) {
    const next = await Generator.open(path, { threads: this.threads, mappingPath });
    const previous = this.#generator;
    this.#generator = next;
    this.#directions.clear();
    for (const job of this.#jobs) job.cancelled = true;
    if (previous) await previous.dispose();
    return next.info;
  }

  openDirections(path: string): Result<'directions.open'> {
    const gen = this.#requireGenerator();
    const file = resolve(path);
    const npyFile = file.endsWith('.json') ? null : file;
    let metaFile = file.endsWith('.json') ? file : file.replace(/\.npy$/i, '.json');
    let meta = null;
    if (existsSync(metaFile)) {
      meta = parseDirectionsMeta(readFileSync(metaFile, 'utf8'), metaFile);
    } else metaFile = '';
    const dataFile = npyFile ?? (meta?.file ? resolve(dirname(file), meta.file) : file.replace(/\.json$/i, '.npy'));
    if (!existsSync(dataFile)) throw new PlumblineError('file-missing', `${dataFile}: directions array not found`, { file: dataFile });
    const dirs = readDirections(new Uint8Array(readFileSync(dataFile)), dataFile, meta, gen.layout, basename(dataFile, '.npy'));
    const infos: DirectionInfo[] = [];
    for (const d of dirs) {
      const sigma = directionSigma(gen.centredSamples, gen.layout.size, d.vector, gen.layout.layers, d.layers);
      const id = `d${this.#nextDirection++}`;
      this.#directions.set(id, { ...d, id, sigma: sigma > 0 ? sigma : 1 });
      infos.push({ id, name: d.name, target: d.target, layers: d.layers, sigma: sigma > 0 ? sigma : 1, notes: d.notes, method: d.method });
    }
    return { file: dataFile, directions: infos };
  }

  direction(id: string): LoadedDirection {
    const d = this.#directions.get(id) ?? [...this.#directions.values()].find((x) => x.name === id);
    if (!d) throw new PlumblineError('bad-request', `unknown direction '${id}'; loaded: ${[...this.#directions.values()].map((x) => x.name).join(', ') || 'none'}`);
    return d;
  }

  edits(list: { direction: string; strength: number }[]): EditVector[] {
    return list.map((e) => {
      const d = this.direction(e.direction);
      return { vector: d.vector, layers: d.layers, step: e.strength * d.sigma };
    });
  }

  #requireGenerator(): Generator {
    if (!this.#generator) throw new PlumblineError('no-model', 'no generator is open; open one first (the demo loads with model.openDemo)');
    return this.#generator;
  }

  async #renderPreview(p: Params<'preview.render'>): Promise<Result<'preview.render'>> {
    const gen = this.#requireGenerator();
    const started = performance.now();
    const out = await gen.renderSeeds([p.seed], p.psi, this.edits(p.edits));
    const { width, height } = gen.imageSize();
    const rgba = gen.toRgba(out.images, 0);
    return {
      superseded: false,
      seed: p.seed,
      image: { width, height, rgba: new Uint8Array(rgba.data.buffer) },
      attributes: out.attributes ? Array.from(out.attributes) : [],
      millis: performance.now() - started,
    };
  }

  async *#gridJob(p: Params<'grid.render'>): AsyncGenerator<{ done: number; total: number; label: string }, Result<'grid.render'>, void> {
    const gen = this.#requireGenerator();
    const images: { seed: number; image: { width: number; height: number; rgba: Uint8Array } }[] = [];
    const batch = gen.batchSize;
    // Codes for the whole job at once (one mapping run), then synthesis batch by batch.
    const codes = await gen.codesForSeeds(p.seeds, p.psi);
    const per = gen.layout.layers * gen.layout.size;
    for (let at = 0; at < p.seeds.length; at += batch) {
      const seeds = p.seeds.slice(at, at + batch);
      const out = await gen.synthesize(codes.subarray(at * per, (at + seeds.length) * per), seeds.length);
      const { width, height } = gen.imageSize();
      seeds.forEach((seed, i) => images.push({ seed, image: { width, height, rgba: new Uint8Array(gen.toRgba(out.images, i).data.buffer) } }));
      if (at + batch < p.seeds.length) yield { done: at + seeds.length, total: p.seeds.length, label: 'rendering seeds' };
    }
    return { cancelled: false, images };
  }

  async dispose(): Promise<void> {
    await this.#generator?.dispose();
    this.#generator = null;
  }
}

function ok(id: number, result: unknown): ResponseMessage {
  return { v: PROTOCOL_VERSION, type: 'response', id, ok: true, result };
}

function errorResponse(id: number, error: { code: string; message: string; file?: string }): ResponseMessage {
  return { v: PROTOCOL_VERSION, type: 'response', id, ok: false, error };
}

export type { EventMessage };
