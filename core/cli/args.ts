/** The command line's one argument parser (node:util parseArgs, strict) and its usage error, for every subcommand. */
import { parseArgs, type ParseArgsConfig } from 'node:util';

/** A mistake in how a command was typed: printed as one line with a pointer to `skein help`, exit 2. */
export class UsageError extends Error {}

export type ParsedArgs = { values: Record<string, string | boolean | string[] | undefined>; positionals: string[] };

/** Parses options strictly and checks the number of positional arguments (exactly n, or between lo and hi). */
export function parse(argv: string[], options: ParseArgsConfig['options'], positionals: number | [number, number]): ParsedArgs {
  let parsed;
  try {
    parsed = parseArgs({ args: argv, options, allowPositionals: true, strict: true });
  } catch (e) {
    throw new UsageError((e as Error).message);
  }
  const [lo, hi] = typeof positionals === 'number' ? [positionals, positionals] : positionals;
  if (parsed.positionals.length < lo || parsed.positionals.length > hi) {
    throw new UsageError(`expected ${lo === hi ? lo : `${lo} to ${hi}`} argument(s), got ${parsed.positionals.length}`);
  }
  return parsed as ParsedArgs;
}

/** A --name option that must be a positive whole number, or undefined when absent. */
export function intOption(v: unknown, name: string): number | undefined {
  if (v === undefined) return undefined;
  const n = Number(v);
  if (!Number.isInteger(n) || n < 1) throw new UsageError(`--${name} needs a positive whole number, got "${v}"`);
  return n;
}

/** A unit index argument: a 0-based whole number. */
export function unitArg(s: string): number {
  const n = Number(s);
  if (!Number.isInteger(n) || n < 0) throw new UsageError(`unit must be a 0-based whole number, got "${s}"`);
  return n;
}
