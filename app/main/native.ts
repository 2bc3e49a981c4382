/**
 * better-sqlite3 is a native addon built for one ABI: Node's build (node_modules) serves the CLI and the tests;
 * Electron needs its own, made by `npm run electron:sqlite` into app/main/native/ and handed to every open
 * through ApiContext.nativeBinding. Plain Node: no electron import, so it is tested under Node.
 */
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { z } from 'zod';

export const NATIVE_DIR = fileURLToPath(new URL('./native/', import.meta.url));
export const BINDING_FILE = 'better_sqlite3.node';
export const INFO_FILE = 'better_sqlite3.json';

/** Written beside the binary by the build script, so a binary for another Electron is recognised as such. */
export const nativeInfoSchema = z.strictObject({
  electron: z.string(), modules: z.string(), platform: z.string(), arch: z.string(), builtAt: z.string(), method: z.string(),
});
export type NativeInfo = z.infer<typeof nativeInfoSchema>;

export interface Runtime { modules: string; platform: string; arch: string; electron?: string }

export type NativeLookup = { binding: string; info: NativeInfo } | { problem: string };

const FIX = 'Run `npm run electron:sqlite` in the Skein folder (it needs network access once), then start Skein again.';

/** Finds Electron's better-sqlite3 build for this runtime, or says what is wrong and what to run. */
export function findElectronSqlite(runtime: Runtime, dir: string = NATIVE_DIR): NativeLookup {
  const binding = path.join(dir, BINDING_FILE);
  const infoFile = path.join(dir, INFO_FILE);
  if (!fs.existsSync(binding) || !fs.existsSync(infoFile)) {
    return { problem: `Skein's study files need better-sqlite3 built for Electron, and there is none in ${dir}. ${FIX}` };
  }
  let info: NativeInfo;
  try {
    info = nativeInfoSchema.parse(JSON.parse(fs.readFileSync(infoFile, 'utf8')));
  } catch {
    return { problem: `${infoFile} is unreadable, so the better-sqlite3 build beside it cannot be trusted. ${FIX}` };
  }
  if (info.modules !== runtime.modules || info.platform !== runtime.platform || info.arch !== runtime.arch) {
    const built = `Electron ${info.electron} (ABI ${info.modules}, ${info.platform}-${info.arch})`;
    const running = `${runtime.electron ? `Electron ${runtime.electron} ` : ''}(ABI ${runtime.modules}, ${runtime.platform}-${runtime.arch})`;
    return { problem: `The better-sqlite3 build in ${dir} is for ${built}, but this is ${running}. ${FIX}` };
  }
  return { binding, info };
}
