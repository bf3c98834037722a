// The CLI and the engine run the same workspace operations: the same discovery and the same repair
// give the same directions whichever way they are asked for. The CLI's .npy files are read back
// with NumPy (/usr/bin/python3), an outside reader, and compared with the engine's vectors.
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { spawnSync } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { join } from 'node:path';
import { EngineHost } from '../../app/engine/host.ts';
import { parseResult, request, type Method, type Params } from '../../app/protocol/messages.ts';
import { tempDir } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = join(root, 'app', 'cli', 'bin.js');
const demoDirections = join(root, 'resources', 'demo', 'sigil-directions.npy');
const PYTHON = '/usr/bin/python3';
const skip = existsSync(PYTHON) && spawnSync(PYTHON, ['-c', 'import numpy'], { encoding: 'utf8' }).status === 0 ? false : `${PYTHON} with numpy is not available here`;

let host: EngineHost;
let nextId = 1;
async function call<M extends Method>(method: M, params: Params<M>) {
  const id = nextId++;
  let got: any = null;
  host.receive(request(id, method, params), { post: (m: any) => { if (m.type === 'response' && m.id === id) got = m; } });
  while (!got) await new Promise((r) => setTimeout(r, 10));
  if (!got.ok) throw new Error(got.error.message);
  return parseResult(method, got.result);
}

before(async () => {
  host = new EngineHost({ threads: 1 });
  await call('model.openDemo', {});
  await call('directions.open', { path: demoDirections });
});
after(async () => host.dispose());

/** Rows of an .npy file as NumPy reads them. */
function numpyRows(file: string): number[][] {
  const r = spawnSync(PYTHON, ['-c', 'import sys, json, numpy as np; a = np.load(sys.argv[1]); print(json.dumps(np.atleast_2d(a).astype(float).tolist()))', file], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  return JSON.parse(r.stdout);
}

function runCli(args: string[]) {
  const r = spawnSync(process.execPath, [cli, ...args, '--threads', '1'], { encoding: 'utf8' });
  assert.equal(r.status, 0, r.stderr);
  return r;
}

test('the same discovery from the CLI and through the engine gives the same directions', { skip }, async () => {
  for (const method of ['sefa', 'pca'] as const) {
    const out = join(tempDir(), `${method}.npy`);
    runCli(['discover', '--method', method, '-k', '3', '--samples', '600', '--seed', '4', '-o', out]);
    const r = await call('lab.discover', { method, components: 3, samples: 600, seed: 4, layers: null, positive: [], negative: [], stripSeeds: [0], stripStrengths: [0] });
    assert.equal(r.cancelled, false);
    if (r.cancelled) return;
    const rows = numpyRows(out);
    const meta = JSON.parse(readFileSync(out.replace(/\.npy$/, '.json'), 'utf8'));
    assert.equal(rows.length, r.candidates.length, method);
    r.candidates.forEach((c, i) => {
      const vector = host.workspace.direction(c.direction.id).vector;
      assert.deepEqual(rows[i], Array.from(vector), `${method} ${c.direction.name}: identical values`);
      assert.equal(meta.directions[i].name, c.direction.name);
    });
  }
});

test('the same repair from the CLI and through the engine gives the same direction', { skip }, async () => {
  const out = join(tempDir(), 'repaired.npy');
  const printed = runCli(['repair', '-d', demoDirections, '--direction', 'outline_bold', '--against', 'backdrop', '--hold', 'others', '-o', out]);
  const list = (await call('directions.list', {})).directions;
  const r = await call('lab.repair', { direction: list.find((d) => d.name === 'outline_bold')!.id, against: ['backdrop'], hold: 'others' });
  assert.equal(r.cancelled, false);
  if (r.cancelled) return;
  assert.deepEqual(numpyRows(out)[0], Array.from(host.workspace.direction(r.direction.id).vector));
  // The CLI prints each boundary's held-out accuracy; the engine answers the same boundaries.
  for (const b of r.boundaries) assert.match(printed.stdout, new RegExp(`boundary ${b.attribute}\\s+${b.role}\\s+held-out accuracy ${(b.accuracy * 100).toFixed(1)}%`));
});
