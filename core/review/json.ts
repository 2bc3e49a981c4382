/**
 * A strict JSON reader for files other people send us (review bundles). JSON.parse keeps the last of two equal keys
 * without a word and reports errors by character offset; this reader refuses duplicate keys, bounds nesting depth,
 * and names the line and column of every problem. Grammar: RFC 8259 (sections 2–7), nothing more.
 */

export class JsonReadError extends Error {
  readonly line: number;
  readonly column: number;
  constructor(message: string, line: number, column: number) {
    super(message);
    this.line = line;
    this.column = column;
  }
}

export interface JsonReadOptions {
  /** Deepest nesting of arrays/objects accepted (a bundle needs about 6). */
  maxDepth?: number;
}

const NUMBER = /-?(?:0|[1-9][0-9]*)(?:\.[0-9]+)?(?:[eE][+-]?[0-9]+)?/y;
const PLAIN_RUN = /[^"\\\u0000-\u001f]*/y;
const ESCAPES: Record<string, string> = { '"': '"', '\\': '\\', '/': '/', b: '\b', f: '\f', n: '\n', r: '\r', t: '\t' };

/** Parses `text` as one JSON value. Objects come back with a null prototype, so no key is special. */
export function readJsonStrict(text: string, opts: JsonReadOptions = {}): unknown {
  const maxDepth = opts.maxDepth ?? 64;
  let i = 0;

  const fail = (message: string, at = i): never => {
    let line = 1;
    let lineStart = 0;
    for (let k = 0; k < at && k < text.length; k++) {
      if (text.charCodeAt(k) === 10) { line++; lineStart = k + 1; }
    }
    throw new JsonReadError(message, line, at - lineStart + 1);
  };
  const describe = (at: number): string => (at >= text.length ? 'the end of the file' : `"${text[at]}"`);
  const skipSpace = () => {
    for (;;) {
      const c = text.charCodeAt(i);
      if (c === 32 || c === 9 || c === 10 || c === 13) i++;
      else return;
    }
  };
  const endOfFile = () => fail('the file ends in the middle of the JSON: it is truncated (copy or download it again)');

  const readString = (): string => {
    const start = i;
    i++; // opening quote
    let out = '';
    for (;;) {
      PLAIN_RUN.lastIndex = i;
      PLAIN_RUN.exec(text);
      out += text.slice(i, PLAIN_RUN.lastIndex);
      i = PLAIN_RUN.lastIndex;
      if (i >= text.length) fail('a text value is not closed (missing "): the file is truncated or damaged', start);
      const c = text[i];
      if (c === '"') { i++; return out; }
      if (c === '\\') {
        const e = text[i + 1];
        if (e === undefined) endOfFile();
        if (e === 'u') {
          const hex = text.slice(i + 2, i + 6);
          if (!/^[0-9a-fA-F]{4}$/.test(hex)) fail('a \\u escape needs four hex digits');
          out += String.fromCharCode(parseInt(hex, 16));
          i += 6;
        } else if (Object.hasOwn(ESCAPES, e)) {
          out += ESCAPES[e];
          i += 2;
        } else {
          fail(`"\\${e}" is not a JSON escape`);
        }
      } else {
        fail('a text value contains a raw control character (line break or tab must be written \\n or \\t)');
      }
    }
  };

  const readValue = (depth: number, path: string): unknown => {
    skipSpace();
    if (i >= text.length) endOfFile();
    const c = text[i];
    if (c === '{' || c === '[') {
      if (depth >= maxDepth) fail(`nesting is deeper than ${maxDepth} levels; this is not a review bundle`);
      return c === '{' ? readObject(depth + 1, path) : readArray(depth + 1, path);
    }
    if (c === '"') return readString();
    if (c === 't' || c === 'f' || c === 'n') {
      for (const [word, value] of [['true', true], ['false', false], ['null', null]] as const) {
        if (text.startsWith(word, i)) { i += word.length; return value; }
      }
      fail(`unexpected ${describe(i)}: expected a value`);
    }
    NUMBER.lastIndex = i;
    const m = NUMBER.exec(text);
    if (m && m[0].length > 0) {
      i += m[0].length;
      const n = Number(m[0]);
      if (!Number.isFinite(n)) fail('a number is too large');
      return n;
    }
    return fail(`unexpected ${describe(i)}: expected a value`);
  };

  const readArray = (depth: number, path: string): unknown[] => {
    i++;
    const out: unknown[] = [];
    skipSpace();
    if (text[i] === ']') { i++; return out; }
    for (;;) {
      out.push(readValue(depth, `${path}[${out.length}]`));
      skipSpace();
      if (i >= text.length) endOfFile();
      if (text[i] === ',') { i++; continue; }
      if (text[i] === ']') { i++; return out; }
      fail(`unexpected ${describe(i)} in a list: expected , or ]`);
    }
  };

  const readObject = (depth: number, path: string): Record<string, unknown> => {
    i++;
    const out = Object.create(null) as Record<string, unknown>;
    skipSpace();
    if (text[i] === '}') { i++; return out; }
    for (;;) {
      skipSpace();
      if (i >= text.length) endOfFile();
      if (text[i] !== '"') fail(`unexpected ${describe(i)}: expected a field name in double quotes`);
      const keyAt = i;
      const key = readString();
      const where = path ? `${path}.${key}` : key;
      if (Object.hasOwn(out, key)) fail(`the field "${where}" appears twice in the same object; a bundle names each field once`, keyAt);
      skipSpace();
      if (i >= text.length) endOfFile();
      if (text[i] !== ':') fail(`unexpected ${describe(i)}: expected : after the field name`);
      i++;
      out[key] = readValue(depth, where);
      skipSpace();
      if (i >= text.length) endOfFile();
      if (text[i] === ',') { i++; continue; }
      if (text[i] === '}') { i++; return out; }
      fail(`unexpected ${describe(i)} in an object: expected , or }`);
    }
  };

  if (text.charCodeAt(0) === 0xfeff) i = 1; // a byte-order mark some editors write
  const value = readValue(0, '');
  skipSpace();
  if (i < text.length) fail(`unexpected ${describe(i)} after the end of the JSON value`);
  return value;
}
