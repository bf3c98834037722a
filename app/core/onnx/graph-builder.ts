// A small builder for ONNX graphs written from TypeScript. Used to author the bundled demo
// generator, the benchmark generator and the test models; it produces plain ModelProto bytes.
import onnxProto from 'onnx-proto';

const { onnx } = onnxProto;

export type Dim = number | string;
export const FLOAT = onnx.TensorProto.DataType.FLOAT;
export const INT64 = onnx.TensorProto.DataType.INT64;

export interface ValueSpec {
  name: string;
  dims: Dim[];
  type?: number;
}

export class GraphBuilder {
  #nodes: onnxProto.onnx.INodeProto[] = [];
  #initializers: onnxProto.onnx.ITensorProto[] = [];
  #inputs: onnxProto.onnx.IValueInfoProto[] = [];
  #outputs: onnxProto.onnx.IValueInfoProto[] = [];
  #counter = 0;
  #names = new Set<string>();

  constructor(readonly graphName: string) {}

  #fresh(hint: string): string {
    let name: string;
    do name = `${hint}_${this.#counter++}`;
    while (this.#names.has(name));
    this.#names.add(name);
    return name;
  }

  input(name: string, dims: Dim[], type = FLOAT): string {
    this.#names.add(name);
    this.#inputs.push(valueInfo({ name, dims, type }));
    return name;
  }

  output(value: string, name: string, dims: Dim[], type = FLOAT): void {
    // Route through Identity so any intermediate can become a named output.
    this.#nodes.push(onnx.NodeProto.create({ opType: 'Identity', input: [value], output: [name], name: `out_${name}` }));
    this.#names.add(name);
    this.#outputs.push(valueInfo({ name, dims, type }));
  }

  /** A float32 constant stored as an initializer (weights and small constants alike). */
  tensor(hint: string, data: ArrayLike<number>, dims: number[]): string {
    const name = this.#fresh(hint);
    const f = Float32Array.from(data as ArrayLike<number>);
    const expected = dims.reduce((a, b) => a * b, 1);
    if (f.length !== expected) throw new Error(`tensor ${hint}: ${f.length} values for dims [${dims}]`);
    this.#initializers.push(
      onnx.TensorProto.create({ name, dims, dataType: FLOAT, rawData: new Uint8Array(f.buffer, f.byteOffset, f.byteLength) }),
    );
    return name;
  }

  scalar(value: number): string {
    return this.tensor('c', [value], []);
  }

  int64s(hint: string, values: number[]): string {
    const name = this.#fresh(hint);
    const buf = new BigInt64Array(values.map((v) => BigInt(v)));
    this.#initializers.push(
      onnx.TensorProto.create({ name, dims: [values.length], dataType: INT64, rawData: new Uint8Array(buf.buffer) }),
    );
    return name;
  }

  /** Adds one node and returns its (first) output name. */
  op(opType: string, inputs: string[], attributes: Record<string, number | number[]> = {}, outputs = 1): string {
    const outs = Array.from({ length: outputs }, () => this.#fresh(opType.toLowerCase()));
    const attribute = Object.entries(attributes).map(([name, v]) => attr(name, v));
    this.#nodes.push(onnx.NodeProto.create({ opType, input: inputs, output: outs, attribute, name: this.#fresh(`n_${opType}`) }));
    return outs[0];
  }

  // Readable shorthands for the element-wise algebra the authored generators use.
  add(a: string, b: string) { return this.op('Add', [a, b]); }
  sub(a: string, b: string) { return this.op('Sub', [a, b]); }
  mul(a: string, b: string) { return this.op('Mul', [a, b]); }
  div(a: string, b: string) { return this.op('Div', [a, b]); }
  matmul(a: string, b: string) { return this.op('MatMul', [a, b]); }
  sigmoid(a: string) { return this.op('Sigmoid', [a]); }
  exp(a: string) { return this.op('Exp', [a]); }
  cos(a: string) { return this.op('Cos', [a]); }
  sin(a: string) { return this.op('Sin', [a]); }
  sqrt(a: string) { return this.op('Sqrt', [a]); }
  abs(a: string) { return this.op('Abs', [a]); }
  relu(a: string) { return this.op('Relu', [a]); }
  neg(a: string) { return this.op('Neg', [a]); }
  /** a·k + c with scalar k and c. */
  affine(a: string, k: number, c = 0) {
    const scaled = k === 1 ? a : this.mul(a, this.scalar(k));
    return c === 0 ? scaled : this.add(scaled, this.scalar(c));
  }
  /** a·(1−t) + b·t, the compositing "over" of b onto a with coverage t. */
  lerp(a: string, b: string, t: string) { return this.add(a, this.mul(this.sub(b, a), t)); }

  toModel(metadata: Record<string, string> = {}, docString = ''): Uint8Array {
    const graph = onnx.GraphProto.create({
      name: this.graphName,
      node: this.#nodes,
      initializer: this.#initializers,
      input: this.#inputs,
      output: this.#outputs,
    });
    const model = onnx.ModelProto.create({
      irVersion: 8,
      producerName: 'plumbline-author',
      producerVersion: '1',
      docString,
      graph,
      opsetImport: [onnx.OperatorSetIdProto.create({ domain: '', version: 17 })],
      metadataProps: Object.entries(metadata).map(([key, value]) => onnx.StringStringEntryProto.create({ key, value })),
    });
    return onnx.ModelProto.encode(model).finish();
  }
}

function valueInfo(spec: ValueSpec): onnxProto.onnx.IValueInfoProto {
  return onnx.ValueInfoProto.create({
    name: spec.name,
    type: onnx.TypeProto.create({
      tensorType: onnx.TypeProto.Tensor.create({
        elemType: spec.type ?? FLOAT,
        shape: onnx.TensorShapeProto.create({
          dim: spec.dims.map((d) =>
            typeof d === 'number' ? onnx.TensorShapeProto.Dimension.create({ dimValue: d }) : onnx.TensorShapeProto.Dimension.create({ dimParam: d }),
          ),
        }),
      }),
    }),
  });
}

function attr(name: string, v: number | number[]): onnxProto.onnx.IAttributeProto {
  const A = onnx.AttributeProto.AttributeType;
  if (Array.isArray(v)) return onnx.AttributeProto.create({ name, type: A.INTS, ints: v });
  if (Number.isInteger(v)) return onnx.AttributeProto.create({ name, type: A.INT, i: v });
  return onnx.AttributeProto.create({ name, type: A.FLOAT, f: v });
}
