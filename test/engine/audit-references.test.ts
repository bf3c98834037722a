// Reference probes in an audit (issue 12: references usable everywhere a seed can): a latent
// added to the probe set must be edited, scored and resampled exactly like a seeded probe. The
// check that does not lean on the audit's own arithmetic: a reference whose latent IS the code the
// generator's own mapping network gives a random probe seed (codesForSeeds, the ONNX mapping
// graph) must reproduce, figure for figure, the audit that used that seed. The report names each
// reference with the SHA-256 of its latent bytes, checked against Node's SHA-256 of the .npy's
// data (FIPS 180-4, via OpenSSL), and the image SHA-256 from the locate report beside it.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { createHash } from 'node:crypto';
import { readFileSync, writeFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { runAudit, type AuditDirection, type AuditReport } from '../../app/engine/audit/run.ts';
import { referenceProbe } from '../../app/engine/audit/probes.ts';
import { encodeNpy } from '../../app/core/npy.ts';
import { tempDir } from '../helpers/models.ts';
import { demoAuditDirections, drain } from '../helpers/demo-audit.ts';

const root = join(import.meta.dirname, '..', '..');
const demoDir = join(root, 'resources', 'demo');
let host: Workspace;
let directions: AuditDirection[];

before(async () => {
  host = new Workspace({ threads: 1 });
  await host.openModel(demoCardPath());
  directions = demoAuditDirections(host, ['crest_size', 'outline_bold']);
});
after(async () => host.dispose());

/** The random probe seeds of settings.seed = 1 (plan.ts: PROBE_SEED_BASE + seed · SEED_STRIDE + i). */
const probeSeed = (i: number) => 0x70000000 + 1 * 100_003 + i;

test('a reference whose latent is a probe seed\'s code reproduces that seed\'s audit exactly; the report names it', async () => {
  const gen = host.requireGenerator();
  const settings = { sigmaSamples: 64, strengths: [-2, -1, 0, 1, 2], combinations: 'none' as const, bootstrapResamples: 300, nullDirections: 2, referencePathSamples: 0 };
  const N = 12;
  const seeded = await drain(runAudit(gen, directions, { ...settings, probes: N }));
  // The last two random probes as references, in the same positions (references follow the seeds).
  const codes = await gen.codesForSeeds([probeSeed(N - 2), probeSeed(N - 1)], 0.7);
  const per = gen.layout.layers * gen.layout.size;
  const refs = [referenceProbe('hero_a', codes.subarray(0, per), 'a'.repeat(64)), referenceProbe('hero_b', codes.subarray(per), null)];
  const withRefs = await drain(runAudit(gen, directions, { ...settings, probes: N - 2 }, { references: refs }));

  assert.equal(withRefs.probes.count, N);
  assert.deepEqual(withRefs.probes.references.map((r) => r.name), ['hero_a', 'hero_b']);
  assert.equal(withRefs.probes.references[0].imageSha256, 'a'.repeat(64));
  assert.equal(withRefs.probes.references[1].imageSha256, null);
  const sha = (a: Float32Array) => createHash('sha256').update(new Uint8Array(a.buffer, a.byteOffset, a.byteLength)).digest('hex');
  assert.equal(withRefs.probes.references[0].latentSha256, sha(codes.subarray(0, per)));
  for (const d of seeded.directions) {
    const r = withRefs.directions.find((x) => x.name === d.name)!;
    for (const key of ['verdict', 'targetEffect', 'leakage', 'dependency', 'pathLength', 'safeRange', 'curves', 'exceedance', 'nullBaseline'] as const) {
      assert.deepEqual(r[key], d[key], `${d.name}.${key} differs between the seed and the same latent as a reference`);
    }
    // A worst probe that is a reference is named by it, with no seed; the rest keep their seeds.
    assert.equal(r.worstProbes.length, d.worstProbes.length);
    r.worstProbes.forEach((w, i) => {
      const s = d.worstProbes[i];
      if (s.seed === probeSeed(N - 2) || s.seed === probeSeed(N - 1)) {
        assert.equal(w.seed, null);
        assert.equal(w.reference, s.seed === probeSeed(N - 2) ? 'hero_a' : 'hero_b');
      } else assert.equal(w.seed, s.seed);
      assert.deepEqual(w.before, s.before, 'same thumbnail');
    });
  }
});

test('reference probes of the wrong size or not finite are refused, naming the reference', async () => {
  const gen = host.requireGenerator();
  await assert.rejects(drain(runAudit(gen, directions, { probes: 4 }, { references: [referenceProbe('odd', new Float32Array(7), null)] })), /reference 'odd' has 7 values; this generator needs 32 \(W\) or 96 \(W\+\)/);
  await assert.rejects(drain(runAudit(gen, directions, { probes: 4 }, { references: [referenceProbe('nan', new Float32Array(32).fill(NaN), null)] })), /reference 'nan' contains NaN/);
  // A probe set of references alone is a probe set.
  const codes = await gen.codesForSeeds([5, 6], 0.7);
  const plan = await import('../../app/core/audit/plan.ts');
  const p = plan.planAudit({ probes: 0 }, directions, gen.layout, ['crest_size'], false, [referenceProbe('x', codes.subarray(0, 96), null), referenceProbe('y', codes.subarray(96), null)]);
  assert.equal(p.probeCount, 2);
});

test('CLI: audit --pin-latents adds .npy latents as probes, with the image SHA-256 of the locate report beside each', async () => {
  const gen = host.requireGenerator();
  const dir = tempDir('plumbline-audit-refs-');
  const code = (await gen.codesForSeeds([42], 0.7));
  const npy = join(dir, 'found.npy');
  writeFileSync(npy, encodeNpy(code, [1, gen.layout.layers, gen.layout.size]));
  const imageSha = createHash('sha256').update('the reference image bytes').digest('hex');
  writeFileSync(join(dir, 'found.json'), JSON.stringify({ format: 'plumbline.locate-report', version: 1, image: { file: 'ref.png', sha256: imageSha } }));
  const out = join(dir, 'audit.json');
  const cli = (...args: string[]) => spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'audit', '--model', demoCardPath(), '--directions', join(demoDir, 'sigil-directions.npy'), '--only', 'crest_size', '--combinations', 'none', '--nulls', '0', '--resamples', '200', '--threads', '1', ...args], { encoding: 'utf8' });
  const r = cli('--probes', '6', '--pin-latents', npy, '--json', out);
  assert.equal(r.status, 0, r.stderr);
  const report = JSON.parse(readFileSync(out, 'utf8')) as AuditReport;
  assert.equal(report.probes.count, 7);
  assert.deepEqual(report.probes.references, [{ name: 'found', imageSha256: imageSha, latentSha256: createHash('sha256').update(readFileSync(npy).subarray(readFileSync(npy).length - code.byteLength)).digest('hex') }]);
  // A file holding several latents, or the wrong size, is refused naming the file.
  const two = join(dir, 'two.npy');
  writeFileSync(two, encodeNpy(new Float32Array(64), [2, 32]));
  const bad = cli('--probes', '6', '--pin-latents', two);
  assert.equal(bad.status, 2, bad.stderr);
  assert.match(bad.stderr, /two\.npy: --pin-latents takes one latent per file; this one has shape \[2, 32\]/);
});
