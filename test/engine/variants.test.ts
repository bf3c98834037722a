// Variant sets: every image reproduces bit for bit from the manifest alone, an interrupted run
// resumes without re-rendering finished images, and bad recipes say what is wrong.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, rmSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { createHash } from 'node:crypto';
import { decode } from 'fast-png';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/host.ts';
import { decodeNpy } from '../../app/core/npy.ts';
import { applyEdits } from '../../app/core/latent.ts';
import { encodePng } from '../../app/core/image.ts';
import { tempDir } from '../helpers/models.ts';
import { Project, vectorHash } from '../../app/engine/project.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8' });
const recipe = { format: 'plumbline.variant-recipe', version: 1, name: 'factions', seeds: [3, 5, 8], psi: 0.7, settings: [{ label: 'base', strengths: {} }, { label: 'big_warm', strengths: { crest_size: 2, hue_shift: 1.5 } }] };
const directions = join(root, 'resources', 'demo', 'sigil-directions.npy');

test('a variant set reproduces from its manifest and resumes after an interruption', async () => {
  const dir = tempDir();
  const recipeFile = join(dir, 'recipe.json');
  writeFileSync(recipeFile, JSON.stringify(recipe));
  const out = join(dir, 'out');
  const first = cli('variants', '--recipe', recipeFile, '-d', directions, '--out', out);
  assert.equal(first.status, 0, first.stderr);
  assert.match(first.stdout, /6 rendered, 0 kept/);
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  assert.equal(manifest.complete, true);
  assert.equal(manifest.images.length, 6);
  const sheet = decode(readFileSync(join(out, 'contact-sheet.png')));
  assert.ok(sheet.width > 300 && sheet.height > 200);

  // Reproduce one image from the manifest's recorded facts only.
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  try {
    assert.equal(manifest.generator.fingerprint, gen.info.fingerprint);
    const entry = manifest.images.find((i: any) => i.setting === 'big_warm' && i.seed === 5);
    const setting = manifest.settings.find((s: any) => s.label === 'big_warm');
    const arr = decodeNpy(new Uint8Array(readFileSync(directions)));
    const names = JSON.parse(readFileSync(directions.replace('.npy', '.json'), 'utf8')).directions.map((d: any) => d.name);
    const codes = await gen.codesForSeeds([5], manifest.truncation.psi);
    applyEdits(codes, gen.layout, Object.entries(setting.strengths).map(([name, s]) => {
      const rec = manifest.directions.find((d: any) => d.name === name);
      const k = names.indexOf(name);
      const v = arr.data.slice(k * 32, (k + 1) * 32);
      const norm = Math.hypot(...v);
      const unit = v.map((x) => x / norm);
      assert.equal(createHash('sha256').update(new Uint8Array(unit.buffer)).update(JSON.stringify(rec.layers)).digest('hex'), rec.sha256, 'direction hash matches');
      return { vector: unit, layers: rec.layers, step: (s as number) * rec.sigma };
    }));
    const png = encodePng(gen.toRgba((await gen.synthesize(codes, 1)).images, 0));
    assert.equal(createHash('sha256').update(png).digest('hex'), entry.sha256, 'bit-for-bit reproduction');
  } finally {
    await gen.dispose();
  }

  // Interrupt: lose one image, resume: only it is rendered again, with the same bytes.
  const lost = manifest.images[2];
  rmSync(join(out, lost.file));
  const again = cli('variants', '--recipe', recipeFile, '-d', directions, '--out', out);
  assert.equal(again.status, 0, again.stderr);
  assert.match(again.stdout, /1 rendered, 5 kept/);
  assert.equal(createHash('sha256').update(readFileSync(join(out, lost.file))).digest('hex'), lost.sha256);
});

test('bad recipes are refused with the file and the problem', () => {
  const dir = tempDir();
  const bad = join(dir, 'bad.json');
  writeFileSync(bad, JSON.stringify({ ...recipe, settings: [{ label: 'x', strengths: { sparkle: 1 } }] }));
  const r = cli('variants', '--recipe', bad, '-d', directions, '--out', join(dir, 'o'));
  assert.equal(r.status, 2);
  assert.match(r.stderr, /setting 'x' uses unknown direction 'sparkle'/);
  writeFileSync(bad, '{"format":"plumbline.variant-recipe","version":1}');
  const r2 = cli('variants', '--recipe', bad, '-d', directions, '--out', join(dir, 'o'));
  assert.equal(r2.status, 2);
  assert.match(r2.stderr, /bad\.json: invalid variant recipe/);
});

test('with --project the CLI applies the project\'s sign-off as the app does; without one it says nothing is checked', async () => {
  const dir = tempDir();
  const project = join(dir, 'project');
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  let p: Project;
  try {
    p = Project.open(project, true, { name: gen.info.name, fingerprint: gen.info.fingerprint });
    const demo = decodeNpy(readFileSync(directions));
    const names = JSON.parse(readFileSync(directions.replace(/\.npy$/, '.json'), 'utf8')).directions.map((d: { name: string }) => d.name) as string[];
    const k = names.indexOf('axis_07');
    const size = demo.shape[demo.shape.length - 1];
    const vector = Float32Array.from(demo.data.subarray(k * size, (k + 1) * size) as Float32Array);
    p.saveDirection({ name: 'axis_07', target: null, layers: null, vector, notes: '', source: {} }, gen.layout.space);
    p.review('axis_07', vectorHash(vector, null), { status: 'rejected', reviewer: 'lead', note: 'leaks into orientation' });
  } finally {
    await gen.dispose();
  }
  const recipeFile = join(dir, 'recipe.json');
  writeFileSync(recipeFile, JSON.stringify({ format: 'plumbline.variant-recipe', version: 1, name: 'tilt', seeds: [1], psi: 0.7, settings: [{ label: 'tilted', strengths: { axis_07: 1 } }] }));
  // The project's own directions (no --directions): refused, naming the sign-off, nothing written.
  const own = cli('variants', '--recipe', recipeFile, '--project', project, '--out', join(dir, 'own'));
  assert.equal(own.status, 2, own.stderr);
  assert.match(own.stderr, /axis_07 was rejected at sign-off/);
  // The same vector from the demo file, judged by that project: refused the same way.
  const fromFile = cli('variants', '--recipe', recipeFile, '-d', directions, '--project', project, '--out', join(dir, 'file'));
  assert.equal(fromFile.status, 2, fromFile.stderr);
  assert.match(fromFile.stderr, /axis_07 was rejected at sign-off/);
  // A bare file with no project or pack has no sign-off to check: it renders, and says so.
  const bare = cli('variants', '--recipe', recipeFile, '-d', directions, '--out', join(dir, 'bare'));
  assert.equal(bare.status, 0, bare.stderr);
  assert.match(bare.stderr, /no sign-off or safe range to check/);
});
