// Authors the benchmark's realistic generator into a folder: 256×256 output, about 22 million
// random-weight parameters, a 4-layer 512-d mapping MLP and a synthesis of upsample + 3×3 conv
// blocks with per-layer style modulation (each conv's input scaled by an affine of its W+ row).
// Random weights: it renders structured noise, not pictures; it exists to load and to time.
import { mkdirSync, writeFileSync } from 'node:fs';
import { join } from 'node:path';
import { GraphBuilder } from '../../app/core/onnx/graph-builder.ts';
import { Random } from '../../app/core/random.ts';

const Z = 512;
const W = 512;
/** [resolution, channels, convs] per block. */
const BLOCKS: [number, number, number][] = [[4, 512, 1], [8, 512, 2], [16, 512, 2], [32, 512, 2], [64, 256, 2], [128, 64, 2], [256, 32, 2]];

export function authorLarge(dir: string, seed = 7): { card: string; parameters: number } {
  const rng = new Random(seed, 3);
  let parameters = 0;
  const weights = (n: number, scale: number) => {
    parameters += n;
    const a = new Float32Array(n);
    for (let i = 0; i < n; i++) a[i] = rng.normal() * scale;
    return a;
  };

  const m = new GraphBuilder('large_mapping');
  const z = m.input('z', ['N', Z]);
  let h = m.div(z, m.sqrt(m.add(m.op('ReduceMean', [m.mul(z, z)], { axes: [1], keepdims: 1 }), m.scalar(1e-8))));
  for (let i = 0; i < 4; i++) h = m.op('LeakyRelu', [m.add(m.matmul(h, m.tensor('fc', weights(Z * W, 1 / Math.sqrt(Z)), [Z, W])), m.tensor('b', weights(W, 0.1), [W]))], { alpha: 0.2 });
  m.output(h, 'w', ['N', W]);
  const mappingBytes = m.toModel();

  const layers = BLOCKS.reduce((a, b) => a + b[2], 0) + 1;
  const g = new GraphBuilder('large_synthesis');
  const ws = g.input('ws', ['N', layers, W]);
  const flat = g.int64s('nd', [-1, W]);
  let layer = 0;
  const style = (channels: number) => {
    const w = g.op('Reshape', [g.op('Gather', [ws, g.int64s('l', [layer++])], { axis: 1 }), flat]);
    const s = g.add(g.matmul(w, g.tensor('affine', weights(W * channels, 1 / Math.sqrt(W)), [W, channels])), g.scalar(1));
    return g.op('Reshape', [s, g.int64s('nc11', [-1, channels, 1, 1])]);
  };
  let channels = BLOCKS[0][1];
  let x = g.mul(g.tensor('const', weights(channels * 16, 1), [1, channels, 4, 4]), style(channels));
  for (const [res, out, convs] of BLOCKS) {
    if (res > 4) x = g.op('Resize', [x, '', g.tensor('scales', [1, 1, 2, 2], [4])]); // default mode: nearest
    for (let c = 0; c < convs; c++) {
      const inC = channels;
      const modulated = c === 0 && res === 4 ? x : g.mul(x, style(inC));
      const conv = g.op('Conv', [modulated, g.tensor('k', weights(out * inC * 9, Math.SQRT2 / Math.sqrt(inC * 9)), [out, inC, 3, 3]), g.tensor('bias', weights(out, 0), [out])], { pads: [1, 1, 1, 1] });
      x = g.op('LeakyRelu', [conv], { alpha: 0.2 });
      channels = out;
    }
  }
  const rgb = g.op('Conv', [g.mul(x, style(channels)), g.tensor('torgb', weights(3 * channels, 1 / Math.sqrt(channels)), [3, channels, 1, 1])]);
  g.output(g.op('Tanh', [rgb]), 'image', ['N', 3, 256, 256]);
  const synthesisBytes = g.toModel();

  mkdirSync(dir, { recursive: true });
  writeFileSync(join(dir, 'large-mapping.onnx'), mappingBytes);
  writeFileSync(join(dir, 'large-synthesis.onnx'), synthesisBytes);
  const card = {
    format: 'plumbline.model-card',
    version: 1,
    name: 'benchmark generator (random weights)',
    synthesis: { file: 'large-synthesis.onnx', latentInput: 'ws', space: 'w+', layers, latentSize: W, output: 'image', layout: 'NCHW', range: [-1, 1] },
    mapping: { file: 'large-mapping.onnx', input: 'z', output: 'w', zSize: Z },
  };
  const cardFile = join(dir, 'large.card.json');
  writeFileSync(cardFile, JSON.stringify(card, null, 2));
  return { card: cardFile, parameters };
}
