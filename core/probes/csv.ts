/** Strict UTF-8 CSV tables with 1-based line numbers for error messages. */
import fs from 'node:fs';
import path from 'node:path';
import { parse } from 'csv-parse/sync';
import { probesError } from './fail.ts';

export interface CsvRow {
  /** 1-based line where the record starts (the header is line 1). */
  line: number;
  /** Trimmed cell per header column; columns the row lacks are absent. */
  values: Record<string, string>;
}

export interface CsvTable {
  file: string;
  /** The exact bytes read, so the fingerprint hashes what was parsed. */
  bytes: Buffer;
  columns: string[];
  rows: CsvRow[];
}

export interface CsvColumns {
  required: readonly string[];
  optional: readonly string[];
}

/** Offset of the first byte that starts an invalid UTF-8 sequence (RFC 3629 section 4), or -1. */
export function firstInvalidUtf8Offset(bytes: Uint8Array): number {
  let i = 0;
  while (i < bytes.length) {
    const b = bytes[i];
    if (b < 0x80) { i++; continue; }
    let need: number;
    let lo = 0x80;
    let hi = 0xbf;
    if (b >= 0xc2 && b <= 0xdf) need = 1;
    else if (b >= 0xe0 && b <= 0xef) { need = 2; if (b === 0xe0) lo = 0xa0; if (b === 0xed) hi = 0x9f; }
    else if (b >= 0xf0 && b <= 0xf4) { need = 3; if (b === 0xf0) lo = 0x90; if (b === 0xf4) hi = 0x8f; }
    else return i;
    if (i + need >= bytes.length) return i; // sequence cut off by the end of the file
    if (bytes[i + 1] < lo || bytes[i + 1] > hi) return i;
    for (let k = 2; k <= need; k++) if ((bytes[i + k] & 0xc0) !== 0x80) return i;
    i += need + 1;
  }
  return -1;
}

/** Decode bytes as UTF-8, refusing invalid sequences with the byte offset and line of the first one. */
export function decodeUtf8Strict(bytes: Uint8Array, file: string): string {
  try {
    return new TextDecoder('utf-8', { fatal: true }).decode(bytes);
  } catch {
    const offset = firstInvalidUtf8Offset(bytes);
    let line = 1;
    for (let i = 0; i < offset; i++) if (bytes[i] === 0x0a) line++;
    throw probesError(file, `line ${line}`,
      `${path.basename(file)} is not valid UTF-8 (first bad byte at offset ${offset}, line ${line}); re-save it with UTF-8 encoding`);
  }
}

/** Read a CSV file with a header row; checks the header names the required columns. */
export function readCsvTable(file: string, columns: CsvColumns, warnings: string[]): CsvTable {
  const name = path.basename(file);
  const bytes = fs.readFileSync(file);
  // csv-parse counts lines reliably only with LF endings; CRLF inside quoted cells becomes LF, which is harmless here.
  const text = decodeUtf8Strict(bytes, file).replace(/\r\n/g, '\n');
  let records: { info: { lines: number }; record: string[] }[];
  try {
    records = parse(text, { info: true, skip_empty_lines: true, trim: true }) as unknown as typeof records;
  } catch (e) {
    const err = e as Error & { lines?: number };
    throw probesError(file, err.lines ? `line ${err.lines}` : undefined,
      `${name} could not be read as CSV (${err.message}); every row needs as many comma-separated cells as the header, and quotes must be closed`);
  }
  const expected = [...columns.required, ...columns.optional].join(',');
  if (records.length === 0) {
    throw probesError(file, 'header', `${name} is empty; it needs a header row naming its columns (${expected}) and one row per entry`);
  }
  const header = records[0].record;
  const seen = new Set<string>();
  for (const col of header) {
    if (seen.has(col)) throw probesError(file, 'header', `${name} names the column "${col}" twice in its header; keep one`);
    seen.add(col);
  }
  for (const col of columns.required) {
    if (!seen.has(col)) {
      throw probesError(file, 'header',
        `${name} has no "${col}" column; its header must name the columns ${columns.required.join(',')} (found: ${header.join(',')})`);
    }
  }
  const known = new Set([...columns.required, ...columns.optional]);
  const ignored = header.filter((c) => !known.has(c));
  if (ignored.length > 0) warnings.push(`${name}: column${ignored.length > 1 ? 's' : ''} ${ignored.map((c) => `"${c}"`).join(', ')} ignored (known columns: ${expected})`);

  const rows: CsvRow[] = [];
  for (let r = 1; r < records.length; r++) {
    const { info, record } = records[r];
    // info.lines is the line where the record ends; quoted cells may span lines.
    let newlines = 0;
    for (const cell of record) for (let k = 0; k < cell.length; k++) if (cell.charCodeAt(k) === 10) newlines++;
    const values: Record<string, string> = {};
    header.forEach((col, c) => { if (known.has(col) && record[c] !== undefined) values[col] = record[c]; });
    rows.push({ line: info.lines - newlines, values });
  }
  return { file, bytes, columns: header, rows };
}
