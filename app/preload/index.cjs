// @ts-check
// The window's preload: exposes the API door and the "open this" events, nothing else. Plain CommonJS because a
// sandboxed preload can neither be an ES module nor load anything but Electron's renderer modules (so no tsx here).
// window.skein = { call(method, body) → Promise<{ok,value}|{ok:false,error}>, platform: 'electron', onOpen(cb) → unsubscribe }
// onOpen delivers { kind: 'model' | 'probes' | 'study', path } from menus, dialogs, drag-and-drop and the command line.
const { contextBridge, ipcRenderer, webUtils } = require('electron');

/** @type {Set<(item: { kind: string, path: string }) => void>} */
const listeners = new Set();
/** Items that arrived before the page subscribed; handed to the first subscriber. @type {{ kind: string, path: string }[]} */
const early = [];

ipcRenderer.on('skein:open', (_event, item) => {
  if (listeners.size === 0) early.push(item);
  for (const listener of listeners) listener(item);
});

contextBridge.exposeInMainWorld('skein', {
  platform: 'electron',
  /** @param {string} method @param {unknown} body */
  call: (method, body) => ipcRenderer.invoke('skein:call', String(method), body),
  /** @param {(item: { kind: string, path: string }) => void} listener */
  onOpen: (listener) => {
    if (typeof listener !== 'function') throw new TypeError('onOpen needs a function');
    listeners.add(listener);
    for (const item of early.splice(0)) listener(item);
    return () => { listeners.delete(listener); };
  },
});

// Dropped files and folders: their paths go to main, which decides what each one opens as. Without preventDefault the
// page would try to navigate to the file (and main would block it).
window.addEventListener('dragover', (event) => { event.preventDefault(); });
window.addEventListener('drop', (event) => {
  event.preventDefault();
  const files = Array.from(event.dataTransfer?.files ?? []);
  const paths = files.map((file) => webUtils.getPathForFile(file)).filter((p) => typeof p === 'string' && p.length > 0);
  if (paths.length > 0) ipcRenderer.send('skein:drop', paths);
});
