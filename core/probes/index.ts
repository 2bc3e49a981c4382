/** core/probes: probe-set folders (manifest, .npy inputs, label CSVs, images) for the rest of Skein. */
export type { ConceptRow, ExampleRow, InputSource, ModelInputSpec, NpyDType, ProbeSet } from './types.ts';
export { openProbeSet } from './open.ts';
export { checkAgainstModel, resolveFillShapes, ACCEPTED_DTYPES } from './check.ts';
export {
  readNpyHeader, openNpy, encodeNpyHeader, writeNpyFloat32, float16BitsToNumber,
  type NpyHeader, type NpyFile, type NpyRows,
} from './npy.ts';
export { manifestSchema, type Manifest, type PreprocessSpec } from './manifest.ts';
export { FEW_PROBES_PER_LABEL } from './tables.ts';
export { readExampleImage, MAX_IMAGE_BYTES } from './example-image.ts';
