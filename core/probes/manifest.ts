/** manifest.json: the one file that says what a probe-set folder holds. */
import fs from 'node:fs';
import { z } from 'zod';
import { decodeUtf8Strict } from './csv.ts';
import { probesError } from './fail.ts';

const fileName = z.string().min(1, 'must name a file in the probe-set folder');

const preprocessSchema = z.object({
  input: z.string().min(1),
  size: z.tuple([z.number().int().positive().max(8192), z.number().int().positive().max(8192)]),
  scale: z.number().positive().default(255),
  mean: z.array(z.number()).optional(),
  std: z.array(z.number().positive()).optional(),
  channels: z.enum(['rgb', 'bgr', 'gray']).default('rgb'),
  layout: z.enum(['nchw', 'nhwc']).default('nchw'),
}).strict();

export const manifestSchema = z.object({
  name: z.string().min(1),
  inputs: z.record(z.string().min(1), fileName).default({}),
  labels: fileName,
  concepts: fileName.optional(),
  examples: fileName.optional(),
  fill: z.record(z.string().min(1), z.number()).default({}),
  relatedness: fileName.optional(),
  preprocess: preprocessSchema.optional(),
}).strict();

export type Manifest = z.infer<typeof manifestSchema>;
export type PreprocessSpec = z.infer<typeof preprocessSchema>;

const FIELD_HINTS: Record<string, string> = {
  name: '"name" is a non-empty string naming the probe set',
  inputs: '"inputs" maps each model input name to an .npy file, e.g. {"pixels": "x.npy"}',
  labels: '"labels" names the labels CSV, e.g. "labels.csv"',
  concepts: '"concepts" names the concepts CSV, e.g. "concepts.csv"',
  examples: '"examples" names the examples CSV, e.g. "examples.csv"',
  fill: '"fill" maps model input names to a constant number, e.g. {"attention_mask": 1}',
  relatedness: '"relatedness" names a CSV with columns label_a,label_b,similarity',
  preprocess: '"preprocess" is {"input", "size": [H, W], "scale", "mean", "std", "channels": "rgb"|"bgr"|"gray", "layout": "nchw"|"nhwc"}',
};

/** Read, parse and schema-check manifest.json; returns the parsed manifest and the exact bytes read. */
export function readManifest(file: string): { manifest: Manifest; bytes: Buffer } {
  let bytes: Buffer;
  try {
    bytes = fs.readFileSync(file);
  } catch {
    throw probesError(file, undefined, 'The folder has no readable manifest.json; a probe set is a folder with a manifest.json naming its inputs and labels');
  }
  const text = decodeUtf8Strict(bytes, file);
  let json: unknown;
  try {
    json = JSON.parse(text);
  } catch (e) {
    const message = (e as Error).message;
    const at = /position (\d+)/.exec(message);
    const line = at ? text.slice(0, Number(at[1])).split('\n').length : undefined;
    throw probesError(file, line ? `line ${line}` : undefined, `manifest.json is not valid JSON (${message}); fix the syntax`);
  }
  const parsed = manifestSchema.safeParse(json);
  if (!parsed.success) {
    const issue = parsed.error.issues[0];
    if (issue.code === 'unrecognized_keys') {
      const where = [...issue.path, ...issue.keys.slice(0, 1)].join('.');
      throw probesError(file, where,
        `manifest.json has unknown field${issue.keys.length > 1 ? 's' : ''} ${issue.keys.map((k) => `"${k}"`).join(', ')}${issue.path.length ? ` in "${issue.path.join('.')}"` : ''}; check the spelling (fields: ${Object.keys(issue.path.length ? preprocessSchema.shape : manifestSchema.shape).join(', ')})`);
    }
    const where = issue.path.length ? issue.path.join('.') : 'manifest';
    const hint = FIELD_HINTS[String(issue.path[0])] ?? 'the manifest is a JSON object with "name", "inputs" and "labels"';
    throw probesError(file, where, `manifest.json field "${where}" is invalid (${issue.message}); ${hint}`);
  }
  return { manifest: parsed.data, bytes };
}
