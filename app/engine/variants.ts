// Variant sets: a named recipe (base seeds × direction settings at one truncation) rendered as
// a resumable batch job into a folder of PNGs, a manifest that reproduces every image bit for
// bit, and a labelled contact sheet. Resuming keeps an image only when the recipe entry that
// made it is unchanged: each image carries a key hashing everything that determines its pixels.
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
import { chosenOutputFolder, readTextFile } from '../core/path-policy.ts';
import { variantLabelSchema } from '../protocol/names.ts';
import { drawText, GLYPH_HEIGHT } from '../core/label-font.ts';
import type { Generator } from './generator.ts';
import { sharedPngWriter } from './png-writer.ts';
import { checkUse, useViolations, type Override, type ReviewStatus, type Violation } from '../core/signoff-rules.ts';

export const recipeSchema = z.object({
  format: z.literal('plumbline.variant-recipe'),
  version: z.literal(1),
  name: z.string().regex(/^[A-Za-z0-9_.-]{1,80}$/),
  seeds: z.array(z.number().int().min(0).max(0xffffffff)).min(1).max(10_000),
  psi: z.number().min(0).max(2).default(0.7),
  settings: z.array(z.object({ label: variantLabelSchema, strengths: z.record(z.string(), z.number().min(-20).max(20)) })).min(1).max(1000),
});
export type Recipe = z.infer<typeof recipeSchema>;

export interface VariantDirection {
  name: string;
  vector: Float32Array;
  layers: [number, number] | null;
  sigma: number;
  safeRange?: [number, number];
  /** Sign-off status where known (a pack's directions are approved; a bare file's are unknown). */
  status?: ReviewStatus | null;
}

export interface VariantOptions {
  /** Force what the use rules refuse, with a written reason (recorded in the manifest). */
  force?: Override | null;
  /** A decision the caller already took with the rule module (the engine host does, with project sign-offs). */
  forced?: { forced: Violation[]; reason: string | null };
}

const hashOf = (d: VariantDirection) => createHash('sha256').update(new Uint8Array(d.vector.buffer, d.vector.byteOffset, d.vector.byteLength)).update(JSON.stringify(d.layers)).digest('hex');

export function parseRecipe(text: string, file: string): Recipe {
  return parseJsonFile(recipeSchema, text, file, 'invalid variant recipe');
}

/**
 * What determines one image's pixels: generator, seed, ψ and every direction used with its
 * vector hash, σ and strength. Two runs that agree on this render the same bytes.
 */
export function imageKey(fingerprint: string, seed: number, psi: number, strengths: Record<string, number>, byName: Map<string, VariantDirection>): string {
  const used = Object.keys(strengths).sort().map((name) => {
    const d = byName.get(name)!;
    return [name, strengths[name], hashOf(d), d.sigma];
  });
  return createHash('sha256').update(JSON.stringify({ v: 1, fingerprint, seed, psi, used })).digest('hex');
}

const previousSchema = z.object({
  format: z.literal('plumbline.variants'),
  generator: z.object({ fingerprint: z.string() }).optional(),
  images: z.array(z.object({ file: z.string(), sha256: z.string(), key: z.string().optional() })).default([]),
});

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
/**
 * An interim manifest (what a stopped run resumes from) is rewritten at most this often; a resumed
 * run checks every image on disk by hash anyway, so a slightly stale one loses nothing.
 */
const INTERIM_MANIFEST_MS = 1000;
/** Contact sheets show the first eight seeds of each setting. */
const SHEET_SEEDS = 8;

/** What a variant-set run answers: the manifest and how many images were rendered, kept, and rendered again over changed entries. */
export interface VariantSetResult {
  manifest: object;
  rendered: number;
  reused: number;
  replaced: number;
}

/** Units in a fixed order: setting by setting, seeds in chunks of `perUnit` — the same on one machine and on a farm. */
export function planVariantUnits(recipe: Recipe, perUnit: number): VariantUnit[] {
  const units: VariantUnit[] = [];
  recipe.settings.forEach((_, setting) => {
    for (let at = 0; at < recipe.seeds.length; at += perUnit) units.push({ setting, seeds: recipe.seeds.slice(at, at + perUnit).map((_, k) => at + k) });
  });
  return units;
}

/**
 * Refuses unknown directions; then the use rules (app/core/signoff-rules.ts, shared with the engine
 * host and apply): unapproved, rejected or out-of-range settings need a written reason.
 */
export function checkRecipe(recipe: Recipe, directions: VariantDirection[], options: VariantOptions = {}): { forced: Violation[]; reason: string | null } {
  const byName = new Map(directions.map((d) => [d.name, d]));
  for (const s of recipe.settings)
    for (const name of Object.keys(s.strengths)) if (!byName.has(name)) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ')}`);
  return options.forced ?? checkUse(useViolations(recipe.settings, directions.map((d) => ({ name: d.name, status: d.status ?? null, safeRange: d.safeRange ?? null }))), options.force ?? null, 'pass --force --reason "…" to render anyway (recorded in the manifest)');
}

/** One unit rendered: its seeds' codes, the setting's edits, one synthesis call (float output). */
export async function synthesizeVariantUnit(gen: Generator, recipe: Recipe, directions: VariantDirection[], unit: VariantUnit): Promise<{ files: string[]; seeds: number[]; images: Float32Array }> {
  const byName = new Map(directions.map((d) => [d.name, d]));
  const setting = recipe.settings[unit.setting];
  const seeds = unit.seeds.map((i) => recipe.seeds[i]);
  const codes = await gen.codesForSeeds(seeds, recipe.psi);
  applyEdits(codes, gen.layout, Object.entries(setting.strengths).map(([name, strength]) => directionEdit(byName.get(name)!, strength)));
  const r = await gen.synthesize(codes, seeds.length);
  return { files: seeds.map((seed) => variantFile(setting.label, seed)), seeds, images: r.images };
}

/** The pixels of one unit, in 8 bits. */
export async function renderVariantUnit(gen: Generator, recipe: Recipe, directions: VariantDirection[], unit: VariantUnit): Promise<{ file: string; seed: number; image: RgbaImage }[]> {
  const r = await synthesizeVariantUnit(gen, recipe, directions, unit);
  return r.seeds.map((seed, k) => ({ file: r.files[k], seed, image: gen.toRgba(r.images, k) }));
}

/**
 * Renders a recipe on this machine; yields progress between batches. An existing image is kept
 * (resume) only when its file matches its hash and its key matches this recipe's entry; otherwise
 * it is rendered again and counted as replaced.
 */
export async function* renderVariants(gen: Generator, recipe: Recipe, directions: VariantDirection[], outFolder: string, options: VariantOptions = {}): AsyncGenerator<{ done: number; total: number; label: string }, VariantSetResult, void> {
  const out = chosenOutputFolder(outFolder, 'the variant-set folder');
  return yield* runVariantSet({ name: gen.info.name, fingerprint: gen.info.fingerprint, centreFromCard: !!gen.card?.truncation.centre }, recipe, directions, out, gen.batchSize, localUnitRunner(gen, recipe, directions, out), options);
}

/**
 * Renders units one batch at a time. Everything after synthesis — the conversion to 8 bits with its
 * value checks, PNG encoding, hashing and the atomic write — runs on the pool's threads while the
 * next batch renders; the render loop only copies each image out of the batch.
 */
export function localUnitRunner(gen: Generator, recipe: Recipe, directions: VariantDirection[], out: string): VariantUnitRunner {
  return async function* (units) {
    const pool = sharedPngWriter();
    const inFlight: Promise<VariantImage[]>[] = [];
    try {
      for (const unit of units) {
        const r = await synthesizeVariantUnit(gen, recipe, directions, unit);
        const label = recipe.settings[unit.setting].label;
        inFlight.push(Promise.all(r.seeds.map(async (seed, k) => {
          const keepPixels = recipe.seeds.indexOf(seed) < SHEET_SEEDS;
          const w = await pool.writeFloat(gen.floatImage(r.images, k), join(out, r.files[k]), { durable: false, keepPixels });
          return { file: r.files[k], seed, setting: label, sha256: w.sha256, thumb: w.pixels };
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
  recipe: Recipe, directions: VariantDirection[], out: string, perUnit: number, runUnits: VariantUnitRunner, options: VariantOptions = {},
): AsyncGenerator<{ done: number; total: number; label: string }, VariantSetResult, void> {
  const decision = checkRecipe(recipe, directions, options);
  const byName = new Map(directions.map((d) => [d.name, d]));
  const manifestFile = join(out, 'manifest.json');
  // A manifest.json that is not ours is someone else's file: never overwrite it.
  const previous = existsSync(manifestFile) ? parseJsonFile(previousSchema, readTextFile(manifestFile, 'variant-set manifest'), manifestFile, 'not a variant-set manifest (choose another folder)', 'would-overwrite') : null;
  if (previous?.generator && previous.generator.fingerprint !== generator.fingerprint) throw new PlumblineError('bad-request', `${manifestFile}: this folder holds variants of another generator; choose another --out`);
  const known = new Map(previous?.images.map((i) => [i.file, i]) ?? []);
  // Each image's key: what determines its pixels (imageKey); resume checks it beside the file hash.
  const keyOf = new Map(recipe.settings.flatMap((s) => recipe.seeds.map((seed) => [variantFile(s.label, seed), imageKey(generator.fingerprint, seed, recipe.psi, s.strengths, byName)] as const)));
  const images: { file: string; seed: number; setting: string; sha256: string; key: string }[] = [];
  const thumbs = new Map<string, RgbaImage>();
  const total = recipe.seeds.length * recipe.settings.length;
  let rendered = 0;
  let reused = 0;
  let replaced = 0;
  const writeManifest = (complete: boolean) =>
    writeFileAtomic(manifestFile, JSON.stringify({
      format: 'plumbline.variants', version: 1, recipe: recipe.name, complete, createdAt: new Date().toISOString(),
      generator: { name: generator.name, fingerprint: generator.fingerprint },
      truncation: { psi: recipe.psi, centre: generator.centreFromCard ? 'model card' : 'estimated' },
      seedConvention: 'plumbline latentForSeed (xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller)',
      latents: recipe.seeds.map((seed) => ({ seed })),
      directions: directions.map((d) => ({ name: d.name, sha256: hashOf(d), sigma: d.sigma, layers: d.layers })),
      settings: recipe.settings,
      forced: decision.forced.length ? { reason: decision.reason, settings: decision.forced } : null,
      images,
      // Interim manifests skip the fsync: a resumed run re-checks every image by hash anyway.
    }, null, 2) + '\n', { durable: complete });
  // Resume: images already on disk with their recorded hash and an unchanged key are kept; units
  // shrink to what is missing; a file on disk that is not kept is rendered again (replaced).
  const units: VariantUnit[] = [];
  for (const unit of planVariantUnits(recipe, perUnit)) {
    const label = recipe.settings[unit.setting].label;
    const missing = unit.seeds.filter((i) => {
      const file = variantFile(label, recipe.seeds[i]);
      const path = join(out, file);
      const k = known.get(file);
      const key = keyOf.get(file)!;
      if (!existsSync(path)) return true;
      if (!k || k.key !== key) {
        replaced++;
        return true;
      }
      const bytes = readFileSync(path);
      if (sha(bytes) !== k.sha256) {
        replaced++;
        return true;
      }
      images.push({ file, seed: recipe.seeds[i], setting: label, sha256: k.sha256, key });
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
  let lastManifest = performance.now();
  let finished = false;
  writeManifest(false);
  try {
    for (;;) {
      const step = await runner.next();
      if (step.done) {
        finished = true;
        break;
      }
      for (const { thumb, ...image } of step.value) {
        images.push({ ...image, key: keyOf.get(image.file)! });
        if (thumb) thumbs.set(image.file, thumb);
        rendered++;
      }
      // Interim manifests at most every INTERIM_MANIFEST_MS: rewriting a manifest that grows with
      // every unit after every unit is quadratic work on the render path.
      if (performance.now() - lastManifest >= INTERIM_MANIFEST_MS) {
        writeManifest(false);
        lastManifest = performance.now();
      }
      yield { done: rendered + reused, total, label: `rendering ${recipe.name}` };
    }
  } finally {
    await runner.return();
    // Stopped or failed: the manifest a resumed run starts from lists everything written so far.
    if (!finished) writeManifest(false);
  }
  images.sort((a, b) => a.file.localeCompare(b.file));
  writeManifest(true);
  writeFileAtomic(join(out, 'contact-sheet.png'), encodePng(contactSheet(recipe, thumbs)));
  return { manifest: JSON.parse(readFileSync(manifestFile, 'utf8')), rendered, reused, replaced };
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
