/** Reading an .onnx file: decode, sanity checks, external data, fingerprint. */
import { createHash } from 'node:crypto';
import { existsSync, readFileSync, statSync } from 'node:fs';
import { dirname, isAbsolute, join, normalize, sep } from 'node:path';
import { SkeinError } from '../errors.ts';
import { subgraphsOf, toNum, valueInfoOf } from './graph.ts';
import { onnx, type OnnxProto } from './proto.ts';
import { listTensors } from './tensors.ts';
import type { ModelInfo } from './types.ts';

/** Highest ONNX IR version we treat as plausible; real files are 3..11, random bytes land anywhere. */
const MAX_PLAUSIBLE_IR_VERSION = 64;

function modelError(file: string | undefined, message: string, where?: string): SkeinError {
  return new SkeinError({ code: 'model', message, file, where });
}

/** ModelProto's top-level fields and their protobuf wire types (onnx.proto: 0 = varint, 2 = length-delimited). */
const MODEL_FIELDS: Record<number, number> = { 1: 0, 2: 2, 3: 2, 4: 2, 5: 0, 6: 2, 7: 2, 8: 2, 14: 2, 20: 2, 25: 2 };

/**
 * Walk the top-level fields without decoding them (protobuf encoding: tag varint = field << 3 | wire type).
 * 'onnx-prefix': every field is a ModelProto field, ir_version among them, and the last one runs past the
 * end; 'onnx': all fields well formed; 'foreign': a field no ModelProto has.
 */
export function topLevelShape(bytes: Uint8Array): 'onnx' | 'onnx-prefix' | 'foreign' {
  let pos = 0;
  let sawIrVersion = false;
  const varint = (): number | null => {
    let value = 0;
    for (let shift = 0; shift < 70; shift += 7) {
      if (pos >= bytes.length) return null;
      const b = bytes[pos++];
      value += (b & 0x7f) * 2 ** shift;
      if ((b & 0x80) === 0) return value;
    }
    return null;
  };
  const ended = () => (sawIrVersion ? 'onnx-prefix' : 'foreign');
  while (pos < bytes.length) {
    const tag = varint();
    if (tag === null) return ended();
    const field = Math.floor(tag / 8);
    const wire = tag % 8;
    if (MODEL_FIELDS[field] !== wire) return 'foreign';
    if (field === 1) sawIrVersion = true;
    const value = varint();
    if (value === null) return ended();
    if (wire === 2) {
      if (pos + value > bytes.length) return ended();
      pos += value;
    }
  }
  return 'onnx';
}

/**
 * Decode model bytes into a ModelProto, turning every way a file can be wrong into a SkeinError.
 * `file` is only used in messages.
 */
export function decodeModel(bytes: Uint8Array, file?: string): OnnxProto.ModelProto {
  const notOnnx = () => modelError(file, 'This file is not an ONNX model. Choose the .onnx file exported from your training framework.');
  const truncated = () => modelError(file, 'The model file ends early: it looks truncated (an interrupted copy or download). Export or copy it again.', `byte ${bytes.length}`);
  const shape = topLevelShape(bytes);
  if (shape === 'foreign') throw notOnnx();
  if (shape === 'onnx-prefix') throw truncated();
  let model: OnnxProto.ModelProto;
  try {
    model = onnx.ModelProto.decode(bytes);
  } catch (e) {
    const detail = e instanceof Error ? e.message : String(e);
    throw modelError(file, `The ONNX file is damaged inside (${detail}). Export or copy the model again.`);
  }
  const irVersion = toNum(model.irVersion);
  if (irVersion <= 0 || irVersion > MAX_PLAUSIBLE_IR_VERSION) throw notOnnx();
  if (!model.graph) {
    throw modelError(file, 'The ONNX file holds no graph: it may be truncated or hold only metadata. Export the model again.', 'graph');
  }
  if ((model.graph.node ?? []).length === 0) {
    throw modelError(file, 'The ONNX graph has no nodes, so there are no hidden tensors to study. Check that you exported the full model.', 'graph.node');
  }
  const blank = (model.graph.node ?? []).findIndex((n) => !n.opType);
  if (blank >= 0) {
    throw modelError(file, `The ONNX file is damaged inside: node ${blank + 1} of the graph has no operator type. Export or copy the model again.`, `graph.node[${blank}]`);
  }
  return model;
}

export interface ExternalDataRef {
  /** Initializer name. */
  tensor: string;
  /** Absolute path of the data file. */
  path: string;
  /** The `location` as written in the model. */
  location: string;
  offset: number;
  /** Byte length, or null when the model says "to the end of the file". */
  length: number | null;
}

function* allInitializers(graph: OnnxProto.IGraphProto): Generator<OnnxProto.ITensorProto> {
  yield* graph.initializer ?? [];
  for (const node of graph.node ?? []) for (const s of subgraphsOf(node)) yield* allInitializers(s.graph);
}

/**
 * Every initializer stored outside the .onnx file, resolved against the model's folder and checked:
 * the file must exist, stay inside that folder, and be long enough for offset + length.
 */
export function externalDataRefs(model: OnnxProto.IModelProto, modelPath: string): ExternalDataRef[] {
  const folder = dirname(modelPath);
  const refs: ExternalDataRef[] = [];
  for (const t of allInitializers(model.graph ?? {})) {
    if (t.dataLocation !== onnx.TensorProto.DataLocation.EXTERNAL) continue;
    const entry = (key: string) => (t.externalData ?? []).find((e) => e.key === key)?.value ?? undefined;
    const name = t.name ?? '';
    const where = `graph.initializer[${name}].external_data`;
    const location = entry('location');
    if (!location) throw modelError(modelPath, `Initializer "${name}" is marked as external data but names no file. Export the model again.`, where);
    const resolved = normalize(join(folder, location));
    if (isAbsolute(location) || !(resolved === folder || resolved.startsWith(folder + sep))) {
      throw modelError(modelPath, `Initializer "${name}" points to data outside the model's folder ("${location}"); Skein only reads data files next to the model. Re-export with relative external data.`, where);
    }
    if (!existsSync(resolved) || !statSync(resolved).isFile()) {
      throw modelError(modelPath, `The weights of "${name}" are kept in a separate file "${location}" that is missing. Copy it into the model's folder (${folder}) next to the .onnx file.`, `${where}.location`);
    }
    const offset = Number(entry('offset') ?? 0);
    const lengthText = entry('length');
    const length = lengthText === undefined ? null : Number(lengthText);
    const size = statSync(resolved).size;
    if (offset + (length ?? 0) > size) {
      throw modelError(resolved, `The external data file is shorter than the model expects for "${name}" (needs ${offset + (length ?? 0)} bytes, has ${size}): it looks truncated. Copy it again.`, `offset ${offset}`);
    }
    refs.push({ tensor: name, path: resolved, location, offset, length });
  }
  return refs;
}

/** Read and check an .onnx file; describe its inputs, outputs and capturable tensors. */
export function readModel(path: string): ModelInfo {
  if (!existsSync(path)) {
    throw modelError(path, 'The model file does not exist. Check the path, or choose the .onnx file again.');
  }
  if (!statSync(path).isFile()) {
    throw modelError(path, 'This path is a folder, not a model file. Choose the .onnx file inside it.');
  }
  const bytes = readFileSync(path);
  const model = decodeModel(bytes, path);
  const refs = externalDataRefs(model, path);

  const hash = createHash('sha256').update(bytes);
  let total = bytes.length;
  const externalFiles = [...new Set(refs.map((r) => r.path))];
  for (const file of externalFiles) {
    const data = readFileSync(file);
    hash.update(data);
    total += data.length;
  }

  const graph = model.graph!;
  const initializerNames = new Set((graph.initializer ?? []).map((t) => t.name));
  const defaultOpset = (model.opsetImport ?? []).find((o) => !o.domain || o.domain === 'ai.onnx');
  const producer = [model.producerName, model.producerVersion].filter(Boolean).join(' ');
  return {
    path,
    fingerprint: hash.digest('hex'),
    bytes: total,
    opsetVersion: defaultOpset ? toNum(defaultOpset.version) : null,
    producer,
    inputs: (graph.input ?? []).filter((v) => !initializerNames.has(v.name ?? '')).map(valueInfoOf),
    outputs: (graph.output ?? []).map(valueInfoOf),
    tensors: listTensors(graph),
    externalData: externalFiles,
  };
}
