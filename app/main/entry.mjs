// Electron's main entry. Electron runs JavaScript: tsx is registered here (as for the skein CLI, core/cli/bin.js), then
// the TypeScript main is imported. The top-level await keeps Electron's `ready` until the main module has run, so the
// scheme registration in index.ts happens before `ready`, as Electron requires.
import { register } from 'tsx/esm/api';

register();
await import('./index.ts');
