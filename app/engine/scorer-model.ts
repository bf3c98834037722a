// A user's ONNX scorer: resizes generator images (bilinear, from the RGBA8 production sees) to
// the card's input size, normalises them, runs the model and reads the named outputs.
import { readFileSync, existsSync } from 'node:fs';
import { dirname, resolve } from 'node:path';
import * as ort from 'onnxruntime-node';
import { PlumblineError } from '../core/errors.ts';
import { parseScorerCard, type ScorerCard } from '../core/scorer-card.ts';
import { decodeModel, summarizeModel } from '../core/onnx/inspect.ts';
import type { RgbaImage } from '../core/image.ts';
import { createSession, type SessionOptions } from './sessions.ts';

/** An image as floats in [0, 1], RGB interleaved, row-major: the generator's output without 8-bit rounding. */
export interface FloatRgbImage {
  width: number;
  height: number;
  rgb: Float32Array;
}

export class ScorerModel {
  #session: ort.InferenceSession | null;
  private constructor(readonly card: ScorerCard, readonly file: string, session: ort.InferenceSession) {
    this.#session = session;
  }

  static async open(cardPath: string, options: SessionOptions = {}): Promise<ScorerModel> {
    const cardFile = resolve(cardPath);
    if (!existsSync(cardFile)) throw new PlumblineError('file-missing', `${cardFile}: scorer card not found`, { file: cardFile });
    const card = parseScorerCard(readFileSync(cardFile, 'utf8'), cardFile);
    const file = resolve(dirname(cardFile), card.file);
    if (!existsSync(file)) throw new PlumblineError('file-missing', `${file}: scorer model not found (named by ${cardFile})`, { file });
    const bytes = new Uint8Array(readFileSync(file));
    const s = summarizeModel(decodeModel(bytes, file));
    if (!s.inputs.some((i) => i.name === card.input.name)) throw new PlumblineError('card-invalid', `${file}: the scorer card names input '${card.input.name}' but the model's inputs are ${s.inputs.map((i) => i.name).join(', ')}`, { file });
    for (const o of [...card.attributes.map((a) => a.output), ...(card.features ? [card.features] : [])]) {
      if (!s.outputs.some((x) => x.name === o)) throw new PlumblineError('card-invalid', `${file}: the scorer card names output '${o}' but the model's outputs are ${s.outputs.map((x) => x.name).join(', ')}`, { file });
    }
    return new ScorerModel(card, file, await createSession(bytes, file, options));
  }

  #tensor(images: (RgbaImage | FloatRgbImage)[]): ort.Tensor {
    const { width: W, height: H, layout, range, mean, std } = this.card.input;
    const n = images.length;
    const data = new Float32Array(n * 3 * H * W);
    images.forEach((img, b) => {
      for (let y = 0; y < H; y++)
        for (let x = 0; x < W; x++) {
          // Bilinear sample at pixel centres.
          const sx = Math.min(img.width - 1, Math.max(0, ((x + 0.5) * img.width) / W - 0.5));
          const sy = Math.min(img.height - 1, Math.max(0, ((y + 0.5) * img.height) / H - 0.5));
          const x0 = Math.floor(sx);
          const y0 = Math.floor(sy);
          const x1 = Math.min(img.width - 1, x0 + 1);
          const y1 = Math.min(img.height - 1, y0 + 1);
          const fx = sx - x0;
          const fy = sy - y0;
          for (let c = 0; c < 3; c++) {
            const p = 'rgb' in img ? (xx: number, yy: number) => img.rgb[(yy * img.width + xx) * 3 + c] : (xx: number, yy: number) => img.data[(yy * img.width + xx) * 4 + c] / 255;
            let v = (p(x0, y0) * (1 - fx) + p(x1, y0) * fx) * (1 - fy) + (p(x0, y1) * (1 - fx) + p(x1, y1) * fx) * fy;
            v = range[0] + v * (range[1] - range[0]);
            if (mean && std) v = (v - mean[c]) / std[c];
            const at = layout === 'NCHW' ? ((b * 3 + c) * H + y) * W + x : ((b * H + y) * W + x) * 3 + c;
            data[at] = v;
          }
        }
    });
    return new ort.Tensor('float32', data, layout === 'NCHW' ? [n, 3, H, W] : [n, H, W, 3]);
  }

  async #run(images: (RgbaImage | FloatRgbImage)[], outputs: string[]): Promise<Record<string, Float32Array>> {
    if (!this.#session) throw new PlumblineError('no-model', `${this.file}: the scorer has been released`);
    let res: ort.InferenceSession.OnnxValueMapType;
    try {
      res = await this.#session.run({ [this.card.input.name]: this.#tensor(images) }, outputs);
    } catch (err) {
      throw new PlumblineError('bad-request', `${this.file}: scorer inference failed: ${(err as Error).message}`, { file: this.file });
    }
    return Object.fromEntries(outputs.map((o) => [o, res[o].data as Float32Array]));
  }

  /** [n × attributes] in card order. */
  async score(images: RgbaImage[]): Promise<Float64Array> {
    const names = [...new Set(this.card.attributes.map((a) => a.output))];
    const out = await this.#run(images, names);
    const k = this.card.attributes.length;
    const scores = new Float64Array(images.length * k);
    this.card.attributes.forEach((a, j) => {
      const col = out[a.output];
      const width = col.length / images.length;
      if (a.index >= width) throw new PlumblineError('card-invalid', `${this.file}: attribute '${a.name}' reads column ${a.index} of '${a.output}', which has ${width}`, { file: this.file });
      for (let i = 0; i < images.length; i++) {
        const v = col[i * width + a.index];
        if (!Number.isFinite(v)) throw new PlumblineError('output-not-finite', `${this.file}: scorer output '${a.output}' is ${v} for attribute '${a.name}'`, { file: this.file });
        scores[i * k + j] = v;
      }
    });
    return scores;
  }

  /**
   * Feature vectors [n × F] from the card's features output. Path length passes float images
   * (FloatRgbImage) so no 8-bit rounding enters the small differences it measures.
   */
  async features(images: (RgbaImage | FloatRgbImage)[]): Promise<{ data: Float32Array; width: number }> {
    if (!this.card.features) throw new PlumblineError('card-invalid', `${this.file}: the scorer card names no features output`, { file: this.file });
    const data = (await this.#run(images, [this.card.features]))[this.card.features];
    return { data, width: data.length / images.length };
  }

  async dispose(): Promise<void> {
    const s = this.#session;
    this.#session = null;
    await s?.release();
  }
}
