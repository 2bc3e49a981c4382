/**
 * The renderer's one door to core: `window.skein.call` inside Electron, else POST /api/<method> with the launch token
 * (browser mode). Both carry the same envelope {ok, value} | {ok: false, error}. Types only from core/api.
 */
import type { Api, Method, Request, ErrorInfo } from '../../../../core/api/index.ts';

export type { Method, Request, ErrorInfo };
export type Response<M extends Method> = Awaited<ReturnType<Api[M]>>;

type Envelope = { ok: true; value: unknown } | { ok: false; error: ErrorInfo };

/** What the desktop shell asks the page to open (menus, native dialogs, drag-and-drop, command line). */
export interface OpenItem { kind: 'model' | 'probes' | 'study'; path: string }

interface SkeinBridge {
  call(method: string, body: unknown): Promise<Envelope>;
  platform: string;
  onOpen?(listener: (item: OpenItem) => void): () => void;
}

declare global {
  interface Window { skein?: SkeinBridge }
}

/** A core error as a value the screens can show: code, message, file and field at fault. */
export class ApiError extends Error {
  constructor(readonly info: ErrorInfo) {
    super(info.message);
    this.name = 'ApiError';
  }
}

const TOKEN_KEY = 'skein.token';

/** The launch token: from ?token= on first load (then kept for this tab), else from the tab's storage. */
export function launchToken(search: string, storage: Pick<Storage, 'getItem' | 'setItem'>): string | null {
  const fromUrl = new URLSearchParams(search).get('token');
  if (fromUrl) {
    storage.setItem(TOKEN_KEY, fromUrl);
    return fromUrl;
  }
  return storage.getItem(TOKEN_KEY);
}

export function inElectron(): boolean {
  return typeof window !== 'undefined' && !!window.skein && typeof window.skein.call === 'function';
}

/** Turns anything thrown into the ErrorInfo shape (network failures included). */
export function asErrorInfo(e: unknown): ErrorInfo {
  if (e instanceof ApiError) return e.info;
  return { code: 'io', message: `Skein's engine did not answer (${(e as Error)?.message ?? String(e)}). Check that Skein is still running, then reload.` };
}

async function send(method: string, body: unknown): Promise<Envelope> {
  if (inElectron()) return window.skein!.call(method, body);
  const token = launchToken(location.search, sessionStorage);
  const res = await fetch(`/api/${method}`, {
    method: 'POST',
    headers: { 'content-type': 'application/json', ...(token ? { 'x-skein-token': token } : {}) },
    body: JSON.stringify(body),
  });
  const text = await res.text();
  try {
    return JSON.parse(text) as Envelope;
  } catch {
    const hint = res.status === 401 ? 'The page lost its launch token: open the address Skein printed when it started.'
      : res.status === 403 ? 'This page is not allowed to talk to Skein: open the address Skein printed when it started.'
      : 'Reload the page; if it keeps happening, restart Skein.';
    return { ok: false, error: { code: 'io', message: `Skein answered ${res.status} ${res.statusText}. ${hint}` } };
  }
}

/** Subscribes to the desktop shell's "open this" events; a no-op in browser mode. Returns the unsubscribe. */
export function onShellOpen(listener: (item: OpenItem) => void): () => void {
  return inElectron() && typeof window.skein!.onOpen === 'function' ? window.skein!.onOpen(listener) : () => {};
}

/** Calls one core request; resolves with its value or rejects with an ApiError. */
export async function call<M extends Method>(method: M, body: Request<M>): Promise<Response<M>> {
  const env = await send(method, body);
  if (!env.ok) throw new ApiError(env.error);
  return env.value as Response<M>;
}
