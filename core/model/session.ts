/** Rewriting a model to expose hidden tensors, and running it on CPU with onnxruntime-node. */
import { readFileSync } from 'node:fs';
import * as ort from 'onnxruntime-node';
import { SkeinError } from '../errors.ts';
import { analyzeGraph, ELEM_CODES, subgraphsOf } from './graph.ts';
import { onnx, type OnnxProto } from './proto.ts';
import { decodeModel, externalDataRefs } from './read.ts';
import { BFLOAT16_REASON, SUBGRAPH_REASON } from './tensors.ts';
import type { ElemType, ModelInfo } from './types.ts';

/** Protobuf messages cannot exceed 2 GiB, so inlining external data is capped there. */
const MAX_INLINE_BYTES = 2 ** 31 - 1;

function namesInSubgraphs(graph: OnnxProto.IGraphProto, into = new Set<string>(), nested = false): Set<string> {
  for (const node of graph.node ?? []) {
    if (nested) for (const name of node.output ?? []) into.add(name);
    for (const s of subgraphsOf(node)) namesInSubgraphs(s.graph, into, true);
  }
  return into;
}

/**
 * onnxruntime refuses external data for a model given as bytes (it only resolves data files relative to a
 * model path), so the rewritten model carries its weights inline.
 */
export function inlineExternalData(model: OnnxProto.ModelProto, modelPath: string): void {
  const refs = externalDataRefs(model, modelPath);
  if (refs.length === 0) return;
  const byName = new Map(refs.map((r) => [r.tensor, r]));
  let total = 0;
  const visit = (graph: OnnxProto.IGraphProto) => {
    for (const t of graph.initializer ?? []) {
      const ref = t.dataLocation === onnx.TensorProto.DataLocation.EXTERNAL ? byName.get(t.name ?? '') : undefined;
      if (!ref) continue;
      const file = readFileSync(ref.path);
      const data = file.subarray(ref.offset, ref.length === null ? file.length : ref.offset + ref.length);
      total += data.length;
      if (total > MAX_INLINE_BYTES) {
        throw new SkeinError({
          code: 'model', file: modelPath, where: `graph.initializer[${t.name}]`,
          message: 'The model\'s weights exceed 2 GiB, more than Skein can hold in one rewritten model. Study a smaller model or a part of it.',
        });
      }
      t.rawData = new Uint8Array(data);
      t.dataLocation = onnx.TensorProto.DataLocation.DEFAULT;
      t.externalData = [];
    }
    for (const node of graph.node ?? []) for (const s of subgraphsOf(node)) visit(s.graph);
  };
  visit(model.graph!);
}

/**
 * Add the named tensors to graph.output (element type only, no shape) and keep the original outputs.
 * `modelPath` is needed when the model keeps weights in external-data files: they are read and inlined.
 */
export function exposeTensors(modelBytes: Uint8Array, names: string[], opts: { modelPath?: string } = {}): Uint8Array {
  const model = decodeModel(modelBytes, opts.modelPath);
  exposeInGraph(model.graph!, names, opts.modelPath);
  return finishExposed(model, opts.modelPath);
}

/**
 * Adds the named top-level tensors to graph.output (element type only, no shape), after checking each can be
 * captured; returns each name's element type. Shared by exposeTensors and exposePooled (pool-graph.ts).
 */
export function exposeInGraph(graph: OnnxProto.IGraphProto, names: string[], file?: string): Map<string, ElemType> {
  const scope = analyzeGraph(graph).scope;
  const topLevel = new Set((graph.node ?? []).flatMap((n) => n.output ?? []));
  const nested = namesInSubgraphs(graph);
  const outputs = new Set((graph.output ?? []).map((v) => v.name ?? ''));
  graph.output = [...(graph.output ?? [])];
  const types = new Map<string, ElemType>();

  for (const name of new Set(names)) {
    const where = `tensor ${name}`;
    if (outputs.has(name)) {
      types.set(name, scope.get(name)?.elemType ?? 'other');
      continue;
    }
    if (!topLevel.has(name)) {
      const message = nested.has(name)
        ? `Tensor "${name}" cannot be captured: it is ${SUBGRAPH_REASON}. Choose another tensor.`
        : `The model has no tensor named "${name}". Pick a name from the model's tensor list.`;
      throw new SkeinError({ code: 'model', file, where, message });
    }
    const elemType = scope.get(name)?.elemType;
    if (elemType === 'bfloat16') {
      throw new SkeinError({ code: 'model', file, where, message: `Tensor "${name}" cannot be captured: ${BFLOAT16_REASON}. Choose another tensor.` });
    }
    const code = elemType ? ELEM_CODES[elemType] : undefined;
    if (!elemType || !code) {
      throw new SkeinError({ code: 'model', file, where, message: `Skein cannot tell the element type of tensor "${name}", so it cannot capture it. Choose another tensor, or export the model with shape information (value_info).` });
    }
    graph.output.push({ name, type: { tensorType: { elemType: code } } });
    outputs.add(name);
    types.set(name, elemType);
  }
  return types;
}

/** Inlines external weights (onnxruntime cannot resolve them for a model given as bytes) and serializes. */
export function finishExposed(model: OnnxProto.ModelProto, file?: string): Uint8Array {
  if (file) inlineExternalData(model, file);
  else if (externalDataRefsPresent(model.graph!)) {
    throw new SkeinError({ code: 'model', where: 'graph.initializer', message: 'This model keeps weights in separate data files; open it from its file so Skein can find them.' });
  }
  return onnx.ModelProto.encode(model).finish();
}

function externalDataRefsPresent(graph: OnnxProto.IGraphProto): boolean {
  return (graph.initializer ?? []).some((t) => t.dataLocation === onnx.TensorProto.DataLocation.EXTERNAL) ||
    (graph.node ?? []).some((n) => subgraphsOf(n).some((s) => externalDataRefsPresent(s.graph)));
}

function allNodes(graph: OnnxProto.IGraphProto): OnnxProto.INodeProto[] {
  return (graph.node ?? []).flatMap((n) => [n, ...subgraphsOf(n).flatMap((s) => allNodes(s.graph))]);
}

/** Name the operators an onnxruntime load error complains about, matched against the model's own nodes. */
export function unsupportedOps(message: string, modelBytes: Uint8Array): { op: string; domain: string; node: string }[] {
  let nodes: OnnxProto.INodeProto[] = [];
  try {
    nodes = allNodes(onnx.ModelProto.decode(modelBytes).graph ?? {});
  } catch {
    return [];
  }
  const patterns = [
    /:(?<op>\w+)\(-?\d+\) is not a registered function\/op/g, // "com.example:Frobnicate(-1) is not a registered function/op"
    /No Op registered for (?<op>\w+)/g, // "No Op registered for Frobnicate with domain_version of 17"
    /Could not find an implementation for (?<op>\w+)/g, // "Could not find an implementation for X(13) node with name ..."
    /Unrecognized operator:? *(?<op>\w+)/g,
  ];
  const named = new Set<string>();
  for (const p of patterns) for (const m of message.matchAll(p)) if (m.groups?.op) named.add(m.groups.op);
  const found: { op: string; domain: string; node: string }[] = [];
  for (const node of nodes) {
    if (named.has(node.opType ?? '')) found.push({ op: node.opType ?? '', domain: node.domain ?? '', node: node.name ?? '' });
  }
  return found;
}

export interface SessionOptions {
  /** Threads for one operator; onnxruntime's default (all cores) when absent. */
  intraOpThreads?: number;
}

/**
 * An onnxruntime CPU session. graphOptimizationLevel 'all' keeps tensors listed in graph.output: onnxruntime's
 * fusions skip nodes whose output is a graph output (checked in test/model/session.test.ts).
 */
export async function createSession(modelBytes: Uint8Array, opts: SessionOptions = {}, file?: string): Promise<ort.InferenceSession> {
  try {
    return await ort.InferenceSession.create(modelBytes, {
      executionProviders: ['cpu'],
      graphOptimizationLevel: 'all',
      ...(opts.intraOpThreads ? { intraOpNumThreads: opts.intraOpThreads } : {}),
      interOpNumThreads: 1,
    });
  } catch (e) {
    const detail = e instanceof Error ? e.message : String(e);
    const ops = unsupportedOps(detail, modelBytes);
    if (ops.length > 0) {
      const list = [...new Set(ops.map((o) => (o.domain ? `${o.domain}:${o.op}` : o.op)))].join(', ');
      throw new SkeinError({
        code: 'model', file, where: `node ${ops[0].node || ops[0].op}`,
        message: `onnxruntime (CPU) cannot run operator ${list} used by this model. Re-export the model with standard ONNX operators (or register the custom op's library), then open it again.`,
      });
    }
    const plain = plainOrtMessage(detail);
    throw new SkeinError({ code: 'model', file, where: plain.where, message: plain.message, detail });
  }
}

/**
 * onnxruntime's load errors carry its source path, a C++ signature and an error-code prefix. Reduce one to a line a
 * user can act on, naming the op or opset; the caller keeps the original as `detail`.
 */
export function plainOrtMessage(detail: string): { message: string; where?: string } {
  const opset = /Opset (\d+) is under development[\s\S]*?support for domain (\S+) is till opset (\d+)/.exec(detail);
  if (opset) {
    return {
      where: 'opset_import',
      message: `The model declares opset ${opset[1]} for domain ${opset[2]}, and this onnxruntime supports up to opset ${opset[3]}. Re-export the model at opset ${opset[3]} or lower, then open it again.`,
    };
  }
  let text = detail.replace(/^\[ONNXRuntimeError\]\s*:\s*\d+\s*:\s*\w+\s*:\s*/, '');
  const source = /\S+\.(?:cc|cpp|h|hpp):\d+\s+/.exec(text);
  if (source) {
    // Drop "path:line", then the C++ signature up to the parenthesis that closes its parameter list.
    let i = text.indexOf('(', source.index + source[0].length);
    let depth = 0;
    for (; i >= 0 && i < text.length; i++) {
      if (text[i] === '(') depth++;
      else if (text[i] === ')' && --depth === 0) break;
    }
    text = (text.slice(0, source.index) + (i >= 0 && i < text.length ? text.slice(i + 1).replace(/^\s*const\b/, '') : '')).trim();
  }
  text = text.replace(/\s+/g, ' ').trim().replace(/[.\s]+$/, '');
  const node = /Node \(([^)]*)\) Op \(([^)]*)\)/.exec(text);
  return {
    where: node ? `node ${node[1] || node[2]}` : undefined,
    message: `onnxruntime could not load the model: ${text || 'no reason given'}. Check that the model opens in onnxruntime on CPU, or re-export it (skein --verbose shows onnxruntime's own message).`,
  };
}

/**
 * Concrete shapes (batch axis included) of the model outputs and exposed tensors after one run with `feeds`,
 * to fill symbolic dims. Keys are tensor names the session returns that ModelInfo lists or declares as outputs.
 */
export async function dryRunShapes(
  info: ModelInfo, session: ort.InferenceSession, feeds: Record<string, ort.Tensor>,
): Promise<Record<string, number[]>> {
  const known = new Set([...info.tensors.map((t) => t.name), ...info.outputs.map((o) => o.name)]);
  let results: ort.InferenceSession.ReturnType;
  try {
    results = await session.run(feeds);
  } catch (e) {
    throw new SkeinError({
      code: 'model', file: info.path,
      message: `The model failed on a probe: ${e instanceof Error ? e.message : String(e)}. Check that the probe set matches the model's input (${info.inputs.map((i) => `${i.name} ${i.elemType}[${(i.dims ?? []).join(',')}]`).join('; ')}).`,
    });
  }
  const shapes: Record<string, number[]> = {};
  for (const name of session.outputNames) {
    if (known.has(name) && results[name]) shapes[name] = [...results[name].dims];
  }
  return shapes;
}
