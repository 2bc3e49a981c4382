/**
 * The engine: the one API running off the window's main process (an Electron utilityProcess; a Node child under
 * test), so a long scan or scoring pass never freezes the window. Each message {id, method, body} is validated by
 * dispatch, exactly like every other transport, and answered with {id, envelope}. No electron import.
 */
import { z } from 'zod';
import { createApi, dispatch, toErrorInfo, type ApiContext } from '../../core/api/index.ts';
import type { ErrorInfo } from '../../core/errors.ts';

export type Envelope = { ok: true; value: unknown } | { ok: false; error: ErrorInfo };
export interface HostRequest { id: number; method: string; body: unknown }
export interface HostReply { id: number; envelope: Envelope }

/** Either end of the pipe, whatever carries it (utilityProcess parentPort, Node IPC). */
export interface HostChannel {
  onMessage(listener: (message: unknown) => void): void;
  send(reply: HostReply): void;
}

const requestSchema = z.strictObject({ id: z.number().int().nonnegative(), method: z.string().min(1).max(200), body: z.unknown() });
export const engineContextSchema = z.strictObject({ nativeBinding: z.string().min(1).optional(), dataDir: z.string().min(1) });
export type EngineContext = z.infer<typeof engineContextSchema>;

export const CONTEXT_ARG = '--skein-engine-context=';

export function encodeEngineContext(ctx: EngineContext): string {
  return CONTEXT_ARG + Buffer.from(JSON.stringify(engineContextSchema.parse(ctx))).toString('base64url');
}

export function decodeEngineContext(argv: string[]): EngineContext {
  const arg = argv.find((a) => a.startsWith(CONTEXT_ARG));
  if (!arg) throw new Error(`The engine was started without ${CONTEXT_ARG}…`);
  return engineContextSchema.parse(JSON.parse(Buffer.from(arg.slice(CONTEXT_ARG.length), 'base64url').toString('utf8')));
}

export function serveApi(channel: HostChannel, ctx: ApiContext): void {
  const api = createApi(ctx);
  channel.onMessage((message) => {
    const parsed = requestSchema.safeParse(message);
    if (!parsed.success) return; // nothing to answer: without an id there is no caller waiting
    const { id, method, body } = parsed.data;
    dispatch(api, ctx, method, body).then(
      (value) => channel.send({ id, envelope: { ok: true, value } }),
      (e) => channel.send({ id, envelope: { ok: false, error: toErrorInfo(e) } }),
    );
  });
}

interface ParentPort {
  on(event: 'message', listener: (e: { data: unknown }) => void): void;
  postMessage(message: unknown): void;
}

/** The pipe to whoever started this process. */
export function parentChannel(): HostChannel {
  const parentPort = (process as unknown as { parentPort?: ParentPort }).parentPort; // set inside an Electron utilityProcess
  if (parentPort) return { onMessage: (l) => parentPort.on('message', (e) => l(e.data)), send: (r) => parentPort.postMessage(r) };
  if (process.send) {
    process.on('disconnect', () => process.exit(0)); // the parent is gone: nobody is left to answer
    return { onMessage: (l) => process.on('message', l), send: (r) => process.send!(r) };
  }
  throw new Error('The engine needs a parent process to talk to (Electron utilityProcess or a Node child with IPC).');
}

export function startEngine(argv: string[] = process.argv): void {
  const ctx = decodeEngineContext(argv);
  serveApi(parentChannel(), { nativeBinding: ctx.nativeBinding, dataDir: ctx.dataDir });
}
