// Resuming a variant set never keeps stale images (issue 10): render recipe A into a folder, then
// recipe B (same labels, other strengths) into the same folder. Before the fix the run said
// "0 rendered, 24 kept" and left A's pictures under B's manifest. The reference is a clean
// render of B into an empty folder: every file must match it byte for byte.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync, statSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args], { encoding: 'utf8' });
const directions = join(root, 'resources', 'demo', 'sigil-directions.npy');
const seeds = [3, 5, 8, 13];
const recipe = (strength: number) => ({
  format: 'plumbline.variant-recipe', version: 1, name: 'factions', seeds, psi: 0.7,
  settings: [{ label: 'base', strengths: {} }, { label: 'big', strengths: { crest_size: strength } }, { label: 'warm', strengths: { hue_shift: strength } }],
});
const pngs = (dir: string) => readdirSync(dir).filter((d) => statSync(join(dir, d)).isDirectory()).flatMap((d) => readdirSync(join(dir, d)).map((f) => `${d}/${f}`)).sort();

test('a folder rendered with recipe A and resumed with recipe B holds exactly B', () => {
  const dir = tempDir();
  const a = join(dir, 'a.json');
  const b = join(dir, 'b.json');
  writeFileSync(a, JSON.stringify(recipe(1)));
  writeFileSync(b, JSON.stringify(recipe(2)));
  const out = join(dir, 'shared');
  const first = cli('variants', '--recipe', a, '-d', directions, '--out', out);
  assert.equal(first.status, 0, first.stderr);
  assert.match(first.stdout, /12 rendered, 0 kept/);
  assert.doesNotMatch(first.stdout, /the sheet shows/, 'four seeds: the sheet shows every one');
  const second = cli('variants', '--recipe', b, '-d', directions, '--out', out);
  assert.equal(second.status, 0, second.stderr);
  // 'base' is identical in both recipes (no edits): its 4 images are rightly kept.
  assert.match(second.stdout, /8 rendered \(8 replaced: 8 whose recipe entry changed\), 4 kept/);
  const clean = join(dir, 'clean');
  assert.equal(cli('variants', '--recipe', b, '-d', directions, '--out', clean).status, 0);
  assert.deepEqual(pngs(out), pngs(clean));
  for (const f of pngs(clean)) assert.ok(readFileSync(join(out, f)).equals(readFileSync(join(clean, f))), `${f} matches a clean render of B`);
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  assert.deepEqual(manifest.settings.find((s: any) => s.label === 'big').strengths, { crest_size: 2 });
  assert.ok(manifest.images.every((i: any) => /^[0-9a-f]{64}$/.test(i.key)), 'each image records the key of the recipe entry that made it');
  const third = cli('variants', '--recipe', b, '-d', directions, '--out', out);
  assert.match(third.stdout, /0 rendered, 12 kept/, 'an unchanged recipe resumes without rendering');
  // A run that stopped before its manifest listed some images, and a file edited since: each
  // replacement says why (not "recipe entry changed", which is not so).
  const m = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  const dropped = m.images.filter((i: any) => i.setting === 'warm').map((i: any) => i.file);
  m.images = m.images.filter((i: any) => i.setting !== 'warm');
  writeFileSync(join(out, 'manifest.json'), JSON.stringify(m));
  writeFileSync(join(out, m.images[0].file), 'not the image any more');
  const fourth = cli('variants', '--recipe', b, '-d', directions, '--out', out);
  assert.equal(fourth.status, 0, fourth.stderr);
  assert.equal(dropped.length, 4);
  assert.match(fourth.stdout, /5 rendered \(5 replaced: 4 not yet in the manifest when an earlier run stopped, 1 changed on disk since they were written\), 7 kept/);
  for (const f of pngs(clean)) assert.ok(readFileSync(join(out, f)).equals(readFileSync(join(clean, f))), `${f} matches a clean render of B again`);
});

test('a folder holding someone else\'s manifest.json is not overwritten', () => {
  const dir = tempDir();
  const r = join(dir, 'r.json');
  writeFileSync(r, JSON.stringify(recipe(1)));
  writeFileSync(join(dir, 'manifest.json'), '{"name":"my web app","version":"1.0.0"}');
  const run = cli('variants', '--recipe', r, '-d', directions, '--out', dir);
  assert.equal(run.status, 2);
  assert.match(run.stderr, /manifest\.json: not a variant-set manifest \(choose another folder\)/);
  assert.equal(readFileSync(join(dir, 'manifest.json'), 'utf8'), '{"name":"my web app","version":"1.0.0"}');
});
