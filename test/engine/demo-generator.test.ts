// The bundled demo generator: deterministic authoring, shape, range, determinism of renders, and
// every ground-truth factor responding to the demo directions as their documented truth says.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, readdirSync } from 'node:fs';
import { join } from 'node:path';
import { authorDemo } from '../../resources/author-demo.ts';
import { Generator } from '../../app/engine/generator.ts';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { tempDir } from '../helpers/models.ts';

const resources = join(import.meta.dirname, '..', '..', 'resources', 'demo');
let gen: Generator;
let host: Workspace;
let dirs: { id: string; name: string; sigma: number }[];
let meta: { directions: { name: string; target: string | null; layers: [number, number] | null; truth: { verdict: string; leaksInto: string[]; breaksAbove?: number; movesMost?: string } }[] };

before(async () => {
  host = new Workspace({ threads: 1 });
  await host.openModel(demoCardPath());
  gen = host.generator!;
  dirs = host.openDirections(join(resources, 'sigil-directions.npy')).directions;
  meta = JSON.parse(readFileSync(join(resources, 'sigil-directions.json'), 'utf8'));
});
after(async () => host.dispose());

test('authoring twice gives identical bytes, equal to the committed resources', () => {
  const a = tempDir();
  const b = tempDir();
  authorDemo(a);
  authorDemo(b);
  for (const f of readdirSync(a)) {
    const x = readFileSync(join(a, f));
    assert.ok(x.equals(readFileSync(join(b, f))), `${f} differs between two runs`);
    assert.ok(x.equals(readFileSync(join(resources, f))), `${f} differs from the committed resources/demo/${f}; rerun npm run author:demo`);
  }
});

test('renders [N,3,128,128] in [-1,1], deterministically and independently of batch', async () => {
  const seeds = [0, 1, 2, 3, 4];
  const r1 = await gen.renderSeeds(seeds, 0.7, []);
  const r2 = await gen.renderSeeds(seeds, 0.7, []);
  assert.equal(r1.images.length, 5 * 3 * 128 * 128);
  assert.deepEqual(r1.images, r2.images);
  let lo = Infinity;
  let hi = -Infinity;
  for (const v of r1.images) {
    lo = Math.min(lo, v);
    hi = Math.max(hi, v);
  }
  assert.ok(lo >= -1 && hi <= 1, `range [${lo}, ${hi}]`);
  assert.ok(hi - lo > 1, 'images have contrast');
  const single = await gen.renderSeeds([3], 0.7, []);
  const plane = 3 * 128 * 128;
  let maxDiff = 0;
  for (let i = 0; i < plane; i++) maxDiff = Math.max(maxDiff, Math.abs(single.images[i] - r1.images[3 * plane + i]));
  assert.ok(maxDiff < 1e-5, `seed 3 alone vs in a batch differs by ${maxDiff}`);
  // Different seeds give different images.
  let diff = 0;
  for (let i = 0; i < plane; i++) diff += Math.abs(r1.images[i] - r1.images[plane + i]);
  assert.ok(diff / plane > 0.01);
});

const PROBES = Array.from({ length: 24 }, (_, i) => 1000 + i);

async function attributeStd(): Promise<number[]> {
  const seeds = Array.from({ length: 512 }, (_, i) => 50000 + i);
  const r = await gen.renderSeeds(seeds, 1, []);
  const k = gen.attributeNames.length;
  return Array.from({ length: k }, (_, j) => {
    let s = 0;
    let s2 = 0;
    for (let i = 0; i < seeds.length; i++) {
      const v = r.attributes![i * k + j];
      s += v;
      s2 += v * v;
    }
    const m = s / seeds.length;
    return Math.sqrt(s2 / seeds.length - m * m);
  });
}

/** Mean absolute change of each attribute, in units of its std over random samples. */
async function effect(directionId: string, strength: number, std: number[], psi = 0.7, probes = PROBES): Promise<number[]> {
  const base = await gen.renderSeeds(probes, psi, []);
  const moved = await gen.renderSeeds(probes, psi, host.edits([{ direction: directionId, strength }]));
  const k = gen.attributeNames.length;
  return Array.from({ length: k }, (_, j) => {
    let s = 0;
    for (let i = 0; i < probes.length; i++) s += Math.abs(moved.attributes![i * k + j] - base.attributes![i * k + j]);
    return s / probes.length / (std[j] || 1);
  });
}

test('each demo direction moves the ground-truth factors as its documented truth says', async () => {
  const std = await attributeStd();
  const names = gen.attributeNames;
  const idx = (n: string) => names.indexOf(n);
  for (const entry of meta.directions) {
    const d = dirs.find((x) => x.name === entry.name)!;
    const e = await effect(d.id, 1, std);
    const ranked = names.map((n, j) => ({ n, v: e[j] })).filter((x) => x.n !== 'artifact').sort((a, b) => b.v - a.v);
    const target = entry.target ?? entry.truth.movesMost!;
    assert.equal(ranked[0].n, target, `${entry.name}: moves ${ranked[0].n} most, truth says ${target}`);
    const tv = e[idx(target)];
    assert.ok(tv > 0.2, `${entry.name}: target effect ${tv.toFixed(3)} σ per σ-step is too small`);
    const others = ranked.filter((x) => x.n !== target);
    if (entry.truth.verdict === 'clean' || entry.truth.verdict === 'breaks') {
      for (const o of others) assert.ok(o.v < 1e-3 * tv, `${entry.name}: should be clean but moves ${o.n} by ${o.v.toExponential(2)} (target ${tv.toFixed(3)})`);
    } else {
      assert.ok(entry.truth.leaksInto.length > 0);
      for (const leak of entry.truth.leaksInto) assert.ok(e[idx(leak)] > 0.15 * tv, `${entry.name}: documented leak into ${leak} is only ${(e[idx(leak)] / tv).toFixed(3)} of the target`);
    }
  }
});

test('glow_surge breaks past its documented strength and not before', async () => {
  const entry = meta.directions.find((x) => x.name === 'glow_surge')!;
  const limit = entry.truth.breaksAbove!;
  assert.ok(limit > 1.5 && limit < 4, `breaks at a moderate strength (${limit})`);
  const d = dirs.find((x) => x.name === 'glow_surge')!;
  const a = gen.attributeNames.indexOf('artifact');
  // ψ = 0 puts every probe at the truncation centre, where the documented strength applies exactly.
  const at = async (s: number) => (await gen.renderSeeds([0], 0, host.edits([{ direction: d.id, strength: s }]))).attributes![a];
  assert.equal(await at(0), 0);
  assert.equal(await at(limit - 0.1), 0);
  assert.ok((await at(limit + 0.3)) > 0.1, 'artifact appears past the limit');
  assert.equal((await gen.renderSeeds([0], 0, host.edits([{ direction: d.id, strength: -3 }]))).attributes![a], 0, 'the negative side stays healthy');
});
