/**
 * targets.csv: what the model should output for some probes, so an ablation's cost is measured against the right
 * answer rather than as a plain change of output. Columns `probe,output,value`:
 *   probe   0-based probe index (as in labels.csv)
 *   output  the model output the row is about (blank: the model's first output); one output per file
 *   value   for an output with several values per probe: a 0-based class index (several rows per probe = several
 *           correct classes, e.g. a multi-label head); for an output with one value per probe: the target number.
 * Optional: without it, Skein measures the change of the model's outputs instead.
 */
import crypto from 'node:crypto';
import fs from 'node:fs';
import path from 'node:path';
import { readCsvTable } from '../probes/csv.ts';
import { parseProbeIndex } from '../probes/tables.ts';
import { probesError } from '../probes/fail.ts';

export const TARGETS_FILE = 'targets.csv';
const TARGET_COLUMNS = { required: ['probe', 'value'], optional: ['output'] } as const;

export interface Targets {
  file: string;
  /** SHA-256 of the file bytes, part of every cached ablation's key. */
  fingerprint: string;
  output: string;
  /** 'class': values are class indices into the output row; 'value': one target number per probe. */
  kind: 'class' | 'value';
  /** CSR over probes: targets of probe i are values[offsets[i] .. offsets[i+1]). */
  offsets: Int32Array;
  values: Float64Array;
}

/** Reads `<probesDir>/targets.csv` when present (null otherwise), checked against the model's outputs. */
export function readTargets(probesDir: string, probeCount: number, outputs: { name: string; size: number }[]): Targets | null {
  const file = path.join(probesDir, TARGETS_FILE);
  if (!fs.existsSync(file)) return null;
  const table = readCsvTable(file, TARGET_COLUMNS, []);
  const name = TARGETS_FILE;
  let output: string | null = null;
  const perProbe: number[][] = Array.from({ length: probeCount }, () => []);
  for (const row of table.rows) {
    const probe = parseProbeIndex(table, row, probeCount);
    const out = (row.values.output ?? '') || outputs[0].name;
    const spec = outputs.find((o) => o.name === out);
    if (!spec) throw probesError(file, `line ${row.line}`, `${name}: output "${out}" is not an output of the model (${outputs.map((o) => o.name).join(', ')}); name one of them or leave the cell blank for the first`);
    if (output !== null && out !== output) throw probesError(file, `line ${row.line}`, `${name}: rows name both "${output}" and "${out}"; one targets file describes one output`);
    output = out;
    const cell = row.values.value ?? '';
    const v = Number(cell);
    if (cell === '' || !Number.isFinite(v)) throw probesError(file, `line ${row.line}`, `${name}: value "${cell}" is not a number`);
    if (spec.size > 1 && (!Number.isInteger(v) || v < 0 || v >= spec.size)) {
      throw probesError(file, `line ${row.line}`, `${name}: value ${cell} is not a class index of output "${out}", which has ${spec.size} values per probe (0 to ${spec.size - 1})`);
    }
    perProbe[probe].push(v);
  }
  if (output === null) throw probesError(file, undefined, `${name} has no rows; add targets or delete the file`);
  const kind = outputs.find((o) => o.name === output)!.size > 1 ? 'class' : 'value';
  if (kind === 'value') {
    const twice = perProbe.findIndex((t) => t.length > 1);
    if (twice >= 0) throw probesError(file, `probe ${twice}`, `${name}: probe ${twice} has ${perProbe[twice].length} target values for a one-value output; give one`);
  }
  const offsets = new Int32Array(probeCount + 1);
  perProbe.forEach((t, i) => { offsets[i + 1] = offsets[i] + t.length; });
  return {
    file, fingerprint: crypto.createHash('sha256').update(table.bytes).digest('hex'), output, kind,
    offsets, values: Float64Array.from(perProbe.flat()),
  };
}
