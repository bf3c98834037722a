// Named references stored in a project: round trip through .npy (read back by the project's
// reader, itself checked against NumPy in npy-numpy.test.ts) and refusal of unsafe names.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { readdirSync } from 'node:fs';
import { join } from 'node:path';
import { saveReference, loadReference, listReferences } from '../../app/engine/references.ts';
import { tempDir } from '../helpers/models.ts';

const report = { image: { sha256: 'a'.repeat(64) }, generator: { name: 'demo', fingerprint: 'f'.repeat(64) }, match: { found: true, ssim: 0.97, meanDeltaE00: 1.1, message: 'found' }, budget: { evaluations: 1200, budget: 3000 } };

test('save, list and load a named reference', () => {
  const dir = tempDir();
  const latent = Float32Array.from({ length: 96 }, (_, i) => Math.sin(i));
  saveReference(dir, 'hero_crest', latent, [3, 32], report);
  assert.deepEqual(listReferences(dir), ['hero_crest']);
  const r = loadReference(dir, 'hero_crest');
  assert.deepEqual(r.shape, [3, 32]);
  assert.deepEqual(r.latent, latent);
  assert.equal(r.report.match.ssim, 0.97);
  assert.deepEqual(readdirSync(join(dir, 'references')).sort(), ['hero_crest.json', 'hero_crest.npy']);
});

test('names that could leave the folder are refused', () => {
  const dir = tempDir();
  for (const bad of ['../x', 'a/b', '.hidden', '', 'x'.repeat(121)]) assert.throws(() => saveReference(dir, bad, new Float32Array(4), [4], report), /reference name/);
  assert.throws(() => loadReference(dir, 'missing'), /no reference named 'missing'/);
});
