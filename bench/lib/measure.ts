/** Timing, medians and child processes with their peak resident memory. */
import { spawn } from 'node:child_process';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

export const benchDir = path.resolve(path.dirname(fileURLToPath(import.meta.url)), '..');
export const repoRoot = path.resolve(benchDir, '..');

export function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  const m = s.length >> 1;
  return s.length % 2 ? s[m] : (s[m - 1] + s[m]) / 2;
}

export function seconds(start: bigint): number {
  return Number(process.hrtime.bigint() - start) / 1e9;
}

/** Wall seconds and this process's CPU seconds (user + system, all threads) spent in fn. */
export async function timed<T>(fn: () => Promise<T> | T): Promise<{ seconds: number; cpuSeconds: number; value: T }> {
  const cpu = process.cpuUsage();
  const start = process.hrtime.bigint();
  const value = await fn();
  const used = process.cpuUsage(cpu);
  return { seconds: seconds(start), cpuSeconds: (used.user + used.system) / 1e6, value };
}

export interface ChildResult<T> {
  /** What the child printed as its last stdout line (JSON). */
  value: T;
  /** Peak resident set size of the child process (getrusage ru_maxrss, which the kernel tracks as VmHWM), MiB. */
  peakRssMb: number;
  wallSeconds: number;
}

/**
 * Runs a bench/child script in a fresh Node process (TypeScript through tsx) and returns its JSON result and peak
 * RSS. The child reports its own process.resourceUsage().maxRSS as `peakRssKb` at the very end, so nothing after
 * the measured work can be missed, and nothing of the parent's memory is counted.
 */
export function runChild<T>(script: string, args: string[], opts: { env?: NodeJS.ProcessEnv } = {}): Promise<ChildResult<T & { peakRssKb: number }>> {
  const start = process.hrtime.bigint();
  return new Promise((resolve, reject) => {
    const child = spawn(process.execPath, ['--import', 'tsx', path.join(benchDir, 'child', script), ...args], {
      cwd: repoRoot, env: { ...process.env, ...opts.env }, stdio: ['ignore', 'pipe', 'pipe'],
    });
    let out = '';
    let err = '';
    child.stdout.on('data', (d) => (out += d));
    child.stderr.on('data', (d) => (err += d));
    child.on('error', reject);
    child.on('close', (code) => {
      if (code !== 0) return reject(new Error(`bench child ${script} ${args.join(' ')} exited ${code}: ${err.trim().split('\n').slice(-8).join('\n')}`));
      const last = out.trim().split('\n').pop() ?? '';
      try {
        const value = JSON.parse(last) as T & { peakRssKb: number };
        resolve({ value, peakRssMb: value.peakRssKb / 1024, wallSeconds: seconds(start) });
      } catch {
        reject(new Error(`bench child ${script} printed no JSON result: ${out.slice(-400)} ${err.slice(-400)}`));
      }
    });
  });
}

/** Peak RSS of this process so far, KiB (getrusage ru_maxrss). */
export function ownPeakRssKb(): number {
  return process.resourceUsage().maxRSS;
}
