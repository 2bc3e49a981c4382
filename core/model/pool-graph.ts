/**
 * Pooling inside the graph: for each captured tensor, nodes appended to the model turn the batch's tensor into
 * per-unit values (and, for conv and sequence units, the location of the maximum), unit-major [units, batch], so
 * onnxruntime hands back only what the study stores instead of whole feature maps.
 *
 * Per layer kind (per-sample dims after the batch axis; core/model/layout.ts):
 *   dense [H]          Transpose → [H, B]
 *   conv [C, H, W]     Reshape [B, C, H·W]; ReduceMax / ArgMax over axis 2 (mean: Cast to float64, ReduceSum,
 *                      Div by H·W, Cast to float32); Transpose → [C, B]. "last" means max over space.
 *   sequence [T, H]    ReduceMax / ArgMax over axis 1 (mean as above over T; last: Gather index T−1); → [H, B]
 *   flat (other ranks) Reshape [B, −1]; Transpose → [units, B]
 * float16 tensors are cast to float32 first (exact); float64 ones are reduced in float64 and cast at the end, the
 * order core/extract/pool.ts rounds in. ArgMax keeps the first maximum (select_last_index = 0, the default), as the
 * JavaScript pooling did, and is cast to int32. Operator forms follow the model's default-domain opset (ONNX
 * operator specification: ReduceMax/ReduceMean axes become an input at 18, ReduceSum at 13; negative Gather
 * indices from 11), so the appended nodes need opset ≥ 11; `canPoolInGraph` says when they can be used.
 *
 * The captured tensor itself stays a graph output too, so onnxruntime's fusions treat it exactly as when it was
 * exposed alone (a fusion never swallows a node whose output is a graph output): the values pooled here are the
 * values core/extract/pool.ts pooled from the exposed tensor (test/model/pool-graph.test.ts checks them bit for bit).
 */
import { SkeinError } from '../errors.ts';
import { toNum } from './graph.ts';
import { onnx, type OnnxProto } from './proto.ts';
import { decodeModel } from './read.ts';
import { exposeInGraph, finishExposed } from './session.ts';
import type { ElemType } from './types.ts';

export type GraphPool = 'max' | 'mean' | 'last';

export interface PoolPlan {
  /** The captured tensor's name. */
  name: string;
  kind: 'dense' | 'conv' | 'sequence' | 'flat';
  /** Per-sample dims (after the batch axis), as the dry run measured them. */
  dims: number[];
  pool: GraphPool;
}

export interface PooledOutputs {
  /** float32 [units, batch]. */
  values: string;
  /** int32 [units, batch] flat spatial/time index of the maximum; null for dense and flat layers. */
  argmax: string | null;
  /** Sequence layers pooled with "last": every location is T − 1 and nothing is computed for it. */
  constantArgmax: number | null;
}

export const MIN_POOL_OPSET = 11;

/** True when the model's default-domain opset has every operator form the pooling nodes use. */
export function canPoolInGraph(opsetVersion: number | null): boolean {
  return opsetVersion !== null && opsetVersion >= MIN_POOL_OPSET;
}

const T = onnx.TensorProto.DataType;
const A = onnx.AttributeProto.AttributeType;

/**
 * The model with every planned tensor exposed and pooled (see the header). `modelPath` is needed when the model keeps
 * weights in external-data files.
 */
export function exposePooled(modelBytes: Uint8Array, plans: PoolPlan[], opts: { modelPath?: string } = {}): { bytes: Uint8Array; outputs: Map<string, PooledOutputs> } {
  const file = opts.modelPath;
  const model = decodeModel(modelBytes, file);
  const opset = defaultOpset(model);
  if (!canPoolInGraph(opset)) {
    throw new SkeinError({ code: 'model', file, message: `Pooling inside the graph needs ONNX opset ${MIN_POOL_OPSET} or later (this model declares ${opset ?? 'none'}).` });
  }
  const graph = model.graph!;
  const types = exposeInGraph(graph, plans.map((p) => p.name), file);
  const b = new Builder(graph, opset!);
  const outputs = new Map<string, PooledOutputs>();
  for (const plan of plans) outputs.set(plan.name, b.pool(plan, types.get(plan.name)!));
  return { bytes: finishExposed(model, file), outputs };
}

function defaultOpset(model: OnnxProto.IModelProto): number | null {
  const entry = (model.opsetImport ?? []).find((o) => !o.domain || o.domain === 'ai.onnx');
  return entry ? toNum(entry.version) : null;
}

/** Appends nodes, initializers and outputs under names that cannot clash with the model's own. */
class Builder {
  private readonly taken: Set<string>;
  private constants = new Map<string, string>();
  constructor(private readonly graph: OnnxProto.IGraphProto, private readonly opset: number) {
    this.taken = new Set<string>([
      ...(graph.input ?? []).map((v) => v.name ?? ''),
      ...(graph.output ?? []).map((v) => v.name ?? ''),
      ...(graph.initializer ?? []).map((t) => t.name ?? ''),
      ...(graph.node ?? []).flatMap((n) => [...(n.output ?? []), n.name ?? '']),
    ]);
    graph.node = [...(graph.node ?? [])];
    graph.initializer = [...(graph.initializer ?? [])];
  }

  private fresh(base: string): string {
    let name = `skein_pool/${base}`;
    for (let k = 2; this.taken.has(name); k++) name = `skein_pool/${base}#${k}`;
    this.taken.add(name);
    return name;
  }

  private node(op: string, inputs: string[], base: string, attributes: OnnxProto.IAttributeProto[] = []): string {
    const out = this.fresh(base);
    this.graph.node!.push({ opType: op, name: out, input: inputs, output: [out], domain: '', attribute: attributes });
    return out;
  }

  private int64s(values: number[], scalar = false): string {
    const key = `i64:${scalar}:${values.join(',')}`;
    const known = this.constants.get(key);
    if (known) return known;
    const raw = new Uint8Array(values.length * 8);
    const view = new DataView(raw.buffer);
    values.forEach((v, k) => view.setBigInt64(k * 8, BigInt(v), true));
    const name = this.fresh(`const_${values.join('_')}`);
    this.graph.initializer!.push({ name, dims: scalar ? [] : [values.length], dataType: T.INT64, rawData: raw });
    this.constants.set(key, name);
    return name;
  }

  private float64(value: number): string {
    const key = `f64:${value}`;
    const known = this.constants.get(key);
    if (known) return known;
    const raw = new Uint8Array(8);
    new DataView(raw.buffer).setFloat64(0, value, true);
    const name = this.fresh(`const_f64_${value}`);
    this.graph.initializer!.push({ name, dims: [], dataType: T.DOUBLE, rawData: raw });
    this.constants.set(key, name);
    return name;
  }

  private output(name: string, elemType: number): void {
    this.graph.output!.push({ name, type: { tensorType: { elemType } } });
  }

  private cast(input: string, to: number, base: string): string {
    return this.node('Cast', [input], base, [{ name: 'to', type: A.INT, i: to }]);
  }

  /** ReduceMax / ReduceMean / ReduceSum over one axis without keeping it, in the form the opset defines. */
  private reduce(op: 'ReduceMax' | 'ReduceSum', input: string, axis: number, base: string): string {
    const axesAsInput = op === 'ReduceSum' ? this.opset >= 13 : this.opset >= 18;
    const keep = { name: 'keepdims', type: A.INT, i: 0 };
    return axesAsInput
      ? this.node(op, [input, this.int64s([axis])], base, [keep])
      : this.node(op, [input], base, [{ name: 'axes', type: A.INTS, ints: [axis] }, keep]);
  }

  private transpose(input: string, base: string): string {
    return this.node('Transpose', [input], base, [{ name: 'perm', type: A.INTS, ints: [1, 0] }]);
  }

  pool(plan: PoolPlan, elemType: ElemType): PooledOutputs {
    const tag = plan.name;
    let x = plan.name;
    if (elemType === 'float16') x = this.cast(x, T.FLOAT, `${tag}/float32`);
    else if (elemType !== 'float32' && elemType !== 'float64') {
      throw new SkeinError({ code: 'model', where: `tensor ${plan.name}`, message: `Tensor "${plan.name}" has element type ${elemType}; Skein captures floating-point tensors only.` });
    }
    const toFloat32 = (t: string, base: string) => (elemType === 'float64' ? this.cast(t, T.FLOAT, base) : t);
    let values: string;
    let argmax: string | null = null;
    let constantArgmax: number | null = null;
    if (plan.kind === 'dense' || plan.kind === 'flat') {
      const flat = plan.kind === 'flat' ? this.node('Reshape', [x, this.int64s([0, -1])], `${tag}/flat`) : x;
      values = this.transpose(toFloat32(flat, `${tag}/float32`), `${tag}/values`);
    } else {
      const axis = plan.kind === 'conv' ? 2 : 1;
      const area = plan.kind === 'conv' ? plan.dims[1] * plan.dims[2] : plan.dims[0];
      const src = plan.kind === 'conv' ? this.node('Reshape', [x, this.int64s([0, 0, -1])], `${tag}/flat`) : x;
      let pooled: string;
      if (plan.kind === 'sequence' && plan.pool === 'last') {
        pooled = toFloat32(this.node('Gather', [src, this.int64s([-1], true)], `${tag}/last`, [{ name: 'axis', type: A.INT, i: 1 }]), `${tag}/float32`);
        constantArgmax = plan.dims[0] - 1;
      } else if (plan.pool === 'mean') {
        // Summed in float64 and divided there, as core/extract/pool.ts does, then rounded once to float32.
        const wide = elemType === 'float64' ? src : this.cast(src, T.DOUBLE, `${tag}/float64`);
        const sum = this.reduce('ReduceSum', wide, axis, `${tag}/sum`);
        pooled = this.cast(this.node('Div', [sum, this.float64(area)], `${tag}/mean`), T.FLOAT, `${tag}/mean32`);
      } else {
        pooled = toFloat32(this.reduce('ReduceMax', src, axis, `${tag}/max`), `${tag}/max32`);
      }
      values = this.transpose(pooled, `${tag}/values`);
      if (constantArgmax === null) {
        const at = this.node('ArgMax', [src], `${tag}/argmax64`, [{ name: 'axis', type: A.INT, i: axis }, { name: 'keepdims', type: A.INT, i: 0 }]);
        argmax = this.transpose(this.cast(at, T.INT32, `${tag}/argmax32`), `${tag}/argmax`);
        this.output(argmax, T.INT32);
      }
    }
    this.output(values, T.FLOAT);
    return { values, argmax, constantArgmax };
  }
}
