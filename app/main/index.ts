/**
 * Electron main process: one window, native menus and dialogs, recent studies, drag-and-drop, and the IPC door to
 * the engine. Kept thin: every request goes to the engine (app/main/api-host.ts in a utilityProcess), where dispatch
 * validates it; the logic worth testing lives in plain-Node files beside this one (policy, state, menu, engine).
 * Loaded by app/main/entry.mjs, which registers tsx first (Electron runs JavaScript, not TypeScript).
 */
import fs from 'node:fs';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { app, BrowserWindow, Menu, dialog, ipcMain, nativeTheme, protocol, session, utilityProcess, type IpcMainEvent, type IpcMainInvokeEvent } from 'electron';
import { defaultDataDir } from '../../core/api/files.ts';
import { SECURITY_HEADERS, MISSING_BUILD_PAGE, contentTypeOf, resolveStaticFile } from '../server/static.ts';
import { encodeEngineContext, type Envelope } from './api-host.ts';
import { connectEngine, type EngineClient } from './engine.ts';
import { menuTemplate } from './menu.ts';
import { findElectronSqlite } from './native.ts';
import { RENDERER_ENTRY, RENDERER_HOST, RENDERER_SCHEME, isRendererUrl, pathsFromArgv, toOpenItem, type OpenItem } from './policy.ts';
import { readShellState, withRecentStudy, withoutMissing, writeShellState, emptyState, type Theme } from './state.ts';

const here = path.dirname(fileURLToPath(import.meta.url));
const rendererDir = path.resolve(process.env.SKEIN_RENDERER_DIR || path.join(here, '..', 'renderer', 'dist'));
const preloadFile = path.join(here, '..', 'preload', 'index.cjs');
const engineEntry = path.join(here, 'api-host.cjs');

// Before `ready`: the scheme must be known as standard + secure for 'self', storage and module scripts to work.
protocol.registerSchemesAsPrivileged([{ scheme: RENDERER_SCHEME, privileges: { standard: true, secure: true } }]);
app.setName('Skein');
app.setPath('userData', path.join(app.getPath('appData'), 'Skein')); // not "Electron" when run unpackaged
app.enableSandbox();

const refused = (message: string): Envelope => ({ ok: false, error: { code: 'request', message } });

function runShell(): void {
  const statePath = path.join(app.getPath('userData'), 'shell-state.json');
  let state = withoutMissing(readShellState(statePath));
  let win: BrowserWindow | null = null;
  let engine: EngineClient | null = null;
  let currentStudy: string | null = null;
  let pageLoaded = false;
  const queued: OpenItem[] = [];

  const save = (next: typeof state): void => {
    state = next;
    try {
      writeShellState(statePath, state);
    } catch (e) {
      process.stderr.write(`Skein could not remember recent studies (${(e as Error).message}).\n`);
    }
    rebuildMenu();
  };

  const deliver = (item: OpenItem): void => {
    if (win && pageLoaded) win.webContents.send('skein:open', item);
    else queued.push(item);
  };

  const openPath = (file: string): void => {
    const item = toOpenItem(file);
    if (item) return deliver(item);
    void dialog.showMessageBox({
      type: 'warning', title: 'Skein', message: `Skein cannot open ${path.basename(file)}.`,
      detail: 'Skein opens .onnx models, probe-set folders (a folder with manifest.json) and .study files.',
    });
  };

  // Our window, its top frame (no iframe), showing our page. senderFrame is null once that frame has gone.
  const fromOurWindow = (event: IpcMainEvent | IpcMainInvokeEvent): boolean =>
    !!win && event.sender === win.webContents && !!event.senderFrame && event.senderFrame.parent === null && isRendererUrl(event.senderFrame.url);

  function startEngine(nativeBinding: string): void {
    const child = utilityProcess.fork(engineEntry, [encodeEngineContext({ nativeBinding, dataDir: defaultDataDir() })], { serviceName: 'Skein engine', stdio: 'inherit' });
    engine = connectEngine({
      postMessage: (m) => child.postMessage(m),
      onMessage: (l) => child.on('message', l),
      onExit: (l) => child.on('exit', l),
      kill: () => { child.kill(); },
    }, (code) => {
      process.stderr.write(`Skein engine exited (code ${code}); starting it again.\n`);
      startEngine(nativeBinding);
    });
  }

  const call = (method: string, body: unknown): Promise<Envelope> => engine ? engine.call(method, body) : Promise.resolve(refused('The engine is not running.'));

  async function pick(kind: OpenItem['kind']): Promise<void> {
    if (!win) return;
    const options: Electron.OpenDialogOptions = kind === 'probes'
      ? { title: 'Open probe set', properties: ['openDirectory'] }
      : kind === 'model'
        ? { title: 'Open model', properties: ['openFile'], filters: [{ name: 'ONNX model', extensions: ['onnx'] }] }
        : { title: 'Open study', properties: ['openFile'], filters: [{ name: 'Skein study', extensions: ['study'] }] };
    const r = await dialog.showOpenDialog(win, options);
    // A chosen path goes as chosen: the engine's own checks say what is wrong with it, in the same words everywhere.
    if (!r.canceled && r.filePaths[0]) deliver({ kind, path: r.filePaths[0] });
  }

  async function saveStudyAs(): Promise<void> {
    if (!win || !currentStudy) return;
    const r = await dialog.showSaveDialog(win, {
      title: 'Save study as', defaultPath: path.join(path.dirname(currentStudy), `${path.basename(currentStudy, '.study')} copy.study`),
      filters: [{ name: 'Skein study', extensions: ['study'] }],
    });
    if (r.canceled || !r.filePath) return;
    const out = r.filePath.toLowerCase().endsWith('.study') ? r.filePath : `${r.filePath}.study`;
    const env = await call('study.saveAs', { study: currentStudy, out });
    if (env.ok) deliver({ kind: 'study', path: out });
    else dialog.showErrorBox('The study was not saved', env.error.message);
  }

  function rebuildMenu(): void {
    Menu.setApplicationMenu(Menu.buildFromTemplate(menuTemplate(
      { platform: process.platform, recentStudies: state.recentStudies, theme: state.theme, canSave: currentStudy !== null, dev: !app.isPackaged },
      {
        openModel: () => void pick('model'),
        openProbes: () => void pick('probes'),
        openStudy: () => void pick('study'),
        saveStudyAs: () => void saveStudyAs(),
        openRecent: (study) => (fs.existsSync(study) ? deliver({ kind: 'study', path: study }) : save(withoutMissing(state))),
        clearRecent: () => save({ ...emptyState(), theme: state.theme }),
        setTheme: (theme: Theme) => { nativeTheme.themeSource = theme; save({ ...state, theme }); },
      },
    )));
  }

  function lockDown(): void {
    const ses = session.defaultSession;
    ses.setPermissionRequestHandler((_wc, _permission, answer) => answer(false));
    ses.setPermissionCheckHandler(() => false);
    // The page needs nothing from the network; CSP already says so, this makes it true for every request.
    ses.webRequest.onBeforeRequest({ urls: ['*://*/*'] }, (_details, answer) => answer({ cancel: true }));
    ses.protocol.handle(RENDERER_SCHEME, async (request) => {
      const url = new URL(request.url);
      const headers = { ...SECURITY_HEADERS };
      if (url.hostname !== RENDERER_HOST || request.method !== 'GET') return new Response('Not found', { status: 404, headers });
      if ((url.pathname === '/' || url.pathname === '/index.html') && !fs.existsSync(path.join(rendererDir, 'index.html'))) {
        return new Response(MISSING_BUILD_PAGE, { headers: { ...headers, 'Content-Type': 'text/html; charset=utf-8' } });
      }
      const file = resolveStaticFile(rendererDir, url.pathname);
      if (!file) return new Response('Not found', { status: 404, headers });
      return new Response(new Uint8Array(fs.readFileSync(file)), { headers: { ...headers, 'Content-Type': contentTypeOf(file) } });
    });
  }

  function createWindow(): void {
    win = new BrowserWindow({
      width: 1440, height: 900, minWidth: 960, minHeight: 600, show: false, title: 'Skein',
      backgroundColor: nativeTheme.shouldUseDarkColors ? '#16181d' : '#fbfbfa',
      webPreferences: {
        preload: preloadFile, contextIsolation: true, sandbox: true, nodeIntegration: false, nodeIntegrationInWorker: false,
        nodeIntegrationInSubFrames: false, webSecurity: true, allowRunningInsecureContent: false, webviewTag: false,
        spellcheck: false, devTools: !app.isPackaged,
      },
    });
    pageLoaded = false;
    win.once('ready-to-show', () => win?.show());
    win.webContents.on('did-finish-load', () => {
      pageLoaded = true;
      for (const item of queued.splice(0)) win?.webContents.send('skein:open', item);
    });
    win.on('closed', () => { win = null; });
    void win.loadURL(RENDERER_ENTRY);
  }

  app.on('web-contents-created', (_e, contents) => {
    contents.on('will-navigate', (e) => e.preventDefault()); // one page; in-page routing does not navigate
    contents.on('will-redirect', (e) => e.preventDefault());
    contents.on('will-attach-webview', (e) => e.preventDefault());
    contents.setWindowOpenHandler(() => ({ action: 'deny' }));
  });

  ipcMain.handle('skein:call', async (event, method: unknown, body: unknown): Promise<Envelope> => {
    if (!fromOurWindow(event)) return refused('Refused: this request did not come from the Skein window.');
    if (typeof method !== 'string') return refused('A request needs a method name.');
    const env = await call(method, body);
    const study = (body as { study?: unknown } | null)?.study;
    if (env.ok && method === 'study.summary' && typeof study === 'string') {
      currentStudy = path.resolve(study);
      save(withRecentStudy(state, currentStudy));
    }
    return env;
  });

  ipcMain.on('skein:drop', (event, paths: unknown) => {
    if (!fromOurWindow(event) || !Array.isArray(paths)) return;
    for (const p of paths.slice(0, 32)) if (typeof p === 'string' && p.length > 0) openPath(p);
  });

  app.on('second-instance', (_e, argv) => {
    if (win) { if (win.isMinimized()) win.restore(); win.focus(); }
    for (const p of pathsFromArgv(argv, app.isPackaged)) openPath(p);
  });
  app.on('open-file', (e, file) => { e.preventDefault(); openPath(file); }); // macOS: Finder, dock
  app.on('window-all-closed', () => { if (process.platform !== 'darwin') app.quit(); });
  app.on('activate', () => { if (app.isReady() && !win) createWindow(); });
  app.on('before-quit', () => engine?.stop());

  void app.whenReady().then(() => {
    const native = findElectronSqlite({ modules: process.versions.modules, platform: process.platform, arch: process.arch, electron: process.versions.electron });
    if ('problem' in native) {
      process.stderr.write(`${native.problem}\n`);
      dialog.showErrorBox('Skein cannot open study files yet', native.problem);
      app.quit();
      return;
    }
    nativeTheme.themeSource = state.theme;
    lockDown();
    startEngine(native.binding);
    rebuildMenu();
    createWindow();
    for (const p of pathsFromArgv(process.argv, app.isPackaged)) openPath(p);
  });
}

if (app.requestSingleInstanceLock()) runShell();
else app.quit(); // the running Skein gets our command line through 'second-instance'
