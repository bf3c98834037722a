// Variant sets: a named recipe (base seeds and references × direction settings at one truncation) rendered as
// a resumable batch job into a folder of PNGs, a manifest that reproduces every image bit for
// bit, and a labelled contact sheet. Resuming keeps an image only when the recipe entry that
// made it is unchanged: each image carries a key hashing everything that determines its pixels.
import { existsSync, readFileSync } from 'node:fs';
import { isAbsolute, join, resolve as resolvePath } from 'node:path';
import { latentFileReference, projectLatentReference, REFERENCE_NAME, type LatentReference } from './references.ts';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { decode } from 'fast-png';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodePng, encodePngAsync, type RgbaImage } from '../core/image.ts';
import { applyEdits, directionEdit } from '../core/latent.ts';
import { PlumblineError } from '../core/errors.ts';
import { parseJsonFile } from '../core/json-file.ts';
import { chosenOutputFolder, readTextFile } from '../core/path-policy.ts';
import { variantLabelSchema } from '../protocol/names.ts';
import { drawText, GLYPH_HEIGHT } from '../core/label-font.ts';
import type { Generator } from './generator.ts';
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
 * Renders a recipe; yields progress between batches. An existing image is kept (resume) only when
 * its file matches its hash and its key matches this recipe's entry; otherwise it is rendered
 * again and counted as replaced.
 */
export async function* renderVariants(gen: Generator, recipe: RecipeInput, directions: VariantDirection[], outFolder: string, options: VariantOptions = {}): AsyncGenerator<{ done: number; total: number; label: string }, { manifest: object; rendered: number; reused: number; replaced: number }, void> {
  const out = chosenOutputFolder(outFolder, 'the variant-set folder');
  const byName = new Map(directions.map((d) => [d.name, d]));
  for (const s of recipe.settings)
    for (const name of Object.keys(s.strengths)) if (!byName.has(name)) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ')}`);
  // The rules shared with the engine host and apply (app/core/signoff-rules.ts).
  const decision = options.forced ?? checkUse(useViolations(recipe.settings, directions.map((d) => ({ name: d.name, status: d.status ?? null, safeRange: d.safeRange ?? null }))), options.force ?? null, 'pass --force --reason "…" to render anyway (recorded in the manifest)');
  const manifestFile = join(out, 'manifest.json');
  // A manifest.json that is not ours is someone else's file: never overwrite it.
  const previous = existsSync(manifestFile) ? parseJsonFile(previousSchema, readTextFile(manifestFile, 'variant-set manifest'), manifestFile, 'not a variant-set manifest (choose another folder)', 'would-overwrite') : null;
  if (previous?.generator && previous.generator.fingerprint !== gen.info.fingerprint) throw new PlumblineError('bad-request', `${manifestFile}: this folder holds variants of another generator; choose another --out`);
  const known = new Map(previous?.images.map((i) => [i.file, i]) ?? []);
  const { layers, size } = gen.layout;
  const per = layers * size;
  const refs = options.references ?? [];
  if (refs.length !== (recipe.references ?? []).length) throw new PlumblineError('bad-request', `the recipe names ${(recipe.references ?? []).length} reference(s) but ${refs.length} were resolved`);
  // Base codes: the seeds at ψ, then each reference as stored (a W code on every row).
  const base = new Float32Array((recipe.seeds.length + refs.length) * per);
  base.set(await gen.codesForSeeds(recipe.seeds, recipe.psi));
  refs.forEach((r, k) => {
    const at = (recipe.seeds.length + k) * per;
    if (r.latent.length === per) base.set(r.latent, at);
    else for (let l = 0; l < layers; l++) base.set(r.latent, at + l * size);
  });
  const columns: Column[] = [
    ...recipe.seeds.map((seed, i) => ({ i, seed, reference: null, label: String(seed), stem: `seed-${String(seed).padStart(6, '0')}` })),
    ...refs.map((r, k) => ({ i: recipe.seeds.length + k, seed: null, reference: r, label: r.name, stem: `reference-${r.name}` })),
  ];
  const onSheet = ((shown) => (i: number) => shown.has(i))(new Set(sheetColumns(columns).map((c) => c.i)));
  const jobs = recipe.settings.flatMap((s) => columns.map((c) => ({ s, seed: c.seed, reference: c.reference?.name ?? null, i: c.i, file: `${s.label}/${c.stem}.png`, key: imageKey(gen.info.fingerprint, c.reference ?? c.seed!, recipe.psi, s.strengths, byName) })));
  const images: { file: string; seed: number | null; reference: string | null; setting: string; sha256: string; key: string }[] = [];
  const thumbs = new Map<string, RgbaImage>();
  let rendered = 0;
  let reused = 0;
  let replaced = 0;
  const writes: Promise<void>[] = [];
  const writeManifest = (complete: boolean) =>
    writeFileAtomic(manifestFile, JSON.stringify({
      format: 'plumbline.variants', version: 1, recipe: recipe.name, complete, createdAt: new Date().toISOString(),
      generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
      truncation: { psi: recipe.psi, centre: gen.card?.truncation.centre ? 'model card' : 'estimated' },
      seedConvention: 'plumbline latentForSeed (xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller)',
      latents: [...recipe.seeds.map((seed) => ({ seed })), ...refs.map((r) => ({ reference: r.name, latentSha256: r.latentSha256, imageSha256: r.imageSha256 }))],
      directions: directions.map((d) => ({ name: d.name, sha256: hashOf(d), sigma: d.sigma, layers: d.layers })),
      settings: recipe.settings,
      forced: decision.forced.length ? { reason: decision.reason, settings: decision.forced } : null,
      images,
    }, null, 2) + '\n');
  for (let at = 0; at < jobs.length; at += gen.batchSize) {
    const chunk = jobs.slice(at, at + gen.batchSize);
    const keep = (j: (typeof jobs)[number]) => {
      const k = known.get(j.file);
      return !!k && k.key === j.key && existsSync(join(out, j.file)) && sha(readFileSync(join(out, j.file))) === k.sha256;
    };
    const pending = chunk.filter((j) => !keep(j));
    for (const j of pending) if (existsSync(join(out, j.file))) replaced++;
    for (const j of chunk.filter((x) => !pending.includes(x))) {
      images.push({ file: j.file, seed: j.seed, reference: j.reference, setting: j.s.label, sha256: known.get(j.file)!.sha256, key: j.key });
      if (onSheet(j.i)) {
        const png = decode(readFileSync(join(out, j.file)));
        thumbs.set(j.file, { width: png.width, height: png.height, data: new Uint8ClampedArray(png.data) });
      }
      reused++;
    }
    if (pending.length) {
      const codes = new Float32Array(pending.length * per);
      pending.forEach((j, k) => {
        const row = base.slice(j.i * per, (j.i + 1) * per);
        applyEdits(row, gen.layout, Object.entries(j.s.strengths).map(([name, strength]) => directionEdit(byName.get(name)!, strength)));
        codes.set(row, k * per);
      });
      const r = await gen.synthesize(codes, pending.length);
      pending.forEach((j, k) => {
        const img = gen.toRgba(r.images, k);
        if (onSheet(j.i)) thumbs.set(j.file, img);
        // Compression runs on zlib's threads while the next batch renders; writes follow.
        writes.push(encodePngAsync(img).then((png) => {
          writeFileAtomic(join(out, j.file), png, { durable: false });
          images.push({ file: j.file, seed: j.seed, reference: j.reference, setting: j.s.label, sha256: sha(png), key: j.key });
          rendered++;
        }));
      });
    }
    // Keep at most about two batches of images in flight.
    if (writes.length > 2 * gen.batchSize) await Promise.all(writes.splice(0, writes.length - gen.batchSize));
    writeManifest(false);
    yield { done: Math.min(jobs.length, at + chunk.length), total: jobs.length, label: `rendering ${recipe.name}` };
  }
  await Promise.all(writes);
  images.sort((a, b) => a.file.localeCompare(b.file));
  writeManifest(true);
  writeFileAtomic(join(out, 'contact-sheet.png'), encodePng(contactSheet(recipe, sheetColumns(columns), thumbs)));
  return { manifest: JSON.parse(readFileSync(manifestFile, 'utf8')), rendered, reused, replaced };
}

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

/** A column of the set: a seed or a reference. */
interface Column {
  i: number;
  seed: number | null;
  reference: LatentReference | null;
  label: string;
  stem: string;
}

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
  for (let p = 0; p < width * height; p++) data.set([20, 24, 29, 255], p * 4);
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
