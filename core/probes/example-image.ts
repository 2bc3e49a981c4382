/** Reading one example image of a probe set for display, from inside the probe-set folder only. */
import fs from 'node:fs';
import path from 'node:path';
import { SkeinError } from '../errors.ts';
import { isInside } from '../fs/index.ts';

const IMAGE_TYPES: Record<string, string> = { '.png': 'image/png', '.jpg': 'image/jpeg', '.jpeg': 'image/jpeg', '.gif': 'image/gif', '.webp': 'image/webp', '.bmp': 'image/bmp' };
export const MAX_IMAGE_BYTES = 16 << 20;

/**
 * The image `image` (a path relative to `probesDir`) of probe `probe` as a data: URL; refuses any path leaving the
 * folder (through ".." or a link), a missing file, a type browsers cannot show, or a file above 16 MiB.
 */
export function readExampleImage(probesDir: string, image: string, probe: number): { dataUrl: string; mime: string; bytes: number } {
  const abs = path.resolve(probesDir, image);
  const where = `probe ${probe}`;
  const outside = () => new SkeinError({ code: 'probes', file: abs, where, message: `This example image lies outside the probe-set folder ${probesDir}; Skein shows only images inside it.` });
  if (!isInside(probesDir, abs) || abs === path.resolve(probesDir)) throw outside();
  if (!fs.existsSync(abs)) throw new SkeinError({ code: 'probes', file: abs, where, message: 'The example image is missing from the probe-set folder. Restore the probe set where the study was scanned.' });
  const mime = IMAGE_TYPES[path.extname(abs).toLowerCase()];
  if (!mime) throw new SkeinError({ code: 'probes', file: abs, where, message: `Skein shows PNG, JPEG, GIF, WebP or BMP example images; this is "${path.extname(abs)}".` });
  const size = fs.statSync(abs).size;
  if (size > MAX_IMAGE_BYTES) throw new SkeinError({ code: 'probes', file: abs, where, message: `The example image is ${Math.round(size / 1048576)} MiB; Skein shows images up to 16 MiB. Use smaller thumbnails in the probe set.` });
  const bytes = fs.readFileSync(abs);
  return { dataUrl: `data:${mime};base64,${bytes.toString('base64')}`, mime, bytes: bytes.length };
}
