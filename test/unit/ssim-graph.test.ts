// The SSIM path-length distance run as an ONNX graph equals the JavaScript reference
// (itself checked against ssim.js and Wang et al.'s constants), including for the tiny
// differences of path-length steps where a naive float32 1 − SSIM would lose its digits.
import { test } from 'node:test';
import assert from 'node:assert/strict';
import * as ort from 'onnxruntime-node';
import { ssimDistanceGraph } from '../../app/core/audit/ssim-graph.ts';
import { imageDistance } from '../../app/core/audit/path-length.ts';
import { Random } from '../../app/core/random.ts';

for (const space of ['luma', 'lab'] as const)
test(`ONNX 1 − SSIM (${space}) matches the JS reference from large to tiny differences`, async () => {
  const H = 128;
  const W = 128;
  const n = 3 * H * W;
  const rng = new Random(3);
  const base = new Float32Array(4 * n);
  for (let i = 0; i < base.length; i++) {
    const p = i % (H * W);
    base[i] = Math.max(-1, Math.min(1, 0.6 * Math.sin((p % W) * 0.11 + Math.floor(i / (H * W))) * Math.cos(Math.floor(p / W) * 0.07) + 0.1 * rng.normal()));
  }
  const session = await ort.InferenceSession.create(ssimDistanceGraph(H, W, [-1, 1], space));
  const geometry = { height: H, width: W, layout: 'NCHW' as const, range: [-1, 1] as [number, number] };
  for (const scale of [0.3, 0.01, 1e-4]) {
    const other = base.map((v, i) => v + scale * Math.sin(i * 0.37));
    const out = (await session.run({ a: new ort.Tensor('float32', base, [4, 3, H, W]), b: new ort.Tensor('float32', other, [4, 3, H, W]) })).distance.data as Float32Array;
    for (let k = 0; k < 4; k++) {
      const js = imageDistance(space === 'lab' ? 'ssim-lab' : 'ssim', base, k, other, k, geometry);
      assert.ok(js > 0);
      assert.ok(Math.abs(out[k] - js) <= 1e-4 * js + 1e-9, `scale ${scale}, image ${k}: onnx ${out[k]} vs js ${js}`);
    }
  }
  await session.release();
});
