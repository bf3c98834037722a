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
import { runAudit } from './audit/run.ts';
import { auditReportFile, auditReportWire } from '../core/audit/report.ts';
import { discoverByTags, discoverPca, discoverSefa, fitBoundary, repairDirection, type LabDirection } from './lab.ts';
import { Project, vectorHash } from './project.ts';
import { buildPack, verifyPack } from './pack-ops.ts';
import { renderVariants } from './variants.ts';
import { FarmSession, modelLocation } from './farm/session.ts';
import { renderVariantsOnFarm } from './farm/farm-variants.ts';
import { farmAuditMeasurer } from './farm/audit-units.ts';
import type { WorkerProgress } from './farm/coordinator.ts';
import { PackError } from '../core/pack.ts';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { downsampleImage, type RgbaImage } from '../core/image.ts';
import { applyEdits } from '../core/latent.ts';

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
  /** Candidates from discovery stay unkept until the user keeps them. */
  kept: boolean;
}

/** Thrown by a job's checkpoint when the job was cancelled; answered as { cancelled: true }. */
class JobCancelled extends Error {}

interface Job {
  jobId: number;
  request: RequestMessage;
  port: Port;
  cancelled: boolean;
  steps: AsyncGenerator<{ done: number; total: number; label: string }, unknown, void>;
}

type Progress = { done: number; total: number; label: string; workers?: WorkerProgress[] };

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
  #project: Project | null = null;
  #running: Job | null = null;
  /** The render farm audits and variant sets go to while connected (farm.connect). */
  readonly #farm = new FarmSession();
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
      case 'lab.discover':
      case 'audit.run':
      case 'lab.repair':
      case 'variants.render': {
        const jobId = this.#nextJob++;
        this.#jobs.push({ jobId, request: req, port, cancelled: false, steps: this.#jobFor(req) });
        break;
      }
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
          this.#running = job;
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
              if (err instanceof JobCancelled) job.port.post(ok(job.request.id, { cancelled: true }));
              else job.port.post(errorResponse(job.request.id, toErrorData(err)));
            }
            this.#running = null;
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
      case 'farm.connect': {
        const { url, password } = req.params as Params<'farm.connect'>;
        return this.#farm.connect(url, password);
      }
      case 'farm.disconnect':
        return this.#farm.disconnect();
      case 'farm.status':
        return this.#farm.status();
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
      case 'directions.list':
        return { directions: [...this.#directions.values()].filter((d) => d.kept).map((d) => this.#info(d)) };
      case 'directions.keep': {
        const p = req.params as Params<'directions.keep'>;
        const d = this.direction(p.id);
        if ([...this.#directions.values()].some((x) => x.kept && x.name === p.name && x.id !== d.id)) throw new PlumblineError('bad-request', `a kept direction is already named '${p.name}'`);
        d.name = p.name;
        d.kept = true;
        this.#project?.saveDirection(d, this.#requireGenerator().layout.space);
        return this.#info(d);
      }
      case 'project.open':
        return this.#openProject(req.params as Params<'project.open'>);
      case 'project.saveUi': {
        if (!this.#project) throw new PlumblineError('bad-request', 'no project is open');
        return { savedAt: this.#project.saveUi(req.params as Params<'project.saveUi'>) };
      }
      case 'pack.build': {
        if (!this.#project) throw new PlumblineError('bad-request', 'building a pack needs an open project');
        const out = resolve((req.params as Params<'pack.build'>).out);
        const r = await buildPack(this.#requireGenerator(), this.#project.dir);
        writeFileAtomic(out, r.bytes);
        return { file: out, directions: r.manifest.directions.map((d) => d.name), skipped: r.skipped, bytes: r.bytes.length };
      }
      case 'pack.import': {
        const gen = this.#requireGenerator();
        const file = resolve((req.params as Params<'pack.import'>).path);
        if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: pack not found`, { file });
        let verified;
        try {
          verified = await verifyPack(new Uint8Array(readFileSync(file)), file, gen);
        } catch (err) {
          if (err instanceof PackError) throw new PlumblineError('bad-request', err.message, { file });
          throw err;
        }
        const imported: string[] = [];
        for (const d of verified.directions) {
          const entry = this.#register({ ...d, source: { ...d.source, importedFrom: verified.pack.manifest.project } }, true);
          this.#project?.saveDirection(entry, gen.layout.space);
          imported.push(entry.name);
        }
        return { imported, directions: [...this.#directions.values()].filter((d) => d.kept).map((d) => this.#info(d)) };
      }
      case 'project.review': {
        const p = req.params as Params<'project.review'>;
        if (!this.#project) throw new PlumblineError('bad-request', 'sign-off needs an open project (its review log keeps the history)');
        const d = this.direction(p.direction);
        if (!d.kept) throw new PlumblineError('bad-request', `'${d.name}' is a candidate; keep it before signing it off`);
        this.#project.appendReview({ at: new Date().toISOString(), direction: d.name, vectorHash: vectorHash(d.vector, d.layers), status: p.status, reviewer: p.reviewer, note: p.note });
        return { direction: d.id, signOff: this.#project.signOff(d.name, vectorHash(d.vector, d.layers)) };
      }
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
    const loaded = dirs.map((d) => this.#register(d, true));
    for (const d of loaded) this.#project?.saveDirection(d, gen.layout.space);
    return { file: dataFile, directions: loaded.map((d) => this.#info(d)) };
  }

  #register(d: Direction, kept: boolean): LoadedDirection {
    const gen = this.#requireGenerator();
    const existing = [...this.#directions.values()].find((x) => x.kept && kept && x.name === d.name);
    const sigma = directionSigma(gen.centredSamples, gen.layout.size, d.vector, gen.layout.layers, d.layers);
    const entry: LoadedDirection = { ...d, id: existing?.id ?? `d${this.#nextDirection++}`, sigma: sigma > 0 ? sigma : 1, kept };
    this.#directions.set(entry.id, entry);
    return entry;
  }

  #info(d: LoadedDirection): DirectionInfo {
    return {
      id: d.id,
      name: d.name,
      target: d.target,
      layers: d.layers,
      sigma: d.sigma,
      notes: d.notes,
      method: d.method,
      source: d.source,
      kept: d.kept,
      signOff: this.#project ? this.#project.signOff(d.name, vectorHash(d.vector, d.layers)) : null,
    };
  }

  #openProject(p: Params<'project.open'>): Result<'project.open'> {
    const gen = this.#requireGenerator();
    const project = Project.open(p.path, p.create, { name: gen.info.name, fingerprint: gen.info.fingerprint });
    this.#project = project;
    const created = p.create && project.doc.directions.length === 0;
    if (created) {
      // A new project starts with the directions already on the workbench.
      for (const d of this.#directions.values()) if (d.kept) project.saveDirection(d, gen.layout.space);
    } else {
      for (const d of [...this.#directions.values()]) if (d.kept) this.#directions.delete(d.id);
      for (const d of project.loadDirections(gen.layout)) this.#register(d, true);
    }
    const fingerprint = project.doc.generator?.fingerprint ?? null;
    return {
      path: project.dir,
      name: project.doc.name,
      generatorFingerprint: fingerprint,
      generatorMatches: fingerprint === gen.info.fingerprint,
      directions: [...this.#directions.values()].filter((d) => d.kept).map((d) => this.#info(d)),
      audits: project.audits(),
      ui: project.doc.ui,
    };
  }

  /** Lets a pending preview through and stops a cancelled job; called by long jobs between batches. */
  async #checkpoint(): Promise<void> {
    const job = this.#running;
    if (job?.cancelled) throw new JobCancelled();
    if (this.#preview) {
      const { request, port } = this.#preview;
      this.#preview = null;
      await this.#answer(request, port, () => this.#renderPreview(request.params as Params<'preview.render'>));
    }
    await new Promise((r) => setImmediate(r));
  }

  #jobFor(req: RequestMessage): AsyncGenerator<Progress, unknown, void> {
    switch (req.method) {
      case 'grid.render':
        return this.#gridJob(req.params as Params<'grid.render'>);
      case 'lab.discover':
        return this.#discoverJob(req.params as Params<'lab.discover'>);
      case 'audit.run':
        return this.#auditJob(req.params as Params<'audit.run'>);
      case 'variants.render':
        return this.#variantsJob(req.params as Params<'variants.render'>);
      default:
        return this.#repairJob(req.params as Params<'lab.repair'>);
    }
  }

  async *#discoverJob(p: Params<'lab.discover'>): AsyncGenerator<Progress, Result<'lab.discover'>, void> {
    const gen = this.#requireGenerator();
    yield { done: 0, total: 2, label: `discovering (${p.method})` };
    let found: LabDirection[];
    if (p.method === 'pca') found = await discoverPca(gen, { samples: p.samples, components: p.components, seed: p.seed, layers: p.layers });
    else if (p.method === 'sefa') found = discoverSefa(gen, { components: p.components, layers: p.layers });
    else if (p.method === 'boundary') {
      if (!p.attribute) throw new PlumblineError('bad-request', 'a boundary needs an attribute');
      found = [await fitBoundary(gen, p.attribute, { samples: p.samples, seed: p.seed, checkpoint: () => this.#checkpoint() })];
    } else {
      if (p.positive.length === 0 || p.negative.length === 0) throw new PlumblineError('bad-request', 'difference of means needs seeds tagged as having and as lacking the attribute');
      found = [await discoverByTags(gen, p.positive, p.negative, p.name ?? 'tagged')];
    }
    yield { done: 1, total: 2, label: 'rendering candidate strips' };
    const candidates: Extract<Result<'lab.discover'>, { cancelled: false }>['candidates'] = [];
    for (const f of found) {
      const d = this.#register({ name: p.name && found.length === 1 ? p.name : f.name, target: f.target, layers: f.layers, vector: f.vector, notes: f.notes, method: f.source.method, source: f.source as unknown as Record<string, unknown> }, false);
      const strip = await this.#strip(d, p.stripSeeds, p.stripStrengths);
      candidates.push({ direction: this.#info(d), strip, stripSeeds: p.stripSeeds, stripStrengths: p.stripStrengths });
      await this.#checkpoint();
    }
    return { cancelled: false, candidates };
  }

  /** Small images of seeds × strengths along a direction (rows: seeds). */
  async #strip(d: LoadedDirection, seeds: number[], strengths: number[]): Promise<{ width: number; height: number; rgba: Uint8Array }[]> {
    const gen = this.#requireGenerator();
    const base = await gen.codesForSeeds(seeds, gen.info.defaultPsi);
    const per = gen.layout.layers * gen.layout.size;
    const codes = new Float32Array(seeds.length * strengths.length * per);
    seeds.forEach((_, i) => strengths.forEach((s, j) => {
      const row = base.slice(i * per, (i + 1) * per);
      applyEdits(row, gen.layout, [{ vector: d.vector, layers: d.layers, step: s * d.sigma }]);
      codes.set(row, (i * strengths.length + j) * per);
    }));
    const out = await gen.synthesize(codes, seeds.length * strengths.length);
    return Array.from({ length: out.n }, (_, k) => shrink(gen.toRgba(out.images, k), 64));
  }

  async *#auditJob(p: Params<'audit.run'>): AsyncGenerator<Progress, Result<'audit.run'>, void> {
    const gen = this.#requireGenerator();
    const dirs = p.directions.map((id) => this.direction(id));
    // On a farm: render and score there; per-worker figures ride on the progress events.
    const farm = this.#farm.farm;
    let workers: WorkerProgress[] | undefined;
    const running = this.#running;
    const measure = farm ? farmAuditMeasurer(farm, 'default', { fingerprint: gen.info.fingerprint, files: gen.info.files, ...modelLocation(gen), isCancelled: () => !!running?.cancelled, onProgress: (r) => (workers = r.workers) }) : undefined;
    const job = runAudit(gen, dirs.map((d) => ({ name: d.name, target: d.target, layers: d.layers, vector: d.vector, sigma: d.sigma })), {
      probes: p.probes, pinnedSeeds: p.pinnedSeeds, psi: p.psi, seed: p.seed, referenceStrength: p.referenceStrength, leakPass: p.leakPass, leakFail: p.leakFail, combinations: p.combinations,
    }, { measure });
    let last = 0;
    for (;;) {
      if (this.#running?.cancelled) {
        await job.return(undefined as never);
        return { cancelled: true };
      }
      const step = await job.next();
      if (step.done) {
        const report = step.value;
        const savedAs = this.#project ? this.#project.saveAudit(auditReportFile(report)) : null;
        const { report: wire, thumbnails } = auditReportWire(report);
        return { cancelled: false, report: wire as never, thumbnails, savedAs };
      }
      // Report progress about twice a second's worth of batches, not every batch.
      if (step.value.done - last >= 4 || step.value.done === step.value.total || workers) {
        last = step.value.done;
        yield { ...step.value, workers };
      } else await this.#checkpoint();
    }
  }

  async *#variantsJob(p: Params<'variants.render'>): AsyncGenerator<Progress, Result<'variants.render'>, void> {
    const gen = this.#requireGenerator();
    const used = [...new Set(p.settings.flatMap((s) => Object.keys(s.strengths)))].map((id) => this.direction(id));
    const recipe = { format: 'plumbline.variant-recipe' as const, version: 1 as const, name: p.name, seeds: p.seeds, psi: p.psi, settings: p.settings.map((s) => ({ label: s.label, strengths: Object.fromEntries(Object.entries(s.strengths).map(([id, v]) => [this.direction(id).name, v])) })) };
    const out = resolve(p.out);
    const farm = this.#farm.farm;
    let workers: WorkerProgress[] | undefined;
    const running = this.#running;
    const job = farm
      ? renderVariantsOnFarm(farm, gen, recipe, used, out, { ...modelLocation(gen), isCancelled: () => !!running?.cancelled, onProgress: (r) => (workers = r.workers) })
      : renderVariants(gen, recipe, used, out);
    for (;;) {
      if (this.#running?.cancelled) {
        await job.return(undefined as never);
        return { cancelled: true };
      }
      const step = await job.next();
      if (step.done) return { cancelled: false, out, rendered: step.value.rendered, reused: step.value.reused, contactSheet: new Uint8Array(readFileSync(join(out, 'contact-sheet.png'))) };
      yield { ...step.value, workers };
    }
  }

  async *#repairJob(p: Params<'lab.repair'>): AsyncGenerator<Progress, Result<'lab.repair'>, void> {
    const gen = this.#requireGenerator();
    const d = this.direction(p.direction);
    yield { done: 0, total: 1, label: `fitting boundaries for ${p.against.join(', ')}` };
    const hold = p.hold === 'others' ? gen.attributeNames.filter((n) => !p.against.includes(n) && n !== d.target) : p.hold;
    const r = await repairDirection(gen, d, p.against, { hold, checkpoint: () => this.#checkpoint() });
    let name = r.name;
    for (let k = 2; [...this.#directions.values()].some((x) => x.kept && x.name === name); k++) name = `${r.name}${k}`;
    const entry = this.#register({ name, target: r.target, layers: r.layers, vector: r.vector, notes: r.notes, method: 'repair', source: r.source as unknown as Record<string, unknown> }, true);
    this.#project?.saveDirection(entry, gen.layout.space);
    return { cancelled: false, direction: this.#info(entry), boundaries: r.boundaries };
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
    await this.#farm.disconnect();
    await this.#generator?.dispose();
    this.#generator = null;
  }
}

/** A copy for the wire whose longer side is at most `max` pixels. */
function shrink(img: RgbaImage, max: number): { width: number; height: number; rgba: Uint8Array } {
  const small = downsampleImage(img, Math.ceil(Math.max(img.width, img.height) / max));
  return { width: small.width, height: small.height, rgba: new Uint8Array(small.data.buffer) };
}

function ok(id: number, result: unknown): ResponseMessage {
  return { v: PROTOCOL_VERSION, type: 'response', id, ok: true, result };
}

function errorResponse(id: number, error: { code: string; message: string; file?: string }): ResponseMessage {
  return { v: PROTOCOL_VERSION, type: 'response', id, ok: false, error };
}

export type { EventMessage };
