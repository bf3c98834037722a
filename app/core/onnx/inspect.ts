// Reads an ONNX file's interface (inputs, outputs, metadata, initializers) without running it,
// so that a bad file gets a clear error before the runtime sees it, and so that closed-form
// factorization can read weights. Pure TypeScript over onnx-proto.
import onnxProto from 'onnx-proto';
import { PlumblineError } from '../errors.ts';

const { onnx } = onnxProto;
type TensorProto = onnxProto.onnx.ITensorProto;

export interface TensorInterface {
  name: string;
  elemType: string;
  /** Numbers for fixed dimensions, strings for symbolic ones, null when unknown. */
  dims: (number | string | null)[] | null;
}

export interface OnnxSummary {
  irVersion: number;
  opsets: { domain: string; version: number }[];
  inputs: TensorInterface[];
  outputs: TensorInterface[];
  metadata: Record<string, string>;
  nodeCount: number;
  parameterCount: number;
}

const ELEM: Record<number, string> = { 1: 'float32', 2: 'uint8', 3: 'int8', 5: 'int16', 6: 'int32', 7: 'int64', 9: 'bool', 10: 'float16', 11: 'float64', 16: 'bfloat16' };

export function decodeModel(bytes: Uint8Array, file: string): onnxProto.onnx.ModelProto {
  if (bytes.length === 0) throw new PlumblineError('not-onnx', `${file}: the file is empty, not an ONNX model`, { file });
  // Every ONNX writer emits ir_version (field 1, varint) first, so a model starts with byte 0x08.
  if (bytes[0] !== 0x08) {
    // Say what was expected, never what the file holds: a mistaken path may be a private file.
    throw new PlumblineError('not-onnx', `${file}: not an ONNX model (an ONNX file starts with its IR version, byte 08; this one does not)`, { file });
  }
  let model: onnxProto.onnx.ModelProto;
  try {
    model = onnx.ModelProto.decode(bytes);
  } catch (err) {
    const msg = err instanceof Error ? err.message : String(err);
    if (/index out of range|premature|truncat/i.test(msg)) {
      throw new PlumblineError('onnx-truncated', `${file}: the ONNX file ends early (${bytes.length} bytes read; ${msg}); it was probably cut off while copying or downloading`, { file });
    }
    throw new PlumblineError('not-onnx', `${file}: not an ONNX model (protobuf decoding failed: ${msg})`, { file });
  }
  const ir = Number(model.irVersion ?? 0);
  if (!model.graph || ir < 1 || ir > 64 || (model.graph.node?.length ?? 0) === 0) {
    throw new PlumblineError('not-onnx', `${file}: not an ONNX model (no graph with nodes and a valid IR version; found IR ${ir}, ${model.graph?.node?.length ?? 0} nodes)`, { file });
  }
  return model;
}

export function summarizeModel(model: onnxProto.onnx.ModelProto): OnnxSummary {
  const graph = model.graph!;
  const initNames = new Set((graph.initializer ?? []).map((t) => t.name ?? ''));
  const iface = (v: onnxProto.onnx.IValueInfoProto): TensorInterface => {
    const tt = v.type?.tensorType;
    const dims = tt?.shape?.dim ? tt.shape.dim.map((d) => (d.dimParam ? d.dimParam : d.dimValue !== undefined && d.dimValue !== null ? Number(d.dimValue) : null)) : null;
    return { name: v.name ?? '', elemType: ELEM[tt?.elemType ?? 0] ?? `type${tt?.elemType ?? '?'}`, dims };
  };
  let parameterCount = 0;
  for (const t of graph.initializer ?? []) parameterCount += (t.dims ?? []).reduce((a: number, b) => a * Number(b), 1);
  return {
    irVersion: Number(model.irVersion),
    opsets: (model.opsetImport ?? []).map((o) => ({ domain: o.domain ?? '', version: Number(o.version ?? 0) })),
    inputs: (graph.input ?? []).filter((v) => !initNames.has(v.name ?? '')).map(iface),
    outputs: (graph.output ?? []).map(iface),
    metadata: Object.fromEntries((model.metadataProps ?? []).map((p) => [p.key ?? '', p.value ?? ''])),
    nodeCount: graph.node?.length ?? 0,
    parameterCount,
  };
}

/** Float32 values of an initializer, from raw_data or float_data. External data is not read here. */
export function initializerValues(tensor: TensorProto): Float32Array {
  if (tensor.dataType !== onnx.TensorProto.DataType.FLOAT) throw new Error(`initializer ${tensor.name} is not float32`);
  if (tensor.rawData && tensor.rawData.length) {
    // rawData may sit at an offset that is not a multiple of 4: copy before viewing.
    const copy = new Uint8Array(tensor.rawData);
    return new Float32Array(copy.buffer, 0, copy.length / 4);
  }
  if (tensor.floatData && tensor.floatData.length) return Float32Array.from(tensor.floatData);
  if (tensor.dataLocation === onnx.TensorProto.DataLocation.EXTERNAL) throw new Error(`initializer ${tensor.name} uses external data, which is not supported yet`);
  return new Float32Array(0);
}

/** Output ranges a generator without a card may use, in the order they are tried. */
export const OUTPUT_RANGES: [number, number][] = [[0, 1], [-1, 1], [0, 255]];
/** Quantiles read as the sample's low and high ends, so a stray value does not decide the range. */
const RANGE_QUANTILE = 0.001;

/** A candidate range fits when the sample's ends lie within this share of its span beyond it. */
const RANGE_FIT_SLACK = 0.05;

/**
 * Infers a generator's output range from a sample batch when no model card states it: the first
 * of [0, 1] (sigmoid outputs), [−1, 1] (the tanh output of StyleGAN-family generators) and
 * [0, 255] (8-bit outputs) that holds the sample's ends (0.1% and 99.9% quantiles, so a stray
 * value does not decide it). When none does, [−1, 1] is kept and the range check that follows
 * reports the values as far outside it. The note says what was seen, for the list of assumptions.
 */
export function inferOutputRange(values: Float32Array): { range: [number, number]; low: number; high: number; note: string } {
  const stride = Math.max(1, Math.floor(values.length / 200_000));
  const sample = new Float64Array(Math.ceil(values.length / stride));
  let n = 0;
  for (let i = 0; i < values.length; i += stride) if (Number.isFinite(values[i])) sample[n++] = values[i];
  const sorted = sample.subarray(0, n).sort();
  const low = n ? sorted[Math.floor(RANGE_QUANTILE * (n - 1))] : 0;
  const high = n ? sorted[Math.ceil((1 - RANGE_QUANTILE) * (n - 1))] : 0;
  const fits = ([lo, hi]: [number, number]) => low >= lo - RANGE_FIT_SLACK * (hi - lo) && high <= hi + RANGE_FIT_SLACK * (hi - lo);
  const found = OUTPUT_RANGES.find(fits);
  const range = found ?? OUTPUT_RANGES[1];
  const fmt = (v: number) => Number(v.toPrecision(3));
  const seen = `values ${fmt(low)} to ${fmt(high)}`;
  return {
    range,
    low,
    high,
    note: found
      ? `output range inferred as [${range[0]}, ${range[1]}] from a sample batch (${seen}); state "range" in a model card if this is wrong`
      : `output range: a sample batch (${seen}) fits none of [0, 1], [−1, 1], [0, 255]; assumed [−1, 1]`,
  };
}
