/**
 * Graph surgery for ablations. The model is cut at the ablated tensor T: the part upstream of T runs once per probe
 * (with T and every other tensor the downstream part reads exposed by core/model's exposeTensors, as capture does),
 * and the downstream part becomes its own model whose inputs are those tensors. The rest of the model therefore reads
 * T only from what it is fed, so a unit is replaced by writing into its own slice of T before the run (see
 * `unitSlice`): a conv channel over its whole map, a sequence unit at every position, a dense unit as is. The
 * unmodified model is the same downstream graph fed T untouched (the baseline runs through the very same kernels
 * as every ablation), and each ablation costs one run of the downstream part only, never the whole model.
 * (Measured: replacing units inside the graph with T·keep + shift, Mul then Add over the whole tensor, made a
 * downstream run 10–25 % slower than writing the few replaced values into the fed tensor.)
 */
import { SkeinError } from '../errors.ts';
import { decodeModel, exposeTensors, inlineExternalData } from '../model/index.ts';
import { analyzeGraph, ELEM_CODES, subgraphsOf } from '../model/graph.ts';
import { onnx, type OnnxProto } from '../model/proto.ts';
import type { ElemType } from '../model/types.ts';

export interface FrontierTensor {
  name: string;
  elemType: ElemType;
  /** 'input': a model input the downstream part reads directly (fed from the probes); 'cached': exposed upstream. */
  source: 'input' | 'cached';
}

export interface CutModel {
  /** The ablated tensor. */
  target: string;
  /** Element type of the target. */
  targetType: 'float32' | 'float64';
  /** The full model with every cached frontier tensor exposed as an output (the upstream pass). */
  upstream: Uint8Array;
  /** The downstream model: inputs = the frontier (T among them), outputs = the model's outputs. */
  downstream: Uint8Array;
  frontier: FrontierTensor[];
  outputs: string[];
  /** Nodes in the downstream model, against the whole model's count (how much of the model one ablation reruns). */
  downstreamNodes: number;
  totalNodes: number;
}

/** Names read by a subgraph (and its nested subgraphs) that it does not define itself: outer-scope reads. */
function outerReads(graph: OnnxProto.IGraphProto, into = new Set<string>()): Set<string> {
  const defined = new Set<string>([
    ...(graph.input ?? []).map((v) => v.name ?? ''),
    ...(graph.initializer ?? []).map((t) => t.name ?? ''),
  ]);
  for (const node of graph.node ?? []) {
    for (const name of node.input ?? []) if (name && !defined.has(name)) into.add(name);
    for (const s of subgraphsOf(node)) for (const name of outerReads(s.graph)) if (!defined.has(name)) into.add(name);
    for (const name of node.output ?? []) if (name) defined.add(name);
  }
  return into;
}

/** Every name a top-level node reads: its inputs and its subgraphs' outer-scope reads. */
function readsOf(node: OnnxProto.INodeProto): string[] {
  const names = new Set((node.input ?? []).filter((n) => n));
  for (const s of subgraphsOf(node)) for (const n of outerReads(s.graph)) names.add(n);
  return [...names];
}

/**
 * Cuts `modelBytes` at tensor `target` (a top-level node output). `modelPath` lets external weights be inlined.
 * Errors name the tensor and say what to choose instead.
 */
export function cutAt(modelBytes: Uint8Array, target: string, opts: { modelPath?: string } = {}): CutModel {
  const file = opts.modelPath;
  const model = decodeModel(modelBytes, file);
  const graph = model.graph!;
  const { scope } = analyzeGraph(graph);
  const nodes = graph.node ?? [];
  const where = `tensor ${target}`;
  const producer = nodes.findIndex((n) => (n.output ?? []).includes(target));
  if (producer < 0) {
    throw new SkeinError({ code: 'model', file, where, message: `The model has no top-level tensor named "${target}" to ablate. Choose a layer the study captured (skein rank lists them).` });
  }
  const elemType = scope.get(target)?.elemType;
  if (elemType !== 'float32' && elemType !== 'float64') {
    throw new SkeinError({ code: 'model', file, where, message: `Tensor "${target}" holds ${elemType ?? 'values of unknown type'}; Skein ablates float32 and float64 tensors only. Choose another layer.` });
  }
  const outputs = (graph.output ?? []).map((o) => o.name ?? '');
  if (outputs.includes(target)) {
    throw new SkeinError({ code: 'model', file, where, message: `Tensor "${target}" is itself a model output, so no part of the model reads it after it is made. Ablate a layer before the output.` });
  }

  // Forward closure of the target: every node that (transitively) reads it, in graph order (ONNX nodes are topological).
  const tainted = new Set([target]);
  const downstream = new Set<number>();
  for (let i = producer + 1; i < nodes.length; i++) {
    if (readsOf(nodes[i]).some((n) => tainted.has(n))) {
      downstream.add(i);
      for (const o of nodes[i].output ?? []) if (o) tainted.add(o);
    }
  }
  if (!outputs.some((o) => tainted.has(o))) {
    throw new SkeinError({ code: 'model', file, where, message: `No model output depends on tensor "${target}", so removing its units cannot change anything. Choose a layer the outputs read.` });
  }

  // Input-independent producers (constants, constant folding) move downstream instead of being fetched per probe.
  const initializers = new Set((graph.initializer ?? []).map((t) => t.name ?? ''));
  const producerOf = new Map<string, number>();
  nodes.forEach((n, i) => (n.output ?? []).forEach((o) => o && producerOf.set(o, i)));
  // Shape queries (Shape, Size) are input-independent too: they move downstream and read the cached tensor there.
  const pull = (name: string): void => {
    const i = producerOf.get(name);
    if (i === undefined || downstream.has(i) || !scope.get(name)?.inputIndependent) return;
    downstream.add(i);
    for (const n of readsOf(nodes[i])) if (!initializers.has(n)) pull(n);
  };
  for (const i of [...downstream]) for (const n of readsOf(nodes[i])) if (!initializers.has(n)) pull(n);

  const order = [...downstream].sort((a, b) => a - b);
  const made = new Set([...downstream].flatMap((i) => nodes[i].output ?? []));
  const graphInputs = new Set((graph.input ?? []).map((v) => v.name ?? '').filter((n) => !initializers.has(n)));
  const frontierNames: string[] = [];
  const usedInitializers = new Set<string>();
  for (const i of order) {
    for (const n of readsOf(nodes[i])) {
      if (made.has(n)) continue;
      if (initializers.has(n)) usedInitializers.add(n);
      else if (!frontierNames.includes(n)) frontierNames.push(n);
    }
  }
  const frontier: FrontierTensor[] = frontierNames.map((name) => {
    const t = scope.get(name)?.elemType;
    if (!t || !ELEM_CODES[t] || t === 'bfloat16') {
      throw new SkeinError({ code: 'model', file, where: `tensor ${name}`, message: `The part of the model after "${target}" also reads "${name}", whose element type Skein cannot tell or carry. Ablate another layer, or export the model with shape information (value_info).` });
    }
    return { name, elemType: t, source: graphInputs.has(name) ? 'input' : 'cached' };
  });

  // The downstream model.
  // A second decode gives the downstream model its own copies of the nodes and initializers.
  const downModel = decodeModel(modelBytes, file);
  const copy = downModel.graph!;
  const downNodes = order.map((i) => copy.node![i]);
  const inputInfo = (name: string, c: number): OnnxProto.IValueInfoProto => ({ name, type: { tensorType: { elemType: c } } });
  const downGraph: OnnxProto.IGraphProto = {
    name: `${graph.name ?? 'model'}_after_${target}`,
    input: frontier.map((f) => inputInfo(f.name, ELEM_CODES[f.elemType]!)),
    output: copy.output,
    initializer: (copy.initializer ?? []).filter((t) => usedInitializers.has(t.name ?? '')),
    node: downNodes,
    valueInfo: (copy.valueInfo ?? []).filter((v) => made.has(v.name ?? '')),
  };
  downModel.graph = onnx.GraphProto.fromObject(downGraph);
  if (file) inlineExternalData(downModel, file);
  else if ((downGraph.initializer ?? []).some((t) => t.dataLocation === onnx.TensorProto.DataLocation.EXTERNAL)) {
    throw new SkeinError({ code: 'model', where: 'graph.initializer', message: 'This model keeps weights in separate data files; open it from its file so Skein can find them.' });
  }

  return {
    target, targetType: elemType, frontier, outputs,
    // The upstream pass is capture's own rewrite: the whole model with the cached frontier exposed.
    upstream: exposeTensors(modelBytes, frontier.filter((f) => f.source === 'cached').map((f) => f.name), { modelPath: file }),
    downstream: onnx.ModelProto.encode(downModel).finish(),
    downstreamNodes: downNodes.length, totalNodes: nodes.length,
  };
}

/**
 * Where unit u lives in one probe's row of T (per-sample dims `dims`, C order): values start + k·step, k < count.
 * dense [H]: one value · conv [C, H, W]: its whole H×W map · sequence [T, H]: every one of the T positions · flat: one value.
 */
export function unitSlice(kind: 'dense' | 'conv' | 'sequence' | 'flat', dims: number[], unit: number): { start: number; step: number; count: number } {
  if (kind === 'conv') return { start: unit * dims[1] * dims[2], step: 1, count: dims[1] * dims[2] };
  if (kind === 'sequence') return { start: unit, step: dims[1], count: dims[0] };
  return { start: unit, step: 1, count: 1 };
}
