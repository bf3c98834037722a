// Resource caps for generators, checked from the graph before a session is created and again on
// the first output. A few hundred bytes of ONNX can declare a latent of a billion values or
// expand a scalar to an 8000×8000 image; each would take gigabytes before any other check ran.
// The caps are stated here and in docs/model-card.md and can be raised per call (`limits`).
import onnxProto from 'onnx-proto';
import { PlumblineError } from '../errors.ts';

const { onnx } = onnxProto;

export interface GeneratorLimits {
  /** Values per latent row (D). StyleGAN-family generators use 512; BigGAN 128 + class; 8,192 is 16× the usual. */
  latentSize: number;
  /** W+ rows (L). StyleGAN2 at 1024² has 18; the card format allows 64. */
  layers: number;
  /** Pixels per image (H·W). 2048×2048 is four times the largest common GAN output (1024²). */
  imagePixels: number;
  /**
   * Elements per sample in any tensor whose shape the graph states as a constant (Expand,
   * Reshape, ConstantOfShape, Resize sizes, Tile). 2^26 (64 Mi) leaves room for the widest
   * feature maps of a 1024² generator (32 channels × 1024² = 32 Mi).
   */
  tensorElements: number;
}

export const GENERATOR_LIMITS: GeneratorLimits = { latentSize: 8192, layers: 64, imagePixels: 2048 * 2048, tensorElements: 2 ** 26 };

/** Ops whose given input is a shape (or repeat counts) that fixes an output's size. */
const SHAPE_INPUTS: Record<string, number> = { Expand: 1, Reshape: 1, ConstantOfShape: 0, Resize: 3, Tile: 1 };

function int64Values(t: onnxProto.onnx.ITensorProto): number[] | null {
  if (t.dataType !== onnx.TensorProto.DataType.INT64) return null;
  if (t.rawData && t.rawData.length) {
    const copy = new Uint8Array(t.rawData);
    return Array.from(new BigInt64Array(copy.buffer, 0, Math.floor(copy.length / 8)), Number);
  }
  return (t.int64Data ?? []).map((v) => Number(v));
}

/**
 * Refuses a graph whose constant shapes would make any tensor larger than the cap per sample.
 * Shapes computed at run time are not visible here; the first output check catches those.
 */
export function checkGraphShapes(model: onnxProto.onnx.IModelProto, file: string, limits: GeneratorLimits = GENERATOR_LIMITS): void {
  const graph = model.graph;
  if (!graph) return;
  const constants = new Map<string, number[]>();
  for (const t of graph.initializer ?? []) {
    const v = int64Values(t);
    if (v && t.name) constants.set(t.name, v);
  }
  for (const n of graph.node ?? []) {
    if (n.opType === 'Constant' && n.output?.[0]) {
      const t = n.attribute?.find((a) => a.name === 'value')?.t;
      const v = t ? int64Values(t) : null;
      if (v) constants.set(n.output[0], v);
    }
  }
  for (const n of graph.node ?? []) {
    const at = SHAPE_INPUTS[n.opType ?? ''];
    if (at === undefined) continue;
    const shape = constants.get(n.input?.[at] ?? '');
    if (!shape) continue;
    // Entries ≤ 0 mean "copy" or "infer" and the first entry is usually the batch: count the rest.
    const elements = shape.slice(shape.length > 1 ? 1 : 0).reduce((a, d) => a * (d > 0 ? d : 1), 1);
    if (elements > limits.tensorElements) {
      throw new PlumblineError('limit-exceeded', `${file}: node '${n.name || n.opType}' (${n.opType}) makes a tensor of shape [${shape.join(', ')}], ${elements} elements per sample, more than the cap of ${limits.tensorElements}`, { file });
    }
  }
  for (const v of [...(graph.valueInfo ?? []), ...(graph.output ?? [])]) {
    const dims = v.type?.tensorType?.shape?.dim?.map((d) => (d.dimValue !== undefined && d.dimValue !== null ? Number(d.dimValue) : 0)) ?? [];
    const elements = dims.slice(1).reduce((a, d) => a * (d > 0 ? d : 1), 1);
    if (dims.length > 1 && elements > limits.tensorElements) {
      throw new PlumblineError('limit-exceeded', `${file}: tensor '${v.name}' is declared as [${dims.join(', ')}], ${elements} elements per sample, more than the cap of ${limits.tensorElements}`, { file });
    }
  }
}

export function checkLatentCaps(file: string, what: string, layers: number, size: number, limits: GeneratorLimits = GENERATOR_LIMITS): void {
  if (!(size <= limits.latentSize)) throw new PlumblineError('limit-exceeded', `${file}: ${what} has ${size} values per latent row, more than the cap of ${limits.latentSize}`, { file });
  if (!(layers <= limits.layers)) throw new PlumblineError('limit-exceeded', `${file}: ${what} has ${layers} W+ rows, more than the cap of ${limits.layers}`, { file });
}

export function checkImageCaps(file: string, what: string, height: number, width: number, limits: GeneratorLimits = GENERATOR_LIMITS): void {
  if (height * width > limits.imagePixels) {
    throw new PlumblineError('limit-exceeded', `${file}: ${what} is ${width}×${height} = ${height * width} pixels per image, more than the cap of ${limits.imagePixels}`, { file });
  }
}
