/** The native menu as a template (type-only electron import, so it is built and checked under Node). */
import path from 'node:path';
import type { MenuItemConstructorOptions } from 'electron';
import type { Theme } from './state.ts';

export interface MenuActions {
  openModel(): void;
  openProbes(): void;
  openStudy(): void;
  saveStudyAs(): void;
  openRecent(study: string): void;
  clearRecent(): void;
  setTheme(theme: Theme): void;
}

export interface MenuState {
  platform: NodeJS.Platform;
  recentStudies: string[];
  theme: Theme;
  /** A study is open, so there is something to save under a new name. */
  canSave: boolean;
  /** Unpackaged: offer the developer tools. */
  dev: boolean;
}

export function menuTemplate(s: MenuState, a: MenuActions): MenuItemConstructorOptions[] {
  const mac = s.platform === 'darwin';
  const recent: MenuItemConstructorOptions[] = s.recentStudies.length === 0
    ? [{ label: 'No recent studies', enabled: false }]
    : [
      ...s.recentStudies.map((file): MenuItemConstructorOptions => ({ label: `${path.basename(file)}  —  ${path.dirname(file)}`, click: () => a.openRecent(file) })),
      { type: 'separator' },
      { label: 'Clear list', click: () => a.clearRecent() },
    ];
  const theme = (value: Theme, label: string): MenuItemConstructorOptions => ({ label, type: 'radio', checked: s.theme === value, click: () => a.setTheme(value) });
  return [
    ...(mac ? [{ role: 'appMenu' } as MenuItemConstructorOptions] : []),
    {
      label: '&File',
      submenu: [
        { label: 'Open model…', accelerator: 'CmdOrCtrl+O', click: () => a.openModel() },
        { label: 'Open probe set…', accelerator: 'CmdOrCtrl+Shift+O', click: () => a.openProbes() },
        { label: 'Open study…', accelerator: 'CmdOrCtrl+Alt+O', click: () => a.openStudy() },
        { label: 'Recent studies', submenu: recent },
        { type: 'separator' },
        { label: 'Save study as…', accelerator: 'CmdOrCtrl+Shift+S', enabled: s.canSave, click: () => a.saveStudyAs() },
        { type: 'separator' },
        mac ? { role: 'close' } : { role: 'quit', label: 'Quit' },
      ],
    },
    { role: 'editMenu' },
    {
      label: '&View',
      submenu: [
        theme('system', 'Follow system'), theme('light', 'Light'), theme('dark', 'Dark'),
        { type: 'separator' },
        { role: 'resetZoom' }, { role: 'zoomIn' }, { role: 'zoomOut' },
        { type: 'separator' },
        { role: 'togglefullscreen' },
        ...(s.dev ? [{ type: 'separator' }, { role: 'reload' }, { role: 'toggleDevTools' }] as MenuItemConstructorOptions[] : []),
      ],
    },
    { role: 'windowMenu' },
  ];
}
