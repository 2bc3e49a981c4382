/** The trained demo classifier as an ONNX graph, with readable node and tensor names. */
import { buildModel, type GraphSpec } from '../../core/model/writer';
import { flatSize, type NetParams } from './net';
import { CONCEPT_COUNT, TILE_CHANNELS, TILE_SIZE } from './scene';

export const MODEL_INPUT = 'tile';
export const MODEL_OUTPUT = 'attributes';

function f32(values: Float64Array): Float32Array {
  return Float32Array.from(values);
}

export function tilesGraph(p: NetParams): GraphSpec {
  const { convChannels: C, narrow, wide } = p.shape;
  return {
    name: 'tiles-classifier',
    opset: 17,
    inputs: [{ name: MODEL_INPUT, elemType: 'float32', dims: ['batch', TILE_CHANNELS, TILE_SIZE, TILE_SIZE] }],
    outputs: [{ name: MODEL_OUTPUT, elemType: 'float32', dims: ['batch', CONCEPT_COUNT] }],
    initializers: [
      { name: 'conv1.weight', dims: [C, TILE_CHANNELS, 3, 3], data: f32(p.conv1W) },
      { name: 'conv1.bias', dims: [C], data: f32(p.conv1B) },
      { name: 'narrow.weight', dims: [narrow, flatSize(p.shape)], data: f32(p.narrowW) },
      { name: 'narrow.bias', dims: [narrow], data: f32(p.narrowB) },
      { name: 'wide.weight', dims: [wide, narrow], data: f32(p.wideW) },
      { name: 'wide.bias', dims: [wide], data: f32(p.wideB) },
      { name: 'head.weight', dims: [CONCEPT_COUNT, wide], data: f32(p.headW) },
      { name: 'head.bias', dims: [CONCEPT_COUNT], data: f32(p.headB) },
    ],
    nodes: [
      {
        op: 'Conv', name: 'conv1', inputs: [MODEL_INPUT, 'conv1.weight', 'conv1.bias'], outputs: ['conv1'],
        attributes: { kernel_shape: { ints: [3, 3] }, pads: { ints: [1, 1, 1, 1] }, strides: { ints: [1, 1] } },
      },
      { op: 'Relu', name: 'relu_conv1', inputs: ['conv1'], outputs: ['relu_conv1'] },
      {
        op: 'MaxPool', name: 'pool1', inputs: ['relu_conv1'], outputs: ['pool1'],
        attributes: { kernel_shape: { ints: [2, 2] }, strides: { ints: [2, 2] } },
      },
      { op: 'Flatten', name: 'flatten', inputs: ['pool1'], outputs: ['flatten'], attributes: { axis: { i: 1 } } },
      { op: 'Gemm', name: 'narrow', inputs: ['flatten', 'narrow.weight', 'narrow.bias'], outputs: ['narrow'], attributes: { transB: { i: 1 } } },
      { op: 'Relu', name: 'relu_narrow', inputs: ['narrow'], outputs: ['relu_narrow'] },
      { op: 'Gemm', name: 'wide', inputs: ['relu_narrow', 'wide.weight', 'wide.bias'], outputs: ['wide'], attributes: { transB: { i: 1 } } },
      { op: 'Relu', name: 'relu_wide', inputs: ['wide'], outputs: ['relu_wide'] },
      { op: 'Gemm', name: 'head', inputs: ['relu_wide', 'head.weight', 'head.bias'], outputs: ['head'], attributes: { transB: { i: 1 } } },
      { op: 'Sigmoid', name: 'sigmoid_head', inputs: ['head'], outputs: [MODEL_OUTPUT] },
    ],
  };
}

export function encodeTilesModel(p: NetParams): Uint8Array {
  return buildModel(tilesGraph(p));
}
