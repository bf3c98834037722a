// The encoder start of `locate` (issue 12: `--start encoder.onnx`, image → w or w+): a tiny encoder
// authored here as an ONNX graph, whose output is a fixed latent whatever the image (the ReduceMean
// of the image times 0, plus a constant: onnxruntime evaluates it, so the file really runs). The
// search must start at exactly that latent: its first evaluation's figures equal the figures of
// the generator's own render of that latent, and when that latent IS the target's, the first
// evaluation is already a match by the acceptance thresholds (SSIM ≥ 0.95 with ΔE00 ≤ 2), checked
// also with ssim.js (an independent SSIM implementation, Wang et al. 2004) on the same images.
// An encoder whose output has the wrong shape is refused with an error naming the file, from the
// engine and from the CLI (exit 2).
import { test, before, after } from 'node:test';
import assert from 'node:assert/strict';
import { join } from 'node:path';
import { writeFileSync } from 'node:fs';
import { spawnSync } from 'node:child_process';
import ssimModule from 'ssim.js';
import { Workspace, demoCardPath } from '../../app/engine/workspace.ts';
import type { Generator } from '../../app/engine/generator.ts';
import { locate, type LocateProgress } from '../../app/engine/locate.ts';
import { encodeStart } from '../../app/engine/locate-encoder.ts';
import { decodeReference } from '../../app/core/reference-image.ts';
import { MatchTarget, outputToPlanes, FOUND_SSIM, FOUND_DELTA_E } from '../../app/core/search/match.ts';
import { encodePng } from '../../app/core/image.ts';
import { GraphBuilder } from '../../app/core/onnx/graph-builder.ts';
import { tempDir, write } from '../helpers/models.ts';

const root = join(import.meta.dirname, '..', '..');
let host: Workspace;
let gen: Generator;
let dir: string;

before(async () => {
  host = new Workspace({ threads: 1 });
  await host.openModel(demoCardPath());
  gen = host.requireGenerator();
  dir = tempDir('plumbline-encoder-');
});
after(async () => host.dispose());

/** An encoder [1, 3, H, W] → `latent` with dims `outDims`, for any image. */
function fixedEncoder(name: string, latent: Float32Array, outDims: number[]): string {
  const { width, height } = gen.imageSize();
  const g = new GraphBuilder('encoder');
  const x = g.input('image', [1, 3, height, width]);
  const mean = g.op('Reshape', [g.op('ReduceMean', [x], { axes: [1, 2, 3], keepdims: 1 }), g.int64s('s', [1, 1])]);
  const zero = g.op('Mul', [mean, g.scalar(0)]);
  const out = g.op('Reshape', [g.op('Add', [zero, g.tensor('w', latent, [1, latent.length])]), g.int64s('o', outDims)]);
  g.output(out, 'latent', outDims);
  return write(dir, name, g.toModel());
}

async function targetPng(seed: number): Promise<{ file: string; png: Uint8Array }> {
  const png = encodePng(gen.toRgba((await gen.renderSeeds([seed], gen.info.defaultPsi, [])).images, 0));
  const file = join(dir, `target-${seed}.png`);
  writeFileSync(file, png);
  return { file, png };
}

test('locate starts at the encoder\'s latent: the first evaluation is that latent\'s match', async () => {
  const { width, height } = gen.imageSize();
  const { layers, size } = gen.layout;
  const { png, file } = await targetPng(731_777);
  const reference = decodeReference(png, file, width, height).image;
  const target = new MatchTarget(reference);
  for (const [label, seed] of [['the target\'s own latent', 731_777], ['another seed\'s latent', 5]] as const) {
    // W of the seed (one row of its truncated codes), as a w-space encoder would give it.
    const w = (await gen.codesForSeeds([seed], gen.info.defaultPsi)).slice(0, size);
    const encoder = fixedEncoder(`encoder-${seed}.onnx`, w, [1, size]);
    const start = await encodeStart(encoder, gen, reference);
    assert.deepEqual(Array.from(start), Array.from(w), 'the encoder ran and gave its latent');
    const job = locate(gen, reference, { start, budget: 60 });
    const first = (await job.next()).value as LocateProgress;
    await job.return(undefined as never);
    assert.equal(first.done, 1, 'one evaluation: the start');
    // The same latent rendered directly (W on every row) and measured.
    const codes = new Float32Array(layers * size);
    for (let l = 0; l < layers; l++) codes.set(w, l * size);
    const rendered = await gen.synthesize(codes, 1);
    const t = target.terms(outputToPlanes(rendered.images, 0, width, height, gen.imageLayout, gen.range));
    assert.ok(Math.abs(first.best.ssim - t.ssim) < 1e-9 && Math.abs(first.best.deltaE - t.deltaE) < 1e-9, `${label}: first evaluation SSIM ${first.best.ssim} ΔE ${first.best.deltaE}, the latent's own ${t.ssim} ${t.deltaE}`);
    if (seed === 731_777) {
      // Full-resolution figures of the start: already a match (only 8-bit rounding separates them).
      const rgba = gen.toRgba(rendered.images, 0);
      const refRgba = gen.toRgba((await gen.renderSeeds([seed], gen.info.defaultPsi, [])).images, 0);
      const outside = ssimModule.ssim({ data: refRgba.data, width, height }, { data: rgba.data, width, height }, { ssim: 'original' }).mssim;
      console.log(`${label}: first evaluation SSIM (multi-scale, compare size) ${t.ssim.toFixed(4)}, ΔE00 ${t.deltaE.toFixed(3)}; ssim.js on the 8-bit images ${outside.toFixed(4)}`);
      assert.ok(outside >= FOUND_SSIM, `ssim.js ${outside}`);
      assert.ok(t.ssim >= FOUND_SSIM && t.deltaE <= FOUND_DELTA_E);
    } else {
      assert.ok(t.ssim < 0.95, `seed 5 is a different image (SSIM ${t.ssim})`);
    }
  }
  // A W+ encoder (one row per layer) is taken row by row.
  const wplus = await gen.codesForSeeds([731_777], gen.info.defaultPsi);
  const plus = await encodeStart(fixedEncoder('encoder-wplus.onnx', wplus, [1, layers, size]), gen, reference);
  assert.equal(plus.length, layers * size);
});

test('an encoder of the wrong shape is refused, naming the file (engine and CLI)', async () => {
  const { width, height } = gen.imageSize();
  const { png, file } = await targetPng(731_778);
  const reference = decodeReference(png, file, width, height).image;
  const bad = fixedEncoder('encoder-wrong.onnx', new Float32Array(7).fill(0.1), [1, 7]);
  await assert.rejects(encodeStart(bad, gen, reference), (err: Error) => {
    assert.match(err.message, /encoder-wrong\.onnx: the encoder outputs shape \[1, 7\] \(7 values\); the generator needs 32 \(W\) or 3 × 32 \(W\+\)/);
    return true;
  });
  const r = spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'locate', '--image', file, '--start', bad, '--budget', '60', '--threads', '1', '--out', join(dir, 'x.npy')], { encoding: 'utf8' });
  assert.equal(r.status, 2, r.stderr);
  assert.match(r.stderr, /encoder-wrong\.onnx: the encoder outputs shape \[1, 7\]/);
  const missing = spawnSync(process.execPath, [join(root, 'app', 'cli', 'bin.js'), 'locate', '--image', file, '--start', join(dir, 'absent.onnx'), '--out', join(dir, 'y.npy')], { encoding: 'utf8' });
  assert.equal(missing.status, 2);
  assert.match(missing.stderr, /absent\.onnx: encoder not found/);
});
