// Variant recipes naming references (issue 12: references usable everywhere a seed can). The
// check from outside the recipe code: a reference whose latent is the generator's own code for a
// seed (its mapping network's output at ψ, via codesForSeeds) must render, under every setting,
// the same PNG bytes as that seed, whether given as a project reference ([layers, size]) or as a
// bare W .npy (one row, used on every row). The manifest names each reference with the SHA-256 of
// its latent values (checked against Node's SHA-256 of the .npy's data bytes, FIPS 180-4) and the
// image SHA-256 recorded by locate.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync, mkdirSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/workspace.ts';
import { saveReference } from '../../app/engine/references.ts';
import { Project } from '../../app/engine/project.ts';
import { encodeNpy } from '../../app/core/npy.ts';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8' });
const directions = join(root, 'resources', 'demo', 'sigil-directions.npy');
const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');

test('a recipe with a project reference and a .npy latent renders them like the seed they equal; the manifest names them', async () => {
  const dir = tempDir('plumbline-variant-refs-');
  const project = join(dir, 'project');
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  // A project of this generator holding the reference (and, so far, no signed-off directions).
  Project.open(project, true, { name: gen.info.name, fingerprint: gen.info.fingerprint });
  const { layers, size } = gen.layout;
  const imageSha = sha(new TextEncoder().encode('the hero image'));
  try {
    const codes = await gen.codesForSeeds([7], 0.7);
    saveReference(project, 'hero', codes, [layers, size], {
      format: 'plumbline.locate-report', image: { sha256: imageSha, file: 'hero.png' }, generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
      match: { found: true, ssim: 0.99, meanDeltaE00: 0.5, message: 'found' }, budget: { evaluations: 100, budget: 3000 },
    });
    // The same seed's W alone, as a bare .npy (no locate report beside it).
    mkdirSync(join(dir, 'latents'));
    writeFileSync(join(dir, 'latents', 'w7.npy'), encodeNpy(codes.slice(0, size), [1, size]));
  } finally {
    await gen.dispose();
  }
  const recipe = { format: 'plumbline.variant-recipe', version: 1, name: 'heroes', seeds: [7, 9], references: ['hero', 'latents/w7.npy'], psi: 0.7, settings: [{ label: 'base', strengths: {} }, { label: 'big', strengths: { crest_size: 2, hue_shift: -1 } }] };
  const recipeFile = join(dir, 'recipe.json');
  writeFileSync(recipeFile, JSON.stringify(recipe));
  const out = join(dir, 'out');
  // The project has signed off neither direction: as in the app, rendering them needs a reason.
  const refused = cli('variants', '--recipe', recipeFile, '-d', directions, '--project', project, '--out', out);
  assert.equal(refused.status, 2, refused.stderr);
  assert.match(refused.stderr, /crest_size is not approved \(draft\)/);
  const r = cli('variants', '--recipe', recipeFile, '-d', directions, '--project', project, '--out', out, '--force', '--reason', 'reference look-development only');
  assert.equal(r.status, 0, r.stderr);
  assert.match(r.stdout, /8 rendered/);
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  assert.equal(manifest.forced.reason, 'reference look-development only');
  assert.deepEqual(manifest.forced.settings.map((v: { direction: string; kind: string }) => `${v.direction}:${v.kind}`).sort(), ['crest_size:unapproved', 'hue_shift:unapproved']);
  const npyBytes = readFileSync(join(dir, 'latents', 'w7.npy'));
  const heroBytes = readFileSync(join(project, 'references', 'hero.npy'));
  const dataOf = (b: Buffer, values: number) => b.subarray(b.length - values * 4);
  assert.deepEqual(manifest.latents, [
    { seed: 7 }, { seed: 9 },
    { reference: 'hero', latentSha256: sha(dataOf(heroBytes, layers * size)), imageSha256: imageSha },
    { reference: 'w7', latentSha256: sha(dataOf(npyBytes, size)), imageSha256: null },
  ]);
  for (const setting of ['base', 'big']) {
    const seedPng = readFileSync(join(out, setting, 'seed-000007.png'));
    for (const name of ['hero', 'w7']) {
      const png = readFileSync(join(out, setting, `reference-${name}.png`));
      assert.equal(sha(png), sha(seedPng), `${setting}: reference ${name} renders as seed 7`);
      const entry = manifest.images.find((i: { file: string }) => i.file === `${setting}/reference-${name}.png`);
      assert.equal(entry.reference, name);
      assert.equal(entry.seed, null);
      assert.equal(entry.sha256, sha(png));
    }
    assert.notEqual(sha(readFileSync(join(out, setting, 'seed-000009.png'))), sha(seedPng));
  }
  // Resume: nothing changes, nothing is rendered again.
  const again = cli('variants', '--recipe', recipeFile, '-d', directions, '--project', project, '--out', out, '--force', '--reason', 'reference look-development only');
  assert.equal(again.status, 0, again.stderr);
  assert.match(again.stdout, /0 rendered, 8 kept/);

  // A named reference without a project, and an unknown one, are refused clearly.
  const noProject = cli('variants', '--recipe', recipeFile, '-d', directions, '--out', join(dir, 'out2'));
  assert.equal(noProject.status, 2, noProject.stderr);
  assert.match(noProject.stderr, /recipe reference 'hero' names a project reference: open the project \(or pass --project <dir>\)/);
  writeFileSync(recipeFile, JSON.stringify({ ...recipe, references: ['villain'] }));
  const unknown = cli('variants', '--recipe', recipeFile, '-d', directions, '--project', project, '--out', join(dir, 'out3'));
  assert.notEqual(unknown.status, 0);
  assert.match(unknown.stderr, /villain\.npy: no reference named 'villain' in this project/);
  writeFileSync(recipeFile, JSON.stringify({ ...recipe, seeds: [], references: [] }));
  const empty = cli('variants', '--recipe', recipeFile, '-d', directions, '--out', join(dir, 'out4'));
  assert.equal(empty.status, 2);
  assert.match(empty.stderr, /a recipe needs at least one seed or reference/);
});
