// Variant sets: a named recipe (base seeds × direction settings at one truncation) rendered as
// a resumable batch job into a folder of PNGs, a manifest that reproduces every image bit for
// bit, and a labelled contact sheet.
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { decode } from 'fast-png';
import { writeFileAtomic } from '../core/atomic-write.ts';
import { encodePng, encodePngAsync, type RgbaImage } from '../core/image.ts';
import { applyEdits, directionEdit } from '../core/latent.ts';
import { PlumblineError } from '../core/errors.ts';
import { parseJsonFile } from '../core/json-file.ts';
import { drawText, GLYPH_HEIGHT } from '../core/label-font.ts';
import type { Generator } from './generator.ts';

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

/** Renders a recipe; yields progress between batches. Existing images with matching hashes are kept (resume). */
export async function* renderVariants(gen: Generator, recipe: Recipe, directions: VariantDirection[], out: string, options: { force?: boolean } = {}): AsyncGenerator<{ done: number; total: number; label: string }, { manifest: object; rendered: number; reused: number }, void> {
  const byName = new Map(directions.map((d) => [d.name, d]));
  for (const s of recipe.settings)
    for (const [name, strength] of Object.entries(s.strengths)) {
      const d = byName.get(name);
      if (!d) throw new PlumblineError('bad-request', `setting '${s.label}' uses unknown direction '${name}'; available: ${[...byName.keys()].join(', ')}`);
      if (d.safeRange && !options.force && (strength < d.safeRange[0] || strength > d.safeRange[1])) throw new PlumblineError('bad-request', `setting '${s.label}': ${name}=${strength} is outside its audited safe range ${d.safeRange[0]}…${d.safeRange[1]} (use --force to render anyway)`);
    }
  const manifestFile = join(out, 'manifest.json');
  const previous = existsSync(manifestFile) ? (JSON.parse(readFileSync(manifestFile, 'utf8')) as { generator?: { fingerprint: string }; images?: { file: string; sha256: string }[] }) : null;
  if (previous?.generator && previous.generator.fingerprint !== gen.info.fingerprint) throw new PlumblineError('bad-request', `${manifestFile}: this folder holds variants of another generator; choose another --out`);
  const known = new Map((previous?.images ?? []).map((i) => [i.file, i.sha256]));
  const per = gen.layout.layers * gen.layout.size;
  const base = await gen.codesForSeeds(recipe.seeds, recipe.psi);
  const jobs = recipe.settings.flatMap((s) => recipe.seeds.map((seed, i) => ({ s, seed, i, file: `${s.label}/seed-${String(seed).padStart(6, '0')}.png` })));
  const images: { file: string; seed: number; setting: string; sha256: string }[] = [];
  const thumbs = new Map<string, RgbaImage>();
  let rendered = 0;
  let reused = 0;
  const writes: Promise<void>[] = [];
  const writeManifest = (complete: boolean) =>
    writeFileAtomic(manifestFile, JSON.stringify({
      format: 'plumbline.variants', version: 1, recipe: recipe.name, complete, createdAt: new Date().toISOString(),
      generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
      truncation: { psi: recipe.psi, centre: gen.card?.truncation.centre ? 'model card' : 'estimated' },
      seedConvention: 'plumbline latentForSeed (xoshiro128** via splitmix32, stream 0x5eed, polar Box–Muller)',
      latents: recipe.seeds.map((seed) => ({ seed })),
      directions: directions.map((d) => ({ name: d.name, sha256: hashOf(d), sigma: d.sigma, layers: d.layers })),
      settings: recipe.settings,
      images,
    }, null, 2) + '\n');
  for (let at = 0; at < jobs.length; at += gen.batchSize) {
    const chunk = jobs.slice(at, at + gen.batchSize);
    const pending = chunk.filter((j) => !(known.has(j.file) && existsSync(join(out, j.file)) && sha(readFileSync(join(out, j.file))) === known.get(j.file)));
    for (const j of chunk.filter((x) => !pending.includes(x))) {
      images.push({ file: j.file, seed: j.seed, setting: j.s.label, sha256: known.get(j.file)! });
      if (j.i < 8) {
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
        if (j.i < 8) thumbs.set(j.file, img);
        // Compression runs on zlib's threads while the next batch renders; writes follow.
        writes.push(encodePngAsync(img).then((png) => {
          writeFileAtomic(join(out, j.file), png, { durable: false });
          images.push({ file: j.file, seed: j.seed, setting: j.s.label, sha256: sha(png) });
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
      const file = `${s.label}/seed-${String(seed).padStart(6, '0')}.png`;
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
