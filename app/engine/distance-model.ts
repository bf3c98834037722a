// Runs an SSIM path-length distance graph (core/audit/ssim-graph.ts: luma, or the three CIELAB
// channels) in onnxruntime: one session per audit, batched over image pairs.
import * as ort from 'onnxruntime-node';
import { ssimDistanceGraph } from '../core/audit/ssim-graph.ts';
import { createSession } from './sessions.ts';

export class SsimDistanceModel {
  private constructor(private session: ort.InferenceSession | null, private dims: [number, number]) {}

  static async create(height: number, width: number, range: [number, number], threads?: number, space: 'luma' | 'lab' = 'luma'): Promise<SsimDistanceModel> {
    const session = await createSession(ssimDistanceGraph(height, width, range, space), `ssim (${space}) distance graph`, { threads });
    return new SsimDistanceModel(session, [height, width]);
  }

  /** 1 − SSIM for each pair (a_i, b_i) of two NCHW batches of m images. */
  async distances(a: Float32Array, b: Float32Array, m: number): Promise<Float32Array> {
    if (!this.session) throw new Error('the distance model has been released');
    const dims = [m, 3, this.dims[0], this.dims[1]];
    const r = await this.session.run({ a: new ort.Tensor('float32', a, dims), b: new ort.Tensor('float32', b, dims) });
    return r.distance.data as Float32Array;
  }

  async dispose(): Promise<void> {
    await this.session?.release();
    this.session = null;
  }
}
