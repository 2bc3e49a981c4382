/** Does a probe set fit a model's inputs? Shapes and dtypes per input, and constants for the inputs it lacks. */
import path from 'node:path';
import type { Dim, ElemType } from '../model/types.ts';
import { formatShape, probesError } from './fail.ts';
import type { InputSource, ModelInputSpec, NpyDType, ProbeSet } from './types.ts';

/**
 * Which probe-set dtypes may feed which model input type. Widening casts, plus these chosen on purpose:
 * float64 → float32/float16 and float32 → float16 (rounding only), uint8 → float (values kept, not rescaled).
 * Integer model inputs need integer (or bool) arrays; nothing is cast from float to integer.
 */
export const ACCEPTED_DTYPES: Readonly<Partial<Record<ElemType, readonly NpyDType[]>>> = {
  float32: ['float32', 'float16', 'float64', 'uint8'],
  float16: ['float16', 'float32', 'float64'],
  float64: ['float64', 'float32', 'float16', 'int32', 'uint8'],
  int64: ['int64', 'int32', 'uint8', 'bool'],
  int32: ['int32', 'uint8', 'bool'],
  uint8: ['uint8', 'bool'],
  bool: ['bool'],
};

const NUMPY_NAME: Partial<Record<ElemType, string>> = {
  float32: 'float32', float16: 'float16', float64: 'float64', int64: 'int64', int32: 'int32', uint8: 'uint8', bool: 'bool_',
};

const FILLABLE: ReadonlySet<ElemType> = new Set<ElemType>([
  'float32', 'float16', 'float64', 'bfloat16', 'int8', 'uint8', 'int16', 'uint16', 'int32', 'uint32', 'int64', 'uint64', 'bool',
]);

/** Throws a SkeinError ('probes') when the probe set cannot feed the model; see resolveFillShapes. */
export function checkAgainstModel(probes: ProbeSet, modelInputs: ModelInputSpec[]): void {
  resolveFillShapes(probes, modelInputs);
}

/**
 * Check every model input against the probe set and return, for each input filled with a constant,
 * its per-probe shape (symbolic dims resolved from the inputs the probe set provides, e.g. "sequence").
 */
export function resolveFillShapes(probes: ProbeSet, modelInputs: ModelInputSpec[]): Record<string, number[]> {
  const manifestFile = path.join(probes.dir, 'manifest.json');
  const modelNames = modelInputs.map((m) => `"${m.name}"`).join(', ') || '(none)';
  const byName = new Map(modelInputs.map((m) => [m.name, m]));
  const sourceByName = new Map(probes.inputs.map((s) => [s.name, s]));

  for (const source of probes.inputs) {
    if (!byName.has(source.name)) {
      const at = locate(source, manifestFile);
      throw probesError(at.file, at.where, `The probe set gives input "${source.name}" but the model has no input of that name; rename it in manifest.json to one of: ${modelNames}`);
    }
  }
  for (const name of Object.keys(probes.fill)) {
    if (!byName.has(name)) {
      throw probesError(manifestFile, `fill.${name}`, `"fill" names "${name}" but the model has no input of that name; rename it to one of: ${modelNames}`);
    }
  }

  const symbolSizes = new Map<string, { size: number; input: string }>();
  for (const model of modelInputs) {
    const source = sourceByName.get(model.name);
    if (source) checkProvided(source, model, manifestFile, symbolSizes);
  }

  const fillShapes: Record<string, number[]> = {};
  for (const model of modelInputs) {
    if (sourceByName.has(model.name)) continue;
    if (!(model.name in probes.fill)) {
      throw probesError(manifestFile, 'fill',
        `Model input "${model.name}" is not in the probe set; add it to manifest.json "inputs" as an .npy file, or give it a constant in manifest "fill" (e.g. "fill": {"${model.name}": 0})`);
    }
    fillShapes[model.name] = fillShape(model, probes.fill[model.name], manifestFile, symbolSizes);
  }
  return fillShapes;
}

function locate(source: InputSource, manifestFile: string): { file: string; where: string } {
  return source.origin === 'images' ? { file: manifestFile, where: 'preprocess' } : { file: source.file, where: `inputs.${source.name}` };
}

function checkProvided(source: InputSource, model: ModelInputSpec, manifestFile: string, symbolSizes: Map<string, { size: number; input: string }>): void {
  const at = locate(source, manifestFile);
  const images = source.origin === 'images';
  const what = images ? '"preprocess"' : path.basename(source.file);
  const accepted = ACCEPTED_DTYPES[model.elemType] ?? [];
  if (!accepted.includes(source.dtype)) {
    const feeds = accepted.length > 0
      ? `Skein feeds a ${model.elemType} input from ${accepted.join(', ')} values`
      : `Skein cannot feed ${model.elemType} inputs`;
    const fix = images ? 'give this input as an .npy in "inputs" instead'
      : NUMPY_NAME[model.elemType] ? `re-save it with arr.astype(np.${NUMPY_NAME[model.elemType]})` : 'the model cannot be used as is';
    throw probesError(at.file, at.where, `${what} ${images ? 'builds' : 'holds'} ${source.dtype} values but model input "${model.name}" takes ${model.elemType}; ${feeds} — ${fix}`);
  }
  if (model.dims === null) return; // the graph states no shape: onnxruntime will judge
  const expected = model.dims.slice(1);
  const known = (d: Dim): d is number => typeof d === 'number' && d > 0;
  const fits = expected.length === source.rowShape.length && expected.every((d, i) => !known(d) || d === source.rowShape[i]);
  if (!fits) {
    const perProbe = formatShape(expected.map((d) => (known(d) ? d : typeof d === 'string' ? d : '?')));
    const fix = images ? 'set "size", "channels" and "layout" in manifest "preprocess" to match'
      : `re-save the array with shape ${formatShape(['N', ...expected.map((d) => (known(d) ? d : typeof d === 'string' ? d : '?'))])}`;
    throw probesError(at.file, at.where,
      `${what} gives each probe the shape ${formatShape(source.rowShape)} but model input "${model.name}" expects ${perProbe} per probe (model input shape ${formatShape(model.dims)}); ${fix}`);
  }
  expected.forEach((d, i) => {
    if (typeof d !== 'string') return;
    const size = source.rowShape[i];
    const seen = symbolSizes.get(d);
    if (seen && seen.size !== size) {
      throw probesError(at.file, at.where,
        `${what} makes dimension "${d}" of model input "${model.name}" ${size}, but input "${seen.input}" makes it ${seen.size}; the model needs them equal — re-save the arrays with matching sizes`);
    }
    symbolSizes.set(d, { size, input: model.name });
  });
}

function fillShape(model: ModelInputSpec, value: number, manifestFile: string, symbolSizes: Map<string, { size: number; input: string }>): number[] {
  const where = `fill.${model.name}`;
  if (!FILLABLE.has(model.elemType)) {
    throw probesError(manifestFile, where, `Model input "${model.name}" takes ${model.elemType} values, which cannot be a constant fill; provide it as an .npy in "inputs"`);
  }
  const integer = model.elemType.startsWith('int') || model.elemType.startsWith('uint') || model.elemType === 'bool';
  if (integer && !Number.isInteger(value)) {
    throw probesError(manifestFile, where, `Model input "${model.name}" takes ${model.elemType} values but its fill is ${value}; use a whole number`);
  }
  if (model.elemType === 'bool' && value !== 0 && value !== 1) {
    throw probesError(manifestFile, where, `Model input "${model.name}" takes bool values; its fill must be 0 or 1, not ${value}`);
  }
  if (model.elemType.startsWith('uint') && value < 0) {
    throw probesError(manifestFile, where, `Model input "${model.name}" takes ${model.elemType} values; its fill must not be negative (${value})`);
  }
  if (model.dims === null) {
    throw probesError(manifestFile, where, `The model states no shape for input "${model.name}", so Skein cannot build a constant for it; provide it as an .npy in "inputs"`);
  }
  return model.dims.slice(1).map((d) => {
    if (typeof d === 'number' && d > 0) return d;
    const size = typeof d === 'string' ? symbolSizes.get(d)?.size : undefined;
    if (size === undefined) {
      throw probesError(manifestFile, where,
        `Model input "${model.name}" has shape ${formatShape(model.dims!)} with a dimension ${typeof d === 'string' ? `"${d}" that no provided input fixes` : 'of unknown size'}, so a constant fill has no size; provide it as an .npy in "inputs"`);
    }
    return size;
  });
}
