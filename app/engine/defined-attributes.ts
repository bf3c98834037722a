// Attributes the lead defines from tagged or rated seeds: render the seeds, describe each image
// with the fixed descriptor, fit and cross-validate (app/core/attributes/fit.ts), and save the
// scorer in the project as attributes/<name>.json. A saved scorer is an attribute source for
// audits and boundaries beside the card's attributes, the image measures and ONNX scorer cards.
import { existsSync, readFileSync, readdirSync } from 'node:fs';
import { join, resolve } from 'node:path';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { PlumblineError } from '../core/errors.ts';
import type { RgbaImage } from '../core/image.ts';
import { IMAGE_MEASURES, measureImage } from '../core/scorers/measures.ts';
import { describeImage, descriptorFamilies, descriptorSpec, type MeasureSource } from '../core/attributes/descriptor.ts';
import { fitDefinedAttribute } from '../core/attributes/fit.ts';
import { accuracyText, definedAttributeDoc, parseDefinedAttribute, sameDescriptor, scoreDescriptor, type DefinedAttributeDoc, type TagSet } from '../core/attributes/scorer-file.ts';
import type { Generator } from './generator.ts';
import type { DefinedAttributeInfo } from '../protocol/messages.ts';

/**
 * Today's built-in measures as a descriptor source. `known` lets a caller hand in measures it has
 * already computed for an image (the audit measures every image once), keyed by the image object.
 */
export function builtInMeasureSource(known?: WeakMap<RgbaImage, ArrayLike<number>>): MeasureSource {
  // A measure whose period changes from image to image (orientation: 360°/k with k read from the
  // shape) has no one scale a linear model could weigh; it is left out of the descriptor.
  const kept = IMAGE_MEASURES.map((m, i) => ({ m, i })).filter(({ m }) => !(m as { periodFrom?: string }).periodFrom);
  return {
    names: kept.map(({ m }) => m.name),
    periods: kept.map(({ m }) => m.period),
    measure: (img) => {
      const all = known?.get(img) ?? measureImage(img);
      return kept.map(({ i }) => all[i]);
    },
  };
}

/** A defined attribute ready to score images. */
export class DefinedAttribute {
  constructor(readonly doc: DefinedAttributeDoc, readonly file: string | null) {}

  get name(): string {
    return this.doc.name;
  }

  get accuracy(): string {
    return accuracyText(this.doc.accuracy);
  }

  /** Loads a scorer file and checks it was fitted on the descriptor this build computes. */
  static load(path: string): DefinedAttribute {
    const file = resolve(path);
    if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: defined-attribute file not found`, { file });
    const doc = parseDefinedAttribute(readFileSync(file, 'utf8'), file);
    const now = descriptorSpec(builtInMeasureSource());
    if (!sameDescriptor(doc.descriptor, now)) {
      const was = doc.descriptor.measures?.map((m) => m.name).join(', ');
      throw new PlumblineError('card-invalid', `${file}: '${doc.name}' was fitted on another image descriptor (measures then: ${was}; now: ${now.measures.map((m) => m.name).join(', ')}); define it again from its seeds (they are in the file)`, { file });
    }
    return new DefinedAttribute(doc, file);
  }

  /** Scores images; `source` may carry measures already computed for them. */
  score(images: RgbaImage[], source: MeasureSource = builtInMeasureSource()): Float64Array {
    return Float64Array.from(images, (img) => scoreDescriptor(this.doc, describeImage(img, source, this.doc.descriptor)));
  }
}

export interface DefineOptions {
  psi?: number;
  /** Seed of the cross-validation folds. */
  seed?: number;
}

export interface DefineResult {
  doc: DefinedAttributeDoc;
  /** Why the attribute must not be used (below the accuracy floor), or null. */
  refused: string | null;
}

/**
 * Descriptors of recently tagged seeds by generator fingerprint, ψ and seed: a lead adds a few
 * tags and defines again, or defines several attributes from overlapping seeds, without
 * re-rendering. The descriptor is fixed, so a cached row is the row.
 */
const described = new Map<string, Float64Array>();
const DESCRIBED_LIMIT = 4096;
function remember(key: string, row: Float64Array): void {
  if (described.size >= DESCRIBED_LIMIT) described.delete(described.keys().next().value!);
  described.set(key, row);
}

/**
 * Renders the tagged seeds, describes them and fits the attribute, as a job: yields progress
 * after each render batch (the caller may stop pulling to cancel), returns the fit.
 */
export async function* defineAttributeJob(gen: Generator, set: TagSet, options: DefineOptions = {}): AsyncGenerator<{ done: number; total: number; label: string }, DefineResult, void> {
  const psi = set.psi ?? options.psi ?? gen.info.defaultPsi;
  const source = builtInMeasureSource();
  const spec = descriptorSpec(source);
  const families = descriptorFamilies(spec);
  const rows: Float64Array[] = [];
  const total = Math.ceil(set.seeds.length / gen.batchSize) + 1;
  let done = 0;
  const key = (seed: number) => `${gen.info.fingerprint}:${psi}:${seed}`;
  for (let at = 0; at < set.seeds.length; at += gen.batchSize) {
    const chunk = set.seeds.slice(at, at + gen.batchSize);
    const missing = chunk.filter((seed) => !described.has(key(seed)));
    if (missing.length) {
      const out = await gen.renderSeeds(missing, psi, []);
      missing.forEach((seed, i) => remember(key(seed), describeImage(gen.toRgba(out.images, i), source, spec)));
    }
    for (const seed of chunk) rows.push(described.get(key(seed))!);
    yield { done: ++done, total, label: `describing tagged seeds for ${set.name}` };
  }
  let fit;
  try {
    fit = fitDefinedAttribute(set.name, rows, set.labels, set.kind, options.seed ?? 1, families);
  } catch (err) {
    throw new PlumblineError('bad-request', (err as Error).message);
  }
  yield { done: ++done, total, label: `cross-validating ${set.name}` };
  const doc = definedAttributeDoc(set, fit, spec, { name: gen.info.name, fingerprint: gen.info.fingerprint }, psi, true);
  return { doc, refused: fit.refused };
}

/** defineAttributeJob run to the end. */
export async function defineAttribute(gen: Generator, set: TagSet, options: DefineOptions = {}): Promise<DefineResult> {
  const job = defineAttributeJob(gen, set, options);
  for (;;) {
    const step = await job.next();
    if (step.done) return step.value;
  }
}

/** What the app shows of a defined attribute (accuracy included wherever it is used). */
export function definedAttributeInfo(doc: DefinedAttributeDoc, file: string | null): DefinedAttributeInfo {
  const a = doc.accuracy;
  return {
    name: doc.name,
    kind: doc.kind,
    metric: a.metric,
    value: a.value,
    floor: a.floor,
    folds: a.folds,
    has: 'has' in a.counts ? a.counts.has : a.counts.ratings,
    lacks: 'lacks' in a.counts ? a.counts.lacks : 0,
    noisy: a.noisy,
    note: a.note,
    accuracy: accuracyText(a),
    file,
  };
}

/** Where a project keeps its defined attributes. */
export const ATTRIBUTES_DIR = 'attributes';

/** Saves a defined attribute into a project folder (atomic), returning the file written. */
export function saveDefinedAttribute(projectDir: string, doc: DefinedAttributeDoc): string {
  const file = join(resolve(projectDir), ATTRIBUTES_DIR, `${doc.name}.json`);
  writeFileAtomic(file, JSON.stringify(doc, null, 1) + '\n');
  return file;
}

/** Every defined attribute saved in a project (none when it has no attributes folder). */
export function loadProjectAttributes(projectDir: string): DefinedAttribute[] {
  const dir = join(resolve(projectDir), ATTRIBUTES_DIR);
  if (!existsSync(dir)) return [];
  return readdirSync(dir)
    .filter((f) => f.endsWith('.json'))
    .sort()
    .map((f) => DefinedAttribute.load(join(dir, f)));
}

/**
 * The engine's defined attributes: those saved in the open project, plus (without a project)
 * those defined in this session. What the host's attributes.define / attributes.list and the
 * audit's `defined` parameter go through.
 */
export class DefinedAttributeStore {
  #session = new Map<string, DefinedAttribute>();

  /** Every defined attribute: the project's files, else this session's. */
  all(projectDir: string | null): DefinedAttribute[] {
    return projectDir ? loadProjectAttributes(projectDir) : [...this.#session.values()];
  }

  /** Forgets this session's attributes (they describe images of the generator they were fitted on). */
  clearSession(): void {
    this.#session.clear();
  }

  list(projectDir: string | null): { attributes: DefinedAttributeInfo[] } {
    return { attributes: this.all(projectDir).map((a) => definedAttributeInfo(a.doc, a.file)) };
  }

  /** The named attributes, or a clear error naming the missing ones. */
  pick(projectDir: string | null, names: string[], generator: { fingerprint: string }): DefinedAttribute[] {
    const all = this.all(projectDir);
    return names.map((n) => {
      const a = all.find((x) => x.name === n);
      if (!a) throw new PlumblineError('bad-request', `no defined attribute named '${n}'${all.length ? `; defined: ${all.map((x) => x.name).join(', ')}` : ' (none are defined yet)'}`);
      if (a.doc.generator.fingerprint !== generator.fingerprint) throw new PlumblineError('bad-request', `'${n}' was defined on images of another generator (${a.doc.generator.name}); define it again on this one`);
      return a;
    });
  }

  /** Fits from has/lacks seeds; saves into the project (or keeps for the session) unless refused. */
  async *define(gen: Generator, projectDir: string | null, p: { name: string; has: number[]; lacks: number[]; psi: number }): AsyncGenerator<{ done: number; total: number; label: string }, { attribute: DefinedAttributeInfo; refused: string | null }, void> {
    const both = p.has.filter((s) => p.lacks.includes(s));
    if (both.length) throw new PlumblineError('bad-request', `seed(s) ${both.slice(0, 5).join(', ')} are tagged both has and lacks '${p.name}'`);
    const set: TagSet = { name: p.name, kind: 'tags', seeds: [...p.has, ...p.lacks], labels: [...p.has.map(() => 1), ...p.lacks.map(() => 0)], psi: p.psi };
    const { doc, refused } = yield* defineAttributeJob(gen, set);
    let file: string | null = null;
    if (!refused) {
      if (projectDir) file = saveDefinedAttribute(projectDir, doc);
      else this.#session.set(doc.name, new DefinedAttribute(doc, null));
    }
    return { attribute: definedAttributeInfo(doc, file), refused };
  }
}
