/** What core/probes tells the rest of Skein about a probe-set folder. */
import type { ValueInfo } from '../model/types.ts';

export type NpyDType = 'float32' | 'float16' | 'float64' | 'int64' | 'int32' | 'uint8' | 'bool';

/** A per-probe input: the first axis is the probe index; rows are read on demand (never all at once). */
export interface InputSource {
  /** Model input name this source feeds. */
  name: string;
  /** File it comes from (absolute path), or the examples.csv for image-built inputs. */
  file: string;
  /** dtype of the values returned by readRows (npy dtype, or float32 for image-built inputs). */
  dtype: NpyDType;
  /** Shape of one probe (the full shape without the first axis). */
  rowShape: number[];
  /** Where the values come from: an .npy named in manifest "inputs", or images built per manifest "preprocess". */
  origin?: 'npy' | 'images';
  /**
   * Rows [start, start+count) as one C-order typed array of count*prod(rowShape) values.
   * float16 is widened to Float32Array; bool becomes Uint8Array; int64 is BigInt64Array.
   */
  readRows(start: number, count: number): Float32Array | Float64Array | Int32Array | BigInt64Array | Uint8Array;
}

export interface ConceptRow { label: string; group: string; parent?: string; description?: string }

export interface ExampleRow {
  probe: number;
  id?: string;
  text?: string;
  /** Path relative to the probe-set folder, already checked to stay inside it. */
  image?: string;
}

export interface ProbeSet {
  /** Absolute folder path. */
  dir: string;
  name: string;
  /** SHA-256 (hex) over manifest.json and every file it references, in a fixed order. */
  fingerprint: string;
  /** N, the number of probes. */
  count: number;
  inputs: InputSource[];
  /** Constant fill values for model inputs the probe set does not provide. */
  fill: Record<string, number>;
  /** Distinct label names, sorted; a label's index in this array is its id. */
  labels: string[];
  /** Labels per probe in CSR form: ids of probe i are labelIds[labelOffsets[i] .. labelOffsets[i+1]). */
  labelOffsets: Int32Array; // length count+1
  labelIds: Int32Array;
  concepts: ConceptRow[] | null;
  examples: ExampleRow[] | null;
  /** Optional user override of label relatedness: rows label_a,label_b,similarity in [0,1]. */
  relatedness: { a: string; b: string; similarity: number }[] | null;
  /** Non-fatal notes for the user (e.g. "3 labels occur on fewer than 5 probes"). */
  warnings: string[];
}

/** A model input as checkAgainstModel needs it (core/model's ValueInfo fits). */
export type ModelInputSpec = Pick<ValueInfo, 'name' | 'elemType' | 'dims'>;
