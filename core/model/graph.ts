/**
 * Static analysis of an ONNX graph: element types, shapes, and which tensors are input-independent.
 * Declared value_info wins; otherwise types and shapes are propagated through the common ops
 * (ONNX operator specification for each op named below). Unknown stays unknown (undefined / null).
 */
import { onnx, type OnnxProto } from './proto.ts';
import type { Dim, ElemType, ValueInfo } from './types.ts';

type Long = { toNumber(): number };

/** protobufjs gives int64 fields as Long objects; everything Skein reads fits in a double. */
export function toNum(v: number | Long | null | undefined): number {
  if (v === null || v === undefined) return 0;
  return typeof v === 'number' ? v : v.toNumber();
}

const ELEM_TYPES: Record<number, ElemType> = {
  1: 'float32', 2: 'uint8', 3: 'int8', 4: 'uint16', 5: 'int16', 6: 'int32', 7: 'int64',
  8: 'string', 9: 'bool', 10: 'float16', 11: 'float64', 12: 'uint32', 13: 'uint64', 16: 'bfloat16',
};

/** ONNX TensorProto.DataType code → Skein name ('other' for complex and the 4/8-bit types). */
export function elemTypeOf(code: number | null | undefined): ElemType {
  return ELEM_TYPES[code ?? 0] ?? 'other';
}

export const ELEM_CODES: Partial<Record<ElemType, number>> = Object.fromEntries(
  Object.entries(ELEM_TYPES).map(([code, name]) => [name, Number(code)]),
);

export const FLOATING: ReadonlySet<ElemType> = new Set(['float32', 'float16', 'float64', 'bfloat16']);

/** Type of a ValueInfoProto: undefined when it is not a tensor (sequence, map, optional) or untyped. */
export function declaredType(v: OnnxProto.IValueInfoProto): ElemType | undefined {
  const tensor = v.type?.tensorType;
  if (!tensor || !tensor.elemType) return undefined;
  return elemTypeOf(tensor.elemType);
}

/** Shape of a ValueInfoProto: null when the graph states none. */
export function declaredDims(v: OnnxProto.IValueInfoProto): Dim[] | null {
  const shape = v.type?.tensorType?.shape;
  if (!shape) return null;
  return (shape.dim ?? []).map((d) => {
    if (d.dimValue !== null && d.dimValue !== undefined) return toNum(d.dimValue);
    if (d.dimParam) return d.dimParam;
    return null;
  });
}

export function valueInfoOf(v: OnnxProto.IValueInfoProto): ValueInfo {
  return { name: v.name ?? '', elemType: declaredType(v) ?? 'other', dims: declaredDims(v) };
}

/** Attribute lookup by name. */
export function attr(node: OnnxProto.INodeProto, name: string): OnnxProto.IAttributeProto | undefined {
  return (node.attribute ?? []).find((a) => a.name === name);
}
function attrInt(node: OnnxProto.INodeProto, name: string, fallback: number): number {
  const a = attr(node, name);
  return a ? toNum(a.i) : fallback;
}
function attrInts(node: OnnxProto.INodeProto, name: string): number[] | undefined {
  const a = attr(node, name);
  return a ? (a.ints ?? []).map(toNum) : undefined;
}
function attrString(node: OnnxProto.INodeProto, name: string, fallback: string): string {
  const a = attr(node, name);
  return a?.s ? new TextDecoder().decode(a.s) : fallback;
}

/** Subgraphs held by a node's GRAPH / GRAPHS attributes (If branches, Loop / Scan bodies, custom ops). */
export function subgraphsOf(node: OnnxProto.INodeProto): { attribute: string; graph: OnnxProto.IGraphProto }[] {
  const found: { attribute: string; graph: OnnxProto.IGraphProto }[] = [];
  for (const a of node.attribute ?? []) {
    if (a.g) found.push({ attribute: a.name ?? '', graph: a.g });
    for (const g of a.graphs ?? []) found.push({ attribute: a.name ?? '', graph: g });
  }
  return found;
}

/** Values of a small numeric constant tensor (shape vectors, axes, clip bounds); null when not decodable. */
export function constantValues(t: OnnxProto.ITensorProto, maxElements = 64): number[] | null {
  if (t.dataLocation === onnx.TensorProto.DataLocation.EXTERNAL) return null;
  const count = (t.dims ?? []).map(toNum).reduce((a, b) => a * b, 1);
  if (count > maxElements) return null;
  const T = onnx.TensorProto.DataType;
  const raw = t.rawData && t.rawData.length > 0 ? t.rawData : null;
  if (raw) {
    const view = new DataView(raw.buffer, raw.byteOffset, raw.byteLength);
    const out: number[] = [];
    const width = { [T.FLOAT]: 4, [T.DOUBLE]: 8, [T.INT32]: 4, [T.INT64]: 8 }[t.dataType ?? 0];
    if (!width || raw.byteLength < count * width) return null;
    for (let k = 0; k < count; k++) {
      if (t.dataType === T.FLOAT) out.push(view.getFloat32(k * 4, true));
      else if (t.dataType === T.DOUBLE) out.push(view.getFloat64(k * 8, true));
      else if (t.dataType === T.INT32) out.push(view.getInt32(k * 4, true));
      else out.push(Number(view.getBigInt64(k * 8, true)));
    }
    return out;
  }
  const typed =
    t.dataType === T.FLOAT ? t.floatData :
    t.dataType === T.DOUBLE ? t.doubleData :
    t.dataType === T.INT32 ? t.int32Data :
    t.dataType === T.INT64 ? t.int64Data : null;
  if (!typed || typed.length !== count) return null;
  return (typed as (number | Long)[]).map(toNum);
}

/** The tensor a Constant node carries in its `value` (or value_float(s) / value_int(s)) attribute. */
function constantNodeTensor(node: OnnxProto.INodeProto): OnnxProto.ITensorProto | undefined {
  const T = onnx.TensorProto.DataType;
  for (const a of node.attribute ?? []) {
    if (a.name === 'value' && a.t) return a.t;
    if (a.name === 'value_float') return { dataType: T.FLOAT, dims: [], floatData: [a.f ?? 0] };
    if (a.name === 'value_floats') return { dataType: T.FLOAT, dims: [(a.floats ?? []).length], floatData: a.floats ?? [] };
    if (a.name === 'value_int') return { dataType: T.INT64, dims: [], int64Data: [toNum(a.i)] };
    if (a.name === 'value_ints') return { dataType: T.INT64, dims: [(a.ints ?? []).length], int64Data: (a.ints ?? []).map(toNum) };
    if (a.name === 'value_string') return { dataType: T.STRING, dims: [] };
    if (a.name === 'value_strings') return { dataType: T.STRING, dims: [(a.strings ?? []).length] };
  }
  return undefined;
}

/**
 * Ops whose outputs are never a learned representation of the input's values: constants, shape queries,
 * and generators filled from attributes or shapes alone (ONNX operator specification for each).
 */
export const NON_REPRESENTATION_OPS: ReadonlySet<string> = new Set([
  'Constant', 'Shape', 'Size', 'ConstantOfShape', 'Range', 'EyeLike',
  'RandomNormal', 'RandomUniform', 'RandomNormalLike', 'RandomUniformLike', 'Multinomial', 'Bernoulli',
]);

const CONTROL_FLOW_OPS: ReadonlySet<string> = new Set(['If', 'Loop', 'Scan', 'SequenceMap']);

/** What the analysis knows about one tensor name. */
export interface TensorFacts {
  elemType?: ElemType;
  dims: Dim[] | null;
  /**
   * True when the value cannot depend on the values fed to the graph: it is an initializer, a Constant /
   * Shape / Size / generator output, or computed (outside control flow) only from such tensors.
   */
  inputIndependent: boolean;
  /** The constant tensor itself, for initializers and Constant outputs. */
  constant?: OnnxProto.ITensorProto;
}

/** Name → facts, falling back to the enclosing graph (ONNX subgraphs may read outer-scope names). */
export class Scope {
  private readonly facts = new Map<string, TensorFacts>();
  constructor(private readonly parent?: Scope) {}
  get(name: string): TensorFacts | undefined {
    return this.facts.get(name) ?? this.parent?.get(name);
  }
  set(name: string, f: TensorFacts): void {
    this.facts.set(name, f);
  }
  constantValues(name: string): number[] | null {
    const c = this.get(name)?.constant;
    return c ? constantValues(c) : null;
  }
}

export interface AnalyzedNode {
  node: OnnxProto.INodeProto;
  index: number;
  scope: Scope;
  /** How many subgraphs deep the node sits; 0 at the top level. */
  depth: number;
}

export interface GraphAnalysis {
  scope: Scope;
  /** Every node, the top level in order and each subgraph's nodes right before the node holding them. */
  nodes: AnalyzedNode[];
}

/** Analyze a graph and all its subgraphs. */
export function analyzeGraph(graph: OnnxProto.IGraphProto, parent?: Scope, depth = 0): GraphAnalysis {
  const scope = new Scope(parent);
  const declared = new Map<string, OnnxProto.IValueInfoProto>();
  for (const v of [...(graph.valueInfo ?? []), ...(graph.output ?? [])]) if (v.name) declared.set(v.name, v);
  const initializerNames = new Set((graph.initializer ?? []).map((t) => t.name ?? ''));

  for (const v of graph.input ?? []) {
    if (!v.name || initializerNames.has(v.name)) continue;
    scope.set(v.name, { elemType: declaredType(v), dims: declaredDims(v), inputIndependent: false });
  }
  for (const t of graph.initializer ?? []) {
    if (!t.name) continue;
    scope.set(t.name, { elemType: elemTypeOf(t.dataType), dims: (t.dims ?? []).map(toNum), inputIndependent: true, constant: t });
  }

  const nodes: AnalyzedNode[] = [];
  (graph.node ?? []).forEach((node, index) => {
    const subgraphs = subgraphsOf(node);
    const subAnalyses = subgraphs.map((s) => analyzeGraph(s.graph, scope, depth + 1));
    for (const sub of subAnalyses) nodes.push(...sub.nodes);
    nodes.push({ node, index, scope, depth });

    const inputs = (node.input ?? []).map((name) => (name ? scope.get(name) : undefined));
    const types = inferTypes(node, inputs, subgraphs.map((s) => s.graph));
    const shapes = inferShapes(node, inputs, scope);
    const op = node.opType ?? '';
    const present = (node.input ?? []).filter((n) => n);
    const independent =
      NON_REPRESENTATION_OPS.has(op) ||
      (!CONTROL_FLOW_OPS.has(op) && subgraphs.length === 0 && present.length > 0 &&
        present.every((n) => scope.get(n)?.inputIndependent === true));
    const constant = op === 'Constant' ? constantNodeTensor(node) : undefined;

    (node.output ?? []).forEach((name, k) => {
      if (!name) return;
      const d = declared.get(name);
      const declaredShape = d ? declaredDims(d) : null;
      scope.set(name, {
        elemType: (d && declaredType(d)) ?? types[k],
        dims: declaredShape ?? shapes[k] ?? null,
        inputIndependent: independent,
        constant: k === 0 ? constant : undefined,
      });
    });
  });
  return { scope, nodes };
}

// ---------------------------------------------------------------------------------------------
// Element types

function inferTypes(
  node: OnnxProto.INodeProto,
  inputs: (TensorFacts | undefined)[],
  subgraphs: OnnxProto.IGraphProto[],
): (ElemType | undefined)[] {
  const op = node.opType ?? '';
  const t = (k: number) => inputs[k]?.elemType;
  const first = inputs.find((f) => f?.elemType)?.elemType;
  const nOut = (node.output ?? []).length;
  const all = (e: ElemType | undefined) => Array<ElemType | undefined>(nOut).fill(e);
  const dtypeAttr = (name: string, fallback: ElemType | undefined) => {
    const a = attr(node, name);
    return a ? elemTypeOf(toNum(a.i)) : fallback;
  };
  switch (op) {
    case 'Shape': case 'Size': case 'NonZero': case 'ArgMax': case 'ArgMin': case 'NonMaxSuppression':
      return all('int64');
    case 'Equal': case 'Less': case 'Greater': case 'LessOrEqual': case 'GreaterOrEqual':
    case 'Not': case 'And': case 'Or': case 'Xor': case 'IsNaN': case 'IsInf':
      return all('bool');
    case 'Cast': return all(dtypeAttr('to', undefined));
    case 'CastLike': return all(t(1));
    case 'Constant': return all(elemTypeOf(constantNodeTensor(node)?.dataType));
    case 'ConstantOfShape': {
      const v = attr(node, 'value')?.t;
      return all(v ? elemTypeOf(v.dataType) : 'float32');
    }
    case 'EyeLike': case 'RandomNormalLike': case 'RandomUniformLike': return all(dtypeAttr('dtype', t(0)));
    case 'RandomNormal': case 'RandomUniform': return all(dtypeAttr('dtype', 'float32'));
    case 'Multinomial': return all(dtypeAttr('dtype', 'int32'));
    case 'QuantizeLinear': return all(t(2) ?? 'uint8');
    case 'DynamicQuantizeLinear': return ['uint8', 'float32', 'uint8'];
    case 'DequantizeLinear': return all(t(1) ?? 'float32');
    case 'MatMulInteger': case 'ConvInteger': return all('int32');
    case 'QLinearConv': case 'QLinearMatMul': return all(t(7));
    case 'TopK': case 'MaxPool': return [t(0), 'int64'];
    case 'Dropout': return [t(0), 'bool'];
    case 'Unique': return [t(0), 'int64', 'int64', 'int64'];
    case 'Where': return all(t(1));
    case 'If': return subgraphTypes(subgraphs[0], 0, nOut);
    case 'Loop': return subgraphTypes(subgraphs[0], 1, nOut); // body outputs: cond, then carried + scan outputs
    case 'Scan': return subgraphTypes(subgraphs[0], 0, nOut);
    case 'SequenceConstruct': case 'SequenceEmpty': case 'SequenceInsert': case 'SequenceErase':
    case 'SplitToSequence': case 'SequenceAt': case 'Optional': case 'OptionalGetElement': case 'SequenceMap':
      return all(undefined); // sequences and optionals are not tensors Skein can capture
    default:
      return all(t(0) ?? first);
  }
}

function subgraphTypes(g: OnnxProto.IGraphProto | undefined, skip: number, n: number): (ElemType | undefined)[] {
  const outs = (g?.output ?? []).slice(skip);
  return Array.from({ length: n }, (_, k) => (outs[k] ? declaredType(outs[k]) : undefined));
}

// ---------------------------------------------------------------------------------------------
// Shapes

const SAME_SHAPE_OPS: ReadonlySet<string> = new Set([
  'Relu', 'LeakyRelu', 'PRelu', 'Elu', 'Selu', 'Celu', 'Gelu', 'FastGelu', 'Sigmoid', 'Tanh', 'HardSigmoid',
  'HardSwish', 'Softplus', 'Softsign', 'Mish', 'ThresholdedRelu', 'Clip', 'Swish', 'SiLU',
  'Softmax', 'LogSoftmax', 'Hardmax', 'Identity', 'Dropout', 'Cast', 'CastLike', 'Erf', 'Neg', 'Abs', 'Exp',
  'Log', 'Sqrt', 'Reciprocal', 'Floor', 'Ceil', 'Round', 'Sign', 'Sin', 'Cos', 'Tan', 'Not', 'IsNaN', 'IsInf',
  'BatchNormalization', 'LayerNormalization', 'InstanceNormalization', 'GroupNormalization',
  'LpNormalization', 'MeanVarianceNormalization', 'LRN', 'Shrink', 'QuantizeLinear', 'DequantizeLinear',
  'SkipLayerNormalization', 'BiasGelu',
]);

const BROADCAST_OPS: ReadonlySet<string> = new Set([
  'Add', 'Sub', 'Mul', 'Div', 'Pow', 'Mod', 'Max', 'Min', 'Sum', 'Mean', 'Where', 'And', 'Or', 'Xor',
  'Equal', 'Less', 'Greater', 'LessOrEqual', 'GreaterOrEqual', 'BitShift',
]);

/** Numpy-style broadcasting (ONNX "Broadcasting in ONNX" document); a dim that cannot be resolved is null. */
export function broadcastDims(shapes: (Dim[] | null)[]): Dim[] | null {
  if (shapes.length === 0 || shapes.some((s) => s === null)) return null;
  const known = shapes as Dim[][];
  const rank = Math.max(...known.map((s) => s.length));
  const out: Dim[] = [];
  for (let axis = 0; axis < rank; axis++) {
    const dims = known.map((s) => s[s.length - rank + axis]).filter((d) => d !== undefined && d !== 1);
    if (dims.length === 0) { out.push(1); continue; }
    const numbers = dims.filter((d): d is number => typeof d === 'number');
    if (numbers.length > 0) out.push(numbers.every((d) => d === numbers[0]) ? numbers[0] : null);
    else out.push(dims.every((d) => d !== null && d === dims[0]) ? dims[0] : null);
  }
  return out;
}

function product(dims: Dim[]): Dim {
  if (dims.length === 1) return dims[0];
  let p = 1;
  for (const d of dims) {
    if (typeof d !== 'number') return null;
    p *= d;
  }
  return p;
}

/** Output size of one spatial axis of Conv / pooling (ONNX operator specification: Conv, MaxPool). */
function windowOutput(
  input: Dim, kernel: number, stride: number, dilation: number, padSum: number, autoPad: string, ceil: boolean,
): Dim {
  const effective = dilation * (kernel - 1) + 1;
  if (autoPad === 'SAME_UPPER' || autoPad === 'SAME_LOWER') {
    if (typeof input !== 'number') return stride === 1 ? input : null;
    return Math.ceil(input / stride);
  }
  const pads = autoPad === 'VALID' ? 0 : padSum;
  if (typeof input !== 'number') return stride === 1 && pads === effective - 1 ? input : null;
  const span = (input + pads - effective) / stride;
  return (ceil ? Math.ceil(span) : Math.floor(span)) + 1;
}

function windowed(
  node: OnnxProto.INodeProto, x: Dim[], kernel: number[], channels: Dim, ceil: boolean,
): Dim[] | null {
  const spatial = x.length - 2;
  if (spatial < 1 || kernel.length !== spatial) return null;
  const strides = attrInts(node, 'strides') ?? Array(spatial).fill(1);
  const dilations = attrInts(node, 'dilations') ?? Array(spatial).fill(1);
  const pads = attrInts(node, 'pads') ?? Array(2 * spatial).fill(0);
  const autoPad = attrString(node, 'auto_pad', 'NOTSET');
  const out: Dim[] = [x[0], channels];
  for (let k = 0; k < spatial; k++) {
    out.push(windowOutput(x[k + 2], kernel[k], strides[k] ?? 1, dilations[k] ?? 1, (pads[k] ?? 0) + (pads[k + spatial] ?? 0), autoPad, ceil));
  }
  return out;
}

function axesOf(node: OnnxProto.INodeProto, scope: Scope, inputIndex: number): number[] | undefined {
  const fromAttr = attrInts(node, 'axes');
  if (fromAttr) return fromAttr;
  const name = (node.input ?? [])[inputIndex];
  if (!name) return undefined;
  return scope.constantValues(name) ?? undefined;
}

function reshape(x: Dim[] | null, target: number[], allowZero: boolean): Dim[] | null {
  const out: Dim[] = target.map((t, k) => (t === 0 && !allowZero ? (x ? x[k] ?? null : null) : t === -1 ? null : t));
  const inferAt = target.indexOf(-1);
  if (inferAt < 0) return out;
  if (!x) return null;
  // -1 takes whatever the input holds beyond the other output dims: solvable when the leftovers cancel.
  const inNumeric = x.filter((d): d is number => typeof d === 'number').reduce((a, b) => a * b, 1);
  const inSymbols = x.filter((d): d is string | null => typeof d !== 'number');
  const outNumeric = out.filter((d, k) => k !== inferAt && typeof d === 'number').reduce((a: number, b) => a * (b as number), 1);
  const outSymbols = out.filter((d, k): d is string | null => k !== inferAt && typeof d !== 'number');
  if (inSymbols.includes(null) || outSymbols.includes(null)) return out;
  const remaining = [...inSymbols];
  for (const s of outSymbols) {
    const at = remaining.indexOf(s);
    if (at < 0) return out;
    remaining.splice(at, 1);
  }
  if (outNumeric === 0 || inNumeric % outNumeric !== 0) return out;
  const ratio = inNumeric / outNumeric;
  if (remaining.length === 0) out[inferAt] = ratio;
  else if (remaining.length === 1 && ratio === 1) out[inferAt] = remaining[0];
  return out;
}

function matmulDims(a: Dim[], b: Dim[]): Dim[] | null {
  // numpy.matmul semantics (ONNX operator specification: MatMul).
  const a2 = a.length === 1 ? [1, a[0]] : a;
  const b2 = b.length === 1 ? [b[0], 1] : b;
  if (a2.length < 2 || b2.length < 2) return null;
  const batch = broadcastDims([a2.slice(0, -2), b2.slice(0, -2)]) ?? [];
  const out = [...batch, a2[a2.length - 2], b2[b2.length - 1]];
  if (a.length === 1) out.splice(out.length - 2, 1);
  if (b.length === 1) out.splice(out.length - 1, 1);
  return out;
}

function inferShapes(node: OnnxProto.INodeProto, inputs: (TensorFacts | undefined)[], scope: Scope): (Dim[] | null)[] {
  const op = node.opType ?? '';
  const s = (k: number): Dim[] | null => inputs[k]?.dims ?? null;
  const x = s(0);
  const single = (d: Dim[] | null): (Dim[] | null)[] => [d];
  if (SAME_SHAPE_OPS.has(op)) return [x, op === 'Dropout' ? x : null];
  if (BROADCAST_OPS.has(op)) return single(broadcastDims(inputs.map((f) => f?.dims ?? null)));
  switch (op) {
    case 'Gemm': {
      const a = s(0), b = s(1);
      if (!a || !b || a.length !== 2 || b.length !== 2) return [null];
      const m = attrInt(node, 'transA', 0) ? a[1] : a[0];
      const n = attrInt(node, 'transB', 0) ? b[0] : b[1];
      return single([m, n]);
    }
    case 'MatMul': {
      const a = s(0), b = s(1);
      return single(a && b ? matmulDims(a, b) : null);
    }
    case 'Conv': {
      const w = s(1);
      if (!x || !w) return [null];
      const kernel = attrInts(node, 'kernel_shape') ?? w.slice(2).map((d) => (typeof d === 'number' ? d : NaN));
      if (kernel.some((k) => Number.isNaN(k))) return [null];
      return single(windowed(node, x, kernel, w[0], false));
    }
    case 'MaxPool': case 'AveragePool': case 'LpPool': {
      const kernel = attrInts(node, 'kernel_shape');
      if (!x || !kernel) return [null, null];
      const out = windowed(node, x, kernel, x[1], attrInt(node, 'ceil_mode', 0) === 1);
      return [out, out];
    }
    case 'GlobalAveragePool': case 'GlobalMaxPool': case 'GlobalLpPool':
      return single(x && x.length >= 2 ? [x[0], x[1], ...x.slice(2).map(() => 1)] : null);
    case 'Flatten': {
      if (!x) return [null];
      const raw = attrInt(node, 'axis', 1);
      const axis = raw < 0 ? raw + x.length : raw;
      return single([axis === 0 ? 1 : product(x.slice(0, axis)), axis === x.length ? 1 : product(x.slice(axis))]);
    }
    case 'Reshape': {
      const target = scope.constantValues((node.input ?? [])[1] ?? '');
      return single(target ? reshape(x, target, attrInt(node, 'allowzero', 0) === 1) : null);
    }
    case 'Transpose': {
      if (!x) return [null];
      const perm = attrInts(node, 'perm') ?? x.map((_, k) => x.length - 1 - k);
      return single(perm.map((p) => x[p] ?? null));
    }
    case 'Unsqueeze': {
      const axes = axesOf(node, scope, 1);
      if (!x || !axes) return [null];
      const rank = x.length + axes.length;
      const at = new Set(axes.map((a) => (a < 0 ? a + rank : a)));
      const rest = [...x];
      return single(Array.from({ length: rank }, (_, k) => (at.has(k) ? 1 : rest.shift() ?? null)));
    }
    case 'Squeeze': {
      if (!x) return [null];
      const axes = axesOf(node, scope, 1);
      if (!axes) return single(x.some((d) => typeof d !== 'number') ? null : x.filter((d) => d !== 1));
      const drop = new Set(axes.map((a) => (a < 0 ? a + x.length : a)));
      return single(x.filter((_, k) => !drop.has(k)));
    }
    case 'Concat': {
      const parts = inputs.map((f) => f?.dims ?? null);
      if (!x || parts.some((d) => d === null)) return [null];
      const raw = attrInt(node, 'axis', 0);
      const axis = raw < 0 ? raw + x.length : raw;
      const along = (parts as Dim[][]).map((p) => p[axis]);
      const total = along.every((d): d is number => typeof d === 'number') ? along.reduce((a, b) => a + b, 0) : null;
      return single(x.map((d, k) => (k === axis ? total : d)));
    }
    case 'ReduceMean': case 'ReduceSum': case 'ReduceMax': case 'ReduceMin': case 'ReduceProd':
    case 'ReduceL1': case 'ReduceL2': case 'ReduceLogSum': case 'ReduceLogSumExp': case 'ReduceSumSquare': {
      if (!x) return [null];
      const axes = axesOf(node, scope, 1);
      const keep = attrInt(node, 'keepdims', 1) === 1;
      if (!axes || axes.length === 0) {
        if (attrInt(node, 'noop_with_empty_axes', 0) === 1) return single(x);
        return single(keep ? x.map(() => 1) : []);
      }
      const reduced = new Set(axes.map((a) => (a < 0 ? a + x.length : a)));
      const out: Dim[] = [];
      x.forEach((d, k) => {
        if (!reduced.has(k)) out.push(d);
        else if (keep) out.push(1);
      });
      return single(out);
    }
    default:
      return [null];
  }
}
