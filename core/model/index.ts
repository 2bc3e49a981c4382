/** core/model: read ONNX, list capturable tensors, rewrite the graph to expose them, run it on CPU. */
export type { CapturableTensor, Dim, ElemType, ModelInfo, ValueInfo } from './types.ts';
export { readModel, decodeModel } from './read.ts';
export { exposeTensors, createSession, dryRunShapes, inlineExternalData, type SessionOptions } from './session.ts';
export { unitLayout, batchPolicy, type UnitLayout } from './layout.ts';
export { listTensors, SUBGRAPH_REASON, BFLOAT16_REASON, ACTIVATION_OPS } from './tensors.ts';
