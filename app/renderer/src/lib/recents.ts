/** Recently opened studies, newest first, kept in the browser's local storage (at most MAX_RECENTS). */

export interface Recent { study: string; model: string; probes: string; openedAt: string }

export const MAX_RECENTS = 8;
const KEY = 'skein.recents';

export function readRecents(storage: Pick<Storage, 'getItem'>): Recent[] {
  try {
    const v = JSON.parse(storage.getItem(KEY) ?? '[]');
    return Array.isArray(v) ? v.filter((r) => r && typeof r.study === 'string') : [];
  } catch {
    return [];
  }
}

/** Puts `entry` first, drops its older copy and anything past MAX_RECENTS. */
export function addRecent(list: Recent[], entry: Recent): Recent[] {
  return [entry, ...list.filter((r) => r.study !== entry.study)].slice(0, MAX_RECENTS);
}

export function writeRecents(storage: Pick<Storage, 'setItem'>, list: Recent[]): void {
  storage.setItem(KEY, JSON.stringify(list));
}

export function forgetRecent(list: Recent[], study: string): Recent[] {
  return list.filter((r) => r.study !== study);
}
