/**
 * onnx-proto is CommonJS without statically detectable named exports: `import { onnx }` works under
 * vitest but fails under plain Node ESM (tsx), so take the default export and re-export the namespace.
 */
import onnxModule from 'onnx-proto';

export const onnx = onnxModule.onnx;
export type { onnx as OnnxProto } from 'onnx-proto';
