// `plumbline define` and `audit --define` on the demo: an attribute from tags the descriptor can
// separate is saved into the project (a scorer file that loads back and scores images); tags it
// cannot separate are refused below the floor with the reason, nothing is written, and the audit
// does not run; a broken tags file is named with its problem (exit 2). The "separable" seeds were
// picked once by a script from the demo's own outline output (12 largest / 12 smallest among
// seeds 0–59 at ψ 0.7); the "coin" seeds split seeds 0–23 by parity, which no image shows.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { DefinedAttribute } from '../../app/engine/defined-attributes.ts';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/workspace.ts';
import { tempDir, write } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = (args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), ...args, '--threads', '1'], { encoding: 'utf8' });
const BOLD = [29, 24, 50, 23, 48, 12, 45, 57, 6, 56, 44, 11];
const THIN = [34, 18, 20, 32, 2, 28, 7, 40, 22, 39, 17, 4];
const EVEN = Array.from({ length: 12 }, (_, i) => 2 * i);
const ODD = EVEN.map((s) => s + 1);

test('define: saved with its accuracy when it clears the floor, refused with the reason when not', async () => {
  const dir = tempDir();
  const project = join(dir, 'proj');
  const tags = write(dir, 'tags.json', JSON.stringify({ bold_outline: { has: BOLD, lacks: THIN }, coin: { has: EVEN, lacks: ODD } }));
  const r = cli(['define', '--tags', tags, '--project', project]);
  assert.equal(r.status, 1, r.stderr);
  assert.match(r.stderr, /defined bold_outline: AUC 0\.\d\d \(5-fold CV; 12 have \/ 12 lack it; floor 0\.75\) — few examples: the estimate is noisy/);
  assert.match(r.stderr, /refused coin: 'coin' is not defined well enough: cross-validated AUC 0\.\d{3} over 5 folds is below the floor 0\.75/);
  assert.match(r.stderr, /1 attribute\(s\) refused below the accuracy floor; nothing was saved for them/);
  assert.ok(!existsSync(join(project, 'attributes', 'coin.json')));
  const file = join(project, 'attributes', 'bold_outline.json');
  const doc = JSON.parse(readFileSync(file, 'utf8'));
  assert.equal(doc.format, 'plumbline.defined-attribute');
  assert.deepEqual(doc.source, { has: BOLD, lacks: THIN });
  assert.equal(doc.model.weights.length, doc.descriptor.length);
  // The saved scorer loads and ranks fresh images: bold-outlined seeds score above thin ones.
  const a = DefinedAttribute.load(file);
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  try {
    const out = await gen.renderSeeds([...BOLD.slice(0, 4), ...THIN.slice(0, 4)], 0.7, []);
    const s = a.score(Array.from({ length: 8 }, (_, i) => gen.toRgba(out.images, i)));
    assert.ok(Math.min(...s.slice(0, 4)) > Math.max(...s.slice(4)), `scores ${Array.from(s).map((v) => v.toFixed(2))}`);
  } finally {
    await gen.dispose();
  }
});

test('audit --define refuses to audit with an attribute below the floor; a broken tags file is named', () => {
  const dir = tempDir();
  const tags = write(dir, 'coin.json', JSON.stringify({ coin: { has: EVEN, lacks: ODD } }));
  const r = cli(['audit', '-d', join(root, 'resources', 'demo', 'sigil-directions.npy'), '--only', 'turn', '--define', tags, '--probes', '4']);
  assert.equal(r.status, 1, r.stderr);
  assert.match(r.stderr, /not auditing: coin refused below the accuracy floor/);
  assert.doesNotMatch(r.stdout, /direction\s+target\s+verdict/);
  const bad = write(dir, 'bad.json', JSON.stringify({ gem: { has: [1, 2], lacks: [2, 3] } }));
  const b = cli(['define', '--tags', bad, '--project', join(dir, 'p')]);
  assert.equal(b.status, 2);
  assert.match(b.stderr, /bad\.json: 'gem' tags seed\(s\) 2 as both having and lacking it/);
  write(dir, 'bad.json', JSON.stringify({ gem: { has: 'all' } }));
  const c = cli(['define', '--tags', bad, '--project', join(dir, 'p')]);
  assert.equal(c.status, 2);
  assert.match(c.stderr, /bad\.json: not a valid tags file/);
});

test('audit --target audits a direction against another attribute for this audit only; a bad pair is named', () => {
  const disc = join(root, 'resources', 'disc');
  const out = join(tempDir(), 'target.json');
  const base = ['--model', join(disc, 'disc.onnx'), '--directions', join(disc, 'disc-directions.npy'), '--attributes', 'image', '--only', 'sheen', '--probes', '4', '--nulls', '0', '--combinations', 'none'];
  // sheen names a target nothing measures; pointed at subject_hue it is judged instead of "no measure".
  const r = spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'audit', ...base, '--target', 'sheen=subject_hue', '--json', out], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  const report = JSON.parse(readFileSync(out, 'utf8'));
  assert.equal(report.directions[0].target, 'subject_hue');
  assert.notEqual(report.directions[0].verdict, 'no-measure');
  const bad = spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'audit', ...base, '--target', 'glint=subject_hue'], { encoding: 'utf8' });
  assert.equal(bad.status, 2);
  assert.match(bad.stderr, /--target names no audited direction 'glint'; audited: sheen/);
});
