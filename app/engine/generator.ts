// A loaded generator: owns its onnxruntime sessions (synthesis and optional mapping), knows its
// latent layout, truncation centre and attribute outputs, renders batches and checks what comes
// out. The only module besides sessions.ts that touches onnxruntime.
import { createHash } from 'node:crypto';
import { basename, dirname, resolve } from 'node:path';
import * as ort from 'onnxruntime-node';
import { PlumblineError } from '../core/errors.ts';
import { parseModelCard, type ModelCard } from '../core/model-card.ts';
import { decodeModel, inferOutputRange, summarizeModel, type OnnxSummary, type TensorInterface } from '../core/onnx/inspect.ts';
import { GENERATOR_LIMITS, checkGraphShapes, checkImageCaps, checkLatentCaps, type GeneratorLimits } from '../core/onnx/caps.ts';
import { READ_LIMITS, readRegularFile, resolveInside } from '../core/path-policy.ts';
import { applyEdits, broadcastLayers, directionSigma, seedsToZ, truncate, type EditVector, type LatentLayout } from '../core/latent.ts';
import { OutputValueError, tensorToRgba, type RgbaImage } from '../core/image.ts';
import type { ModelInfo } from '../protocol/messages.ts';
import { createSession, type SessionOptions } from './sessions.ts';

/** Random samples used for truncation centres and σ units (GANSpace uses 5,000 for σ; 4,000 keeps opening fast). */
export const STAT_SAMPLES = 4000;
/** Seed stream reserved for those statistics, so they never coincide with user seeds' codes. */
const STAT_SEED_BASE = 0xa0000000;
/** Values beyond the declared range by more than one full span are "far outside" it. */
const RANGE_SLACK = 1.0;
/**
 * Batches checked value by value after opening; later batches are checked on a stride, because a
 * full scan costs ~15% of a small generator's run time. Every consumer of images (8-bit
 * conversion, scorers) reads all values and checks them fully, so nothing bad is ever used.
 */
const FULL_CHECK_BATCHES = 4;
const CHECK_STRIDE = 13;
export const DEFAULT_BATCH = 16;
/** Images rendered to infer the output range of a generator without a card. */
const RANGE_SAMPLE = 8;


export interface RenderOutput {
  n: number;
  images: Float32Array;
  attributes: Float32Array | null;
}

interface Resolved {
  card: ModelCard | null;
  cardBytes: Uint8Array | null;
  cardFile: string | null;
  synthesisFile: string;
  mappingFile: string | null;
  latentInput: string;
  imageOutput: string;
  attributesOutput: string | null;
  layout: LatentLayout;
  imageLayout: 'NCHW' | 'NHWC';
  range: [number, number];
  constants: Record<string, { data: Float32Array; dims: number[] }>;
  mappingInput: string | null;
  mappingOutput: string | null;
  assumptions: string[];
}

/** Regular files only (never a folder, FIFO or device), under the model size cap. */
function readBytes(file: string, what: string, maxBytes = READ_LIMITS.modelBytes): Uint8Array {
  return readRegularFile(file, what, maxBytes);
}

/** The generator fingerprint: SHA-256 over the synthesis, mapping and card bytes, each with its role and length. */
function fingerprintBytes(synthBytes: Uint8Array, mapBytes: Uint8Array | null, cardBytes: Uint8Array | null | undefined): string {
  const hash = createHash('sha256');
  hash.update('plumbline-fingerprint-v1\0');
  const part = (role: string, bytes: Uint8Array) => {
    hash.update(`${role}\0${bytes.length}\0`);
    hash.update(bytes);
  };
  part('synthesis', synthBytes);
  if (mapBytes) part('mapping', mapBytes);
  if (cardBytes) part('card', cardBytes);
  return hash.digest('hex');
}

/**
 * The fingerprint of a generator on disk without loading it (no inference session), and the
 * files it is made of — what a farm worker checks before it loads anything.
 */
export function fingerprintModel(path: string, mappingPath?: string): { fingerprint: string; files: string[] } {
  const file = resolve(path);
  const r = file.toLowerCase().endsWith('.json') ? resolveCard(file) : resolveBare(file, mappingPath ? resolve(mappingPath) : null);
  const synthBytes = readBytes(r.synthesisFile, 'synthesis model');
  const mapBytes = r.mappingFile ? readBytes(r.mappingFile, 'mapping network') : null;
  return { fingerprint: fingerprintBytes(synthBytes, mapBytes, r.cardBytes), files: [r.cardFile, r.synthesisFile, r.mappingFile].filter((f): f is string => !!f) };
}

export class Generator {
  #synthesis: ort.InferenceSession | null;
  #mapping: ort.InferenceSession | null;
  readonly layout: LatentLayout;
  readonly info: ModelInfo;
  readonly centre: Float32Array;
  /** W (or Z) samples [STAT_SAMPLES, size], centred on `centre`, for σ units. */
  readonly centredSamples: Float32Array;
  readonly attributeNames: string[];
  readonly card: ModelCard | null;
  readonly #r: Resolved;
  readonly #limits: GeneratorLimits;
  batchSize = DEFAULT_BATCH;

  private constructor(r: Resolved, synthesis: ort.InferenceSession, mapping: ort.InferenceSession | null, info: ModelInfo, centre: Float32Array, samples: Float32Array, limits: GeneratorLimits) {
    this.#r = r;
    this.#limits = limits;
    this.#synthesis = synthesis;
    this.#mapping = mapping;
    this.layout = r.layout;
    this.info = info;
    this.centre = centre;
    this.centredSamples = samples;
    this.card = r.card;
    this.attributeNames = r.card?.attributes.map((a) => a.name) ?? [];
  }

  static async open(path: string, options: SessionOptions & { mappingPath?: string; demoDirections?: string | null; limits?: Partial<GeneratorLimits> } = {}): Promise<Generator> {
    const limits: GeneratorLimits = { ...GENERATOR_LIMITS, ...options.limits };
    const file = resolve(path);
    const isCard = file.toLowerCase().endsWith('.json');
    const r = isCard ? resolveCard(file) : resolveBare(file, options.mappingPath ? resolve(options.mappingPath) : null);
    const synthBytes = readBytes(r.synthesisFile, 'synthesis model');
    const synthModel = decodeModel(synthBytes, r.synthesisFile);
    const synthSummary = summarizeModel(synthModel);
    // Caps before anything is allocated for the model: stated sizes first, then constant shapes.
    if (r.card) checkLatentCaps(r.cardFile!, 'the model card', r.layout.layers, r.layout.size, limits);
    checkInterface(r, synthSummary);
    checkLatentCaps(r.synthesisFile, `latent input '${r.latentInput}'`, r.layout.layers, r.layout.size, limits);
    checkGraphShapes(synthModel, r.synthesisFile, limits);
    const out = synthSummary.outputs.find((o) => o.name === r.imageOutput);
    if (out?.dims?.length === 4) {
      const [h, w] = r.imageLayout === 'NCHW' ? [out.dims[2], out.dims[3]] : [out.dims[1], out.dims[2]];
      if (fixed(h) && fixed(w)) checkImageCaps(r.synthesisFile, `image output '${out.name}'`, h, w, limits);
    }
    let mapBytes: Uint8Array | null = null;
    if (r.mappingFile) {
      mapBytes = readBytes(r.mappingFile, 'mapping network');
      const mapModel = decodeModel(mapBytes, r.mappingFile);
      const ms = summarizeModel(mapModel);
      checkMapping(r, ms);
      checkLatentCaps(r.mappingFile, 'the mapping network input', 1, r.layout.zSize, limits);
      checkGraphShapes(mapModel, r.mappingFile, limits);
    }
    const synthesis = await createSession(synthBytes, r.synthesisFile, options);
    let mapping: ort.InferenceSession | null = null;
    try {
      mapping = mapBytes && r.mappingFile ? await createSession(mapBytes, r.mappingFile, options) : null;
    } catch (err) {
      await synthesis.release();
      throw err;
    }

    const fingerprint = fingerprintBytes(synthBytes, mapBytes, r.cardBytes);

    const gen = new Generator(r, synthesis, mapping, {} as ModelInfo, new Float32Array(r.layout.size), new Float32Array(0), limits);
    try {
      // Statistics: W samples from the mapping (or Z samples), centre from the card or their mean.
      const z = seedsToZ(Array.from({ length: STAT_SAMPLES }, (_, i) => STAT_SEED_BASE + i), r.layout.zSize);
      const w = await gen.mapZ(z, STAT_SAMPLES);
      const size = r.layout.size;
      let centre: Float32Array;
      const cardCentre = r.card?.truncation.centre;
      if (cardCentre) centre = Float32Array.from(cardCentre);
      else if (r.mappingFile) {
        centre = new Float32Array(size);
        for (let i = 0; i < STAT_SAMPLES; i++) for (let k = 0; k < size; k++) centre[k] += w[i * size + k] / STAT_SAMPLES;
        r.assumptions.push(`truncation centre estimated as the mean of ${STAT_SAMPLES} mapped samples`);
      } else centre = new Float32Array(size);
      const centred = new Float32Array(w.length);
      for (let i = 0; i < w.length; i++) centred[i] = w[i] - centre[i % size];
      (gen as { centre: Float32Array }).centre = centre;
      (gen as { centredSamples: Float32Array }).centredSamples = centred;

      // A probe render checks shape, size, range and finiteness before anyone relies on the
      // model: one image first (the pixel cap then holds at the smallest allocation), then two
      // (the batch dimension must be dynamic). Without a card the output range is not stated: it
      // is read off a sample batch first (#inferRange, which renders the single image first too).
      if (!r.card) await gen.#inferRange();
      else await gen.renderSeeds([0], 1, []);
      await gen.renderSeeds([0, 1], 1, []);
      const { width, height } = gen.imageSize();
      const files = [r.cardFile, r.synthesisFile, r.mappingFile].filter((f): f is string => !!f);
      (gen as { info: ModelInfo }).info = {
        id: fingerprint.slice(0, 16),
        name: r.card?.name ?? basename(r.synthesisFile, '.onnx'),
        description: r.card?.description ?? 'Loaded without a model card; see the assumptions.',
        fingerprint,
        files,
        space: r.layout.space,
        latentSize: r.layout.size,
        layers: r.layout.layers,
        hasMapping: !!r.mappingFile,
        width,
        height,
        defaultPsi: r.card?.truncation.defaultPsi ?? 0.7,
        attributes: r.card?.attributes ?? [],
        assumptions: r.assumptions,
        demoDirections: options.demoDirections ?? (r.card?.directions && r.cardFile ? resolveInside(dirname(r.cardFile), r.card.directions, 'directions', r.cardFile) : null),
        caution: r.card?.caution ?? null,
      };
      return gen;
    } catch (err) {
      await gen.dispose();
      throw err;
    }
  }

  /** Renders RANGE_SAMPLE seeds unchecked, infers the output range and lists it among the assumptions. */
  async #inferRange(): Promise<void> {
    const r = this.#r;
    r.range = [-Infinity, Infinity];
    await this.renderSeeds([0], 1, []);
    const out = await this.renderSeeds(Array.from({ length: RANGE_SAMPLE }, (_, i) => STAT_SEED_BASE + i), 1, []);
    this.#checkedBatches = 0;
    const inferred = inferOutputRange(out.images);
    r.range = inferred.range;
    r.assumptions.push(inferred.note);
  }

  #shape: number[] | null = null;
  #checkedBatches = 0;
  #seedCache = new Map<number, Float32Array>();

  /**
   * One strength unit of a direction: the std of the latent projection onto it over this
   * generator's random samples (core's directionSigma). A direction that does not move the samples
   * at all gets σ = 1 so its slider still does something visible rather than nothing.
   */
  sigmaOf(vector: Float32Array, layers: [number, number] | null): number {
    const sigma = directionSigma(this.centredSamples, this.layout.size, vector, this.layout.layers, layers);
    return sigma > 0 ? sigma : 1;
  }

  imageSize(): { width: number; height: number } {
    if (!this.#shape) throw new Error('no image rendered yet');
    const s = this.#shape;
    return this.#r.imageLayout === 'NCHW' ? { height: s[2], width: s[3] } : { height: s[1], width: s[2] };
  }

  get synthesisFile(): string {
    return this.#r.synthesisFile;
  }
  get latentInputName(): string {
    return this.#r.latentInput;
  }

  get imageLayout(): 'NCHW' | 'NHWC' {
    return this.#r.imageLayout;
  }
  get range(): [number, number] {
    return this.#r.range;
  }

  /** z [n, zSize] → w [n, size]; identity for Z-space generators. */
  async mapZ(z: Float32Array, n: number): Promise<Float32Array> {
    if (!this.#mapping) return z;
    const out = new Float32Array(n * this.layout.size);
    const { zSize, size } = this.layout;
    for (let at = 0; at < n; at += 1024) {
      const m = Math.min(1024, n - at);
      const feeds = { [this.#r.mappingInput!]: new ort.Tensor('float32', z.subarray(at * zSize, (at + m) * zSize), [m, zSize]) };
      const res = await this.#mapping.run(feeds);
      const t = res[this.#r.mappingOutput!];
      const data = t.data as Float32Array;
      if (data.length !== m * size) {
        throw new PlumblineError('latent-size-mismatch', `${this.#r.mappingFile}: mapping output '${this.#r.mappingOutput}' has shape [${t.dims.join(', ')}], expected [${m}, ${size}]`, { file: this.#r.mappingFile ?? undefined });
      }
      out.set(data, at * size);
      for (const v of Object.values(res)) v.dispose?.();
    }
    return out;
  }

  /** Truncated codes [n, layers, size] for seeds. */
  async codesForSeeds(seeds: number[], psi: number): Promise<Float32Array> {
    let w: Float32Array;
    const cached = seeds.length === 1 ? this.#seedCache.get(seeds[0]) : undefined;
    if (cached) w = cached;
    else {
      w = await this.mapZ(seedsToZ(seeds, this.layout.zSize), seeds.length);
      if (seeds.length === 1) {
        // Previews revisit the same few seeds while a slider moves: skip the mapping run.
        if (this.#seedCache.size >= 64) this.#seedCache.delete(this.#seedCache.keys().next().value!);
        this.#seedCache.set(seeds[0], w);
      }
    }
    const t = truncate(w, this.centre, psi);
    return this.layout.layers > 1 ? broadcastLayers(t, this.layout) : t;
  }

  /** Renders codes [n, layers, size] (or [n, size]) in batches. */
  async synthesize(codes: Float32Array, n: number, onBatch?: (done: number) => Promise<void> | void): Promise<RenderOutput> {
    const per = this.layout.layers * this.layout.size;
    if (codes.length !== n * per) throw new PlumblineError('latent-size-mismatch', `expected ${n} codes of ${per} values, got ${codes.length} values`);
    if (n <= this.batchSize) {
      // One batch: hand back onnxruntime's own output arrays, no copy.
      const out = await this.#runBatch(codes, n);
      await onBatch?.(n);
      return { n, images: out.images, attributes: out.attributes };
    }
    let images: Float32Array | null = null;
    let attributes: Float32Array | null = null;
    let perImage = 0;
    let perAttr = 0;
    for (let at = 0; at < n; at += this.batchSize) {
      const m = Math.min(this.batchSize, n - at);
      const out = await this.#runBatch(codes.subarray(at * per, (at + m) * per), m);
      if (!images) {
        perImage = out.images.length / m;
        images = new Float32Array(perImage * n);
        if (out.attributes) {
          perAttr = out.attributes.length / m;
          attributes = new Float32Array(perAttr * n);
        }
      }
      images.set(out.images, at * perImage);
      if (attributes && out.attributes) attributes.set(out.attributes, at * perAttr);
      await onBatch?.(at + m);
    }
    return { n, images: images ?? new Float32Array(0), attributes };
  }

  async #runBatch(codes: Float32Array, m: number): Promise<{ images: Float32Array; attributes: Float32Array | null }> {
    if (!this.#synthesis) throw new PlumblineError('no-model', 'the generator has been released');
    const dims = this.layout.space === 'w+' ? [m, this.layout.layers, this.layout.size] : [m, this.layout.size];
    const feeds: Record<string, ort.Tensor> = { [this.#r.latentInput]: new ort.Tensor('float32', codes, dims) };
    for (const [name, c] of Object.entries(this.#r.constants)) {
      const batched = new Float32Array(c.data.length * m);
      for (let i = 0; i < m; i++) batched.set(c.data, i * c.data.length);
      feeds[name] = new ort.Tensor('float32', batched, [m, ...c.dims]);
    }
    const fetches = [this.#r.imageOutput, ...(this.#r.attributesOutput ? [this.#r.attributesOutput] : [])];
    let res: ort.InferenceSession.OnnxValueMapType;
    try {
      res = await this.#synthesis.run(feeds, fetches);
    } catch (err) {
      throw new PlumblineError('bad-request', `${this.#r.synthesisFile}: inference failed: ${(err as Error).message}`, { file: this.#r.synthesisFile });
    }
    const img = res[this.#r.imageOutput];
    this.#checkImage(img.dims as readonly number[], img.data as Float32Array, m);
    const images = img.data as Float32Array;
    const attr = this.#r.attributesOutput ? (res[this.#r.attributesOutput].data as Float32Array) : null;
    return { images, attributes: attr };
  }

  #checkImage(dims: readonly number[], data: Float32Array, m: number): void {
    const file = this.#r.synthesisFile;
    if (dims.length !== 4) throw new PlumblineError('bad-image-output', `${file}: image output '${this.#r.imageOutput}' has rank ${dims.length} (shape [${dims.join(', ')}]); expected [N, 3, H, W] or [N, H, W, 3]`, { file });
    const channels = this.#r.imageLayout === 'NCHW' ? dims[1] : dims[3];
    if (channels !== 3) throw new PlumblineError('bad-image-output', `${file}: image output '${this.#r.imageOutput}' has ${channels} channels (shape [${dims.join(', ')}], ${this.#r.imageLayout}); expected 3 (RGB)`, { file });
    if (dims[0] !== m) throw new PlumblineError('bad-image-output', `${file}: image output batch is ${dims[0]}, expected ${m} (is the batch dimension dynamic?)`, { file });
    const [h, w] = this.#r.imageLayout === 'NCHW' ? [dims[2], dims[3]] : [dims[1], dims[2]];
    checkImageCaps(file, `image output '${this.#r.imageOutput}'`, h, w, this.#limits);
    this.#shape = [...dims];
    const [lo, hi] = this.#r.range;
    const slack = (hi - lo) * RANGE_SLACK;
    const min = lo - slack;
    const max = hi + slack;
    // One comparison per value on the fast path: NaN and ±Inf fail it as well as far values.
    const stride = this.#checkedBatches++ < FULL_CHECK_BATCHES ? 1 : CHECK_STRIDE;
    let clean = true;
    for (let i = 0; i < data.length; i += stride) {
      const v = data[i];
      if (!(v >= min && v <= max)) {
        clean = false;
        break;
      }
    }
    if (clean) return;
    let bad = 0;
    let far = 0;
    let worst = 0;
    for (let i = 0; i < data.length; i++) {
      const v = data[i];
      if (!Number.isFinite(v)) bad++;
      else if (v < min || v > max) {
        far++;
        if (Math.abs(v) > Math.abs(worst)) worst = v;
      }
    }
    if (bad) throw new PlumblineError('output-not-finite', `${file}: the generator produced ${bad} NaN or infinite value(s) out of ${data.length}`, { file });
    if (far) throw new PlumblineError('output-out-of-range', `${file}: ${far} output value(s) are far outside the declared range [${lo}, ${hi}] (e.g. ${worst.toPrecision(4)}); check the range in the model card`, { file });
  }

  /** Image i of a rendered batch as RGBA8; fails with the model's file name on NaN, Inf or far values. */
  toRgba(images: Float32Array, index: number): RgbaImage {
    const { width, height } = this.imageSize();
    try {
      return tensorToRgba(images, index, height, width, this.imageLayout, this.range);
    } catch (err) {
      if (!(err instanceof OutputValueError)) throw err;
      const file = this.#r.synthesisFile;
      throw new PlumblineError(err.finite ? 'output-out-of-range' : 'output-not-finite', `${file}: the generator produced a bad image (${err.message})`, { file });
    }
  }

  /**
   * Image `index` of a float batch as its own copy, with what converting it to 8 bits needs: handed
   * to the PNG writer's threads (png-writer.ts), so the conversion and its value checks happen off
   * the render path with the same function and the same errors as toRgba.
   */
  floatImage(images: Float32Array, index: number): FloatImageSource {
    const { width, height } = this.imageSize();
    const per = width * height * 3;
    return { values: images.slice(index * per, (index + 1) * per), width, height, layout: this.#r.imageLayout, range: this.range, origin: this.#r.synthesisFile };
  }

  /**
   * The first `count` images of a float batch, as they are, with what converting them to 8 bits
   * needs: for PngWriterPool.writeFloatBatch, which copies the batch once into a buffer it reuses
   * rather than each image into fresh memory (floatImage).
   */
  floatBatch(images: Float32Array, count: number): FloatBatchSource {
    const { width, height } = this.imageSize();
    return { images, count, width, height, layout: this.#r.imageLayout, range: this.range, origin: this.#r.synthesisFile };
  }

  async renderSeeds(seeds: number[], psi: number, edits: EditVector[], onBatch?: (done: number) => Promise<void> | void): Promise<RenderOutput> {
    const codes = await this.codesForSeeds(seeds, psi);
    applyEdits(codes, this.layout, edits);
    return this.synthesize(codes, seeds.length, onBatch);
  }

  async dispose(): Promise<void> {
    const s = this.#synthesis;
    const m = this.#mapping;
    this.#synthesis = null;
    this.#mapping = null;
    await s?.release();
    await m?.release();
  }

  get disposed(): boolean {
    return this.#synthesis === null;
  }
}

function resolveCard(cardFile: string): Resolved {
  const bytes = readBytes(cardFile, 'model card', READ_LIMITS.jsonBytes);
  const card = parseModelCard(new TextDecoder().decode(bytes), cardFile);
  const dir = dirname(cardFile);
  const s = card.synthesis;
  const constants: Resolved['constants'] = {};
  return {
    card,
    cardBytes: bytes,
    cardFile,
    // Paths in a card are relative to its folder and stay inside it (docs/model-card.md).
    synthesisFile: resolveInside(dir, s.file, 'synthesis.file', cardFile),
    mappingFile: card.mapping ? resolveInside(dir, card.mapping.file, 'mapping.file', cardFile) : null,
    latentInput: s.latentInput,
    imageOutput: s.output,
    attributesOutput: s.attributesOutput ?? null,
    layout: { space: s.space, layers: s.space === 'w+' ? s.layers : 1, size: s.latentSize, zSize: card.mapping?.zSize ?? s.latentSize },
    imageLayout: s.layout,
    range: s.range,
    constants,
    mappingInput: card.mapping?.input ?? null,
    mappingOutput: card.mapping?.output ?? null,
    assumptions: card.mapping || s.space === 'z' ? [] : ['the card names no mapping network: latent codes are sampled as standard normal'],
  };
}

function resolveBare(file: string, mappingFile: string | null): Resolved {
  return {
    card: null,
    cardBytes: null,
    cardFile: null,
    synthesisFile: file,
    mappingFile,
    latentInput: '',
    imageOutput: '',
    attributesOutput: null,
    layout: { space: 'z', layers: 1, size: 0, zSize: 0 },
    imageLayout: 'NCHW',
    range: [-1, 1],
    constants: {},
    mappingInput: null,
    mappingOutput: null,
    // The output range is inferred from a sample batch once the interface is known (#inferRange).
    assumptions: ['no model card: interface inferred from the graph'],
  };
}

const fixed = (d: number | string | null | undefined): d is number => typeof d === 'number' && d > 0;

function checkInterface(r: Resolved, s: OnnxSummary): void {
  const file = r.synthesisFile;
  const list = (xs: TensorInterface[]) => xs.map((x) => `${x.name} ${x.elemType}[${x.dims?.map((d) => d ?? '?').join(', ') ?? '?'}]`).join(', ') || 'none';
  if (r.card) {
    const input = s.inputs.find((i) => i.name === r.latentInput);
    if (!input) throw new PlumblineError('no-latent-input', `${file}: the model card names latent input '${r.latentInput}' but the model's inputs are: ${list(s.inputs)}`, { file });
    if (input.elemType !== 'float32') throw new PlumblineError('no-latent-input', `${file}: latent input '${input.name}' is ${input.elemType}; expected float32`, { file });
    const rank = r.layout.space === 'w+' ? 3 : 2;
    if (input.dims && input.dims.length !== rank) throw new PlumblineError('no-latent-input', `${file}: latent input '${input.name}' has rank ${input.dims.length}; a '${r.layout.space}' latent needs rank ${rank}`, { file });
    const last = input.dims?.[input.dims.length - 1];
    if (fixed(last) && last !== r.layout.size) throw new PlumblineError('latent-size-mismatch', `${file}: latent input '${input.name}' has size ${last} but the model card says latentSize ${r.layout.size}`, { file });
    if (r.layout.space === 'w+' && input.dims && fixed(input.dims[1]) && input.dims[1] !== r.layout.layers) {
      throw new PlumblineError('latent-size-mismatch', `${file}: latent input '${input.name}' has ${input.dims[1]} layers but the model card says ${r.layout.layers}`, { file });
    }
    if (!s.outputs.some((o) => o.name === r.imageOutput)) throw new PlumblineError('bad-image-output', `${file}: the model card names image output '${r.imageOutput}' but the outputs are: ${list(s.outputs)}`, { file });
    if (r.attributesOutput && !s.outputs.some((o) => o.name === r.attributesOutput)) {
      throw new PlumblineError('card-invalid', `${file}: the model card names attributes output '${r.attributesOutput}' but the outputs are: ${list(s.outputs)}`, { file });
    }
    const out = s.outputs.find((o) => o.name === r.imageOutput)!;
    checkImageDims(out, r.imageLayout, file);
    for (const other of s.inputs) if (other.name !== r.latentInput && !r.card.synthesis.constants?.[other.name]) {
      throw new PlumblineError('card-invalid', `${file}: input '${other.name}' is not the latent input and the model card gives no constant for it`, { file });
    }
    for (const [name, values] of Object.entries(r.card.synthesis.constants ?? {})) r.constants[name] = { data: Float32Array.from(values), dims: [values.length] };
    return;
  }
  // No card: the first float input of rank 2 or 3 with a fixed last dimension is the latent.
  const latent = s.inputs.find((i) => i.elemType === 'float32' && i.dims && (i.dims.length === 2 || i.dims.length === 3) && fixed(i.dims[i.dims.length - 1]));
  if (!latent) throw new PlumblineError('no-latent-input', `${file}: no float latent input of shape [N, D] or [N, L, D] with a fixed D; the inputs are: ${list(s.inputs)}`, { file });
  const dims = latent.dims!;
  r.latentInput = latent.name;
  const size = dims[dims.length - 1] as number;
  if (dims.length === 3) {
    if (!fixed(dims[1])) throw new PlumblineError('no-latent-input', `${file}: latent input '${latent.name}' has a symbolic layer count; give a model card`, { file });
    r.layout = { space: 'w+', layers: dims[1], size, zSize: size };
    r.assumptions.push(`latent input '${latent.name}' read as W+ with ${dims[1]} layers of ${size}`);
  } else {
    r.layout = { space: r.mappingFile ? 'w' : 'z', layers: 1, size, zSize: size };
    r.assumptions.push(`latent input '${latent.name}' read as ${r.mappingFile ? 'W' : 'Z (standard normal)'} of size ${size}`);
  }
  if (!r.mappingFile && r.layout.space !== 'z') r.assumptions.push('no mapping network: latent codes are sampled as standard normal');
  for (const other of s.inputs) {
    if (other.name === latent.name) continue;
    if (other.elemType === 'float32' && other.dims && other.dims.slice(1).every(fixed)) {
      r.constants[other.name] = { data: new Float32Array(other.dims.slice(1).reduce((a: number, b) => a * (b as number), 1)), dims: other.dims.slice(1) as number[] };
      r.assumptions.push(`extra input '${other.name}' fed with zeros`);
    } else throw new PlumblineError('no-latent-input', `${file}: extra input '${other.name}' (${other.elemType}) cannot be filled without a model card`, { file });
  }
  const images = s.outputs.filter((o) => o.dims && o.dims.length === 4);
  if (images.length === 0) {
    const o = s.outputs[0];
    throw new PlumblineError('bad-image-output', `${file}: no image output of rank 4; output '${o?.name}' has shape [${o?.dims?.map((d) => d ?? '?').join(', ') ?? '?'}], expected [N, 3, H, W] or [N, H, W, 3]`, { file });
  }
  const nchw = images.find((o) => o.dims![1] === 3);
  const nhwc = images.find((o) => o.dims![3] === 3);
  const chosen = nchw ?? nhwc;
  if (!chosen) {
    const o = images[0];
    throw new PlumblineError('bad-image-output', `${file}: image output '${o.name}' has shape [${o.dims!.map((d) => d ?? '?').join(', ')}]: neither dimension 1 (NCHW) nor 3 (NHWC) is 3 channels`, { file });
  }
  r.imageOutput = chosen.name;
  r.imageLayout = nchw ? 'NCHW' : 'NHWC';
  r.assumptions.push(`image output '${chosen.name}' read as ${r.imageLayout}`);
}

function checkImageDims(o: TensorInterface, layout: 'NCHW' | 'NHWC', file: string): void {
  if (!o.dims) return;
  if (o.dims.length !== 4) throw new PlumblineError('bad-image-output', `${file}: image output '${o.name}' has rank ${o.dims.length}; expected 4 ([N, 3, H, W] or [N, H, W, 3])`, { file });
  const c = layout === 'NCHW' ? o.dims[1] : o.dims[3];
  if (fixed(c) && c !== 3) throw new PlumblineError('bad-image-output', `${file}: image output '${o.name}' has ${c} channels in ${layout}; expected 3`, { file });
}

function checkMapping(r: Resolved, s: OnnxSummary): void {
  const file = r.mappingFile!;
  if (!r.mappingInput) {
    const i = s.inputs.find((x) => x.elemType === 'float32' && x.dims?.length === 2 && fixed(x.dims[1]));
    if (!i) throw new PlumblineError('no-latent-input', `${file}: the mapping network has no float input of shape [N, Z]`, { file });
    r.mappingInput = i.name;
    r.layout.zSize = i.dims![1] as number;
    r.mappingOutput = s.outputs[0]?.name ?? null;
    r.assumptions.push(`mapping network input '${i.name}' (Z size ${r.layout.zSize}), output '${r.mappingOutput}'`);
  } else if (!s.inputs.some((x) => x.name === r.mappingInput)) {
    throw new PlumblineError('no-latent-input', `${file}: the model card names mapping input '${r.mappingInput}' but the inputs are ${s.inputs.map((x) => x.name).join(', ')}`, { file });
  }
  const out = s.outputs.find((o) => o.name === r.mappingOutput);
  if (!out) throw new PlumblineError('card-invalid', `${file}: mapping output '${r.mappingOutput}' not found`, { file });
  const last = out.dims?.[out.dims.length - 1];
  if (fixed(last) && last !== r.layout.size) throw new PlumblineError('latent-size-mismatch', `${file}: the mapping network outputs ${last} values per code but the synthesis latent size is ${r.layout.size}`, { file });
}

/** Rendered images in the generator's float output, [count, …] from the start of `images` (Generator.floatBatch). */
export interface FloatBatchSource {
  images: Float32Array;
  count: number;
  width: number;
  height: number;
  layout: 'NCHW' | 'NHWC';
  range: [number, number];
  /** The synthesis file, named when its output holds a value that cannot be an image value. */
  origin: string;
}

/** One rendered image in the generator's float output, for conversion elsewhere (Generator.floatImage). */
export interface FloatImageSource {
  values: Float32Array;
  width: number;
  height: number;
  layout: 'NCHW' | 'NHWC';
  range: [number, number];
  /** The synthesis file, named when its output holds a value that cannot be an image value. */
  origin: string;
}
