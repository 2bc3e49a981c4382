/**
 * A measured proposal for core/model + core/extract: pool conv feature maps inside the ONNX graph instead of in
 * JavaScript. For each exposed [B, C, H, W] tensor, Reshape → [B, C, H·W], then ReduceMax and ArgMax over the last
 * axis (ONNX operator specification, opset 13–17 forms), so onnxruntime returns [B, C] values and [B, C] locations
 * instead of the whole feature map. ArgMax keeps the first maximum (select_last_index = 0), as core/extract/pool.ts does.
 */
import { onnx } from '../../core/model/proto.ts';

export interface PooledOutputs {
  bytes: Uint8Array;
  /** Per captured tensor: the output names that carry it. */
  outputs: Map<string, { values: string; argmax: string | null }>;
}

/** `convs`: captured tensor → channel count; `dense`: captured tensors returned as they are. */
export function exposePooled(modelBytes: Uint8Array, convs: Map<string, number>, dense: string[]): PooledOutputs {
  const model = onnx.ModelProto.decode(modelBytes);
  const graph = model.graph!;
  const outputs = new Map<string, { values: string; argmax: string | null }>();
  const existing = new Set((graph.output ?? []).map((o) => o.name));
  const FLOAT = onnx.TensorProto.DataType.FLOAT;
  const INT64 = onnx.TensorProto.DataType.INT64;
  const addOutput = (name: string, elemType: number) => {
    if (existing.has(name)) return;
    graph.output!.push({ name, type: { tensorType: { elemType } } });
    existing.add(name);
  };
  for (const name of dense) {
    addOutput(name, FLOAT);
    outputs.set(name, { values: name, argmax: null });
  }
  for (const [name, channels] of convs) {
    const shape = `${name}__flat_shape`;
    const raw = new Uint8Array(24);
    const view = new DataView(raw.buffer);
    [0, channels, -1].forEach((v, i) => view.setBigInt64(i * 8, BigInt(v), true));
    graph.initializer!.push({ name: shape, dims: [3], dataType: INT64, rawData: raw });
    const T = onnx.AttributeProto.AttributeType;
    graph.node!.push(
      { opType: 'Reshape', name: `${name}__flat`, input: [name, shape], output: [`${name}__flat`] },
      { opType: 'ReduceMax', name: `${name}__max`, input: [`${name}__flat`], output: [`${name}__max`],
        attribute: [{ name: 'axes', type: T.INTS, ints: [2] }, { name: 'keepdims', type: T.INT, i: 0 }] },
      { opType: 'ArgMax', name: `${name}__argmax`, input: [`${name}__flat`], output: [`${name}__argmax`],
        attribute: [{ name: 'axis', type: T.INT, i: 2 }, { name: 'keepdims', type: T.INT, i: 0 }] },
    );
    addOutput(`${name}__max`, FLOAT);
    addOutput(`${name}__argmax`, INT64);
    outputs.set(name, { values: `${name}__max`, argmax: `${name}__argmax` });
  }
  return { bytes: onnx.ModelProto.encode(model).finish(), outputs };
}
