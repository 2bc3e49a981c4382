/**
 * How the desktop app is packaged, as an electron-builder-style configuration object. No packaging tool is installed
 * in this repository (and Electron itself cannot run on the build machine used so far), so nothing here has been
 * packaged yet; the shape follows electron-builder's documented options and is typed by the local interface below,
 * so a packager can be added later without guessing what goes in. Before packaging, on the target platform:
 *   npm run build:renderer     the screens → app/renderer/dist
 *   npm run electron:sqlite    better-sqlite3 for this Electron → app/main/native/better_sqlite3.node
 */

export interface FileAssociation { ext: string; name: string; role: 'Editor' | 'Viewer'; description?: string }

export interface PackagingConfig {
  appId: string;
  productName: string;
  /** Pinned to the devDependency, so the packaged runtime is the one the native build was made for. */
  electronVersion: string;
  directories: { output: string };
  /** Globs of what goes into the app, relative to the repository root. */
  files: string[];
  /**
   * Off: the TypeScript sources are loaded through tsx's module hooks at run time, which read files with plain fs in
   * a hooks thread, and native addons cannot load from inside an archive anyway.
   */
  asar: boolean;
  /** Off: better-sqlite3 for Electron comes from `npm run electron:sqlite`; Node's build in node_modules stays for the CLI. */
  npmRebuild: boolean;
  /** package.json has no "main" (it is a CLI package too); the packaged app starts here. */
  extraMetadata: { main: string };
  fileAssociations: FileAssociation[];
  mac: { category: string; target: string[] };
  win: { target: string[] };
  linux: { category: string; target: string[] };
}

const config: PackagingConfig = {
  appId: 'org.skein.desktop',
  productName: 'Skein',
  electronVersion: '45.5.0',
  directories: { output: 'release' },
  files: [
    'package.json',
    'app/main/**', 'app/preload/**', 'app/server/**', 'app/renderer/dist/**',
    'core/**', 'sample-data/**',
    'node_modules/**',
    '!**/*.test.ts', '!test/**', '!bench/**', '!app/renderer/src/**',
  ],
  asar: false,
  npmRebuild: false,
  extraMetadata: { main: 'app/main/entry.mjs' },
  fileAssociations: [{ ext: 'study', name: 'Skein study', role: 'Editor', description: 'A Skein study: activations, scores and review of one model on one probe set' }],
  mac: { category: 'public.app-category.developer-tools', target: ['dmg'] },
  win: { target: ['nsis'] },
  linux: { category: 'Development', target: ['AppImage', 'deb'] },
};

export default config;
