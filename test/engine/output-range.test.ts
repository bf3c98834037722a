// A generator without a model card: its output range ([−1, 1], [0, 1] or [0, 255]) is inferred
// from a sample batch and listed among the assumptions, and 8-bit images use it — a generator
// that writes [0, 1] is not rendered washed out. Tiny authored ONNX graphs with a known output:
// image = f(z·W) with f = sigmoid (range [0, 1]), 255·sigmoid ([0, 255]) or tanh ([−1, 1]).
// The expected 8-bit value of each pixel is computed here from the raw float by the common
// convention round(255·(v − lo)/(hi − lo)).
import { test } from 'node:test';
import assert from 'node:assert/strict';
import { GraphBuilder } from '../../app/core/onnx/graph-builder.ts';
import { Generator } from '../../app/engine/generator.ts';
import { inferOutputRange } from '../../app/core/onnx/inspect.ts';
import { tempDir, write } from '../helpers/models.ts';

function squashed(kind: 'sigmoid' | 'byte' | 'tanh'): Uint8Array {
  const d = 4;
  const g = new GraphBuilder(`range_${kind}`);
  const z = g.input('z', ['N', d]);
  const W = Float32Array.from({ length: d * 3 * 8 * 8 }, (_, i) => Math.sin(i * 0.37) * 1.5);
  const y = g.matmul(z, g.tensor('W', W, [d, 192]));
  const f = kind === 'tanh' ? g.op('Tanh', [y]) : kind === 'byte' ? g.mul(g.sigmoid(y), g.scalar(255)) : g.sigmoid(y);
  g.output(g.op('Reshape', [f, g.int64s('shape', [-1, 3, 8, 8])]), 'image', ['N', 3, 8, 8]);
  return g.toModel();
}

const dir = tempDir();
for (const [kind, range] of [['sigmoid', [0, 1]], ['byte', [0, 255]], ['tanh', [-1, 1]]] as const) {
  test(`a ${kind} generator without a card is read as [${range}] and its 8-bit images use that range`, async () => {
    const gen = await Generator.open(write(dir, `${kind}.onnx`, squashed(kind)), { threads: 1 });
    try {
      assert.deepEqual(gen.range, range);
      assert.ok(gen.info.assumptions.some((a) => a.startsWith(`output range inferred as [${range[0]}, ${range[1]}]`)), gen.info.assumptions.join('; '));
      const out = await gen.renderSeeds([5], 1, []);
      const rgba = gen.toRgba(out.images, 0);
      for (const p of [0, 17, 40, 63]) {
        const v = out.images[p]; // red channel, pixel p (NCHW)
        const expected = Math.round((255 * (v - range[0])) / (range[1] - range[0]));
        assert.ok(Math.abs(rgba.data[p * 4] - expected) <= 1, `${kind}: pixel ${p} value ${v} → ${rgba.data[p * 4]}, expected ${expected}`);
      }
    } finally {
      await gen.dispose();
    }
  });
}

test('range inference reads the ends of the sample, not stray values', () => {
  const values = Float32Array.from({ length: 10000 }, (_, i) => (i % 100) / 99);
  values[0] = -0.5; // one stray value below 0 does not make it [−1, 1]
  assert.deepEqual(inferOutputRange(values).range, [0, 1]);
  assert.deepEqual(inferOutputRange(values.map((v) => v * 2 - 1)).range, [-1, 1]);
  assert.deepEqual(inferOutputRange(values.map((v) => v * 255)).range, [0, 255]);
});
