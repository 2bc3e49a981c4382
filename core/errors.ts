/**
 * Errors are values with a user-facing message and the file/field at fault (house style).
 * Every failure a user can cause is a SkeinError; anything else is a bug.
 */
export type ErrorCode =
  | 'model'        // the .onnx file cannot be read or run
  | 'probes'       // the probe-set folder or one of its files is invalid
  | 'study'        // the study file is missing, locked, from another version, or damaged
  | 'request'      // a request to the API is malformed
  | 'cancelled'    // the user stopped a long job
  | 'conflict'     // a concurrent edit won
  | 'review'       // a review bundle is invalid or refused
  | 'io';          // a file could not be written or read for another reason

export interface ErrorInfo {
  code: ErrorCode;
  /** One sentence a user can act on: what is wrong and what to do. */
  message: string;
  /** The file at fault, when there is one. */
  file?: string;
  /** Line (1-based) or field in that file, when known: "line 12", "inputs.x", "header.shape". */
  where?: string;
  /** The original text of a third-party failure (e.g. onnxruntime's), shown by the CLI's --verbose. */
  detail?: string;
}

export class SkeinError extends Error implements ErrorInfo {
  readonly code: ErrorCode;
  readonly file?: string;
  readonly where?: string;
  readonly detail?: string;
  constructor(info: ErrorInfo) {
    super(info.message);
    this.name = 'SkeinError';
    this.code = info.code;
    this.file = info.file;
    this.where = info.where;
    this.detail = info.detail;
  }
  toJSON(): ErrorInfo {
    return { code: this.code, message: this.message, file: this.file, where: this.where, ...(this.detail ? { detail: this.detail } : {}) };
  }
  /** "file (where): message" — the one-line form the CLI prints. */
  oneLine(): string {
    const loc = [this.file, this.where].filter(Boolean).join(', ');
    return loc ? `${loc}: ${this.message}` : this.message;
  }
}

export function isSkeinError(e: unknown): e is SkeinError {
  return e instanceof SkeinError;
}
