// An optional encoder network (image → w or w+, pSp/e4e-style, exported to ONNX) gives `locate`
// its start point in one pass instead of random starts. An encoder is tied to the generator it
// was trained with; Plumbline checks only that its output has the generator's latent shape.
// Input: the reference as [1, 3, H, W] float in the generator's output range (the image the
// generator would have made); output: [1, size], [1, layers, size] or [layers, size].
import { readFileSync, existsSync } from 'node:fs';
import * as ort from 'onnxruntime-node';
import { PlumblineError } from '../core/errors.ts';
import type { FloatImage } from '../core/reference-image.ts';
import type { Generator } from './generator.ts';
import { createSession } from './sessions.ts';

export async function encodeStart(file: string, gen: Generator, reference: FloatImage): Promise<Float32Array> {
  if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: encoder not found`, { file });
  const session = await createSession(new Uint8Array(readFileSync(file)), file, {});
  try {
    if (session.inputNames.length !== 1) throw new PlumblineError('bad-request', `${file}: an encoder takes one image input; this model has ${session.inputNames.length} (${session.inputNames.join(', ')})`, { file });
    const { width, height } = reference;
    const [lo, hi] = gen.range;
    const n = width * height;
    const nchw = new Float32Array(3 * n);
    for (let p = 0; p < n; p++) for (let c = 0; c < 3; c++) nchw[c * n + p] = lo + (hi - lo) * reference.data[p * 3 + c];
    let out: ort.Tensor;
    try {
      const r = await session.run({ [session.inputNames[0]]: new ort.Tensor('float32', nchw, [1, 3, height, width]) });
      out = r[session.outputNames[0]];
    } catch (err) {
      throw new PlumblineError('bad-request', `${file}: the encoder failed on a [1, 3, ${height}, ${width}] image: ${(err as Error).message}`, { file });
    }
    const data = Float32Array.from(out.data as Float32Array);
    const { size, layers } = gen.layout;
    if (data.length !== size && data.length !== layers * size) {
      throw new PlumblineError('latent-size-mismatch', `${file}: the encoder outputs shape [${out.dims.join(', ')}] (${data.length} values); the generator needs ${size} (W) or ${layers} × ${size} (W+)`, { file });
    }
    if (!data.every(Number.isFinite)) throw new PlumblineError('output-not-finite', `${file}: the encoder produced NaN or infinite values`, { file });
    return data;
  } finally {
    await session.release();
  }
}
