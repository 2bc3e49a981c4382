/** What core/model tells the rest of Skein about an ONNX file. */

/** ONNX TensorProto.DataType names Skein understands (a subset of the ONNX enum). */
export type ElemType =
  | 'float32' | 'float16' | 'float64' | 'bfloat16'
  | 'int8' | 'uint8' | 'int16' | 'uint16' | 'int32' | 'uint32' | 'int64' | 'uint64'
  | 'bool' | 'string' | 'other';

/** A dimension as the graph states it: a number, a symbolic name ("batch"), or unknown (null). */
export type Dim = number | string | null;

export interface ValueInfo {
  name: string;
  elemType: ElemType;
  dims: Dim[] | null; // null: the graph gives no shape
}

export interface CapturableTensor {
  /** Tensor name in the graph (the node output name). */
  name: string;
  /** Op type of the producing node, e.g. "Relu". */
  op: string;
  /** Name of the producing node ("" when the node has none). */
  node: string;
  elemType: ElemType;
  /** Shape from the graph (value_info / inference), symbolic dims kept; null when unknown. */
  dims: Dim[] | null;
  /** False for tensors that cannot be exposed (inside If/Loop/Scan, non-float, ...). */
  capturable: boolean;
  /** Why it cannot be captured, when capturable is false. */
  reason?: string;
  /** Selected when the user names no layers (activation outputs; Gemm/MatMul/Conv not followed by one). */
  isDefault: boolean;
}

export interface ModelInfo {
  path: string;
  /** SHA-256 (hex) of the file bytes (plus external-data files, in order, when present). */
  fingerprint: string;
  /** Bytes hashed into the fingerprint: the .onnx file plus its external-data files. */
  bytes: number;
  opsetVersion: number | null;
  producer: string;
  inputs: ValueInfo[];   // graph inputs that are not initializers
  outputs: ValueInfo[];
  /**
   * Every node output of floating type, capturable or not, in graph order; tensors inside an If/Loop/Scan
   * subgraph come right before the node that holds them and are never capturable.
   */
  tensors: CapturableTensor[];
  /** Absolute paths of external-data files the model's initializers live in (empty for self-contained files). */
  externalData?: string[];
}
