// Finds the weights that first act on a latent input: follows the latent through shape-only
// and elementwise-with-constant nodes (Gather along the layer axis records which W+ row) to the
// first MatMul or Gemm whose other operand is an initializer. Used by closed-form factorization.
import onnxProto from 'onnx-proto';
import { initializerValues } from './inspect.ts';

type ModelProto = onnxProto.onnx.ModelProto;

export interface LatentWeight {
  name: string;
  /** [rows = latent size, cols] row-major, the latent multiplying from the left. */
  data: Float32Array;
  rows: number;
  cols: number;
  /** W+ row this weight reads, when the trace passed a Gather on the layer axis; null otherwise. */
  layer: number | null;
}

const PASS_THROUGH = new Set(['Reshape', 'Flatten', 'Squeeze', 'Unsqueeze', 'Identity', 'Sub', 'Add', 'Mul', 'Div', 'Cast', 'Transpose']);

export function latentWeights(model: ModelProto, latentInput: string, latentSize: number): LatentWeight[] {
  const graph = model.graph!;
  const inits = new Map((graph.initializer ?? []).map((t) => [t.name ?? '', t]));
  const consumers = new Map<string, onnxProto.onnx.INodeProto[]>();
  for (const node of graph.node ?? []) for (const i of node.input ?? []) consumers.set(i, [...(consumers.get(i) ?? []), node]);
  const out: LatentWeight[] = [];
  const seen = new Set<string>();
  const int64 = (name: string): number | null => {
    const t = inits.get(name);
    if (!t) return null;
    if (t.int64Data?.length) return Number(t.int64Data[0]);
    if (t.rawData?.length) return Number(new DataView(new Uint8Array(t.rawData).buffer).getBigInt64(0, true));
    return null;
  };
  const visit = (value: string, layer: number | null) => {
    if (seen.has(`${value}|${layer}`)) return;
    seen.add(`${value}|${layer}`);
    for (const node of consumers.get(value) ?? []) {
      const op = node.opType ?? '';
      const ins = node.input ?? [];
      if (op === 'Gather') {
        const axis = Number(node.attribute?.find((a) => a.name === 'axis')?.i ?? 0);
        visit(node.output![0], axis === 1 ? int64(ins[1]) : layer);
      } else if (op === 'MatMul' || op === 'Gemm') {
        const other = ins[0] === value ? ins[1] : null;
        const t = other ? inits.get(other) : undefined;
        if (!t || t.dataType !== 1) continue;
        const dims = (t.dims ?? []).map(Number);
        if (dims.length !== 2) continue;
        const transB = op === 'Gemm' && Number(node.attribute?.find((a) => a.name === 'transB')?.i ?? 0) === 1;
        let data = initializerValues(t);
        let [rows, cols] = dims;
        if (transB) {
          const tr = new Float32Array(data.length);
          for (let r = 0; r < rows; r++) for (let c = 0; c < cols; c++) tr[c * rows + r] = data[r * cols + c];
          data = tr;
          [rows, cols] = [cols, rows];
        }
        if (rows === latentSize) out.push({ name: t.name ?? '', data, rows, cols, layer });
      } else if (PASS_THROUGH.has(op)) {
        for (const o of node.output ?? []) visit(o, layer);
      }
    }
  };
  visit(latentInput, null);
  return out;
}
