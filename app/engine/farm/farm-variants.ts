// Variant sets on a farm: the recipe's (setting × seed chunk) units, four batches each, become farm units; each
// result is checked (files, seeds, then each PNG fetched from its Redis key: length, hash, PNG
// header and size) before its images are written.
import { join } from 'node:path';
import { writeFileAtomic } from '../../core/atomic-write.ts';
import { decodeOwnPng } from '../../core/image.ts';
import type { Generator } from '../generator.ts';
import { runVariantSet, variantFile, type Recipe, type VariantDirection, type VariantImage, type VariantOptions, type VariantSetResult, type VariantUnit, type VariantUnitRunner } from '../variants.ts';
import { chosenOutputFolder } from '../../core/path-policy.ts';
import type { Farm, FarmUnit, RunProgress } from './coordinator.ts';
import { variantUnitResultSchema, type VariantUnitResult } from './protocol.ts';
import { fetchParts, removeParts } from './result-store.ts';

/**
 * Batches per farm unit. A unit's fixed costs (taking it from the queue, handing its result back,
 * and encoding its last batch, which nothing overlaps) are paid once per unit; four batches make
 * them a few percent of the unit. Units start on batch boundaries, so the batches are one
 * machine's.
 */
export const BATCHES_PER_VARIANT_UNIT = 4;

/** PNG signature (ISO/IEC 15948 §5.2). */
const PNG_SIGNATURE = [137, 80, 78, 71, 13, 10, 26, 10];

export interface FarmRunOptions {
  modelPath: string;
  mappingPath?: string;
  publish?: boolean;
  isCancelled?: () => boolean;
  onProgress?: (p: RunProgress) => void;
  /** Told when a unit leaves the worker that held it (the worker died, stalled or failed the attempt) and is retried. */
  onNote?: (line: string) => void;
}

export function farmVariantRunner(farm: Farm, gen: Generator, recipe: Recipe, directions: VariantDirection[], out: string, o: FarmRunOptions): VariantUnitRunner {
  const { width, height } = gen.imageSize();
  return async function* (plan: VariantUnit[]) {
    if (plan.length === 0) return;
    const units: FarmUnit[] = plan.map((u) => {
      const seeds = u.seeds.map((i) => recipe.seeds[i]);
      return {
        name: `${recipe.name} '${recipe.settings[u.setting].label}' seeds ${seeds[0]}…${seeds[seeds.length - 1]}`,
        data: { kind: 'variants', recipe, directions: directions.map((d) => ({ name: d.name, vector: Array.from(d.vector), layers: d.layers, sigma: d.sigma })), unit: u, batch: gen.batchSize },
      };
    });
    const planOf = new Map(units.map((u, k) => [u, plan[k]]));
    const ready: VariantImage[][] = [];
    // A checked unit's PNG bytes, fetched from Redis, until it is merged.
    const fetched = new Map<FarmUnit, Buffer[]>();
    const check = async (unit: FarmUnit, r: VariantUnitResult, where: { runId: string; jobId: string }) => {
      const u = planOf.get(unit)!;
      const label = recipe.settings[u.setting].label;
      if (r.images.length !== u.seeds.length) throw new Error(`${r.images.length} images for ${u.seeds.length} seeds`);
      r.images.forEach((img, k) => {
        const seed = recipe.seeds[u.seeds[k]];
        if (img.seed !== seed || img.file !== variantFile(label, seed)) throw new Error(`image ${k} is ${img.file} (seed ${img.seed}), expected ${variantFile(label, seed)}`);
      });
      // Each PNG from its key: present, of the stated length and hash (result-store.ts).
      const all = await fetchParts(farm.redis, where.runId, where.jobId, r.images.map((img) => ({ ...img, what: img.file })));
      all.forEach((bytes, k) => {
        const img = r.images[k];
        if (bytes.length < 24 || PNG_SIGNATURE.some((b, i) => bytes[i] !== b)) throw new Error(`${img.file} is not a PNG`);
        const w = bytes.readUInt32BE(16);
        const h = bytes.readUInt32BE(20);
        if (w !== width || h !== height) throw new Error(`${img.file} is ${w}×${h}, the generator renders ${width}×${height}`);
      });
      fetched.set(unit, all);
      return r.images.length;
    };
    const accept = async (unit: FarmUnit, r: VariantUnitResult) => {
      const u = planOf.get(unit)!;
      const label = recipe.settings[u.setting].label;
      const all = fetched.get(unit)!;
      fetched.delete(unit);
      ready.push(r.images.map((img, k) => {
        const bytes = all[k];
        writeFileAtomic(join(out, img.file), bytes, { durable: false });
        const thumb = recipe.seeds.indexOf(img.seed) < 8 ? decodeOwnPng(bytes, img.file) : undefined;
        return { file: img.file, seed: img.seed, setting: label, sha256: img.sha256, thumb };
      }));
      // Merged: the unit's bytes leave Redis (if Redis is away now, the run's clean-up or the keys' expiry takes them).
      await removeParts(farm.redis, r.images.map((img) => img.key)).catch(() => {});
    };
    const run = farm.run({
      kind: 'variants', label: `variants ${recipe.name}`, units, schema: variantUnitResultSchema, check,
      model: { fingerprint: gen.info.fingerprint, files: gen.info.files, path: o.modelPath, mappingPath: o.mappingPath }, publish: o.publish, isCancelled: o.isCancelled, onNote: o.onNote,
    }, accept);
    for await (const p of run) {
      o.onProgress?.(p);
      while (ready.length) yield ready.shift()!;
    }
    while (ready.length) yield ready.shift()!;
  };
}

/** A variant set rendered on a farm: the same files, manifest and contact sheet as on this machine. */
export async function* renderVariantsOnFarm(farm: Farm, gen: Generator, recipe: Recipe, directions: VariantDirection[], outFolder: string, o: FarmRunOptions & VariantOptions): AsyncGenerator<{ done: number; total: number; label: string }, VariantSetResult, void> {
  // The same output-folder rule as on this machine (app/core/path-policy.ts).
  const out = chosenOutputFolder(outFolder, 'the variant-set folder');
  return yield* runVariantSet({ name: gen.info.name, fingerprint: gen.info.fingerprint, centreFromCard: !!gen.card?.truncation.centre }, recipe, directions, out, gen.batchSize * BATCHES_PER_VARIANT_UNIT, farmVariantRunner(farm, gen, recipe, directions, out, o), o);
}
