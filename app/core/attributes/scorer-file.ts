// Files of defined attributes: the tags file a lead writes (which seeds have an attribute, which
// lack it, or a rating per seed) and the scorer file a fitted attribute is saved as inside the
// project (attributes/<name>.json): descriptor spec, standardisation, weights, cross-validated
// accuracy and the seeds it came from, so it can be re-applied, checked and re-fitted.
import { z } from 'zod';
import { parseJsonFile } from '../json-file.ts';
import { PlumblineError } from '../errors.ts';
import type { DescriptorSpec } from './descriptor.ts';
import type { DefinedFit } from './fit.ts';

export const DEFINED_FORMAT = 'plumbline.defined-attribute';

const seedList = z.array(z.number().int().min(0).max(0xffffffff));
const attributeName = z.string().regex(/^[A-Za-z][A-Za-z0-9_.-]{0,63}$/, 'a name of letters, digits, _ . - starting with a letter (at most 64)');
const ratingMap = z.record(z.string().regex(/^\d+$/, 'a seed (a whole number)'), z.number().finite());

/** One attribute in a tags file: has/lacks seed lists, or ratings ({ "ratings": { seed: value } } or just { seed: value }). */
const tagEntry = z.union([
  z.object({ has: seedList, lacks: seedList, psi: z.number().min(0).max(2).optional() }).strict(),
  z.object({ ratings: ratingMap, psi: z.number().min(0).max(2).optional() }).strict(),
  ratingMap,
]);
const tagsFileSchema = z.record(attributeName, tagEntry);

export interface TagSet {
  name: string;
  kind: 'tags' | 'ratings';
  seeds: number[];
  /** 1 has / 0 lacks for tags; the value for ratings. */
  labels: number[];
  psi?: number;
}

/** Reads a tags file: { name: { has: [...], lacks: [...] } | { ratings: { seed: value } } | { seed: value } }. */
export function parseTagsFile(text: string, file: string): TagSet[] {
  const doc = parseJsonFile(tagsFileSchema, text, file, 'not a valid tags file (attribute name → { has: [seeds], lacks: [seeds] } or { ratings: { seed: value } })', 'bad-request');
  const sets = Object.entries(doc).map(([name, entry]): TagSet => {
    if ('has' in entry && Array.isArray(entry.has)) {
      const e = entry as { has: number[]; lacks: number[]; psi?: number };
      const both = e.has.filter((s) => e.lacks.includes(s));
      if (both.length) throw new PlumblineError('bad-request', `${file}: '${name}' tags seed(s) ${both.slice(0, 5).join(', ')} as both having and lacking it`, { file });
      const has = [...new Set(e.has)];
      const lacks = [...new Set(e.lacks)];
      return { name, kind: 'tags', seeds: [...has, ...lacks], labels: [...has.map(() => 1), ...lacks.map(() => 0)], psi: e.psi };
    }
    const e = ('ratings' in entry && typeof entry.ratings === 'object' ? entry : { ratings: entry }) as { ratings: Record<string, number>; psi?: number };
    const pairs = Object.entries(e.ratings);
    return { name, kind: 'ratings', seeds: pairs.map(([s]) => Number(s)), labels: pairs.map(([, v]) => v), psi: e.psi };
  });
  if (!sets.length) throw new PlumblineError('bad-request', `${file}: the tags file defines no attributes`, { file });
  return sets;
}

const accuracySchema = z.object({
  metric: z.enum(['auc', 'r2']),
  value: z.number(),
  perFold: z.array(z.number().nullable()),
  folds: z.number().int().min(2),
  seed: z.number().int().min(0),
  floor: z.number(),
  counts: z.union([z.object({ has: z.number().int(), lacks: z.number().int() }), z.object({ ratings: z.number().int() })]),
  noisy: z.boolean(),
  note: z.string().nullable(),
});

export const definedAttributeSchema = z.object({
  format: z.literal(DEFINED_FORMAT),
  version: z.literal(1),
  name: attributeName,
  kind: z.enum(['tags', 'ratings']),
  unit: z.string(),
  createdAt: z.string(),
  generator: z.object({ name: z.string(), fingerprint: z.string() }),
  /** Truncation ψ the tagged seeds were rendered at. */
  psi: z.number(),
  source: z.object({ has: seedList.optional(), lacks: seedList.optional(), ratings: ratingMap.optional() }),
  descriptor: z.custom<DescriptorSpec>((v) => typeof v === 'object' && v !== null && typeof (v as { length?: unknown }).length === 'number', 'a descriptor spec'),
  standardisation: z.object({ mean: z.array(z.number()), std: z.array(z.number().min(0)), families: z.boolean() }),
  model: z.object({ type: z.enum(['logistic', 'ridge']), lambda: z.number().positive(), weights: z.array(z.number()), intercept: z.number() }),
  accuracy: accuracySchema,
});
export type DefinedAttributeDoc = z.infer<typeof definedAttributeSchema>;

export function parseDefinedAttribute(text: string, file: string): DefinedAttributeDoc {
  const doc = parseJsonFile(definedAttributeSchema, text, file, 'not a valid defined-attribute file');
  const d = doc.descriptor.length;
  for (const [what, len] of [['standardisation.mean', doc.standardisation.mean.length], ['standardisation.std', doc.standardisation.std.length], ['model.weights', doc.model.weights.length]] as const) {
    if (len !== d) throw new PlumblineError('card-invalid', `${file}: ${what} has ${len} values but the descriptor has ${d}`, { file });
  }
  return doc;
}

export function definedAttributeDoc(set: TagSet, fit: DefinedFit, descriptor: DescriptorSpec, generator: { name: string; fingerprint: string }, psi: number, families: boolean): DefinedAttributeDoc {
  return {
    format: DEFINED_FORMAT,
    version: 1,
    name: set.name,
    kind: set.kind,
    unit: set.kind === 'tags' ? 'log-odds of having it (defined from tags)' : 'predicted rating (defined from ratings)',
    createdAt: new Date().toISOString(),
    generator,
    psi,
    source: set.kind === 'tags'
      ? { has: set.seeds.filter((_, i) => set.labels[i] === 1), lacks: set.seeds.filter((_, i) => set.labels[i] === 0) }
      : { ratings: Object.fromEntries(set.seeds.map((s, i) => [String(s), set.labels[i]])) },
    descriptor,
    standardisation: { mean: fit.standardisation.mean, std: fit.standardisation.std, families },
    model: { type: fit.kind === 'tags' ? 'logistic' : 'ridge', lambda: fit.lambda, weights: Array.from(fit.model.weights), intercept: fit.model.intercept },
    accuracy: { ...fit.accuracy, perFold: fit.accuracy.perFold.map((v) => (Number.isFinite(v) ? v : null)) },
  };
}

/** The attribute's value for one descriptor row: w·standardised(x) + b (log-odds for tags, a rating for ratings). */
export function scoreDescriptor(doc: DefinedAttributeDoc, row: ArrayLike<number>): number {
  const { mean, std } = doc.standardisation;
  let s = doc.model.intercept;
  for (let j = 0; j < mean.length; j++) if (std[j] > 0 && Number.isFinite(row[j])) s += doc.model.weights[j] * ((row[j] - mean[j]) / std[j]);
  return s;
}

/** "AUC 0.91 (5-fold CV; 40 have / 40 lack it)" — the accuracy wherever the attribute is used. */
export function accuracyText(a: DefinedAttributeDoc['accuracy']): string {
  const metric = a.metric === 'auc' ? 'AUC' : 'R²';
  const counts = 'has' in a.counts ? `${a.counts.has} have / ${a.counts.lacks} lack it` : `${a.counts.ratings} rated seeds`;
  return `${metric} ${a.value.toFixed(2)} (${a.folds}-fold CV; ${counts}; floor ${a.floor})${a.noisy ? ' — few examples: the estimate is noisy' : ''}`;
}

/** True when a saved scorer was fitted on exactly the descriptor this build computes. */
export function sameDescriptor(a: DescriptorSpec, b: DescriptorSpec): boolean {
  return JSON.stringify(a) === JSON.stringify(b);
}
