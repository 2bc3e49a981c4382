import { SkeinError } from '../errors.ts';

/** A user-facing probe-set error: `file` is absolute, `where` a line or field in it. */
export function probesError(file: string, where: string | undefined, message: string): SkeinError {
  return new SkeinError({ code: 'probes', file, where, message });
}

/** "[3, 224, 224]" — shapes in messages read like the Python users wrote them. */
export function formatShape(shape: readonly (number | string | null)[]): string {
  return `[${shape.map((d) => (d === null ? '?' : String(d))).join(', ')}]`;
}
