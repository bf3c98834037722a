// Variant sets: a named recipe (base seeds × direction settings at one truncation) rendered as
// a resumable batch job into a folder of PNGs, a manifest that reproduces every image bit for
// bit, and a labelled contact sheet.
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { decode } from 'fast-png';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodePng, type RgbaImage } from '../core/image.ts';
import { applyEdits, directionEdit } from '../core/latent.ts';
import { PlumblineError } from '../core/errors.ts';
import { parseJsonFile } from '../core/json-file.ts';
import { drawText, GLYPH_HEIGHT } from '../core/label-font.ts';
import type { Generator } from './generator.ts';
import { sharedPngWriter } from './png-writer.ts';

export const recipeSchema = z.object({
  format: z.literal('plumbline.variant-recipe'),
  version: z.literal(1),
  name: z.string().regex(/^[A-Za-z0-9_.-]{1,80}$/),
  seeds: z.array(z.number().int().min(0).max(0xffffffff)).min(1).max(10_000),
  psi: z.number().min(0).max(2).default(0.7),
  settings: z.array(z.object({ label: z.string().regex(/^[A-Za-z0-9_.=+-]{1,60}$/), strengths: z.record(z.string(), z.number().min(-20).max(20)) })).min(1).max(1000),
});
export type Recipe = z.infer<typeof recipeSchema>;

export interface VariantDirection {
  name: string;
  vector: Float32Array;
  layers: [number, number] | null;
  sigma: number;
  safeRange?: [number, number];
}

const hashOf = (d: VariantDirection) => createHash('sha256').update(new Uint8Array(d.vector.buffer, d.vector.byteOffset, d.vector.byteLength)).update(JSON.stringify(d.layers)).digest('hex');

export function parseRecipe(text: string, file: string): Recipe {
  return parseJsonFile(recipeSchema, text, file, 'invalid variant recipe');
}

/** One work unit of a variant set: one setting over a chunk of the recipe's seeds (indices into `seeds`). */
export interface VariantUnit {
  setting: number;
  seeds: number[];
}

/** An image finished and written: what the manifest records, plus pixels for the contact sheet. */
export interface VariantImage {
  file: string;
  seed: number;
  setting: string;
  sha256: string;
  thumb?: RgbaImage;
}

/** Renders units and yields each unit's written images as they finish (in any order). */
export type VariantUnitRunner = (units: VariantUnit[]) => AsyncGenerator<VariantImage[], void, void>;

export const variantFile = (label: string, seed: number) => `${label}/seed-${String(seed).padStart(6, '0')}.png`;
/** Contact sheets show the first eight seeds of each setting. */
const SHEET_SEEDS = 8;

/** Units in a fixed order: setting by setting, seeds in chunks of `perUnit` — the same on one machine and on a farm. */
export function planVariantUnits(recipe: Recipe, perUnit: number): VariantUnit[] {
  const units: VariantUnit[] = [];
  recipe.settings.forEach((_, setting) => {
    for (let at = 0; at < recipe.seeds.length; at += perUnit) units.push({ setting, seeds: recipe.seeds.slice(at, at + perUnit).map((_, k) => at + k) });
  });
  return units;
}

/** Refuses unknown directions, and strengths outside an audited safe range unless forced. */
export function checkRecipe(recipe: Recipe, directions: VariantDirection[], force = false): void {
  const byName = new Map(directions.map((d) => [d.name, d]));
  for (const s of recipe.settings)
    for (const [name, strength] of Object.entries(s.strengths)) {
      const d = byName.get(name);
      if (!d) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ')}`);
      if (d.safeRange && !force && (strength < d.safeRange[0] || strength > d.safeRange[1])) throw new PlumblineError('bad-request', `setting '${s.label}': ${name}=${strength} is outside its audited safe range ${d.safeRange[0]}…${d.safeRange[1]} (use --force to render anyway)`);
    }
}

/** The pixels of one unit: its seeds' codes, the setting's edits, one synthesis call. */
export async function renderVariantUnit(gen: Generator, recipe: Recipe, directions: VariantDirection[], unit: VariantUnit): Promise<{ file: string; seed: number; image: RgbaImage }[]> {
  const byName = new Map(directions.map((d) => [d.name, d]));
  const setting = recipe.settings[unit.setting];
  const seeds = unit.seeds.map((i) => recipe.seeds[i]);
  const codes = await gen.codesForSeeds(seeds, recipe.psi);
  applyEdits(codes, gen.layout, Object.entries(setting.strengths).map(([name, strength]) => directionEdit(byName.get(name)!, strength)));
  const r = await gen.synthesize(codes, seeds.length);
  return seeds.map((seed, k) => ({ file: variantFile(setting.label, seed), seed, image: gen.toRgba(r.images, k) }));
}

/** Renders a recipe on this machine; yields progress between batches. Existing images with matching hashes are kept (resume). */
export function renderVariants(gen: Generator, recipe: Recipe, directions: VariantDirection[], out: string, options: { force?: boolean } = {}): AsyncGenerator<{ done: number; total: number; label: string }, { manifest: object; rendered: number; reused: number }, void> {
  return runVariantSet({ name: gen.info.name, fingerprint: gen.info.fingerprint, centreFromCard: !!gen.card?.truncation.centre }, recipe, directions, out, gen.batchSize, localUnitRunner(gen, recipe, directions, out), options);
}

/** Renders units one batch at a time; PNG encoding and writing run on the pool's threads meanwhile. */
export function localUnitRunner(gen: Generator, recipe: Recipe, directions: VariantDirection[], out: string): VariantUnitRunner {
  return async function* (units) {
    const pool = sharedPngWriter();
    const inFlight: Promise<VariantImage[]>[] = [];
    try {
      for (const unit of units) {
        const images = await renderVariantUnit(gen, recipe, directions, unit);
        const label = recipe.settings[unit.setting].label;
        inFlight.push(Promise.all(images.map(async ({ file, seed, image }) => {
          const thumb = recipe.seeds.indexOf(seed) < SHEET_SEEDS ? { ...image, data: image.data.slice() } : undefined;
          const w = await pool.write(image, join(out, file), { durable: false });
          return { file, seed, setting: label, sha256: w.sha256, thumb };
        })));
        // Keep at most about two batches of images in flight.
        while (inFlight.length > 2) yield await inFlight.shift()!;
      }
      while (inFlight.length) yield await inFlight.shift()!;
    } finally {
      // On cancel or error, writes already queued still settle (each file is whole or absent).
      await Promise.allSettled(inFlight);
    }
  };
}

/**
 * The variant-set job around any unit runner (this machine or a farm): resume by hash, interim
 * and final manifests, and the contact sheet. `perUnit` seeds per unit.
 */
export async function* runVariantSet(
  generator: { name: string; fingerprint: string; centreFromCard: boolean },
  recipe: Recipe, directions: VariantDirection[], out: string, perUnit: number, runUnits: VariantUnitRunner, options: { force?: boolean } = {},
): AsyncGenerator<{ done: number; total: number; label: string }, { manifest: object; rendered: number; reused: number }, void> {
  checkRecipe(recipe, directions, options.force);
  const manifestFile = join(out, 'manifest.json');
  const previous = existsSync(manifestFile) ? (JSON.parse(readFileSync(manifestFile, 'utf8')) as { generator?: { fingerprint: string }; images?: { file: string; sha256: string }[] }) : null;
  if (previous?.generator && previous.generator.fingerprint !== generator.fingerprint) throw new PlumblineError('bad-request', `${manifestFile}: this folder holds variants of another generator; choose another --out`);
  const known = new Map((previous?.images ?? []).map((i) => [i.file, i.sha256]));
  const images: { file: string; seed: number; setting: string; sha256: string }[] = [];
  const thumbs = new Map<string, RgbaImage>();
  const total = recipe.seeds.length * recipe.settings.length;
  let rendered = 0;
  let reused = 0;
  const writeManifest = (complete: boolean) =>
    writeFileAtomic(manifestFile, JSON.stringify({
      format: 'plumbline.variants', version: 1, recipe: recipe.name, complete, createdAt: new Date().toISOString(),
      generator: { name: generator.name, fingerprint: generator.fingerprint },
      truncation: { psi: recipe.psi, centre: generator.centreFromCard ? 'model card' : 'estimated' },
      seedConvention: 'plumbline latentForSeed (xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller)',
      latents: recipe.seeds.map((seed) => ({ seed })),
      directions: directions.map((d) => ({ name: d.name, sha256: hashOf(d), sigma: d.sigma, layers: d.layers })),
      settings: recipe.settings,
      images,
      // Interim manifests skip the fsync: a resumed run re-checks every image by hash anyway.
    }, null, 2) + '\n', { durable: complete });
  // Resume: images already on disk with their recorded hash are kept; units shrink to what is missing.
  const units: VariantUnit[] = [];
  for (const unit of planVariantUnits(recipe, perUnit)) {
    const label = recipe.settings[unit.setting].label;
    const missing = unit.seeds.filter((i) => {
      const file = variantFile(label, recipe.seeds[i]);
      const path = join(out, file);
      if (!(known.has(file) && existsSync(path))) return true;
      const bytes = readFileSync(path);
      if (sha(bytes) !== known.get(file)) return true;
      images.push({ file, seed: recipe.seeds[i], setting: label, sha256: known.get(file)! });
      if (i < SHEET_SEEDS) {
        const png = decode(bytes);
        thumbs.set(file, { width: png.width, height: png.height, data: new Uint8ClampedArray(png.data) });
      }
      reused++;
      return false;
    });
    if (missing.length) units.push({ setting: unit.setting, seeds: missing });
  }
  const runner = runUnits(units);
  try {
    for (;;) {
      const step = await runner.next();
      if (step.done) break;
      for (const { thumb, ...image } of step.value) {
        images.push(image);
        if (thumb) thumbs.set(image.file, thumb);
        rendered++;
      }
      writeManifest(false);
      yield { done: rendered + reused, total, label: `rendering ${recipe.name}` };
    }
  } finally {
    await runner.return();
  }
  images.sort((a, b) => a.file.localeCompare(b.file));
  writeManifest(true);
  writeFileAtomic(join(out, 'contact-sheet.png'), encodePng(contactSheet(recipe, thumbs)));
  return { manifest: JSON.parse(readFileSync(manifestFile, 'utf8')), rendered, reused };
}

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** Rows: settings (labelled); columns: up to 8 seeds (labelled). */
function contactSheet(recipe: Recipe, thumbs: Map<string, RgbaImage>): RgbaImage {
  const seeds = recipe.seeds.slice(0, 8);
  const cell = 96;
  const gap = 6;
  const labelW = 8 + Math.max(...recipe.settings.map((s) => s.label.length)) * 6 * 2;
  const header = 42;
  const width = labelW + seeds.length * (cell + gap) + gap;
  const height = header + recipe.settings.length * (cell + gap) + gap;
  const data = new Uint8ClampedArray(width * height * 4);
  for (let p = 0; p < width * height; p++) data.set([20, 24, 29, 255], p * 4);
  drawText(data, width, height, `${recipe.name}  psi ${recipe.psi}`, 6, 6, [230, 233, 236], 2);
  seeds.forEach((seed, c) => drawText(data, width, height, String(seed), labelW + c * (cell + gap) + 2, header - GLYPH_HEIGHT - 2, [149, 161, 173]));
  recipe.settings.forEach((s, r) => {
    const y = header + r * (cell + gap);
    drawText(data, width, height, s.label, 6, y + cell / 2 - GLYPH_HEIGHT, [79, 179, 161], 2);
    seeds.forEach((seed, c) => {
      const img = thumbs.get(variantFile(s.label, seed));
      if (!img) return;
      const f = img.width / cell;
      for (let yy = 0; yy < cell; yy++)
        for (let xx = 0; xx < cell; xx++) {
          const sx = Math.min(img.width - 1, Math.floor(xx * f));
          const sy = Math.min(img.height - 1, Math.floor(yy * f));
          data.set(img.data.subarray((sy * img.width + sx) * 4, (sy * img.width + sx) * 4 + 4), ((y + yy) * width + labelW + c * (cell + gap) + xx) * 4);
        }
    });
  });
  return { width, height, data };
}
