/** Requests of the file browser (browser mode) and the demo. */
import { z } from 'zod';
import { filePath } from './fields.ts';

export const fileRequests = {
  /** Absolute paths of the demo model, probe set and the study it goes into (in the user's data folder). */
  'app.demo': z.strictObject({}),
  /** The folders the file browser may show (browser mode: exactly the allowed roots). */
  'fs.roots': z.strictObject({}),
  /** One folder's entries, folders first; dot files only when asked. */
  'fs.list': z.strictObject({ dir: filePath, hidden: z.boolean().optional() }),
  /** A consistent copy of a study under a new name (File ▸ Save study as…); the original stays as it is. */
  'study.saveAs': z.strictObject({ study: filePath, out: filePath }),
} satisfies Record<string, z.ZodType>;
