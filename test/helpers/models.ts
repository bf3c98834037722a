// Tiny authored ONNX models for tests: well-formed ones and ones broken in one specific way.
import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { GraphBuilder, INT64 } from '../../app/core/onnx/graph-builder.ts';

export function tempDir(prefix = 'plumbline-test-'): string {
  return mkdtempSync(join(tmpdir(), prefix));
}

/** z [N,D] → image [N,3,H,W]: a linear generator img = scale·tanh-free linear map of z, reshaped. */
export function linearGenerator(opts: { d?: number; h?: number; w?: number; scale?: number; weights?: Float32Array; outDims?: (number | string)[]; channels?: number; nhwc?: boolean } = {}): Uint8Array {
  const d = opts.d ?? 4;
  const h = opts.h ?? 8;
  const w = opts.w ?? 8;
  const c = opts.channels ?? 3;
  const g = new GraphBuilder('linear');
  const z = g.input('z', ['N', d]);
  const weights = opts.weights ?? Float32Array.from({ length: d * c * h * w }, (_, i) => Math.sin(i * 0.37) * 0.2);
  let y = g.matmul(z, g.tensor('W', weights, [d, c * h * w]));
  if (opts.scale !== undefined) y = g.mul(y, g.scalar(opts.scale));
  const shape = opts.nhwc ? [-1, h, w, c] : [-1, c, h, w];
  const img = g.op('Reshape', [y, g.int64s('shape', shape)]);
  g.output(img, 'image', opts.outDims ?? (opts.nhwc ? ['N', h, w, c] : ['N', c, h, w]));
  return g.toModel();
}

/** Output of rank 3: [N, 3, H·W]. */
export function rank3Generator(): Uint8Array {
  const g = new GraphBuilder('rank3');
  const z = g.input('z', ['N', 4]);
  const y = g.matmul(z, g.tensor('W', new Float32Array(4 * 3 * 16).fill(0.1), [4, 48]));
  g.output(g.op('Reshape', [y, g.int64s('s', [-1, 3, 16])]), 'image', ['N', 3, 16]);
  return g.toModel();
}

/** Produces NaN: sqrt of a negative constant added to the image. */
export function nanGenerator(): Uint8Array {
  const g = new GraphBuilder('nan');
  const z = g.input('z', ['N', 4]);
  const y = g.matmul(z, g.tensor('W', new Float32Array(4 * 3 * 64).fill(0.01), [4, 192]));
  const bad = g.add(y, g.sqrt(g.scalar(-1)));
  g.output(g.op('Reshape', [bad, g.int64s('s', [-1, 3, 8, 8])]), 'image', ['N', 3, 8, 8]);
  return g.toModel();
}

/** Only an int64 input: no float latent. */
export function intInputModel(): Uint8Array {
  const g = new GraphBuilder('int');
  const ids = g.input('ids', ['N', 4], INT64);
  const f = g.op('Cast', [ids], { to: 1 });
  const y = g.matmul(f, g.tensor('W', new Float32Array(4 * 192).fill(0.01), [4, 192]));
  g.output(g.op('Reshape', [y, g.int64s('s', [-1, 3, 8, 8])]), 'image', ['N', 3, 8, 8]);
  return g.toModel();
}

/** The hand-built model of METHODS §7.2: z [N,4] + w_avg (0.5, −1, 2, 0) → img. */
export function addModel(): Uint8Array {
  const g = new GraphBuilder('add');
  const z = g.input('z', ['N', 4]);
  const out = g.op('Add', [z, g.tensor('w_avg', [0.5, -1, 2, 0], [4])]);
  g.output(out, 'img', ['N', 4]);
  return g.toModel({ z_dim: '4' });
}

export function write(dir: string, name: string, bytes: Uint8Array | string): string {
  const p = join(dir, name);
  writeFileSync(p, bytes);
  return p;
}

/**
 * A small Z-space generator with a model card: image = reshape(z·A) (3×16×16), and attributes
 * [z0, 0.5 (constant), sqrt(z1 − 100) (NaN)]. Used for audit error paths and the analytic path length.
 */
export function cardGenerator(dir: string, d = 4): { card: string; weights: Float32Array } {
  const g = new GraphBuilder('card_linear');
  const z = g.input('z', ['N', d]);
  const size = 3 * 16 * 16;
  const weights = Float32Array.from({ length: d * size }, (_, i) => Math.sin(i * 0.61) * 0.05);
  const img = g.op('Reshape', [g.matmul(z, g.tensor('A', weights, [d, size])), g.int64s('s', [-1, 3, 16, 16])]);
  g.output(img, 'image', ['N', 3, 16, 16]);
  const col = (j: number) => g.op('Slice', [z, g.int64s('a', [j]), g.int64s('b', [j + 1]), g.int64s('x', [1])]);
  const constant = g.add(g.mul(col(0), g.scalar(0)), g.scalar(0.5));
  const nan = g.sqrt(g.sub(col(1), g.scalar(100)));
  g.output(g.op('Concat', [col(0), constant, nan], { axis: 1 }), 'attributes', ['N', 3]);
  write(dir, 'linear.onnx', g.toModel());
  const card = {
    format: 'plumbline.model-card',
    version: 1,
    name: 'linear test generator',
    synthesis: { file: 'linear.onnx', latentInput: 'z', space: 'z', latentSize: d, output: 'image', range: [-1, 1], attributesOutput: 'attributes' },
    attributes: [{ name: 'first' }, { name: 'constant' }, { name: 'broken' }],
  };
  return { card: write(dir, 'linear.card.json', JSON.stringify(card)), weights };
}

/**
 * A user scorer model with its card: image [N,3,32,32] in [0,1] → scores [N,2] = per-image mean
 * of the red and of the blue channel, and features [N,48] = 4×4 average-pooled colours.
 */
export function scorerModel(dir: string): string {
  const g = new GraphBuilder('scorer');
  const x = g.input('pixels', ['N', 3, 32, 32]);
  const means = g.op('ReduceMean', [x], { axes: [2, 3], keepdims: 0 });
  const pick = (c: number) => g.op('Slice', [means, g.int64s('a', [c]), g.int64s('b', [c + 1]), g.int64s('x', [1])]);
  g.output(g.op('Concat', [pick(0), pick(2)], { axis: 1 }), 'scores', ['N', 2]);
  const pooled = g.op('AveragePool', [x], { kernel_shape: [8, 8], strides: [8, 8] });
  g.output(g.op('Flatten', [pooled], { axis: 1 }), 'features', ['N', 48]);
  write(dir, 'scorer.onnx', g.toModel());
  return write(dir, 'scorer.card.json', JSON.stringify({
    format: 'plumbline.scorer-card',
    version: 1,
    name: 'channel means (test)',
    file: 'scorer.onnx',
    input: { name: 'pixels', width: 32, height: 32, layout: 'NCHW', range: [0, 1] },
    attributes: [
      { name: 'redness', output: 'scores', index: 0, unit: 'mean red, 0–1' },
      { name: 'blueness', output: 'scores', index: 1, unit: 'mean blue, 0–1' },
    ],
    features: 'features',
  }));
}
