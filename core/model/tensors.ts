/**
 * Which tensors of a graph Skein lists, which it can capture, and which it selects by default.
 *
 * Listed: every node output whose element type is floating (float32/float16/float64/bfloat16) and whose
 * value can depend on the values fed to the model. Left out as input-independent (see graph.ts): outputs
 * of Constant, Shape, Size, ConstantOfShape, Range, EyeLike and the random generators, and outputs of any
 * node outside control flow all of whose inputs are initializers or such outputs. This covers constant
 * folding and shape arithmetic (Shape → Gather → Unsqueeze → Concat → Reshape's shape input, Cast of a
 * shape to float, ...) soundly: a tensor computed only from constants and shapes is the same for every
 * probe of one input shape, so it cannot tell probes apart.
 *
 * Default selection (common practice, no source):
 * - outputs of activation functions: Relu, LeakyRelu, PRelu, Elu, Selu, Celu, Gelu, FastGelu, Sigmoid,
 *   Tanh, HardSigmoid, HardSwish, Softplus, Softsign, Mish, ThresholdedRelu, Swish/SiLU; Clip with a
 *   constant lower bound of 0 (a bounded ReLU); the x·Sigmoid(x) and x·HardSigmoid(x) patterns (the Mul
 *   output; the gate is not selected); the exported erf form of Gelu, x·0.5·(1 + erf(x/√2)) (its last node).
 * - outputs of Gemm / MatMul / Conv / ConvTranspose layers (one operand an initializer or constant, so
 *   attention score products are not layers) that do not feed an activation. A layer "feeds" an
 *   activation when, through a chain of sole consumers that apply a constant per-unit map (bias Add,
 *   Sub / Mul / Div by a constant, BatchNormalization), the activation is the only reader. When it does
 *   not, the default is the end of that chain (the biased / normalized output), which differs from the
 *   raw product only by a per-unit affine map.
 * - Softmax / LogSoftmax outputs (typically the final class probabilities) are listed but never default.
 */
import { analyzeGraph, FLOATING, subgraphsOf, type Scope } from './graph.ts';
import type { OnnxProto } from './proto.ts';
import type { CapturableTensor } from './types.ts';

export const SUBGRAPH_REASON = 'inside a control-flow subgraph (If/Loop/Scan); Skein can only capture top-level tensors';
export const BFLOAT16_REASON = 'bfloat16 tensors cannot be returned by onnxruntime-node';

export const ACTIVATION_OPS: ReadonlySet<string> = new Set([
  'Relu', 'LeakyRelu', 'PRelu', 'Elu', 'Selu', 'Celu', 'Gelu', 'FastGelu', 'Sigmoid', 'Tanh', 'HardSigmoid',
  'HardSwish', 'Softplus', 'Softsign', 'Mish', 'ThresholdedRelu', 'Swish', 'SiLU',
]);
const LAYER_OPS: ReadonlySet<string> = new Set(['Gemm', 'MatMul', 'Conv', 'ConvTranspose']);
const PER_UNIT_AFFINE_OPS: ReadonlySet<string> = new Set(['Add', 'Sub', 'Mul', 'Div', 'BatchNormalization']);
const GATE_OPS: ReadonlySet<string> = new Set(['Sigmoid', 'HardSigmoid']);
/** How many per-unit affine nodes may sit between a layer and its activation. */
const MAX_AFFINE_CHAIN = 3;

type Node = OnnxProto.INodeProto;

/** One activation, possibly spread over several nodes: reads `input`, produces `output`. */
interface Activation {
  input: string;
  output: string;
  nodes: Set<Node>;
}

/** Names a subgraph reads from enclosing scopes (ONNX forbids shadowing, so any non-local name is outer). */
function outerReads(graph: OnnxProto.IGraphProto): Set<string> {
  const local = new Set<string>([
    ...(graph.input ?? []).map((v) => v.name ?? ''),
    ...(graph.initializer ?? []).map((t) => t.name ?? ''),
  ]);
  const reads = new Set<string>();
  for (const node of graph.node ?? []) {
    for (const name of node.input ?? []) if (name && !local.has(name)) reads.add(name);
    for (const s of subgraphsOf(node)) for (const name of outerReads(s.graph)) if (!local.has(name)) reads.add(name);
    for (const name of node.output ?? []) local.add(name);
  }
  return reads;
}

class Wiring {
  readonly producer = new Map<string, Node>();
  readonly consumers = new Map<string, Node[]>();
  readonly graphOutputs: Set<string>;
  constructor(graph: OnnxProto.IGraphProto, private readonly scope: Scope) {
    this.graphOutputs = new Set((graph.output ?? []).map((v) => v.name ?? ''));
    for (const node of graph.node ?? []) {
      for (const name of node.output ?? []) if (name) this.producer.set(name, node);
      const reads = new Set((node.input ?? []).filter((n) => n));
      for (const s of subgraphsOf(node)) for (const name of outerReads(s.graph)) reads.add(name);
      for (const name of reads) {
        const list = this.consumers.get(name) ?? [];
        list.push(node);
        this.consumers.set(name, list);
      }
    }
  }
  readers(name: string): Node[] {
    return this.consumers.get(name) ?? [];
  }
  /** The only node reading `name`, when it is not also a graph output. */
  soleReader(name: string): Node | undefined {
    const r = this.readers(name);
    return r.length === 1 && !this.graphOutputs.has(name) ? r[0] : undefined;
  }
  isConstant(name: string): boolean {
    return this.scope.get(name)?.inputIndependent === true;
  }
  /** Inputs of `node` other than `name`, all constant. */
  othersConstant(node: Node, name: string): boolean {
    return (node.input ?? []).filter((n) => n && n !== name).every((n) => this.isConstant(n));
  }
  constantScalar(name: string | undefined): number | null {
    if (!name) return null;
    const values = this.scope.constantValues(name);
    return values && values.length === 1 ? values[0] : null;
  }
}

function isBoundedRelu(node: Node, w: Wiring): boolean {
  const minAttr = (node.attribute ?? []).find((a) => a.name === 'min');
  const min = minAttr ? minAttr.f ?? null : w.constantScalar((node.input ?? [])[1]);
  return min === 0;
}

/** x·gate(x), e.g. SiLU exported as Sigmoid + Mul. */
function gatedActivation(mul: Node, w: Wiring): Activation | undefined {
  const [a, b] = mul.input ?? [];
  if (!a || !b || (mul.input ?? []).length !== 2) return undefined;
  for (const [x, gated] of [[a, b], [b, a]]) {
    const gate = w.producer.get(gated);
    if (gate && GATE_OPS.has(gate.opType ?? '') && (gate.input ?? [])[0] === x && w.soleReader(gated) === mul) {
      return { input: x, output: (mul.output ?? [])[0], nodes: new Set([gate, mul]) };
    }
  }
  return undefined;
}

/** Gelu as exported without a Gelu op: x · 0.5 · (1 + erf(x / √2)), in any order of the constant factors. */
function erfGelu(erf: Node, w: Wiring): Activation | undefined {
  const scaled = (erf.input ?? [])[0];
  const pre = scaled ? w.producer.get(scaled) : undefined;
  if (!pre || !['Div', 'Mul'].includes(pre.opType ?? '') || w.soleReader(scaled) !== erf) return undefined;
  const x = (pre.input ?? []).find((n) => n && !w.isConstant(n));
  if (!x || !w.othersConstant(pre, x)) return undefined;
  const nodes = new Set<Node>([pre, erf]);
  let current = (erf.output ?? [])[0];
  let multipliedByX = false;
  for (let step = 0; step < 4; step++) {
    const next = w.soleReader(current);
    if (!next) break;
    const others = (next.input ?? []).filter((n) => n && n !== current);
    const op = next.opType ?? '';
    if (!multipliedByX && op === 'Add' && w.othersConstant(next, current)) {
      nodes.add(next);
    } else if (!multipliedByX && op === 'Mul' && others.length === 1) {
      const other = others[0];
      const half = w.producer.get(other);
      if (other === x) {
        multipliedByX = true;
      } else if (half?.opType === 'Mul' && (half.input ?? []).includes(x) && w.othersConstant(half, x)) {
        multipliedByX = true;
        nodes.add(half);
      } else if (!w.isConstant(other)) {
        break;
      }
      nodes.add(next);
    } else if (multipliedByX && op === 'Mul' && w.othersConstant(next, current)) {
      nodes.add(next);
      current = (next.output ?? [])[0];
      break;
    } else {
      break;
    }
    current = (next.output ?? [])[0];
  }
  return multipliedByX ? { input: x, output: current, nodes } : undefined;
}

function findActivations(graph: OnnxProto.IGraphProto, w: Wiring): Map<Node, Activation> {
  const owner = new Map<Node, Activation>();
  const claim = (act: Activation | undefined) => {
    if (!act || [...act.nodes].some((n) => owner.has(n))) return;
    for (const n of act.nodes) owner.set(n, act);
  };
  const nodes = graph.node ?? [];
  // Multi-node patterns first, so their inner Sigmoid gate is not taken for an activation of its own.
  for (const node of nodes) if (node.opType === 'Mul') claim(gatedActivation(node, w));
  for (const node of nodes) if (node.opType === 'Erf') claim(erfGelu(node, w));
  for (const node of nodes) {
    const op = node.opType ?? '';
    if (ACTIVATION_OPS.has(op) || (op === 'Clip' && isBoundedRelu(node, w))) {
      claim({ input: (node.input ?? [])[0] ?? '', output: (node.output ?? [])[0] ?? '', nodes: new Set([node]) });
    }
  }
  return owner;
}

/** True when every reader of `name` belongs to one activation that takes `name` as its input. */
function feedsActivation(name: string, w: Wiring, owner: Map<Node, Activation>): boolean {
  const readers = w.readers(name);
  if (readers.length === 0 || w.graphOutputs.has(name)) return false;
  const act = owner.get(readers[0]);
  return !!act && act.input === name && readers.every((r) => owner.get(r) === act);
}

/** Names of the top-level tensors selected when the user names no layers. */
export function defaultTensorNames(graph: OnnxProto.IGraphProto, scope: Scope): Set<string> {
  const w = new Wiring(graph, scope);
  const owner = findActivations(graph, w);
  const chosen = new Set<string>();
  for (const act of new Set(owner.values())) chosen.add(act.output);
  for (const node of graph.node ?? []) {
    const [a, b] = node.input ?? [];
    const hasWeight = (a && w.isConstant(a)) || (b && w.isConstant(b));
    if (!LAYER_OPS.has(node.opType ?? '') || !hasWeight) continue;
    let current = (node.output ?? [])[0];
    if (!current) continue;
    let feeds = feedsActivation(current, w, owner);
    for (let step = 0; step < MAX_AFFINE_CHAIN && !feeds; step++) {
      const next = w.soleReader(current);
      if (!next || owner.has(next) || !PER_UNIT_AFFINE_OPS.has(next.opType ?? '') || !w.othersConstant(next, current)) break;
      current = (next.output ?? [])[0];
      feeds = feedsActivation(current, w, owner);
    }
    if (!feeds) chosen.add(current);
  }
  return chosen;
}

/** The tensor listing of ModelInfo.tensors (rules in the header comment). */
export function listTensors(graph: OnnxProto.IGraphProto): CapturableTensor[] {
  const analysis = analyzeGraph(graph);
  const defaults = defaultTensorNames(graph, analysis.scope);
  const listed: CapturableTensor[] = [];
  for (const { node, scope, depth } of analysis.nodes) {
    for (const name of node.output ?? []) {
      const facts = name ? scope.get(name) : undefined;
      if (!facts?.elemType || !FLOATING.has(facts.elemType) || facts.inputIndependent) continue;
      const tensor: CapturableTensor = {
        name,
        op: node.opType ?? '',
        node: node.name ?? '',
        elemType: facts.elemType,
        dims: facts.dims,
        capturable: true,
        isDefault: false,
      };
      if (depth > 0) {
        tensor.capturable = false;
        tensor.reason = SUBGRAPH_REASON;
      } else if (facts.elemType === 'bfloat16') {
        tensor.capturable = false;
        tensor.reason = BFLOAT16_REASON;
      } else {
        tensor.isDefault = defaults.has(name);
      }
      listed.push(tensor);
    }
  }
  return listed;
}
