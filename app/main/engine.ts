/**
 * The main process's side of the engine pipe: numbered requests, answers matched by number, and a clear error for
 * every caller still waiting when the engine stops. No electron import: the window code hands in the child.
 */
import type { Envelope, HostReply } from './api-host.ts';

/** The little a child process must offer (Electron's UtilityProcess and a wrapped Node ChildProcess both do). */
export interface EngineProcess {
  postMessage(message: unknown): void;
  onMessage(listener: (message: unknown) => void): void;
  onExit(listener: (code: number | null) => void): void;
  kill(): void;
}

export interface EngineClient {
  call(method: string, body: unknown): Promise<Envelope>;
  /** Requests sent and not yet answered. */
  pending(): number;
  stop(): void;
}

const isReply = (m: unknown): m is HostReply =>
  typeof m === 'object' && m !== null && typeof (m as HostReply).id === 'number' && typeof (m as HostReply).envelope === 'object';

export function connectEngine(child: EngineProcess, onUnexpectedExit?: (code: number | null) => void): EngineClient {
  const waiting = new Map<number, (e: Envelope) => void>();
  let nextId = 1;
  let alive = true;
  let stopping = false;
  child.onMessage((m) => {
    if (!isReply(m)) return;
    const resolve = waiting.get(m.id);
    waiting.delete(m.id);
    resolve?.(m.envelope);
  });
  child.onExit((code) => {
    alive = false;
    const error: Envelope = { ok: false, error: { code: 'io', message: `Skein's engine stopped (exit code ${code ?? 'none'}) before answering. It is started again; a scan that was running resumes when you start it again.` } };
    for (const resolve of waiting.values()) resolve(error);
    waiting.clear();
    if (!stopping) onUnexpectedExit?.(code);
  });
  return {
    call(method, body) {
      if (!alive) return Promise.resolve({ ok: false, error: { code: 'io', message: "Skein's engine is not running. Restart Skein." } });
      const id = nextId++;
      return new Promise<Envelope>((resolve) => {
        waiting.set(id, resolve);
        child.postMessage({ id, method, body });
      });
    },
    pending: () => waiting.size,
    stop() {
      stopping = true;
      child.kill();
    },
  };
}
