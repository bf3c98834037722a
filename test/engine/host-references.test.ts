// The app's side of references as probes and in variant sets: through the engine host's protocol
// (the messages the renderer sends), a reference pinned in the open project joins an audit's probe
// set by name and renders in a variant set by name. The check outside the handlers: the reference's
// latent is the generator's own code for seed 7 (codesForSeeds), so its variant PNG must be
// byte-identical to seed 7's, and the report must carry the SHA-256 the locate report recorded.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { readFileSync } from 'node:fs';
import { createHash } from 'node:crypto';
import { EngineHost } from '../../app/engine/host.ts';
import { Generator } from '../../app/engine/generator.ts';
import { demoCardPath } from '../../app/engine/workspace.ts';
import { saveReference } from '../../app/engine/references.ts';
import type { Method, Params } from '../../app/protocol/messages.ts';
import { callHostChecked } from '../helpers/host.ts';
import { tempDir } from '../helpers/models.ts';

let host: EngineHost;
const call = <M extends Method>(method: M, params: Params<M>) => callHostChecked(host, method, params);

const sha = (b: Uint8Array) => createHash('sha256').update(b).digest('hex');
let project: string;
const imageSha = sha(new TextEncoder().encode('hero image'));

before(async () => {
  host = new EngineHost({ threads: 1 });
  await call('model.openDemo', {});
  await call('directions.open', { path: join(import.meta.dirname, '..', '..', 'resources', 'demo', 'sigil-directions.npy') });
  project = join(tempDir('plumbline-host-refs-'), 'proj');
  await call('project.open', { path: project, create: true });
  const gen = await Generator.open(demoCardPath(), { threads: 1 });
  try {
    saveReference(project, 'hero', await gen.codesForSeeds([7], 0.7), [gen.layout.layers, gen.layout.size], {
      format: 'plumbline.locate-report', image: { sha256: imageSha }, generator: { name: gen.info.name, fingerprint: gen.info.fingerprint },
      match: { found: true, ssim: 0.99, meanDeltaE00: 0.4, message: 'found' }, budget: { evaluations: 10, budget: 3000 },
    });
  } finally {
    await gen.dispose();
  }
});
after(async () => host.dispose());

test('audit.run and variants.render take the open project\'s references by name', async () => {
  assert.deepEqual((await call('reference.list', {})).references.map((r) => r.name), ['hero']);
  const ids = (await call('directions.list', {})).directions.filter((d) => d.name === 'crest_size').map((d) => d.id);
  const a = await call('audit.run', { directions: ids, probes: 4, pinnedSeeds: [], references: ['hero'], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.2, leakFail: 0.5, nullDirections: 0, combinations: 'none' });
  assert.equal(a.cancelled, false);
  if (a.cancelled) return;
  const probes = a.report.probes as any;
  assert.equal(probes.count, 5);
  assert.equal(probes.references[0].name, 'hero');
  assert.equal(probes.references[0].imageSha256, imageSha);
  assert.equal(probes.references[0].latentSha256, sha(readFileSync(join(project, 'references', 'hero.npy')).subarray(-3 * 32 * 4)));
  await assert.rejects(call('audit.run', { directions: ids, probes: 4, pinnedSeeds: [], references: ['nobody'], psi: 0.7, seed: 1, referenceStrength: 2, leakPass: 0.2, leakFail: 0.5, nullDirections: 0, combinations: 'none' }), /no reference named 'nobody' in this project/);

  const out = join(tempDir('plumbline-host-refs-out-'), 'set');
  const v = await call('variants.render', { name: 'heroes', seeds: [7], references: ['hero'], psi: 0.7, settings: [{ label: 'big', strengths: { [ids[0]]: 1.5 } }], out, forceReason: 'test: unaudited direction' } as never);
  assert.equal((v as any).cancelled, false);
  assert.equal(sha(readFileSync(join(out, 'big', 'reference-hero.png'))), sha(readFileSync(join(out, 'big', 'seed-000007.png'))), 'the reference renders as the seed whose code it holds');
  const manifest = JSON.parse(readFileSync(join(out, 'manifest.json'), 'utf8'));
  assert.deepEqual(manifest.latents[1], { reference: 'hero', latentSha256: probes.references[0].latentSha256, imageSha256: imageSha });
});
