/**
 * A small ONNX graph builder for tests and the sample-data script (the product only reads models).
 * Serializes with onnx-proto; initializers are stored as little-endian raw_data.
 */
import { onnx, type OnnxProto } from './proto.ts';

export type AttrValue =
  | { i: number }
  | { f: number }
  | { ints: number[] }
  | { floats: number[] }
  | { s: string }
  /** A constant tensor (e.g. the `value` of a Constant node). */
  | { tensor: TensorSpec }
  /** A subgraph (e.g. the `then_branch` / `else_branch` of an If node). */
  | { graph: SubgraphSpec };

export type WriterElemType = 'float32' | 'int64' | 'bool';

export interface ValueSpec {
  name: string;
  elemType: WriterElemType;
  dims: (number | string)[];
}

export interface TensorSpec {
  name: string;
  dims: number[];
  data: Float32Array | BigInt64Array;
}

export interface NodeSpec {
  op: string;
  inputs: string[];
  outputs: string[];
  name?: string;
  domain?: string;
  attributes?: Record<string, AttrValue>;
}

export interface SubgraphSpec {
  name: string;
  inputs: ValueSpec[];
  outputs: ValueSpec[];
  initializers: TensorSpec[];
  nodes: NodeSpec[];
}

export interface GraphSpec extends SubgraphSpec {
  /** Default-domain opset version; default 17. Custom domains used by nodes are imported at version 1. */
  opset?: number;
}

const ELEM_CODE: Record<WriterElemType, number> = {
  float32: onnx.TensorProto.DataType.FLOAT,
  int64: onnx.TensorProto.DataType.INT64,
  bool: onnx.TensorProto.DataType.BOOL,
};

function valueInfo(v: ValueSpec): OnnxProto.IValueInfoProto {
  return {
    name: v.name,
    type: {
      tensorType: {
        elemType: ELEM_CODE[v.elemType],
        shape: { dim: v.dims.map((d) => (typeof d === 'number' ? { dimValue: d } : { dimParam: d })) },
      },
    },
  };
}

function tensorProto(t: TensorSpec): OnnxProto.ITensorProto {
  const expected = t.dims.reduce((a, b) => a * b, 1);
  if (t.data.length !== expected) {
    throw new Error(`writer: tensor ${t.name} has ${t.data.length} values but dims [${t.dims}] need ${expected}`);
  }
  // Copy into a fresh little-endian buffer; typed arrays use platform order, so write explicitly.
  const isFloat = t.data instanceof Float32Array;
  const raw = new Uint8Array(t.data.length * (isFloat ? 4 : 8));
  const view = new DataView(raw.buffer);
  for (let k = 0; k < t.data.length; k++) {
    if (isFloat) view.setFloat32(k * 4, (t.data as Float32Array)[k], true);
    else view.setBigInt64(k * 8, (t.data as BigInt64Array)[k], true);
  }
  return {
    name: t.name,
    dims: t.dims,
    dataType: isFloat ? onnx.TensorProto.DataType.FLOAT : onnx.TensorProto.DataType.INT64,
    rawData: raw,
  };
}

function attribute(name: string, value: AttrValue): OnnxProto.IAttributeProto {
  const T = onnx.AttributeProto.AttributeType;
  if ('i' in value) return { name, type: T.INT, i: value.i };
  if ('f' in value) return { name, type: T.FLOAT, f: value.f };
  if ('ints' in value) return { name, type: T.INTS, ints: value.ints };
  if ('floats' in value) return { name, type: T.FLOATS, floats: value.floats };
  if ('s' in value) return { name, type: T.STRING, s: new TextEncoder().encode(value.s) };
  if ('tensor' in value) return { name, type: T.TENSOR, t: tensorProto(value.tensor) };
  return { name, type: T.GRAPH, g: graphProto(value.graph) };
}

function graphProto(spec: SubgraphSpec): OnnxProto.IGraphProto {
  return {
    name: spec.name,
    input: spec.inputs.map(valueInfo),
    output: spec.outputs.map(valueInfo),
    initializer: spec.initializers.map(tensorProto),
    node: spec.nodes.map((n, k) => ({
      opType: n.op,
      input: n.inputs,
      output: n.outputs,
      name: n.name ?? `${n.op.toLowerCase()}_${k}`,
      domain: n.domain ?? '',
      attribute: Object.entries(n.attributes ?? {}).map(([key, v]) => attribute(key, v)),
    })),
  };
}

function customDomains(nodes: NodeSpec[], into: Set<string>): Set<string> {
  for (const n of nodes) {
    if (n.domain && n.domain !== 'ai.onnx') into.add(n.domain);
    for (const v of Object.values(n.attributes ?? {})) if ('graph' in v) customDomains(v.graph.nodes, into);
  }
  return into;
}

/** Serialized ModelProto (ir_version 8, producer "skein-writer"). */
export function buildModel(spec: GraphSpec): Uint8Array {
  const opsetImport: OnnxProto.IOperatorSetIdProto[] = [{ domain: '', version: spec.opset ?? 17 }];
  for (const domain of customDomains(spec.nodes, new Set())) opsetImport.push({ domain, version: 1 });
  const model = onnx.ModelProto.create({
    irVersion: 8,
    producerName: 'skein-writer',
    producerVersion: '1',
    opsetImport,
    graph: graphProto(spec),
  });
  return onnx.ModelProto.encode(model).finish();
}
