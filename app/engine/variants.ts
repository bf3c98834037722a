// Variant sets: a named recipe (base seeds and references × direction settings at one truncation) rendered as
// a resumable batch job into a folder of PNGs, a manifest that reproduces every image bit for
// bit, and a labelled contact sheet. Resuming keeps an image only when the recipe entry that
// made it is unchanged: each image carries a key hashing everything that determines its pixels.
import { existsSync, readFileSync } from 'node:fs';
import { isAbsolute, join, resolve as resolvePath } from 'node:path';
import { latentFileReference, projectLatentReference, REFERENCE_NAME, type LatentReference } from './references.ts';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { decodeOwnPng, encodePng, type RgbaImage } from '../core/image.ts';
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
  seeds: z.array(z.number().int().min(0).max(0xffffffff)).max(10_000).default([]),
  /**
   * Latents beside the seeds: a named reference of the project (found by locate and pinned), or a
   * latent .npy file (path relative to the recipe). Used as stored; ψ applies only to seeds.
   */
  references: z.array(z.string().min(1).max(1000)).max(1000).default([]),
  psi: z.number().min(0).max(2).default(0.7),
  settings: z.array(z.object({ label: variantLabelSchema, strengths: z.record(z.string(), z.number().min(-20).max(20)) })).min(1).max(1000),
}).refine((r) => r.seeds.length + r.references.length > 0, { message: 'a recipe needs at least one seed or reference', path: ['seeds'] });
export type Recipe = z.infer<typeof recipeSchema>;
/** A recipe as callers build it (references optional). */
export type RecipeInput = Omit<Recipe, 'references'> & { references?: string[] };

export interface VariantDirection {
  name: string;
  vector: Float32Array;
  layers: [number, number] | null;
  sigma: number;
  safeRange?: [number, number];
  /** Sign-off status where known (a pack's directions are approved; a bare file's are unknown). */
  status?: ReviewStatus | null;
}

/**
 * The recipe's references as latents: a name ending in .npy is a file (relative to the recipe's
 * folder), any other a reference of the project (which must be open or given).
 */
export function resolveRecipeReferences(recipe: RecipeInput, recipeDir: string | null, projectDir: string | null, gen: { layout: { layers: number; size: number }; info: { name: string; fingerprint: string } }): LatentReference[] {
  const { layout } = gen;
  const out = (recipe.references ?? []).map((entry) => {
    if (/\.npy$/i.test(entry)) {
      const file = isAbsolute(entry) || !recipeDir ? resolvePath(entry) : resolvePath(recipeDir, entry);
      return latentFileReference(file, layout, 'a recipe reference');
    }
    if (!REFERENCE_NAME.test(entry) || entry.startsWith('.')) throw new PlumblineError('bad-request', `recipe reference '${entry}' is neither a .npy file nor a reference name`);
    if (!projectDir) throw new PlumblineError('bad-request', `recipe reference '${entry}' names a project reference: open the project (or pass --project <dir>)`);
    const r = projectLatentReference(projectDir, entry, gen.info);
    if (r.latent.length !== layout.size && r.latent.length !== layout.layers * layout.size) throw new PlumblineError('npy-shape', `reference '${entry}' holds ${r.latent.length} values; this generator needs ${layout.size} or ${layout.layers * layout.size}`);
    return r;
  });
  const seen = new Set<string>();
  for (const r of out) {
    if (seen.has(r.name)) throw new PlumblineError('bad-request', `recipe reference '${r.name}' appears twice (image files are named by it)`);
    seen.add(r.name);
  }
  return out;
}

export interface VariantOptions {
  /** The recipe's references resolved (resolveRecipeReferences), in recipe order. */
  references?: LatentReference[];
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
export function imageKey(fingerprint: string, seed: number | { latentSha256: string }, psi: number, strengths: Record<string, number>, byName: Map<string, VariantDirection>): string {
  const used = Object.keys(strengths).sort().map((name) => {
    const d = byName.get(name)!;
    return [name, strengths[name], hashOf(d), d.sigma];
  });
  // A reference's pixels depend on its latent, not on ψ.
  if (typeof seed !== 'number') return createHash('sha256').update(JSON.stringify({ v: 1, fingerprint, latent: seed.latentSha256, used })).digest('hex');
  return createHash('sha256').update(JSON.stringify({ v: 1, fingerprint, seed, psi, used })).digest('hex');
}

const previousSchema = z.object({
  format: z.literal('plumbline.variants'),
  generator: z.object({ fingerprint: z.string() }).optional(),
  images: z.array(z.object({ file: z.string(), sha256: z.string(), key: z.string().optional() })).default([]),
});

/**
 * One work unit of a variant set: one setting over a chunk of the recipe's columns — indices into
 * its seeds, then its references (index seeds.length + k is reference k).
 */
export interface VariantUnit {
  setting: number;
  seeds: number[];
}

/** A column of the set: a seed or a reference. */
export interface Column {
  i: number;
  seed: number | null;
  reference: LatentReference | null;
  label: string;
  stem: string;
}

/** The recipe's columns: its seeds, then its resolved references. */
export function recipeColumns(recipe: RecipeInput, refs: LatentReference[] = []): Column[] {
  return [
    ...recipe.seeds.map((seed, i) => ({ i, seed, reference: null, label: String(seed), stem: `seed-${String(seed).padStart(6, '0')}` })),
    ...refs.map((r, k) => ({ i: recipe.seeds.length + k, seed: null, reference: r, label: r.name, stem: `reference-${r.name}` })),
  ];
}
const columnFile = (label: string, c: Column) => `${label}/${c.stem}.png`;

/** An image finished and written: what the manifest records, plus pixels for the contact sheet. */
export interface VariantImage {
  file: string;
  /** The seed, or null for a reference (then `reference` names it). */
  seed: number | null;
  reference?: string | null;
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

/** What a variant-set run answers: the manifest and how many images were rendered, kept, and rendered again over changed entries. */
export interface VariantSetResult {
  manifest: object;
  rendered: number;
  reused: number;
  replaced: number;
  /**
   * Why files on disk were rendered again: `changed`, their recipe entry changed (another key);
   * `unlisted`, the manifest did not list them (an earlier run stopped before recording them);
   * `altered`, the file no longer matched its recorded SHA-256.
   */
  replacedWhy: { changed: number; unlisted: number; altered: number };
  /** How many of the set's columns (seeds, and references if any) the contact sheet shows: up to SHEET_COLUMNS. */
  sheet: { shown: number; of: number; what: 'seeds' | 'seeds and references' };
}

/** The CLI's words for VariantSetResult.replacedWhy: "64 not yet in the manifest when an earlier run stopped". */
export function replacedText(why: VariantSetResult['replacedWhy']): string {
  return [
    why.unlisted ? `${why.unlisted} not yet in the manifest when an earlier run stopped` : '',
    why.changed ? `${why.changed} whose recipe entry changed` : '',
    why.altered ? `${why.altered} changed on disk since they were written` : '',
  ].filter(Boolean).join(', ');
}

/** Units in a fixed order: setting by setting, seeds in chunks of `perUnit` — the same on one machine and on a farm. */
export function planVariantUnits(recipe: RecipeInput, perUnit: number, columns = recipe.seeds.length): VariantUnit[] {
  const units: VariantUnit[] = [];
  recipe.settings.forEach((_, setting) => {
    for (let at = 0; at < columns; at += perUnit) units.push({ setting, seeds: Array.from({ length: Math.min(perUnit, columns - at) }, (_, k) => at + k) });
  });
  return units;
}

/**
 * Refuses unknown directions; then the use rules (app/core/signoff-rules.ts, shared with the engine
 * host and apply): unapproved, rejected or out-of-range settings need a written reason.
 */
export function checkRecipe(recipe: RecipeInput, directions: VariantDirection[], options: VariantOptions = {}): { forced: Violation[]; reason: string | null } {
  const byName = new Map(directions.map((d) => [d.name, d]));
  for (const s of recipe.settings)
    for (const name of Object.keys(s.strengths)) if (!byName.has(name)) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ')}`);
  return options.forced ?? checkUse(useViolations(recipe.settings, directions.map((d) => ({ name: d.name, status: d.status ?? null, safeRange: d.safeRange ?? null }))), options.force ?? null, 'pass --force --reason "…" to render anyway (recorded in the manifest)');
}

/** One unit rendered: its seeds' codes, the setting's edits, one synthesis call (float output). */
export async function synthesizeVariantUnit(gen: Generator, recipe: RecipeInput, directions: VariantDirection[], unit: VariantUnit, refs: LatentReference[] = []): Promise<{ files: string[]; seeds: (number | null)[]; references: (string | null)[]; images: Float32Array }> {
  const byName = new Map(directions.map((d) => [d.name, d]));
  const setting = recipe.settings[unit.setting];
  const all = recipeColumns(recipe, refs);
  const columns = unit.seeds.map((i) => all[i]);
  const { layers, size } = gen.layout;
  const per = layers * size;
  // Seeds at ψ; each reference as stored (a W code on every row).
  const seedCodes = await gen.codesForSeeds(columns.filter((c) => c.seed !== null).map((c) => c.seed!), recipe.psi);
  const codes = new Float32Array(columns.length * per);
  let nextSeed = 0;
  columns.forEach((c, k) => {
    if (c.reference === null) codes.set(seedCodes.subarray(nextSeed * per, ++nextSeed * per), k * per);
    else if (c.reference.latent.length === per) codes.set(c.reference.latent, k * per);
    else for (let l = 0; l < layers; l++) codes.set(c.reference.latent, k * per + l * size);
  });
  applyEdits(codes, gen.layout, Object.entries(setting.strengths).map(([name, strength]) => directionEdit(byName.get(name)!, strength)));
  const r = await gen.synthesize(codes, columns.length);
  return { files: columns.map((c) => columnFile(setting.label, c)), seeds: columns.map((c) => c.seed), references: columns.map((c) => c.reference?.name ?? null), images: r.images };
}

/** The pixels of one unit, in 8 bits. */
export async function renderVariantUnit(gen: Generator, recipe: RecipeInput, directions: VariantDirection[], unit: VariantUnit): Promise<{ file: string; seed: number | null; image: RgbaImage }[]> {
  const r = await synthesizeVariantUnit(gen, recipe, directions, unit);
  return r.seeds.map((seed, k) => ({ file: r.files[k], seed, image: gen.toRgba(r.images, k) }));
}

/**
 * Renders a recipe on this machine; yields progress between batches. An existing image is kept
 * (resume) only when its file matches its hash and its key matches this recipe's entry; otherwise
 * it is rendered again and counted as replaced.
 */
export async function* renderVariants(gen: Generator, recipe: RecipeInput, directions: VariantDirection[], outFolder: string, options: VariantOptions = {}): AsyncGenerator<{ done: number; total: number; label: string }, VariantSetResult, void> {
  const out = chosenOutputFolder(outFolder, 'the variant-set folder');
  return yield* runVariantSet({ name: gen.info.name, fingerprint: gen.info.fingerprint, centreFromCard: !!gen.card?.truncation.centre }, recipe, directions, out, gen.batchSize, localUnitRunner(gen, recipe, directions, out, options.references ?? []), options);
}

/**
 * Renders units one batch at a time. Everything after synthesis — the conversion to 8 bits with its
 * value checks, PNG encoding, hashing and the atomic write — runs on the pool's threads while the
 * next batch renders; the render loop only copies the batch once into the pool's shared buffer.
 */
export function localUnitRunner(gen: Generator, recipe: RecipeInput, directions: VariantDirection[], out: string, refs: LatentReference[] = []): VariantUnitRunner {
  const onSheet = new Set(sheetColumns(recipeColumns(recipe, refs)).map((c) => c.i));
  return async function* (units) {
    const pool = sharedPngWriter();
    const inFlight: Promise<VariantImage[]>[] = [];
    try {
      for (const unit of units) {
        const r = await synthesizeVariantUnit(gen, recipe, directions, unit, refs);
        const label = recipe.settings[unit.setting].label;
        // The whole batch in one hand-over: one copy into the pool's shared buffer, one message per thread.
        const written = pool.writeFloatBatch(gen.floatBatch(r.images, r.seeds.length), r.seeds.map((_, k) => ({ index: k, file: join(out, r.files[k]), durable: false, keepPixels: onSheet.has(unit.seeds[k]) })));
        inFlight.push(Promise.all(r.seeds.map(async (seed, k) => {
          const w = await written[k];
          return { file: r.files[k], seed, reference: r.references[k], setting: label, sha256: w.sha256, thumb: w.pixels };
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
  recipe: RecipeInput, directions: VariantDirection[], out: string, perUnit: number, runUnits: VariantUnitRunner, options: VariantOptions = {},
): AsyncGenerator<{ done: number; total: number; label: string }, VariantSetResult, void> {
  const decision = checkRecipe(recipe, directions, options);
  const byName = new Map(directions.map((d) => [d.name, d]));
  const manifestFile = join(out, 'manifest.json');
  // A manifest.json that is not ours is someone else's file: never overwrite it.
  const previous = existsSync(manifestFile) ? parseJsonFile(previousSchema, readTextFile(manifestFile, 'variant-set manifest'), manifestFile, 'not a variant-set manifest (choose another folder)', 'would-overwrite') : null;
  if (previous?.generator && previous.generator.fingerprint !== generator.fingerprint) throw new PlumblineError('bad-request', `${manifestFile}: this folder holds variants of another generator; choose another --out`);
  const known = new Map(previous?.images.map((i) => [i.file, i]) ?? []);
  const refs = options.references ?? [];
  if (refs.length !== (recipe.references ?? []).length) throw new PlumblineError('bad-request', `the recipe names ${(recipe.references ?? []).length} reference(s) but ${refs.length} were resolved`);
  const columns = recipeColumns(recipe, refs);
  const onSheet = new Set(sheetColumns(columns).map((c) => c.i));
  // Each image's key: what determines its pixels (imageKey); resume checks it beside the file hash.
  const keyOf = new Map(recipe.settings.flatMap((s) => columns.map((c) => [columnFile(s.label, c), imageKey(generator.fingerprint, c.reference ?? c.seed!, recipe.psi, s.strengths, byName)] as const)));
  const images: { file: string; seed: number | null; reference: string | null; setting: string; sha256: string; key: string }[] = [];
  const thumbs = new Map<string, RgbaImage>();
  const total = columns.length * recipe.settings.length;
  let rendered = 0;
  let reused = 0;
  let replaced = 0;
  const replacedWhy = { changed: 0, unlisted: 0, altered: 0 };
  const writeManifest = (complete: boolean) =>
    writeFileAtomic(manifestFile, JSON.stringify({
      format: 'plumbline.variants', version: 1, recipe: recipe.name, complete, createdAt: new Date().toISOString(),
      generator: { name: generator.name, fingerprint: generator.fingerprint },
      truncation: { psi: recipe.psi, centre: generator.centreFromCard ? 'model card' : 'estimated' },
      seedConvention: 'plumbline latentForSeed (xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller)',
      latents: [...recipe.seeds.map((seed) => ({ seed })), ...refs.map((r) => ({ reference: r.name, latentSha256: r.latentSha256, imageSha256: r.imageSha256 }))],
      directions: directions.map((d) => ({ name: d.name, sha256: hashOf(d), sigma: d.sigma, layers: d.layers })),
      settings: recipe.settings,
      forced: decision.forced.length ? { reason: decision.reason, settings: decision.forced } : null,
      images,
      // Interim manifests skip the fsync: a resumed run re-checks every image by hash anyway.
    }, null, 2) + '\n', { durable: complete });
  // Resume: images already on disk with their recorded hash and an unchanged key are kept; units
  // shrink to what is missing; a file on disk that is not kept is rendered again (replaced).
  const units: VariantUnit[] = [];
  for (const unit of planVariantUnits(recipe, perUnit, columns.length)) {
    const label = recipe.settings[unit.setting].label;
    const missing = unit.seeds.filter((i) => {
      const file = columnFile(label, columns[i]);
      const path = join(out, file);
      const k = known.get(file);
      const key = keyOf.get(file)!;
      if (!existsSync(path)) return true;
      if (!k || k.key !== key) {
        replaced++;
        replacedWhy[k ? 'changed' : 'unlisted']++;
        return true;
      }
      const bytes = readFileSync(path);
      if (sha(bytes) !== k.sha256) {
        replaced++;
        replacedWhy.altered++;
        return true;
      }
      images.push({ file, seed: columns[i].seed, reference: columns[i].reference?.name ?? null, setting: label, sha256: k.sha256, key });
      if (onSheet.has(i)) {
        thumbs.set(file, decodeOwnPng(bytes, path));
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
        images.push({ ...image, reference: image.reference ?? null, key: keyOf.get(image.file)! });
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
  const onSheetColumns = sheetColumns(columns);
  writeFileAtomic(join(out, 'contact-sheet.png'), encodePng(contactSheet(recipe, onSheetColumns, thumbs)));
  return { manifest: JSON.parse(readFileSync(manifestFile, 'utf8')), rendered, reused, replaced, replacedWhy, sheet: { shown: onSheetColumns.length, of: columns.length, what: refs.length ? 'seeds and references' : 'seeds' } };
}

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** Columns on the contact sheet: up to SHEET_COLUMNS, the references kept beside the first seeds. */
const SHEET_COLUMNS = 8;
function sheetColumns(columns: Column[]): Column[] {
  const refs = columns.filter((c) => c.reference).slice(0, SHEET_COLUMNS / 2);
  return [...columns.filter((c) => !c.reference).slice(0, SHEET_COLUMNS - refs.length), ...refs];
}

/** Rows: settings (labelled); columns: up to 8 seeds and references (labelled). */
function contactSheet(recipe: RecipeInput, seeds: Column[], thumbs: Map<string, RgbaImage>): RgbaImage {
  const cell = 96;
  const gap = 6;
  const labelW = 8 + Math.max(...recipe.settings.map((s) => s.label.length)) * 6 * 2;
  const header = 42;
  const width = labelW + seeds.length * (cell + gap) + gap;
  const height = header + recipe.settings.length * (cell + gap) + gap;
  const data = new Uint8ClampedArray(width * height * 4);
  // The background: one pixel, then doubled (a per-pixel set of a fresh array cost tens of ms).
  data.set([20, 24, 29, 255]);
  for (let filled = 4; filled < data.length; filled *= 2) data.copyWithin(filled, 0, Math.min(filled, data.length - filled));
  drawText(data, width, height, `${recipe.name}  psi ${recipe.psi}`, 6, 6, [230, 233, 236], 2);
  seeds.forEach((col, c) => drawText(data, width, height, col.label.slice(0, 15), labelW + c * (cell + gap) + 2, header - GLYPH_HEIGHT - 2, [149, 161, 173]));
  recipe.settings.forEach((s, r) => {
    const y = header + r * (cell + gap);
    drawText(data, width, height, s.label, 6, y + cell / 2 - GLYPH_HEIGHT, [79, 179, 161], 2);
    seeds.forEach((col, c) => {
      const file = `${s.label}/${col.stem}.png`;
      const img = thumbs.get(file);
      if (!img) return;
      const f = img.width / cell;
      for (let yy = 0; yy < cell; yy++) {
        const sy = Math.min(img.height - 1, Math.floor(yy * f));
        for (let xx = 0; xx < cell; xx++) {
          const sx = Math.min(img.width - 1, Math.floor(xx * f));
          const from = (sy * img.width + sx) * 4;
          const to = ((y + yy) * width + labelW + c * (cell + gap) + xx) * 4;
          data[to] = img.data[from];
          data[to + 1] = img.data[from + 1];
          data[to + 2] = img.data[from + 2];
          data[to + 3] = img.data[from + 3];
        }
      }
    });
  });
  return { width, height, data };
}
