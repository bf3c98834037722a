// Every loading error of a user generator, through the engine (Generator / host) and through the
// CLI: each names the file and the problem, and the process keeps running.
import { test, before } from 'node:test';
import assert from 'node:assert/strict';
import { readFileSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { spawnSync } from 'node:child_process';
import * as ort from 'onnxruntime-node';
import { Generator } from '../../app/engine/generator.ts';
import { EngineHost } from '../../app/engine/host.ts';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import { request } from '../../app/protocol/messages.ts';
import { encodeNpy } from '../../app/core/npy.ts';
import { decodeModel, summarizeModel } from '../../app/core/onnx/inspect.ts';
import { addModel, intInputModel, linearGenerator, nanGenerator, rank3Generator, tempDir, write } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
const cli = join(root, 'app', 'cli', 'bin.js');
let dir: string;
const cases: { name: string; file: () => string; code: string; pattern: RegExp }[] = [];

before(() => {
  dir = tempDir();
  const demo = readFileSync(join(root, 'resources', 'demo', 'sigil-synthesis.onnx'));
  const files = {
    text: write(dir, 'notes.onnx', 'these are my notes, not a model\n'),
    truncated: write(dir, 'cut.onnx', demo.subarray(0, Math.floor(demo.length / 2))),
    intInput: write(dir, 'ids.onnx', intInputModel()),
    rank3: write(dir, 'rank3.onnx', rank3Generator()),
    fourChannels: write(dir, 'rgba.onnx', linearGenerator({ channels: 4 })),
    farRange: write(dir, 'loud.onnx', linearGenerator({ scale: 400 })),
    nan: write(dir, 'nan.onnx', nanGenerator()),
  };
  cases.push(
    { name: 'not ONNX', file: () => files.text, code: 'not-onnx', pattern: /notes\.onnx: not an ONNX model/ },
    { name: 'truncated file', file: () => files.truncated, code: 'onnx-truncated', pattern: /cut\.onnx: the ONNX file ends early/ },
    { name: 'no float latent input', file: () => files.intInput, code: 'no-latent-input', pattern: /ids\.onnx: no float latent input.*ids int64\[N, 4\]/ },
    { name: 'image output of wrong rank', file: () => files.rank3, code: 'bad-image-output', pattern: /rank3\.onnx: no image output of rank 4; output 'image' has shape \[N, 3, 16\]/ },
    { name: 'wrong channel count', file: () => files.fourChannels, code: 'bad-image-output', pattern: /rgba\.onnx: image output 'image' has shape \[N, 4, 8, 8\]: neither dimension 1/ },
    { name: 'values far outside the declared range', file: () => files.farRange, code: 'output-out-of-range', pattern: /loud\.onnx: \d+ output value\(s\) are far outside the declared range \[-1, 1\]/ },
    { name: 'NaN outputs', file: () => files.nan, code: 'output-not-finite', pattern: /nan\.onnx: the generator produced \d+ NaN or infinite value/ },
    { name: 'missing file', file: () => join(dir, 'nowhere.onnx'), code: 'file-missing', pattern: /nowhere\.onnx: synthesis model not found/ },
  );
});

test('each bad generator fails to open with its own code and a message naming the file', async () => {
  for (const c of cases) {
    await assert.rejects(Generator.open(c.file(), { threads: 1 }), (err: { code: string; message: string }) => {
      assert.equal(err.code, c.code, `${c.name}: ${err.message}`);
      assert.match(err.message, c.pattern, c.name);
      return true;
    });
  }
});

test('the host answers each failure as a typed error response and keeps serving', async () => {
  const host = new EngineHost({ threads: 1 });
  const got: any[] = [];
  const port = { post: (m: unknown) => got.push(m) };
  let id = 1;
  for (const c of cases) host.receive(request(id++, 'model.open', { path: c.file() }), port);
  host.receive(request(id++, 'model.openDemo', {}), port);
  const deadline = Date.now() + 20000;
  while (got.length < cases.length + 1 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 20));
  cases.forEach((c, i) => {
    const r = got.find((m) => m.id === i + 1);
    assert.equal(r.ok, false, c.name);
    assert.equal(r.error.code, c.code, c.name);
  });
  assert.equal(got.find((m) => m.id === cases.length + 1).ok, true, 'the demo still opens afterwards');
  await host.dispose();
});

test('a directions file whose latent size does not match is refused with both sizes', async () => {
  const host = new Workspace({ threads: 1 });
  await host.openModel(demoCardPath());
  const npy = write(dir, 'small.npy', encodeNpy(new Float32Array(16).fill(1), [16]));
  assert.throws(() => host.openDirections(npy), /small\.npy: direction shape \[16\] does not match this generator's latent size 32 \(W\+ with 3 layers\)/);
  const bad = write(dir, 'broken.npy', 'definitely not numpy');
  assert.throws(() => host.openDirections(bad), /broken\.npy: not a NumPy \.npy file/);
  await host.dispose();
});

test('a generator without a card is inferred from the graph and says what it assumed', async () => {
  const file = write(dir, 'plain.onnx', linearGenerator({ d: 6, h: 8, w: 8 }));
  const gen = await Generator.open(file, { threads: 1 });
  assert.equal(gen.info.space, 'z');
  assert.equal(gen.info.latentSize, 6);
  assert.equal(gen.info.width, 8);
  assert.ok(gen.info.assumptions.some((a) => /inferred from the graph/.test(a)));
  assert.ok(gen.info.assumptions.some((a) => /image output 'image' read as NCHW/.test(a)));
  await gen.dispose();
  const nhwc = await Generator.open(write(dir, 'nhwc.onnx', linearGenerator({ nhwc: true })), { threads: 1 });
  assert.equal(nhwc.imageLayout, 'NHWC');
  await nhwc.dispose();
});

test('the hand-built model of METHODS §7.2 reads and runs as published', async () => {
  // Reference: METHODS §7.2 (checked there in onnxruntime-web 1.30.0): inputs ['z'] (the
  // initializer is not an input), outputs ['img'], [[1,1,1,1],[2,2,2,2]] → [1.5,0,3,1, 2.5,1,4,2].
  const bytes = addModel();
  const s = summarizeModel(decodeModel(bytes, 'add.onnx'));
  assert.deepEqual(s.inputs.map((i) => i.name), ['z']);
  assert.deepEqual(s.inputs[0].dims, ['N', 4]);
  assert.deepEqual(s.outputs.map((o) => o.name), ['img']);
  assert.equal(s.metadata.z_dim, '4');
  const session = await ort.InferenceSession.create(bytes);
  const out = await session.run({ z: new ort.Tensor('float32', Float32Array.from([1, 1, 1, 1, 2, 2, 2, 2]), [2, 4]) });
  assert.deepEqual(Array.from(out.img.data as Float32Array), [1.5, 0, 3, 1, 2.5, 1, 4, 2]);
  await session.release();
});

test('the CLI reports each bad generator with exit code 2 and the same message', () => {
  for (const c of cases) {
    const r = spawnSync(process.execPath, [cli, 'sample', '--model', c.file(), '--seeds', '0-1', '--out', join(dir, 'out')], { encoding: 'utf8' });
    assert.equal(r.status, 2, `${c.name}: exit ${r.status}: ${r.stderr}`);
    assert.match(r.stderr, /^plumbline: error: /m, c.name);
    assert.match(r.stderr, c.pattern, c.name);
  }
  const sizes = spawnSync(process.execPath, [cli, 'sample', '--seeds', '3-1', '--out', join(dir, 'o')], { encoding: 'utf8' });
  assert.equal(sizes.status, 2);
  assert.match(sizes.stderr, /seed range '3-1' runs backwards/);
  writeFileSync(join(dir, 'bad.card.json'), '{"format":"plumbline.model-card","version":1}');
  const card = spawnSync(process.execPath, [cli, 'sample', '--model', join(dir, 'bad.card.json'), '--seeds', '0', '--out', join(dir, 'o')], { encoding: 'utf8' });
  assert.equal(card.status, 2);
  assert.match(card.stderr, /bad\.card\.json: invalid model card — name/);
});
